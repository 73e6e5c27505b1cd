//! `crowsnest score`: Monte Carlo twin experiments of one layout. Loads the site, computes its
//! POD basis and the truth projection, builds the layout's sensor blocks, runs the filter
//! `--runs` times (rayon, progress bar) and prints a summary table; writes `curves.csv`
//! (per-step statistics) and `runs.csv` (per-run summaries) into `--out`.

use std::path::PathBuf;

use anyhow::Context;
use clap::{Args, ValueEnum};
use indicatif::{ProgressBar, ProgressStyle};

use crate::basis::{pod, project, PodOptions, Rank};
use crate::io::table::write_csv_table;
use crate::io::{load_site, open_snapshots, read_layout_csv};
use crate::sensors::build_blocks;
use crate::twin::metrics::Summary;
use crate::twin::tables::{curves_rows, runs_rows, CURVES_HEADER, RUNS_HEADER};
use crate::twin::{
    layout_blocks, layout_id_of, score_layout, FilterKind, ModelKind, NudgeGain, ScoreResult,
    TwinSettings,
};

use super::BadArgument;

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum FilterArg {
    Kalman,
    Enkf,
    Oi,
    Nudge,
    Free,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ModelArg {
    Linear,
    Quadratic,
}

/// Score a layout with twin experiments: assimilate noisy readings of exactly these sensors at
/// their sampling intervals and measure how well the held-out wind field is recovered.
#[derive(Debug, Args)]
pub struct ScoreArgs {
    /// Site directory or its site.toml (needs [snapshots]: they are the truth).
    pub site: PathBuf,
    /// The layout to score (layout.csv: columns candidate and kind at least).
    #[arg(long)]
    pub layout: PathBuf,
    /// Monte Carlo runs.
    #[arg(long, default_value_t = 30)]
    pub runs: usize,
    #[arg(long, value_enum, default_value = "kalman")]
    pub filter: FilterArg,
    /// Reduced model; default linear, quadratic for enkf.
    #[arg(long, value_enum)]
    pub model: Option<ModelArg>,
    /// Multiplies every kind's noise standard deviation.
    #[arg(long, default_value_t = 1.0)]
    pub noise_scale: f64,
    /// Every kind reads every N model steps (overrides the kinds' intervals).
    #[arg(long)]
    pub every: Option<usize>,
    /// Field RMSE of the initial-state error, field units (e.g. m/s).
    #[arg(long, default_value_t = 0.5)]
    pub background_noise: f64,
    /// EnKF ensemble size.
    #[arg(long, default_value_t = 32)]
    pub ensemble: usize,
    /// EnKF multiplicative inflation (≥ 1).
    #[arg(long, default_value_t = 1.02)]
    pub inflation: f64,
    /// Nudging strength in (0, 1]; tuned on the training span when absent.
    #[arg(long)]
    pub nudge_gain: Option<f64>,
    /// Fraction of the snapshots (from the start) used to fit the model.
    #[arg(long, default_value_t = 0.7)]
    pub train_fraction: f64,
    /// Tikhonov weight of the model fit (relative to the feature scale).
    #[arg(long, default_value_t = 1e-6)]
    pub tikhonov: f64,
    /// Basis: keep this many POD modes (instead of --energy).
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    /// Basis: keep the fewest modes holding this energy fraction.
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    /// Master seed of every random stream.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Directory for curves.csv and runs.csv.
    #[arg(long, default_value = "score-out")]
    pub out: PathBuf,
}

fn settings_from(args: &ScoreArgs) -> anyhow::Result<TwinSettings> {
    let filter = match args.filter {
        FilterArg::Kalman => FilterKind::Kalman,
        FilterArg::Enkf => FilterKind::Enkf,
        FilterArg::Oi => FilterKind::Oi,
        FilterArg::Nudge => FilterKind::Nudge,
        FilterArg::Free => FilterKind::Free,
    };
    let mut s = TwinSettings::new(filter);
    if let Some(m) = args.model {
        s = s.with_model(match m {
            ModelArg::Linear => ModelKind::Linear,
            ModelArg::Quadratic => ModelKind::Quadratic,
        })?;
    }
    let nudge = args
        .nudge_gain
        .map(NudgeGain::Fixed)
        .unwrap_or(NudgeGain::Tuned);
    Ok(s.with_runs(args.runs)?
        .with_noise_scale(args.noise_scale)?
        .with_every(args.every)?
        .with_background_sd(args.background_noise)?
        .with_ensemble(args.ensemble)?
        .with_inflation(args.inflation)?
        .with_nudge_gain(nudge)?
        .with_train_fraction(args.train_fraction)?
        .with_tikhonov(args.tikhonov)?
        .with_seed(args.seed))
}

pub fn run(args: ScoreArgs) -> anyhow::Result<()> {
    let settings = settings_from(&args)?;
    let rank = match args.modes {
        Some(0) => {
            return Err(BadArgument {
                option: "--modes".into(),
                message: "found 0, expected at least 1".into(),
            }
            .into())
        }
        Some(n) => Rank::Count(n),
        None => Rank::EnergyFraction(args.energy),
    };
    let site = load_site(&args.site)?;
    let layout_rows = read_layout_csv(&args.layout)?;
    let mut source = open_snapshots(&site)?;
    let options = PodOptions {
        rank,
        ..PodOptions::default()
    };
    let basis = pod(
        source.as_mut(),
        site.domain.weights(),
        site.n_channels(),
        &options,
        &mut |_, _| {},
    )
    .context("computing the POD basis")?;
    let projection =
        project(&basis, source.as_mut(), &mut |_, _| {}).context("projecting the snapshots")?;
    let block_set = build_blocks(&site, &basis)?;
    let blocks = layout_blocks(&site, &block_set.blocks, &layout_rows)
        .with_context(|| format!("layout {}", args.layout.display()))?;
    // The seed id comes from the sensors, not the file name (same draws as a sweep cell).
    let layout_id = layout_id_of(&site, &blocks);

    // The runs finish in blocks (32 at a time for the gain filters, one by one for the EnKF):
    // the bar moves per block and counts runs.
    let bar = ProgressBar::new(settings.run.n_runs as u64);
    bar.set_style(
        ProgressStyle::with_template("{prefix} [{bar:30}] {pos}/{len} runs done, {eta} left")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    bar.set_prefix("twin runs");
    let progress = |done: usize, _total: usize| bar.set_position(done as u64);
    let result = score_layout(
        &site,
        &basis,
        &projection,
        source.as_mut(),
        &blocks,
        &layout_id,
        &settings,
        &progress,
    )?;
    bar.finish_and_clear();

    let unit = field_unit(&site);
    print_summary(
        &result,
        &args.layout.display().to_string(),
        blocks.len(),
        basis.n_modes(),
        &unit,
    );
    let curves = args.out.join("curves.csv");
    let runs = args.out.join("runs.csv");
    write_csv_table(&curves, &CURVES_HEADER, &curves_rows(&result))?;
    write_csv_table(&runs, &RUNS_HEADER, &runs_rows(&result))?;
    println!("wrote {} and {}", curves.display(), runs.display());
    println!(
        "Caution: a planning aid from a reduced-order model, not a certified design. Siting follows \
         the WMO exposure guidance, local codes, aviation and port authorities' rules and lidar \
         laser-safety limits; have it checked by a licensed professional."
    );
    Ok(())
}

/// The field unit when every channel shares it, else "field units".
fn field_unit(site: &crate::io::Site) -> String {
    match site.channels.first() {
        Some(first) if site.channels.iter().all(|c| c.unit == first.unit) => first.unit.clone(),
        _ => "field units".into(),
    }
}

fn print_summary(result: &ScoreResult, layout: &str, n_sensors: usize, n_modes: usize, unit: &str) {
    let s = &result.settings;
    let m = &result.model_report;
    println!(
        "layout {}: {} sensors ({} reading rows), {} POD modes; filter {}, model {}",
        layout,
        n_sensors,
        result.n_rows,
        n_modes,
        s.filter.name(),
        m.kind.name()
    );
    match m.damping_scale {
        Some(scale) => println!(
            "model: spectral radius {:.4} > 1, damped by {:.4} to {:.4}",
            m.fitted_spectral_radius, scale, m.spectral_radius
        ),
        None => println!(
            "model: spectral radius {:.4} (stable, not damped)",
            m.spectral_radius
        ),
    }
    if let Some(w) = m.quadratic_tikhonov {
        println!("model: quadratic Tikhonov weight {w:.1e}");
    }
    println!(
        "split: {} training, {} test snapshots; {} runs, seed {}, noise x{}, background {} {}",
        result.split.n_train,
        result.split.n_test,
        s.n_runs,
        s.seed,
        s.noise_scale,
        s.background_sd,
        unit
    );
    if let Some(g) = result.nudge_strength {
        println!("nudging strength: {g:.4}");
    }
    println!(
        "{:<28} {:>10} {:>10} {:>10} {:>10} {:>10}",
        format!("field RMSE ({unit})"),
        "mean",
        "std",
        "p5",
        "p50",
        "p95"
    );
    let line = |name: &str, v: &Summary| {
        println!(
            "{:<28} {:>10.4} {:>10.4} {:>10.4} {:>10.4} {:>10.4}",
            name, v.mean, v.std, v.p5, v.p50, v.p95
        )
    };
    line("time-mean", &result.mean_rmse);
    line("final step", &result.final_rmse);
    line("free run, time-mean", &result.free_mean_rmse);
    line("ratio to free run (-)", &result.ratio_to_free);
    if result.mean_spread.n > 0 {
        // The spread estimates the modal error (the truncation residual is outside the
        // filter's state), so the two stand together.
        line("modal error, time-mean", &result.mean_modal_rmse);
        line("filter spread, time-mean", &result.mean_spread);
    }
    println!(
        "truncation floor (time-mean): {:.4} {unit}",
        result.truncation_rmse
    );
    if result.n_diverged > 0 {
        // Count per reason, in order of first appearance.
        let mut reasons: Vec<(String, usize, usize)> = Vec::new();
        for d in result.runs.iter().filter_map(|r| r.divergence.as_ref()) {
            match reasons.iter_mut().find(|(r, _, _)| *r == d.reason) {
                Some(entry) => entry.1 += 1,
                None => reasons.push((d.reason.clone(), 1, d.step)),
            }
        }
        println!(
            "diverged runs: {} of {} (left out of the filter's statistics; see runs.csv)",
            result.n_diverged,
            result.runs.len()
        );
        for (reason, count, step) in reasons {
            println!("  {count} run(s): {reason} (first at test step {step})");
        }
    } else {
        println!("diverged runs: 0");
    }
}
