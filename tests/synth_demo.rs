//! `crowsnest synth` on the demo sites: files written, skipped when unchanged, deterministic,
//! and the other loaders' hint when the snapshots are missing.

use std::fs;
use std::path::{Path, PathBuf};

use crowsnest::io::{self, FlowSource};

use crate::common::{bin, repo_root};

/// Copies a demo site (its committed files only) into a fresh temporary directory.
fn copy_site(name: &str) -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let dst = tmp.path().join(name);
    fs::create_dir_all(&dst).unwrap();
    let src = repo_root().join("demo-sites").join(name);
    for file in ["site.toml", "candidates.csv", "README.md"] {
        fs::copy(src.join(file), dst.join(file)).unwrap();
    }
    (tmp, dst)
}

fn synth(site: &Path, extra: &[&str]) -> std::process::Output {
    std::process::Command::new(bin())
        .arg("synth")
        .arg(site)
        .args(extra)
        .output()
        .unwrap()
}

#[test]
fn every_demo_site_loads_for_synth_and_names_its_snapshots() {
    for name in ["harbour-quay", "harbour-quay-2031", "escarpment"] {
        let (_tmp, dir) = copy_site(name);
        let site = io::load_site_for_synth(&dir).unwrap();
        assert!(site.synth.is_some(), "{name} has [synth]");
        assert!(matches!(site.flow, FlowSource::Snapshots(_)));
        assert!(
            site.candidates.len() >= 20,
            "{name}: {} candidates",
            site.candidates.len()
        );
        // Before `synth` runs, every other command is told what to do.
        let err = io::load_site(&dir).unwrap_err().to_string();
        assert!(err.contains("crowsnest synth"), "{name}: {err}");
    }
}

#[test]
fn quick_synth_writes_skips_and_repeats_bit_for_bit() {
    let (_tmp, dir) = copy_site("harbour-quay");
    let out = synth(&dir, &["--quick"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let snapshots = dir.join("snapshots.npy");
    let first = fs::read(&snapshots).unwrap();
    assert!(dir.join("snapshots-solid.npy").is_file());

    // The site now loads for everyone, with the grid it names.
    let site = io::load_site(&dir).unwrap();
    let FlowSource::Snapshots(files) = &site.flow else {
        panic!("snapshots expected")
    };
    assert!(files.n_snapshots >= 20);
    let header = io::npy::read_npy_header(&snapshots).unwrap();
    assert_eq!(header.shape, vec![files.n_snapshots, 61, 121, 2]);

    // Unchanged inputs: skipped.
    let again = synth(&dir, &["--quick"]);
    assert!(again.status.success());
    assert!(String::from_utf8_lossy(&again.stdout).contains("up to date"));

    // Forced rerun: identical bytes (seeded gusts, thread-count independent solver).
    let forced = synth(&dir, &["--quick", "--force"]);
    assert!(forced.status.success());
    assert_eq!(fs::read(&snapshots).unwrap(), first);

    // A changed seed changes the key and the flow.
    let text = fs::read_to_string(dir.join("site.toml")).unwrap();
    fs::write(
        dir.join("site.toml"),
        text.replace("seed = 31", "seed = 32"),
    )
    .unwrap();
    let changed = synth(&dir, &["--quick"]);
    assert!(changed.status.success());
    assert!(!String::from_utf8_lossy(&changed.stdout).contains("up to date"));
    assert_ne!(fs::read(&snapshots).unwrap(), first);
}

#[test]
fn quick_quay_flow_is_physical() {
    // Sanity of the generated wind against the site's own settings: finite values, zero on
    // solids, and a mean speed near the far-field 9 m/s at the upwind (north) edge; gusts
    // with a standard deviation of the order of the turbulence intensity times the speed.
    let (_tmp, dir) = copy_site("harbour-quay");
    let site = io::load_site_for_synth(&dir).unwrap();
    let out = crowsnest::synth::generate(&site, true, &mut |_| {}).unwrap();
    let [n_t, ny, nx, n_c] = out.shape;
    assert_eq!((ny, nx, n_c), (61, 121, 2));
    assert!(out.data.iter().all(|v| v.is_finite()));
    let at = |t: usize, j: usize, i: usize, c: usize| out.data[((t * ny + j) * nx + i) * n_c + c];
    for j in 0..ny {
        for i in 0..nx {
            if out.solid[j * nx + i] {
                assert!(at(0, j, i, 0).abs() < 1e-6 && at(0, j, i, 1).abs() < 1e-6);
            }
        }
    }
    let j = ny - 2;
    let mut speeds = Vec::new();
    for t in 0..n_t {
        for i in 20..100 {
            let (u, v) = (at(t, j, i, 0) as f64, at(t, j, i, 1) as f64);
            speeds.push((u * u + v * v).sqrt());
        }
    }
    let mean = speeds.iter().sum::<f64>() / speeds.len() as f64;
    assert!((mean - 9.0).abs() < 0.15 * 9.0, "upwind mean speed {mean}");
    let sd = (speeds.iter().map(|s| (s - mean).powi(2)).sum::<f64>() / speeds.len() as f64).sqrt();
    assert!(
        sd > 0.3 && sd < 3.0,
        "upwind speed sd {sd} (TI 0.15 × 9 m/s = 1.35)"
    );
    // Lattice Mach number: LBM compressibility errors grow like Ma² and become noticeable
    // above about 0.3 (common practice; Krüger et al. 2017, §7.3). `synth::setup` designs
    // for a peak of 0.2; assert a margin below 0.3.
    assert!(
        out.report.mach_peak < MACH_LIMIT,
        "peak Mach {} (limit {MACH_LIMIT})",
        out.report.mach_peak
    );
}

/// Peak lattice Mach number the demo runs must stay below: 0.3 is where LBM compressibility
/// errors become noticeable (common practice), less a margin.
const MACH_LIMIT: f64 = 0.25;

/// The peak Mach number from the summary `crowsnest synth` prints ("… / 0.195 (peak)").
fn printed_peak_mach(stdout: &str) -> f64 {
    let before = stdout
        .split(" (peak)")
        .next()
        .filter(|s| s.len() < stdout.len())
        .unwrap_or_else(|| panic!("no peak Mach in the summary:\n{stdout}"));
    let word = before.rsplit(' ').next().unwrap_or_default();
    word.parse()
        .unwrap_or_else(|_| panic!("peak Mach `{word}` in:\n{stdout}"))
}

/// Runs `synth --quick` on a copy of a demo site; returns the site, the snapshot shape and
/// values, and the printed peak Mach number.
fn quick_run(name: &str) -> (io::Site, Vec<usize>, Vec<f64>, f64) {
    let (_tmp, dir) = copy_site(name);
    let out = synth(&dir, &["--quick"]);
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(
        out.status.success(),
        "{name}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let site = io::load_site(&dir).unwrap();
    let (shape, data) = io::npy::read_npy_f64(&dir.join("snapshots.npy")).unwrap();
    (site, shape, data, printed_peak_mach(&stdout))
}

#[test]
fn quick_synth_of_the_new_quay_and_the_escarpment() {
    // harbour-quay-2031: same grid as harbour-quay, a new warehouse; finite, Mach margin.
    let (site, shape, data, mach) = quick_run("harbour-quay-2031");
    let FlowSource::Snapshots(files) = &site.flow else {
        panic!("snapshots expected")
    };
    assert_eq!(shape, vec![files.n_snapshots, 61, 121, 2]);
    assert!(files.n_snapshots >= 20);
    assert!(data.iter().all(|v| v.is_finite()));
    assert!(mach < MACH_LIMIT, "harbour-quay-2031: peak Mach {mach}");

    // escarpment: the vertical slice, 201 × 61 nodes at 10 m × 5 m, (u, w).
    let (site, shape, data, mach) = quick_run("escarpment");
    let FlowSource::Snapshots(files) = &site.flow else {
        panic!("snapshots expected")
    };
    let (n_t, ny, nx) = (files.n_snapshots, 61, 201);
    assert_eq!(shape, vec![n_t, ny, nx, 2]);
    assert!(n_t >= 20);
    assert!(data.iter().all(|v| v.is_finite()));
    assert!(mach < MACH_LIMIT, "escarpment: peak Mach {mach}");

    // Lee-side separation. The wind blows from the east (towards −x) over the 80 m plateau
    // and drops off the 50° face at x ≈ 700–767 m. Slopes this steep separate at the edge
    // and hold a recirculation zone in the lee (Kaimal & Finnigan 1994, *Atmospheric
    // Boundary Layer Flows*, ch. 5, from memory: separation on lee slopes steeper than about
    // 20°); behind a backward-facing step the flow reattaches about 6–8 step heights
    // downstream (Driver & Seegmiller 1985, AIAA J. 23, from memory). So near the ground,
    // 1–4 cliff heights west of the foot (x = 400–620 m, z = 5–20 m), the time mean of u
    // must point back towards the cliff (u > 0), in each half of the run, while the wind
    // aloft (z = 200 m) blows towards −x.
    let u = |t: usize, j: usize, i: usize| data[((t * ny + j) * nx + i) * 2];
    let mean = |t0: usize, t1: usize, j: usize, i: usize| {
        (t0..t1).map(|t| u(t, j, i)).sum::<f64>() / (t1 - t0) as f64
    };
    for (t0, t1) in [(0, n_t / 2), (n_t / 2, n_t)] {
        for i in 40..=62 {
            for j in 1..=4 {
                let m = mean(t0, t1, j, i);
                assert!(
                    m > 0.1,
                    "no reverse flow at x = {} m, z = {} m, snapshots {t0}..{t1}: mean u {m:.2} m/s",
                    i * 10,
                    j * 5
                );
            }
            let aloft = mean(t0, t1, 40, i);
            assert!(
                aloft < -5.0,
                "wind aloft at x = {} m: {aloft:.2} m/s",
                i * 10
            );
        }
    }
}
