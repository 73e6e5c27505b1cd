//! [`SitePipeline`]: the per-site work every study shares, done once — the truth projection on
//! the basis, the measurement block of every candidate × kind, the selection problem, the truth
//! readings of every block (one pass over the snapshots), the time split and the reduced model.
//! `plan`, `sweep` and `rescore` build one and hand out [`StudyContext`]s borrowing it.

use crate::basis::{project, Basis, Projection};
use crate::io::{open_snapshots, Site};
use crate::select::{prior_from_energies, problem_for_site, Constraints, Criterion, Problem};
use crate::sensors::{build_blocks, Block};
use crate::twin::schedule::steps_between_readings;
use crate::twin::{case_from_site, ModelSettings, ReducedModel, TimeSplit, TwinCase, TwinSettings};

use super::context::StudyContext;
use super::run::SweepError;

/// Stages reported while the pipeline is built.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PipelineStage {
    Projection,
    Blocks,
    Truth,
    Model,
}

/// Everything a study of one site needs, owned.
pub struct SitePipeline {
    pub basis: Basis,
    pub projection: Projection,
    pub blocks: Vec<Block>,
    pub problem: Problem,
    /// Rows of every block, stacked in block order, with their truth readings.
    pub case: TwinCase,
    pub split: TimeSplit,
    pub model: ReducedModel,
    /// Non-fatal findings (blocked beams, prior flooring, ...).
    pub warnings: Vec<String>,
}

impl SitePipeline {
    /// Builds the pipeline of `site` on `basis`. `flat_prior` selects the classical designs.
    pub fn build(
        site: &Site,
        basis: Basis,
        flat_prior: bool,
        model_settings: &ModelSettings,
        progress: &mut dyn FnMut(PipelineStage, usize, usize),
    ) -> Result<Self, SweepError> {
        let stage = |name: &str| {
            let name = name.to_string();
            move |e: Box<dyn std::error::Error + Send + Sync>| SweepError::stage(name, e)
        };
        let mut source =
            open_snapshots(site).map_err(|e| stage("opening the snapshots")(e.into()))?;
        let projection = project(&basis, source.as_mut(), &mut |d, t| {
            progress(PipelineStage::Projection, d, t)
        })
        .map_err(|e| stage("projecting the snapshots on the basis")(e.into()))?;
        let dt_s = match &site.flow {
            crate::io::FlowSource::Snapshots(files) => files.dt,
            crate::io::FlowSource::Basis(_) => f64::NAN,
        };
        let split = TimeSplit::new(
            projection.coeffs.nrows(),
            model_settings.train_fraction,
            basis.n_modes(),
        )
        .map_err(|e| stage("splitting the record")(e.into()))?;
        progress(PipelineStage::Blocks, 0, 1);
        let block_set = build_blocks(site, &basis)
            .map_err(|e| stage("building the sensor blocks")(e.into()))?;
        let mut warnings = block_set.warnings;
        // A sensor that cannot report within the test span cannot be scored: leave it out.
        let last_test_step = split.n_test.saturating_sub(1);
        let mut slow_kinds = Vec::new();
        let blocks: Vec<Block> = block_set
            .blocks
            .into_iter()
            .filter(|b| {
                let kind = &site.kinds[b.kind_idx];
                let fits = steps_between_readings(kind.interval, dt_s) <= last_test_step;
                if !fits && !slow_kinds.contains(&b.kind_idx) {
                    slow_kinds.push(b.kind_idx);
                }
                fits
            })
            .collect();
        for kind_idx in slow_kinds {
            let kind = &site.kinds[kind_idx];
            warnings.push(format!(
                "sensor kind `{}` reads every {} s, longer than the {} s test span of the record; it is left out of these studies (use a longer record)",
                kind.name,
                kind.interval,
                last_test_step as f64 * dt_s
            ));
        }
        progress(PipelineStage::Blocks, 1, 1);
        let prior = prior_from_energies(&basis.energies, basis.n_modes(), flat_prior);
        let problem = problem_for_site(site, &blocks, &prior)
            .map_err(|e| stage("setting up the selection problem")(e.into()))?;
        warnings.extend(problem.warnings.iter().cloned());
        progress(PipelineStage::Truth, 0, 1);
        let case = case_from_site(site, &basis, &projection, source.as_mut(), &blocks)
            .map_err(|e| stage("reading the truth through every sensor")(e.into()))?;
        progress(PipelineStage::Truth, 1, 1);
        progress(PipelineStage::Model, 0, 1);
        let model = ReducedModel::fit(
            case.coeffs.as_ref().subrows(0, split.n_train),
            model_settings,
        )
        .map_err(|e| stage("fitting the reduced model")(e.into()))?;
        progress(PipelineStage::Model, 1, 1);
        Ok(SitePipeline {
            basis,
            projection,
            blocks,
            problem,
            case,
            split,
            model,
            warnings,
        })
    }

    /// Largest factor every kept sensor's sampling interval can be stretched by and still
    /// report within the test span.
    pub fn max_interval_multiplier(&self, site: &Site) -> f64 {
        let span = self.split.n_test.saturating_sub(1) as f64 * self.case.dt_s;
        self.blocks
            .iter()
            .map(|b| span / site.kinds[b.kind_idx].interval)
            .fold(f64::INFINITY, f64::min)
    }

    /// A study context over this pipeline.
    pub fn context(
        &self,
        constraints: Constraints,
        criterion: Criterion,
        settings: TwinSettings,
        base_count: usize,
        seed: u64,
    ) -> StudyContext<'_> {
        let row_counts: Vec<usize> = self.blocks.iter().map(Block::n_rows).collect();
        StudyContext::new(
            &self.problem,
            constraints,
            criterion,
            &self.case,
            &row_counts,
            self.split,
            &self.model,
            settings,
            base_count,
            seed,
        )
    }
}
