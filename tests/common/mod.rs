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

/// The Chromium binary on PATH, if any.
pub fn find_chromium() -> Option<PathBuf> {
    ["chromium", "chromium-browser"].iter().find_map(|name| {
        Command::new(name)
            .arg("--version")
            .output()
            .ok()
            .filter(|o| o.status.success())
            .map(|_| PathBuf::from(name))
    })
}

/// Runs headless Chromium on `html` with a fresh profile; `extra` adds flags (screenshot, window size).
pub fn run_chromium(
    chromium: &Path,
    profile: &Path,
    extra: &[String],
    html: &Path,
) -> std::process::Output {
    Command::new(chromium)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--hide-scrollbars",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(extra)
        .arg(format!("file://{}", html.display()))
        .output()
        .expect("chromium starts")
}
