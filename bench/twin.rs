//! Twin Monte Carlo speed at the shape of issue 5: 1,000 Kalman runs, r = 20 modes, 16 reading
//! rows, 1,000 test steps, on 1 and 2 threads (separate rayon pools), plus the EnKF (quadratic
//! model, 32 members) on fewer runs. The case is the synthetic known-answer case of
//! `twin::testcase` (invented data). Prints `RESULT <name> <value>` lines for bench/twin.sh.
//! Usage: twin [N_KALMAN_RUNS] [N_ENKF_RUNS]

use std::time::Instant;

/// CPU seconds of the whole process so far (utime + stime from /proc/self/stat, 100 Hz
/// ticks): on a shared machine wall time mostly measures the other tenants.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after = stat.rsplit(')').next().unwrap_or("");
    let fields: Vec<&str> = after.split_whitespace().collect();
    let tick = |i: usize| {
        fields
            .get(i)
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(f64::NAN)
    };
    (tick(11) + tick(12)) / 100.0
}

use crowsnest::twin::testcase::{synthetic_case, SyntheticSpec};
use crowsnest::twin::{prepare, run_monte_carlo, FilterKind, TwinSettings};

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n_kalman: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(1000);
    let n_enkf: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(40);
    // 2,000 snapshots split 0.5 → 1,000 training and 1,000 test steps.
    let spec = SyntheticSpec {
        n_modes: 20,
        n_rows: 16,
        n_snapshots: 2000,
        ..SyntheticSpec::default()
    };
    let case = synthetic_case(&spec);

    let kalman = TwinSettings::new(FilterKind::Kalman)
        .with_train_fraction(0.5)
        .and_then(|s| s.with_runs(n_kalman))
        .expect("valid settings");
    let prep = prepare(case.clone(), "bench", &kalman.model).expect("prepare");
    assert_eq!(prep.split.n_test, 1000);
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool");
        let (start, cpu0) = (Instant::now(), cpu_seconds());
        let result = pool
            .install(|| run_monte_carlo(&prep, &kalman.run, &|_, _| {}))
            .expect("runs");
        let (secs, cpu) = (start.elapsed().as_secs_f64(), cpu_seconds() - cpu0);
        assert_eq!(result.n_diverged, 0);
        println!(
            "kalman {threads} thread(s): {n_kalman} runs in {secs:.3} s, mean RMSE {:.4}",
            result.mean_rmse.mean
        );
        println!(
            "RESULT kalman_runs_per_s_{threads}t {:.1}",
            n_kalman as f64 / secs
        );
        println!(
            "RESULT kalman_runs_per_cpu_s_{threads}t {:.1}",
            n_kalman as f64 / cpu
        );
    }

    let enkf = TwinSettings::new(FilterKind::Enkf)
        .with_train_fraction(0.5)
        .and_then(|s| s.with_runs(n_enkf))
        .and_then(|s| s.with_ensemble(32))
        .expect("valid settings");
    let prep = prepare(case, "bench", &enkf.model).expect("prepare");
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool");
        let (start, cpu0) = (Instant::now(), cpu_seconds());
        let result = pool
            .install(|| run_monte_carlo(&prep, &enkf.run, &|_, _| {}))
            .expect("runs");
        let (secs, cpu) = (start.elapsed().as_secs_f64(), cpu_seconds() - cpu0);
        println!(
            "enkf (quadratic, 32 members) {threads} thread(s): {n_enkf} runs in {secs:.3} s, mean RMSE {:.4}, diverged {}",
            result.mean_rmse.mean, result.n_diverged
        );
        println!(
            "RESULT enkf_runs_per_s_{threads}t {:.2}",
            n_enkf as f64 / secs
        );
        println!(
            "RESULT enkf_runs_per_cpu_s_{threads}t {:.2}",
            n_enkf as f64 / cpu
        );
    }
}
