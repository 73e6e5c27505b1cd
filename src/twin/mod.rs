//! `twin` owns twin experiments: a reduced model fitted on the training span of the modal
//! coefficients, filters that assimilate noisy readings from a layout's sensors, and Monte
//! Carlo scoring of the recovered field against the held-out truth.
//!
//! Main types: [`TwinSettings`] (validated on construction), [`ReducedModel`] (linear DMD-style
//! or quadratic operator-inference model, [`model`]), [`TwinCase`] (plain matrices: truth
//! coefficients, truncation residuals, truth readings of the full field, sensor rows),
//! [`Prepared`] (per-layout work done once: model, truth, schedule) and [`ScoreResult`].
//! Entry points: [`prepare`] then [`run_monte_carlo`], or [`score_layout`] for both.
//!
//! The core works on plain matrices and knows nothing of files; [`wire`] builds a
//! [`TwinCase`] from a `Site`, a `Basis`, its `Projection` and the layout's `Block`s, reading
//! the truth snapshots only through `io::SnapshotSource`. It prints nothing and starts threads
//! only through rayon's pool of the caller.

pub mod batch;
mod dense;
pub mod enkf;
mod error;
pub mod kalman;
pub mod metrics;
pub mod model;
pub mod montecarlo;
pub mod nudge;
pub mod schedule;
mod settings;
pub mod tables;
pub mod testcase;
pub mod wire;

pub use error::TwinError;
pub use model::{ModelReport, ReducedModel, TimeSplit};
pub use montecarlo::{
    layout_id, prepare, prepare_with_model, run_monte_carlo, Prepared, RunOutcome, ScoreResult,
    StepStats, TwinCase,
};
pub use settings::{FilterKind, ModelKind, ModelSettings, NudgeGain, RunSettings, TwinSettings};
pub use wire::{case_from_site, layout_blocks, layout_id_of, score_layout, truth_readings};
