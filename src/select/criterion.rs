//! The design criteria and [`InfoState`], the posterior of a growing layout in whitened
//! coordinates, updated by low-rank steps.
//!
//! The scaled posterior covariance is kept in factored form `P = I − U Uᵀ` (`U` one column per
//! chosen row): adding a row `b` appends `u = P b / √(1 + bᵀPb)` (Sherman–Morrison), so
//! `bᵀPb = ‖b‖² − ‖Uᵀb‖²` costs O(r·m) and a whole greedy run is O(k·n·r) (Woodbury 1950;
//! the matrix determinant lemma gives the D gain `log det(I + B P Bᵀ)`). The dense scaled
//! information `M = I + Σ BᵀB` is kept beside it for the E criterion, `J = G⁻¹ M G⁻¹`.
//!
//! D = log det J, A = trace J⁻¹ = Σ_i Λ_ii P_ii (to be minimised), E = λ_min(J).
//! Nothing here chooses sensors.

use super::dense::{spd_log_det, symmetric_min_eigenvalue};
use super::problem::Problem;
use super::rows::dot;

/// Which design criterion a layout optimises.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Criterion {
    /// log det J (maximise): volume of the information ellipsoid; 2 × mutual information.
    D,
    /// trace J⁻¹ (minimise): sum of posterior variances of the modal coefficients.
    A,
    /// λ_min(J) (maximise): the worst-observed direction.
    E,
}

impl Criterion {
    pub fn name(self) -> &'static str {
        match self {
            Criterion::D => "D (log det J)",
            Criterion::A => "A (trace J^-1)",
            Criterion::E => "E (min eigenvalue of J)",
        }
    }

    /// Improvement from `before` to `after` (positive = better).
    pub fn improvement(self, before: f64, after: f64) -> f64 {
        match self {
            Criterion::A => before - after,
            Criterion::D | Criterion::E => after - before,
        }
    }
}

/// Posterior of the chosen rows in whitened coordinates.
#[derive(Debug, Clone)]
pub struct InfoState {
    n_modes: usize,
    /// Columns of `U`, stored one after another (`n_u × n_modes`).
    u: Vec<f64>,
    /// `M = I + Σ BᵀB`, row-major, kept only when `track_dense`.
    info: Option<Vec<f64>>,
    /// log det M so far (sum of the D gains).
    log_det_m: f64,
}

impl InfoState {
    /// The prior alone. `track_dense` keeps `M` for the E criterion.
    pub fn new(n_modes: usize, track_dense: bool) -> Self {
        let info = track_dense.then(|| {
            let mut m = vec![0.0; n_modes * n_modes];
            (0..n_modes).for_each(|i| m[i * n_modes + i] = 1.0);
            m
        });
        InfoState {
            n_modes,
            u: Vec::new(),
            info,
            log_det_m: 0.0,
        }
    }

    pub fn n_modes(&self) -> usize {
        self.n_modes
    }

    /// Number of rows absorbed so far (columns of `U`).
    pub fn n_u(&self) -> usize {
        self.u.len() / self.n_modes
    }

    /// All columns of `U`, one after another (`n_u × n_modes`, row-major).
    pub fn u_all(&self) -> &[f64] {
        &self.u
    }

    /// Column `j` of `U`.
    pub fn u_col(&self, j: usize) -> &[f64] {
        &self.u[j * self.n_modes..(j + 1) * self.n_modes]
    }

    /// `P b` into `out`.
    pub fn apply_p(&self, b: &[f64], out: &mut [f64]) {
        out.copy_from_slice(b);
        for u in self.u.chunks_exact(self.n_modes) {
            let c = dot(u, b);
            for (o, ui) in out.iter_mut().zip(u) {
                *o -= c * ui;
            }
        }
    }

    /// `bᵀ P b`.
    pub fn quad(&self, b: &[f64]) -> f64 {
        let mut q = dot(b, b);
        for u in self.u.chunks_exact(self.n_modes) {
            let c = dot(u, b);
            q -= c * c;
        }
        q
    }

    /// `S = I + B P Bᵀ` for a block of `p` rows (row-major `p × p`), with `P Bᵀ` rows in `pb`.
    fn block_s(&self, block: &[f64], pb: &mut Vec<f64>) -> (Vec<f64>, usize) {
        let r = self.n_modes;
        let p = block.len() / r;
        pb.resize(p * r, 0.0);
        for i in 0..p {
            self.apply_p(&block[i * r..(i + 1) * r], &mut pb[i * r..(i + 1) * r]);
        }
        let mut s = vec![0.0; p * p];
        for i in 0..p {
            for j in 0..=i {
                let v = dot(&block[i * r..(i + 1) * r], &pb[j * r..(j + 1) * r]);
                s[i * p + j] = v + if i == j { 1.0 } else { 0.0 };
                s[j * p + i] = s[i * p + j];
            }
        }
        (s, p)
    }

    /// D gain `log det(I + B P Bᵀ)` of adding a block (row-major rows).
    pub fn d_gain(&self, block: &[f64]) -> f64 {
        let r = self.n_modes;
        if block.len() == r {
            return self.quad(block).max(0.0).ln_1p();
        }
        let mut pb = Vec::new();
        let (s, p) = self.block_s(block, &mut pb);
        spd_log_det(&s, p).unwrap_or(0.0).max(0.0)
    }

    /// Decrease of trace J⁻¹ = Σ Λ_ii P_ii from adding a block:
    /// `trace(S⁻¹ (P Bᵀ)ᵀ Λ (P Bᵀ))` (Woodbury).
    pub fn a_reduction(&self, block: &[f64], prior_var: &[f64]) -> f64 {
        let r = self.n_modes;
        let p = block.len() / r;
        let mut pb = vec![0.0; p * r];
        for i in 0..p {
            self.apply_p(&block[i * r..(i + 1) * r], &mut pb[i * r..(i + 1) * r]);
        }
        a_reduction_from(block, &pb, prior_var)
    }

    /// Absorbs a block (row-major rows); returns its D gain.
    pub fn add_block(&mut self, block: &[f64]) -> f64 {
        let r = self.n_modes;
        let mut gain = 0.0;
        let mut w = vec![0.0; r];
        for row in block.chunks_exact(r) {
            self.apply_p(row, &mut w);
            let q = dot(row, &w).max(0.0);
            gain += q.ln_1p();
            let scale = 1.0 / (1.0 + q).sqrt();
            self.u.extend(w.iter().map(|v| v * scale));
            if let Some(m) = self.info.as_mut() {
                for i in 0..r {
                    for j in 0..r {
                        m[i * r + j] += row[i] * row[j];
                    }
                }
            }
        }
        self.log_det_m += gain;
        gain
    }

    /// log det(G J G) = log det(I + Σ BᵀB).
    pub fn log_det_scaled(&self) -> f64 {
        self.log_det_m
    }

    /// trace J⁻¹ = Σ_i Λ_ii P_ii.
    pub fn trace_cov(&self, prior_var: &[f64]) -> f64 {
        let r = self.n_modes;
        let mut diag = vec![1.0; r];
        for u in self.u.chunks_exact(r) {
            for (d, ui) in diag.iter_mut().zip(u) {
                *d -= ui * ui;
            }
        }
        diag.iter()
            .zip(prior_var)
            .map(|(d, l)| l * d.max(0.0))
            .sum()
    }

    /// The unscaled information `J = G⁻¹ M G⁻¹`, row-major (needs `track_dense`).
    pub fn information(&self, prior_var: &[f64]) -> Vec<f64> {
        let r = self.n_modes;
        let m = self
            .info
            .as_ref()
            .expect("InfoState built with track_dense");
        let mut j = m.clone();
        for a in 0..r {
            for b in 0..r {
                j[a * r + b] /= (prior_var[a] * prior_var[b]).sqrt();
            }
        }
        j
    }

    /// Value of `criterion` for the rows absorbed so far.
    pub fn value(&self, criterion: Criterion, problem: &Problem) -> f64 {
        match criterion {
            Criterion::D => problem.log_det_prior_inv + self.log_det_m,
            Criterion::A => self.trace_cov(&problem.prior_var),
            Criterion::E => {
                let j = self.information(&problem.prior_var);
                symmetric_min_eigenvalue(&j, self.n_modes).unwrap_or(f64::NAN)
            }
        }
    }
}

/// Criterion value of the layout made of `blocks` (plus nothing else), computed from scratch.
pub fn evaluate_set(problem: &Problem, blocks: &[usize], criterion: Criterion) -> f64 {
    let mut state = InfoState::new(problem.n_modes(), criterion == Criterion::E);
    for &b in blocks {
        state.add_block(problem.rows.block(b));
    }
    state.value(criterion, problem)
}

/// Decrease of trace J⁻¹ from adding a block of `p` rows `B` (row-major), given the rows of
/// `P Bᵀ` in `pb`: for one row the Sherman–Morrison form `‖Λ^{1/2} P b‖² / (1 + bᵀ P b)`, for
/// `p` rows `trace(S⁻¹ (P Bᵀ)ᵀ Λ (P Bᵀ))` with the `p × p` matrix `S = I + B P Bᵀ`
/// (Woodbury) — never an `r × r` factorisation.
pub(super) fn a_reduction_from(block: &[f64], pb: &[f64], prior_var: &[f64]) -> f64 {
    let r = prior_var.len();
    let p = block.len() / r;
    if p == 1 {
        let q = dot(block, pb).max(0.0);
        let w: f64 = pb.iter().zip(prior_var).map(|(x, l)| l * x * x).sum();
        return w / (1.0 + q);
    }
    let mut s = vec![0.0; p * p];
    for i in 0..p {
        for j in 0..=i {
            let v = dot(&block[i * r..(i + 1) * r], &pb[j * r..(j + 1) * r]);
            s[i * p + j] = v + if i == j { 1.0 } else { 0.0 };
            s[j * p + i] = s[i * p + j];
        }
    }
    let Some(s_inv) = super::dense::spd_inverse(&s, p) else {
        return 0.0;
    };
    let mut total = 0.0;
    for i in 0..p {
        for j in 0..p {
            let w: f64 = (0..r)
                .map(|m| prior_var[m] * pb[i * r + m] * pb[j * r + m])
                .sum();
            total += s_inv[i * p + j] * w;
        }
    }
    total.max(0.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::select::dense::spd_inverse;

    fn rows(seed: u64, n: usize, r: usize) -> Vec<f64> {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        (0..n * r).map(|_| rng.random_range(-1.0..1.0)).collect()
    }

    /// Dense reference: M = I + Σ BᵀB, P = M⁻¹ (textbook, no low-rank updates).
    fn dense_m(data: &[f64], r: usize) -> Vec<f64> {
        let mut m = vec![0.0; r * r];
        (0..r).for_each(|i| m[i * r + i] = 1.0);
        for row in data.chunks_exact(r) {
            for i in 0..r {
                for j in 0..r {
                    m[i * r + j] += row[i] * row[j];
                }
            }
        }
        m
    }

    #[test]
    fn low_rank_updates_match_dense_inverse() {
        for (r, n_rows) in [(1usize, 3usize), (3, 2), (5, 7), (8, 20)] {
            let data = rows(r as u64, n_rows, r);
            let mut state = InfoState::new(r, true);
            for row in data.chunks_exact(r) {
                state.add_block(row);
            }
            let m = dense_m(&data, r);
            let p = spd_inverse(&m, r).unwrap();
            let ld = crate::select::dense::spd_log_det(&m, r).unwrap();
            assert!((state.log_det_scaled() - ld).abs() < 1e-10 * (1.0 + ld.abs()));
            let probe = rows(99, 1, r);
            let want: f64 = (0..r)
                .map(|i| {
                    (0..r)
                        .map(|j| probe[i] * p[i * r + j] * probe[j])
                        .sum::<f64>()
                })
                .sum();
            assert!((state.quad(&probe) - want).abs() < 1e-10 * (1.0 + want));
            let lambda: Vec<f64> = (0..r).map(|i| 1.0 + i as f64).collect();
            let trace: f64 = (0..r).map(|i| lambda[i] * p[i * r + i]).sum();
            assert!((state.trace_cov(&lambda) - trace).abs() < 1e-10 * trace);
        }
    }

    #[test]
    fn block_gains_match_sequential_absorption() {
        let r = 6;
        let base = rows(1, 4, r);
        let block = rows(2, 3, r);
        let lambda: Vec<f64> = (0..r).map(|i| 0.5 + i as f64).collect();
        let mut state = InfoState::new(r, false);
        state.add_block(&base);
        let d = state.d_gain(&block);
        let a = state.a_reduction(&block, &lambda);
        let trace_before = state.trace_cov(&lambda);
        let mut after = state.clone();
        let gain = after.add_block(&block);
        assert!((d - gain).abs() < 1e-10);
        assert!((a - (trace_before - after.trace_cov(&lambda))).abs() < 1e-10);
        // Single-row shortcut agrees with the block formula.
        let row = &block[..r];
        let mut pb = Vec::new();
        let (s, _) = state.block_s(row, &mut pb);
        assert!((state.d_gain(row) - s[0].ln()).abs() < 1e-12);
    }
}
