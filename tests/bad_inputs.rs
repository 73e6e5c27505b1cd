//! The bad-input corpus: every directory under `tests/bad-inputs/` is one case, holding its
//! site files and a `case.toml`:
//!
//! ```toml
//! args = ["check", "."]            # run with the case directory as working directory
//! expect = "substring of stderr"   # the one-line message must contain this
//! names = "candidates.csv"         # and name this file
//! ```
//!
//! Each case must exit with code 2, print no panic or internal-error text and leave the case
//! directory exactly as it was (no output file). The `.npy` fixtures are made by
//! `tests/bad-inputs/make_npy.py`. Add a case by adding a directory; nothing here changes.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};

use crate::common::{repo_root, run_in};

struct Case {
    dir: PathBuf,
    args: Vec<String>,
    expect: String,
    names: String,
}

fn corpus_dir() -> PathBuf {
    repo_root().join("tests/bad-inputs")
}

fn read_case(dir: &Path) -> Case {
    let path = dir.join("case.toml");
    let text = fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let table: toml::Table =
        toml::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let string = |key: &str| {
        table
            .get(key)
            .and_then(|v| v.as_str())
            .unwrap_or_else(|| panic!("{}: `{key}` must be a string", path.display()))
            .to_string()
    };
    let args = table
        .get("args")
        .and_then(|v| v.as_array())
        .unwrap_or_else(|| panic!("{}: `args` must be an array", path.display()))
        .iter()
        .map(|a| a.as_str().expect("args are strings").to_string())
        .collect();
    Case {
        dir: dir.to_path_buf(),
        args,
        expect: string("expect"),
        names: string("names"),
    }
}

/// File names and contents of a directory (flat: cases hold no subdirectories).
fn snapshot_dir(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            let name = e.file_name().to_string_lossy().into_owned();
            let bytes = if e.path().is_file() {
                fs::read(e.path()).unwrap()
            } else {
                Vec::new()
            };
            (name, bytes)
        })
        .collect()
}

fn cases() -> Vec<Case> {
    let mut dirs: Vec<PathBuf> = fs::read_dir(corpus_dir())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_dir())
        .collect();
    dirs.sort();
    dirs.iter().map(|d| read_case(d)).collect()
}

/// Runs one case; returns what went wrong, if anything.
fn run_case(case: &Case) -> Option<String> {
    let before = snapshot_dir(&case.dir);
    let args: Vec<&str> = case.args.iter().map(String::as_str).collect();
    let output = run_in(&case.dir, &args);
    let after = snapshot_dir(&case.dir);
    let stderr = String::from_utf8_lossy(&output.stderr);
    let mut problems = Vec::new();
    if output.status.code() != Some(2) {
        problems.push(format!("exit code {:?}, expected 2", output.status.code()));
    }
    if !stderr.contains(&case.expect) {
        problems.push(format!("stderr lacks `{}`", case.expect));
    }
    if !stderr.contains(&case.names) {
        problems.push(format!("stderr does not name `{}`", case.names));
    }
    if stderr.contains("panicked")
        || stderr.contains("internal error")
        || stderr.contains("RUST_BACKTRACE")
    {
        problems.push("stderr shows a panic".to_string());
    }
    if before != after {
        problems.push("the case directory changed (a file was written or modified)".to_string());
    }
    let n_lines = stderr.lines().filter(|l| !l.trim().is_empty()).count();
    if n_lines != 1 {
        problems.push(format!(
            "stderr has {n_lines} lines, expected one message line"
        ));
    }
    (!problems.is_empty()).then(|| {
        format!(
            "{}: {}\n    stderr: {}",
            case.dir.file_name().unwrap().to_string_lossy(),
            problems.join("; "),
            stderr.trim()
        )
    })
}

#[test]
fn every_bad_input_case_is_refused_with_a_clear_message() {
    let cases = cases();
    assert!(cases.len() >= 40, "corpus has only {} cases", cases.len());
    let failures: Vec<String> = cases.iter().filter_map(run_case).collect();
    assert!(
        failures.is_empty(),
        "{} of {} bad-input cases failed:\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n")
    );
}

#[test]
fn check_accepts_the_tiny_site_and_summarises_it() {
    let site = repo_root().join("tests/fixtures/tiny-site");
    let before = snapshot_dir(&site);
    let output = run_in(&site, &["check", "."]);
    assert_eq!(snapshot_dir(&site), before, "check must write nothing");
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert_eq!(
        output.status.code(),
        Some(0),
        "{stdout}\n{}",
        String::from_utf8_lossy(&output.stderr)
    );
    for expected in [
        "grid 8 × 6 nodes, spacing 10 × 10 m",
        "solid 2 of 48 nodes",
        "u [m/s] velocity-x, v [m/s] velocity-y",
        "10 snapshots, dt 1 s, span 9 s",
        "values: all 960 finite",
        "beam: 2 beams × 3 gates at 15…35 m",
        "candidates 4 (cup 3, lidar 2)",
        "berth-strip (630 m²)",
        "shed (416 m²)",
        "existing  mast-a (cup)",
        "lies in exclusion zone `berth-strip`",
    ] {
        assert!(
            stdout.contains(expected),
            "summary lacks `{expected}`:\n{stdout}"
        );
    }
}
