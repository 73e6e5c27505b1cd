//! `basis` owns the reduced-order description of the flow: the mean field and the POD modes,
//! orthonormal in the weighted inner product `⟨f, g⟩_W = Σ_p w_p Σ_c f_pc g_pc` (cell weights
//! `w_p` from the domain, 0 on solid cells), with the energy of every mode.
//!
//! Two routes, selected by [`PodMethod`]: the method of snapshots (Sirovich 1987) with the
//! Gram matrix accumulated block by block from an [`io::SnapshotSource`] (see
//! [`snapshots_method`]), and the thin SVD of the weighted, centred snapshot matrix (see
//! [`svd_method`]). Truncation by [`Rank`]. Energies are `λ_i = σ_i² / T`: the variance over
//! the `T` snapshots of the modal coefficient `a_i(t) = ⟨φ_i, x_t − x̄⟩_W` (population
//! variance, divided by `T`), in field units² × weight units (m² or m³).
//!
//! [`project`] and [`project_field`] give modal coefficients and truncation residuals for later
//! stages. It reads no files itself (sources and basis files come from `io`), prints nothing,
//! and reports progress through a callback `progress(done, total)`.
//!
//! [`io::SnapshotSource`]: crate::io::SnapshotSource

pub mod blocks;
pub mod error;
pub mod for_site;
pub mod memory;
pub mod project;
pub mod rank;
pub mod snapshots_method;
pub mod svd_method;
pub mod weights;

pub use error::BasisError;
pub use for_site::{compute_for_site, compute_for_site_with_warnings};
pub use project::{project, project_field, Projection};
pub use rank::{energy_fractions, Rank};

use faer::Par;

use crate::io::SnapshotSource;

/// Mean field and POD modes of a site.
#[derive(Debug, Clone)]
pub struct Basis {
    pub n_points: usize,
    pub n_channels: usize,
    /// Temporal mean of the snapshots, length `n_points * n_channels` (field layout of `io`).
    pub mean: Vec<f64>,
    /// Modes as columns, `n_dof × n_modes`, orthonormal in the weighted inner product.
    /// Zero on solid cells. Sign convention: each mode's entry of largest magnitude is positive.
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

    /// Sum of all known energies (kept and truncated).
    pub fn total_energy(&self) -> f64 {
        self.energies.iter().sum()
    }

    /// Fraction of the total energy carried by the kept modes.
    pub fn captured_fraction(&self) -> f64 {
        let total = self.total_energy();
        if total > 0.0 {
            self.energies[..self.n_modes()].iter().sum::<f64>() / total
        } else {
            0.0
        }
    }
}

/// What either POD route returns: temporal mean, kept modes (`n_dof × r`) and the energies
/// of every mode above round-off, descending.
#[derive(Debug, Clone)]
pub struct Decomposition {
    pub mean: Vec<f64>,
    pub modes: faer::Mat<f64>,
    pub energies: Vec<f64>,
}

/// Which decomposition computes the POD.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PodMethod {
    /// Method of snapshots: streams the snapshots twice, memory `O(T² + n_dof · r)`. Default.
    #[default]
    Snapshots,
    /// Thin SVD of the whole weighted snapshot matrix held in memory; most accurate for modes
    /// of very small energy.
    Svd,
}

/// Settings of a POD computation.
#[derive(Debug, Clone, Copy)]
pub struct PodOptions {
    pub method: PodMethod,
    pub rank: Rank,
    /// Degrees of freedom per streamed block; `None` picks about 16 MiB of snapshot data.
    pub block_size: Option<usize>,
    /// Largest memory, in bytes, the decomposition may hold at once ([`memory`]); sets the
    /// block size (overriding `block_size`) and refuses a limit that cannot be met. `None`:
    /// no limit.
    pub memory_limit: Option<u64>,
    /// Parallelism of the dense kernels. The work split (not the pool size) decides the
    /// rounding, so the default fixes it at [`KERNEL_PARTS`]: results are then bit-identical
    /// whatever `RAYON_NUM_THREADS` is.
    pub par: Par,
}

/// Number of parts the dense kernels split their work into, fixed so that results do not
/// depend on the machine's thread count (a split decided by the pool size would).
pub const KERNEL_PARTS: usize = 4;

impl Default for PodOptions {
    fn default() -> Self {
        Self {
            method: PodMethod::default(),
            rank: Rank::default(),
            block_size: None,
            memory_limit: None,
            par: Par::rayon(KERNEL_PARTS),
        }
    }
}

/// POD of the snapshots of `source` on a domain with `point_weights` (one per point, 0 on
/// solid) and `n_channels` channels per point. `progress(done, total)` is called as blocks
/// finish.
pub fn pod(
    source: &mut dyn SnapshotSource,
    point_weights: &[f64],
    n_channels: usize,
    options: &PodOptions,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Basis, BasisError> {
    let n_points = point_weights.len();
    let expected = n_points * n_channels;
    if source.n_dof() != expected {
        return Err(BasisError::DofMismatch {
            found: source.n_dof(),
            expected,
            n_points,
            n_channels,
        });
    }
    let n_snapshots = source.n_snapshots();
    if n_snapshots < 2 {
        return Err(BasisError::TooFewSnapshots { n_snapshots });
    }
    options.rank.validate(n_snapshots)?;
    if let (Some(limit), PodMethod::Svd) = (options.memory_limit, options.method) {
        memory::check_svd(limit, n_snapshots, expected)?;
    }
    let dof_weights = weights::dof_weights(point_weights, n_channels);
    let Decomposition {
        mean,
        modes,
        energies,
    } = match options.method {
        PodMethod::Snapshots => snapshots_method::pod_by_snapshots(
            source,
            &dof_weights,
            options.rank,
            options.block_size,
            options.memory_limit,
            options.par,
            progress,
        )?,
        PodMethod::Svd => svd_method::pod_by_svd(
            source,
            &dof_weights,
            options.rank,
            options.block_size,
            options.par,
            progress,
        )?,
    };
    Ok(Basis {
        n_points,
        n_channels,
        mean,
        modes,
        energies,
        weights: point_weights.to_vec(),
    })
}
