//! `crowsnest rank`: rank candidate mounts for a site. Loads the site, computes (or reads) its
//! POD basis, builds the sensor blocks, turns the command-line limits into select constraints,
//! runs `select::rank`, prints the ranked table with the optimality gap, and writes
//! `layout.csv` through `io::layout_file`.

use std::path::PathBuf;

use anyhow::Context;
use clap::{Args, ValueEnum};

use crate::basis::{compute_for_site_with_warnings, PodOptions, Rank};
use crate::io::layout_file::{read_layout_csv, write_layout_csv};
use crate::io::{load_site, Site};
use crate::select::{
    prior_from_energies, problem_for_site_packed, rank, site_constraints, Criterion, Limit, Method,
    RankOptions, Ranking, SelectError,
};
use crate::sensors::build_packed;

use super::BadArgument;

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum CriterionArg {
    D,
    A,
    E,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum PriorArg {
    Energies,
    Flat,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum MethodArg {
    Greedy,
    Qr,
    Exchange,
    Random,
    Grid,
}

/// Rank where sensors should go: the most informative mounts first, with each one's gain,
/// the running cost and the gap to the best any layout of this size could reach.
#[derive(Debug, Args)]
pub struct RankArgs {
    /// Site directory or its site.toml.
    pub site: PathBuf,
    /// Number of new sensors (beyond the site's existing ones and --keep).
    #[arg(long, conflicts_with = "budget", required_unless_present = "budget")]
    pub count: Option<usize>,
    /// Budget for new sensors, site currency (kind cost + mounting cost).
    #[arg(long)]
    pub budget: Option<f64>,
    #[arg(long, value_enum, default_value = "d")]
    pub criterion: CriterionArg,
    /// Prior of the modal coefficients: POD energies, or flat (classical designs).
    #[arg(long, value_enum, default_value = "energies")]
    pub prior: PriorArg,
    #[arg(long, value_enum, default_value = "greedy")]
    pub method: MethodArg,
    /// A layout.csv whose sensors must be kept (placed first, after the site's existing ones).
    #[arg(long)]
    pub keep: Option<PathBuf>,
    /// Minimum distance between two sensors, m.
    #[arg(long, default_value_t = 0.0)]
    pub min_spacing: f64,
    /// At most this many sensors per zone label.
    #[arg(long)]
    pub max_per_zone: Option<usize>,
    /// At most this many sensors of each kind.
    #[arg(long)]
    pub max_per_kind: Option<usize>,
    /// Candidate ids that may not be used, separated by commas.
    #[arg(long, value_delimiter = ',')]
    pub remove: Vec<String>,
    /// Basis: keep the fewest modes holding this energy fraction.
    #[arg(long, default_value_t = 0.99)]
    pub energy: f64,
    /// Basis: keep this many POD modes instead.
    #[arg(long, conflicts_with = "energy")]
    pub modes: Option<usize>,
    /// Seed of the random baseline.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Where to write the ranked layout.
    #[arg(long, default_value = "layout.csv")]
    pub out: PathBuf,
}

fn candidate_idx(site: &Site, id: &str, option: &str) -> Result<usize, BadArgument> {
    site.candidates
        .iter()
        .position(|c| c.id == id)
        .ok_or_else(|| BadArgument {
            option: option.into(),
            message: format!("candidate {id:?} is not in the site's candidates.csv"),
        })
}

pub fn run(args: RankArgs) -> anyhow::Result<()> {
    let rank_of_basis = match args.modes {
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
    let limit = match (args.count, args.budget) {
        (Some(k), _) => Limit::Count(k),
        (None, Some(b)) => Limit::Budget(b),
        (None, None) => unreachable!("clap requires --count or --budget"),
    };
    let site = load_site(&args.site)?;
    let mut warnings = site.warnings.clone();
    let options = PodOptions {
        rank: rank_of_basis,
        ..PodOptions::default()
    };
    let basis =
        compute_for_site_with_warnings(&site, &options, &mut |_, _| {}, &mut |w| warnings.push(w))
            .context("computing the POD basis")?;
    // Packed blocks: one contiguous row matrix, no allocation per candidate.
    let packed = build_packed(&site, &basis)?;
    warnings.extend(packed.warnings.iter().cloned());
    let prior = prior_from_energies(
        &basis.energies,
        basis.n_modes(),
        matches!(args.prior, PriorArg::Flat),
    );
    let problem = problem_for_site_packed(&site, &packed, &prior)?;
    drop(packed);

    let mut constraints = site_constraints(&site);
    constraints.min_spacing = args.min_spacing;
    constraints.max_per_zone = args.max_per_zone;
    constraints.max_per_kind = args.max_per_kind;
    for id in &args.remove {
        constraints
            .removed
            .push(candidate_idx(&site, id.trim(), "--remove")?);
    }
    if let Some(path) = &args.keep {
        for row in read_layout_csv(path)? {
            let c = site
                .candidates
                .iter()
                .position(|c| c.id == row.candidate)
                .ok_or_else(|| SelectError::BadKeep {
                    candidate: row.candidate.clone(),
                    kind: row.kind.clone(),
                    reason: format!(
                        "{} lists it, but it is not a candidate of the site",
                        path.display()
                    ),
                })?;
            let k = site
                .kinds
                .iter()
                .position(|k| k.name == row.kind)
                .ok_or_else(|| SelectError::BadKeep {
                    candidate: row.candidate.clone(),
                    kind: row.kind.clone(),
                    reason: format!("{} lists a kind the site does not define", path.display()),
                })?;
            if !constraints.keep.contains(&(c, k)) {
                constraints.keep.push((c, k));
            }
        }
    }
    let rank_options = RankOptions {
        criterion: match args.criterion {
            CriterionArg::D => Criterion::D,
            CriterionArg::A => Criterion::A,
            CriterionArg::E => Criterion::E,
        },
        method: match args.method {
            MethodArg::Greedy => Method::Greedy,
            MethodArg::Qr => Method::Qr,
            MethodArg::Exchange => Method::Exchange,
            MethodArg::Random => Method::Random,
            MethodArg::Grid => Method::Grid,
        },
        limit,
        constraints,
        seed: args.seed,
        n_random_draws: 200,
    };
    let ranking = rank(&problem, &rank_options)?;
    warnings.extend(ranking.warnings.iter().cloned());
    print_ranking(&site, &ranking, basis.n_modes(), &args);
    let mut seen = std::collections::HashSet::new();
    for w in warnings.iter().filter(|w| seen.insert(w.as_str())) {
        eprintln!("{w}");
    }
    let rows = super::plan::layout_rows(&site, &ranking.layout);
    write_layout_csv(&args.out, &rows)?;
    println!("wrote {}", args.out.display());
    println!(
        "Caution: a planning aid from a reduced-order model, not a certified design. Siting follows \
         the WMO exposure guidance, local codes, aviation and port authorities' rules and lidar \
         laser-safety limits; have it checked by a licensed professional."
    );
    Ok(())
}

fn print_ranking(site: &Site, ranking: &Ranking, n_modes: usize, args: &RankArgs) {
    let second = if site.plane == crate::io::Plane::Xz {
        "z"
    } else {
        "y"
    };
    println!(
        "{}: {} ranking, criterion {}, {} prior, {n_modes} modes",
        site.name,
        ranking.method.name(),
        ranking.criterion.name(),
        if ranking.flat_prior {
            "flat"
        } else {
            "POD-energy"
        },
    );
    println!(
        "{:>4}  {:<16} {:<12} {:>10} {:>10} {:>12} {:>14} {:>12}",
        "rank",
        "candidate",
        "kind",
        "x m",
        format!("{second} m"),
        "gain",
        "criterion",
        "cost"
    );
    for e in &ranking.layout.entries {
        let c = &site.candidates[e.candidate_idx];
        println!(
            "{:>4}  {:<16} {:<12} {:>10.1} {:>10.1} {:>12.4} {:>14.4} {:>12.0}{}",
            e.rank,
            c.id,
            site.kinds[e.kind_idx].name,
            c.position[0],
            c.position[1],
            e.marginal_gain,
            e.cumulative_criterion,
            e.cumulative_cost,
            if e.kept { "  (kept)" } else { "" }
        );
    }
    println!(
        "D criterion log det J = {:.4}; upper bound over every layout within the {} = {:.4}; gap {:.4} nats{}",
        ranking.d_value,
        if args.count.is_some() { "count" } else { "budget" },
        ranking.bound.bound,
        ranking.gap,
        if ranking.bound.converged { "" } else { " (bound not fully converged: gap overstated)" }
    );
    println!(
        "  (the gap bounds how far this layout's information volume can be from the best possible: \
         a gap g means no layout can shrink the posterior volume by more than a factor e^(g/2) more)"
    );
}
