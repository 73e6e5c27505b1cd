//! Pictures, report and GeoJSON: SVG is well-formed XML, PNGs are not blank and carry the
//! palette, GeoJSON matches GeographicLib, and the report renders in headless Chromium
//! without console errors. Set `CROWSNEST_LOOK_DIR` to also keep the outputs for viewing.

#![allow(clippy::unwrap_used)]

use std::path::PathBuf;

use crowsnest::basis::Basis;
use crowsnest::io::{
    BeamDirection, BeamPattern, Candidate, Channel, ChannelRole, Domain, ExistingSensor,
    FlowSource, GeoOrigin, Grid, Measurement, Obstacle, Plane, PointCloud, Polygon, SensorKind,
    Site, SnapshotFiles, Zone,
};
use crowsnest::render::{
    self, palette, CurveChart, EnergyChart, FieldLayer, Figure, ModeGallery, ParetoChart,
    ParetoGroup, ParetoPoint, RefLine, Report, ReportFigure, Series, SiteMap, Study, Table,
};
use crowsnest::select::{Layout, LayoutEntry};

use crate::common::{assert_close, find_chromium, run_chromium};

fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> Polygon {
    Polygon {
        vertices: vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]],
    }
}

/// A 600 m × 300 m quay: one warehouse (solid cells and obstacle), a berth lane exclusion
/// zone along the south edge, eight candidate mounts, a cup anemometer and a two-beam lidar.
fn quay_site() -> Site {
    let (nx, ny, dx) = (60usize, 30usize, 10.0);
    let warehouse = rect(250.0, 150.0, 340.0, 210.0);
    let mut solid = vec![false; nx * ny];
    for j in 0..ny {
        for i in 0..nx {
            let (x, y) = (i as f64 * dx, j as f64 * dx);
            solid[j * nx + i] = (250.0..=340.0).contains(&x) && (150.0..=210.0).contains(&y);
        }
    }
    let weight = solid
        .iter()
        .map(|s| if *s { 0.0 } else { dx * dx })
        .collect();
    let candidate = |id: &str, x: f64, y: f64, kinds: Vec<usize>| Candidate {
        id: id.to_string(),
        position: [x, y],
        height: Some(10.0),
        kind_idx: kinds,
        mount_cost: 400.0,
        zone: String::new(),
        heading_deg: 0.0,
    };
    Site {
        name: "test-quay".into(),
        root: PathBuf::from("."),
        plane: Plane::Xy,
        domain: Domain::Grid(Grid {
            origin: [0.0, 0.0],
            spacing: [dx, dx],
            nx,
            ny,
            solid,
            weight,
        }),
        channels: vec![
            Channel {
                name: "u".into(),
                unit: "m/s".into(),
                role: ChannelRole::VelocityX,
            },
            Channel {
                name: "v".into(),
                unit: "m/s".into(),
                role: ChannelRole::VelocityY,
            },
        ],
        flow: FlowSource::Snapshots(SnapshotFiles {
            path: PathBuf::from("s.npy"),
            dt: 1.0,
            n_snapshots: 10,
        }),
        kinds: vec![
            SensorKind {
                name: "cup".into(),
                measurement: Measurement::Point {
                    channel_idx: vec![0, 1],
                },
                noise_sd: 0.3,
                interval: 1.0,
                cost: 2500.0,
            },
            SensorKind {
                name: "lidar".into(),
                measurement: Measurement::Beam(BeamPattern {
                    beams: vec![
                        BeamDirection {
                            azimuth_deg: 60.0,
                            elevation_deg: 0.0,
                        },
                        BeamDirection {
                            azimuth_deg: 330.0,
                            elevation_deg: 0.0,
                        },
                    ],
                    first_gate: 50.0,
                    gate_spacing: 40.0,
                    n_gates: 5,
                    gate_length: 30.0,
                    pulse_width: 20.0,
                }),
                noise_sd: 0.2,
                interval: 2.0,
                cost: 60000.0,
            },
        ],
        candidates: vec![
            candidate("mast-01", 80.0, 120.0, vec![0]),
            candidate("mast-02", 180.0, 240.0, vec![0]),
            candidate("roof-a", 240.0, 200.0, vec![0, 1]),
            candidate("mast-03", 420.0, 110.0, vec![0]),
            candidate("mast-04", 520.0, 230.0, vec![0]),
            candidate("crane-1", 360.0, 80.0, vec![0, 1]),
            candidate("mast-05", 120.0, 60.0, vec![0]),
            candidate("mast-06", 470.0, 170.0, vec![0]),
        ],
        zones: vec![Zone {
            name: "berth-lane".into(),
            polygon: rect(0.0, 0.0, 600.0, 40.0),
        }],
        obstacles: vec![Obstacle {
            name: "warehouse".into(),
            polygon: warehouse,
        }],
        existing: vec![ExistingSensor {
            candidate_idx: 0,
            kind_idx: 0,
        }],
        currency: "EUR".to_string(),
        geo_origin: Some(GeoOrigin {
            lat_deg: 53.54,
            lon_deg: 9.97,
            rotation_deg: 0.0,
        }),
        synth: None,
        warnings: Vec::new(),
    }
}

/// Three smooth made-up modes (not orthonormalised: rendering needs only their shape).
fn quay_basis(site: &Site) -> Basis {
    let Domain::Grid(g) = &site.domain else {
        unreachable!()
    };
    let n_points = g.nx * g.ny;
    let n_dof = n_points * 2;
    let modes = faer::Mat::from_fn(n_dof, 4, |dof, k| {
        let p = dof / 2;
        let c = dof % 2;
        let (x, y) = (
            (p % g.nx) as f64 / g.nx as f64,
            (p / g.nx) as f64 / g.ny as f64,
        );
        let f = (k + 1) as f64;
        if g.solid[p] {
            0.0
        } else if c == 0 {
            (std::f64::consts::PI * f * x).sin() * (std::f64::consts::PI * y).cos() * 0.01
        } else {
            (std::f64::consts::PI * f * y).sin() * (std::f64::consts::PI * x * 0.5).cos() * 0.01
        }
    });
    Basis {
        n_points,
        n_channels: 2,
        mean: vec![0.0; n_dof],
        modes,
        energies: vec![900.0, 400.0, 150.0, 60.0, 20.0, 8.0],
        weights: g.weight.clone(),
    }
}

fn quay_layout() -> Layout {
    let picks = [
        (0usize, 0usize, true),
        (5, 1, false),
        (3, 0, false),
        (4, 0, false),
        (1, 0, false),
    ];
    let mut cost = 0.0;
    Layout {
        entries: picks
            .iter()
            .enumerate()
            .map(|(n, &(candidate_idx, kind_idx, kept))| {
                cost += if kind_idx == 0 { 2900.0 } else { 60400.0 };
                LayoutEntry {
                    rank: n + 1,
                    candidate_idx,
                    kind_idx,
                    marginal_gain: 1.0 / (n + 1) as f64,
                    cumulative_criterion: n as f64,
                    cumulative_cost: cost,
                    kept,
                }
            })
            .collect(),
    }
}

fn site_map(site: &Site) -> SiteMap<'_> {
    let basis = quay_basis(site);
    let background = Some(FieldLayer::std_from_basis(site, &basis, &[0, 1]));
    SiteMap::for_layout(
        site,
        "test-quay: recommended layout over field spread",
        &quay_layout(),
        background,
    )
}

fn count_chart() -> CurveChart {
    let mut chart = CurveChart::new(
        "Error against number of sensors",
        "number of sensors",
        "time-mean RMSE (m/s)",
    );
    let x: Vec<f64> = (1..=10).map(|k| k as f64).collect();
    for (m, (label, scale)) in [
        ("greedy D", 1.0),
        ("QR pivoting", 1.08),
        ("exchange", 0.96),
        ("random", 1.5),
    ]
    .iter()
    .enumerate()
    {
        let mean: Vec<f64> = x
            .iter()
            .map(|k| scale * (0.3 + 1.6 / k) + 0.01 * m as f64)
            .collect();
        let sd: Vec<f64> = mean.iter().map(|v| 0.12 * v).collect();
        chart
            .series
            .push(Series::with_sd(*label, x.clone(), mean, &sd));
    }
    let base = vec![2.4; 10];
    chart.series.push(
        Series::with_sd(
            "evenly spaced grid",
            x.clone(),
            x.iter().map(|k| 0.45 + 2.0 / k).collect(),
            &[0.1; 10],
        )
        .styled(palette::SeriesStyle::baseline()),
    );
    let _ = base;
    chart.ref_lines.push(RefLine {
        value: 0.6,
        label: "target 0.6 m/s".into(),
    });
    chart
}

fn time_chart() -> CurveChart {
    let mut chart = CurveChart::new("Error against time", "time (s)", "field RMSE (m/s)");
    let t: Vec<f64> = (0..300).map(|k| k as f64 * 2.0).collect();
    let free: Vec<f64> = t
        .iter()
        .map(|s| 1.0 + 1.2 * (1.0 - (-s / 200.0).exp()))
        .collect();
    chart.series.push(
        Series::with_sd("free run", t.clone(), free.clone(), &vec![0.2; 300])
            .styled(palette::SeriesStyle::baseline()),
    );
    for (n, lbl) in [(3, "3 sensors"), (6, "6 sensors")] {
        let mean: Vec<f64> = t
            .iter()
            .map(|s| 0.4 + 0.6 / n as f64 * 3.0 * (-s / 60.0).exp() + 0.05 * (s / 40.0).sin())
            .collect();
        chart
            .series
            .push(Series::with_sd(lbl, t.clone(), mean, &vec![0.08; 300]));
    }
    chart
}

fn pareto_chart() -> ParetoChart {
    let mut chart = ParetoChart::new("Cost against error", "cost (EUR)", "time-mean RMSE (m/s)");
    for (m, label) in ["greedy D", "QR pivoting", "random"].iter().enumerate() {
        let points = (1..=8)
            .map(|k| {
                let cost = 2900.0 * k as f64 + 3000.0 * m as f64;
                let mean = (0.3 + 1.6 / k as f64) * (1.0 + 0.2 * m as f64);
                ParetoPoint {
                    cost,
                    mean,
                    lo: mean * 0.88,
                    hi: mean * 1.12,
                }
            })
            .collect();
        chart.groups.push(ParetoGroup {
            label: label.to_string(),
            points,
            style: None,
        });
    }
    chart.target = Some(RefLine {
        value: 0.6,
        label: "target 0.6 m/s".into(),
    });
    let best = chart.groups[0].points[5];
    chart.highlight = Some((best, "recommended: 6 sensors".into()));
    chart
}

/// Minimal XML well-formedness check: tags nest and close, attributes are quoted, `&` starts
/// an entity, nothing follows the root element.
fn assert_well_formed_xml(doc: &str) {
    let mut stack: Vec<String> = Vec::new();
    let mut rest = doc.trim();
    let mut seen_root = false;
    while !rest.is_empty() {
        if let Some(after) = rest.strip_prefix('<') {
            let end = after.find('>').expect("unterminated tag");
            let tag = &after[..end];
            rest = &after[end + 1..];
            if tag.starts_with('?') || tag.starts_with("!--") {
                continue;
            }
            if let Some(name) = tag.strip_prefix('/') {
                let open = stack
                    .pop()
                    .unwrap_or_else(|| panic!("close </{name}> without open"));
                assert_eq!(open, name.trim(), "mismatched close tag");
                continue;
            }
            assert!(!(stack.is_empty() && seen_root), "a second root element");
            let self_closing = tag.ends_with('/');
            let body = tag.trim_end_matches('/');
            let name = body.split_whitespace().next().expect("empty tag");
            assert!(
                name.chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == ':'),
                "bad tag name {name}"
            );
            let attrs = body[name.len()..].trim();
            let quotes = attrs.matches('"').count();
            assert!(quotes % 2 == 0, "unbalanced quotes in <{tag}>");
            assert!(
                attrs.matches('=').count() <= quotes / 2 + attrs.matches("=\"").count(),
                "unquoted attribute in <{tag}>"
            );
            seen_root = true;
            if !self_closing {
                stack.push(name.to_string());
            }
        } else {
            let end = rest.find('<').unwrap_or(rest.len());
            let text = &rest[..end];
            assert!(
                !stack.is_empty() || text.trim().is_empty(),
                "text outside the root: {text:?}"
            );
            for (k, _) in text.match_indices('&') {
                let ent = &text[k..];
                assert!(
                    ["&amp;", "&lt;", "&gt;", "&quot;", "&#"]
                        .iter()
                        .any(|e| ent.starts_with(e)),
                    "bare & in text {:?}",
                    &ent[..ent.len().min(12)]
                );
            }
            rest = &rest[end..];
        }
    }
    assert!(stack.is_empty(), "unclosed tags: {stack:?}");
    assert!(seen_root);
}

type Rgb = (u8, u8, u8);

fn look_dir() -> Option<PathBuf> {
    std::env::var_os("CROWSNEST_LOOK_DIR").map(PathBuf::from)
}

/// Decodes a PNG and checks it is not blank: many distinct colours, real variance.
fn assert_png_not_blank(png: &[u8], must_contain: &[Rgb]) -> image::RgbImage {
    let img = image::load_from_memory(png).expect("PNG decodes").to_rgb8();
    let n = (img.width() * img.height()) as f64;
    let mean: f64 = img
        .pixels()
        .map(|p| p.0[0] as f64 + p.0[1] as f64 + p.0[2] as f64)
        .sum::<f64>()
        / n;
    let var: f64 = img
        .pixels()
        .map(|p| (p.0[0] as f64 + p.0[1] as f64 + p.0[2] as f64 - mean).powi(2))
        .sum::<f64>()
        / n;
    assert!(var > 100.0, "PNG nearly uniform (variance {var})");
    let non_white = img.pixels().filter(|p| p.0 != [255, 255, 255]).count() as f64 / n;
    assert!(
        non_white > 0.03,
        "only {:.1} % of pixels drawn",
        100.0 * non_white
    );
    for c in must_contain {
        assert!(
            img.pixels().any(|p| p.0 == [c.0, c.1, c.2]),
            "colour {c:?} missing from PNG"
        );
    }
    img
}

fn check_figure<F: Figure>(fig: &F, name: &str, must_contain: &[Rgb]) -> String {
    let svg = render::to_svg(fig, name).unwrap();
    assert_well_formed_xml(&svg);
    assert!(svg.contains("<text"), "{name}: no text in the SVG");
    let png = render::to_png(fig, name).unwrap();
    let img = assert_png_not_blank(&png, must_contain);
    assert_eq!((img.width(), img.height()), fig.size());
    if let Some(dir) = look_dir() {
        std::fs::create_dir_all(&dir).unwrap();
        render::write_png(&dir.join(format!("{name}.png")), fig).unwrap();
        render::write_svg(&dir.join(format!("{name}.svg")), fig).unwrap();
    }
    svg
}

fn rgb(c: plotters::style::RGBColor) -> Rgb {
    (c.0, c.1, c.2)
}

#[test]
fn site_map_renders_layers_in_svg_and_png() {
    let site = quay_site();
    let map = site_map(&site);
    // Obstacle fill, the first kind's colour (cup markers) and the second's (lidar beams).
    let svg = check_figure(
        &map,
        "site-map",
        &[
            rgb(palette::OBSTACLE),
            rgb(palette::SERIES[0]),
            rgb(palette::SERIES[1]),
        ],
    );
    // Rank labels 1..5 and the legend entries are text in the SVG.
    for label in [
        ">\n1\n</text>",
        ">\n5\n</text>",
        "cup sensor",
        "lidar sensor",
        "existing (kept)",
        "exclusion zone",
        "y, north (m)",
    ] {
        assert!(svg.contains(label), "site map SVG lacks {label}");
    }
    // Beams come from sensors::beam_traces: the 330° beam from crane-1 (360, 80) runs into
    // the warehouse (250–340 × 150–210) and keeps fewer than its 5 gates; the 60° one is clear.
    assert_eq!(map.beams.len(), 2);
    let blocked = &map.beams[1];
    assert!(
        blocked.gates.len() < 5,
        "{} gates kept",
        blocked.gates.len()
    );
    let [x, y] = blocked.stop;
    assert!(
        (240.0..=350.0).contains(&x) && (140.0..=215.0).contains(&y),
        "stop at ({x}, {y})"
    );
    assert_eq!(map.beams[0].gates.len(), 5);
    // Equal aspect: 600 m × 300 m domain drawn at one scale.
    let (w, h) = map.size();
    assert!(w == 880 && h > 300, "{w}×{h}");
}

#[test]
fn site_map_on_a_point_cloud_draws_dots() {
    let mut site = quay_site();
    let points: Vec<[f64; 2]> = (0..400)
        .map(|k| [(k % 25) as f64 * 24.0 + 5.0, (k / 25) as f64 * 18.0 + 5.0])
        .collect();
    site.domain = Domain::Points(PointCloud {
        weight: vec![400.0; points.len()],
        points,
    });
    let values: Vec<f64> = (0..400).map(|k| (k as f64 / 40.0).sin().abs()).collect();
    let mut map = SiteMap::new(&site, "point cloud");
    map.background = Some(FieldLayer {
        values,
        label: "speed std".into(),
        unit: "m/s".into(),
        diverging: false,
    });
    let svg = check_figure(&map, "site-map-points", &[rgb(palette::OBSTACLE)]);
    assert!(
        svg.matches("<circle").count() >= 400,
        "one dot per point expected"
    );
}

#[test]
fn mode_gallery_and_energy_chart_render() {
    let site = quay_site();
    let basis = quay_basis(&site);
    let gallery = ModeGallery::from_basis(&site, &basis, 0, 4);
    let svg = check_figure(&gallery, "mode-gallery", &[rgb(palette::OBSTACLE)]);
    // Energy shares are 900/1538 = 58.5 %, 400/1538 = 26.0 %.
    assert!(
        svg.contains("mode 1 · 58.5 % energy"),
        "missing energy caption"
    );
    assert!(svg.contains("mode 2 · 26.0 % energy"));
    let energy = EnergyChart::new(basis.energies.clone(), 4);
    check_figure(&energy, "energy", &[rgb(palette::SERIES[2])]);
}

#[test]
fn curve_and_pareto_charts_render() {
    let svg = check_figure(
        &count_chart(),
        "error-vs-count",
        &[rgb(palette::SERIES[0]), rgb(palette::BASELINE)],
    );
    for label in [
        "greedy D",
        "evenly spaced grid",
        "number of sensors",
        "target 0.6 m/s",
    ] {
        assert!(svg.contains(label), "count chart lacks {label}");
    }
    check_figure(
        &time_chart(),
        "error-vs-time",
        &[rgb(palette::BASELINE), rgb(palette::SERIES[0])],
    );
    let mut noise = CurveChart::new(
        "Error against noise level",
        "noise multiplier (×)",
        "time-mean RMSE (m/s)",
    );
    noise.log_x = true;
    let x = vec![0.25, 0.5, 1.0, 2.0, 4.0];
    noise.series.push(Series::with_sd(
        "6 sensors",
        x.clone(),
        x.iter().map(|m| 0.3 + 0.2 * m).collect(),
        &[0.05; 5],
    ));
    check_figure(&noise, "error-vs-noise", &[rgb(palette::SERIES[0])]);
    let svg = check_figure(
        &pareto_chart(),
        "pareto",
        &[rgb(palette::HIGHLIGHT), rgb(palette::SERIES[1])],
    );
    assert!(svg.contains("recommended: 6 sensors"));
}

#[test]
fn geojson_positions_match_geographiclib() {
    // Fixture: exact WGS84 geodesics from GeographicLib (Karney 2013), made by
    // tests/fixtures/geojson/make_geodesic.py.
    let text = std::fs::read_to_string(
        crate::common::repo_root().join("tests/fixtures/geojson/geodesic.csv"),
    )
    .unwrap();
    let mut n_checked = 0;
    for line in text.lines().skip(1) {
        let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
        let origin = GeoOrigin {
            lat_deg: v[0],
            lon_deg: v[1],
            rotation_deg: v[2],
        };
        let [lon, lat] = render::geojson::local_to_lon_lat(&origin, [v[3], v[4]]);
        // Metres of difference on the ground (local scale factors).
        let d_north = (lat - v[5]).to_radians() * 6_371_000.0;
        let d_east = (lon - v[6]).to_radians() * 6_371_000.0 * v[5].to_radians().cos();
        let dist = d_north.hypot(d_east);
        let range = v[3].hypot(v[4]);
        let tol = if range <= 3000.0 { 0.002 } else { 0.01 };
        assert!(
            dist < tol,
            "origin {:?} offset ({}, {}): {dist} m from the geodesic",
            &v[..3],
            v[3],
            v[4]
        );
        n_checked += 1;
    }
    assert_eq!(n_checked, 30);
    // 1000 m north of 53.54° N: 0.008985° (GeographicLib, row 1 of the fixture).
    let o = GeoOrigin {
        lat_deg: 53.54,
        lon_deg: 9.97,
        rotation_deg: 0.0,
    };
    let [_, lat] = render::geojson::local_to_lon_lat(&o, [0.0, 1000.0]);
    assert_close(lat - 53.54, 0.008_985_009, 1e-8, 0.0);
}

#[test]
fn layout_geojson_is_rfc7946_feature_collection() {
    let site = quay_site();
    let layout = quay_layout();
    let origin = site.geo_origin.unwrap();
    let text = render::geojson::layout_geojson(&site, &layout, &origin);
    let doc: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(doc["type"], "FeatureCollection");
    assert!(doc.get("crs").is_none(), "RFC 7946 drops the crs member");
    let features = doc["features"].as_array().unwrap();
    assert_eq!(features.len(), layout.entries.len());
    for (f, e) in features.iter().zip(&layout.entries) {
        assert_eq!(f["type"], "Feature");
        assert_eq!(f["geometry"]["type"], "Point");
        let c = f["geometry"]["coordinates"].as_array().unwrap();
        let (lon, lat) = (c[0].as_f64().unwrap(), c[1].as_f64().unwrap());
        // Longitude first: the site is at 9.97° E, 53.54° N.
        assert!(
            (lon - 9.97).abs() < 0.01 && (lat - 53.54).abs() < 0.01,
            "({lon}, {lat})"
        );
        assert_eq!(f["properties"]["rank"], e.rank);
        assert_eq!(
            f["properties"]["candidate"],
            site.candidates[e.candidate_idx].id.as_str()
        );
    }
    // crane-1 is 360 m east, 80 m north of the origin.
    let c = &features[1]["geometry"]["coordinates"];
    let [lon, lat] = render::geojson::local_to_lon_lat(&origin, [360.0, 80.0]);
    assert_close(c[0].as_f64().unwrap(), lon, 2e-8, 0.0);
    assert_close(c[1].as_f64().unwrap(), lat, 2e-8, 0.0);
}

fn full_report(site: &Site) -> Report {
    let basis = quay_basis(site);
    let fig = |svg: String, caption: &str| ReportFigure {
        svg,
        caption: caption.to_string(),
    };
    let layout = quay_layout();
    let mut table = Table {
        caption: "Ranked sensors".into(),
        header: ["rank", "candidate", "kind", "x (m)", "y (m)", "cost (EUR)"]
            .map(String::from)
            .to_vec(),
        numeric: vec![0, 3, 4, 5],
        ..Default::default()
    };
    for e in &layout.entries {
        let c = &site.candidates[e.candidate_idx];
        table.rows.push(vec![
            e.rank.to_string(),
            c.id.clone(),
            site.kinds[e.kind_idx].name.clone(),
            format!("{:.1}", c.position[0]),
            format!("{:.1}", c.position[1]),
            format!("{:.0}", e.cumulative_cost),
        ]);
    }
    Report {
        title: "Sensor plan for test-quay".into(),
        subtitle: "seed 7 · 64 Monte Carlo runs".into(),
        site_facts: vec![
            ("domain".into(), "600 m × 300 m grid, 10 m spacing".into()),
            ("candidates".into(), "8".into()),
        ],
        site_figures: vec![
            fig(
                render::to_svg(&site_map(site), "map").unwrap(),
                "Site map: recommended layout over the field spread.",
            ),
            fig(
                render::to_svg(&ModeGallery::from_basis(site, &basis, 0, 3), "modes").unwrap(),
                "First POD modes.",
            ),
            fig(
                render::to_svg(&EnergyChart::new(basis.energies.clone(), 4), "energy").unwrap(),
                "Energy per mode.",
            ),
        ],
        layout_table: table,
        layout_csv: "rank,candidate,kind\n1,mast-01,cup\n2,crane-1,lidar\n".into(),
        layout_geojson: Some(render::geojson::layout_geojson(
            site,
            &layout,
            &site.geo_origin.unwrap(),
        )),
        layout_figures: Vec::new(),
        justification: vec!["Five sensors meet the target with margin.".into()],
        studies: vec![
            Study {
                title: "Sensor count".into(),
                paragraphs: vec!["Error falls with every sensor added.".into()],
                figures: vec![fig(
                    render::to_svg(&count_chart(), "count").unwrap(),
                    "Error against count.",
                )],
                tables: Vec::new(),
            },
            Study {
                title: "Time".into(),
                figures: vec![fig(
                    render::to_svg(&time_chart(), "time").unwrap(),
                    "Error against time.",
                )],
                ..Default::default()
            },
            Study {
                title: "Cost".into(),
                figures: vec![fig(
                    render::to_svg(&pareto_chart(), "pareto").unwrap(),
                    "Cost against error.",
                )],
                ..Default::default()
            },
        ],
        sensor_loss: Some(Study {
            title: "Worst single loss: crane-1".into(),
            paragraphs: vec!["Error rises by 18 %.".into()],
            ..Default::default()
        }),
        assumptions: vec![
            ("filter".into(), "Kalman".into()),
            ("seed".into(), "7".into()),
        ],
        extra_cautions: Vec::new(),
    }
}

#[test]
fn report_is_self_contained_and_renders_in_headless_chromium() {
    let site = quay_site();
    let report = full_report(&site);
    let dir = tempfile::tempdir().unwrap();
    let html_path = dir.path().join("report.html");
    render::write_report(&html_path, &report).unwrap();
    let html = std::fs::read_to_string(&html_path).unwrap();
    assert_eq!(html.matches("<figure>").count(), 6);
    // Self-contained: no scripts, no fetched resources; links are anchors or data: URIs.
    assert!(!html.contains("<script") && !html.contains("src=") && !html.contains("url("));
    for (k, _) in html.match_indices("href=\"") {
        let target = &html[k + 6..];
        assert!(
            target.starts_with('#') || target.starts_with("data:"),
            "external link {}",
            &target[..40.min(target.len())]
        );
    }

    let chromium = find_chromium().unwrap_or_else(|| {
        panic!("chromium is not installed: the report test needs it (apt-get install -y chromium; .ci/run installs it)")
    });
    let profile = dir.path().join("profile");
    // The DOM after parsing holds every inline SVG as an element.
    let dom = run_chromium(&chromium, &profile, &["--dump-dom".to_string()], &html_path);
    let dom_text = String::from_utf8_lossy(&dom.stdout);
    assert!(
        dom.status.success(),
        "chromium --dump-dom failed: {}",
        String::from_utf8_lossy(&dom.stderr)
    );
    assert_eq!(
        dom_text.matches("<svg ").count(),
        6,
        "inline SVGs lost while parsing"
    );

    let shot = dir.path().join("report.png");
    let out = run_chromium(
        &chromium,
        &profile,
        &[
            format!("--screenshot={}", shot.display()),
            "--window-size=1200,3000".to_string(),
        ],
        &html_path,
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        shot.exists(),
        "no screenshot written; chromium said: {stderr}"
    );
    for bad in [
        "Uncaught",
        "ERROR:CONSOLE",
        "Failed to load resource",
        "net::ERR_",
    ] {
        assert!(
            !stderr.contains(bad),
            "console error ({bad}) in chromium log:\n{stderr}"
        );
    }
    let png = std::fs::read(&shot).unwrap();
    // The site map's colour scale and obstacles, and the curve colours, show on screen.
    let img = assert_png_not_blank(&png, &[rgb(palette::OBSTACLE), rgb(palette::SERIES[0])]);
    assert_eq!((img.width(), img.height()), (1200, 3000));
    if let Some(look) = look_dir() {
        std::fs::create_dir_all(&look).unwrap();
        std::fs::copy(&shot, look.join("report-screenshot.png")).unwrap();
        std::fs::copy(&html_path, look.join("report.html")).unwrap();
    }
}

#[test]
#[should_panic(expected = "mismatched close tag")]
fn xml_check_catches_misnested_tags() {
    assert_well_formed_xml("<svg><g></svg></g>");
}

#[test]
#[should_panic(expected = "bare &")]
fn xml_check_catches_bare_ampersand() {
    assert_well_formed_xml("<svg><text>a & b</text></svg>");
}

#[test]
fn fine_grids_are_merged_into_blocks_so_svg_stays_small() {
    // 300 × 150 nodes at 2 m: 45 000 cells would be ~4.5 MB of <rect>; blocks of at least
    // 3 px (site map) and 5 px (gallery panels) keep each figure well under 1 MB.
    let mut site = quay_site();
    let (nx, ny) = (300usize, 150usize);
    site.domain = Domain::Grid(Grid {
        origin: [1.0, 1.0],
        spacing: [2.0, 2.0],
        nx,
        ny,
        solid: vec![false; nx * ny],
        weight: vec![4.0; nx * ny],
    });
    let values: Vec<f64> = (0..nx * ny)
        .map(|k| ((k % nx) as f64 * 0.37).sin() * ((k / nx) as f64 * 0.21).cos())
        .collect();
    let mut map = SiteMap::new(&site, "fine grid");
    map.background = Some(FieldLayer {
        values: values.clone(),
        label: "noise".into(),
        unit: String::new(),
        diverging: true,
    });
    let svg = render::to_svg(&map, "fine").unwrap();
    assert!(svg.len() < 1_000_000, "site map SVG is {} bytes", svg.len());
    assert!(
        svg.matches("<rect").count() > 2_000,
        "the field must still be drawn in detail"
    );
    let gallery = ModeGallery {
        site: &site,
        title: "fine".into(),
        panels: (0..6)
            .map(|k| render::ModePanel {
                caption: format!("mode {k}"),
                layer: FieldLayer {
                    values: values.clone(),
                    label: String::new(),
                    unit: String::new(),
                    diverging: true,
                },
            })
            .collect(),
        n_cols: 3,
        width: 880,
    };
    let svg = render::to_svg(&gallery, "fine-gallery").unwrap();
    assert!(svg.len() < 1_000_000, "gallery SVG is {} bytes", svg.len());
}

#[test]
fn demo_site_geometry_renders_on_the_map() {
    // The shipped harbour-quay demo: its obstacles, zones and every candidate on one map,
    // with one sensor of each kind that a candidate allows (beams traced by `sensors`).
    let path = crate::common::repo_root().join("demo-sites/harbour-quay/site.toml");
    let site = crowsnest::io::load_site_for_synth(&path).unwrap();
    let mut sensors = Vec::new();
    for kind_idx in 0..site.kinds.len() {
        if let Some(candidate_idx) = site
            .candidates
            .iter()
            .position(|c| c.kind_idx.contains(&kind_idx))
        {
            sensors.push(render::MapSensor {
                candidate_idx,
                kind_idx,
                rank: Some(sensors.len() + 1),
                existing: false,
            });
        }
    }
    let mut map = SiteMap::new(&site, format!("{}: geometry and candidates", site.name));
    map.beams = render::MapBeam::for_sensors(&site, &sensors);
    map.sensors = sensors;
    let svg = check_figure(&map, "demo-harbour-quay", &[rgb(palette::ZONE)]);
    for kind in &site.kinds {
        if map
            .sensors
            .iter()
            .any(|s| site.kinds[s.kind_idx].name == kind.name)
        {
            assert!(svg.contains(&format!("{} sensor", kind.name)));
        }
    }
}

#[test]
fn counting_axes_have_whole_number_ticks() {
    // A loss chart: 0..3 sensors lost. Errors in the tens keep y labels whole too, so any
    // fractional label would be an x tick.
    let mut chart = CurveChart::new("Loss", "sensors lost (count)", "RMSE (m/s)");
    chart.series.push(Series::with_sd(
        "recommended",
        vec![0.0, 1.0, 2.0, 3.0],
        vec![10.0, 20.0, 30.0, 40.0],
        &[1.0; 4],
    ));
    let labels = |chart: &CurveChart| -> Vec<String> {
        let svg = render::to_svg(chart, "loss").unwrap();
        svg.split("<text")
            .skip(1)
            .filter_map(|t| t.split_once('>').map(|(_, rest)| rest))
            .filter_map(|rest| {
                rest.split_once("</text>")
                    .map(|(v, _)| v.trim().to_string())
            })
            .collect()
    };
    let fractional = |l: &Vec<String>| {
        l.iter()
            .any(|v| v.parse::<f64>().is_ok_and(|x| x.fract() != 0.0))
    };
    // Without the flag plotters labels half steps on so short a range: the check can fail.
    assert!(fractional(&labels(&chart)), "{:?}", labels(&chart));
    chart.integer_x = true;
    let whole = labels(&chart);
    assert!(!fractional(&whole), "{whole:?}");
    for tick in ["0", "1", "2", "3"] {
        assert!(
            whole.iter().any(|l| l == tick),
            "tick {tick} missing: {whole:?}"
        );
    }
}
