//! [`StudyContext`]: everything a study needs that does not change from cell to cell — the
//! selection problem and constraints, the twin case holding the truth readings of **every**
//! candidate block (read from the snapshots once), the time split and the reduced model
//! (fitted once and shared by every layout) — and the evaluation of one cell with it.
//!
//! A cell's layout comes from `select::rank` (cached per method and limit, since several
//! studies reuse the same layout), or is the fixed recommended layout for the method name
//! [`RECOMMENDED`]; its score from `twin::run_monte_carlo` on the rows of that layout.
//!
//! One seed stream per layout and condition: the Monte Carlo runs are seeded from the master
//! seed, the layout's sensors (its id is the `;`-joined `candidate:kind` list) and a condition
//! id that is 0 under the base conditions and a hash of what changed otherwise. So the same
//! layout under the same conditions scores exactly the same wherever it appears (a count cell,
//! a budget cell, the noise study at ×1, the report's detail scores), and a cell's numbers do
//! not depend on which other cells ran before it.

use std::cell::RefCell;
use std::collections::HashMap;
use std::ops::Range;

use crate::select::{
    evaluate_set, rank, Constraints, Criterion, Layout, Limit, Method, Problem, RankOptions,
    Ranking,
};
use crate::twin::montecarlo::fnv1a;
use crate::twin::{
    prepare_with_model, run_monte_carlo, ReducedModel, ScoreResult, TimeSplit, TwinCase,
    TwinSettings,
};

use super::cells::{Cell, StudyKind};
use super::run::{CellEvaluator, SweepError};
use super::tidy::{CellOutcome, RmseStats};

/// Fixed inputs of a study.
pub struct StudyContext<'a> {
    pub problem: &'a Problem,
    pub constraints: Constraints,
    pub criterion: Criterion,
    /// Twin case whose rows are the rows of every block of `problem`, in block order.
    pub case: &'a TwinCase,
    /// Rows of `case` belonging to each block.
    pub block_rows: Vec<Range<usize>>,
    pub split: TimeSplit,
    pub model: &'a ReducedModel,
    /// Base twin settings; studies vary one field at a time.
    pub settings: TwinSettings,
    /// Layout size (new sensors) of the layouts the noise, interval, background and loss
    /// studies rank by method (the grid baseline in a plan; every method in `sweep`).
    pub base_count: usize,
    /// The layout cells with method [`RECOMMENDED`] score: the method and limit it was ranked
    /// with. `plan` sets it once the recommendation is known.
    pub recommended: Option<(Method, Limit)>,
    pub n_random_draws: usize,
    pub seed: u64,
    rankings: RefCell<HashMap<String, Ranking>>,
}

/// Method names accepted in cells, in display order.
pub const METHOD_NAMES: [&str; 5] = ["greedy", "exchange", "qr", "grid", "random"];

/// Method name of cells that score the recommended layout itself (see
/// [`StudyContext::recommended`]).
pub const RECOMMENDED: &str = "recommended";

/// Seed-stream id of a scoring condition: 0 under the base conditions (`settings` equal to
/// `base` in noise multiplier and background error, interval multiplier 1), otherwise a hash
/// of the three values.
pub fn condition_id(settings: &TwinSettings, interval_scale: f64, base: &TwinSettings) -> u64 {
    let (noise, background) = (settings.run.noise_scale, settings.run.background_sd);
    // Exact equality on purpose: only the very base settings share the base stream.
    let same = |a: f64, b: f64| a.to_bits() == b.to_bits();
    if same(noise, base.run.noise_scale)
        && same(interval_scale, 1.0)
        && same(background, base.run.background_sd)
    {
        0
    } else {
        fnv1a(
            format!("noise={noise:?}|interval={interval_scale:?}|background={background:?}")
                .as_bytes(),
        )
    }
}

pub fn parse_method(name: &str) -> Option<Method> {
    match name {
        "greedy" => Some(Method::Greedy),
        "qr" => Some(Method::Qr),
        "exchange" => Some(Method::Exchange),
        "random" => Some(Method::Random),
        "grid" => Some(Method::Grid),
        _ => None,
    }
}

impl<'a> StudyContext<'a> {
    /// `block_row_counts[b]` is the number of rows of block `b`; `case` stacks them in order.
    #[allow(clippy::too_many_arguments)]
    #[track_caller]
    pub fn new(
        problem: &'a Problem,
        constraints: Constraints,
        criterion: Criterion,
        case: &'a TwinCase,
        block_row_counts: &[usize],
        split: TimeSplit,
        model: &'a ReducedModel,
        settings: TwinSettings,
        base_count: usize,
        seed: u64,
    ) -> Self {
        assert_eq!(block_row_counts.len(), problem.n_blocks());
        let mut block_rows = Vec::with_capacity(block_row_counts.len());
        let mut start = 0;
        for &n in block_row_counts {
            block_rows.push(start..start + n);
            start += n;
        }
        assert_eq!(
            start,
            case.rows.n_rows(),
            "case rows must stack every block"
        );
        Self {
            problem,
            constraints,
            criterion,
            case,
            block_rows,
            split,
            model,
            settings,
            base_count,
            recommended: None,
            n_random_draws: 64,
            seed,
            rankings: RefCell::new(HashMap::new()),
        }
    }

    /// The ranking of `method` under `limit`, computed once.
    pub fn ranking(&self, method: Method, limit: Limit) -> Result<Ranking, SweepError> {
        let key = format!("{}/{limit:?}", method.name());
        if let Some(r) = self.rankings.borrow().get(&key) {
            return Ok(r.clone());
        }
        let options = RankOptions {
            criterion: self.criterion,
            method,
            limit,
            constraints: self.constraints.clone(),
            seed: self.seed,
            n_random_draws: self.n_random_draws,
        };
        let ranking = rank(self.problem, &options).map_err(|e| SweepError::cell(&key, e))?;
        self.rankings.borrow_mut().insert(key, ranking.clone());
        Ok(ranking)
    }

    /// Block index of every entry of a layout.
    pub fn layout_blocks(&self, layout: &Layout) -> Vec<usize> {
        layout
            .entries
            .iter()
            .filter_map(|e| self.problem.find_block(e.candidate_idx, e.kind_idx))
            .collect()
    }

    /// The twin case of a set of blocks: their rows and truth readings only.
    pub fn case_for(&self, blocks: &[usize], interval_scale: f64) -> TwinCase {
        let rows_idx: Vec<usize> = blocks
            .iter()
            .flat_map(|&b| self.block_rows[b].clone())
            .collect();
        let mut rows = self.case.rows.select(&rows_idx);
        for interval in &mut rows.interval_s {
            *interval *= interval_scale;
        }
        let n_all = self.case.rows.n_rows();
        let n_snapshots = self.case.n_snapshots();
        let mut truth_readings = Vec::with_capacity(n_snapshots * rows_idx.len());
        for t in 0..n_snapshots {
            let row = &self.case.truth_readings[t * n_all..(t + 1) * n_all];
            truth_readings.extend(rows_idx.iter().map(|&r| row[r]));
        }
        TwinCase {
            coeffs: self.case.coeffs.clone(),
            residual_sq: self.case.residual_sq.clone(),
            truth_readings,
            rows,
            energies: self.case.energies.clone(),
            field_norm: self.case.field_norm,
            dt_s: self.case.dt_s,
        }
    }

    /// Monte Carlo score of a set of blocks under `settings`; `layout_id` and `setting_id`
    /// seed the runs.
    pub fn score_blocks(
        &self,
        blocks: &[usize],
        layout_id: &str,
        settings: &TwinSettings,
        interval_scale: f64,
    ) -> Result<ScoreResult, SweepError> {
        let case = self.case_for(blocks, interval_scale);
        // Seeds come from the sensors themselves, as in `crowsnest score`.
        let seed_id = crate::twin::layout_id(blocks.iter().map(|&b| self.problem.block_name(b)));
        let prepared = prepare_with_model(case, &seed_id, self.split, self.model.clone());
        run_monte_carlo(&prepared, &settings.run, &|_, _| {})
            .map_err(|e| SweepError::cell(layout_id, e))
    }

    /// Monte Carlo score of a set of blocks under the base conditions, on the layout's own
    /// seed stream (the same numbers its count or budget cell has).
    pub fn score_base(&self, blocks: &[usize]) -> Result<ScoreResult, SweepError> {
        let mut settings = self.settings.clone();
        settings.run.setting_id = 0;
        self.score_blocks(blocks, &self.describe(blocks), &settings, 1.0)
    }

    /// Removes `n_lost` sensors from `blocks`, each time the one whose loss lowers the
    /// criterion most (worst case found greedily). Kept (existing) sensors can fail too.
    pub fn worst_losses(&self, blocks: &[usize], n_lost: usize) -> Vec<usize> {
        let mut remaining = blocks.to_vec();
        let mut lost = Vec::new();
        for _ in 0..n_lost.min(blocks.len()) {
            let worst = (0..remaining.len())
                .map(|i| {
                    let mut without = remaining.clone();
                    without.remove(i);
                    (i, evaluate_set(self.problem, &without, self.criterion))
                })
                .min_by(|a, b| {
                    let (va, vb) = if self.criterion == Criterion::A {
                        (-a.1, -b.1)
                    } else {
                        (a.1, b.1)
                    };
                    va.total_cmp(&vb).then(a.0.cmp(&b.0))
                });
            if let Some((i, _)) = worst {
                lost.push(remaining.remove(i));
            }
        }
        lost
    }

    /// The layout id of a set of blocks: `candidate:kind` joined by `;`, in the given order.
    pub fn describe(&self, blocks: &[usize]) -> String {
        blocks
            .iter()
            .map(|&b| {
                let (candidate, kind) = self.problem.block_name(b);
                format!("{candidate}:{kind}")
            })
            .collect::<Vec<_>>()
            .join(";")
    }
}

impl CellEvaluator for StudyContext<'_> {
    fn evaluate(&self, cell: &Cell) -> Result<CellOutcome, SweepError> {
        let (method, limit) = if cell.method == RECOMMENDED {
            self.recommended.ok_or_else(|| {
                SweepError::cell(
                    cell.key(),
                    "the recommended layout is not known yet (only `plan` scores it)",
                )
            })?
        } else {
            let method = parse_method(&cell.method).ok_or_else(|| {
                SweepError::cell(
                    cell.key(),
                    format!(
                        "unknown method `{}`, expected one of {}",
                        cell.method,
                        METHOD_NAMES.join(", ")
                    ),
                )
            })?;
            let limit = match cell.study {
                StudyKind::Count => Limit::Count(cell.setting.round() as usize),
                StudyKind::Budget => Limit::Budget(cell.setting),
                _ => Limit::Count(self.base_count),
            };
            (method, limit)
        };
        let mut settings = self.settings.clone();
        let mut interval_scale = 1.0;
        match cell.study {
            StudyKind::Noise => settings.run.noise_scale = cell.setting,
            StudyKind::Interval => interval_scale = cell.setting,
            StudyKind::Background => settings.run.background_sd = cell.setting,
            _ => {}
        }
        settings.run.setting_id = condition_id(&settings, interval_scale, &self.settings);
        let ranking = self.ranking(method, limit)?;
        let mut blocks = self.layout_blocks(&ranking.layout);
        if cell.study == StudyKind::Loss {
            let lost = self.worst_losses(&blocks, cell.setting.round() as usize);
            blocks.retain(|b| !lost.contains(b));
        }
        let criterion = evaluate_set(self.problem, &blocks, self.criterion);
        let cost: f64 = blocks.iter().map(|&b| self.problem.block_cost[b]).sum();
        let layout_id = self.describe(&blocks);
        let score = self.score_blocks(&blocks, &layout_id, &settings, interval_scale)?;
        let stats = |s: &crate::twin::metrics::Summary| RmseStats {
            mean: s.mean,
            std: s.std,
            p5: s.p5,
            p50: s.p50,
            p95: s.p95,
        };
        Ok(CellOutcome {
            cell_idx: 0,
            cell: cell.clone(),
            n_sensors: blocks.len(),
            cost,
            criterion,
            time_mean_rmse: stats(&score.mean_rmse),
            final_rmse: stats(&score.final_rmse),
            free_time_mean_rmse: score.free_mean_rmse.mean,
            n_runs: score.runs.len(),
            n_diverged: score.n_diverged,
            sensors: layout_id,
        })
    }
}
