//! Speed of the selection kernels (issue 4, item 6): choose k = 50 of 1,000,000 single-row
//! point candidates with r = 50 modes, by lazy greedy D and by lazy pivoted QR, on the matrix
//! `bench/select_ref.py make` writes. Prints the times and checks the picks against the NumPy
//! greedy and LAPACK (`scipy.linalg.qr(..., pivoting=True)`) orders the reference wrote. Also
//! times the Joshi–Boyd optimality bound at the same shape (no reference; it must lie above the
//! greedy layout's D value).
//!
//! Not a test: run through `bench/select.sh`, which runs this binary and the reference in one
//! go and prints the ratios. Usage: `select DIR` (DIR holds `phi.npy`, `ref_greedy.txt`,
//! `ref_qr.txt`).

use std::path::Path;
use std::time::Instant;

use crowsnest::io::read_npy_f64;
use crowsnest::select::{
    d_upper_bound_near, evaluate_set, greedy_order, lazy_pivoted_qr, CandidatePlace, CandidateRows,
    Constraints, Criterion, Feasibility, Limit, Prior, Problem,
};

const K: usize = 50;

fn read_order(path: &Path) -> Option<Vec<usize>> {
    let text = std::fs::read_to_string(path).ok()?;
    text.trim()
        .split(',')
        .map(|v| v.trim().parse().ok())
        .collect()
}

/// CPU seconds used by this process so far, all threads (Linux `/proc/self/stat`, utime +
/// stime in clock ticks of 1/100 s). The cores are shared, so CPU time is the fair measure.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after = stat.rsplit(')').next().unwrap_or("");
    let fields: Vec<&str> = after.split_whitespace().collect();
    let ticks = |i: usize| {
        fields
            .get(i)
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(0.0)
    };
    (ticks(11) + ticks(12)) / 100.0
}

/// Runs `f` once; returns (wall seconds, CPU seconds, result).
fn timed<T>(f: impl FnOnce() -> T) -> (f64, f64, T) {
    let (t, c) = (Instant::now(), cpu_seconds());
    let out = f();
    (t.elapsed().as_secs_f64(), cpu_seconds() - c, out)
}

fn main() {
    let dir = std::env::args()
        .skip(1)
        .find(|a| !a.starts_with("--"))
        .unwrap_or_else(|| "/tmp/crowsnest-select-bench".into());
    let dir = Path::new(&dir);
    let (shape, data) = read_npy_f64(&dir.join("phi.npy")).expect("phi.npy (run bench/select.sh)");
    let (n, r) = (shape[0], shape[1]);
    println!("candidates {n}, modes {r}, picks {K}");

    let t = Instant::now();
    let rows = CandidateRows::from_single_rows(r, data);
    let places = (0..n)
        .map(|i| CandidatePlace {
            id: i.to_string(),
            position: [i as f64, 0.0],
            zone: String::new(),
        })
        .collect();
    let problem = Problem::from_noise_whitened(
        rows,
        (0..n).collect(),
        vec![0; n],
        vec![1.0; n],
        &Prior::Energies(vec![1.0; r]),
        places,
        vec!["point".into()],
    )
    .expect("valid problem");
    let constraints = Constraints::default();
    let feas = Feasibility::new(&problem, &constraints).expect("no constraints");
    println!(
        "setup (rows, places, feasibility) {:.3} s (not timed below)",
        t.elapsed().as_secs_f64()
    );

    // `--qr-only`: time the pivoted QR alone (for profiling it).
    if std::env::args().any(|a| a == "--qr-only") {
        let (w_qr, c_qr, _) = timed(|| lazy_pivoted_qr(&problem.rows, &[], K, |_| true));
        println!("RESULT qr_seconds {w_qr:.4}");
        println!("RESULT qr_cpu_seconds {c_qr:.4}");
        return;
    }
    // One run each, like the reference (the cores are shared; see docs/performance.md).
    let (w_greedy, c_greedy, greedy) =
        timed(|| greedy_order(&problem, &feas, Criterion::D, Limit::Count(K)));
    let (w_qr, c_qr, qr) = timed(|| lazy_pivoted_qr(&problem.rows, &[], K, |_| true).order);
    println!("RESULT greedy_seconds {w_greedy:.4}");
    println!("RESULT greedy_cpu_seconds {c_greedy:.4}");
    println!("RESULT qr_seconds {w_qr:.4}");
    println!("RESULT qr_cpu_seconds {c_qr:.4}");
    // The optimality bound at the same shape (no reference: the certificate is checked here).
    let (w_bound, c_bound, bound) =
        timed(|| d_upper_bound_near(&problem, &feas, Limit::Count(K), &greedy));
    let greedy_d = evaluate_set(&problem, &greedy, Criterion::D);
    println!("RESULT bound_seconds {w_bound:.4}");
    println!("RESULT bound_cpu_seconds {c_bound:.4}");
    println!(
        "RESULT bound_value {:.6} relaxed {:.6} greedy_d {greedy_d:.6} gap {:.6} converged {} newton_steps {} passes {} working_set {}",
        bound.bound,
        bound.relaxed_value,
        bound.bound - greedy_d,
        bound.converged,
        bound.n_iterations,
        bound.n_passes,
        bound.n_active
    );
    println!(
        "RESULT bound_valid {}",
        if bound.bound >= greedy_d { "yes" } else { "NO" }
    );
    let check = |name: &str, ours: &[usize], file: &str| match read_order(&dir.join(file)) {
        Some(reference) => {
            let same =
                reference.len() == ours.len() && reference.iter().zip(ours).all(|(a, b)| a == b);
            println!(
                "RESULT {name}_same_picks {}",
                if same { "yes" } else { "NO" }
            );
            if !same {
                let first = reference.iter().zip(ours).position(|(a, b)| a != b);
                println!("  first difference at pick {first:?}");
            }
        }
        None => println!("RESULT {name}_same_picks unknown (no {file})"),
    };
    check("greedy", &greedy, "ref_greedy.txt");
    check("qr", &qr, "ref_qr.txt");
}
