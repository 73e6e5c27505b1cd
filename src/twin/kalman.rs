//! Filters whose gains do not depend on the readings: the Kalman filter on the linear model
//! (Kalman 1960; covariance in Joseph form, Bucy & Joseph 1968), optimal interpolation with a
//! static background covariance (Gandin 1963; Daley 1991, "Atmospheric Data Analysis", ch. 4)
//! and linear nudging (gains from [`super::nudge`]). Because the covariance and gain sequence of
//! a linear filter is fixed by the model, the noise levels and the schedule, [`GainSequence`] is
//! computed once per layout and setting and shared by every Monte Carlo run; a run only applies
//! `a ← a⁻ + K_t (z_t − offset − H a⁻)`. A covariance that stops being positive definite ends
//! the sequence at that step (all runs report the divergence there); it is never a panic.

use faer::{Mat, MatRef};
use rand::Rng;
use rand_distr::StandardNormal;

use super::dense::{cholesky_lower, col_major, dot, joseph_update, kalman_gain, symmetrize};
use super::schedule::Schedule;
use super::ReducedModel;

/// A filter run that stopped: the step and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Divergence {
    pub step: usize,
    pub reason: String,
}

/// Gains per test step, shared by all runs.
#[derive(Debug, Clone)]
pub struct GainSequence {
    pub n_modes: usize,
    /// Per step, the index into `gains` applied after the forecast, or `None`.
    pub step_gain: Vec<Option<usize>>,
    /// Column-major `n_modes × n_rows_due` gains; the rows are those of the step's pattern.
    pub gains: Vec<Vec<f64>>,
    /// Per step, the trace of the analysis covariance (Kalman only; modal units²).
    pub posterior_trace: Option<Vec<f64>>,
    /// Forecast (prior) and analysis covariances per step, when asked for (tests).
    pub prior: Vec<Mat<f64>>,
    pub posterior: Vec<Mat<f64>>,
    /// Set when the covariance broke down; runs stop at that step.
    pub divergence: Option<Divergence>,
}

/// Kalman gains for the linear model over `schedule`, from the initial covariance `p0`.
/// `noise_var` is per sensor row (already scaled). `keep_covariances` stores every prior and
/// posterior covariance (memory `2 · n_steps · n_modes²`).
pub fn kalman_gains(
    model: &ReducedModel,
    h: MatRef<'_, f64>,
    noise_var: &[f64],
    schedule: &Schedule,
    p0: MatRef<'_, f64>,
    keep_covariances: bool,
) -> GainSequence {
    assert!(
        model.f.is_none(),
        "the Kalman filter needs the linear model"
    );
    let n_modes = model.n_modes;
    let n_steps = schedule.n_steps();
    let mut out = GainSequence {
        n_modes,
        step_gain: vec![None; n_steps],
        gains: Vec::new(),
        posterior_trace: Some(vec![f64::NAN; n_steps]),
        prior: Vec::new(),
        posterior: Vec::new(),
        divergence: None,
    };
    let mut p = p0.to_owned();
    for step in 0..n_steps {
        if step > 0 {
            p = &model.a * &p * model.a.transpose() + &model.q;
            symmetrize(&mut p);
        }
        if keep_covariances {
            out.prior.push(p.clone());
        }
        let rows = schedule.rows_at(step);
        if !rows.is_empty() {
            let h_due = Mat::from_fn(rows.len(), n_modes, |i, j| h[(rows[i], j)]);
            let r_due: Vec<f64> = rows.iter().map(|&i| noise_var[i]).collect();
            match kalman_gain(p.as_ref(), h_due.as_ref(), &r_due) {
                Some(k) => {
                    p = joseph_update(p.as_ref(), k.as_ref(), h_due.as_ref(), &r_due);
                    out.step_gain[step] = Some(out.gains.len());
                    out.gains.push(col_major(k.as_ref()));
                }
                None => {
                    out.divergence = Some(Divergence {
                        step,
                        reason: "innovation covariance H P Hᵀ + R is not positive definite".into(),
                    });
                    break;
                }
            }
        }
        let trace: f64 = (0..n_modes).map(|i| p[(i, i)]).sum();
        if !trace.is_finite() {
            out.divergence = Some(Divergence {
                step,
                reason: "covariance is not finite".into(),
            });
            break;
        }
        // Checked once per step of the shared sequence (not per run): a Cholesky factor.
        if cholesky_lower(p.as_ref()).is_none() {
            out.divergence = Some(Divergence {
                step,
                reason: "covariance P is no longer positive definite".into(),
            });
            break;
        }
        if let Some(tr) = out.posterior_trace.as_mut() {
            tr[step] = trace;
        }
        if keep_covariances {
            out.posterior.push(p.clone());
        }
    }
    out
}

/// Static gains, one per reporting pattern: `gain_for(rows)` returns the `n_modes × n_rows`
/// gain for the given rows (OI, nudging; `filter` names it in messages). `None` from
/// `gain_for` marks divergence.
pub fn static_gains(
    n_modes: usize,
    schedule: &Schedule,
    filter: &str,
    mut gain_for: impl FnMut(&[usize]) -> Option<Mat<f64>>,
) -> GainSequence {
    let n_steps = schedule.n_steps();
    let mut out = GainSequence {
        n_modes,
        step_gain: vec![None; n_steps],
        gains: Vec::with_capacity(schedule.patterns.len()),
        posterior_trace: None,
        prior: Vec::new(),
        posterior: Vec::new(),
        divergence: None,
    };
    for pattern in &schedule.patterns {
        match gain_for(pattern) {
            Some(k) => out.gains.push(col_major(k.as_ref())),
            None => {
                let first = schedule
                    .step_pattern
                    .iter()
                    .position(|p| p.is_some())
                    .unwrap_or(0);
                out.divergence = Some(Divergence {
                    step: first,
                    reason: if filter == "nudging" {
                        "nudging gain: the sensors read none of the modes (Hᵀ R⁻¹ H is zero or not finite)".into()
                    } else {
                        format!("{filter} gain: H B Hᵀ + R is not positive definite")
                    },
                });
                return out;
            }
        }
    }
    out.step_gain = schedule.step_pattern.clone();
    out
}

/// Optimal-interpolation gain `K = B Hᵀ (H B Hᵀ + R)⁻¹` for the rows `rows`.
pub fn oi_gain(
    b: MatRef<'_, f64>,
    h: MatRef<'_, f64>,
    noise_var: &[f64],
    rows: &[usize],
) -> Option<Mat<f64>> {
    let h_due = Mat::from_fn(rows.len(), h.ncols(), |i, j| h[(rows[i], j)]);
    let r_due: Vec<f64> = rows.iter().map(|&i| noise_var[i]).collect();
    kalman_gain(b, h_due.as_ref(), &r_due)
}

/// Readings of one run: the noise-free truth readings (row-major `n_steps × n_rows`) plus
/// Gaussian noise of standard deviation `noise_sd` per row, drawn in step then row order.
pub struct NoisyReadings<'a, R: Rng> {
    pub truth: &'a [f64],
    pub n_rows: usize,
    pub noise_sd: &'a [f64],
    pub rng: R,
}

impl<R: Rng> NoisyReadings<'_, R> {
    #[inline]
    pub fn reading(&mut self, step: usize, row: usize) -> f64 {
        let z: f64 = self.rng.sample(StandardNormal);
        self.truth[step * self.n_rows + row] + self.noise_sd[row] * z
    }
}

/// Runs a filter with precomputed gains from `a0`, calling `on_step(step, estimate)` after each
/// analysis. `h_rm` is the row-major `n_rows × n_modes` sensor matrix.
#[allow(clippy::too_many_arguments)]
pub fn run_with_gains<R: Rng>(
    model: &ReducedModel,
    h_rm: &[f64],
    offset: &[f64],
    schedule: &Schedule,
    gains: &GainSequence,
    readings: &mut NoisyReadings<'_, R>,
    a0: &[f64],
    mut on_step: impl FnMut(usize, &[f64]),
) -> Result<(), Divergence> {
    let n_modes = model.n_modes;
    let mut state = a0.to_vec();
    let mut forecast = vec![0.0; n_modes];
    let mut quad = vec![0.0; super::model::n_quadratic(n_modes)];
    let mut innovation = Vec::with_capacity(offset.len());
    for step in 0..schedule.n_steps() {
        if let Some(d) = &gains.divergence {
            if d.step == step {
                return Err(d.clone());
            }
        }
        if step > 0 {
            model.step_with(&state, &mut quad, &mut forecast);
            std::mem::swap(&mut state, &mut forecast);
        }
        if let Some(g) = gains.step_gain[step] {
            let rows = schedule.rows_at(step);
            innovation.clear();
            for &row in rows {
                let z = readings.reading(step, row);
                innovation
                    .push(z - offset[row] - dot(&h_rm[row * n_modes..(row + 1) * n_modes], &state));
            }
            super::dense::gemv_add(&gains.gains[g], &innovation, &mut state);
        }
        if !state.iter().all(|v| v.is_finite()) {
            return Err(Divergence {
                step,
                reason: "state is not finite".into(),
            });
        }
        on_step(step, &state);
    }
    Ok(())
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::twin::schedule::SensorRows;

    /// Scalar random walk x' = x + w (var q), z = x + v (var r): the filter's posterior variance
    /// and gain converge to the closed-form steady state P = (q + √(q² + 4qr))/2 (prior),
    /// K = P/(P + r) — textbook result (e.g. Simon 2006, "Optimal State Estimation", §5.4
    /// steady-state filtering; from memory). q = 1e-5, r = 1e-2 → P = 3.212673e-4,
    /// K = 3.112673e-2 (values stated in the issue, recomputed here from the formula).
    #[test]
    fn scalar_random_walk_reaches_closed_form_steady_state() {
        let (q, r): (f64, f64) = (1e-5, 1e-2);
        let p_closed = (q + (q * q + 4.0 * q * r).sqrt()) / 2.0;
        let k_closed = p_closed / (p_closed + r);
        assert!((p_closed - 3.212673e-4).abs() < 1e-10);
        assert!((k_closed - 3.112673e-2).abs() < 1e-8);
        let model =
            ReducedModel::from_operators(faer::mat![[1.0]], None, vec![0.0], faer::mat![[q]]);
        let rows = SensorRows::new(
            faer::mat![[1.0]],
            vec![0.0],
            vec![r.sqrt()],
            vec![1.0],
            vec!["k".into()],
        );
        let schedule = Schedule::new(&rows, 1.0, 3000, None).unwrap();
        let gains = kalman_gains(
            &model,
            rows.h.as_ref(),
            &[r],
            &schedule,
            faer::mat![[1.0]].as_ref(),
            true,
        );
        assert!(gains.divergence.is_none());
        let last = schedule.n_steps() - 1;
        let prior = gains.prior[last][(0, 0)];
        let k = gains.gains[gains.step_gain[last].unwrap()][0];
        assert!(
            (prior - p_closed).abs() <= 1e-12 + 1e-9 * p_closed,
            "{prior} vs {p_closed}"
        );
        assert!(
            (k - k_closed).abs() <= 1e-12 + 1e-9 * k_closed,
            "{k} vs {k_closed}"
        );
    }
}
