//! `basis` owns the reduced-order description of the flow: the mean field and the POD modes,
//! orthonormal in the weighted inner product `⟨f, g⟩ = Σ_p w_p Σ_c f_pc g_pc` (cell weights
//! `w_p` from the domain, 0 on solid cells), with the energy of every mode.
//!
//! Plan (not built yet): POD by the method of snapshots (Sirovich 1987) with the Gram matrix
//! accumulated block by block from an `io::SnapshotSource`, and by thin SVD (faer); rank by
//! energy fraction or a fixed count. It reads no files itself and prints nothing.

/// Mean field and POD modes of a site.
#[derive(Debug, Clone)]
pub struct Basis {
    pub n_points: usize,
    pub n_channels: usize,
    /// Temporal mean of the snapshots, length `n_points * n_channels` (field layout of `io`).
    pub mean: Vec<f64>,
    /// Modes as columns, `n_dof × n_modes`, orthonormal in the weighted inner product.
    pub modes: faer::Mat<f64>,
    /// Energy (variance of the modal coefficient, field units² · weight) of every computed
    /// mode, descending; at least `n_modes` long, so truncated energy stays known.
    pub energies: Vec<f64>,
    /// Cell weight per point, as used for the inner product.
    pub weights: Vec<f64>,
}

impl Basis {
    pub fn n_modes(&self) -> usize {
        self.modes.ncols()
    }

    pub fn n_dof(&self) -> usize {
        self.n_points * self.n_channels
    }
}
