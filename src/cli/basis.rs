//! `crowsnest basis SITE`: computes (or imports and truncates) the POD basis of a site, writes
//! `modes.npy`, `mean.npy` and `energies.csv`, and prints a short energy table. Raw clap
//! arguments become a validated `basis::PodOptions` here; the library does the work and reports
//! progress to an indicatif bar on stderr.

use std::path::{Path, PathBuf};

use anyhow::Context;
use indicatif::{ProgressBar, ProgressStyle};

use super::BadArgument;
use crate::basis::{self, Basis, PodMethod, PodOptions, Rank};
use crate::io::{self, FlowSource, Site};

/// Energy fraction kept when neither `--energy` nor `--modes` is given.
const DEFAULT_ENERGY: f64 = 0.99;
/// Rows of the energy table printed in full before it is shortened.
const TABLE_ROWS: usize = 12;

/// One-line description for `crowsnest --help`.
pub const ABOUT: &str =
    "Compute the mean wind field and its POD modes (the reduced-order basis) of a site";

/// Full description for `crowsnest basis --help`.
pub const LONG_ABOUT: &str = "Computes the mean field and the proper orthogonal decomposition \
(POD) modes of the site's wind snapshots, ranked by energy and orthonormal in the area-weighted \
inner product (solid cells excluded). Writes modes.npy, mean.npy and energies.csv (see \
docs/formats.md) and prints how much of the fluctuation energy the kept modes carry. For a site \
that brings its own basis ([basis] in site.toml) the files are checked, truncated to the rank \
asked and written out.\n\nThe basis describes only the flows present in the snapshots: a wind \
direction, speed or stability the snapshots never saw is not represented, and sensors planned on \
it inherit that gap.";

#[derive(Debug, clap::Args)]
pub struct BasisArgs {
    /// The site: its site.toml, or the directory holding it.
    #[arg(value_name = "SITE")]
    pub site: PathBuf,
    /// Keep the fewest modes that together carry at least this fraction F of the fluctuation
    /// energy, 0 < F ≤ 1 [default: 0.99].
    #[arg(long, value_name = "F", conflicts_with = "modes")]
    pub energy: Option<f64>,
    /// Keep exactly R modes (at most the number of snapshots minus one).
    #[arg(long, value_name = "R")]
    pub modes: Option<usize>,
    /// How to compute the modes: `snapshots` streams the snapshot file twice and needs little
    /// memory (fast, the default); `svd` holds all snapshots in memory and is most accurate for
    /// modes of very small energy.
    #[arg(long, value_enum, default_value_t = MethodArg::Snapshots)]
    pub method: MethodArg,
    /// Largest memory, in MiB, the decomposition may hold at once (Gram matrix, kept modes,
    /// per-point vectors and one block of snapshots; the program itself adds about 7 MiB, see
    /// docs/performance.md). Sets the block size of the streamed `.npy` snapshots; a limit too
    /// small for the snapshots and modes asked is refused before any work [default: no limit,
    /// blocks of about 16 MiB].
    #[arg(long, value_name = "MIB")]
    pub memory_limit: Option<f64>,
    /// Directory for modes.npy, mean.npy and energies.csv [default: a `basis` directory beside
    /// site.toml].
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum MethodArg {
    Snapshots,
    Svd,
}

/// Turns the raw arguments into POD options checked against the site.
fn options_for(args: &BasisArgs, site: &Site) -> Result<PodOptions, BadArgument> {
    let (option, rank) = match (args.energy, args.modes) {
        (_, Some(count)) => (format!("--modes {count}"), Rank::Count(count)),
        (Some(fraction), None) => (
            format!("--energy {fraction}"),
            Rank::EnergyFraction(fraction),
        ),
        (None, None) => (String::new(), Rank::EnergyFraction(DEFAULT_ENERGY)),
    };
    let n_snapshots = match &site.flow {
        FlowSource::Snapshots(files) => files.n_snapshots,
        FlowSource::Basis(_) => usize::MAX,
    };
    rank.validate(n_snapshots).map_err(|err| BadArgument {
        option: option.clone(),
        message: err.to_string(),
    })?;
    let memory_limit = match args.memory_limit {
        None => None,
        Some(mib) if mib.is_finite() && mib > 0.0 => Some((mib * 1048576.0) as u64),
        Some(mib) => {
            return Err(BadArgument {
                option: "--memory-limit".into(),
                message: format!("found {mib}, expected a size in MiB > 0"),
            })
        }
    };
    Ok(PodOptions {
        method: match args.method {
            MethodArg::Snapshots => PodMethod::Snapshots,
            MethodArg::Svd => PodMethod::Svd,
        },
        rank,
        block_size: None,
        memory_limit,
        par: faer::Par::rayon(crate::basis::KERNEL_PARTS),
    })
}

/// The output directory, refusing one that would overwrite the site's own basis files.
fn out_dir(args: &BasisArgs, site: &Site) -> Result<PathBuf, BadArgument> {
    let dir = args.out.clone().unwrap_or_else(|| site.root.join("basis"));
    if let FlowSource::Basis(files) = &site.flow {
        let same = |a: &Path, b: &Path| match (a.canonicalize(), b.canonicalize()) {
            (Ok(a), Ok(b)) => a == b,
            _ => false,
        };
        for (name, input) in [
            ("modes.npy", &files.modes),
            ("mean.npy", &files.mean),
            ("energies.csv", &files.energies),
        ] {
            if same(&dir.join(name), input) {
                return Err(BadArgument {
                    option: "--out".to_string(),
                    message: format!(
                        "{} would overwrite the site's own basis file {}; choose another \
                         directory with --out DIR",
                        dir.display(),
                        input.display()
                    ),
                });
            }
        }
    }
    Ok(dir)
}

pub fn run(args: &BasisArgs) -> anyhow::Result<()> {
    let site = io::load_site(&args.site)?;
    let options = options_for(args, &site)?;
    let dir = out_dir(args, &site)?;

    let bar = ProgressBar::new(1);
    bar.set_style(
        ProgressStyle::with_template("{msg} [{bar:30}] {pos}/{len} blocks, {elapsed}")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    bar.set_message(match options.method {
        PodMethod::Snapshots => "POD (method of snapshots)",
        PodMethod::Svd => "POD (thin SVD)",
    });
    let mut warnings = Vec::new();
    let result = basis::for_site::compute_for_site_with_warnings(
        &site,
        &options,
        &mut |done, total| {
            bar.set_length(total as u64);
            bar.set_position(done as u64);
        },
        &mut |w| warnings.push(w),
    );
    bar.finish_and_clear();
    let basis =
        result.with_context(|| format!("computing the basis of {}", args.site.display()))?;
    for warning in &warnings {
        eprintln!("warning: {warning}");
    }
    let written = io::basis_files::write_basis_files(
        &dir,
        &site.domain,
        site.n_channels(),
        &basis.mean,
        basis.modes.as_ref(),
        &basis.energies,
    )?;
    print_table(&basis, &site);
    println!(
        "wrote {}, {} and {}",
        written.modes.display(),
        written.mean.display(),
        written.energies.display()
    );
    Ok(())
}

fn print_table(basis: &Basis, site: &Site) {
    let units: Vec<&str> = site.channels.iter().map(|c| c.unit.as_str()).collect();
    println!(
        "{}: {} modes kept of {} with non-zero energy, {:.4} % of the fluctuation energy",
        site.name,
        basis.n_modes(),
        basis.energies.len(),
        100.0 * basis.captured_fraction()
    );
    println!(
        "energy = variance of the modal coefficient over the snapshots, in ({})² × cell area",
        units.join(", ")
    );
    println!(
        "{:>6}  {:>14}  {:>10}  {:>10}",
        "mode", "energy", "fraction", "cumulative"
    );
    let fractions = basis::energy_fractions(&basis.energies);
    let n_modes = basis.n_modes();
    for (mode_idx, (&energy, &(fraction, cumulative))) in basis
        .energies
        .iter()
        .zip(&fractions)
        .enumerate()
        .take(n_modes)
    {
        if n_modes > TABLE_ROWS && mode_idx >= TABLE_ROWS - 2 && mode_idx + 1 < n_modes {
            if mode_idx == TABLE_ROWS - 2 {
                println!("{:>6}", "…");
            }
            continue;
        }
        println!(
            "{:>6}  {:>14.6e}  {:>9.4}%  {:>9.4}%",
            mode_idx + 1,
            energy,
            100.0 * fraction,
            100.0 * cumulative
        );
    }
}
