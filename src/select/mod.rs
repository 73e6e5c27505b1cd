//! `select` owns the choice of sensors: criteria on the posterior information
//! `J = Λ⁻¹ + Σ_c H_cᵀ R_c⁻¹ H_c` and the methods that rank candidate blocks into a [`Layout`].
//!
//! Everything works on whitened, prior-scaled rows `B_c = R_c^{-1/2} H_c Λ^{1/2}` stored in one
//! contiguous [`CandidateRows`] matrix, so that `Λ^{1/2} J Λ^{1/2} = I + Σ_c B_cᵀ B_c` and the
//! scaled posterior covariance starts at the identity. Criteria ([`Criterion`]): D = log det J,
//! A = trace J⁻¹ (minimised; its decrease is the gain), E = λ_min(J). Methods ([`Method`]):
//! lazy greedy with low-rank updates (Minoux 1978), budgeted cost-benefit greedy with the
//! best-single guard (Khuller, Moss & Naor 1999; Krause & Guestrin 2005), group-pivoted QR
//! (Businger & Golub 1965), Fedorov (1972) exchange, random and hand-laid grid baselines; every
//! ranking carries the convex-relaxation upper bound of Joshi & Boyd (2009) on log det J and
//! the layout's gap to it.
//!
//! The module reads no files and prints nothing; its refresh kernels use rayon's pool with fixed
//! task cuts (bit-identical for any thread count). The caller turns sensor
//! blocks and site geometry into a [`Problem`] and gets a [`Ranking`] back.

mod baseline;
mod bound;
mod constraints;
mod criterion;
mod dense;
mod exchange;
mod greedy;
mod lazy;
mod pool;
mod problem;
mod qr;
mod rank;
mod rows;
mod site_problem;

pub use bound::{d_upper_bound, d_upper_bound_near, BoundReport};
pub use constraints::{CandidatePlace, Constraints, Feasibility};
pub use criterion::{evaluate_set, Criterion, InfoState};
pub use greedy::{greedy_order, Limit};
pub use problem::{Prior, Problem};
pub use qr::{lazy_pivoted_qr, QrOrder};
pub use rank::{rank, score_order, Method, RankOptions, Ranking};
pub use rows::{CandidateRows, FLAT_PRIOR_EPSILON};
pub use site_problem::{
    places_for_site, prior_from_energies, problem_for_site, problem_for_site_packed,
    site_constraints,
};

/// One chosen sensor of a ranked layout.
#[derive(Debug, Clone)]
pub struct LayoutEntry {
    /// 1-based position in the ranking.
    pub rank: usize,
    pub candidate_idx: usize,
    pub kind_idx: usize,
    /// Criterion improvement this sensor brought when it was added (for A, the decrease of
    /// trace J⁻¹; always ≥ 0 for an improvement).
    pub marginal_gain: f64,
    /// Criterion value after adding this sensor.
    pub cumulative_criterion: f64,
    pub cumulative_cost: f64,
    /// True for a must-keep (existing) sensor.
    pub kept: bool,
}

/// An ordered list of chosen sensors; it can be written, read back and re-scored.
#[derive(Debug, Clone, Default)]
pub struct Layout {
    pub entries: Vec<LayoutEntry>,
}

/// Why a selection could not be made. Every variant is bad input the user can fix.
#[derive(Debug, thiserror::Error)]
pub enum SelectError {
    #[error("no admissible candidate: all {n_candidates} candidates are removed or lie in an exclusion zone")]
    NoAdmissibleCandidates { n_candidates: usize },
    #[error("no free mount left: all {n_open} admissible mounts (outside exclusion zones and removals) already hold kept sensors ({n_kept} kept: the site's existing sensors and --keep), so no new sensor can be placed (the count can be at most 0); keep fewer sensors, or free mounts by changing --remove or the exclusion zones")]
    AllMountsKept { n_open: usize, n_kept: usize },
    #[error("--count {requested} is above the {n_admissible} admissible candidate positions (after exclusion zones, removals and kept sensors); ask for at most {n_admissible}")]
    CountTooLarge {
        requested: usize,
        n_admissible: usize,
    },
    #[error("--count must be at least 1, found 0")]
    CountZero,
    #[error("budget {budget} is below the cheapest admissible sensor ({cheapest}, candidate {candidate} with kind {kind}); raise the budget to at least {cheapest}")]
    BudgetTooSmall {
        budget: f64,
        cheapest: f64,
        candidate: String,
        kind: String,
    },
    #[error("budget must be a finite number ≥ 0, found {0}")]
    BadBudget(f64),
    #[error("kept sensor {candidate} with kind {kind}: {reason}")]
    BadKeep {
        candidate: String,
        kind: String,
        reason: String,
    },
    #[error("measurement rows of candidate {candidate} (kind {kind}) hold NaN or infinite values (row {row}, mode {mode}); the modes or the sensor stencil are broken")]
    NonFiniteRows {
        candidate: String,
        kind: String,
        row: usize,
        mode: usize,
    },
    #[error("noise variance of candidate {candidate} (kind {kind}) row {row} is {value}; expected a finite value > 0")]
    BadNoise {
        candidate: String,
        kind: String,
        row: usize,
        value: f64,
    },
    #[error("prior energy of mode {mode_idx} is {value}; POD energies must be finite and ≥ 0")]
    BadEnergy { mode_idx: usize, value: f64 },
    #[error("the basis has {n_energies} energies but the sensor blocks have {n_modes} modes")]
    EnergyCount { n_energies: usize, n_modes: usize },
    #[error("minimum spacing must be a finite number ≥ 0 m, found {0}")]
    BadSpacing(f64),
    #[error("{option} must be at least 1, found 0")]
    ZeroLimit { option: &'static str },
    #[error("the site has no sensor blocks to choose from")]
    NoBlocks,
}
