//! `crowsnest basis` through the binary: files written and readable, the energy table, bad
//! ranks refused with exit code 2 and no output, and a precomputed basis imported and truncated.

use std::fs;
use std::path::{Path, PathBuf};

use crowsnest::basis::weights::{dof_weights, orthonormality_defect};
use crowsnest::io::basis_files::{read_basis_files, BasisPaths};
use crowsnest::io::load_site;

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
