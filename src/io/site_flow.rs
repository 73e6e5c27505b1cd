//! Flow data of a site: the `[snapshots]` or `[basis]` table, checked against the domain and
//! the channels when the site loads (headers only for `.npy`), and [`open_snapshots`], the
//! one way later stages get a [`SnapshotSource`] for a loaded site.
//!
//! Snapshot CSV files hold one row per snapshot: `t`, then one column per degree of freedom
//! named `<channel>@<point_idx>` in field order. They are small by nature and are read into
//! memory ([`InMemorySnapshots`]); `.npy` files are streamed ([`NpySnapshots`]).

use std::path::Path;

use super::csv_in::CsvTable;
use super::keys::Section;
use super::npy::{check_shape, read_npy_header, shape_text, NpySnapshots};
use super::site::*;
use super::{InMemorySnapshots, IoError, SnapshotSource};

/// Whether generated flow files (`[synth]` sites) may be missing when a site loads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Generated {
    MustExist,
    MayBeMissing,
}

pub(crate) fn read_flow(
    file: &Path,
    root: &Path,
    top: &Section,
    domain: &Domain,
    channels: &[Channel],
    warnings: &mut Vec<String>,
    generated: Generated,
) -> Result<FlowSource, IoError> {
    match (top.opt_table("snapshots")?, top.opt_table("basis")?) {
        (Some(table), None) => {
            let s = Section::new(file, "snapshots", table, &["file", "dt"])?;
            let dt = s.req_positive("dt", "the time between snapshots in s")?;
            // Snapshots of a `[synth]` site are made by `crowsnest synth`: the generator may
            // load the site before they exist, and everyone else gets told how to make them.
            if top.opt_table("synth")?.is_some() {
                let name = s.req_str("file", "a .npy snapshot file")?;
                let path = root.join(name);
                if !path.is_file() {
                    if generated == Generated::MayBeMissing {
                        return Ok(FlowSource::Snapshots(SnapshotFiles {
                            path,
                            dt,
                            n_snapshots: 0,
                        }));
                    }
                    return Err(s.err(
                        "file",
                        format!(
                            "file {} not found; this site's snapshots are generated: run \
                             `crowsnest synth {}` first",
                            path.display(),
                            root.display()
                        ),
                    ));
                }
            }
            let path = s.req_file("file", root, "a .npy or .csv snapshot file")?;
            let n_snapshots = match extension(&path).as_str() {
                "npy" => check_field_npy(&path, domain, channels, "T")?,
                "csv" => {
                    let snaps =
                        read_snapshot_csv(&path, domain.n_points(), channels, Some(dt), warnings)?;
                    snaps.n_snapshots
                }
                other => {
                    return Err(s.err(
                        "file",
                        format!("found a `.{other}` file, expected a .npy or .csv snapshot file"),
                    ))
                }
            };
            if n_snapshots == 0 {
                return Err(IoError::invalid(
                    &path,
                    "shape",
                    "no snapshots (T = 0); expected at least 2",
                ));
            }
            if n_snapshots == 1 {
                warnings.push(format!(
                    "{}: a single snapshot; a POD basis needs at least two",
                    path.display()
                ));
            }
            Ok(FlowSource::Snapshots(SnapshotFiles {
                path,
                dt,
                n_snapshots,
            }))
        }
        (None, Some(table)) => {
            let s = Section::new(file, "basis", table, &["modes", "mean", "energies", "dt"])?;
            let modes = s.req_file("modes", root, "a .npy of modes (r, ny, nx, C) or (r, N, C)")?;
            let mean = s.req_file("mean", root, "a .npy of the mean field")?;
            let energies = s.req_file("energies", root, "the energies.csv of the basis")?;
            let dt = match s.has("dt") {
                true => Some(s.req_positive("dt", "the time between snapshots in s")?),
                false => None,
            };
            let n_modes = check_field_npy(&modes, domain, channels, "r")?;
            if n_modes == 0 {
                return Err(IoError::invalid(
                    &modes,
                    "shape",
                    "no modes (r = 0); expected at least 1",
                ));
            }
            check_mean_npy(&mean, domain, channels)?;
            Ok(FlowSource::Basis(BasisFiles {
                modes,
                mean,
                energies,
                dt,
            }))
        }
        (Some(_), Some(_)) => Err(top.err(
            "basis",
            "found both [snapshots] and [basis], expected exactly one flow source",
        )),
        (None, None) => Err(top.err(
            "snapshots",
            "missing flow data; expected a [snapshots] table (file, dt) or a [basis] table \
             (modes, mean, energies)",
        )),
    }
}

fn extension(path: &Path) -> String {
    path.extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default()
}

/// Expected field shape after the leading axis, with axis names.
fn field_axes(domain: &Domain, n_channels: usize) -> (Vec<Option<usize>>, Vec<&'static str>) {
    match domain {
        Domain::Grid(g) => (
            vec![Some(g.ny), Some(g.nx), Some(n_channels)],
            vec!["ny", "nx", "C"],
        ),
        Domain::Points(p) => (vec![Some(p.points.len()), Some(n_channels)], vec!["N", "C"]),
    }
}

/// Checks a `(lead, field...)` float array; returns the leading length (T or r).
fn check_field_npy(
    path: &Path,
    domain: &Domain,
    channels: &[Channel],
    lead: &'static str,
) -> Result<usize, IoError> {
    let header = read_npy_header(path)?;
    header.require_c_order(path)?;
    if !header.dtype.is_float() {
        return Err(IoError::invalid(
            path,
            "header",
            format!(
                "unsupported dtype `{}`; expected <f4 or <f8",
                header.dtype.descr()
            ),
        ));
    }
    let (mut expected, mut names) = field_axes(domain, channels.len());
    expected.insert(0, None);
    names.insert(0, lead);
    check_shape(path, &header.shape, &expected, &names)?;
    Ok(header.shape[0])
}

fn check_mean_npy(path: &Path, domain: &Domain, channels: &[Channel]) -> Result<(), IoError> {
    let header = read_npy_header(path)?;
    header.require_c_order(path)?;
    if !header.dtype.is_float() {
        return Err(IoError::invalid(
            path,
            "header",
            format!(
                "unsupported dtype `{}`; expected <f4 or <f8",
                header.dtype.descr()
            ),
        ));
    }
    let (expected, names) = field_axes(domain, channels.len());
    check_shape(path, &header.shape, &expected, &names)
}

/// Reads a snapshot CSV into memory, checking the header names, every number and (when `dt`
/// is given) that `t` advances by `dt`, which is only a warning.
pub fn read_snapshot_csv(
    path: &Path,
    n_points: usize,
    channels: &[Channel],
    dt: Option<f64>,
    warnings: &mut Vec<String>,
) -> Result<InMemorySnapshots, IoError> {
    let t = CsvTable::read(path)?;
    let n_channels = channels.len();
    let n_dof = n_points * n_channels;
    if t.header.first().map(String::as_str) != Some("t") {
        return Err(IoError::invalid(
            path,
            "header",
            format!(
                "missing column `t`: the first column must be `t` (s), found `{}`",
                t.header.first().map_or("", String::as_str)
            ),
        ));
    }
    if t.header.len() != 1 + n_dof {
        return Err(IoError::invalid(
            path,
            "header",
            format!(
                "found {} value columns, expected {n_dof} = {n_points} points × {n_channels} channels",
                t.header.len() - 1
            ),
        ));
    }
    for dof_idx in 0..n_dof {
        let expected = format!(
            "{}@{}",
            channels[dof_idx % n_channels].name,
            dof_idx / n_channels
        );
        if t.header[1 + dof_idx] != expected {
            return Err(IoError::invalid(
                path,
                format!("header column {}", dof_idx + 2),
                format!(
                    "found `{}`, expected `{expected}` (columns go point by point, channels in \
                     the order of [[channels]])",
                    t.header[1 + dof_idx]
                ),
            ));
        }
    }
    let mut data = Vec::with_capacity(t.n_rows() * n_dof);
    let mut prev_time: Option<f64> = None;
    for row in 0..t.n_rows() {
        let time = t.number(row, 0, "a time in s")?;
        if let (Some(prev), Some(dt)) = (prev_time, dt) {
            if ((time - prev) - dt).abs() > 1e-6 * dt.max(1.0) && warnings.len() < 50 {
                warnings.push(format!(
                    "{}: row {}: t advances by {} s, but dt = {dt} s",
                    path.display(),
                    row + 1,
                    time - prev
                ));
            }
        }
        prev_time = Some(time);
        for dof_idx in 0..n_dof {
            let text = t.text(row, 1 + dof_idx);
            let value: f64 = text.parse().map_err(|_| {
                t.err(
                    row,
                    1 + dof_idx,
                    format!("found `{text}`, expected a number"),
                )
            })?;
            if !value.is_finite() {
                return Err(IoError::invalid(
                    path,
                    format!(
                        "time index {row}, point {}, channel {} (row {}, column `{}`)",
                        dof_idx / n_channels,
                        dof_idx % n_channels,
                        row + 1,
                        t.header[1 + dof_idx]
                    ),
                    format!("found {value}; every snapshot value must be finite"),
                ));
            }
            data.push(value);
        }
    }
    Ok(InMemorySnapshots::new(t.n_rows(), n_dof, data))
}

/// Opens the snapshots of a loaded site: `.npy` streamed by seeking, CSV read into memory.
/// A site that brings a precomputed basis has no snapshots and gets an error saying so.
pub fn open_snapshots(site: &Site) -> Result<Box<dyn SnapshotSource>, IoError> {
    match &site.flow {
        FlowSource::Snapshots(files) => match extension(&files.path).as_str() {
            "npy" => {
                let src = NpySnapshots::open(&files.path)?;
                if src.n_dof() != site.n_dof() {
                    return Err(IoError::invalid(
                        &files.path,
                        "shape",
                        format!(
                            "shape {} no longer matches the site ({} values per snapshot)",
                            shape_text(&src.header().shape),
                            site.n_dof()
                        ),
                    ));
                }
                Ok(Box::new(src))
            }
            _ => {
                let mut ignored = Vec::new();
                let snaps = read_snapshot_csv(
                    &files.path,
                    site.n_points(),
                    &site.channels,
                    None,
                    &mut ignored,
                )?;
                Ok(Box::new(snaps))
            }
        },
        FlowSource::Basis(b) => Err(IoError::invalid(
            site.root.join("site.toml"),
            "basis",
            format!(
                "this site brings a precomputed basis ({}), not snapshots",
                b.modes.display()
            ),
        )),
    }
}
