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
    // Study columns in the order docs/formats.md lists them.
    let text = std::fs::read_to_string(out.join("studies.csv")).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    assert_eq!(header, documented_study_columns());
    assert_eq!(header, TIDY_HEADER.to_vec());
    // No temporary file left behind.
    for entry in std::fs::read_dir(&out).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.ends_with(".tmp"), "left {name}");
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.matches("<svg").count() >= 8, "figures inline");
    assert!(!html.contains("<script") && !html.contains("src=\"http"));
    screenshot_is_not_blank(&out.join("report.html"), dir.path());
    every_figure_renders(&out.join("report.html"), dir.path(), 10);
}

/// Column names of the `studies.csv` table in docs/formats.md, in the order listed there.
fn documented_study_columns() -> Vec<String> {
    let formats = std::fs::read_to_string(repo_root().join("docs/formats.md")).unwrap();
    let start = formats
        .find("## `studies.csv`")
        .expect("docs/formats.md has a studies.csv section");
    let section = &formats[start + 3..];
    let section = &section[..section.find("\n## ").unwrap_or(section.len())];
    section
        .lines()
        .filter_map(|l| l.strip_prefix("| `"))
        .filter_map(|l| l.split('`').next())
        .map(str::to_string)
        .collect()
}

/// Opens `html` in headless Chromium and checks that every inline `<svg>` is laid out with a
/// non-zero box and that the screenshot shows content inside each box (a blank or collapsed
/// figure fails). `expected` is the number of figures the report should hold.
fn every_figure_renders(html: &Path, scratch: &Path, expected: usize) {
    let chromium = find_chromium().unwrap_or_else(|| panic!("chromium is not installed: the report test needs it (apt-get install -y chromium; .ci/run installs it)"));
    // A copy with a script that writes each figure's box into the DOM (the report itself
    // carries no scripts).
    let probe = scratch.join("probe.html");
    let text = std::fs::read_to_string(html).unwrap();
    let script = r#"<script>
const boxes = [...document.querySelectorAll('svg')].filter(s => !s.parentElement.closest('svg')).map(s => {
  const r = s.getBoundingClientRect();
  return [r.left, r.top + window.scrollY, r.width, r.height].map(v => Math.round(v)).join(',');
});
const pre = document.createElement('pre');
pre.id = 'figure-boxes';
pre.textContent = 'BOXES ' + boxes.join(';') + ' HEIGHT ' + document.documentElement.scrollHeight + ' END';
document.body.appendChild(pre);
</script>"#;
    std::fs::write(&probe, text.replace("</body>", &format!("{script}</body>"))).unwrap();
    let dom = run_chromium(
        &chromium,
        &scratch.join("probe-profile"),
        &[
            "--window-size=1200,1000".to_string(),
            "--dump-dom".to_string(),
        ],
        &probe,
    );
    let dom = String::from_utf8_lossy(&dom.stdout);
    // The last match: the script's own text holds the marker too.
    let start = dom.rfind("BOXES ").expect("the probe script ran") + 6;
    let end = dom[start..].find(" END").unwrap() + start;
    let (boxes, height) = dom[start..end].split_once(" HEIGHT ").unwrap();
    let height: u32 = height.trim().parse().unwrap();
    let boxes: Vec<[i64; 4]> = boxes
        .split(';')
        .filter(|b| !b.is_empty())
        .map(|b| {
            let v: Vec<i64> = b.split(',').map(|x| x.parse().unwrap()).collect();
            [v[0], v[1], v[2], v[3]]
        })
        .collect();
    assert_eq!(boxes.len(), expected, "figures laid out: {boxes:?}");
    for (i, b) in boxes.iter().enumerate() {
        assert!(b[2] > 100 && b[3] > 100, "figure {i} collapsed: box {b:?}");
    }
    // One screenshot of the whole page; each figure's region must hold drawn content.
    let png = scratch.join("figures-shot.png");
    let out = run_chromium(
        &chromium,
        &scratch.join("shot-profile"),
        &[
            format!("--window-size=1200,{}", height.min(16_000)),
            format!("--screenshot={}", png.display()),
        ],
        html,
    );
    let log = String::from_utf8_lossy(&out.stderr);
    assert!(
        !log.contains("Uncaught") && !log.contains("ERROR:CONSOLE"),
        "console errors:\n{log}"
    );
    let image = image::open(&png).expect("a screenshot").to_rgb8();
    for (i, b) in boxes.iter().enumerate() {
        let (x0, y0) = (b[0].max(0) as u32 + 2, b[1].max(0) as u32 + 2);
        let (x1, y1) = (
            ((b[0] + b[2]) as u32).min(image.width()) - 2,
            ((b[1] + b[3]) as u32).min(image.height()) - 2,
        );
        assert!(
            y1 > y0 + 50,
            "figure {i} lies outside the screenshot: box {b:?}"
        );
        let mut counts = std::collections::HashMap::new();
        for y in y0..y1 {
            for x in x0..x1 {
                *counts.entry(image.get_pixel(x, y).0).or_insert(0usize) += 1;
            }
        }
        let total = ((x1 - x0) * (y1 - y0)) as usize;
        let background = counts.values().copied().max().unwrap_or(0);
        assert!(
            counts.len() >= 8 && total - background > total / 50,
            "figure {i} looks blank: {} colours, {} of {total} pixels off the background",
            counts.len(),
            total - background
        );
    }
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

/// Rows of a `studies.csv` as maps from column name to text.
fn study_rows(path: &Path) -> Vec<std::collections::HashMap<String, String>> {
    let mut reader = csv::Reader::from_path(path).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    reader
        .records()
        .map(|r| {
            header
                .iter()
                .cloned()
                .zip(r.unwrap().iter().map(String::from))
                .collect()
        })
        .collect()
}

/// The recommended layout of a plan as the `sensors` text of its study rows.
fn layout_sensors(out: &Path) -> String {
    let mut reader = csv::Reader::from_path(out.join("layout.csv")).unwrap();
    reader
        .records()
        .map(|r| {
            let r = r.unwrap();
            format!("{}:{}", &r[1], &r[2])
        })
        .collect::<Vec<_>>()
        .join(";")
}

fn plan_fixture(out: &Path, extra: &[&str]) -> std::process::Output {
    let site = fixture();
    let mut args = vec![
        "plan",
        path_str(&site),
        "--out",
        path_str(out),
        "--quick",
        "--runs",
        "4",
    ];
    args.extend_from_slice(extra);
    let result = crowsnest(&args, 2);
    assert_ok(&result);
    result
}

#[test]
fn robustness_studies_score_the_recommended_layout_with_one_seed_stream() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plan");
    let result = plan_fixture(&out, &[]);
    let stdout = String::from_utf8_lossy(&result.stdout);
    let rows = study_rows(&out.join("studies.csv"));
    let recommended = layout_sensors(&out);
    let n_total = recommended.split(';').count();
    let conditions: Vec<_> = rows
        .iter()
        .filter(|r| ["noise", "interval", "background", "loss"].contains(&r["study"].as_str()))
        .collect();
    assert!(!conditions.is_empty());
    for r in &conditions {
        assert!(
            ["recommended", "grid"].contains(&r["method"].as_str()),
            "robustness cell {} scores neither the recommended layout nor the grid",
            r["key"]
        );
        if r["study"] != "loss" {
            let expected = if r["method"] == "recommended" {
                recommended.clone()
            } else {
                r["sensors"].clone()
            };
            assert_eq!(r["sensors"], expected, "cell {}", r["key"]);
            assert_eq!(
                r["n_sensors"].parse::<usize>().unwrap(),
                n_total,
                "cell {}: same size as the recommended layout",
                r["key"]
            );
        }
    }
    // The same layout under the same conditions scores the same everywhere.
    let design = rows
        .iter()
        .find(|r| ["count", "budget"].contains(&r["study"].as_str()) && r["sensors"] == recommended)
        .expect("the recommended layout is a design cell");
    for key in [
        "noise/recommended/1",
        "interval/recommended/1",
        "loss/recommended/0",
    ] {
        let row = rows.iter().find(|r| r["key"] == key).unwrap();
        assert_eq!(
            row["time_mean_rmse_mean"], design["time_mean_rmse_mean"],
            "{key}"
        );
        assert_eq!(
            row["time_mean_rmse_std"], design["time_mean_rmse_std"],
            "{key}"
        );
    }
    // The report states one RMSE for the recommended layout, and the words match its size.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let mean: f64 = design["time_mean_rmse_mean"].parse().unwrap();
    let shown = if mean < 1.0 {
        format!("{mean:.3}")
    } else {
        format!("{mean:.2}")
    };
    let stated: Vec<&str> = html
        .match_indices("time-mean field RMSE is ")
        .map(|(i, m)| html[i + m.len()..].split([' ', ';']).next().unwrap())
        .collect();
    assert!(stated.len() >= 2, "{stated:?}");
    assert!(stated.iter().all(|s| *s == shown), "{stated:?} vs {shown}");
    let n_new: usize = stdout
        .split("Recommended: ")
        .nth(1)
        .and_then(|t| t.split(' ').next())
        .and_then(|n| n.parse().ok())
        .expect("summary names the number of new sensors");
    assert!(
        html.contains(&format!("the recommended layout ({n_new} new sensor")),
        "robustness captions name the recommended layout's size"
    );
    assert_eq!(
        html.matches("What one lost sensor costs").count(),
        2,
        "once in the contents, once as the heading"
    );
    assert!(!html.contains("<strong>What one lost sensor costs"));
}

#[test]
fn plan_with_a_budget_ranks_at_that_budget_and_shows_the_currency() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plan");
    let budget = 9_000.0;
    let result = plan_fixture(&out, &["--budget", "9000"]);
    let stdout = String::from_utf8_lossy(&result.stdout);
    let rows = study_rows(&out.join("studies.csv"));
    let budgets: Vec<f64> = rows
        .iter()
        .filter(|r| r["study"] == "budget")
        .map(|r| r["setting"].parse().unwrap())
        .collect();
    assert!(budgets.contains(&budget), "budget cells at {budgets:?}");
    assert!(budgets.len() >= 4, "and at lower levels: {budgets:?}");
    assert!(budgets.iter().all(|&b| b <= budget));
    // The fixture's site.toml says currency = "EUR".
    assert!(stdout.contains("cum. cost (EUR)"), "{stdout}");
    assert!(
        stdout.contains("Within the budget of 9\u{202f}000 EUR"),
        "{stdout}"
    );
    let pareto = std::fs::read_to_string(out.join("figures/pareto.svg")).unwrap();
    assert!(
        pareto.contains("cost (EUR)"),
        "cost axis names the currency"
    );
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("cumulative cost (EUR)"));
}
