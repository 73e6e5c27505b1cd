//! Shared by the commands that study a site (`plan`, `sweep`, `rescore`): the POD basis and
//! the site pipeline, each behind a progress bar, with the warnings collected.

use crate::basis::{compute_for_site_with_warnings, PodOptions, Rank};
use crate::io::Site;
use crate::sweep::{PipelineStage, SitePipeline};
use crate::twin::TwinSettings;

use super::progress::StageBar;
use super::BadArgument;

/// The basis rank from `--modes` / `--energy`.
pub fn rank_of(modes: Option<usize>, energy: f64) -> Result<Rank, BadArgument> {
    let rank = match modes {
        Some(0) => {
            return Err(BadArgument {
                option: "--modes".into(),
                message: "found 0, expected at least 1".into(),
            })
        }
        Some(n) => Rank::Count(n),
        None => Rank::EnergyFraction(energy),
    };
    if !(energy > 0.0 && energy <= 1.0) {
        return Err(BadArgument {
            option: "--energy".into(),
            message: format!("found {energy}, expected a fraction in (0, 1]"),
        });
    }
    Ok(rank)
}

/// Basis, then pipeline; returns the pipeline and every warning found on the way.
pub fn build_pipeline(
    site: &Site,
    rank: Rank,
    settings: &TwinSettings,
) -> anyhow::Result<(SitePipeline, Vec<String>)> {
    let mut warnings = site.warnings.clone();
    let bar = StageBar::new("POD basis", "blocks");
    let basis = compute_for_site_with_warnings(
        site,
        &PodOptions {
            rank,
            ..PodOptions::default()
        },
        &mut |d, t| bar.set(d, t),
        &mut |w| warnings.push(w),
    )?;
    bar.finish();
    let bar = StageBar::new("projection and sensors", "%");
    let pipeline = SitePipeline::build(site, basis, false, &settings.model, &mut |stage, d, t| {
        let offset = match stage {
            PipelineStage::Projection => 0,
            PipelineStage::Blocks => 1,
            PipelineStage::Truth => 2,
            PipelineStage::Model => 3,
        };
        bar.set(offset * 25 + (25 * d).checked_div(t).unwrap_or(0), 100);
    })?;
    bar.finish();
    warnings.extend(pipeline.warnings.iter().cloned());
    Ok((pipeline, warnings))
}
