//! Helpers shared by the integration tests.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Path of the built `crowsnest` binary.
pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_crowsnest"))
}

/// Runs the binary with `args` in `dir` and returns its output.
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the crowsnest binary runs")
}

/// Root of the repository (for demo sites and fixtures).
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Asserts `a` and `b` agree to `abs + rel·|b|`.
#[track_caller]
pub fn assert_close(a: f64, b: f64, abs: f64, rel: f64) {
    let tol = abs + rel * b.abs();
    assert!(
        (a - b).abs() <= tol,
        "{a} vs {b}: differ by {} > {tol}",
        (a - b).abs()
    );
}
