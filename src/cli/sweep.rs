//! `crowsnest sweep`: one trade-off study over sensor count, budget, noise, sampling interval,
//! background error or lost sensors, for several methods side by side, every cell scored by
//! the Monte Carlo twin. Writes the tidy `studies.csv`; with `--shard i/N` only every N-th
//! cell (join the shards with `crowsnest merge`); resumes from its journal when re-run.

use std::path::PathBuf;

use clap::Args;

use crate::io::load_site;
use crate::io::table::write_csv_table;
use crate::select::{site_constraints, Criterion, Feasibility, Limit, Method};
use crate::sweep::{
    budget_settings, cells_of, count_settings, parse_method, run_cells, CellOutcome, Shard,
    StudyKind, StudySpec, METHOD_NAMES, TIDY_HEADER,
};
use crate::twin::{FilterKind, TwinSettings};

use super::pipeline::{build_pipeline, rank_of};
use super::progress::StageBar;
use super::BadArgument;

/// Run one trade-off study and write its table.
#[derive(Debug, Args)]
pub struct SweepArgs {
    /// Site directory or its site.toml.
    pub site: PathBuf,
    /// What the study varies: count, budget, noise, interval, background or loss.
    #[arg(long)]
    pub over: StudyKind,
    /// Methods compared, comma-separated (greedy, exchange, qr, grid, random).
    #[arg(
        long,
        value_delimiter = ',',
        default_value = "greedy,exchange,qr,grid,random"
    )]
    pub methods: Vec<String>,
    /// Settings studied, comma-separated (counts, budgets, multipliers, background errors or
    /// numbers of lost sensors). Default: a sensible range for the study.
    #[arg(long, value_delimiter = ',')]
    pub settings: Vec<f64>,
    /// Largest count of the count study (default 10).
    #[arg(long, default_value_t = 10)]
    pub max_count: usize,
    /// Layout size (new sensors) for the noise, interval, background and loss studies.
    #[arg(long, default_value_t = 5)]
    pub count: usize,
    /// Monte Carlo runs per cell.
    #[arg(long, default_value_t = 30)]
    pub runs: usize,
    /// Field RMSE of the initial-state error, field units.
    #[arg(long, default_value_t = 0.5)]
    pub background_noise: f64,
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Evaluate only shard i of N (1-based), for batch clusters.
    #[arg(long)]
    pub shard: Option<Shard>,
    /// Output directory for studies.csv.
    #[arg(long, default_value = "sweep-out")]
    pub out: PathBuf,
}

pub fn run(args: SweepArgs) -> anyhow::Result<()> {
    for m in &args.methods {
        if parse_method(m).is_none() {
            return Err(BadArgument {
                option: "--methods".into(),
                message: format!(
                    "unknown method `{m}`, expected some of {}",
                    METHOD_NAMES.join(", ")
                ),
            }
            .into());
        }
    }
    if args.count == 0 || args.max_count == 0 {
        return Err(BadArgument {
            option: "--count/--max-count".into(),
            message: "found 0, expected at least 1".into(),
        }
        .into());
    }
    let site = load_site(&args.site)?;
    let settings = TwinSettings::new(FilterKind::Kalman)
        .with_runs(args.runs)?
        .with_background_sd(args.background_noise)?
        .with_seed(args.seed);
    let rank = rank_of(args.modes, args.energy)?;
    let (pipeline, warnings) = build_pipeline(&site, rank, &settings)?;
    let constraints = site_constraints(&site);
    let n_admissible = Feasibility::new(&pipeline.problem, &constraints)?.n_admissible_positions();
    let base_count = args.count.min(n_admissible).max(1);
    let ctx = pipeline.context(constraints, Criterion::D, settings, base_count, args.seed);

    let values = if !args.settings.is_empty() {
        args.settings.clone()
    } else {
        match args.over {
            StudyKind::Count => count_settings(args.max_count.min(n_admissible).max(1)),
            StudyKind::Budget => {
                let full = ctx.ranking(
                    Method::Greedy,
                    Limit::Count(args.max_count.min(n_admissible).max(1)),
                )?;
                let costs: Vec<f64> = full
                    .layout
                    .entries
                    .iter()
                    .filter(|e| !e.kept)
                    .filter_map(|e| pipeline.problem.find_block(e.candidate_idx, e.kind_idx))
                    .map(|b| pipeline.problem.block_cost[b])
                    .collect();
                let cheapest = costs
                    .iter()
                    .copied()
                    .filter(|&c| c > 0.0)
                    .fold(f64::INFINITY, f64::min);
                budget_settings(costs.iter().sum(), cheapest)
            }
            StudyKind::Noise => crate::sweep::NOISE_MULTIPLIERS.to_vec(),
            StudyKind::Interval => crate::sweep::INTERVAL_MULTIPLIERS.to_vec(),
            StudyKind::Background => crate::sweep::BACKGROUND_MULTIPLIERS
                .iter()
                .map(|m| m * args.background_noise)
                .collect(),
            StudyKind::Loss => (0..=3.min(base_count)).map(|f| f as f64).collect(),
        }
    };
    let methods: Vec<&str> = args.methods.iter().map(String::as_str).collect();
    let cells = cells_of(&[StudySpec::new(args.over, &methods, values)]);
    let shard = args.shard.unwrap_or(Shard::WHOLE);
    let options = format!(
        "sweep|{:?}|{:?}|{:?}|{}|{}|{}|{}|{}|{:?}|{}",
        args.over,
        args.methods,
        args.settings,
        args.max_count,
        args.count,
        args.runs,
        args.background_noise,
        args.energy,
        args.modes,
        args.seed
    );
    let journal = args.out.join(format!(
        ".sweep-journal-{:016x}.csv",
        crate::io::digest::site_inputs_digest(&site, &options)?
    ));
    let bar = StageBar::new(&format!("{} study", args.over), "cells");
    let outcomes = run_cells(&cells, &ctx, shard, Some(&journal), &mut |d, t| {
        bar.set(d, t)
    })?;
    bar.finish();
    let rows: Vec<Vec<String>> = outcomes.iter().map(CellOutcome::to_row).collect();
    let path = args.out.join("studies.csv");
    write_csv_table(&path, &TIDY_HEADER, &rows)?;

    println!(
        "{:<10} {:>10} {:>8} {:>12} {:>10} {:>10} {:>10}",
        "method", "setting", "sensors", "cost", "rmse mean", "rmse std", "vs free"
    );
    for o in &outcomes {
        println!(
            "{:<10} {:>10} {:>8} {:>12.0} {:>10.4} {:>10.4} {:>10.3}",
            o.cell.method,
            crate::sweep::format_setting(o.cell.setting),
            o.n_sensors,
            o.cost,
            o.time_mean_rmse.mean,
            o.time_mean_rmse.std,
            o.ratio_to_free()
        );
    }
    println!(
        "wrote {} ({} of {} cells)",
        path.display(),
        outcomes.len(),
        cells.len()
    );
    for w in &warnings {
        eprintln!("warning: {w}");
    }
    Ok(())
}
