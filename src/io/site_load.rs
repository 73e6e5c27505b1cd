//! The site loader: [`load_site`] reads `site.toml` (as a `toml::Value` tree, so every key
//! is checked and unknown keys get a "did you mean") and the files it names, validates every
//! value and returns a [`Site`] whose invariants later stages may rely on (see
//! `src/io/site.rs` and `docs/formats.md`). This file owns the top level, the domain, the
//! channels and the `[geo]` / `[synth]` tables; flow files live in `site_flow.rs`, kinds,
//! candidates and existing sensors in `site_mounts.rs`.
//!
//! It prints nothing: non-fatal findings go to `Site::warnings`. It does not scan every
//! snapshot value (that is `check`'s job, through [`super::open_snapshots`]); it reads
//! headers and small files only.

use std::path::{Path, PathBuf};

use super::csv_in::CsvTable;
use super::keys::{did_you_mean, Section};
use super::npy::{check_shape, read_npy_f64};
use super::site::*;
use super::site_flow::{read_flow, Generated};
use super::site_mounts::{candidates_from_table, read_candidates, read_existing, read_kinds};
use super::zones::read_polygons;
use super::IoError;

const TOP_KEYS: &[&str] = &[
    "name",
    "plane",
    "currency",
    "grid",
    "points",
    "channels",
    "snapshots",
    "basis",
    "kinds",
    "candidates",
    "zones",
    "obstacles",
    "existing",
    "geo",
    "synth",
];

/// Names of the two plane axes, for messages and CSV columns.
pub(crate) fn axis_names(plane: Plane) -> [&'static str; 2] {
    match plane {
        Plane::Xy => ["x", "y"],
        Plane::Xz => ["x", "z"],
    }
}

/// Loads and validates a site; `path` is the site directory or its `.toml` file.
pub fn load_site(path: &Path) -> Result<Site, IoError> {
    load(path, Generated::MustExist)
}

/// Like [`load_site`], but a `[synth]` site whose snapshot file does not exist yet loads with
/// `n_snapshots = 0`: what `crowsnest synth` needs before it writes that file.
pub fn load_site_for_synth(path: &Path) -> Result<Site, IoError> {
    load(path, Generated::MayBeMissing)
}

/// Loads a site from `site.toml` text already in memory; `site_file` names it in messages
/// and its directory is where the files the text names are looked up (they are read from
/// disk as usual). [`load_site`] is this function after reading the file.
pub fn load_site_from_str(site_file: &Path, text: &str) -> Result<Site, IoError> {
    load_text(site_file, text, Generated::MustExist)
}

/// Reads candidate rows from CSV content in memory and checks them against `site` (its
/// plane, domain, kinds, zones and obstacles) exactly as the site loader checks
/// `candidates.csv`; `path` only names the file in messages. Returns the candidates and the
/// warnings the loader would add.
pub fn parse_candidates_csv(
    site: &Site,
    path: &Path,
    bytes: &[u8],
) -> Result<(Vec<Candidate>, Vec<String>), IoError> {
    let table = CsvTable::parse(path, bytes)?;
    let mut warnings = Vec::new();
    let candidates = candidates_from_table(
        &table,
        site.plane,
        &site.domain,
        &site.kinds,
        &site.zones,
        &site.obstacles,
        &mut warnings,
    )?;
    Ok((candidates, warnings))
}

fn load(path: &Path, generated: Generated) -> Result<Site, IoError> {
    let site_file = if path.is_dir() {
        path.join("site.toml")
    } else {
        path.to_path_buf()
    };
    let text = std::fs::read_to_string(&site_file).map_err(|e| {
        let expected = if path.is_dir() {
            "the site description site.toml in the site directory"
        } else {
            "a site directory holding site.toml, or the path of a site .toml file"
        };
        IoError::file_expected(&site_file, e, expected)
    })?;
    load_text(&site_file, &text, generated)
}

fn load_text(site_file: &Path, text: &str, generated: Generated) -> Result<Site, IoError> {
    let table: toml::Table = toml::from_str(text).map_err(|e| syntax_error(site_file, text, &e))?;
    // Messages show paths as the user wrote them; the `Site` holds absolute ones.
    let root = match site_file.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let file = site_file;
    let top = Section::new(file, "", &table, TOP_KEYS)?;
    let mut warnings = Vec::new();

    let name = top
        .req_str("name", "the site name (text)")?
        .trim()
        .to_string();
    if name.is_empty() {
        return Err(top.err("name", "found an empty name, expected the site name"));
    }
    let plane = match top.opt_str("plane", "\"xy\" or \"xz\"")? {
        None | Some("xy") => Plane::Xy,
        Some("xz") => Plane::Xz,
        Some(other) => {
            return Err(top.err(
                "plane",
                format!(
                    "found \"{other}\"{}, expected \"xy\" (plan view) or \"xz\" (vertical slice)",
                    did_you_mean(other, ["xy", "xz"])
                ),
            ))
        }
    };
    let currency = top
        .opt_str("currency", "a currency label such as \"EUR\"")?
        .unwrap_or_default()
        .trim()
        .to_string();

    let obstacles: Vec<Obstacle> = read_polygons(file, &root, &top, "obstacles", &mut warnings)?
        .into_iter()
        .map(|p| Obstacle {
            name: p.name,
            polygon: p.polygon,
        })
        .collect();
    let zones: Vec<Zone> = read_polygons(file, &root, &top, "zones", &mut warnings)?
        .into_iter()
        .map(|p| Zone {
            name: p.name,
            polygon: p.polygon,
        })
        .collect();
    let domain = read_domain(file, &root, &top, plane, &obstacles, &mut warnings)?;
    let channels = read_channels(file, &top, plane)?;
    let flow = read_flow(
        file,
        &root,
        &top,
        &domain,
        &channels,
        &mut warnings,
        generated,
    )?;
    let kinds = read_kinds(file, &top, plane, &channels)?;
    let candidates = read_candidates(
        file,
        &root,
        &top,
        plane,
        &domain,
        &kinds,
        &zones,
        &obstacles,
        &mut warnings,
    )?;
    let existing = read_existing(file, &top, &kinds, &candidates, &zones, &mut warnings)?;
    let geo_origin = read_geo(file, &top)?;
    let synth = read_synth(file, &top)?;

    for (idx, obstacle) in obstacles.iter().enumerate() {
        if !obstacle
            .polygon
            .vertices
            .iter()
            .any(|&v| domain.contains(v))
        {
            warnings.push(format!(
                "obstacles[{idx}] `{}` lies wholly outside the domain",
                obstacle.name
            ));
        }
    }

    let absolute = |p: &Path| std::path::absolute(p).map_err(|e| IoError::file(p, e));
    let flow = match flow {
        FlowSource::Snapshots(s) => FlowSource::Snapshots(SnapshotFiles {
            path: absolute(&s.path)?,
            ..s
        }),
        FlowSource::Basis(b) => FlowSource::Basis(BasisFiles {
            modes: absolute(&b.modes)?,
            mean: absolute(&b.mean)?,
            energies: absolute(&b.energies)?,
            dt: b.dt,
        }),
    };
    Ok(Site {
        name,
        currency,
        root: absolute(&root)?,
        plane,
        domain,
        channels,
        flow,
        kinds,
        candidates,
        zones,
        obstacles,
        existing,
        geo_origin,
        synth,
        warnings,
    })
}

fn syntax_error(path: &Path, text: &str, err: &toml::de::Error) -> IoError {
    let place = match err.span() {
        Some(span) => {
            let before = &text[..span.start.min(text.len())];
            let line = before.matches('\n').count() + 1;
            let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
            format!("line {line}, column {column}")
        }
        None => "syntax".to_string(),
    };
    IoError::invalid(
        path,
        place,
        format!(
            "not valid TOML: {}",
            err.message().trim().replace('\n', "; ")
        ),
    )
}

fn read_domain(
    file: &Path,
    root: &Path,
    top: &Section,
    plane: Plane,
    obstacles: &[Obstacle],
    warnings: &mut Vec<String>,
) -> Result<Domain, IoError> {
    match (top.opt_table("grid")?, top.opt_table("points")?) {
        (Some(grid), None) => read_grid(file, root, grid, obstacles).map(Domain::Grid),
        (None, Some(points)) => {
            read_points(file, root, points, plane, obstacles, warnings).map(Domain::Points)
        }
        (Some(_), Some(_)) => Err(top.err(
            "points",
            "found both [grid] and [points], expected exactly one domain",
        )),
        (None, None) => Err(top.err(
            "grid",
            "missing domain; expected a [grid] table (structured grid) or a [points] table \
             (point cloud)",
        )),
    }
}

fn read_grid(
    file: &Path,
    root: &Path,
    table: &toml::Table,
    obstacles: &[Obstacle],
) -> Result<Grid, IoError> {
    let s = Section::new(
        file,
        "grid",
        table,
        &["origin", "spacing", "nx", "ny", "solid", "weights"],
    )?;
    let origin = s.req_pair("origin", "[x, y] of node (0, 0) in m")?;
    let spacing = s.req_pair("spacing", "[dx, dy] node spacing in m")?;
    for (axis, d) in spacing.iter().enumerate() {
        if *d <= 0.0 {
            return Err(s.err(
                "spacing",
                format!("found {d} along axis {axis}, expected a node spacing in m > 0"),
            ));
        }
    }
    let nx = s.req_count("nx", "the number of nodes along the first axis", 2)?;
    let ny = s.req_count("ny", "the number of nodes along the second axis", 2)?;
    let n_points = nx
        .checked_mul(ny)
        .ok_or_else(|| s.err("ny", "nx·ny is too large"))?;

    let mut solid = vec![false; n_points];
    if let Some(path) = s.opt_file("solid", root, "a (ny, nx) .npy mask")? {
        let (shape, values) = read_npy_f64(&path)?;
        check_shape(&path, &shape, &[Some(ny), Some(nx)], &["ny", "nx"])?;
        for (point_idx, v) in values.iter().enumerate() {
            if v.is_nan() {
                return Err(IoError::invalid(
                    &path,
                    format!("node i={}, j={}", point_idx % nx, point_idx / nx),
                    "found NaN, expected 0 (flow) or non-zero (solid)",
                ));
            }
            solid[point_idx] = *v != 0.0;
        }
    }
    let mut grid = Grid {
        origin,
        spacing,
        nx,
        ny,
        solid,
        weight: vec![spacing[0] * spacing[1]; n_points],
    };
    for j in 0..ny {
        for i in 0..nx {
            let node = grid.node(i, j);
            if obstacles.iter().any(|o| o.polygon.contains(node)) {
                grid.solid[j * nx + i] = true;
            }
        }
    }
    if let Some(path) = s.opt_file("weights", root, "a (ny, nx) .npy of cell areas in m²")? {
        let (shape, values) = read_npy_f64(&path)?;
        check_shape(&path, &shape, &[Some(ny), Some(nx)], &["ny", "nx"])?;
        for (point_idx, &v) in values.iter().enumerate() {
            let usable = v.is_finite() && v > 0.0;
            if !grid.solid[point_idx] && !usable {
                return Err(IoError::invalid(
                    &path,
                    format!("node i={}, j={}", point_idx % nx, point_idx / nx),
                    format!("found {v}, expected a cell area in m² > 0 on a flow node"),
                ));
            }
            grid.weight[point_idx] = v;
        }
    }
    for (w, &is_solid) in grid.weight.iter_mut().zip(&grid.solid) {
        if is_solid {
            *w = 0.0;
        }
    }
    if grid.solid.iter().all(|&b| b) {
        return Err(s.err("solid", "every node is solid; expected some flow nodes"));
    }
    Ok(grid)
}

fn read_points(
    file: &Path,
    root: &Path,
    table: &toml::Table,
    plane: Plane,
    obstacles: &[Obstacle],
    warnings: &mut Vec<String>,
) -> Result<PointCloud, IoError> {
    let s = Section::new(file, "points", table, &["file"])?;
    let path = s.req_file("file", root, "a CSV of x, y (or x, z), weight")?;
    let t = CsvTable::read(&path)?;
    let [ax, ay] = axis_names(plane);
    // The coordinate off the plane (z of a plan-view cloud, y of a slice) may be present,
    // as CFD exports write it; it is not used.
    let off_plane = match plane {
        Plane::Xy => "z",
        Plane::Xz => "y",
    };
    t.check_columns(&[ax, ay, "weight"], &[off_plane])?;
    let (cx, cy, cw) = (t.col_req(ax)?, t.col_req(ay)?, t.col_req("weight")?);
    let mut cloud = PointCloud {
        points: Vec::with_capacity(t.n_rows()),
        weight: Vec::with_capacity(t.n_rows()),
    };
    for row in 0..t.n_rows() {
        let p = [
            t.number(row, cx, "a coordinate in m")?,
            t.number(row, cy, "a coordinate in m")?,
        ];
        let w = t.number(row, cw, "a cell weight (m² or m³)")?;
        if w <= 0.0 {
            return Err(t.err(row, cw, format!("found {w}, expected a cell weight > 0")));
        }
        if let Some(o) = obstacles.iter().find(|o| o.polygon.contains(p)) {
            warnings.push(format!(
                "{}: row {}: point lies inside obstacle `{}`",
                path.display(),
                row + 1,
                o.name
            ));
        }
        cloud.points.push(p);
        cloud.weight.push(w);
    }
    if cloud.points.is_empty() {
        return Err(IoError::invalid(
            &path,
            "rows",
            "no points; expected at least one data row",
        ));
    }
    Ok(cloud)
}

fn read_channels(file: &Path, top: &Section, plane: Plane) -> Result<Vec<Channel>, IoError> {
    let tables = top.table_array("channels")?;
    if tables.is_empty() {
        return Err(top.err(
            "channels",
            "missing required [[channels]]; expected at least one (name, unit, role)",
        ));
    }
    let roles = ["velocity-x", "velocity-y", "velocity-z", "scalar"];
    let mut channels: Vec<Channel> = Vec::new();
    for (idx, table) in tables.into_iter().enumerate() {
        let prefix = format!("channels[{idx}]");
        let s = Section::new(file, &prefix, table, &["name", "unit", "role"])?;
        let name = s
            .req_str("name", "a channel name such as \"u\"")?
            .trim()
            .to_string();
        if name.is_empty() || name.contains(['@', ';', ',']) {
            return Err(s.err(
                "name",
                format!("found \"{name}\", expected a non-empty name without @ ; ,"),
            ));
        }
        if channels.iter().any(|c| c.name == name) {
            return Err(s.err("name", format!("channel `{name}` is defined twice")));
        }
        let unit = s.req_str("unit", "a unit such as \"m/s\"")?.to_string();
        let role = match s.opt_str("role", "a role")? {
            Some("velocity-x") => ChannelRole::VelocityX,
            Some("velocity-y") => ChannelRole::VelocityY,
            Some("velocity-z") => ChannelRole::VelocityZ,
            Some("scalar") => ChannelRole::Scalar,
            Some(other) => {
                return Err(s.err(
                    "role",
                    format!(
                        "found \"{other}\"{}, expected one of {}",
                        did_you_mean(other, roles),
                        roles.join(", ")
                    ),
                ))
            }
            // Common names of velocity components; anything else is a scalar.
            None => match name.as_str() {
                "u" => ChannelRole::VelocityX,
                "v" if plane == Plane::Xy => ChannelRole::VelocityY,
                "w" => ChannelRole::VelocityZ,
                _ => ChannelRole::Scalar,
            },
        };
        if plane == Plane::Xz && role == ChannelRole::VelocityY {
            return Err(s.err(
                "role",
                "velocity-y on a vertical slice (plane = \"xz\"); expected velocity-x, velocity-z or scalar",
            ));
        }
        if role != ChannelRole::Scalar && channels.iter().any(|c| c.role == role) {
            return Err(s.err(
                "role",
                "this velocity component is already given by another channel",
            ));
        }
        channels.push(Channel { name, unit, role });
    }
    Ok(channels)
}

fn read_geo(file: &Path, top: &Section) -> Result<Option<GeoOrigin>, IoError> {
    let Some(table) = top.opt_table("geo")? else {
        return Ok(None);
    };
    let s = Section::new(file, "geo", table, &["lat", "lon", "rotation"])?;
    let lat = s.req_f64("lat", "a WGS84 latitude in degrees")?;
    if !(-90.0..=90.0).contains(&lat) {
        return Err(s.err(
            "lat",
            format!("found {lat}, expected a latitude in [-90, 90] degrees"),
        ));
    }
    let lon = s.req_f64("lon", "a WGS84 longitude in degrees")?;
    if !(-180.0..=180.0).contains(&lon) {
        return Err(s.err(
            "lon",
            format!("found {lon}, expected a longitude in [-180, 180] degrees"),
        ));
    }
    let rotation = s.opt_f64("rotation", "degrees clockwise from true north to local +y")?;
    Ok(Some(GeoOrigin {
        lat_deg: lat,
        lon_deg: lon,
        rotation_deg: rotation.unwrap_or(0.0),
    }))
}

fn read_synth(file: &Path, top: &Section) -> Result<Option<SynthSettings>, IoError> {
    let Some(table) = top.opt_table("synth")? else {
        return Ok(None);
    };
    let s = Section::new(
        file,
        "synth",
        table,
        &[
            "wind_speed",
            "wind_from",
            "turbulence_intensity",
            "direction_swing",
            "duration",
            "spin_up",
            "seed",
        ],
    )?;
    Ok(Some(SynthSettings {
        wind_speed: s.req_positive("wind_speed", "a mean wind speed in m/s")?,
        wind_from_deg: s.req_f64("wind_from", "a direction in degrees clockwise from north")?,
        turbulence_intensity: s
            .req_non_negative("turbulence_intensity", "a turbulence intensity")?,
        direction_swing_deg: s
            .req_non_negative("direction_swing", "a swing amplitude in degrees")?,
        duration: s.req_positive("duration", "a duration in s")?,
        spin_up: s.req_non_negative("spin_up", "a spin-up time in s")?,
        seed: s.req_count("seed", "a non-negative integer seed", 0)? as u64,
    }))
}
