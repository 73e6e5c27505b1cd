//! `crowsnest plan`: the whole job in one command — flow snapshots (generated for demo sites
//! when missing), POD basis, sensor blocks, layouts by every method at every count and budget,
//! Monte Carlo scores, robustness studies, pictures and `report.html`, with a short summary in
//! the terminal. An interrupted plan resumes from its journal of finished cells.

use std::path::{Path, PathBuf};

use clap::Args;

use crate::io::layout_file::{layout_csv_text, write_layout_csv, LayoutRow};
use crate::io::table::write_csv_table;
use crate::io::{atomic::write_bytes_atomic, load_site, Site};
use crate::render::plan_report::{plan_document, PlanFacts};
use crate::render::write_report;
use crate::select::{site_constraints, Criterion, Layout};
use crate::sweep::{
    run_plan, CellOutcome, Goal, PlanOptions, PlanStage, SitePipeline, TIDY_HEADER,
};
use crate::twin::{FilterKind, TwinSettings};

use super::pipeline::{build_pipeline, rank_of};
use super::progress::StageBar;
use super::BadArgument;

/// Modes kept by `--quick` unless `--modes` says otherwise.
const QUICK_MODES: usize = 8;

/// Plan a sensor layout end to end and write a report.
#[derive(Debug, Args)]
pub struct PlanArgs {
    /// Site directory or its site.toml.
    pub site: PathBuf,
    /// Output directory (report.html, layout.csv, studies.csv, figures).
    #[arg(long, default_value = "plan-out")]
    pub out: PathBuf,
    /// Recommend the cheapest layout whose time-mean field RMSE (mean + 1 std over the runs)
    /// is at most this, in field units (e.g. m/s). Default: half the free run's error.
    #[arg(long, conflicts_with = "budget")]
    pub target_rmse: Option<f64>,
    /// Recommend the layout with the lowest error whose cost fits this budget.
    #[arg(long)]
    pub budget: Option<f64>,
    /// Smaller study for a first look (fewer counts and runs).
    #[arg(long)]
    pub quick: bool,
    /// Largest number of new sensors studied (default 10; 6 with --quick).
    #[arg(long)]
    pub max_count: Option<usize>,
    /// Monte Carlo runs per layout and setting (default 30; 8 with --quick).
    #[arg(long)]
    pub runs: Option<usize>,
    /// Field RMSE of the initial-state error, field units.
    #[arg(long, default_value_t = 0.5)]
    pub background_noise: f64,
    /// Keep the fewest POD modes holding this energy fraction.
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    /// Keep this many POD modes instead.
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    /// Master seed of every random stream.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
}

fn goal_of(args: &PlanArgs) -> Result<Option<Goal>, BadArgument> {
    let positive = |name: &str, v: f64| {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(BadArgument {
                option: name.into(),
                message: format!("found {v}, expected a number > 0"),
            })
        }
    };
    Ok(match (args.target_rmse, args.budget) {
        (Some(t), _) => Some(Goal::TargetRmse(positive("--target-rmse", t)?)),
        (None, Some(b)) => Some(Goal::Budget(positive("--budget", b)?)),
        (None, None) => None,
    })
}

pub fn run(args: PlanArgs) -> anyhow::Result<()> {
    let goal = goal_of(&args)?;
    super::synth_if_needed(&args.site, args.quick)?;
    let site = load_site(&args.site)?;
    let max_count = args.max_count.unwrap_or(if args.quick { 6 } else { 10 });
    let n_runs = args.runs.unwrap_or(if args.quick { 8 } else { 30 });
    if max_count == 0 {
        return Err(BadArgument {
            option: "--max-count".into(),
            message: "found 0, expected at least 1".into(),
        }
        .into());
    }
    let settings = TwinSettings::new(FilterKind::Kalman)
        .with_runs(n_runs)?
        .with_background_sd(args.background_noise)?
        .with_seed(args.seed);
    // A quick look keeps few modes so the short quick record still fits the model.
    let modes = args
        .modes
        .or(if args.quick { Some(QUICK_MODES) } else { None });
    let rank = rank_of(modes, args.energy)?;
    let (pipeline, warnings) = build_pipeline(&site, rank, &settings)?;

    let mut ctx = pipeline.context(
        site_constraints(&site),
        Criterion::D,
        settings.clone(),
        1,
        args.seed,
    );
    let journal = args.out.join(format!(
        ".plan-journal-{:016x}.csv",
        fingerprint(&args, &site)?
    ));
    let design_bar = StageBar::new("layouts by count/budget", "cells");
    let condition_bar = StageBar::new("robustness studies", "cells");
    let detail_bar = StageBar::new("detail scores", "scores");
    let options = PlanOptions {
        max_count,
        goal,
        max_loss: 3,
        max_interval_multiplier: pipeline.max_interval_multiplier(&site),
    };
    let outcome = run_plan(
        &mut ctx,
        &options,
        Some(&journal),
        &mut |stage, d, t| match stage {
            PlanStage::Design => design_bar.set(d, t),
            PlanStage::Conditions => condition_bar.set(d, t),
            PlanStage::Details => detail_bar.set(d, t),
        },
    )?;
    design_bar.finish();
    condition_bar.finish();
    detail_bar.finish();

    let out = &args.out;
    let layout_rows = layout_rows(&site, &outcome.ranking.layout);
    let layout_path = out.join("layout.csv");
    write_layout_csv(&layout_path, &layout_rows)?;
    let layout_csv = layout_csv_text(&layout_rows);
    let layout_geojson = site.geo_origin.map(|origin| {
        crate::render::geojson::layout_geojson(&site, &outcome.ranking.layout, &origin)
    });
    if let Some(text) = &layout_geojson {
        write_bytes_atomic(&out.join("layout.geojson"), text.as_bytes())?;
    }
    let mut all: Vec<CellOutcome> = outcome.design.clone();
    all.extend(outcome.conditions.iter().cloned());
    let rows: Vec<Vec<String>> = all.iter().map(CellOutcome::to_row).collect();
    write_csv_table(&out.join("studies.csv"), &TIDY_HEADER, &rows)?;

    let facts = PlanFacts {
        subtitle: format!(
            "crowsnest {} · seed {} · {} Monte Carlo runs per layout",
            env!("CARGO_PKG_VERSION"),
            args.seed,
            n_runs
        ),
        assumptions: assumptions(&site, &pipeline, &settings, max_count, &outcome),
        layout_csv,
        layout_geojson,
        warnings: warnings.clone(),
    };
    let doc = plan_document(&site, &pipeline.basis, &outcome, facts)?;
    let figures_dir = out.join("figures");
    for f in &doc.figures {
        write_bytes_atomic(
            &figures_dir.join(format!("{}.svg", f.name)),
            f.svg.as_bytes(),
        )?;
        write_bytes_atomic(&figures_dir.join(format!("{}.png", f.name)), &f.png)?;
    }
    let report_path = out.join("report.html");
    write_report(&report_path, &doc.report)?;
    print_summary(
        &site,
        &outcome,
        &doc.report.justification,
        out,
        &report_path,
    );
    for w in &warnings {
        eprintln!("warning: {w}");
    }
    Ok(())
}

/// Hash of everything that changes a plan's cells, so a journal is reused only for the same
/// question: the content of every site input (io's digest) and the options.
fn fingerprint(args: &PlanArgs, site: &Site) -> Result<u64, crate::io::IoError> {
    let options = format!(
        "plan|{:?}|{:?}|{}|{:?}|{:?}|{}|{}|{:?}|{}",
        args.target_rmse,
        args.budget,
        args.quick,
        args.max_count,
        args.runs,
        args.background_noise,
        args.energy,
        args.modes,
        args.seed,
    );
    crate::io::digest::site_inputs_digest(site, &options)
}

/// The layout as `layout.csv` rows.
pub fn layout_rows(site: &Site, layout: &Layout) -> Vec<LayoutRow> {
    layout
        .entries
        .iter()
        .map(|e| {
            let c = &site.candidates[e.candidate_idx];
            LayoutRow {
                rank: e.rank,
                candidate: c.id.clone(),
                kind: site.kinds[e.kind_idx].name.clone(),
                x: c.position[0],
                y: c.position[1],
                marginal_gain: e.marginal_gain,
                cumulative_criterion: e.cumulative_criterion,
                cumulative_cost: e.cumulative_cost,
                kept: true,
            }
        })
        .collect()
}

fn assumptions(
    site: &Site,
    pipeline: &SitePipeline,
    settings: &TwinSettings,
    max_count: usize,
    outcome: &crate::sweep::PlanOutcome,
) -> Vec<(String, String)> {
    let n_kept = outcome
        .ranking
        .layout
        .entries
        .iter()
        .filter(|e| e.kept)
        .count();
    let largest = outcome
        .design
        .iter()
        .filter(|o| o.time_mean_rmse.mean.is_finite())
        .max_by(|a, b| {
            a.n_sensors
                .cmp(&b.n_sensors)
                .then(b.cost.total_cmp(&a.cost))
        });
    let mut studied = format!("count study: 1 to {max_count} new sensors");
    if let Some(big) = largest {
        studied.push_str(&format!(
            "; largest layout scored: {} new sensors ({} {} study, {})",
            big.n_sensors.saturating_sub(n_kept),
            crate::render::plan_report::method_label(&big.cell.method),
            big.cell.study,
            crate::render::plan_report::money(big.cost, &site.currency)
        ));
    }
    let report = &pipeline.model.report;
    let damping = match report.damping_scale {
        Some(s) => format!(
            ", damped by a factor {s:.4} to spectral radius {:.4}",
            report.spectral_radius
        ),
        None => format!(", spectral radius {:.4}", report.spectral_radius),
    };
    let mut out = vec![
        (
            "reduced model".to_string(),
            format!(
                "{} one-step model of {} POD modes fitted on the first {} snapshots{damping}",
                report.kind.name(),
                pipeline.basis.n_modes(),
                pipeline.split.n_train
            ),
        ),
        (
            "truth".to_string(),
            format!(
                "the held-out {} snapshots of the full field (POD truncation error included)",
                pipeline.split.n_test
            ),
        ),
        ("filter".to_string(), settings.run.filter.name().to_string()),
        (
            "background error".to_string(),
            format!(
                "{} field RMSE at the start of each run",
                settings.run.background_sd
            ),
        ),
        (
            "Monte Carlo".to_string(),
            format!(
                "{} runs per layout and setting, seed {}",
                settings.run.n_runs, settings.run.seed
            ),
        ),
        (
            "selection criterion".to_string(),
            "D-optimal (log det of the posterior information, POD-energy prior)".to_string(),
        ),
        ("layouts studied".to_string(), studied),
    ];
    for kind in &site.kinds {
        out.push((
            format!("kind {}", kind.name),
            format!(
                "noise sd {} {}, reading every {} s, cost {} (plus each mount's own cost)",
                kind.noise_sd,
                kind_unit(site, kind),
                kind.interval,
                crate::render::plan_report::money(kind.cost, &site.currency)
            ),
        ));
    }
    out
}

fn print_summary(
    site: &Site,
    outcome: &crate::sweep::PlanOutcome,
    justification: &[String],
    out: &Path,
    report: &Path,
) {
    println!(
        "Recommended layout ({} sensors):",
        outcome.ranking.layout.entries.len()
    );
    let cost_head = if site.currency.is_empty() {
        "cum. cost".to_string()
    } else {
        format!("cum. cost ({})", site.currency)
    };
    println!(
        "{:>4}  {:<18} {:<14} {:>16}",
        "rank", "candidate", "kind", cost_head
    );
    for entry in &outcome.ranking.layout.entries {
        let candidate = &site.candidates[entry.candidate_idx].id;
        let kind = &site.kinds[entry.kind_idx].name;
        println!(
            "{:>4}  {:<18} {:<14} {:>16.0}{}",
            entry.rank,
            candidate,
            kind,
            entry.cumulative_cost,
            if entry.kept { "  (existing)" } else { "" }
        );
    }
    println!();
    for sentence in justification {
        println!("{sentence}");
    }
    println!();
    println!(
        "Wrote {} and the layout, studies and figures in {}",
        report.display(),
        out.display()
    );
}

/// Unit of a kind's noise: the unit of the first channel it reads (beams read velocity).
fn kind_unit(site: &Site, kind: &crate::io::SensorKind) -> String {
    let first = match &kind.measurement {
        crate::io::Measurement::Beam(_) => site
            .channels
            .iter()
            .find(|c| c.role != crate::io::ChannelRole::Scalar),
        crate::io::Measurement::Point { channel_idx } => {
            channel_idx.first().and_then(|&i| site.channels.get(i))
        }
        crate::io::Measurement::Scalar { channel_idx } => site.channels.get(*channel_idx),
    };
    first
        .or(site.channels.first())
        .map(|c| c.unit.clone())
        .unwrap_or_default()
}
