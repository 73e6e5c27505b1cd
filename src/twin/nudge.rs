//! Linear nudging (Newtonian relaxation; Hoke & Anthes 1976, MWR 104) in modal coordinates,
//! with the observation-space gain of Auroux & Blum (2005, "Back and forth nudging algorithm for
//! data assimilation problems", C. R. Acad. Sci. Paris I 340): after each forecast the state is
//! pulled towards the readings by `a ← a + γ α Hᵀ R⁻¹ (z − offset − H a)`, a gradient step on the
//! reading misfit. `α = 1 / λ_max(Hᵀ R⁻¹ H)` makes γ ∈ (0, 1] a fraction of the largest stable
//! step, so poorly observed modes get small corrections instead of amplified noise. The strength
//! γ is set, or tuned on the training span (`montecarlo::tune_nudging`): the minimiser of the
//! nudged runs' error relative to the free run over several training windows (a log-spaced grid
//! refined by Brent's method, argmin `BrentOpt`; Brent 1973), then the weakest γ within one
//! standard error of that minimum (argmin `BrentRoot`), since a gain too strong for a calm spell
//! costs more than one slightly too weak.

use argmin::core::{CostFunction, Error as ArgminError, Executor, State};
use argmin::solver::brent::{BrentOpt, BrentRoot};
use faer::{Mat, MatRef, Side};

use super::TwinError;

/// Lower end of the tuned strength: below this nudging is indistinguishable from the free run.
pub const MIN_TUNED_STRENGTH: f64 = 0.001;

/// The strengths tried before refinement: 10 log-spaced values from [`MIN_TUNED_STRENGTH`]
/// to 1 (1, 2 and 5 per decade), the fixed strengths a user would try by hand.
pub fn strength_grid() -> Vec<f64> {
    let mut out = Vec::new();
    for decade in [1e-3, 1e-2, 1e-1] {
        for m in [1.0, 2.0, 5.0] {
            out.push(m * decade);
        }
    }
    out.push(1.0);
    out
}

/// Nudging gain `γ α Hᵀ R⁻¹` for the rows `rows`, `α = 1/λ_max(Hᵀ R⁻¹ H)`; `None` when the
/// rows read nothing of the modes (λ_max = 0) or the eigenvalues fail.
pub fn nudging_gain(
    h: MatRef<'_, f64>,
    noise_var: &[f64],
    rows: &[usize],
    strength: f64,
) -> Option<Mat<f64>> {
    let n_modes = h.ncols();
    let ht_rinv = Mat::from_fn(n_modes, rows.len(), |i, k| {
        h[(rows[k], i)] / noise_var[rows[k]]
    });
    let h_due = Mat::from_fn(rows.len(), n_modes, |k, j| h[(rows[k], j)]);
    let info = &ht_rinv * &h_due;
    let lambda_max = info
        .self_adjoint_eigenvalues(Side::Lower)
        .ok()?
        .into_iter()
        .fold(0.0_f64, f64::max);
    if !(lambda_max > 0.0 && lambda_max.is_finite()) {
        return None;
    }
    Some(ht_rinv * faer::Scale(strength / lambda_max))
}

struct StrengthCost<'a> {
    objective: &'a (dyn Fn(f64) -> f64 + Sync),
}

impl CostFunction for StrengthCost<'_> {
    type Param = f64;
    type Output = f64;

    fn cost(&self, strength: &f64) -> Result<f64, ArgminError> {
        let value = (self.objective)(*strength);
        // A diverged trial run counts as very bad, so Brent moves away from it.
        Ok(if value.is_finite() {
            value
        } else {
            f64::MAX / 4.0
        })
    }
}

/// Minimiser of `objective` in `[lo, hi]` (Brent, at most 40 iterations, tolerance 1e-3
/// absolute on the argument).
pub fn tune_strength(
    objective: &(dyn Fn(f64) -> f64 + Sync),
    lo: f64,
    hi: f64,
) -> Result<f64, TwinError> {
    if lo.is_nan() || hi.is_nan() || lo >= hi {
        return Ok(lo);
    }
    let solver = BrentOpt::new(lo, hi).set_tolerance(1e-3, 1e-3);
    let result = Executor::new(StrengthCost { objective }, solver)
        .configure(|state| state.max_iters(40))
        .run()
        .map_err(|e| TwinError::Numerical(format!("tuning the nudging strength: {e}")))?;
    let best = *result.state().get_best_param().unwrap_or(&lo);
    Ok(best.clamp(lo, hi))
}

struct Excess<'a> {
    f: &'a (dyn Fn(f64) -> f64 + Sync),
}

impl CostFunction for Excess<'_> {
    type Param = f64;
    type Output = f64;

    fn cost(&self, x: &f64) -> Result<f64, ArgminError> {
        Ok((self.f)(*x))
    }
}

/// A root of `f` in `[lo, hi]` by Brent's method (argmin `BrentRoot`; Brent 1973), tolerance
/// 1e-3 on the argument; `None` unless `f(lo)` and `f(hi)` are finite and of opposite signs.
pub fn crossing(
    f: &(dyn Fn(f64) -> f64 + Sync),
    lo: f64,
    hi: f64,
) -> Result<Option<f64>, TwinError> {
    let (f_lo, f_hi) = (f(lo), f(hi));
    if !(f_lo.is_finite() && f_hi.is_finite()) || f_lo * f_hi > 0.0 {
        return Ok(None);
    }
    let solver = BrentRoot::new(lo, hi, 1e-3);
    let result = Executor::new(Excess { f }, solver)
        .configure(|state| state.max_iters(40))
        .run()
        .map_err(|e| TwinError::Numerical(format!("tuning the nudging strength: {e}")))?;
    // The last iterate, within the tolerance of the crossing (the caller accepts that slack).
    Ok(result.state().get_param().copied())
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn full_strength_step_is_stable_and_reaches_the_most_observed_mode() {
        // With γ = 1 the relaxation I − G H has eigenvalues in [0, 1): along the eigenvector of
        // λ_max the step removes the whole innovation, elsewhere less.
        let h = faer::mat![[2.0, 0.5], [0.0, 1.0]];
        let r = [0.1, 0.4];
        let g = nudging_gain(h.as_ref(), &r, &[0, 1], 1.0).unwrap();
        let m = Mat::<f64>::identity(2, 2) - &g * &h;
        let eig = m.eigenvalues().unwrap();
        let mut moduli: Vec<f64> = eig.iter().map(|z| z.norm()).collect();
        moduli.sort_by(f64::total_cmp);
        assert!(moduli[0].abs() < 1e-12, "{moduli:?}");
        assert!(moduli[1] < 1.0);
    }

    #[test]
    fn crossing_finds_the_root_of_a_line_and_refuses_a_bracket_without_one() {
        let f = |x: f64| 2.0 * x - 1.0;
        let root = crossing(&f, -3.0, 4.0).unwrap().unwrap();
        assert!((root - 0.5).abs() < 2e-3, "{root}");
        assert_eq!(crossing(&f, 1.0, 4.0).unwrap(), None);
    }

    #[test]
    fn brent_finds_the_minimum_of_a_parabola() {
        let f = |g: f64| (g - 0.37) * (g - 0.37) + 1.0;
        let best = tune_strength(&f, MIN_TUNED_STRENGTH, 1.0).unwrap();
        assert!((best - 0.37).abs() < 2e-3, "{best}");
    }
}
