//! The typed error of the `basis` stage. Messages name the offending value and what was
//! expected; [`BasisError::is_bad_input`] tells `cli` whether the user can fix it (exit 2) or it
//! is a failure of the numerics (exit 1).

use crate::io::IoError;

/// Why a basis could not be computed, loaded or used.
#[derive(Debug, thiserror::Error)]
pub enum BasisError {
    /// `--energy` (or `Rank::EnergyFraction`) outside (0, 1] or not a number.
    #[error("energy fraction {found}: expected a number in (0, 1], e.g. 0.99")]
    BadEnergyFraction { found: f64 },
    /// `--modes 0`.
    #[error("number of modes 0: expected at least 1")]
    ZeroModes,
    /// More modes asked than the snapshots can give (centring removes one).
    #[error(
        "asked for {requested} modes but {n_snapshots} snapshots give at most {n_available} \
         (subtracting the mean removes one); ask for at most {n_available} modes"
    )]
    TooManyModes {
        requested: usize,
        n_snapshots: usize,
        n_available: usize,
    },
    /// More modes asked than the data have non-zero energies (repeated or dependent snapshots).
    #[error(
        "asked for {requested} modes but the snapshots have only {n_nonzero} modes with non-zero \
         energy; ask for at most {n_nonzero} modes"
    )]
    TooManyModesForData { requested: usize, n_nonzero: usize },
    /// More modes asked than a precomputed basis file holds.
    #[error("{}: asked for {requested} modes but the file holds {n_in_file}", path.display())]
    TooManyModesInFile {
        requested: usize,
        n_in_file: usize,
        path: std::path::PathBuf,
    },
    /// Fewer than two snapshots: the fluctuation about the mean is zero.
    #[error("{n_snapshots} snapshot(s): at least 2 are needed to form a mean and a fluctuation")]
    TooFewSnapshots { n_snapshots: usize },
    /// Every snapshot equals the mean (a steady field, or all cells solid).
    #[error("the snapshots do not vary in time (total fluctuation energy is 0): no modes exist")]
    NoFluctuation,
    /// Degrees of freedom of the snapshots disagree with points × channels of the domain.
    #[error(
        "snapshots have {found} values per snapshot, expected {expected} \
         ({n_points} points × {n_channels} channels)"
    )]
    DofMismatch {
        found: usize,
        expected: usize,
        n_points: usize,
        n_channels: usize,
    },
    /// The eigen- or singular value decomposition did not converge (a numerical failure).
    #[error("{method} did not converge on the {size} × {size} problem")]
    NoConvergence { method: &'static str, size: usize },
    /// `--memory-limit` is below what the computation must hold at once.
    #[error(
        "--memory-limit {limit_mib:.1} MiB is too small: at least {need_mib:.1} MiB is needed; \
         {detail}"
    )]
    MemoryLimit {
        limit_mib: f64,
        need_mib: f64,
        detail: String,
    },
    /// Reading snapshots or basis files failed.
    #[error(transparent)]
    Io(#[from] IoError),
}

impl BasisError {
    /// `true` when the user can fix the cause (a value, an option or a file).
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, BasisError::NoConvergence { .. })
    }
}
