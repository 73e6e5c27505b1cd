//! Hardening of `plan`, `sweep` and `basis` against the things that happen to long studies:
//! inputs edited between runs (the journal must not be reused), a torn or damaged journal,
//! `kill -9` in the middle of a plan (the resumed run must give the same bytes), thread
//! counts and repeated runs (byte-identical outputs), and snapshot files larger than the
//! memory limit of `basis` (peak resident memory read from /proc while it runs).

use std::collections::BTreeMap;
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use crate::common::{bin, repo_root};

fn path_str(p: &Path) -> &str {
    p.to_str().expect("temporary paths are UTF-8")
}

fn crowsnest(args: &[&str], threads: usize) -> Output {
    Command::new(bin())
        .args(args)
        .env("RAYON_NUM_THREADS", threads.to_string())
        .output()
        .expect("crowsnest runs")
}

#[track_caller]
fn assert_ok(out: &Output) {
    assert!(
        out.status.success(),
        "exit {:?}\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Copies the files of a flat site directory.
fn copy_site(from: &Path, to: &Path) {
    fs::create_dir_all(to).unwrap();
    for entry in fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        if entry.path().is_file() {
            fs::copy(entry.path(), to.join(entry.file_name())).unwrap();
        }
    }
}

/// Every file under `dir` (recursively, hidden ones included) by relative path.
pub fn tree(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
        for entry in fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                walk(root, &path, out);
            } else {
                let name = path
                    .strip_prefix(root)
                    .unwrap()
                    .to_string_lossy()
                    .into_owned();
                out.insert(name, fs::read(&path).unwrap());
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

/// Asserts two output trees hold the same files with the same bytes.
#[track_caller]
fn assert_same_tree(a: &Path, b: &Path, what: &str) {
    let (ta, tb) = (tree(a), tree(b));
    let names_a: Vec<&String> = ta.keys().collect();
    let names_b: Vec<&String> = tb.keys().collect();
    assert_eq!(names_a, names_b, "{what}: different files");
    for (name, bytes) in &ta {
        assert!(tb[name] == *bytes, "{what}: {name} differs");
    }
}

/// The journals (`.plan-journal-*` / `.sweep-journal-*`) in `out`.
pub fn journals(out: &Path, prefix: &str) -> Vec<PathBuf> {
    let mut found: Vec<PathBuf> = fs::read_dir(out)
        .map(|entries| {
            entries
                .filter_map(Result::ok)
                .map(|e| e.path())
                .filter(|p| {
                    p.file_name()
                        .is_some_and(|n| n.to_string_lossy().starts_with(prefix))
                })
                .collect()
        })
        .unwrap_or_default();
    found.sort();
    found
}

/// Complete (newline-terminated) lines of a file; 0 when it does not exist.
pub fn complete_lines(path: &Path) -> usize {
    fs::read(path)
        .map(|b| b.iter().filter(|&&c| c == b'\n').count())
        .unwrap_or(0)
}

/// What [`kill_once_recorded`] saw.
pub struct Killed {
    /// Complete journal lines after the kill.
    pub recorded: usize,
    /// The child had already exited before it could be killed.
    pub finished_first: bool,
}

/// Spawns `args`, waits until its journal in `out` (name starting with `prefix`) holds a
/// complete line, then kills it with SIGKILL (`Child::kill`) and reports the journal.
pub fn kill_once_recorded(args: &[&str], out: &Path, prefix: &str) -> Killed {
    let mut child = Command::new(bin())
        .args(args)
        .env("RAYON_NUM_THREADS", "2")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("crowsnest starts");
    let deadline = Instant::now() + Duration::from_secs(600);
    let mut finished_first = false;
    loop {
        if child.try_wait().unwrap().is_some() {
            finished_first = true;
            break;
        }
        if journals(out, prefix).iter().any(|j| complete_lines(j) >= 1) {
            break;
        }
        assert!(
            Instant::now() < deadline,
            "no journal line after 10 minutes"
        );
        std::thread::sleep(Duration::from_millis(2));
    }
    let _ = child.kill();
    let status = child.wait().unwrap();
    // A run that exited 0 on its own was not killed.
    finished_first |= status.success();
    let recorded = journals(out, prefix)
        .iter()
        .map(|j| complete_lines(j))
        .sum();
    Killed {
        recorded,
        finished_first,
    }
}

fn twin_fixture() -> PathBuf {
    repo_root().join("tests/fixtures/twin-site")
}

fn quick_sweep<'a>(site: &'a Path, out: &'a Path) -> Vec<&'a str> {
    vec![
        "sweep",
        path_str(site),
        "--over",
        "count",
        "--runs",
        "2",
        "--out",
        path_str(out),
    ]
}

#[test]
fn journal_is_not_reused_after_an_input_file_changes() {
    let dir = tempfile::tempdir().unwrap();
    let site = dir.path().join("site");
    copy_site(&twin_fixture(), &site);
    let out = dir.path().join("out");
    assert_ok(&crowsnest(&quick_sweep(&site, &out), 2));
    let first = fs::read_to_string(out.join("studies.csv")).unwrap();
    assert!(first.contains("roof-c"), "premise: roof-c is in a layout");
    assert_eq!(journals(&out, ".sweep-journal").len(), 1);

    // Remove a candidate: the cells naming it must not come back from the old journal.
    let candidates = fs::read_to_string(site.join("candidates.csv")).unwrap();
    let kept: Vec<&str> = candidates
        .lines()
        .filter(|l| !l.starts_with("roof-c,"))
        .collect();
    fs::write(site.join("candidates.csv"), kept.join("\n") + "\n").unwrap();
    assert_ok(&crowsnest(&quick_sweep(&site, &out), 2));
    let second = fs::read_to_string(out.join("studies.csv")).unwrap();
    assert!(
        !second.contains("roof-c"),
        "a removed mount came back:\n{second}"
    );
    assert_eq!(journals(&out, ".sweep-journal").len(), 2, "a new journal");

    // The same for a change deep inside the snapshot file: the lowest mantissa byte of the
    // last value (the number stays finite and nearly equal).
    let snapshots = site.join("snapshots.npy");
    let mut bytes = fs::read(&snapshots).unwrap();
    let at = bytes.len() - 8;
    bytes[at] ^= 1;
    fs::write(&snapshots, bytes).unwrap();
    assert_ok(&crowsnest(&quick_sweep(&site, &out), 2));
    assert_eq!(
        journals(&out, ".sweep-journal").len(),
        3,
        "snapshots are keyed"
    );
}

#[test]
fn torn_journal_tail_is_cut_and_the_study_resumes() {
    let dir = tempfile::tempdir().unwrap();
    let site = twin_fixture();
    let whole = dir.path().join("whole");
    assert_ok(&crowsnest(&quick_sweep(&site, &whole), 2));
    let journal = journals(&whole, ".sweep-journal").pop().unwrap();
    let full = fs::read_to_string(&journal).unwrap();
    let lines: Vec<&str> = full.lines().collect();
    assert!(lines.len() >= 4, "premise: several cells");

    // A kill in the middle of the fourth append: three lines and half of the fourth.
    let torn = dir.path().join("torn");
    fs::create_dir_all(&torn).unwrap();
    let half = &lines[3][..lines[3].len() / 2];
    let text = format!("{}\n{}\n{}\n{half}", lines[0], lines[1], lines[2]);
    fs::write(torn.join(journal.file_name().unwrap()), text).unwrap();
    assert_ok(&crowsnest(&quick_sweep(&site, &torn), 2));
    assert_eq!(
        fs::read(torn.join("studies.csv")).unwrap(),
        fs::read(whole.join("studies.csv")).unwrap()
    );
    // The torn half was cut, the missing cells appended once each, in order.
    assert_eq!(
        fs::read_to_string(torn.join(journal.file_name().unwrap())).unwrap(),
        full
    );
    // And a resumed run of the finished study reads the journal cleanly.
    assert_ok(&crowsnest(&quick_sweep(&site, &torn), 2));
}

#[test]
fn damaged_journal_line_is_bad_input_naming_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plan");
    let site = twin_fixture();
    let args = [
        "plan",
        path_str(&site),
        "--quick",
        "--runs",
        "2",
        "--out",
        path_str(&out),
    ];
    assert_ok(&crowsnest(&args, 2));
    let journal = journals(&out, ".plan-journal").pop().unwrap();
    let text = fs::read_to_string(&journal).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    lines[1] = "count,greedy,29 fields,of nonsense";
    fs::write(&journal, lines.join("\n") + "\n").unwrap();
    let result = crowsnest(&args, 2);
    let stderr = String::from_utf8_lossy(&result.stderr);
    assert_eq!(result.status.code(), Some(2), "{stderr}");
    let name = journal.file_name().unwrap().to_string_lossy().into_owned();
    assert!(stderr.contains(&name), "names the journal: {stderr}");
    assert!(stderr.contains("line 2"), "names the line: {stderr}");
    assert!(stderr.contains("delete"), "says what to do: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
}

/// A copy of demo-sites/harbour-quay with its quick snapshots generated.
fn harbour_quay(dir: &Path) -> PathBuf {
    let site = dir.join("harbour-quay");
    copy_site(&repo_root().join("demo-sites/harbour-quay"), &site);
    for stale in [
        "snapshots.npy",
        "snapshots-solid.npy",
        "snapshots.npy.synth-key",
    ] {
        let _ = fs::remove_file(site.join(stale));
    }
    assert_ok(&crowsnest(&["synth", path_str(&site), "--quick"], 2));
    site
}

fn quick_plan<'a>(site: &'a Path, out: &'a Path, runs: &'a str) -> Vec<&'a str> {
    vec![
        "plan",
        path_str(site),
        "--quick",
        "--runs",
        runs,
        "--out",
        path_str(out),
    ]
}

#[test]
fn plan_killed_midway_resumes_to_byte_identical_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let site = harbour_quay(dir.path());
    // More Monte Carlo runs make every cell slower, so a later attempt is sure to be killed
    // midway even on a fast machine.
    for runs in ["8", "32", "128"] {
        let reference = dir.path().join(format!("ref-{runs}"));
        assert_ok(&crowsnest(&quick_plan(&site, &reference, runs), 2));
        let journal = journals(&reference, ".plan-journal").pop().unwrap();
        let total = complete_lines(&journal);

        let resumed = dir.path().join(format!("killed-{runs}"));
        let killed = kill_once_recorded(
            &quick_plan(&site, &resumed, runs),
            &resumed,
            ".plan-journal",
        );
        if killed.finished_first || killed.recorded >= total {
            continue; // finished before the kill: try again with slower cells
        }
        assert!(killed.recorded >= 1 && killed.recorded < total);
        assert!(
            !resumed.join("report.html").exists(),
            "the killed run got as far as the report"
        );
        let result = crowsnest(&quick_plan(&site, &resumed, runs), 2);
        assert_ok(&result);
        // Each cell is recorded once: the resumed run evaluated only the cells missing.
        let resumed_journal = journals(&resumed, ".plan-journal");
        assert_eq!(resumed_journal.len(), 1);
        assert_eq!(complete_lines(&resumed_journal[0]), total);
        // Every output (CSVs, report, SVG and PNG figures, GeoJSON, the journal) is the same.
        assert_same_tree(&reference, &resumed, "killed and resumed plan");
        return;
    }
    panic!("plan finished before every kill attempt; the test proved nothing");
}

#[test]
fn plan_outputs_are_byte_identical_across_threads_and_runs() {
    let dir = tempfile::tempdir().unwrap();
    let site = harbour_quay(dir.path());
    let one = dir.path().join("one");
    let two = dir.path().join("two");
    let again = dir.path().join("again");
    assert_ok(&crowsnest(&quick_plan(&site, &one, "8"), 1));
    assert_ok(&crowsnest(&quick_plan(&site, &two, "8"), 2));
    assert_ok(&crowsnest(&quick_plan(&site, &again, "8"), 2));
    let files = tree(&one);
    for expected in [
        "report.html",
        "layout.csv",
        "layout.geojson",
        "studies.csv",
        "figures/site-map.svg",
        "figures/pareto.png",
    ] {
        assert!(files.contains_key(expected), "{expected} missing");
    }
    assert_same_tree(&one, &two, "RAYON_NUM_THREADS 1 vs 2");
    assert_same_tree(&two, &again, "a repeated run");
}

/// Peak resident set (VmHWM) of a running child, in KiB, polled from /proc until it exits.
fn run_with_peak_rss(args: &[&str]) -> (Output, u64) {
    let mut child = Command::new(bin())
        .args(args)
        .env("RAYON_NUM_THREADS", "2")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("crowsnest starts");
    let status_path = format!("/proc/{}/status", child.id());
    let mut peak_kib = 0;
    while child.try_wait().unwrap().is_none() {
        if let Ok(status) = fs::read_to_string(&status_path) {
            if let Some(line) = status.lines().find(|l| l.starts_with("VmHWM:")) {
                let kib: u64 = line
                    .split_whitespace()
                    .nth(1)
                    .and_then(|v| v.parse().ok())
                    .unwrap_or(0);
                peak_kib = peak_kib.max(kib);
            }
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    (child.wait_with_output().unwrap(), peak_kib)
}

/// A grid site of `nx × ny` points, channels u and v, with `n_snapshots` float64 snapshots of
/// a travelling wave plus deterministic noise, written row by row (the test never holds the
/// file).
fn big_site(dir: &Path, nx: usize, ny: usize, n_snapshots: usize) {
    fs::create_dir_all(dir).unwrap();
    fs::write(
        dir.join("site.toml"),
        format!(
            "# Invented site for the memory test. Not a real place.\nname = \"memory\"\n\
             plane = \"xy\"\n\n[grid]\norigin = [0.0, 0.0]\nspacing = [1.0, 1.0]\nnx = {nx}\n\
             ny = {ny}\n\n[[channels]]\nname = \"u\"\nunit = \"m/s\"\nrole = \"velocity-x\"\n\n\
             [[channels]]\nname = \"v\"\nunit = \"m/s\"\nrole = \"velocity-y\"\n\n\
             [snapshots]\nfile = \"snapshots.npy\"\ndt = 1.0\n\n[[kinds]]\nname = \"cup\"\n\
             family = \"point\"\nchannels = [\"u\", \"v\"]\nnoise_sd = 0.3\ninterval = 1.0\n\
             cost = 1000.0\n\n[candidates]\nfile = \"candidates.csv\"\n"
        ),
    )
    .unwrap();
    fs::write(
        dir.join("candidates.csv"),
        "id,x,y,height,kinds,mount_cost,zone,heading\nmast,1,1,10,cup,0,,\n",
    )
    .unwrap();
    let dict = format!(
        "{{'descr': '<f8', 'fortran_order': False, 'shape': ({n_snapshots}, {ny}, {nx}, 2), }}"
    );
    let mut header = dict.into_bytes();
    let unpadded = 10 + header.len() + 1;
    header.extend(std::iter::repeat_n(b' ', (64 - unpadded % 64) % 64));
    header.push(b'\n');
    let mut file = std::io::BufWriter::new(fs::File::create(dir.join("snapshots.npy")).unwrap());
    file.write_all(b"\x93NUMPY\x01\x00").unwrap();
    file.write_all(&(header.len() as u16).to_le_bytes())
        .unwrap();
    file.write_all(&header).unwrap();
    let mut state: u64 = 0x2545_F491_4F6C_DD1D;
    let mut row = Vec::with_capacity(nx * 2 * 8);
    for t in 0..n_snapshots {
        for j in 0..ny {
            row.clear();
            for i in 0..nx {
                let phase = 0.05 * i as f64 + 0.03 * j as f64 - 0.4 * t as f64;
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                let noise = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                let u = 5.0 + phase.sin() + 0.1 * noise;
                let v = 1.0 + (0.5 * phase).cos();
                row.extend_from_slice(&u.to_le_bytes());
                row.extend_from_slice(&v.to_le_bytes());
            }
            file.write_all(&row).unwrap();
        }
    }
    file.flush().unwrap();
}

#[test]
fn basis_stays_under_its_memory_limit_on_a_larger_file() {
    let dir = tempfile::tempdir().unwrap();
    // 40 snapshots × 256 × 512 points × 2 channels × 8 bytes = 80 MiB of snapshots.
    let site = dir.path().join("big");
    big_site(&site, 512, 256, 40);
    let file_mib = fs::metadata(site.join("snapshots.npy")).unwrap().len() >> 20;
    assert!(file_mib >= 80);
    // The program's own footprint: the same command on a 4 × 3 site.
    let small = dir.path().join("small");
    big_site(&small, 4, 3, 40);
    let (out, overhead_kib) = run_with_peak_rss(&[
        "basis",
        path_str(&small),
        "--modes",
        "4",
        "--out",
        path_str(&dir.path().join("small-basis")),
    ]);
    assert_ok(&out);

    let limit_mib = 24;
    let (out, peak_kib) = run_with_peak_rss(&[
        "basis",
        path_str(&site),
        "--modes",
        "4",
        "--memory-limit",
        &limit_mib.to_string(),
        "--out",
        path_str(&dir.path().join("basis")),
    ]);
    assert_ok(&out);
    let modes = fs::metadata(dir.path().join("basis/modes.npy"))
        .unwrap()
        .len();
    assert_eq!(modes, 128 + 4 * 256 * 512 * 2 * 8, "four modes written");
    // Bound documented in docs/performance.md: limit + the binary's own footprint + 4 MiB of
    // allocator and I/O slack. Reading the whole file would need 80 MiB more.
    let bound_kib = (limit_mib + 4) * 1024 + overhead_kib;
    eprintln!(
        "basis peak RSS {peak_kib} KiB with --memory-limit {limit_mib} MiB; \
         footprint on a tiny site {overhead_kib} KiB; file {file_mib} MiB"
    );
    assert!(
        peak_kib <= bound_kib,
        "peak {peak_kib} KiB above {bound_kib} KiB (limit {limit_mib} MiB + footprint \
         {overhead_kib} KiB + 4 MiB)"
    );

    // A limit that cannot hold the modes asked is refused before any work.
    let (out, _) = run_with_peak_rss(&[
        "basis",
        path_str(&site),
        "--modes",
        "4",
        "--memory-limit",
        "8",
        "--out",
        path_str(&dir.path().join("refused")),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("--memory-limit") && stderr.contains("too small"),
        "{stderr}"
    );
    assert!(!dir.path().join("refused").exists(), "nothing written");
}
