//! End-to-end tests of `plan`, `sweep` and `merge` on the small twin fixture site: every
//! promised file is written, the report renders in headless Chromium, the study table follows
//! docs/formats.md, and a study gives byte-identical tables with 1 and 2 threads, sharded and
//! merged, and after being killed and resumed.

use std::path::{Path, PathBuf};
use std::process::Command;

use crowsnest::sweep::TIDY_HEADER;

use super::common::{bin, find_chromium, repo_root, run_chromium};

fn fixture() -> PathBuf {
    repo_root().join("tests/fixtures/twin-site")
}

fn crowsnest(args: &[&str], threads: usize) -> std::process::Output {
    Command::new(bin())
        .args(args)
        .env("RAYON_NUM_THREADS", threads.to_string())
        .output()
        .expect("crowsnest runs")
}

fn assert_ok(out: &std::process::Output) {
    assert!(
        out.status.success(),
        "exit {:?}\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Asserts two tables are byte-identical, showing the first differing line only.
#[track_caller]
fn assert_same_table(a: &[u8], b: &[u8], what: &str) {
    if a != b {
        let (a, b) = (String::from_utf8_lossy(a), String::from_utf8_lossy(b));
        let first = a.lines().zip(b.lines()).find(|(x, y)| x != y);
        panic!("{what}: tables differ; first differing lines:\n{first:?}");
    }
}

fn path_str(p: &Path) -> &str {
    p.to_str().expect("temporary paths are UTF-8")
}

#[test]
fn plan_quick_writes_every_promised_file_and_the_report_renders() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plan");
    let site = fixture();
    let result = crowsnest(
        &[
            "plan",
            path_str(&site),
            "--out",
            path_str(&out),
            "--quick",
            "--runs",
            "4",
        ],
        2,
    );
    assert_ok(&result);
    let stdout = String::from_utf8_lossy(&result.stdout);
    assert!(stdout.contains("Recommended"), "{stdout}");
    for file in ["report.html", "layout.csv", "layout.geojson", "studies.csv"] {
        assert!(out.join(file).is_file(), "{file} missing");
    }
    for fig in [
        "site-map",
        "modes",
        "energies",
        "error-time",
        "error-count",
        "pareto",
        "noise",
        "interval",
        "background",
        "loss",
    ] {
        for ext in ["svg", "png"] {
            let path = out.join("figures").join(format!("{fig}.{ext}"));
            assert!(path.is_file(), "{} missing", path.display());
        }
    }
    // Study columns as docs/formats.md lists them.
    let text = std::fs::read_to_string(out.join("studies.csv")).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    assert_eq!(header, TIDY_HEADER.to_vec());
    let formats = std::fs::read_to_string(repo_root().join("docs/formats.md")).unwrap();
    for column in TIDY_HEADER {
        assert!(
            formats.contains(&format!("`{column}`")),
            "docs/formats.md lacks `{column}`"
        );
    }
    // No temporary file left behind.
    for entry in std::fs::read_dir(&out).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.ends_with(".tmp"), "left {name}");
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.matches("<svg").count() >= 8, "figures inline");
    assert!(!html.contains("<script") && !html.contains("src=\"http"));
    screenshot_is_not_blank(&out.join("report.html"), dir.path());
}

/// Renders `html` in headless Chromium and checks the page has content and no console errors.
fn screenshot_is_not_blank(html: &Path, scratch: &Path) {
    let chromium = find_chromium().unwrap_or_else(|| panic!("chromium is not installed: the report test needs it (apt-get install -y chromium; .ci/run installs it)"));
    let png = scratch.join("shot.png");
    let out = run_chromium(
        &chromium,
        &scratch.join("profile"),
        &[
            "--window-size=1200,6000".to_string(),
            format!("--screenshot={}", png.display()),
        ],
        html,
    );
    let log = String::from_utf8_lossy(&out.stderr);
    assert!(
        !log.contains("Uncaught") && !log.contains("CONSOLE"),
        "console errors:\n{log}"
    );
    let image = image::open(&png).expect("a screenshot").to_rgb8();
    let first = *image.get_pixel(0, 0);
    let differing = image.pixels().filter(|p| **p != first).count();
    assert!(
        differing > image.pixels().len() / 20,
        "screenshot is nearly blank ({differing} pixels differ from the corner)"
    );
}

fn sweep(out: &Path, extra: &[&str], threads: usize) -> std::process::Output {
    let site = fixture();
    let mut args = vec![
        "sweep",
        path_str(&site),
        "--over",
        "count",
        "--out",
        path_str(out),
    ];
    if !extra.contains(&"--runs") {
        args.extend_from_slice(&["--runs", "6"]);
    }
    args.extend_from_slice(extra);
    crowsnest(&args, threads)
}

#[test]
fn sweep_is_bit_identical_across_threads_and_shards() {
    let dir = tempfile::tempdir().unwrap();
    let one = dir.path().join("one");
    let two = dir.path().join("two");
    assert_ok(&sweep(&one, &[], 1));
    assert_ok(&sweep(&two, &[], 2));
    let table = std::fs::read(one.join("studies.csv")).unwrap();
    assert_same_table(
        &table,
        &std::fs::read(two.join("studies.csv")).unwrap(),
        "1 vs 2 threads",
    );

    let s1 = dir.path().join("s1");
    let s2 = dir.path().join("s2");
    assert_ok(&sweep(&s1, &["--shard", "1/2"], 2));
    assert_ok(&sweep(&s2, &["--shard", "2/2"], 2));
    let merged = dir.path().join("merged.csv");
    assert_ok(&crowsnest(
        &[
            "merge",
            path_str(&merged),
            path_str(&s2.join("studies.csv")),
            path_str(&s1.join("studies.csv")),
        ],
        1,
    ));
    assert_same_table(&std::fs::read(&merged).unwrap(), &table, "merged shards");
    // A shard alone is refused by merge: a cell is missing.
    let lone = crowsnest(
        &[
            "merge",
            path_str(&dir.path().join("x.csv")),
            path_str(&s2.join("studies.csv")),
        ],
        1,
    );
    assert_eq!(lone.status.code(), Some(2));
}

#[test]
fn killed_sweep_resumes_to_the_same_table() {
    use super::hardening::{complete_lines, journals, kill_once_recorded};
    let dir = tempfile::tempdir().unwrap();
    let site = fixture();
    // More runs make each cell slower: an attempt whose child finished before the kill
    // proves nothing, so it is retried with slower cells.
    for runs in ["40", "160", "640"] {
        let whole = dir.path().join(format!("whole-{runs}"));
        assert_ok(&sweep(&whole, &["--runs", runs], 2));
        let reference = std::fs::read(whole.join("studies.csv")).unwrap();
        let total = complete_lines(&journals(&whole, ".sweep-journal")[0]);

        let resumed = dir.path().join(format!("resumed-{runs}"));
        let args = [
            "sweep",
            path_str(&site),
            "--over",
            "count",
            "--runs",
            runs,
            "--out",
            path_str(&resumed),
        ];
        let killed = kill_once_recorded(&args, &resumed, ".sweep-journal");
        if killed.finished_first || killed.recorded >= total {
            continue;
        }
        // Killed midway: part of the cells recorded, no table yet.
        assert!(killed.recorded >= 1 && killed.recorded < total);
        assert!(!resumed.join("studies.csv").exists());
        assert_ok(&sweep(&resumed, &["--runs", runs], 2));
        // The recorded cells were skipped: each cell is in the journal exactly once.
        let journal = journals(&resumed, ".sweep-journal");
        assert_eq!(journal.len(), 1);
        assert_eq!(complete_lines(&journal[0]), total);
        assert_same_table(
            &std::fs::read(resumed.join("studies.csv")).unwrap(),
            &reference,
            "resumed",
        );
        return;
    }
    panic!("the sweep finished before every kill attempt; the test proved nothing");
}
