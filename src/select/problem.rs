//! [`Problem`]: everything a selection method needs, in the whitened coordinates all of them
//! share — the stacked rows `B_b = R_b^{-1/2} H_b Λ^{1/2}` ([`CandidateRows`]), the
//! candidate and kind of every block, its cost, the prior variances `Λ` and where each
//! candidate sits ([`CandidatePlace`]).
//!
//! With `G = Λ^{1/2}`, `G J G = I + Σ_b B_bᵀ B_b`, so log det J = log det(I + Σ B_bᵀB_b) +
//! log det Λ⁻¹ and the scaled posterior covariance `P = (G J G)⁻¹` starts at `I`. The flat
//! prior `Λ⁻¹ = ε I` (ε from [`FLAT_PRIOR_EPSILON`]) is the same code with a uniform scale.
//! Validation of the numbers (finite rows, positive noise, non-negative energies) happens here,
//! once; the methods assume a valid problem.

use super::constraints::CandidatePlace;
use super::rows::{CandidateRows, FLAT_PRIOR_EPSILON};
use super::SelectError;
use crate::sensors::{Block, PackedBlocks};

/// Prior covariance of the modal coefficients.
#[derive(Debug, Clone)]
pub enum Prior {
    /// `Λ = diag(energies)`, the POD energies (variance of each modal coefficient).
    Energies(Vec<f64>),
    /// `Λ⁻¹ = ε I` with a tiny ε (see [`FLAT_PRIOR_EPSILON`]): the classical designs.
    Flat,
}

/// A validated selection problem in whitened coordinates.
#[derive(Debug, Clone)]
pub struct Problem {
    pub rows: CandidateRows,
    pub block_candidate: Vec<usize>,
    pub block_kind: Vec<usize>,
    /// Cost of each block (kind cost plus mounting cost), ≥ 0.
    pub block_cost: Vec<f64>,
    /// Prior variance `Λ_ii` of every mode after flooring (see `prior_warnings`).
    pub prior_var: Vec<f64>,
    /// log det Λ⁻¹, the D criterion of the empty layout.
    pub log_det_prior_inv: f64,
    /// Whether the prior is flat (for reports).
    pub flat_prior: bool,
    /// One entry per site candidate (indexed by `candidate_idx`).
    pub places: Vec<CandidatePlace>,
    /// Kind names, indexed by `kind_idx` (for messages).
    pub kind_names: Vec<String>,
    /// Non-fatal findings while building the problem.
    pub warnings: Vec<String>,
}

impl Problem {
    /// Builds the problem from sensor blocks (`sensors::build_blocks`).
    pub fn from_blocks(
        blocks: &[Block],
        prior: &Prior,
        places: Vec<CandidatePlace>,
        kind_names: Vec<String>,
    ) -> Result<Self, SelectError> {
        if blocks.is_empty() {
            return Err(SelectError::NoBlocks);
        }
        let n_modes = blocks[0].h.ncols();
        let name = |b: &Block| {
            (
                places
                    .get(b.candidate_idx)
                    .map_or_else(|| format!("#{}", b.candidate_idx), |p| p.id.clone()),
                kind_names
                    .get(b.kind_idx)
                    .cloned()
                    .unwrap_or_else(|| format!("#{}", b.kind_idx)),
            )
        };
        let n_rows: usize = blocks.iter().map(Block::n_rows).sum();
        let mut data = Vec::with_capacity(n_rows * n_modes);
        let mut rows_per_block = Vec::with_capacity(blocks.len());
        for b in blocks {
            assert_eq!(b.h.ncols(), n_modes, "all blocks share the mode count");
            assert_eq!(b.noise_var.len(), b.n_rows(), "one noise variance per row");
            for row in 0..b.n_rows() {
                let h_row = (0..n_modes).map(|mode| b.h[(row, mode)]);
                push_noise_whitened_row(&mut data, h_row, b.noise_var[row], row, || name(b))?;
            }
            rows_per_block.push(b.n_rows());
        }
        let rows = CandidateRows::from_blocks(n_modes, data, &rows_per_block);
        Self::from_noise_whitened(
            rows,
            blocks.iter().map(|b| b.candidate_idx).collect(),
            blocks.iter().map(|b| b.kind_idx).collect(),
            blocks.iter().map(|b| b.cost).collect(),
            prior,
            places,
            kind_names,
        )
    }

    /// Builds the problem from packed sensor blocks (`sensors::build_packed`): the same checks
    /// and result as [`Problem::from_blocks`] without one allocation per candidate.
    pub fn from_packed(
        packed: &PackedBlocks,
        prior: &Prior,
        places: Vec<CandidatePlace>,
        kind_names: Vec<String>,
    ) -> Result<Self, SelectError> {
        let n_blocks = packed.n_blocks();
        if n_blocks == 0 {
            return Err(SelectError::NoBlocks);
        }
        let r = packed.n_modes;
        let name = |b: usize| {
            let (c, k) = (packed.candidate_idx[b], packed.kind_idx[b]);
            (
                places
                    .get(c)
                    .map_or_else(|| format!("#{c}"), |p| p.id.clone()),
                kind_names
                    .get(k)
                    .cloned()
                    .unwrap_or_else(|| format!("#{k}")),
            )
        };
        let mut data = Vec::with_capacity(packed.h.len());
        let mut rows_per_block = Vec::with_capacity(n_blocks);
        for b in 0..n_blocks {
            let (first, last) = (packed.row_start[b], packed.row_start[b + 1]);
            for (row, global) in (first..last).enumerate() {
                let h_row = packed.h[global * r..(global + 1) * r].iter().copied();
                push_noise_whitened_row(&mut data, h_row, packed.noise_var[global], row, || {
                    name(b)
                })?;
            }
            rows_per_block.push(last - first);
        }
        let rows = CandidateRows::from_blocks(r, data, &rows_per_block);
        Self::from_noise_whitened(
            rows,
            packed.candidate_idx.clone(),
            packed.kind_idx.clone(),
            packed.cost.clone(),
            prior,
            places,
            kind_names,
        )
    }

    /// Builds the problem from rows already multiplied by `R^{-1/2}` (not yet by `Λ^{1/2}`).
    pub fn from_noise_whitened(
        mut rows: CandidateRows,
        block_candidate: Vec<usize>,
        block_kind: Vec<usize>,
        block_cost: Vec<f64>,
        prior: &Prior,
        places: Vec<CandidatePlace>,
        kind_names: Vec<String>,
    ) -> Result<Self, SelectError> {
        let n_modes = rows.n_modes();
        let n_blocks = rows.n_blocks();
        assert_eq!(block_candidate.len(), n_blocks);
        assert_eq!(block_kind.len(), n_blocks);
        assert_eq!(block_cost.len(), n_blocks);
        if n_blocks == 0 {
            return Err(SelectError::NoBlocks);
        }
        let mut warnings = Vec::new();
        let (prior_var, flat_prior) = match prior {
            Prior::Energies(energies) => {
                if energies.len() < n_modes {
                    return Err(SelectError::EnergyCount {
                        n_energies: energies.len(),
                        n_modes,
                    });
                }
                let mut var = energies[..n_modes].to_vec();
                for (mode_idx, &e) in var.iter().enumerate() {
                    if !(e.is_finite() && e >= 0.0) {
                        return Err(SelectError::BadEnergy { mode_idx, value: e });
                    }
                }
                let largest = var.iter().copied().fold(0.0, f64::max);
                if largest <= 0.0 {
                    return Err(SelectError::BadEnergy {
                        mode_idx: 0,
                        value: largest,
                    });
                }
                // A mode without energy never varies; a tiny floor keeps Λ⁻¹ finite.
                let floor = 1e-12 * largest;
                let n_floored = var.iter().filter(|&&e| e < floor).count();
                if n_floored > 0 {
                    warnings.push(format!(
                        "{n_floored} mode(s) have (almost) zero energy; their prior variance was raised to {floor:.3e}"
                    ));
                }
                var.iter_mut().for_each(|e| *e = e.max(floor));
                (var, false)
            }
            Prior::Flat => {
                let total: f64 = (0..n_blocks).map(|b| rows.block_norm_sq(b)).sum();
                let mut eps = FLAT_PRIOR_EPSILON * total / (n_blocks as f64 * n_modes as f64);
                if !(eps.is_finite() && eps > 0.0) {
                    eps = FLAT_PRIOR_EPSILON;
                }
                (vec![1.0 / eps; n_modes], true)
            }
        };
        let scale: Vec<f64> = prior_var.iter().map(|v| v.sqrt()).collect();
        rows.scale_columns(&scale);
        let log_det_prior_inv = -prior_var.iter().map(|v| v.ln()).sum::<f64>();
        for (b, &c) in block_cost.iter().enumerate() {
            assert!(
                c.is_finite() && c >= 0.0,
                "block {b} cost {c} is not a cost"
            );
        }
        Ok(Problem {
            rows,
            block_candidate,
            block_kind,
            block_cost,
            prior_var,
            log_det_prior_inv,
            flat_prior,
            places,
            kind_names,
            warnings,
        })
    }

    pub fn n_blocks(&self) -> usize {
        self.rows.n_blocks()
    }

    pub fn n_modes(&self) -> usize {
        self.rows.n_modes()
    }

    /// Human-readable name of block `block_idx`: `(candidate id, kind name)`.
    pub fn block_name(&self, block_idx: usize) -> (String, String) {
        let c = self.block_candidate[block_idx];
        let k = self.block_kind[block_idx];
        (
            self.places
                .get(c)
                .map_or_else(|| format!("#{c}"), |p| p.id.clone()),
            self.kind_names
                .get(k)
                .cloned()
                .unwrap_or_else(|| format!("#{k}")),
        )
    }

    /// Index of the block for (candidate, kind), if the site has one.
    pub fn find_block(&self, candidate_idx: usize, kind_idx: usize) -> Option<usize> {
        (0..self.n_blocks())
            .find(|&b| self.block_candidate[b] == candidate_idx && self.block_kind[b] == kind_idx)
    }
}

/// Checks one measurement row (finite `h`, finite positive noise variance) and appends it
/// multiplied by `R^{-1/2}`; `name` gives the (candidate, kind) for the error.
fn push_noise_whitened_row(
    data: &mut Vec<f64>,
    h_row: impl Iterator<Item = f64>,
    var: f64,
    row: usize,
    name: impl Fn() -> (String, String),
) -> Result<(), SelectError> {
    if !(var.is_finite() && var > 0.0) {
        let (candidate, kind) = name();
        return Err(SelectError::BadNoise {
            candidate,
            kind,
            row,
            value: var,
        });
    }
    let w = 1.0 / var.sqrt();
    for (mode, v) in h_row.enumerate() {
        if !v.is_finite() {
            let (candidate, kind) = name();
            return Err(SelectError::NonFiniteRows {
                candidate,
                kind,
                row,
                mode,
            });
        }
        data.push(v * w);
    }
    Ok(())
}
