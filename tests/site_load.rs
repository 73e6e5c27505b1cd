//! The site loader on the `tests/fixtures/tiny-site` fixture (snapshots written by NumPy with
//! the committed `make_snapshots.py`) and on variants of it built in a temporary directory.

use std::f64::consts::PI;
use std::fs;
use std::path::{Path, PathBuf};

use crowsnest::io::{
    load_site, open_snapshots, write_npy_f64, ChannelRole, Domain, FlowSource, Measurement, Plane,
};

use crate::common::{assert_close, repo_root};

fn tiny_site() -> PathBuf {
    repo_root().join("tests/fixtures/tiny-site")
}

/// Copies the fixture into a fresh temporary directory.
fn copy_tiny(dir: &Path) -> PathBuf {
    let dst = dir.join("site");
    fs::create_dir_all(&dst).unwrap();
    for entry in fs::read_dir(tiny_site()).unwrap() {
        let entry = entry.unwrap();
        fs::copy(entry.path(), dst.join(entry.file_name())).unwrap();
    }
    dst
}

fn edit_toml(site: &Path, from: &str, to: &str) {
    let path = site.join("site.toml");
    let text = fs::read_to_string(&path).unwrap();
    assert!(text.contains(from), "fixture has no `{from}`");
    fs::write(&path, text.replacen(from, to, 1)).unwrap();
}

/// The field of `make_snapshots.py` at snapshot `k`, node `(i, j)`, channel `c`.
fn fixture_value(k: usize, i: usize, j: usize, c: usize) -> f64 {
    if i == 4 && (j == 2 || j == 3) {
        return 0.0;
    }
    let (x, y, k) = (i as f64 * 10.0, j as f64 * 10.0, k as f64);
    let a1 = (2.0 * PI * k / 10.0).cos();
    let a2 = 0.5 * (2.0 * PI * k / 5.0).sin();
    match c {
        0 => 6.0 + a1 * (PI * x / 70.0).sin() + a2 * (PI * y / 50.0).cos(),
        _ => 1.0 + a1 * (PI * x / 70.0).cos() * (PI * y / 50.0).sin() - a2 * (PI * x / 35.0).sin(),
    }
}

#[test]
fn tiny_site_loads_with_every_part() {
    let site = load_site(&tiny_site()).unwrap();
    let again = load_site(&tiny_site().join("site.toml")).unwrap();
    assert_eq!(site.root, again.root);
    assert!(site.root.is_absolute());
    assert_eq!(site.name, "tiny-quay");
    assert_eq!(site.plane, Plane::Xy);
    let Domain::Grid(grid) = &site.domain else {
        panic!("tiny site is a grid")
    };
    assert_eq!((grid.nx, grid.ny), (8, 6));
    // The shed polygon x 32..48, y 12..38 holds exactly nodes (4, 2) and (4, 3).
    let solid: Vec<usize> = (0..48).filter(|&p| grid.solid[p]).collect();
    assert_eq!(solid, vec![2 * 8 + 4, 3 * 8 + 4]);
    for p in 0..48 {
        let expected = if grid.solid[p] { 0.0 } else { 100.0 };
        assert_close(grid.weight[p], expected, 1e-12, 0.0);
    }
    assert_eq!(site.n_dof(), 96);
    assert_eq!(site.channel_idx(ChannelRole::VelocityY), Some(1));
    assert_eq!(site.channels[0].unit, "m/s");

    let FlowSource::Snapshots(files) = &site.flow else {
        panic!("tiny site has snapshots")
    };
    assert_eq!(files.n_snapshots, 10);
    assert_close(files.dt, 1.0, 0.0, 0.0);
    assert!(files.path.is_absolute());

    assert_eq!(site.kinds.len(), 2);
    assert!(
        matches!(&site.kinds[0].measurement, Measurement::Point { channel_idx } if channel_idx == &[0, 1])
    );
    let Measurement::Beam(beam) = &site.kinds[1].measurement else {
        panic!("second kind is a beam")
    };
    assert_eq!((beam.beams.len(), beam.n_gates), (2, 3));
    assert_close(beam.beams[1].azimuth_deg, 90.0, 0.0, 0.0);
    assert_close(beam.pulse_width, 8.0, 0.0, 0.0);

    let ids: Vec<&str> = site.candidates.iter().map(|c| c.id.as_str()).collect();
    assert_eq!(ids, ["mast-a", "mast-b", "roof-c", "quay-d"]);
    assert_eq!(site.candidates[1].kind_idx, vec![0, 1]);
    assert_eq!(site.candidates[0].height, Some(10.0));
    assert_close(site.candidates[1].mount_cost, 1200.0, 0.0, 0.0);
    assert_close(site.candidates[2].heading_deg, 15.0, 0.0, 0.0);
    assert_eq!(site.candidates[3].zone, "south");
    assert_eq!(site.zones.len(), 1);
    assert_eq!(site.obstacles[0].name, "shed");
    assert_eq!(
        (site.existing[0].candidate_idx, site.existing[0].kind_idx),
        (0, 0)
    );
    let geo = site.geo_origin.unwrap();
    assert_close(geo.lat_deg, 53.54, 0.0, 0.0);
    assert!(site.synth.is_none());
    // quay-d (50, 4) lies in the berth strip: a warning, not an error.
    assert_eq!(site.warnings.len(), 1, "{:?}", site.warnings);
    assert!(site.warnings[0].contains("quay-d") && site.warnings[0].contains("berth-strip"));
}

#[test]
fn snapshots_read_back_the_numpy_values() {
    let site = load_site(&tiny_site()).unwrap();
    let mut src = open_snapshots(&site).unwrap();
    assert_eq!((src.n_snapshots(), src.n_dof()), (10, 96));
    let mut all = vec![0.0; 10 * 96];
    src.read_block(0..10, 0..96, &mut all).unwrap();
    for k in 0..10 {
        for j in 0..6 {
            for i in 0..8 {
                for c in 0..2 {
                    let got = all[k * 96 + (j * 8 + i) * 2 + c];
                    assert_close(got, fixture_value(k, i, j, c), 1e-12, 1e-12);
                }
            }
        }
    }
}

#[test]
fn csv_snapshots_match_the_npy_ones() {
    let dir = tempfile::tempdir().unwrap();
    let site_dir = copy_tiny(dir.path());
    let mut text = String::from("t");
    for p in 0..48 {
        text.push_str(&format!(",u@{p},v@{p}"));
    }
    text.push('\n');
    for k in 0..10 {
        text.push_str(&format!("{k}"));
        for p in 0..48 {
            for c in 0..2 {
                text.push_str(&format!(",{:.17e}", fixture_value(k, p % 8, p / 8, c)));
            }
        }
        text.push('\n');
    }
    fs::write(site_dir.join("snap.csv"), text).unwrap();
    edit_toml(&site_dir, "file = \"snapshots.npy\"", "file = \"snap.csv\"");
    let site = load_site(&site_dir).unwrap();
    let mut csv_src = open_snapshots(&site).unwrap();
    let mut npy_src = open_snapshots(&load_site(&tiny_site()).unwrap()).unwrap();
    let (mut a, mut b) = (vec![0.0; 3 * 10], vec![0.0; 3 * 10]);
    csv_src.read_block(4..7, 20..30, &mut a).unwrap();
    npy_src.read_block(4..7, 20..30, &mut b).unwrap();
    for (x, y) in a.iter().zip(&b) {
        assert_close(*x, *y, 1e-14, 1e-14);
    }
}

#[test]
fn basis_points_geojson_and_synth_variants() {
    let dir = tempfile::tempdir().unwrap();
    let site_dir = copy_tiny(dir.path());
    write_npy_f64(
        &site_dir.join("modes.npy"),
        &[3, 6, 8, 2],
        &vec![0.1; 3 * 96],
    )
    .unwrap();
    write_npy_f64(&site_dir.join("mean.npy"), &[6, 8, 2], &vec![1.0; 96]).unwrap();
    fs::write(
        site_dir.join("energies.csv"),
        "mode,energy\n1,3.0\n2,2.0\n3,1.0\n",
    )
    .unwrap();
    edit_toml(
        &site_dir,
        "[snapshots]\nfile = \"snapshots.npy\"\ndt = 1.0",
        "[basis]\nmodes = \"modes.npy\"\nmean = \"mean.npy\"\nenergies = \"energies.csv\"\ndt = 2.0",
    );
    fs::write(
        site_dir.join("zones.geojson"),
        r#"{"type": "FeatureCollection", "features": [{"type": "Feature",
            "properties": {"name": "road"},
            "geometry": {"type": "Polygon", "coordinates": [[[0,45],[70,45],[70,50],[0,50],[0,45]]]}}]}"#,
    )
    .unwrap();
    edit_toml(
        &site_dir,
        "[[obstacles]]",
        "[[zones]]\nfile = \"zones.geojson\"\n\n[[obstacles]]",
    );
    edit_toml(
        &site_dir,
        "[geo]",
        "[synth]\nwind_speed = 8.0\nwind_from = 270.0\nturbulence_intensity = 0.12\n\
         direction_swing = 10.0\nduration = 600.0\nspin_up = 120\nseed = 7\n\n[geo]",
    );
    let site = load_site(&site_dir).unwrap();
    let FlowSource::Basis(basis) = &site.flow else {
        panic!("basis variant")
    };
    assert_eq!(basis.dt, Some(2.0));
    assert!(basis.modes.is_absolute());
    assert!(open_snapshots(&site).is_err());
    assert_eq!(site.zones.len(), 2);
    assert_eq!(site.zones[1].name, "road");
    let synth = site.synth.unwrap();
    assert_eq!(synth.seed, 7);
    assert_close(synth.spin_up, 120.0, 0.0, 0.0);

    // A point cloud of the 8 x 6 nodes with unit weights, modes reshaped to (r, N, C).
    let mut points = String::from("x,y,weight\n");
    for j in 0..6 {
        for i in 0..8 {
            points.push_str(&format!("{},{},1.0\n", i * 10, j * 10));
        }
    }
    fs::write(site_dir.join("points.csv"), points).unwrap();
    write_npy_f64(&site_dir.join("modes.npy"), &[3, 48, 2], &vec![0.1; 3 * 96]).unwrap();
    write_npy_f64(&site_dir.join("mean.npy"), &[48, 2], &vec![1.0; 96]).unwrap();
    edit_toml(
        &site_dir,
        "[grid]\norigin = [0.0, 0.0]\nspacing = [10.0, 10.0]\nnx = 8\nny = 6",
        "[points]\nfile = \"points.csv\"",
    );
    let site = load_site(&site_dir).unwrap();
    let Domain::Points(cloud) = &site.domain else {
        panic!("points variant")
    };
    assert_eq!(cloud.points.len(), 48);
    assert_eq!(site.n_points(), 48);
}

#[test]
fn errors_name_the_key_and_suggest() {
    let dir = tempfile::tempdir().unwrap();
    let site_dir = copy_tiny(dir.path());
    edit_toml(&site_dir, "noise_sd = 0.3", "noise_sdd = 0.3");
    let e = load_site(&site_dir).unwrap_err().to_string();
    assert!(
        e.contains("site.toml: kinds[0].noise_sdd: unknown key (did you mean `noise_sd`?)"),
        "{e}"
    );
    edit_toml(&site_dir, "noise_sdd = 0.3", "noise_sd = 0.3");
    edit_toml(&site_dir, "kind = \"cup\"", "kind = \"lidar\"");
    let e = load_site(&site_dir).unwrap_err().to_string();
    assert!(
        e.contains("kind `lidar` is not allowed at candidate `mast-a`"),
        "{e}"
    );
    edit_toml(&site_dir, "kind = \"lidar\"", "kind = \"cup\"");
    edit_toml(
        &site_dir,
        "azimuth = 90.0",
        "azimuth = 90.0, elevaton = 3.0",
    );
    let e = load_site(&site_dir).unwrap_err().to_string();
    assert!(
        e.contains("kinds[1].beams[1].elevaton: unknown key (did you mean `elevation`?)"),
        "{e}"
    );
    edit_toml(
        &site_dir,
        "azimuth = 90.0, elevaton = 3.0",
        "azimuth = 90.0",
    );
    edit_toml(&site_dir, "plane = \"xy\"", "plane = \"xz\"");
    let e = load_site(&site_dir).unwrap_err().to_string();
    assert!(
        e.contains("channels[1].role: velocity-y on a vertical slice"),
        "{e}"
    );
}
