//! `crowsnest rescore`: an existing layout on a changed site. Lists the sensors that are lost
//! (mount removed, kind gone, or no reading left) and the lidar beams that are newly (partly)
//! blocked; scores the old layout on the old site and what survives on the new site, each
//! against its own simulated truth; and proposes the cheapest repairs that restore the old
//! error: additions in budget-aware cost-benefit order (the surviving sensors kept), and
//! one-for-one swaps (each lost or blocked sensor replaced by the best admissible mount
//! nearby).
//!
//! The error to restore. The two sites have different flows (a new building changes the
//! wind), so the old layout is scored on the old site against the old truth and the survivors
//! on the new site against the new truth, and both are stated. Their absolute errors are not
//! directly comparable: a calmer new flow can make a layout that lost a sensor look better
//! than before, a rougher one worse although nothing was lost. Two targets follow from the
//! old layout's upper band U (mean + 1 std of the time-mean field RMSE over the runs, old
//! site): *absolute*, U itself in field units (the accuracy the old layout delivered, what a
//! specification in m/s asks for); *ratio*, U × F_new / F_old with F the free-run error of
//! each site (the same share of the no-readings error removed). By default
//! (`--restore stricter`) the repaired layout must meet both, i.e. the smaller of the two;
//! `--restore absolute|ratio` picks one, `--target-rmse X` gives the target directly. All
//! three numbers are printed.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::io::{load_site, read_layout_csv, LayoutRow, Measurement, Site};
use crate::render::plan_report::money;
use crate::select::{
    evaluate_set, site_constraints, Constraints, Criterion, Feasibility, Limit, Method,
};
use crate::sweep::{SitePipeline, StudyContext};
use crate::twin::{FilterKind, ScoreResult, TwinSettings};

use super::pipeline::{build_pipeline, rank_of};
use super::BadArgument;

/// Modes kept by `--quick` unless `--modes` says otherwise (as `plan --quick`).
const QUICK_MODES: usize = 8;

/// How the error to restore is defined (see the module text).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Restore {
    /// Both of the others: the smaller target.
    Stricter,
    /// The old upper band × (new free-run error / old free-run error).
    Ratio,
    /// The old upper band in field units.
    Absolute,
}

/// Score an old layout on a changed site and propose the cheapest repairs.
#[derive(Debug, Args)]
pub struct RescoreArgs {
    /// The changed site (directory or site.toml).
    pub site: PathBuf,
    /// The layout to re-score (layout.csv; columns candidate and kind at least).
    #[arg(long)]
    pub layout: PathBuf,
    /// The site as it was: the layout is scored there to know the error to restore.
    #[arg(long)]
    pub before: Option<PathBuf>,
    /// The error to restore, field units (overrides the error scored on --before, which then
    /// still dates the blocked beams and places the lost sensors).
    #[arg(long)]
    pub target_rmse: Option<f64>,
    /// With --before: restore the old error in field units (absolute), as the same share of
    /// the free-run error (ratio), or both (stricter: the smaller target).
    #[arg(long, value_enum, default_value_t = Restore::Stricter)]
    pub restore: Restore,
    /// Most money to spend on additions (default: no limit beyond --max-additions).
    #[arg(long)]
    pub budget: Option<f64>,
    /// Largest number of sensors to add.
    #[arg(long, default_value_t = 6)]
    pub max_additions: usize,
    /// Largest distance (m) from a lost or blocked sensor to the mount that replaces it.
    #[arg(long, default_value_t = 75.0)]
    pub swap_radius: f64,
    /// Quick look: quick snapshots for demo sites, 8 modes and 8 runs unless given.
    #[arg(long)]
    pub quick: bool,
    /// Monte Carlo runs per layout (default 30; 8 with --quick).
    #[arg(long)]
    pub runs: Option<usize>,
    #[arg(long, default_value_t = 0.5)]
    pub background_noise: f64,
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
}

/// A layout sensor that no longer reads on the new site.
struct Lost {
    candidate: String,
    kind: String,
    /// Where it stood (from layout.csv, else the old site), when known.
    position: Option<[f64; 2]>,
    reason: String,
}

/// A surviving beam sensor with fewer range gates than before.
struct Blocked {
    pair: (usize, usize),
    lines: Vec<String>,
}

/// Blocks of the layout rows present on `site`; the rest with the reason they are gone.
fn resolve(
    site: &Site,
    pipeline: &SitePipeline,
    rows: &[LayoutRow],
    old_site: Option<&Site>,
) -> (Vec<(usize, usize)>, Vec<Lost>) {
    let mut present = Vec::new();
    let mut gone = Vec::new();
    for row in rows.iter().filter(|r| r.kept) {
        let position = if row.x.is_finite() && row.y.is_finite() {
            Some([row.x, row.y])
        } else {
            site.candidates
                .iter()
                .chain(old_site.map(|s| s.candidates.as_slice()).unwrap_or(&[]))
                .find(|c| c.id == row.candidate)
                .map(|c| c.position)
        };
        let lost = |reason: &str| Lost {
            candidate: row.candidate.clone(),
            kind: row.kind.clone(),
            position,
            reason: reason.to_string(),
        };
        let Some(candidate_idx) = site.candidates.iter().position(|c| c.id == row.candidate) else {
            gone.push(lost("mount removed from the site"));
            continue;
        };
        let Some(kind_idx) = site.kinds.iter().position(|k| k.name == row.kind) else {
            gone.push(lost("kind no longer defined"));
            continue;
        };
        if pipeline
            .problem
            .find_block(candidate_idx, kind_idx)
            .is_none()
        {
            gone.push(lost(
                "no reading any more (kind not allowed there, or every beam now blocked)",
            ));
            continue;
        }
        present.push((candidate_idx, kind_idx));
    }
    (present, gone)
}

/// Beams of the surviving sensors that keep fewer range gates than on the old site (or than
/// the kind's pattern, without an old site).
fn blocked_beams(site: &Site, present: &[(usize, usize)], old_site: Option<&Site>) -> Vec<Blocked> {
    let mut out = Vec::new();
    for &(c, k) in present {
        let Measurement::Beam(pattern) = &site.kinds[k].measurement else {
            continue;
        };
        let now = crate::sensors::beam_traces(site, c, k);
        let before = old_site.and_then(|old| {
            let oc = old
                .candidates
                .iter()
                .position(|x| x.id == site.candidates[c].id)?;
            let ok = old
                .kinds
                .iter()
                .position(|x| x.name == site.kinds[k].name)?;
            Some(crate::sensors::beam_traces(old, oc, ok))
        });
        let mut lines = Vec::new();
        for trace in &now {
            let was = match &before {
                Some(b) => b
                    .iter()
                    .find(|t| t.beam_idx == trace.beam_idx)
                    .map_or(pattern.n_gates, |t| t.gate_ranges.len()),
                None => pattern.n_gates,
            };
            if trace.gate_ranges.len() < was {
                lines.push(format!(
                    "beam {} (azimuth {:.0}°): {} of {} gates now (was {was}), stopped by {} at {:.0} m",
                    trace.beam_idx,
                    trace.azimuth_deg,
                    trace.gate_ranges.len(),
                    pattern.n_gates,
                    trace.stop,
                    trace.end_range
                ));
            }
        }
        if !lines.is_empty() {
            out.push(Blocked {
                pair: (c, k),
                lines,
            });
        }
    }
    out
}

fn blocks_of(ctx: &StudyContext<'_>, pairs: &[(usize, usize)]) -> Vec<usize> {
    pairs
        .iter()
        .filter_map(|&(c, k)| ctx.problem.find_block(c, k))
        .collect()
}

fn band(score: &ScoreResult) -> f64 {
    score.mean_rmse.mean + score.mean_rmse.std
}

fn describe_score(score: &ScoreResult, unit: &str) -> String {
    format!(
        "{:.3} ± {:.3} {unit} (upper band {:.3}), free run {:.3} {unit}, ratio to free run {:.2}",
        score.mean_rmse.mean,
        score.mean_rmse.std,
        band(score),
        score.free_mean_rmse.mean,
        score.mean_rmse.mean / score.free_mean_rmse.mean
    )
}

/// A proposed repair: what it adds or replaces, its cost and score.
struct Repair {
    what: String,
    cost: f64,
    band: f64,
}

pub fn run(args: RescoreArgs) -> anyhow::Result<()> {
    let n_runs = args.runs.unwrap_or(if args.quick { 8 } else { 30 });
    let settings = TwinSettings::new(FilterKind::Kalman)
        .with_runs(n_runs)?
        .with_background_sd(args.background_noise)?
        .with_seed(args.seed);
    let modes = args
        .modes
        .or(if args.quick { Some(QUICK_MODES) } else { None });
    let rank = rank_of(modes, args.energy)?;
    if args.before.is_none() && args.target_rmse.is_none() {
        return Err(BadArgument {
            option: "--before / --target-rmse".into(),
            message: "the error to restore is the one the layout reached before the change, so rescore needs the old site to score the layout there (--before OLD_SITE) or that error directly (--target-rmse X, field units)".into(),
        }
        .into());
    }
    if let Some(t) = args.target_rmse {
        if !(t.is_finite() && t > 0.0) {
            return Err(BadArgument {
                option: "--target-rmse".into(),
                message: format!("found {t}, expected a number > 0"),
            }
            .into());
        }
    }
    if let Some(b) = args.budget {
        if !(b.is_finite() && b > 0.0) {
            return Err(BadArgument {
                option: "--budget".into(),
                message: format!("found {b}, expected a number > 0"),
            }
            .into());
        }
    }
    if !(args.swap_radius.is_finite() && args.swap_radius >= 0.0) {
        return Err(BadArgument {
            option: "--swap-radius".into(),
            message: format!("found {}, expected metres >= 0", args.swap_radius),
        }
        .into());
    }
    let rows = read_layout_csv(&args.layout)?;
    let n_rows = rows.iter().filter(|r| r.kept).count();

    // The layout as it was, on the old site against the old site's truth.
    let mut old_site = None;
    let mut old_score = None;
    if let Some(before) = &args.before {
        super::synth_if_needed(before, args.quick)?;
        let site = load_site(before)?;
        let (pipeline, _) = build_pipeline(&site, rank, &settings)?;
        let (pairs, gone) = resolve(&site, &pipeline, &rows, None);
        if !gone.is_empty() {
            return Err(BadArgument {
                option: "--before".into(),
                message: format!(
                    "the layout does not fit the old site: {}",
                    gone.iter()
                        .map(|g| format!("{} ({}): {}", g.candidate, g.kind, g.reason))
                        .collect::<Vec<_>>()
                        .join("; ")
                ),
            }
            .into());
        }
        let ctx = pipeline.context(
            site_constraints(&site),
            Criterion::D,
            settings.clone(),
            1,
            args.seed,
        );
        old_score = Some(ctx.score_base(&blocks_of(&ctx, &pairs))?);
        old_site = Some(site);
    }

    super::synth_if_needed(&args.site, args.quick)?;
    let site = load_site(&args.site)?;
    let currency = site.currency.clone();
    let unit = site
        .channels
        .first()
        .map(|c| c.unit.clone())
        .unwrap_or_default();
    let (pipeline, warnings) = build_pipeline(&site, rank, &settings)?;
    let (present, gone) = resolve(&site, &pipeline, &rows, old_site.as_ref());
    let blocked = blocked_beams(&site, &present, old_site.as_ref());

    println!(
        "Re-scoring the {n_rows} sensors of {} on `{}`{}.",
        args.layout.display(),
        site.name,
        old_site
            .as_ref()
            .map(|o| format!(" (laid out for `{}`)", o.name))
            .unwrap_or_default()
    );
    println!();
    if gone.is_empty() {
        println!("Sensors lost: none.");
    } else {
        println!("Sensors lost ({}):", gone.len());
        for g in &gone {
            let at = g
                .position
                .map(|p| format!(" at ({:.1}, {:.1})", p[0], p[1]))
                .unwrap_or_default();
            println!("  {} ({}){at}: {}", g.candidate, g.kind, g.reason);
        }
    }
    let blocked_words = if old_site.is_some() {
        "Beams newly (partly) blocked"
    } else {
        "Beams (partly) blocked"
    };
    if blocked.is_empty() {
        println!("{blocked_words}: none.");
    } else {
        println!("{blocked_words}:");
        for b in &blocked {
            for line in &b.lines {
                println!(
                    "  {} ({}) {line}",
                    site.candidates[b.pair.0].id, site.kinds[b.pair.1].name
                );
            }
        }
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
    let kept_blocks = blocks_of(&ctx, &constraints.keep);
    let now = ctx.score_base(&kept_blocks)?;
    println!();
    println!(
        "Time-mean field RMSE, mean ± 1 std over {n_runs} Monte Carlo runs, each site against its own simulated truth:"
    );
    if let (Some(old), Some(old_site)) = (&old_score, &old_site) {
        println!(
            "  old layout on `{}`: {}",
            old_site.name,
            describe_score(old, &unit)
        );
    }
    println!(
        "  surviving sensors on `{}`: {}",
        site.name,
        describe_score(&now, &unit)
    );
    let target = match (&old_score, args.target_rmse) {
        (_, Some(t)) => {
            println!("Target: upper band <= {t:.3} {unit} (given with --target-rmse).");
            t
        }
        (Some(old), None) => {
            let absolute = band(old);
            let scale = now.free_mean_rmse.mean / old.free_mean_rmse.mean;
            let ratio = absolute * scale;
            println!(
                "Error to restore: absolute {absolute:.3} {unit} (the old upper band); ratio {ratio:.3} {unit} (the same share of the free-run error: × {:.3} / {:.3} = {scale:.3}).",
                now.free_mean_rmse.mean, old.free_mean_rmse.mean
            );
            let (t, words) = match args.restore {
                Restore::Stricter => (absolute.min(ratio), "the stricter of the two"),
                Restore::Ratio => (ratio, "ratio, from --restore ratio"),
                Restore::Absolute => (absolute, "absolute, from --restore absolute"),
            };
            println!("Target: upper band <= {t:.3} {unit} ({words}).");
            t
        }
        (None, None) => unreachable!("checked above"),
    };
    let now_band = band(&now);
    if now_band <= target {
        println!(
            "The surviving sensors meet it (upper band {now_band:.3} {unit}); nothing needs to be added{}.",
            if gone.is_empty() && blocked.is_empty() {
                ""
            } else {
                ", although sensors were lost or blocked"
            }
        );
        print_warnings(&warnings);
        return Ok(());
    }
    println!("The surviving sensors miss it (upper band {now_band:.3} {unit}).");

    // Additions: cost-benefit greedy under a rising budget, surviving sensors kept.
    println!();
    println!(
        "Cheapest additions (cost-benefit greedy under a rising budget, surviving sensors kept):"
    );
    let mut repairs: Vec<Repair> = Vec::new();
    let feas = Feasibility::new(ctx.problem, &constraints)?;
    let cheapest = (0..ctx.problem.n_blocks())
        .filter(|&b| feas.can_add(b))
        .map(|b| ctx.problem.block_cost[b])
        .fold(f64::INFINITY, f64::min);
    let mut seen: Vec<Vec<usize>> = Vec::new();
    let mut level = cheapest;
    let mut restored = false;
    while level.is_finite() && args.budget.is_none_or(|b| level <= b * (1.0 + 1e-12)) {
        let ranking = ctx.ranking(Method::Greedy, Limit::Budget(level))?;
        let added: Vec<_> = ranking.layout.entries.iter().filter(|e| !e.kept).collect();
        if added.len() > args.max_additions {
            break;
        }
        let blocks = ctx.layout_blocks(&ranking.layout);
        if !added.is_empty() && !seen.contains(&blocks) {
            seen.push(blocks.clone());
            let score = ctx.score_base(&blocks)?;
            let cost: f64 = added
                .iter()
                .filter_map(|e| ctx.problem.find_block(e.candidate_idx, e.kind_idx))
                .map(|b| ctx.problem.block_cost[b])
                .sum();
            let names = added
                .iter()
                .map(|e| {
                    format!(
                        "{} ({})",
                        site.candidates[e.candidate_idx].id, site.kinds[e.kind_idx].name
                    )
                })
                .collect::<Vec<_>>()
                .join(", ");
            let b = band(&score);
            println!(
                "  budget {:>12}: + {names}: {} for upper band {b:.3} {unit}{}",
                money(level, ""),
                money(cost, &currency),
                if b <= target {
                    "  meets the target"
                } else {
                    ""
                }
            );
            if b <= target {
                repairs.push(Repair {
                    what: format!("add {names}"),
                    cost,
                    band: b,
                });
                restored = true;
                break;
            }
        }
        level *= 1.25;
    }
    if !restored {
        println!(
            "  no addition of up to {} sensors{} restores it",
            args.max_additions,
            args.budget
                .map(|b| format!(" within {}", money(b, &currency)))
                .unwrap_or_default()
        );
    }

    // Swaps: each lost or blocked sensor replaced by the best admissible mount nearby.
    println!();
    println!(
        "One-for-one swaps (admissible mount within {} m of the sensor it replaces: the same kind adding most information, else the most information per unit cost):",
        args.swap_radius
    );
    let mut swapped_pairs = constraints.keep.clone();
    let mut swap_cost = 0.0;
    let mut swap_lines = Vec::new();
    type SwapTarget = (
        String,
        Option<[f64; 2]>,
        Option<usize>,
        Option<(usize, usize)>,
    );
    let mut targets: Vec<SwapTarget> = gone
        .iter()
        .map(|g| {
            (
                format!("{} ({}, lost)", g.candidate, g.kind),
                g.position,
                site.kinds.iter().position(|k| k.name == g.kind),
                None,
            )
        })
        .collect();
    for b in &blocked {
        targets.push((
            format!(
                "{} ({}, beams blocked)",
                site.candidates[b.pair.0].id, site.kinds[b.pair.1].name
            ),
            Some(site.candidates[b.pair.0].position),
            Some(b.pair.1),
            Some(b.pair),
        ));
    }
    // No sensor being replaced (a blocked beam sensor) is a replacement for another.
    let replaced: Vec<(usize, usize)> = targets.iter().filter_map(|t| t.3).collect();
    for (label, position, kind, pair) in &targets {
        let Some(position) = position else {
            swap_lines.push(format!("  {label}: position unknown, no swap proposed"));
            continue;
        };
        let others: Vec<(usize, usize)> = swapped_pairs
            .iter()
            .copied()
            .filter(|p| Some(*p) != *pair)
            .collect();
        match best_swap(
            &ctx,
            &constraints,
            &others,
            *kind,
            &replaced,
            *position,
            args.swap_radius,
        ) {
            Some((block, distance)) => {
                let (c, k) = (
                    ctx.problem.block_candidate[block],
                    ctx.problem.block_kind[block],
                );
                let cost = ctx.problem.block_cost[block];
                swap_lines.push(format!(
                    "  {label} -> {} ({}), {distance:.0} m away, {}",
                    site.candidates[c].id,
                    site.kinds[k].name,
                    money(cost, &currency)
                ));
                swap_cost += cost;
                swapped_pairs = others;
                swapped_pairs.push((c, k));
            }
            None => swap_lines.push(format!(
                "  {label}: no admissible mount within {} m",
                args.swap_radius
            )),
        }
    }
    for line in &swap_lines {
        println!("{line}");
    }
    if swapped_pairs != constraints.keep {
        let blocks = blocks_of(&ctx, &swapped_pairs);
        let score = ctx.score_base(&blocks)?;
        let b = band(&score);
        println!(
            "  with these swaps: {} for upper band {b:.3} {unit}: {}",
            money(swap_cost, &currency),
            if b <= target {
                "meets the target"
            } else {
                "misses the target"
            }
        );
        if b <= target {
            repairs.push(Repair {
                what: "the swaps above".into(),
                cost: swap_cost,
                band: b,
            });
        }
    } else if targets.is_empty() {
        println!("  none: no sensor was lost or blocked");
    }

    println!();
    match repairs
        .iter()
        .min_by(|a, b| a.cost.total_cmp(&b.cost).then(a.band.total_cmp(&b.band)))
    {
        Some(best) => println!(
            "Cheapest repair found: {} for {} (upper band {:.3} {unit} against {target:.3} {unit}).",
            best.what,
            money(best.cost, &currency),
            best.band
        ),
        None => println!(
            "No repair studied restores the old error; raise --max-additions, --budget or --swap-radius, or re-plan the site (crowsnest plan)."
        ),
    }
    print_warnings(&warnings);
    Ok(())
}

/// The replacement for a sensor of kind `kind` (when the site still has it) that stood at
/// `position`: among the admissible blocks within `radius`, like for like when a mount of the
/// same kind is free (the one adding most D information to the sensors `others`), otherwise
/// the block with the largest D gain per unit cost. Returns the block and its distance.
fn best_swap(
    ctx: &StudyContext<'_>,
    constraints: &Constraints,
    others: &[(usize, usize)],
    kind: Option<usize>,
    replaced: &[(usize, usize)],
    position: [f64; 2],
    radius: f64,
) -> Option<(usize, f64)> {
    let replaced = blocks_of(ctx, replaced);
    let swap_constraints = Constraints {
        keep: others.to_vec(),
        ..constraints.clone()
    };
    let feas = Feasibility::new(ctx.problem, &swap_constraints).ok()?;
    let base = blocks_of(ctx, others);
    let before = evaluate_set(ctx.problem, &base, Criterion::D);
    let nearby: Vec<(usize, f64, f64)> = (0..ctx.problem.n_blocks())
        .filter(|&b| feas.can_add(b) && !replaced.contains(&b))
        .filter_map(|b| {
            let p = ctx.problem.places[ctx.problem.block_candidate[b]].position;
            let d = ((p[0] - position[0]).powi(2) + (p[1] - position[1]).powi(2)).sqrt();
            (d <= radius).then_some((b, d))
        })
        .map(|(b, d)| {
            let mut set = base.clone();
            set.push(b);
            (b, d, evaluate_set(ctx.problem, &set, Criterion::D) - before)
        })
        .collect();
    let same_kind: Vec<&(usize, f64, f64)> = nearby
        .iter()
        .filter(|x| Some(ctx.problem.block_kind[x.0]) == kind)
        .collect();
    let cost = |b: usize| ctx.problem.block_cost[b].max(1e-9);
    let pick = if same_kind.is_empty() {
        nearby.iter().max_by(|a, b| {
            (a.2 / cost(a.0))
                .total_cmp(&(b.2 / cost(b.0)))
                .then(b.0.cmp(&a.0))
        })
    } else {
        same_kind.into_iter().max_by(|a, b| {
            a.2.total_cmp(&b.2)
                .then(cost(b.0).total_cmp(&cost(a.0)))
                .then(b.0.cmp(&a.0))
        })
    };
    pick.map(|&(b, d, _)| (b, d))
}

fn print_warnings(warnings: &[String]) {
    for w in warnings {
        eprintln!("warning: {w}");
    }
}
