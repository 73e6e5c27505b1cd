//! End-to-end test of `rescore` on the demo quay before and after warehouse C is built
//! (`demo-sites/harbour-quay` → `demo-sites/harbour-quay-2031`), with quick-sized snapshots
//! and runs: lost and newly blocked sensors are listed, both sites are scored against their
//! own truth, and the repairs proposed are additions and like-for-like swaps.

use std::path::{Path, PathBuf};

use super::common::{repo_root, run_in};

/// Copies a demo site's inputs (not its generated snapshots) into `dir`.
fn copy_site(name: &str, dir: &Path) -> PathBuf {
    let from = repo_root().join("demo-sites").join(name);
    let to = dir.join(name);
    std::fs::create_dir_all(&to).unwrap();
    for file in ["site.toml", "candidates.csv"] {
        std::fs::copy(from.join(file), to.join(file)).unwrap();
    }
    to
}

fn text(out: &std::process::Output) -> (String, String) {
    (
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn rescore_lists_losses_and_blocked_beams_and_proposes_repairs() {
    let dir = tempfile::tempdir().unwrap();
    let old = copy_site("harbour-quay", dir.path());
    let new = copy_site("harbour-quay-2031", dir.path());
    // An old layout: the two existing masts, a cup on light-13 (taken down in 2031), two roof
    // lidars on warehouse B whose south-east beam now runs into warehouse C, and a crane.
    let layout = dir.path().join("old-layout.csv");
    std::fs::write(
        &layout,
        "candidate,kind\nold-mast-w,cup\nold-mast-e,cup\nlight-13,cup\nroof-b-ne,roof-lidar\nroof-b-se,roof-lidar\ncrane-5,ultrasonic\n",
    )
    .unwrap();
    let (s, l) = (new.to_str().unwrap(), layout.to_str().unwrap());

    let out = run_in(
        dir.path(),
        &[
            "rescore",
            s,
            "--layout",
            l,
            "--before",
            old.to_str().unwrap(),
            "--quick",
        ],
    );
    let (stdout, stderr) = text(&out);
    assert!(out.status.success(), "{stdout}\n{stderr}");
    assert!(stdout.contains("Sensors lost (1):"), "{stdout}");
    assert!(
        stdout.contains("light-13 (cup) at (470.0, 197.0): mount removed from the site"),
        "{stdout}"
    );
    assert!(stdout.contains("Beams newly (partly) blocked:"), "{stdout}");
    assert!(
        stdout.contains("roof-b-ne (roof-lidar) beam 0") && stdout.contains("'warehouse-c'"),
        "the new warehouse blocks a beam that was clear: {stdout}"
    );
    // Like with like: each site scored against its own truth, both stated, target defined.
    assert!(stdout.contains("old layout on `harbour-quay`:"), "{stdout}");
    assert!(
        stdout.contains("surviving sensors on `harbour-quay-2031`:"),
        "{stdout}"
    );
    assert!(stdout.contains("Error to restore: absolute"), "{stdout}");
    assert!(stdout.contains("(the stricter of the two)"), "{stdout}");
    let band_now: f64 = stdout
        .split("surviving sensors on `harbour-quay-2031`: ")
        .nth(1)
        .and_then(|t| t.split("upper band ").nth(1))
        .and_then(|t| t.split(')').next())
        .and_then(|v| v.parse().ok())
        .expect("the surviving layout's upper band is printed");

    // A stricter target forces repairs: additions in cost order and like-for-like swaps.
    let target = format!("{:.3}", 0.97 * band_now);
    let out = run_in(
        dir.path(),
        &[
            "rescore",
            s,
            "--layout",
            l,
            "--before",
            old.to_str().unwrap(),
            "--target-rmse",
            &target,
            "--quick",
        ],
    );
    let (stdout, stderr) = text(&out);
    assert!(out.status.success(), "{stdout}\n{stderr}");
    assert!(stdout.contains("(given with --target-rmse)"), "{stdout}");
    assert!(stdout.contains("The surviving sensors miss it"), "{stdout}");
    assert!(stdout.contains("Cheapest additions"), "{stdout}");
    let budgets: Vec<f64> = stdout
        .lines()
        .filter_map(|line| line.trim().strip_prefix("budget "))
        .filter_map(|rest| rest.split(':').next())
        .map(|v| v.trim().replace('\u{202f}', "").parse().unwrap())
        .collect();
    assert!(!budgets.is_empty(), "{stdout}");
    assert!(
        budgets.windows(2).all(|w| w[0] < w[1]),
        "rising budgets: {budgets:?}"
    );
    assert!(
        stdout.contains("light-13 (cup, lost) -> ") && stdout.contains("(cup), "),
        "the lost cup is swapped for a cup nearby: {stdout}"
    );
    assert!(
        !stdout.contains("(roof-lidar, beams blocked) -> roof-b-"),
        "a blocked sensor is not swapped for itself or another blocked one: {stdout}"
    );
    assert!(
        stdout.contains("Cheapest repair found: ") || stdout.contains("No repair studied"),
        "{stdout}"
    );

    // Without the old site or a target there is nothing to restore: bad input, and why.
    let out = run_in(dir.path(), &["rescore", s, "--layout", l, "--quick"]);
    let (_, stderr) = text(&out);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("--before OLD_SITE") && stderr.contains("--target-rmse"),
        "{stderr}"
    );
}
