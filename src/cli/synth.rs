//! `crowsnest synth SITE [--quick] [--force]`: generates the velocity snapshots that a
//! `[synth]` site names in `[snapshots] file`, with a progress bar, and skips the run when
//! the inputs have not changed since the last one.
//!
//! Skipping: a small sidecar file `<snapshots>.synth-key` beside the output holds a hash of
//! everything that decides the output (grid, obstacles, channels, snapshot interval, `[synth]`
//! settings, geographic rotation, solver version, `--quick`). A run is skipped only when the
//! output exists and the stored key equals the current one. The solid mask of the site grid
//! is written beside the snapshots as `<stem>-solid.npy` (`(ny, nx)` f32, 1 = solid).
//!
//! [`ensure_snapshots`] is the same job for other commands (for instance `plan`) that want
//! the snapshots to exist before they start.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::Context;
use indicatif::{ProgressBar, ProgressStyle};

use crate::io::{self, FlowSource, Site};
use crate::synth::{self, SynthError, SynthOutput, SOLVER_VERSION};

#[derive(Debug, clap::Args)]
pub struct SynthArgs {
    /// Site directory (holding site.toml) or the site.toml file itself.
    pub site: PathBuf,
    /// Coarser lattice and shorter run (about one flow-through of spin-up and two of
    /// snapshots), for tests and CI.
    #[arg(long)]
    pub quick: bool,
    /// Regenerate even when the inputs have not changed.
    #[arg(long)]
    pub force: bool,
}

/// What [`ensure_snapshots`] did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Outcome {
    /// The snapshots were up to date.
    Skipped { path: PathBuf },
    /// The snapshots were (re)generated.
    Generated { path: PathBuf },
}

pub fn run(args: SynthArgs) -> anyhow::Result<()> {
    let started = Instant::now();
    let outcome = ensure_snapshots(&args.site, args.quick, args.force, true)?;
    match outcome {
        Outcome::Skipped { path } => println!(
            "{}: up to date (inputs unchanged since the last run; --force regenerates)",
            path.display()
        ),
        Outcome::Generated { .. } => {
            println!("done in {:.1} s", started.elapsed().as_secs_f64());
        }
    }
    Ok(())
}

/// Makes sure the snapshots of the `[synth]` site at `site_path` exist and match its current
/// inputs, generating them when not. `verbose` shows a progress bar (on a terminal) and a
/// summary on stdout.
pub fn ensure_snapshots(
    site_path: &Path,
    quick: bool,
    force: bool,
    verbose: bool,
) -> anyhow::Result<Outcome> {
    let site = io::load_site_for_synth(site_path)?;
    let FlowSource::Snapshots(files) = &site.flow else {
        return Err(SynthError::NoSnapshotFile.into());
    };
    if site.synth.is_none() {
        return Err(SynthError::NoSettings.into());
    }
    let output = files.path.clone();
    let key_path = sidecar(&output, ".synth-key");
    let key = input_key(&site, quick);
    if !force && output.is_file() {
        if let Ok(stored) = std::fs::read_to_string(&key_path) {
            if stored == key {
                return Ok(Outcome::Skipped { path: output });
            }
        }
    }
    let bar = if verbose && std::io::stderr().is_terminal() {
        let bar = ProgressBar::new(1);
        bar.set_style(
            ProgressStyle::with_template(
                "{msg} [{bar:40}] {percent:>3}%  {elapsed_precise} (about {eta} left)",
            )
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
        );
        bar.set_message(format!("synth {}", site.name));
        bar
    } else {
        ProgressBar::hidden()
    };
    let result = synth::generate(&site, quick, &mut |p| {
        bar.set_length(p.n_steps.max(1));
        bar.set_position(p.step);
    });
    bar.finish_and_clear();
    let out = result.with_context(|| format!("generating the flow of site `{}`", site.name))?;
    write_outputs(&output, &out)?;
    io::atomic::write_bytes_atomic(&key_path, key.as_bytes())?;
    if verbose {
        print_summary(&site, &output, &out, quick);
    }
    Ok(Outcome::Generated { path: output })
}

fn write_outputs(output: &Path, out: &SynthOutput) -> anyhow::Result<()> {
    io::npy::write_npy_f32(output, &out.shape, &out.data)?;
    let mask: Vec<f32> = out.solid.iter().map(|&s| f32::from(u8::from(s))).collect();
    let solid_path = solid_path(output);
    io::npy::write_npy_f32(&solid_path, &[out.shape[1], out.shape[2]], &mask)?;
    Ok(())
}

/// `<dir>/<stem>-solid.npy` beside the snapshot file.
pub fn solid_path(output: &Path) -> PathBuf {
    let stem = output
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "snapshots".to_string());
    output.with_file_name(format!("{stem}-solid.npy"))
}

fn sidecar(output: &Path, suffix: &str) -> PathBuf {
    let name = output
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    output.with_file_name(format!("{name}{suffix}"))
}

fn print_summary(site: &Site, output: &Path, out: &SynthOutput, quick: bool) {
    let r = &out.report;
    let [n_t, ny, nx, n_c] = out.shape;
    println!(
        "{}: {n_t} snapshots of {nx} × {ny} nodes × {n_c} channels every {} s{}",
        output.display(),
        out.dt,
        if quick { " (quick run)" } else { "" }
    );
    println!(
        "  lattice {} × {} at {:.2} m, time step {:.4} s, {} steps; Mach {:.3} (mean wind) / \
         {:.3} (peak); tau {:.4}, viscosity floor {:.2} m²/s; density drift {:.1e}",
        r.lattice_nx,
        r.lattice_ny,
        r.spacing,
        r.step,
        r.n_steps,
        r.mach_mean,
        r.mach_peak,
        r.tau,
        r.viscosity_floor,
        r.density_drift
    );
    println!(
        "  site `{}`: a synthetic flow for planning studies, not a measured or certified wind \
         climate",
        site.name
    );
}

/// Hash of everything that decides the generated snapshots, as the sidecar's text.
pub fn input_key(site: &Site, quick: bool) -> String {
    let dt = match &site.flow {
        FlowSource::Snapshots(s) => s.dt,
        FlowSource::Basis(_) => f64::NAN,
    };
    let description = format!(
        "{SOLVER_VERSION}\nquick={quick}\nplane={:?}\ndomain={:?}\nchannels={:?}\ndt={dt:?}\n\
         obstacles={:?}\nsynth={:?}\nrotation={:?}",
        site.plane,
        site.domain,
        site.channels,
        site.obstacles,
        site.synth,
        site.geo_origin.map(|g| g.rotation_deg),
    );
    format!(
        "crowsnest synth input key\nsolver = {SOLVER_VERSION}\nquick = {quick}\nhash = {:016x}\n",
        fnv1a64(description.as_bytes())
    )
}

/// 64-bit FNV-1a (Fowler, Noll & Vo; IETF draft-eastlake-fnv): a change detector, not a
/// security hash.
fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut hash: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        hash ^= u64::from(b);
        hash = hash.wrapping_mul(0x0000_0100_0000_01b3);
    }
    hash
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv_matches_published_test_vectors() {
        // Test vectors of the FNV reference (draft-eastlake-fnv, appendix): "" and "a".
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }

    #[test]
    fn solid_path_sits_beside_the_snapshots() {
        assert_eq!(
            solid_path(Path::new("/a/b/snapshots.npy")),
            PathBuf::from("/a/b/snapshots-solid.npy")
        );
        assert_eq!(
            sidecar(Path::new("/a/snapshots.npy"), ".synth-key"),
            PathBuf::from("/a/snapshots.npy.synth-key")
        );
    }
}
