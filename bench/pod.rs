//! Speed of the POD (issue 2, item 8): method of snapshots on a 65,536-dof × 1,000-snapshot
//! float64 matrix, the Gram step's GFLOP/s against a plain faer matrix product of the same
//! shapes, and the peak resident memory of the chunked path streaming from a `.npy` file.
//!
//! Not a test: run through `bench/pod.sh`, which makes the input with `bench/pod_ref.py`, runs
//! this binary and the NumPy reference in one go and prints the ratios.
//!
//! Usage: `pod memory FILE` (whole matrix in memory, all 999 modes lifted, like the NumPy
//! reference) or `pod chunked FILE N_MODES` (streams from FILE; run in its own process so its
//! peak resident set is its own).

use std::path::Path;
use std::time::Instant;

use crowsnest::basis::snapshots_method::{accumulate_gram, gram_eigen};
use crowsnest::basis::{pod, PodMethod, PodOptions, Rank};
use crowsnest::io::{read_npy_f64, InMemorySnapshots, NpySnapshots, SnapshotSource};
use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};

/// Peak resident set of this process, bytes (Linux `VmHWM`).
fn peak_rss_bytes() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find_map(|line| line.strip_prefix("VmHWM:"))
        .and_then(|rest| {
            rest.trim()
                .trim_end_matches("kB")
                .trim()
                .parse::<u64>()
                .ok()
        })
        .map_or(0, |kb| kb * 1024)
}

/// CPU time (user + system) of this process so far, seconds (Linux `/proc/self/stat`, in
/// clock ticks of 1/100 s). On a shared machine wall time includes waiting for a core; CPU time
/// does not, so both are reported.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after_name = stat.rsplit(')').next().unwrap_or("");
    let fields: Vec<&str> = after_name.split_whitespace().collect();
    // Fields 14 and 15 of the file (utime, stime) are 12 and 13 after the name.
    let ticks: u64 = [11, 12]
        .iter()
        .filter_map(|&i| fields.get(i).and_then(|v| v.parse::<u64>().ok()))
        .sum();
    ticks as f64 / 100.0
}

/// Best wall time and the CPU time of that run, over `n_runs` runs of `run` (which returns
/// nothing; timing happens here).
fn best_of<F: FnMut()>(n_runs: usize, mut run: F) -> (f64, f64) {
    let mut best = (f64::INFINITY, f64::INFINITY);
    for _ in 0..n_runs {
        let (wall, cpu) = (Instant::now(), cpu_seconds());
        run();
        let sample = (wall.elapsed().as_secs_f64(), cpu_seconds() - cpu);
        if sample.0 < best.0 {
            best = sample;
        }
    }
    best
}

fn memory(path: &Path) {
    let (shape, data) = read_npy_f64(path).expect("bench input");
    let (n_snapshots, n_dof) = (shape[0], shape[1..].iter().product::<usize>());
    let mut source = InMemorySnapshots::new(n_snapshots, n_dof, data);
    let weights = vec![1.0; n_dof];
    let par = Par::rayon(0);
    println!(
        "input: {n_dof} dof x {n_snapshots} snapshots, float64, {} threads",
        par.degree()
    );

    // Whole POD, lifting every non-zero mode (as the NumPy eigh route does).
    let options = PodOptions {
        method: PodMethod::Snapshots,
        rank: Rank::Count(n_snapshots - 1),
        block_size: None,
        memory_limit: None,
        par,
    };
    let (pod_seconds, pod_cpu) = best_of(2, || {
        let basis = pod(&mut source, &weights, 1, &options, &mut |_, _| {}).expect("pod");
        assert_eq!(basis.n_modes(), n_snapshots - 1);
    });
    println!(
        "crowsnest pod (method of snapshots, {} modes): {pod_seconds:.3} s wall, \
         {pod_cpu:.2} s CPU",
        n_snapshots - 1
    );

    // Gram step alone: lower triangle only, n·T² useful flops (n·T·(T+1) exactly).
    let block = crowsnest::basis::blocks::block_size_for(n_snapshots, n_dof, None);
    let (gram_seconds, gram_cpu) = best_of(3, || {
        let gram = accumulate_gram(&mut source, &weights, block, par, &mut |_| {}).expect("gram");
        assert_eq!(gram.gram.nrows(), n_snapshots);
    });
    let gram_flops = (n_dof * n_snapshots * (n_snapshots + 1)) as f64;

    // Symmetric eigendecomposition of the T × T Gram matrix, the step between the passes.
    let gram = accumulate_gram(&mut source, &weights, block, par, &mut |_| {}).expect("gram");
    let (eigen_seconds, eigen_cpu) = best_of(2, || {
        let (values, _) = gram_eigen(&gram.gram, par).expect("eigen");
        assert_eq!(values.len(), n_snapshots);
    });
    drop(gram);
    println!("eigendecomposition ({n_snapshots} x {n_snapshots}): {eigen_seconds:.3} s wall, {eigen_cpu:.2} s CPU");

    // Plain faer product of the same operands, full T × T output: 2·n·T² flops.
    let x = MatRef::from_column_major_slice(&source.data, n_dof, n_snapshots);
    let mut full = Mat::<f64>::zeros(n_snapshots, n_snapshots);
    let (plain_seconds, plain_cpu) = best_of(3, || {
        matmul(full.as_mut(), Accum::Replace, x.transpose(), x, 1.0, par);
    });
    let plain_flops = 2.0 * (n_dof * n_snapshots * n_snapshots) as f64;
    let n_threads = par.degree() as f64;
    let rate =
        |flops: f64, wall: f64, cpu: f64| (flops / wall / 1e9, flops / cpu * n_threads / 1e9);
    let (gram_rate, gram_cpu_rate) = rate(gram_flops, gram_seconds, gram_cpu);
    let (plain_rate, plain_cpu_rate) = rate(plain_flops, plain_seconds, plain_cpu);
    // The CPU-time rate (flops per CPU-second × threads) is what the kernel would reach with
    // the cores to itself; on a shared machine it is the fairer figure.
    println!(
        "gram step (copy, centre, lower triangle, {block}-dof blocks): {gram_seconds:.3} s wall, \
         {gram_cpu:.2} s CPU; {gram_rate:.1} GFLOP/s wall, {gram_cpu_rate:.1} GFLOP/s by CPU time"
    );
    println!(
        "plain faer matmul XᵀX (full output): {plain_seconds:.3} s wall, {plain_cpu:.2} s CPU; \
         {plain_rate:.1} GFLOP/s wall, {plain_cpu_rate:.1} GFLOP/s by CPU time"
    );
    println!(
        "gram GFLOP/s vs plain: {:.0} % (wall), {:.0} % (CPU time)",
        100.0 * gram_rate / plain_rate,
        100.0 * gram_cpu_rate / plain_cpu_rate
    );
    println!("RESULT pod_seconds {pod_seconds:.4}");
    println!("RESULT pod_cpu {pod_cpu:.4}");
}

fn chunked(path: &Path, n_modes: usize) {
    let mut source = NpySnapshots::open(path).expect("bench input");
    let (n_snapshots, n_dof) = (source.n_snapshots(), source.n_dof());
    let weights = vec![1.0; n_dof];
    let options = PodOptions {
        method: PodMethod::Snapshots,
        rank: Rank::Count(n_modes),
        block_size: None,
        memory_limit: None,
        par: Par::rayon(0),
    };
    let (start, cpu) = (Instant::now(), cpu_seconds());
    let basis = pod(&mut source, &weights, 1, &options, &mut |_, _| {}).expect("pod");
    let seconds = start.elapsed().as_secs_f64();
    let cpu = cpu_seconds() - cpu;
    let file_bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    let rss = peak_rss_bytes();
    println!(
        "chunked from .npy ({n_dof} dof x {n_snapshots} snapshots, {} modes): {seconds:.3} s wall, {cpu:.2} s CPU",
        basis.n_modes()
    );
    println!(
        "peak RSS {:.1} MiB = {:.1} % of the {:.1} MiB file",
        rss as f64 / 1048576.0,
        100.0 * rss as f64 / file_bytes as f64,
        file_bytes as f64 / 1048576.0
    );
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    match args
        .iter()
        .map(String::as_str)
        .collect::<Vec<_>>()
        .as_slice()
    {
        ["memory", file] => memory(Path::new(file)),
        ["chunked", file, n_modes] => chunked(Path::new(file), n_modes.parse().expect("N_MODES")),
        _ => eprintln!("usage: pod memory FILE | pod chunked FILE N_MODES (see bench/pod.sh)"),
    }
}
