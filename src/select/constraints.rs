//! Mounting constraints and the bookkeeping that enforces them while a layout grows:
//! exclusion polygons and removed candidates (static: the block is inadmissible), minimum
//! spacing in metres, at most N sensors per zone label and per kind, one kind per candidate
//! position, and must-keep sensors that are placed first.
//!
//! Every dynamic constraint is monotone — once adding a block is infeasible it stays infeasible
//! as the layout grows — which is what lets the lazy methods drop a block for good the first
//! time it fails. [`Feasibility`] answers "may this block join the current set?" in O(#chosen).
//! This file does no linear algebra.

use std::collections::HashMap;

use super::problem::Problem;
use super::SelectError;

/// Where a site candidate sits, for constraints and messages.
#[derive(Debug, Clone)]
pub struct CandidatePlace {
    pub id: String,
    /// Plane coordinates, m.
    pub position: [f64; 2],
    /// Zone label for per-zone limits (empty when none).
    pub zone: String,
}

/// The user's constraints on a layout.
#[derive(Debug, Clone, Default)]
pub struct Constraints {
    /// Exclusion polygons `(name, vertices)`: candidates strictly inside one are inadmissible.
    pub exclusion_zones: Vec<(String, Vec<[f64; 2]>)>,
    /// Minimum distance between two chosen sensors, m (0 = none).
    pub min_spacing: f64,
    /// At most this many sensors per non-empty zone label.
    pub max_per_zone: Option<usize>,
    /// At most this many sensors of each kind.
    pub max_per_kind: Option<usize>,
    /// Must-keep sensors `(candidate_idx, kind_idx)`, placed first in this order.
    pub keep: Vec<(usize, usize)>,
    /// Candidates that may not be used (by `candidate_idx`).
    pub removed: Vec<usize>,
}

/// Ray-casting point-in-polygon test (first vertex not repeated); points on an edge count as
/// outside, so a candidate exactly on a zone boundary stays admissible.
fn inside_polygon(p: [f64; 2], vertices: &[[f64; 2]]) -> bool {
    let mut inside = false;
    let n = vertices.len();
    for i in 0..n {
        let a = vertices[i];
        let b = vertices[(i + n - 1) % n];
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (p[1] - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
            if p[0] < x {
                inside = !inside;
            }
        }
    }
    inside
}

/// Static admissibility plus the state of a growing layout.
#[derive(Debug, Clone)]
pub struct Feasibility<'a> {
    problem: &'a Problem,
    constraints: &'a Constraints,
    /// Per block: usable at all (not removed, not excluded, not a kept sensor's position).
    admissible: Vec<bool>,
    occupied: Vec<bool>,
    chosen_positions: Vec<[f64; 2]>,
    zone_count: HashMap<String, usize>,
    kind_count: Vec<usize>,
    /// Kept blocks, in the order given.
    pub kept_blocks: Vec<usize>,
    /// Positions with a block that are neither removed nor excluded (kept ones included).
    pub n_open_positions: usize,
    pub warnings: Vec<String>,
}

impl<'a> Feasibility<'a> {
    /// Checks the constraints against the problem and places the kept sensors.
    pub fn new(problem: &'a Problem, constraints: &'a Constraints) -> Result<Self, SelectError> {
        if !(constraints.min_spacing.is_finite() && constraints.min_spacing >= 0.0) {
            return Err(SelectError::BadSpacing(constraints.min_spacing));
        }
        if constraints.max_per_zone == Some(0) {
            return Err(SelectError::ZeroLimit {
                option: "--max-per-zone",
            });
        }
        if constraints.max_per_kind == Some(0) {
            return Err(SelectError::ZeroLimit {
                option: "--max-per-kind",
            });
        }
        let n_candidates = problem.places.len();
        let mut removed = vec![false; n_candidates];
        for &c in &constraints.removed {
            if c < n_candidates {
                removed[c] = true;
            }
        }
        let excluded_by: Vec<Option<&str>> = problem
            .places
            .iter()
            .map(|p| {
                constraints
                    .exclusion_zones
                    .iter()
                    .find(|(_, poly)| inside_polygon(p.position, poly))
                    .map(|(name, _)| name.as_str())
            })
            .collect();
        let mut state = Feasibility {
            problem,
            constraints,
            admissible: vec![false; problem.n_blocks()],
            occupied: vec![false; n_candidates],
            chosen_positions: Vec::new(),
            zone_count: HashMap::new(),
            kind_count: vec![0; problem.kind_names.len().max(1 + max_kind(problem))],
            kept_blocks: Vec::new(),
            n_open_positions: 0,
            warnings: Vec::new(),
        };
        let mut open = vec![false; n_candidates];
        for b in 0..problem.n_blocks() {
            let c = problem.block_candidate[b];
            if c < n_candidates && !removed[c] && excluded_by[c].is_none() {
                open[c] = true;
            }
        }
        state.n_open_positions = open.iter().filter(|&&o| o).count();
        for &(c, k) in &constraints.keep {
            let (candidate, kind) = (
                problem
                    .places
                    .get(c)
                    .map_or_else(|| format!("#{c}"), |p| p.id.clone()),
                problem
                    .kind_names
                    .get(k)
                    .cloned()
                    .unwrap_or_else(|| format!("#{k}")),
            );
            let Some(block) = problem.find_block(c, k) else {
                return Err(SelectError::BadKeep {
                    candidate,
                    kind,
                    reason: "no such candidate mount takes that kind, so it cannot be kept".into(),
                });
            };
            if removed[c] {
                return Err(SelectError::BadKeep {
                    candidate,
                    kind,
                    reason: "it is both kept and removed (--remove); drop one of the two".into(),
                });
            }
            if state.occupied[c] {
                return Err(SelectError::BadKeep {
                    candidate,
                    kind,
                    reason:
                        "the position already holds another kept sensor; a mount takes one sensor"
                            .into(),
                });
            }
            if let Some(zone) = excluded_by[c] {
                state.warnings.push(format!(
                    "warning: kept sensor {candidate} ({kind}) lies in exclusion zone {zone}; kept anyway because it is already there"
                ));
            }
            if !state.spacing_ok(problem.places[c].position) {
                state.warnings.push(format!(
                    "warning: kept sensor {candidate} ({kind}) is closer than {} m to another kept sensor; kept anyway",
                    constraints.min_spacing
                ));
            }
            state.add(block);
            state.kept_blocks.push(block);
        }
        for b in 0..problem.n_blocks() {
            let c = problem.block_candidate[b];
            state.admissible[b] = !removed[c] && excluded_by[c].is_none() && !state.occupied[c];
        }
        Ok(state)
    }

    /// Whether block `block_idx` passes the static checks (exclusion, removal, kept position).
    pub fn admissible(&self, block_idx: usize) -> bool {
        self.admissible[block_idx]
    }

    /// Number of distinct candidate positions with at least one admissible block.
    pub fn n_admissible_positions(&self) -> usize {
        let mut seen = vec![false; self.problem.places.len()];
        for b in 0..self.problem.n_blocks() {
            if self.admissible[b] {
                seen[self.problem.block_candidate[b]] = true;
            }
        }
        seen.iter().filter(|&&s| s).count()
    }

    fn spacing_ok(&self, position: [f64; 2]) -> bool {
        let d = self.constraints.min_spacing;
        if d <= 0.0 {
            return true;
        }
        self.chosen_positions.iter().all(|q| {
            let (dx, dy) = (q[0] - position[0], q[1] - position[1]);
            dx * dx + dy * dy >= d * d
        })
    }

    /// Whether block `block_idx` may join the current layout.
    pub fn can_add(&self, block_idx: usize) -> bool {
        if !self.admissible[block_idx] {
            return false;
        }
        let c = self.problem.block_candidate[block_idx];
        if self.occupied[c] {
            return false;
        }
        let place = &self.problem.places[c];
        if let Some(limit) = self.constraints.max_per_zone {
            if !place.zone.is_empty()
                && self.zone_count.get(&place.zone).copied().unwrap_or(0) >= limit
            {
                return false;
            }
        }
        if let Some(limit) = self.constraints.max_per_kind {
            if self.kind_count[self.problem.block_kind[block_idx]] >= limit {
                return false;
            }
        }
        self.spacing_ok(place.position)
    }

    /// Records block `block_idx` as chosen (the caller checked [`Self::can_add`]).
    pub fn add(&mut self, block_idx: usize) {
        let c = self.problem.block_candidate[block_idx];
        self.occupied[c] = true;
        let place = &self.problem.places[c];
        self.chosen_positions.push(place.position);
        if !place.zone.is_empty() {
            *self.zone_count.entry(place.zone.clone()).or_insert(0) += 1;
        }
        self.kind_count[self.problem.block_kind[block_idx]] += 1;
    }

    /// A fresh state holding the kept sensors plus `chosen` (for exchange moves).
    pub fn with_chosen(&self, chosen: &[usize]) -> Self {
        let mut state = Feasibility {
            problem: self.problem,
            constraints: self.constraints,
            admissible: self.admissible.clone(),
            occupied: vec![false; self.occupied.len()],
            chosen_positions: Vec::new(),
            zone_count: HashMap::new(),
            kind_count: vec![0; self.kind_count.len()],
            kept_blocks: self.kept_blocks.clone(),
            n_open_positions: self.n_open_positions,
            warnings: Vec::new(),
        };
        for &b in self.kept_blocks.iter().chain(chosen) {
            state.add(b);
        }
        state
    }
}

fn max_kind(problem: &Problem) -> usize {
    problem.block_kind.iter().copied().max().unwrap_or(0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polygon_membership() {
        let square = [[0.0, 0.0], [2.0, 0.0], [2.0, 2.0], [0.0, 2.0]];
        assert!(inside_polygon([1.0, 1.0], &square));
        assert!(!inside_polygon([3.0, 1.0], &square));
        assert!(!inside_polygon([1.0, -0.5], &square));
        // Concave L-shape: the notch is outside.
        let ell = [
            [0.0, 0.0],
            [2.0, 0.0],
            [2.0, 1.0],
            [1.0, 1.0],
            [1.0, 2.0],
            [0.0, 2.0],
        ];
        assert!(inside_polygon([0.5, 1.5], &ell));
        assert!(!inside_polygon([1.5, 1.5], &ell));
    }
}
