//! `crowsnest check SITE`: loads a site with the `io` loader, reads every snapshot value (or
//! the whole imported basis) looking for NaN or infinity, and prints a summary a site engineer
//! can compare with what they meant to describe. A progress bar (indicatif, on stderr, only on
//! a terminal) shows the scan of large snapshot files. It writes no files.

use std::path::PathBuf;

use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};

use crate::io::basis_files::{read_basis_files, BasisPaths};
use crate::io::geometry::polygon_area;
use crate::io::{
    load_site, open_snapshots, ChannelRole, Domain, FlowSource, Measurement, Plane, Site,
};

/// Scans with more values than this get a progress bar.
const PROGRESS_MIN_VALUES: usize = 4_000_000;
/// Values read per block during the scan (about 32 MB of f64).
const BLOCK_VALUES: usize = 4_000_000;

/// Arguments of `crowsnest check` (help text on the `Command::Check` variant).
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// The site directory (holding site.toml) or the path of its .toml file.
    pub site: PathBuf,
    /// Skip reading every snapshot value; check only file headers and shapes (fast on very
    /// large snapshot files, but a NaN would only be found later).
    #[arg(long)]
    pub headers_only: bool,
}

pub fn run(args: CheckArgs) -> anyhow::Result<()> {
    let site = load_site(&args.site)?;
    let flow_lines = match &site.flow {
        FlowSource::Snapshots(_) if args.headers_only => {
            vec!["values: not scanned (--headers-only)".to_string()]
        }
        FlowSource::Snapshots(_) => scan_snapshots(&site)?,
        FlowSource::Basis(files) => {
            let basis =
                read_basis_files(&BasisPaths::of_site(files), &site.domain, site.n_channels())?;
            let total: f64 = basis.energies.iter().sum();
            let kept: f64 = basis.energies.iter().take(basis.modes.ncols()).sum();
            let mut lines = vec![format!(
                "basis read: {} modes of {} dof, {:.4} of the listed energy kept",
                basis.modes.ncols(),
                basis.modes.nrows(),
                if total > 0.0 { kept / total } else { 1.0 }
            )];
            lines.extend(basis.warnings.into_iter().map(|w| format!("warning: {w}")));
            lines
        }
    };
    print!("{}", summary(&site, &flow_lines));
    Ok(())
}

/// Reads every value once, block by block; returns per-channel ranges as summary lines.
fn scan_snapshots(site: &Site) -> anyhow::Result<Vec<String>> {
    let mut source = open_snapshots(site)?;
    let (n_snapshots, n_dof) = (source.n_snapshots(), source.n_dof());
    let n_channels = site.n_channels();
    let rows_per_block = (BLOCK_VALUES / n_dof.max(1)).max(1);
    let total = n_snapshots * n_dof;
    let bar = if total >= PROGRESS_MIN_VALUES {
        let bar = ProgressBar::new(n_snapshots as u64);
        if let Ok(style) =
            ProgressStyle::with_template("reading snapshots {bar:30} {pos}/{len} ({eta} left)")
        {
            bar.set_style(style);
        }
        bar
    } else {
        ProgressBar::hidden()
    };
    let mut lo = vec![f64::INFINITY; n_channels];
    let mut hi = vec![f64::NEG_INFINITY; n_channels];
    let mut sum = vec![0.0; n_channels];
    let weights = site.domain.weights();
    let mut block = Vec::new();
    let mut start = 0;
    while start < n_snapshots {
        let end = (start + rows_per_block).min(n_snapshots);
        block.resize((end - start) * n_dof, 0.0);
        source.read_block(start..end, 0..n_dof, &mut block)?;
        for row in block.chunks_exact(n_dof) {
            for (dof_idx, &v) in row.iter().enumerate() {
                let (point_idx, channel_idx) = (dof_idx / n_channels, dof_idx % n_channels);
                // Solid nodes hold no flow; their (usually zero) values would hide the range.
                if weights[point_idx] > 0.0 {
                    lo[channel_idx] = lo[channel_idx].min(v);
                    hi[channel_idx] = hi[channel_idx].max(v);
                    sum[channel_idx] += v;
                }
            }
        }
        bar.set_position(end as u64);
        start = end;
    }
    bar.finish_and_clear();
    let n_flow = weights.iter().filter(|&&w| w > 0.0).count() * n_snapshots;
    let mut lines = vec![format!("values: all {total} finite")];
    for (c, ch) in site.channels.iter().enumerate() {
        lines.push(format!(
            "  {:<8} min {:.4}  max {:.4}  mean {:.4} {} (flow nodes)",
            ch.name,
            lo[c],
            hi[c],
            sum[c] / n_flow.max(1) as f64,
            ch.unit
        ));
    }
    Ok(lines)
}

fn role_text(role: ChannelRole) -> &'static str {
    match role {
        ChannelRole::VelocityX => "velocity-x",
        ChannelRole::VelocityY => "velocity-y",
        ChannelRole::VelocityZ => "velocity-z",
        ChannelRole::Scalar => "scalar",
    }
}

fn num(v: f64) -> String {
    format!("{}", (v * 1e6).round() / 1e6)
}

/// The printed summary of a loaded site.
fn summary(site: &Site, flow_lines: &[String]) -> String {
    let mut out = String::new();
    let mut line = |s: String| {
        out.push_str(&s);
        out.push('\n');
    };
    let (ax, ay) = match site.plane {
        Plane::Xy => ("x", "y"),
        Plane::Xz => ("x", "z"),
    };
    line(format!("site      {} ({})", site.name, site.root.display()));
    line(format!(
        "plane     {}",
        match site.plane {
            Plane::Xy => "plan view (x east, y north)",
            Plane::Xz => "vertical slice (x along the slice, z up)",
        }
    ));
    let (lo, hi) = site.domain.extent();
    match &site.domain {
        Domain::Grid(g) => {
            let n_solid = g.solid.iter().filter(|&&s| s).count();
            line(format!(
                "domain    grid {} × {} nodes, spacing {} × {} m, {ax} {}…{} m, {ay} {}…{} m",
                g.nx,
                g.ny,
                num(g.spacing[0]),
                num(g.spacing[1]),
                num(lo[0]),
                num(hi[0]),
                num(lo[1]),
                num(hi[1])
            ));
            line(format!(
                "          solid {n_solid} of {} nodes ({:.1} %)",
                g.solid.len(),
                100.0 * n_solid as f64 / g.solid.len() as f64
            ));
        }
        Domain::Points(p) => {
            line(format!(
                "domain    {} points, {ax} {}…{} m, {ay} {}…{} m, total weight {}",
                p.points.len(),
                num(lo[0]),
                num(hi[0]),
                num(lo[1]),
                num(hi[1]),
                num(p.weight.iter().sum())
            ));
        }
    }
    let channels: Vec<String> = site
        .channels
        .iter()
        .map(|c| format!("{} [{}] {}", c.name, c.unit, role_text(c.role)))
        .collect();
    line(format!("channels  {}", channels.join(", ")));
    match &site.flow {
        FlowSource::Snapshots(s) => line(format!(
            "snapshots {}: {} snapshots, dt {} s, span {} s",
            s.path.display(),
            s.n_snapshots,
            num(s.dt),
            num(s.dt * s.n_snapshots.saturating_sub(1) as f64)
        )),
        FlowSource::Basis(b) => {
            line(format!("basis     modes {}", b.modes.display()));
            line(format!("          mean {}", b.mean.display()));
            line(format!("          energies {}", b.energies.display()));
            if let Some(dt) = b.dt {
                line(format!("          dt {} s", num(dt)));
            }
        }
    }
    for l in flow_lines {
        line(format!("          {l}"));
    }
    line(format!("kinds     {}", site.kinds.len()));
    for k in &site.kinds {
        let what = match &k.measurement {
            Measurement::Point { channel_idx } => format!(
                "point ({})",
                channel_idx
                    .iter()
                    .map(|&c| site.channels[c].name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            Measurement::Scalar { channel_idx } => {
                format!("scalar ({})", site.channels[*channel_idx].name)
            }
            Measurement::Beam(b) => format!(
                "beam: {} beams × {} gates at {}…{} m",
                b.beams.len(),
                b.n_gates,
                num(b.first_gate),
                num(b.first_gate + b.gate_spacing * (b.n_gates - 1) as f64)
            ),
        };
        line(format!(
            "  {:<10} {what}; noise sd {}, every {} s, cost {}",
            k.name,
            num(k.noise_sd),
            num(k.interval),
            num(k.cost)
        ));
    }
    let per_kind: Vec<String> = site
        .kinds
        .iter()
        .enumerate()
        .map(|(k, kind)| {
            let n = site
                .candidates
                .iter()
                .filter(|c| c.kind_idx.contains(&k))
                .count();
            format!("{} {n}", kind.name)
        })
        .collect();
    line(format!(
        "candidates {} ({})",
        site.candidates.len(),
        per_kind.join(", ")
    ));
    let zones: Vec<String> = site
        .zones
        .iter()
        .map(|z| format!("{} ({} m²)", z.name, num(polygon_area(&z.polygon.vertices))))
        .collect();
    line(format!(
        "zones     {}",
        if zones.is_empty() {
            "none".to_string()
        } else {
            zones.join(", ")
        }
    ));
    let obstacles: Vec<String> = site
        .obstacles
        .iter()
        .map(|o| format!("{} ({} m²)", o.name, num(polygon_area(&o.polygon.vertices))))
        .collect();
    line(format!(
        "obstacles {}",
        if obstacles.is_empty() {
            "none".to_string()
        } else {
            obstacles.join(", ")
        }
    ));
    let existing: Vec<String> = site
        .existing
        .iter()
        .map(|e| {
            format!(
                "{} ({})",
                site.candidates[e.candidate_idx].id, site.kinds[e.kind_idx].name
            )
        })
        .collect();
    line(format!(
        "existing  {}",
        if existing.is_empty() {
            "none".to_string()
        } else {
            existing.join(", ")
        }
    ));
    if let Some(g) = &site.geo_origin {
        line(format!(
            "geo       origin {}° lat, {}° lon, local +y at {}° from true north",
            num(g.lat_deg),
            num(g.lon_deg),
            num(g.rotation_deg)
        ));
    }
    if let Some(s) = &site.synth {
        line(format!(
            "synth     {} m/s from {}°, turbulence intensity {}, {} s kept after {} s spin-up, seed {}",
            num(s.wind_speed),
            num(s.wind_from_deg),
            num(s.turbulence_intensity),
            num(s.duration),
            num(s.spin_up),
            s.seed
        ));
    }
    if site.warnings.is_empty() {
        line("warnings  none".to_string());
    } else {
        line(format!("warnings  {}", site.warnings.len()));
        for w in &site.warnings {
            line(format!("  - {w}"));
        }
    }
    line(
        "ok: the site is readable and consistent. This checks the files, not the siting: \
          mounts must still follow the WMO exposure guidance, local codes and authority rules."
            .to_string(),
    );
    out
}
