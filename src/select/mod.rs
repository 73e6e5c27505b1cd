//! `select` owns the choice of sensors: criteria on the posterior information
//! `J = Λ⁻¹ + Σ_c H_cᵀ R_c⁻¹ H_c` and the methods that rank candidate blocks into a [`Layout`].
//!
//! Plan (not built yet): D/A/E criteria with an energy or flat prior; pivoted QR with group
//! pivoting; lazy greedy with low-rank updates; budgeted cost-benefit greedy with the
//! best-single guard; exchange refinement; the convex-relaxation bound of Joshi & Boyd (2009);
//! random and evenly spaced baselines; spacing, zone, kind, keep and removal constraints.

/// One chosen sensor of a ranked layout.
#[derive(Debug, Clone)]
pub struct LayoutEntry {
    /// 1-based position in the ranking.
    pub rank: usize,
    pub candidate_idx: usize,
    pub kind_idx: usize,
    /// Criterion improvement this sensor brought when it was added.
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
