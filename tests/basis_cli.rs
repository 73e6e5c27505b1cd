//! `crowsnest basis` through the binary: files written and readable, the energy table, bad
//! ranks refused with exit code 2 and no output, and a precomputed basis imported and truncated.

use std::fs;
use std::path::{Path, PathBuf};

use crowsnest::basis::weights::{dof_weights, orthonormality_defect};
use crowsnest::io::basis_files::{read_basis_files, BasisPaths};
use crowsnest::io::{load_site, read_npy_f64, Domain};

use crate::common::{repo_root, run_in};

/// Copies the `tiny-site` fixture (8 × 6 grid, 2 channels, 10 snapshots, one solid shed).
fn copy_tiny(dir: &Path) -> PathBuf {
    let dst = dir.join("site");
    fs::create_dir_all(&dst).unwrap();
    for entry in fs::read_dir(repo_root().join("tests/fixtures/tiny-site")).unwrap() {
        let entry = entry.unwrap();
        fs::copy(entry.path(), dst.join(entry.file_name())).unwrap();
    }
    dst
}

fn paths(dir: &Path) -> BasisPaths {
    BasisPaths {
        modes: dir.join("modes.npy"),
        mean: dir.join("mean.npy"),
        energies: dir.join("energies.csv"),
    }
}

#[test]
fn basis_command_writes_orthonormal_modes_and_prints_energies() {
    let tmp = tempfile::tempdir().unwrap();
    let site_dir = copy_tiny(tmp.path());
    let out = run_in(tmp.path(), &["basis", "site", "--energy", "0.9"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("mode") && stdout.contains("cumulative"),
        "{stdout}"
    );
    // Default output directory: `basis/` beside site.toml.
    let files = paths(&site_dir.join("basis"));
    let site = load_site(&site_dir).unwrap();
    let loaded = read_basis_files(&files, &site.domain, 2).unwrap();
    assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
    let defect = orthonormality_defect(
        loaded.modes.as_ref(),
        &dof_weights(site.domain.weights(), 2),
    );
    assert!(defect < 1e-10, "defect {defect}");
    let text = fs::read_to_string(&files.energies).unwrap();
    assert!(text.starts_with("mode,energy,fraction,cumulative_fraction\n"));
}

#[test]
fn bad_ranks_exit_2_with_one_line_and_write_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    copy_tiny(tmp.path());
    for (args, needle) in [
        (vec!["--energy", "1.5"], "--energy 1.5"),
        (vec!["--energy", "0"], "(0, 1]"),
        // A negative number reaches crowsnest's own check, not clap's "unexpected argument".
        (vec!["--energy", "-0.5"], "--energy -0.5"),
        (vec!["--modes", "10"], "10 snapshots"),
        (vec!["--modes", "0"], "at least 1"),
    ] {
        let mut all = vec!["basis", "site", "--out", "out"];
        all.extend(&args);
        let out = run_in(tmp.path(), &all);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(needle), "{args:?}: {stderr}");
        assert_eq!(stderr.trim().lines().count(), 1, "{args:?}: {stderr}");
        assert!(!tmp.path().join("out").exists(), "{args:?} wrote output");
    }
}

#[test]
fn precomputed_basis_is_imported_and_truncated() {
    let tmp = tempfile::tempdir().unwrap();
    let site_dir = copy_tiny(tmp.path());
    let out = run_in(
        tmp.path(),
        &["basis", "site", "--modes", "2", "--method", "svd"],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // Turn the site into one that brings its basis.
    let toml = fs::read_to_string(site_dir.join("site.toml")).unwrap();
    let toml = toml.replace(
        "[snapshots]\nfile = \"snapshots.npy\"\ndt = 1.0",
        "[basis]\nmodes = \"basis/modes.npy\"\nmean = \"basis/mean.npy\"\n\
         energies = \"basis/energies.csv\"",
    );
    fs::write(site_dir.join("site.toml"), toml).unwrap();
    // Writing over its own files is refused.
    let out = run_in(tmp.path(), &["basis", "site", "--modes", "1"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--out"));
    let out = run_in(
        tmp.path(),
        &["basis", "site", "--modes", "1", "--out", "one"],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let site = load_site(&site_dir).unwrap();
    let one = read_basis_files(&paths(&tmp.path().join("one")), &site.domain, 2).unwrap();
    let two = read_basis_files(&paths(&site_dir.join("basis")), &site.domain, 2).unwrap();
    assert_eq!(one.modes.ncols(), 1);
    assert_eq!(one.energies, two.energies);
    for dof_idx in 0..one.modes.nrows() {
        assert!((one.modes[(dof_idx, 0)] - two.modes[(dof_idx, 0)]).abs() < 1e-15);
    }
    let out = run_in(
        tmp.path(),
        &["basis", "site", "--modes", "3", "--out", "three"],
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("holds 2"));
}

/// Copies the tiny site, then the named files of `tests/fixtures/site-variants` (made by its
/// `make_variants.py`) into it, and applies the `site.toml` edits.
fn tiny_variant(dir: &Path, files: &[&str], edits: &[(&str, &str)]) -> PathBuf {
    let site_dir = copy_tiny(dir);
    let variants = repo_root().join("tests/fixtures/site-variants");
    for name in files {
        fs::copy(variants.join(name), site_dir.join(name)).unwrap();
    }
    let path = site_dir.join("site.toml");
    let mut toml = fs::read_to_string(&path).unwrap();
    for (from, to) in edits {
        assert!(toml.contains(from), "tiny-site has no `{from}`");
        toml = toml.replacen(from, to, 1);
    }
    fs::write(&path, toml).unwrap();
    site_dir
}

/// Runs `crowsnest basis` with `args` in `dir`, which must succeed.
fn basis_ok(dir: &Path, args: &[&str]) {
    let mut all = vec!["basis"];
    all.extend(args);
    let out = run_in(dir, &all);
    assert!(
        out.status.success(),
        "{args:?}: {}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn grid_weights_file_sets_the_inner_product_of_the_basis() {
    let tmp = tempfile::tempdir().unwrap();
    let site_dir = tiny_variant(
        tmp.path(),
        &["weights.npy"],
        &[("ny = 6", "ny = 6\nweights = \"weights.npy\"")],
    );
    let site = load_site(&site_dir).unwrap();
    let Domain::Grid(grid) = &site.domain else {
        panic!("grid site")
    };
    // The loaded weights are the file's cell areas, and 0 on the two shed nodes
    // (i=4, j=2 and j=3), as docs/formats.md specifies.
    let (_, areas) = read_npy_f64(&site_dir.join("weights.npy")).unwrap();
    for (point_idx, (&w, &area)) in grid.weight.iter().zip(&areas).enumerate() {
        let expected = if point_idx == 2 * 8 + 4 || point_idx == 3 * 8 + 4 {
            0.0
        } else {
            area
        };
        assert_eq!(w.to_bits(), expected.to_bits(), "node {point_idx}");
    }
    // Node positions are not moved by the weights.
    assert_eq!(
        grid.node(3, 2).map(f64::to_bits),
        [30.0f64, 20.0].map(f64::to_bits)
    );

    basis_ok(tmp.path(), &["site", "--modes", "2"]);
    let loaded = read_basis_files(&paths(&site_dir.join("basis")), &site.domain, 2).unwrap();
    // POD modes are orthonormal in the inner product they were computed with (definition of
    // POD in a weighted inner product; Holmes, Lumley & Berkooz, "Turbulence, Coherent
    // Structures, Dynamical Systems and Symmetry", ch. 3, from memory).
    let defect = orthonormality_defect(
        loaded.modes.as_ref(),
        &dof_weights(site.domain.weights(), 2),
    );
    assert!(defect < 1e-10, "weighted defect {defect}");
    // ...and not in the uniform one, so the file's weights were really used.
    let uniform: Vec<f64> = grid
        .solid
        .iter()
        .map(|&solid| if solid { 0.0 } else { 100.0 })
        .collect();
    let uniform_defect = orthonormality_defect(loaded.modes.as_ref(), &dof_weights(&uniform, 2));
    assert!(uniform_defect > 1e-3, "uniform defect {uniform_defect}");
}

#[test]
fn point_cloud_site_with_t_n_c_snapshots_runs_check_and_basis() {
    let tmp = tempfile::tempdir().unwrap();
    let grid_dir = tmp.path().join("grid");
    copy_tiny(&grid_dir);
    let points_dir = tmp.path().join("points");
    let site_dir = tiny_variant(
        &points_dir,
        &["points.csv", "snapshots_points.npy"],
        &[
            (
                "[grid]\norigin = [0.0, 0.0]\nspacing = [10.0, 10.0]\nnx = 8\nny = 6",
                "[points]\nfile = \"points.csv\"",
            ),
            (
                "file = \"snapshots.npy\"",
                "file = \"snapshots_points.npy\"",
            ),
        ],
    );
    let out = run_in(&site_dir, &["check", "."]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("48 points"), "{stdout}");
    assert!(stdout.contains("values: all 960 finite"), "{stdout}");

    basis_ok(&points_dir, &["site", "--modes", "2"]);
    basis_ok(&grid_dir, &["site", "--modes", "2"]);
    let site = load_site(&site_dir).unwrap();
    let points = read_basis_files(&paths(&site_dir.join("basis")), &site.domain, 2).unwrap();
    let defect = orthonormality_defect(
        points.modes.as_ref(),
        &dof_weights(site.domain.weights(), 2),
    );
    assert!(defect < 1e-10, "defect {defect}");
    // The cloud is the grid's nodes with weight dx·dy. The only nodes weighted differently
    // (the two shed nodes: solid on the grid, weight 100 m² in the cloud) hold a constant
    // 0, so they add nothing to the fluctuation and the energies must agree (exact algebra;
    // the tolerance is rounding).
    let grid_site = load_site(&grid_dir.join("site")).unwrap();
    let grid =
        read_basis_files(&paths(&grid_dir.join("site/basis")), &grid_site.domain, 2).unwrap();
    for (mode_idx, (p, g)) in points
        .energies
        .iter()
        .zip(&grid.energies)
        .take(2)
        .enumerate()
    {
        assert!(
            (p - g).abs() <= 1e-10 * g.abs(),
            "mode {mode_idx}: points {p}, grid {g}"
        );
    }
}

#[test]
fn f32_snapshots_run_through_basis() {
    let tmp = tempfile::tempdir().unwrap();
    let f64_dir = tmp.path().join("f64");
    copy_tiny(&f64_dir);
    let f32_dir = tmp.path().join("f32");
    let site_dir = tiny_variant(
        &f32_dir,
        &["snapshots_f32.npy"],
        &[("file = \"snapshots.npy\"", "file = \"snapshots_f32.npy\"")],
    );
    basis_ok(&f32_dir, &["site", "--modes", "2"]);
    basis_ok(&f64_dir, &["site", "--modes", "2"]);
    let site = load_site(&site_dir).unwrap();
    let single = read_basis_files(&paths(&site_dir.join("basis")), &site.domain, 2).unwrap();
    let double = read_basis_files(&paths(&f64_dir.join("site/basis")), &site.domain, 2).unwrap();
    // The f32 file holds the f64 field rounded to single precision (relative error at most
    // 2^-24 ≈ 6e-8 per value, IEEE 754 binary32); energies are quadratic in the values, so
    // they agree to a few times that. 1e-5 leaves a wide margin yet fails if the f32 data
    // were misread (wrong dtype size or byte order gives garbage).
    for (mode_idx, (s, d)) in single
        .energies
        .iter()
        .zip(&double.energies)
        .take(2)
        .enumerate()
    {
        assert!(
            (s - d).abs() <= 1e-5 * d.abs(),
            "mode {mode_idx}: f32 {s}, f64 {d}"
        );
    }
    let defect = orthonormality_defect(
        single.modes.as_ref(),
        &dof_weights(site.domain.weights(), 2),
    );
    assert!(defect < 1e-10, "defect {defect}");
}
