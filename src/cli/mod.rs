//! `cli` is the only module that touches arguments, the environment and the terminal. It parses
//! the command line with clap into raw arguments, turns them into typed library calls, prints
//! summaries and maps the outcome to an exit code: 0 success, 2 bad input, 1 internal error
//! (including a panic, which is always a bug).

use std::ffi::OsString;
use std::process::ExitCode;

use clap::{CommandFactory, FromArgMatches, Parser, Subcommand};

mod basis;
mod check;
mod merge;
mod pipeline;
mod plan;
mod progress;
mod rank;
mod rescore;
mod score;
mod sweep;
pub mod synth;

/// Exit code for input the user can fix (bad file, bad value, bad argument).
pub const EXIT_BAD_INPUT: u8 = 2;
/// Exit code for a bug in crowsnest.
pub const EXIT_INTERNAL: u8 = 1;

#[derive(Debug, Parser)]
#[command(
    name = "crowsnest",
    version,
    about = "Plan where to mount wind sensors so a reduced-order wind model can be corrected live.",
    long_about = "crowsnest reads a site (domain, wind snapshots or a precomputed POD basis, candidate \
mounts, sensor kinds, exclusion zones), ranks where anemometers and lidar beams should go so the \
modal coefficients of the wind model are observable, and scores layouts with Monte Carlo twin \
experiments.\n\nA planning aid, not a certified design: siting must follow the WMO exposure \
guidance, local codes and the rules of port, aviation and laser-safety authorities."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    #[command(about = basis::ABOUT, long_about = basis::LONG_ABOUT)]
    Basis(basis::BasisArgs),
    /// Check a site's files before planning and print what they describe.
    ///
    /// Reads site.toml and every file it names: the domain (grid or point cloud, solids,
    /// obstacles), the channels, the wind snapshots or the imported POD basis, the sensor
    /// kinds, the candidate mounts, the exclusion zones and the sensors already on site.
    /// Every snapshot value is read and must be a finite number. The first problem stops the
    /// check with one line naming the file, the row or key, what was found and what was
    /// expected (exit code 2). Findings that do not stop planning, such as a candidate inside
    /// an exclusion zone, are listed as warnings. Nothing is written.
    Check(check::CheckArgs),
    /// Join the study tables of `sweep --shard i/N` runs into one table.
    Merge(merge::MergeArgs),
    /// Score a layout with Monte Carlo twin experiments (reduced model + filter).
    Score(score::ScoreArgs),
    /// The whole job: basis, ranked layouts by every method, twin scores, studies, report.
    Plan(plan::PlanArgs),
    /// Generate the velocity snapshots of a `[synth]` site with the built-in 2-D flow solver.
    Synth(synth::SynthArgs),
    /// Re-score an old layout on a changed site and propose additions that restore its error.
    Rescore(rescore::RescoreArgs),
    /// One trade-off study (count, budget, noise, interval, background, loss) as a table.
    Sweep(sweep::SweepArgs),
    /// Rank candidate mounts for a site (D/A/E criteria, greedy, QR, exchange, baselines).
    Rank(rank::RankArgs),
}

/// The clap command of [`Cli`], with every option value allowed to start with `-` when it
/// is a number: `--energy -0.5` or `--budget -1` then reach crowsnest's own range checks
/// (one line naming the option, exit code 2) instead of clap's "unexpected argument '-0'".
fn command() -> clap::Command {
    Cli::command().mut_subcommands(|sub| {
        let takes_values: Vec<clap::Id> = sub
            .get_arguments()
            .filter(|arg| arg.get_action().takes_values())
            .map(|arg| arg.get_id().clone())
            .collect();
        takes_values.into_iter().fold(sub, |sub, id| {
            sub.mut_arg(id, |arg| arg.allow_negative_numbers(true))
        })
    })
}

/// Runs crowsnest with the given arguments (the first is the program name).
pub fn main_with_args<I, T>(args: I) -> ExitCode
where
    I: IntoIterator<Item = T>,
    T: Into<OsString> + Clone,
{
    let parsed = command()
        .try_get_matches_from(args)
        .and_then(|mut matches| Cli::from_arg_matches_mut(&mut matches))
        .map_err(|err| err.format(&mut command()));
    let cli = match parsed {
        Ok(cli) => cli,
        Err(err) => {
            let _ = err.print();
            return if err.use_stderr() {
                ExitCode::from(EXIT_BAD_INPUT)
            } else {
                ExitCode::SUCCESS
            };
        }
    };
    // faer's operators use the global setting; a fixed split keeps results independent of
    // the machine's thread count (the pool size then only changes the speed).
    faer::set_global_parallelism(faer::Par::rayon(crate::basis::KERNEL_PARTS));
    match std::panic::catch_unwind(|| run(cli)) {
        Ok(Ok(())) => ExitCode::SUCCESS,
        Ok(Err(err)) => {
            eprintln!("error: {err:#}");
            ExitCode::from(exit_code_for(&err))
        }
        Err(_) => {
            eprintln!("error: internal error (a bug in crowsnest); please report it");
            ExitCode::from(EXIT_INTERNAL)
        }
    }
}

fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Basis(args) => basis::run(&args),
        Command::Check(args) => check::run(args),
        Command::Merge(args) => merge::run(args),
        Command::Score(args) => score::run(args),
        Command::Plan(args) => plan::run(args),
        Command::Synth(args) => synth::run(args),
        Command::Sweep(args) => sweep::run(args),
        Command::Rescore(args) => rescore::run(args),
        Command::Rank(args) => rank::run(args),
    }
}

/// Demo sites (`[synth]` in site.toml) get their snapshots from the built-in flow solver
/// when they are missing or out of date, so `plan` works on a fresh clone.
fn synth_if_needed(site_path: &std::path::Path, quick: bool) -> anyhow::Result<()> {
    if let Ok(site) = crate::io::load_site_for_synth(site_path) {
        if site.synth.is_some() {
            synth::ensure_snapshots(site_path, quick, false, true)?;
        }
    }
    Ok(())
}

/// Bad input (exit 2) when any error in the chain is a user-facing input error.
fn exit_code_for(err: &anyhow::Error) -> u8 {
    let bad_input = err.chain().any(|cause| {
        cause.downcast_ref::<crate::io::IoError>().is_some()
            || cause
                .downcast_ref::<crate::sensors::SensorError>()
                .is_some()
            || cause.downcast_ref::<BadArgument>().is_some()
            || cause.downcast_ref::<crate::synth::SynthError>().is_some()
            || cause
                .downcast_ref::<crate::twin::TwinError>()
                .is_some_and(|e| e.is_bad_input())
            || cause.downcast_ref::<crate::select::SelectError>().is_some()
            || cause
                .downcast_ref::<crate::sweep::SweepError>()
                .is_some_and(|e| e.is_bad_input())
            || cause
                .downcast_ref::<crate::basis::BasisError>()
                .is_some_and(|e| e.is_bad_input())
    });
    if bad_input {
        EXIT_BAD_INPUT
    } else {
        EXIT_INTERNAL
    }
}

/// A command-line value that parsed but makes no sense (for instance `--energy 1.5`).
#[derive(Debug, thiserror::Error)]
#[error("{option}: {message}")]
pub struct BadArgument {
    pub option: String,
    pub message: String,
}
