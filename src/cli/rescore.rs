//! `crowsnest rescore`: an existing layout on a changed site. Lists the sensors whose mount is
//! gone or whose kind no longer gives a reading there (a new building in a beam's path),
//! scores what is left with the Monte Carlo twin, and, against the error the layout had before
//! (scored on `--before SITE`, or `--target-rmse`), proposes the cheapest greedy additions
//! that restore it, keeping the surviving sensors.

use std::path::PathBuf;

use clap::Args;

use crate::io::{load_site, read_layout_csv, Site};
use crate::select::{site_constraints, Criterion, Feasibility, Limit, Method};
use crate::sweep::{SitePipeline, StudyContext};
use crate::twin::{FilterKind, TwinSettings};

use super::pipeline::{build_pipeline, rank_of};
use super::BadArgument;

/// Score an old layout on a changed site and propose additions that restore its error.
#[derive(Debug, Args)]
pub struct RescoreArgs {
    /// The changed site (directory or site.toml).
    pub site: PathBuf,
    /// The layout to re-score (layout.csv; columns candidate and kind at least).
    #[arg(long)]
    pub layout: PathBuf,
    /// The site as it was, to measure the error the layout used to reach.
    #[arg(long)]
    pub before: Option<PathBuf>,
    /// The error to restore, field units (instead of scoring on --before).
    #[arg(long, conflicts_with = "before")]
    pub target_rmse: Option<f64>,
    /// Largest number of sensors to add.
    #[arg(long, default_value_t = 8)]
    pub max_additions: usize,
    #[arg(long, default_value_t = 30)]
    pub runs: usize,
    #[arg(long, default_value_t = 0.5)]
    pub background_noise: f64,
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
}

/// Blocks of the layout rows present on `site`; the rest with the reason they are gone.
fn resolve(
    site: &Site,
    pipeline: &SitePipeline,
    rows: &[crate::io::LayoutRow],
) -> (Vec<(usize, usize)>, Vec<String>) {
    let mut present = Vec::new();
    let mut gone = Vec::new();
    for row in rows.iter().filter(|r| r.kept) {
        let Some(candidate_idx) = site.candidates.iter().position(|c| c.id == row.candidate) else {
            gone.push(format!(
                "{} ({}): mount removed from the site",
                row.candidate, row.kind
            ));
            continue;
        };
        let Some(kind_idx) = site.kinds.iter().position(|k| k.name == row.kind) else {
            gone.push(format!(
                "{} ({}): kind no longer defined",
                row.candidate, row.kind
            ));
            continue;
        };
        if pipeline
            .problem
            .find_block(candidate_idx, kind_idx)
            .is_none()
        {
            gone.push(format!(
                "{} ({}): no reading any more (kind not allowed there, or every beam now blocked)",
                row.candidate, row.kind
            ));
            continue;
        }
        present.push((candidate_idx, kind_idx));
    }
    (present, gone)
}

fn score(
    ctx: &StudyContext<'_>,
    pairs: &[(usize, usize)],
    id: &str,
) -> anyhow::Result<crate::twin::ScoreResult> {
    let blocks: Vec<usize> = pairs
        .iter()
        .filter_map(|&(c, k)| ctx.problem.find_block(c, k))
        .collect();
    Ok(ctx.score_blocks(&blocks, id, &ctx.settings, 1.0)?)
}

pub fn run(args: RescoreArgs) -> anyhow::Result<()> {
    let settings = TwinSettings::new(FilterKind::Kalman)
        .with_runs(args.runs)?
        .with_background_sd(args.background_noise)?
        .with_seed(args.seed);
    let rank = rank_of(args.modes, args.energy)?;
    let rows = read_layout_csv(&args.layout)?;

    let target = match (&args.before, args.target_rmse) {
        (Some(before), _) => {
            super::synth_if_needed(before, false)?;
            let old_site = load_site(before)?;
            let (old_pipeline, _) = build_pipeline(&old_site, rank, &settings)?;
            let (old_pairs, old_gone) = resolve(&old_site, &old_pipeline, &rows);
            if !old_gone.is_empty() {
                return Err(BadArgument {
                    option: "--before".into(),
                    message: format!(
                        "the layout does not fit the old site: {}",
                        old_gone.join("; ")
                    ),
                }
                .into());
            }
            let ctx = old_pipeline.context(
                site_constraints(&old_site),
                Criterion::D,
                settings.clone(),
                1,
                args.seed,
            );
            let old = score(&ctx, &old_pairs, "layout as it was")?;
            println!(
                "before the change: time-mean field RMSE {:.3} ± {:.3} (mean ± 1 std over {} runs)",
                old.mean_rmse.mean, old.mean_rmse.std, args.runs
            );
            old.mean_rmse.mean + old.mean_rmse.std
        }
        (None, Some(t)) if t.is_finite() && t > 0.0 => t,
        _ => return Err(BadArgument {
            option: "--before / --target-rmse".into(),
            message:
                "give the old site (--before SITE) or the error to restore (--target-rmse X > 0)"
                    .into(),
        }
        .into()),
    };

    super::synth_if_needed(&args.site, false)?;
    let site = load_site(&args.site)?;
    let (pipeline, warnings) = build_pipeline(&site, rank, &settings)?;
    let (present, gone) = resolve(&site, &pipeline, &rows);
    println!(
        "{} of {} sensors still usable on `{}`",
        present.len(),
        rows.iter().filter(|r| r.kept).count(),
        site.name
    );
    for g in &gone {
        println!("  lost: {g}");
    }
    let mut constraints = site_constraints(&site);
    for p in &present {
        if !constraints.keep.contains(p) {
            constraints.keep.push(*p);
        }
    }
    let ctx = pipeline.context(
        constraints.clone(),
        Criterion::D,
        settings.clone(),
        1,
        args.seed,
    );
    let now = score(&ctx, &constraints.keep, "layout after the change")?;
    let band = now.mean_rmse.mean + now.mean_rmse.std;
    println!(
        "after the change: time-mean field RMSE {:.3} ± {:.3}; upper band {:.3} against {:.3} to restore",
        now.mean_rmse.mean, now.mean_rmse.std, band, target
    );
    if band <= target {
        println!("the surviving layout still meets the old error; nothing to add");
        print_warnings(&warnings);
        return Ok(());
    }
    let n_admissible = Feasibility::new(ctx.problem, &constraints)?.n_admissible_positions();
    for k in 1..=args.max_additions.min(n_admissible) {
        let ranking = ctx.ranking(Method::Greedy, Limit::Count(k))?;
        let blocks = ctx.layout_blocks(&ranking.layout);
        let scored = ctx.score_blocks(&blocks, &format!("plus {k}"), &ctx.settings, 1.0)?;
        let band = scored.mean_rmse.mean + scored.mean_rmse.std;
        if band <= target {
            println!("adding {k} sensor(s) restores it (upper band {band:.3}):");
            for e in ranking.layout.entries.iter().filter(|e| !e.kept) {
                println!(
                    "  + {} ({}) at ({:.1}, {:.1}), cumulative cost {:.0}",
                    site.candidates[e.candidate_idx].id,
                    site.kinds[e.kind_idx].name,
                    site.candidates[e.candidate_idx].position[0],
                    site.candidates[e.candidate_idx].position[1],
                    e.cumulative_cost
                );
            }
            print_warnings(&warnings);
            return Ok(());
        }
    }
    println!(
        "no greedy addition of up to {} sensors restores the old error; widen --max-additions or add candidates",
        args.max_additions
    );
    print_warnings(&warnings);
    Ok(())
}

fn print_warnings(warnings: &[String]) {
    for w in warnings {
        eprintln!("warning: {w}");
    }
}
