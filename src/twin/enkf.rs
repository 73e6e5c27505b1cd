//! Stochastic ensemble Kalman filter with perturbed readings (Evensen 1994, JGR 99(C5);
//! Burgers, van Leeuwen & Evensen 1998, MWR 126) and multiplicative inflation of the forecast
//! anomalies (Anderson & Anderson 1999, MWR 127). Members advance with the reduced model (the
//! quadratic one by default) plus model error drawn from `Q`; the analysis uses the sample
//! covariance of the inflated forecast ensemble. As the ensemble grows the mean and covariance
//! approach the Kalman filter's on a linear model (Mandel, Cobb & Beezley 2011). A covariance
//! that stops being positive definite or a non-finite member ends the run as a [`Divergence`].

use faer::linalg::solvers::Solve;
use faer::{Mat, Side};
use rand::Rng;
use rand_distr::StandardNormal;

use super::dense::{cholesky_lower, dot};
use super::kalman::{Divergence, NoisyReadings};
use super::schedule::Schedule;
use super::ReducedModel;

/// EnKF settings for one run.
#[derive(Debug, Clone, Copy)]
pub struct EnkfSettings {
    pub n_ensemble: usize,
    /// Factor on the forecast anomalies before each analysis, ≥ 1.
    pub inflation: f64,
    /// Standard deviation of the initial ensemble around the background, per mode.
    pub initial_sd: f64,
}

/// Runs the EnKF from the background `a0`; `on_step(step, mean, members)` after each analysis. `rng` draws the initial ensemble, the model error and the reading perturbations.
#[allow(clippy::too_many_arguments)]
pub fn run_enkf<R: Rng, M: Rng>(
    model: &ReducedModel,
    h_rm: &[f64],
    offset: &[f64],
    noise_var: &[f64],
    schedule: &Schedule,
    settings: &EnkfSettings,
    readings: &mut NoisyReadings<'_, R>,
    member_rng: &mut M,
    a0: &[f64],
    mut on_step: impl FnMut(usize, &[f64], &[Vec<f64>]),
) -> Result<(), Divergence> {
    let n_modes = model.n_modes;
    let n_ens = settings.n_ensemble;
    assert!(n_ens >= 2);
    let q_chol = cholesky_lower(model.q.as_ref()).ok_or_else(|| Divergence {
        step: 0,
        reason: "model-error covariance Q is not positive definite".into(),
    })?;
    let mut members: Vec<Vec<f64>> = (0..n_ens)
        .map(|_| {
            a0.iter()
                .map(|&m| m + settings.initial_sd * member_rng.sample::<f64, _>(StandardNormal))
                .collect()
        })
        .collect();
    let mut forecast = vec![0.0; n_modes];
    let mut quad = vec![0.0; super::model::n_quadratic(n_modes)];
    let mut xi = vec![0.0; n_modes];
    let mut mean = vec![0.0; n_modes];
    let denom = (n_ens - 1) as f64;
    for step in 0..schedule.n_steps() {
        if step > 0 {
            for member in members.iter_mut() {
                model.step_with(member, &mut quad, &mut forecast);
                for v in xi.iter_mut() {
                    *v = member_rng.sample(StandardNormal);
                }
                for i in 0..n_modes {
                    let noise: f64 = (0..=i).map(|j| q_chol[(i, j)] * xi[j]).sum();
                    member[i] = forecast[i] + noise;
                }
            }
        }
        ensemble_mean(&members, &mut mean);
        let rows = schedule.rows_at(step);
        if !rows.is_empty() {
            if settings.inflation > 1.0 {
                for member in members.iter_mut() {
                    for i in 0..n_modes {
                        member[i] = mean[i] + settings.inflation * (member[i] - mean[i]);
                    }
                }
            }
            let n_due = rows.len();
            // Anomalies X (n_modes × n_ens) and their readings HX (n_due × n_ens).
            let x = Mat::from_fn(n_modes, n_ens, |i, e| members[e][i] - mean[i]);
            let hx = Mat::from_fn(n_due, n_ens, |k, e| {
                let row = rows[k];
                dot(
                    &h_rm[row * n_modes..(row + 1) * n_modes],
                    &x.col(e).iter().copied().collect::<Vec<_>>(),
                )
            });
            let mut s = &hx * hx.transpose() * faer::Scale(1.0 / denom);
            for (k, &row) in rows.iter().enumerate() {
                s[(k, k)] += noise_var[row];
            }
            let pht = &x * hx.transpose() * faer::Scale(1.0 / denom); // n_modes × n_due
            let llt = s.llt(Side::Lower).map_err(|_| Divergence {
                step,
                reason: "ensemble innovation covariance is not positive definite".into(),
            })?;
            let z: Vec<f64> = rows
                .iter()
                .map(|&row| readings.reading(step, row))
                .collect();
            // Innovations of every member with its own perturbed reading, as columns.
            let mut d = Mat::<f64>::zeros(n_due, n_ens);
            for (e, member) in members.iter().enumerate() {
                for (k, &row) in rows.iter().enumerate() {
                    let perturbed =
                        z[k] + noise_var[row].sqrt() * member_rng.sample::<f64, _>(StandardNormal);
                    d[(k, e)] = perturbed
                        - offset[row]
                        - dot(&h_rm[row * n_modes..(row + 1) * n_modes], member);
                }
            }
            let w = llt.solve(&d); // S⁻¹ D
            let update = &pht * &w; // n_modes × n_ens
            for (e, member) in members.iter_mut().enumerate() {
                for i in 0..n_modes {
                    member[i] += update[(i, e)];
                }
            }
            ensemble_mean(&members, &mut mean);
        }
        if !mean.iter().all(|v| v.is_finite()) {
            return Err(Divergence {
                step,
                reason: "ensemble is not finite".into(),
            });
        }
        on_step(step, &mean, &members);
    }
    Ok(())
}

fn ensemble_mean(members: &[Vec<f64>], mean: &mut [f64]) {
    mean.iter_mut().for_each(|m| *m = 0.0);
    for member in members {
        for (m, v) in mean.iter_mut().zip(member) {
            *m += v;
        }
    }
    let n = members.len() as f64;
    mean.iter_mut().for_each(|m| *m /= n);
}

/// Trace of the sample covariance of `members` about `mean` (modal units²).
pub fn spread_trace(members: &[Vec<f64>], mean: &[f64]) -> f64 {
    let denom = (members.len() - 1) as f64;
    members
        .iter()
        .map(|m| {
            m.iter()
                .zip(mean)
                .map(|(a, b)| (a - b) * (a - b))
                .sum::<f64>()
        })
        .sum::<f64>()
        / denom
}
