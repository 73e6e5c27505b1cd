//! The recommendation: from the scored cells of the count and budget studies, the cheapest
//! layout whose upper band (mean + 1 std over the Monte Carlo runs) of time-mean RMSE meets a
//! target, or the layout with the lowest error within a budget; and how many evenly spaced
//! (hand-laid grid) sensors the same error would take.

use super::cells::StudyKind;
use super::tidy::CellOutcome;

/// What the user asked for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Goal {
    /// Time-mean field RMSE to reach, field units.
    TargetRmse(f64),
    /// Money available.
    Budget(f64),
}

/// Methods whose layouts may be recommended (the baselines are for comparison only).
pub const DESIGN_METHODS: [&str; 3] = ["greedy", "exchange", "qr"];

#[derive(Debug, Clone)]
pub struct Recommendation {
    pub goal: Goal,
    /// The recommended cell; when the goal cannot be met, the closest one.
    pub chosen: CellOutcome,
    /// Whether `chosen` meets the goal.
    pub met: bool,
    /// Smallest evenly spaced grid layout of the count study whose upper band is at most the
    /// chosen layout's: `None` when no grid size studied reaches it.
    pub grid_equivalent: Option<CellOutcome>,
    /// Largest grid size studied (to say "more than N" when none reaches the error).
    pub max_grid_studied: usize,
}

impl Recommendation {
    /// Cost of the grid layout with the same error minus the recommended cost.
    pub fn saving(&self) -> Option<f64> {
        self.grid_equivalent
            .as_ref()
            .map(|g| g.cost - self.chosen.cost)
    }
}

fn is_design(outcome: &CellOutcome) -> bool {
    matches!(outcome.cell.study, StudyKind::Count | StudyKind::Budget)
        && DESIGN_METHODS.contains(&outcome.cell.method.as_str())
        && outcome.time_mean_rmse.mean.is_finite()
}

/// Picks the recommended layout; `None` when no design cell was scored.
pub fn recommend(outcomes: &[CellOutcome], goal: Goal) -> Option<Recommendation> {
    let designs: Vec<&CellOutcome> = outcomes.iter().filter(|o| is_design(o)).collect();
    let by_error = |a: &&CellOutcome, b: &&CellOutcome| {
        a.upper_band()
            .total_cmp(&b.upper_band())
            .then(a.cost.total_cmp(&b.cost))
            .then(a.cell_idx.cmp(&b.cell_idx))
    };
    let (chosen, met) = match goal {
        Goal::TargetRmse(target) => {
            let meeting = designs
                .iter()
                .filter(|o| o.upper_band() <= target)
                .min_by(|a, b| a.cost.total_cmp(&b.cost).then(by_error(a, b)));
            match meeting {
                Some(o) => (*o, true),
                None => (*designs.iter().min_by(|a, b| by_error(a, b))?, false),
            }
        }
        Goal::Budget(budget) => {
            let within = designs.iter().filter(|o| o.cost <= budget).min_by(|a, b| {
                a.time_mean_rmse
                    .mean
                    .total_cmp(&b.time_mean_rmse.mean)
                    .then(a.cost.total_cmp(&b.cost))
                    .then(a.cell_idx.cmp(&b.cell_idx))
            });
            match within {
                Some(o) => (*o, true),
                None => (
                    *designs.iter().min_by(|a, b| a.cost.total_cmp(&b.cost))?,
                    false,
                ),
            }
        }
    };
    let grids: Vec<&CellOutcome> = outcomes
        .iter()
        .filter(|o| o.cell.study == StudyKind::Count && o.cell.method == "grid")
        .collect();
    let grid_equivalent = grids
        .iter()
        .filter(|g| g.upper_band() <= chosen.upper_band())
        .min_by(|a, b| {
            a.n_sensors
                .cmp(&b.n_sensors)
                .then(a.cost.total_cmp(&b.cost))
        })
        .map(|g| (*g).clone());
    Some(Recommendation {
        goal,
        chosen: chosen.clone(),
        met,
        grid_equivalent,
        max_grid_studied: grids.iter().map(|g| g.n_sensors).max().unwrap_or(0),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sweep::{Cell, RmseStats};

    fn outcome(idx: usize, method: &str, n: usize, cost: f64, mean: f64, std: f64) -> CellOutcome {
        CellOutcome {
            cell_idx: idx,
            cell: Cell {
                study: StudyKind::Count,
                method: method.into(),
                setting: n as f64,
            },
            n_sensors: n,
            cost,
            criterion: 0.0,
            time_mean_rmse: RmseStats {
                mean,
                std,
                ..RmseStats::default()
            },
            final_rmse: RmseStats::default(),
            free_time_mean_rmse: 2.0,
            n_runs: 10,
            n_diverged: 0,
            sensors: String::new(),
        }
    }

    fn study() -> Vec<CellOutcome> {
        vec![
            outcome(0, "greedy", 1, 100.0, 1.0, 0.1),
            outcome(1, "greedy", 2, 200.0, 0.6, 0.1),
            outcome(2, "greedy", 3, 300.0, 0.4, 0.05),
            outcome(3, "grid", 1, 100.0, 1.5, 0.1),
            outcome(4, "grid", 2, 200.0, 1.0, 0.1),
            outcome(5, "grid", 3, 300.0, 0.8, 0.1),
            outcome(6, "grid", 4, 400.0, 0.6, 0.1),
            outcome(7, "random", 1, 50.0, 0.1, 0.0),
        ]
    }

    #[test]
    fn target_takes_the_cheapest_layout_whose_upper_band_meets_it() {
        let rec = recommend(&study(), Goal::TargetRmse(0.75)).unwrap();
        assert!(rec.met);
        assert_eq!(
            rec.chosen.n_sensors, 2,
            "0.6 + 0.1 <= 0.75; the random baseline is never recommended"
        );
        let grid = rec.grid_equivalent.as_ref().unwrap();
        assert_eq!(grid.n_sensors, 4);
        assert_eq!(rec.saving(), Some(200.0));
    }

    #[test]
    fn unreachable_target_returns_the_best_and_says_so() {
        let rec = recommend(&study(), Goal::TargetRmse(0.1)).unwrap();
        assert!(!rec.met);
        assert_eq!(rec.chosen.n_sensors, 3);
        assert!(rec.grid_equivalent.is_none());
        assert_eq!(rec.max_grid_studied, 4);
    }

    #[test]
    fn budget_takes_the_lowest_error_within_it() {
        let rec = recommend(&study(), Goal::Budget(250.0)).unwrap();
        assert!(rec.met);
        assert_eq!(rec.chosen.n_sensors, 2);
    }
}
