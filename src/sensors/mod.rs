//! `sensors` owns the measurement operators: for every candidate mount × allowed sensor kind a
//! [`Block`] — the rows `H_c` that one reading returns in modal coordinates, the mean-field
//! offset and the noise variances `R_c` (diagonal).
//!
//! Plan (not built yet): point kinds by bilinear interpolation on grids and inverse distance on
//! point clouds; beam kinds (pulsed Doppler lidar) as line-of-sight velocity at range gates with
//! a range-weighting function, stopped by solids, obstacles and the domain edge.

/// What one sensor of one kind at one candidate mount reads, in modal coordinates:
/// `reading = offset + h · a + noise`, `a` the modal coefficients, noise ~ N(0, diag(noise_var)).
#[derive(Debug, Clone)]
pub struct Block {
    pub candidate_idx: usize,
    pub kind_idx: usize,
    /// `n_rows × n_modes`: `h[(row, mode)] = Σ_(dof, w) ∈ stencil[row] w · modes[(dof, mode)]`.
    pub h: faer::Mat<f64>,
    /// Per row, the field degrees of freedom it reads and their weights, so a reading can be
    /// taken from a full field (truth) and not only from its modal projection.
    pub stencil: Vec<Vec<(usize, f64)>>,
    /// Mean-field reading of each row.
    pub offset: Vec<f64>,
    /// Noise variance of each row, > 0.
    pub noise_var: Vec<f64>,
    /// Kind cost plus the candidate's mounting cost.
    pub cost: f64,
}

impl Block {
    pub fn n_rows(&self) -> usize {
        self.h.nrows()
    }
}
