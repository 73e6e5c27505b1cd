//! Linear nudging (Newtonian relaxation; Hoke & Anthes 1976, MWR 104) in modal coordinates:
//! after each forecast the state is pulled towards the readings by
//! `a ← a + γ G (z − offset − H a)` with `G = (Hᵀ R⁻¹ H + μ I)⁻¹ Hᵀ R⁻¹`, the weighted
//! least-squares map from an innovation to a modal correction (μ = 1e-6 · tr(Hᵀ R⁻¹ H)/r keeps
//! unobserved modes untouched and the solve regular). The strength γ ∈ (0, 1] is set, or
//! tuned by Brent's method (argmin `BrentOpt`; Brent 1973) on the training span, minimising
//! the time-mean field RMSE of a nudged run there.

use argmin::core::{CostFunction, Error as ArgminError, Executor, State};
use argmin::solver::brent::BrentOpt;
use faer::linalg::solvers::Solve;
use faer::{Mat, MatRef, Side};

use super::TwinError;

/// Lower end of the tuned strength: below this nudging is indistinguishable from the free run.
pub const MIN_TUNED_STRENGTH: f64 = 0.01;

/// Nudging gain `γ (Hᵀ R⁻¹ H + μ I)⁻¹ Hᵀ R⁻¹` for the rows `rows`; `None` if singular.
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
    let mut info = &ht_rinv * &h_due;
    let mu = 1e-6 * (0..n_modes).map(|i| info[(i, i)]).sum::<f64>() / n_modes as f64;
    for i in 0..n_modes {
        info[(i, i)] += mu.max(f64::MIN_POSITIVE);
    }
    let llt = info.llt(Side::Lower).ok()?;
    let g = llt.solve(&ht_rinv) * faer::Scale(strength);
    let finite = g.col_iter().all(|c| c.iter().all(|v| v.is_finite()));
    finite.then_some(g)
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

/// Strength in `[MIN_TUNED_STRENGTH, 1]` minimising `objective` (Brent, at most 40 iterations,
/// tolerance 1e-3 absolute on γ).
pub fn tune_strength(objective: &(dyn Fn(f64) -> f64 + Sync)) -> Result<f64, TwinError> {
    let solver = BrentOpt::new(MIN_TUNED_STRENGTH, 1.0).set_tolerance(1e-3, 1e-3);
    let result = Executor::new(StrengthCost { objective }, solver)
        .configure(|state| state.max_iters(40))
        .run()
        .map_err(|e| TwinError::Numerical(format!("tuning the nudging strength: {e}")))?;
    let best = *result.state().get_best_param().unwrap_or(&1.0);
    Ok(best.clamp(MIN_TUNED_STRENGTH, 1.0))
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn full_rank_gain_inverts_the_sensor_matrix() {
        // With H square and invertible, G H = I up to the tiny μ regularisation.
        let h = faer::mat![[2.0, 0.5], [0.0, 1.0]];
        let g = nudging_gain(h.as_ref(), &[0.1, 0.4], &[0, 1], 1.0).unwrap();
        let gh = &g * &h;
        for i in 0..2 {
            for j in 0..2 {
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((gh[(i, j)] - want).abs() < 1e-5, "{:?}", gh);
            }
        }
    }

    #[test]
    fn brent_finds_the_minimum_of_a_parabola() {
        let f = |g: f64| (g - 0.37) * (g - 0.37) + 1.0;
        let best = tune_strength(&f).unwrap();
        assert!((best - 0.37).abs() < 2e-3, "{best}");
    }
}
