//! Sensor kinds (`[[kinds]]`), candidate mounts (`candidates.csv`) and sensors already on
//! site (`[[existing]]`): parsed, cross-checked (kind names, channel roles, domain, solids)
//! and turned into the index-based types of `site.rs`. Exclusion zones are not enforced
//! here: a candidate or existing sensor inside one is a warning, and `select` decides.

use std::path::Path;

use super::csv_in::CsvTable;
use super::keys::{did_you_mean, Section};
use super::site::*;
use super::site_load::axis_names;
use super::IoError;

const KIND_KEYS: &[&str] = &[
    "name",
    "family",
    "channels",
    "noise_sd",
    "interval",
    "cost",
    "beams",
    "first_gate",
    "gate_spacing",
    "n_gates",
    "gate_length",
    "pulse_width",
];
const BEAM_KEYS: &[&str] = &[
    "beams",
    "first_gate",
    "gate_spacing",
    "n_gates",
    "gate_length",
    "pulse_width",
];
const FAMILIES: [&str; 3] = ["point", "scalar", "beam"];

pub(crate) fn read_kinds(
    file: &Path,
    top: &Section,
    plane: Plane,
    channels: &[Channel],
) -> Result<Vec<SensorKind>, IoError> {
    let tables = top.table_array("kinds")?;
    if tables.is_empty() {
        return Err(top.err(
            "kinds",
            "missing required [[kinds]]; expected at least one sensor kind",
        ));
    }
    let mut kinds: Vec<SensorKind> = Vec::new();
    for (idx, table) in tables.into_iter().enumerate() {
        let prefix = format!("kinds[{idx}]");
        let s = Section::new(file, &prefix, table, KIND_KEYS)?;
        let name = s
            .req_str("name", "a kind name such as \"cup\"")?
            .trim()
            .to_string();
        if name.is_empty() || name.contains([';', ',']) {
            return Err(s.err(
                "name",
                format!("found \"{name}\", expected a non-empty name without ; or ,"),
            ));
        }
        if kinds.iter().any(|k| k.name == name) {
            return Err(s.err("name", format!("kind `{name}` is defined twice")));
        }
        let family = s.req_str("family", "point, scalar or beam")?;
        if !FAMILIES.contains(&family) {
            return Err(s.err(
                "family",
                format!(
                    "found \"{family}\"{}, expected point, scalar or beam",
                    did_you_mean(family, FAMILIES)
                ),
            ));
        }
        if family != "beam" {
            if let Some(key) = BEAM_KEYS.iter().find(|k| s.has(k)) {
                return Err(s.err(
                    key,
                    format!("only beam kinds take `{key}`; this kind is family = \"{family}\""),
                ));
            }
        }
        let measurement = match family {
            "point" => {
                let channel_idx = read_kind_channels(&s, channels)?;
                Measurement::Point { channel_idx }
            }
            "scalar" => {
                let channel_idx = read_kind_channels(&s, channels)?;
                if channel_idx.len() != 1 {
                    return Err(s.err(
                        "channels",
                        format!(
                            "found {} channels, expected exactly one for a scalar kind",
                            channel_idx.len()
                        ),
                    ));
                }
                let ch = &channels[channel_idx[0]];
                if ch.role != ChannelRole::Scalar {
                    return Err(s.err(
                        "channels",
                        format!(
                            "channel `{}` is a velocity component; use family = \"point\" for it",
                            ch.name
                        ),
                    ));
                }
                Measurement::Scalar {
                    channel_idx: channel_idx[0],
                }
            }
            _ => Measurement::Beam(read_beam(&s, plane, channels)?),
        };
        kinds.push(SensorKind {
            name,
            measurement,
            noise_sd: s.req_positive("noise_sd", "a noise standard deviation in channel units")?,
            interval: s.req_positive("interval", "the time between readings in s")?,
            cost: s.req_non_negative("cost", "a purchase + installation cost")?,
        });
    }
    Ok(kinds)
}

fn read_kind_channels(s: &Section, channels: &[Channel]) -> Result<Vec<usize>, IoError> {
    let items = s.req_array("channels", "a list of channel names such as [\"u\", \"v\"]")?;
    if items.is_empty() {
        return Err(s.err(
            "channels",
            "found an empty list, expected at least one channel name",
        ));
    }
    let mut out: Vec<usize> = Vec::new();
    for item in items {
        let name = s.as_str("channels", item, "a channel name")?;
        let idx = channels
            .iter()
            .position(|c| c.name == name)
            .ok_or_else(|| {
                s.err(
                    "channels",
                    format!(
                        "unknown channel `{name}`{}; the site has {}",
                        did_you_mean(name, channels.iter().map(|c| c.name.as_str())),
                        channels
                            .iter()
                            .map(|c| c.name.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                )
            })?;
        if out.contains(&idx) {
            return Err(s.err("channels", format!("channel `{name}` listed twice")));
        }
        out.push(idx);
    }
    Ok(out)
}

fn read_beam(s: &Section, plane: Plane, channels: &[Channel]) -> Result<BeamPattern, IoError> {
    if s.has("channels") {
        return Err(s.err(
            "channels",
            "beam kinds read the line-of-sight velocity from the velocity channels; remove `channels`",
        ));
    }
    let needed = match plane {
        Plane::Xy => [ChannelRole::VelocityX, ChannelRole::VelocityY],
        Plane::Xz => [ChannelRole::VelocityX, ChannelRole::VelocityZ],
    };
    if !needed.iter().all(|r| channels.iter().any(|c| c.role == *r)) {
        return Err(s.err(
            "family",
            "a beam kind needs both in-plane velocity channels (velocity-x and velocity-y on \
             plane \"xy\", velocity-x and velocity-z on plane \"xz\")",
        ));
    }
    let items = s.req_array("beams", "a list of { azimuth, elevation } in degrees")?;
    if items.is_empty() {
        return Err(s.err("beams", "found an empty list, expected at least one beam"));
    }
    let mut beams = Vec::new();
    for (beam_idx, item) in items.iter().enumerate() {
        let prefix = format!("{}[{beam_idx}]", s.place("beams"));
        let table = item.as_table().ok_or_else(|| {
            s.err(
                "beams",
                format!("beam {beam_idx}: expected {{ azimuth = .., elevation = .. }}"),
            )
        })?;
        let b = Section::new(s.file, &prefix, table, &["azimuth", "elevation"])?;
        let azimuth_deg = b.req_f64("azimuth", "an azimuth in degrees clockwise from north")?;
        let elevation_deg = b.req_f64("elevation", "an elevation in degrees above the horizon")?;
        if !(-90.0..=90.0).contains(&elevation_deg) {
            return Err(b.err(
                "elevation",
                format!("found {elevation_deg}, expected [-90, 90] degrees"),
            ));
        }
        if plane == Plane::Xz {
            let az = azimuth_deg.rem_euclid(360.0);
            if (az - 90.0).abs() > 1e-9 && (az - 270.0).abs() > 1e-9 {
                return Err(b.err(
                    "azimuth",
                    format!("found {azimuth_deg}; on a vertical slice a beam stays in the plane: expected 90 (+x) or 270 (-x)"),
                ));
            }
        }
        beams.push(BeamDirection {
            azimuth_deg,
            elevation_deg,
        });
    }
    Ok(BeamPattern {
        beams,
        first_gate: s.req_positive("first_gate", "the range of the first gate centre in m")?,
        gate_spacing: s.req_positive("gate_spacing", "the distance between gate centres in m")?,
        n_gates: s.req_count("n_gates", "the number of range gates", 1)?,
        gate_length: s.req_positive("gate_length", "the range-gate length in m")?,
        pulse_width: s.req_positive("pulse_width", "the pulse FWHM in m")?,
    })
}

#[allow(clippy::too_many_arguments)]
pub(crate) fn read_candidates(
    file: &Path,
    root: &Path,
    top: &Section,
    plane: Plane,
    domain: &Domain,
    kinds: &[SensorKind],
    zones: &[Zone],
    obstacles: &[Obstacle],
    warnings: &mut Vec<String>,
) -> Result<Vec<Candidate>, IoError> {
    let Some(table) = top.opt_table("candidates")? else {
        return Err(top.err(
            "candidates",
            "missing required [candidates] table; expected file = \"candidates.csv\"",
        ));
    };
    let s = Section::new(file, "candidates", table, &["file"])?;
    let path = s.req_file("file", root, "a candidates CSV file")?;
    let t = CsvTable::read(&path)?;
    candidates_from_table(&t, plane, domain, kinds, zones, obstacles, warnings)
}

/// The rows of a candidates table, checked against the rest of the site. Shared by the
/// site loader and [`super::parse_candidates_csv`].
pub(crate) fn candidates_from_table(
    t: &CsvTable,
    plane: Plane,
    domain: &Domain,
    kinds: &[SensorKind],
    zones: &[Zone],
    obstacles: &[Obstacle],
    warnings: &mut Vec<String>,
) -> Result<Vec<Candidate>, IoError> {
    let path = t.path.as_path();
    let [ax, ay] = axis_names(plane);
    t.check_columns(
        &["id", ax, ay, "kinds"],
        &["height", "mount_cost", "zone", "heading"],
    )?;
    let (c_id, c_x, c_y, c_kinds) = (
        t.col_req("id")?,
        t.col_req(ax)?,
        t.col_req(ay)?,
        t.col_req("kinds")?,
    );
    let (c_height, c_cost, c_zone, c_heading) = (
        t.col("height"),
        t.col("mount_cost"),
        t.col("zone"),
        t.col("heading"),
    );
    let (lo, hi) = domain.extent();
    let mut out: Vec<Candidate> = Vec::with_capacity(t.n_rows());
    for row in 0..t.n_rows() {
        let id = t.text(row, c_id).to_string();
        if id.is_empty() {
            return Err(t.err(row, c_id, "empty id, expected a unique text id"));
        }
        if let Some(first) = out.iter().position(|c| c.id == id) {
            return Err(t.err(
                row,
                c_id,
                format!("duplicate id `{id}`: already used in row {}", first + 1),
            ));
        }
        let position = [
            t.number(row, c_x, "a coordinate in m")?,
            t.number(row, c_y, "a coordinate in m")?,
        ];
        if !domain.contains(position) {
            return Err(t.err(
                row,
                c_x,
                format!(
                    "candidate `{id}` at ({}, {}) lies outside the domain: {ax} in [{}, {}], {ay} in [{}, {}] m",
                    position[0], position[1], lo[0], hi[0], lo[1], hi[1]
                ),
            ));
        }
        if let Some(o) = obstacles.iter().find(|o| o.polygon.contains(position)) {
            return Err(t.err(
                row,
                c_x,
                format!(
                    "candidate `{id}` lies inside a solid (obstacle `{}`)",
                    o.name
                ),
            ));
        }
        if let Domain::Grid(g) = domain {
            let node = g.nearest_node(position);
            if g.solid[node] {
                return Err(t.err(
                    row,
                    c_x,
                    format!(
                        "candidate `{id}` lies inside a solid (nearest grid node i={}, j={} is solid)",
                        node % g.nx,
                        node / g.nx
                    ),
                ));
            }
        }
        let mut kind_idx = Vec::new();
        for name in t
            .text(row, c_kinds)
            .split(';')
            .map(str::trim)
            .filter(|n| !n.is_empty())
        {
            let idx = kinds.iter().position(|k| k.name == name).ok_or_else(|| {
                t.err(
                    row,
                    c_kinds,
                    format!(
                        "unknown kind `{name}`{}; [[kinds]] defines {}",
                        did_you_mean(name, kinds.iter().map(|k| k.name.as_str())),
                        kinds
                            .iter()
                            .map(|k| k.name.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                )
            })?;
            if !kind_idx.contains(&idx) {
                kind_idx.push(idx);
            }
        }
        if kind_idx.is_empty() {
            return Err(t.err(row, c_kinds, "no kinds, expected kind names separated by ;"));
        }
        let height = match c_height {
            Some(c) if !t.text(row, c).is_empty() => {
                let h = t.number(row, c, "a mount height in m")?;
                if h < 0.0 {
                    return Err(t.err(row, c, format!("found {h}, expected a height in m >= 0")));
                }
                Some(h)
            }
            _ => None,
        };
        let mount_cost = t.opt_number(row, c_cost, "a mounting cost", 0.0)?;
        if mount_cost < 0.0 {
            return Err(t.err(
                row,
                c_cost.unwrap_or(0),
                format!("found {mount_cost}, expected a cost >= 0"),
            ));
        }
        let heading_deg = t.opt_number(row, c_heading, "a heading in degrees", 0.0)?;
        let zone = c_zone
            .map(|c| t.text(row, c).to_string())
            .unwrap_or_default();
        if let Some(z) = zones.iter().find(|z| z.polygon.contains(position)) {
            warnings.push(format!(
                "candidate `{id}` ({} row {}) lies in exclusion zone `{}`; the planner adds no new sensor there",
                path.display(),
                row + 1,
                z.name
            ));
        }
        out.push(Candidate {
            id,
            position,
            height,
            kind_idx,
            mount_cost,
            zone,
            heading_deg,
        });
    }
    if out.is_empty() {
        return Err(IoError::invalid(
            path,
            "rows",
            "no candidates; expected at least one data row",
        ));
    }
    for (idx, kind) in kinds.iter().enumerate() {
        if !out.iter().any(|c| c.kind_idx.contains(&idx)) {
            warnings.push(format!("kind `{}` is allowed at no candidate", kind.name));
        }
    }
    Ok(out)
}

pub(crate) fn read_existing(
    file: &Path,
    top: &Section,
    kinds: &[SensorKind],
    candidates: &[Candidate],
    zones: &[Zone],
    warnings: &mut Vec<String>,
) -> Result<Vec<ExistingSensor>, IoError> {
    let mut out: Vec<ExistingSensor> = Vec::new();
    for (idx, table) in top.table_array("existing")?.into_iter().enumerate() {
        let prefix = format!("existing[{idx}]");
        let s = Section::new(file, &prefix, table, &["candidate", "kind"])?;
        let id = s.req_str("candidate", "a candidate id from candidates.csv")?;
        let candidate_idx = candidates.iter().position(|c| c.id == id).ok_or_else(|| {
            s.err(
                "candidate",
                format!(
                    "unknown candidate `{id}`{}; expected an id from candidates.csv",
                    did_you_mean(id, candidates.iter().map(|c| c.id.as_str()))
                ),
            )
        })?;
        let kind = s.req_str("kind", "a kind name from [[kinds]]")?;
        let kind_idx = kinds.iter().position(|k| k.name == kind).ok_or_else(|| {
            s.err(
                "kind",
                format!(
                    "unknown kind `{kind}`{}",
                    did_you_mean(kind, kinds.iter().map(|k| k.name.as_str()))
                ),
            )
        })?;
        let candidate = &candidates[candidate_idx];
        if !candidate.kind_idx.contains(&kind_idx) {
            return Err(s.err(
                "kind",
                format!(
                    "kind `{kind}` is not allowed at candidate `{id}` (its kinds column lists {})",
                    candidate
                        .kind_idx
                        .iter()
                        .map(|&k| kinds[k].name.as_str())
                        .collect::<Vec<_>>()
                        .join(";")
                ),
            ));
        }
        if out
            .iter()
            .any(|e| e.candidate_idx == candidate_idx && e.kind_idx == kind_idx)
        {
            return Err(s.err(
                "candidate",
                format!("`{id}` with kind `{kind}` is listed twice"),
            ));
        }
        if let Some(z) = zones
            .iter()
            .find(|z| z.polygon.contains(candidate.position))
        {
            warnings.push(format!(
                "existing sensor `{id}` ({kind}) lies in exclusion zone `{}`",
                z.name
            ));
        }
        out.push(ExistingSensor {
            candidate_idx,
            kind_idx,
        });
    }
    Ok(out)
}
