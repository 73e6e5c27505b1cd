//! `sweep` owns trade-off studies: it enumerates the cells of a study (one per method ×
//! setting: sensor count, budget, noise multiplier, sampling-interval multiplier, background
//! error, or number of lost sensors), has each cell evaluated (ranked by `select`, scored by the
//! Monte Carlo twin), and gathers the outcomes into a tidy table, one row per cell.
//!
//! Cells are evaluated one after another in a fixed order (parallelism lives inside the twin's
//! Monte Carlo), and each cell's random streams derive from the master seed and the cell, not
//! from the order of evaluation. That is what makes resuming after an interruption, sharding
//! over machines (`--shard i/N`) and merging give the same table as one uninterrupted run.
//!
//! It reads and writes files only through `io::table`; it prints nothing.

mod cells;
mod context;
mod merge;
mod pipeline;
mod plan;
mod recommend;
mod run;
mod studies;
mod tidy;

pub use cells::{format_setting, Cell, Shard, StudyKind};
pub use context::{condition_id, parse_method, StudyContext, METHOD_NAMES, RECOMMENDED};
pub use merge::merge_outcomes;
pub use pipeline::{PipelineStage, SitePipeline};
pub use plan::{chosen_limit, run_plan, PlanOptions, PlanOutcome, PlanStage, SingleLoss};
pub use recommend::{recommend, Goal, Recommendation, DESIGN_METHODS};
pub use run::{run_cells, CellEvaluator, SweepError};
pub use studies::{
    budget_settings, cells_of, condition_studies, count_settings, design_studies, StudySpec,
    BACKGROUND_MULTIPLIERS, CONDITION_METHODS, INTERVAL_MULTIPLIERS, NOISE_MULTIPLIERS,
};
pub use tidy::{CellOutcome, RmseStats, TIDY_HEADER};
