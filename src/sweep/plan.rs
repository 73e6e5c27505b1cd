//! The whole study behind `crowsnest plan`, as data: layouts by count and by budget for every
//! method (phase one), the recommendation, then the recommended layout itself — next to the
//! evenly spaced grid with as many new sensors — under changed noise, sampling interval and
//! background error and under worst-case sensor losses (phase two), and the detailed scores
//! the report draws (error against time for the recommended layout, that grid baseline and the
//! free run; the cost of each single lost sensor of the recommended layout).
//!
//! The budget study ranks at eight budgets in equal ratios from the cheapest sensor up to the
//! budget goal B, so "the lowest error within B" is chosen among layouts ranked for B itself,
//! or, for a target error, up to the cost of the largest layout of the count study, so the
//! cheapest layout meeting the target is looked for among many cheap sensors too.
//!
//! Both phases go through [`run_cells`] with the same journal, so an interrupted plan resumes
//! with identical results.

use std::path::Path;

use crate::select::{Feasibility, Limit, Method, Ranking};
use crate::twin::ScoreResult;

use super::cells::{Cell, StudyKind};
use super::context::{parse_method, StudyContext};
use super::recommend::{recommend, Goal, Recommendation};
use super::run::{run_cells, SweepError};
use super::studies::{budget_settings, cells_of, condition_studies, design_studies};
use super::tidy::CellOutcome;
use super::Shard;

/// What the plan studies.
#[derive(Debug, Clone)]
pub struct PlanOptions {
    /// Largest number of new sensors in the count study.
    pub max_count: usize,
    /// Target or budget; `None` asks for half the free run's time-mean RMSE.
    pub goal: Option<Goal>,
    /// Largest number of lost sensors in the loss study.
    pub max_loss: usize,
    /// Largest sampling-interval multiplier the record allows (see
    /// `SitePipeline::max_interval_multiplier`).
    pub max_interval_multiplier: f64,
}

/// Effect of losing one sensor of the recommended layout.
#[derive(Debug, Clone)]
pub struct SingleLoss {
    pub candidate: String,
    pub kind: String,
    /// Time-mean RMSE summary without that sensor.
    pub score: ScoreResult,
}

/// Everything `plan` found.
pub struct PlanOutcome {
    pub design: Vec<CellOutcome>,
    pub conditions: Vec<CellOutcome>,
    pub recommendation: Recommendation,
    /// The recommended layout with its gains, cost and optimality gap.
    pub ranking: Ranking,
    pub recommended_score: ScoreResult,
    /// The evenly spaced grid layout with as many new sensors as the recommended one.
    pub grid_score: Option<(Ranking, ScoreResult)>,
    /// Each sensor of the recommended layout lost alone, worst first.
    pub single_losses: Vec<SingleLoss>,
}

/// Stages reported to the progress callback.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlanStage {
    Design,
    Conditions,
    Details,
}

/// Runs the plan. `progress(stage, done, total)` reports cells (or detail scores).
pub fn run_plan(
    ctx: &mut StudyContext<'_>,
    options: &PlanOptions,
    journal: Option<&Path>,
    progress: &mut dyn FnMut(PlanStage, usize, usize),
) -> Result<PlanOutcome, SweepError> {
    let n_kept = ctx.constraints.keep.len();
    let n_admissible = Feasibility::new(ctx.problem, &ctx.constraints)
        .map_err(|e| SweepError::stage("checking the constraints", e))?
        .n_admissible_positions();
    let full = ctx.ranking(
        Method::Greedy,
        Limit::Count(options.max_count.min(n_admissible).max(1)),
    )?;
    let new_entries = || full.layout.entries.iter().filter(|e| !e.kept);
    let full_cost: f64 = new_entries()
        .map(|e| ctx.problem.block_cost[block_of(ctx, e)])
        .sum();
    // Free sensors need no budget: the levels start at the cheapest paid one.
    let cheapest = new_entries()
        .map(|e| ctx.problem.block_cost[block_of(ctx, e)])
        .filter(|&c| c > 0.0)
        .fold(f64::INFINITY, f64::min);
    let max_count = new_entries().count().max(1);
    let top_budget = match options.goal {
        Some(Goal::Budget(b)) => b,
        _ => full_cost,
    };
    let budgets = if cheapest.is_finite() {
        budget_settings(top_budget, cheapest)
    } else {
        Vec::new()
    };
    let design_cells = cells_of(&design_studies(max_count, budgets));
    let design = run_cells(&design_cells, ctx, Shard::WHOLE, journal, &mut |d, t| {
        progress(PlanStage::Design, d, t)
    })?;

    let goal = options.goal.unwrap_or_else(|| {
        let free = design
            .iter()
            .map(|o| o.free_time_mean_rmse)
            .find(|f| f.is_finite())
            .unwrap_or(f64::NAN);
        Goal::TargetRmse(0.5 * free)
    });
    let recommendation = recommend(&design, goal).ok_or_else(|| {
        SweepError::stage("recommending a layout", "no design layout could be scored")
    })?;
    let chosen = &recommendation.chosen;
    let method = parse_method(&chosen.cell.method).unwrap_or(Method::Greedy);
    let limit = chosen_limit(&chosen.cell);
    let ranking = ctx.ranking(method, limit)?;
    let n_new = ranking.layout.entries.iter().filter(|e| !e.kept).count();

    ctx.base_count = n_new.max(1);
    ctx.recommended = Some((method, limit));
    let max_loss = options.max_loss.min((n_new + n_kept).saturating_sub(1));
    let mut condition_cells = cells_of(&condition_studies(
        ctx.settings.run.background_sd,
        max_loss,
        options.max_interval_multiplier,
    ));
    // Condition cells follow the design cells in the journal's numbering.
    let offset = design_cells.len();
    let mut all_cells = design_cells.clone();
    all_cells.append(&mut condition_cells);
    let conditions = run_cells(
        &all_cells[offset..],
        ctx,
        Shard::WHOLE,
        journal,
        &mut |d, t| progress(PlanStage::Conditions, d, t),
    )?
    .into_iter()
    .map(|mut o| {
        o.cell_idx += offset;
        o
    })
    .collect();

    // Detail scores use each layout's own seed stream under the base conditions, so they
    // repeat the numbers of the cells that scored the same layout.
    let blocks = ctx.layout_blocks(&ranking.layout);
    let n_details = 2 + blocks.len();
    progress(PlanStage::Details, 0, n_details);
    let recommended_score = ctx.score_base(&blocks)?;
    progress(PlanStage::Details, 1, n_details);
    let grid_score = match ctx.ranking(Method::Grid, Limit::Count(ctx.base_count)) {
        Ok(grid) => {
            let grid_blocks = ctx.layout_blocks(&grid.layout);
            let score = ctx.score_base(&grid_blocks)?;
            Some((grid, score))
        }
        Err(_) => None,
    };
    progress(PlanStage::Details, 2, n_details);
    let mut single_losses = Vec::with_capacity(blocks.len());
    for (i, &lost) in blocks.iter().enumerate() {
        let remaining: Vec<usize> = blocks.iter().copied().filter(|&b| b != lost).collect();
        let (candidate, kind) = ctx.problem.block_name(lost);
        let score = ctx.score_base(&remaining)?;
        single_losses.push(SingleLoss {
            candidate,
            kind,
            score,
        });
        progress(PlanStage::Details, 3 + i, n_details);
    }
    single_losses.sort_by(|a, b| b.score.mean_rmse.mean.total_cmp(&a.score.mean_rmse.mean));
    Ok(PlanOutcome {
        design,
        conditions,
        recommendation,
        ranking,
        recommended_score,
        grid_score,
        single_losses,
    })
}

fn block_of(ctx: &StudyContext<'_>, entry: &crate::select::LayoutEntry) -> usize {
    ctx.problem
        .find_block(entry.candidate_idx, entry.kind_idx)
        .unwrap_or(0)
}

/// The selection limit a design cell was ranked with.
pub fn chosen_limit(cell: &Cell) -> Limit {
    match cell.study {
        StudyKind::Budget => Limit::Budget(cell.setting),
        _ => Limit::Count(cell.setting.round() as usize),
    }
}
