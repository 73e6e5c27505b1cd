//! A known synthetic twin case shared by the tests and the benchmark (invented data, not a
//! site): `n_modes` coefficients from a stable linear system with Gaussian forcing, `n_rows`
//! sensor rows with random `H`, and a truncation part that shows up both in the residual and in
//! the readings (so the full-field readings differ from `offset + H a`). Nothing here is used
//! by scoring itself.

use faer::Mat;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

use super::montecarlo::TwinCase;
use super::schedule::SensorRows;

/// Shape and noise of a synthetic case.
#[derive(Debug, Clone)]
pub struct SyntheticSpec {
    pub n_modes: usize,
    pub n_rows: usize,
    pub n_snapshots: usize,
    pub dt_s: f64,
    /// Sampling interval of every row, seconds.
    pub interval_s: f64,
    /// Noise standard deviation of every row.
    pub noise_sd: f64,
    /// Standard deviation of the truncation part of each reading.
    pub truncation_sd: f64,
    pub seed: u64,
}

impl Default for SyntheticSpec {
    fn default() -> Self {
        Self {
            n_modes: 6,
            n_rows: 5,
            n_snapshots: 400,
            dt_s: 1.0,
            interval_s: 1.0,
            noise_sd: 0.2,
            truncation_sd: 0.05,
            seed: 5,
        }
    }
}

fn normal(rng: &mut ChaCha20Rng) -> f64 {
    StandardNormal.sample(rng)
}

/// The linear operator of the synthetic system: 2 × 2 rotation blocks with radius 0.97 and
/// angles 0.05, 0.1, …, and 0.9 on a last odd mode.
pub fn synthetic_operator(n_modes: usize) -> Mat<f64> {
    let mut a = Mat::<f64>::zeros(n_modes, n_modes);
    for blk in 0..n_modes / 2 {
        let (rho, th) = (0.97, 0.05 * (blk + 1) as f64);
        let o = 2 * blk;
        a[(o, o)] = rho * th.cos();
        a[(o, o + 1)] = -rho * th.sin();
        a[(o + 1, o)] = rho * th.sin();
        a[(o + 1, o + 1)] = rho * th.cos();
    }
    if n_modes % 2 == 1 {
        a[(n_modes - 1, n_modes - 1)] = 0.9;
    }
    a
}

/// Builds the case: forcing sd decays as `1/(1 + mode_idx)`; field norm 100.
pub fn synthetic_case(spec: &SyntheticSpec) -> TwinCase {
    let mut rng = ChaCha20Rng::seed_from_u64(spec.seed);
    let (r, p, n) = (spec.n_modes, spec.n_rows, spec.n_snapshots);
    let a_op = synthetic_operator(r);
    let forcing: Vec<f64> = (0..r).map(|i| 0.5 / (1.0 + i as f64)).collect();
    let mut coeffs = Mat::<f64>::zeros(n, r);
    let mut state: Vec<f64> = forcing.iter().map(|f| 3.0 * f * normal(&mut rng)).collect();
    for t in 0..n {
        for j in 0..r {
            coeffs[(t, j)] = state[j];
        }
        let mut next = vec![0.0; r];
        for i in 0..r {
            next[i] = (0..r).map(|j| a_op[(i, j)] * state[j]).sum::<f64>()
                + forcing[i] * normal(&mut rng);
        }
        state = next;
    }
    let h = Mat::from_fn(p, r, |_, _| 0.0);
    let mut h = h;
    for i in 0..p {
        for j in 0..r {
            h[(i, j)] = normal(&mut rng) * 0.3;
        }
    }
    let offset: Vec<f64> = (0..p).map(|i| 5.0 + i as f64 * 0.1).collect();
    let field_norm = 100.0;
    let mut residual_sq = Vec::with_capacity(n);
    let mut truth_readings = Vec::with_capacity(n * p);
    for t in 0..n {
        let mut sq = 0.0;
        for i in 0..p {
            let trunc = spec.truncation_sd * normal(&mut rng);
            sq += trunc * trunc;
            let modal: f64 = (0..r).map(|j| h[(i, j)] * coeffs[(t, j)]).sum();
            truth_readings.push(offset[i] + modal + trunc);
        }
        // Residual energy of the whole field: the sampled rows stand for `field_norm / p` cells each.
        residual_sq.push(sq * field_norm / p as f64);
    }
    let energies: Vec<f64> = (0..r)
        .map(|j| coeffs.col(j).iter().map(|v| v * v).sum::<f64>() / n as f64)
        .collect();
    TwinCase {
        coeffs,
        residual_sq,
        truth_readings,
        rows: SensorRows::new(
            h,
            offset,
            vec![spec.noise_sd; p],
            vec![spec.interval_s; p],
            vec!["synthetic".to_string(); p],
        ),
        energies,
        field_norm,
        dt_s: spec.dt_s,
    }
}
