//! POD basis: known-answer checks against analytic results and NumPy, agreement of the two
//! routes, weighting, orthonormality, determinism and projection.

use std::f64::consts::PI;

use crowsnest::basis::weights::{dof_weights, orthonormality_defect};
use crowsnest::basis::{
    pod, project, project_field, Basis, BasisError, PodMethod, PodOptions, Rank,
};
use crowsnest::io::InMemorySnapshots;
use faer::Par;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

use crate::common::{assert_close, repo_root};

/// `(u, v)` of a spatial function at grid node `(i, j)`.
type SpatialFn = Box<dyn Fn(usize, usize) -> [f64; 2]>;

const METHODS: [PodMethod; 2] = [PodMethod::Snapshots, PodMethod::Svd];

fn run_pod(
    data: &InMemorySnapshots,
    point_weights: &[f64],
    n_channels: usize,
    method: PodMethod,
    rank: Rank,
) -> Basis {
    let options = PodOptions {
        method,
        rank,
        block_size: Some(7), // several blocks, ragged last one
        memory_limit: None,
        par: Par::Seq,
    };
    let mut source = data.clone();
    pod(
        &mut source,
        point_weights,
        n_channels,
        &options,
        &mut |_, _| {},
    )
    .unwrap()
}

/// `max_p |a_p − s b_p|` minimised over the sign `s = ±1`.
fn distance_up_to_sign(a: &[f64], b: &[f64]) -> f64 {
    let plus = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max);
    let minus = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x + y).abs())
        .fold(0.0, f64::max);
    plus.min(minus)
}

fn mode(basis: &Basis, mode_idx: usize) -> Vec<f64> {
    basis.modes.col(mode_idx).iter().copied().collect()
}

/// Analytic case on a periodic uniform grid: the fluctuation is `Σ_k A_k g_k(t) f_k(x)` with
/// spatial functions `f_k` (products of sines and cosines) mutually orthogonal under the grid
/// sum, and temporal functions `g_k(t) = √2 cos(2π m_k t / T)` orthonormal under the mean over
/// `T` samples. Discrete orthogonality of the trigonometric functions on a uniform periodic
/// grid (common knowledge; any Fourier text, e.g. Bracewell, *The Fourier Transform and Its
/// Applications*, ch. on the discrete transform) gives Σ_i sin²(2πki/n) = Σ_i cos²(2πki/n) =
/// n/2 for 0 < k < n/2, so the POD modes are `f_k/‖f_k‖_W` and the energies
/// `λ_k = A_k² ‖f_k‖²_W`.
#[test]
fn periodic_trigonometric_field_has_analytic_energies_and_modes() {
    let (nx, ny, dx, dy) = (32usize, 24usize, 2.0, 1.5);
    let n_snapshots = 64usize;
    let n_channels = 2;
    let area = nx as f64 * dx * ny as f64 * dy;
    let s = |k: f64, idx: usize, n: usize| (2.0 * PI * k * idx as f64 / n as f64).sin();
    let c = |k: f64, idx: usize, n: usize| (2.0 * PI * k * idx as f64 / n as f64).cos();
    // (u, v) of each spatial function at node (i, j), and its squared weighted norm.
    let spatial: [(SpatialFn, f64); 4] = [
        (
            Box::new(move |i, j| [s(1.0, i, nx) * c(1.0, j, ny), 0.0]),
            area / 4.0,
        ),
        (Box::new(move |i, _| [0.0, c(2.0, i, nx)]), area / 2.0),
        (
            Box::new(move |i, j| [c(3.0, i, nx) * s(2.0, j, ny), s(3.0, i, nx) * s(2.0, j, ny)]),
            area / 2.0,
        ),
        (Box::new(move |i, _| [c(5.0, i, nx), c(5.0, i, nx)]), area),
    ];
    let amplitudes = [3.0, 2.0, 1.2, 0.5];
    let temporal_freq = [1.0, 2.0, 3.0, 4.0];
    let n_points = nx * ny;
    let mut data = vec![0.0; n_snapshots * n_points * n_channels];
    for t in 0..n_snapshots {
        for j in 0..ny {
            for i in 0..nx {
                let point_idx = j * nx + i;
                // A mean field that centring must remove.
                let mut value = [8.0 + 0.1 * i as f64, -1.0 + 0.05 * j as f64];
                for k in 0..4 {
                    let g = 2f64.sqrt() * c(temporal_freq[k], t, n_snapshots);
                    let f = (spatial[k].0)(i, j);
                    value[0] += amplitudes[k] * g * f[0];
                    value[1] += amplitudes[k] * g * f[1];
                }
                let base = (t * n_points + point_idx) * n_channels;
                data[base..base + 2].copy_from_slice(&value);
            }
        }
    }
    let data = InMemorySnapshots::new(n_snapshots, n_points * n_channels, data);
    let weights = vec![dx * dy; n_points];
    for method in METHODS {
        let basis = run_pod(&data, &weights, n_channels, method, Rank::Count(4));
        assert_eq!(
            basis.energies.len(),
            4,
            "{method:?}: only 4 modes carry energy"
        );
        for k in 0..4 {
            let expected = amplitudes[k] * amplitudes[k] * spatial[k].1;
            assert_close(basis.energies[k], expected, 0.0, 1e-9);
            let norm = spatial[k].1.sqrt();
            let analytic: Vec<f64> = (0..n_points)
                .flat_map(|p| (spatial[k].0)(p % nx, p / nx))
                .map(|v| v / norm)
                .collect();
            let dist = distance_up_to_sign(&mode(&basis, k), &analytic);
            assert!(dist < 1e-9 / norm, "{method:?} mode {k}: off by {dist}");
        }
    }
}

fn read_csv_matrix(path: &std::path::Path) -> Vec<Vec<f64>> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines()
        .filter(|line| !line.starts_with("index"))
        .map(|line| line.split(',').map(|v| v.trim().parse().unwrap()).collect())
        .collect()
}

/// Singular values from `numpy.linalg.svd` (reference library; fixture and script in
/// tests/fixtures/svd/make_fixture.py): POD energies times T are the squared singular values
/// of the centred, weighted snapshot matrix.
#[test]
fn singular_values_match_numpy_fixture() {
    let dir = repo_root().join("tests/fixtures/svd");
    let rows = read_csv_matrix(&dir.join("snapshots.csv"));
    let weights: Vec<f64> = read_csv_matrix(&dir.join("weights.csv"))
        .into_iter()
        .map(|r| r[0])
        .collect();
    let reference = read_csv_matrix(&dir.join("singular_values.csv"));
    let (n_snapshots, n_dof) = (rows.len(), rows[0].len());
    assert_eq!((n_snapshots, n_dof, reference.len()), (40, 25, 25));
    let data = InMemorySnapshots::new(n_snapshots, n_dof, rows.concat());
    for (column, point_weights) in [(1usize, vec![1.0; n_dof]), (2, weights)] {
        for method in METHODS {
            let basis = run_pod(&data, &point_weights, 1, method, Rank::EnergyFraction(1.0));
            assert_eq!(basis.energies.len(), 25);
            let largest_sq = reference[0][column].powi(2);
            for (mode_idx, row) in reference.iter().enumerate() {
                let sigma_sq = basis.energies[mode_idx] * n_snapshots as f64;
                let expected = row[column] * row[column];
                // The SVD route is backward stable in σ; the Gram route in σ² (error ~ ε σ₁²).
                let abs = match method {
                    PodMethod::Svd => 1e-13 * largest_sq,
                    PodMethod::Snapshots => 1e-12 * largest_sq,
                };
                assert_close(sigma_sq, expected, abs, 1e-10);
            }
        }
    }
}

/// Random field with a decaying spectrum: `n_points` points × 3 channels, some solid points.
fn decaying_field(n_points: usize, n_snapshots: usize, seed: u64) -> (InMemorySnapshots, Vec<f64>) {
    let n_channels = 3;
    let n_dof = n_points * n_channels;
    let n_terms = 40.min(n_snapshots - 1);
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let weights: Vec<f64> = (0..n_points)
        .map(|p| {
            if p % 11 == 3 {
                0.0
            } else {
                rng.random_range(0.5..3.0)
            }
        })
        .collect();
    let spatial: Vec<Vec<f64>> = (0..n_terms)
        .map(|_| (0..n_dof).map(|_| rng.sample(StandardNormal)).collect())
        .collect();
    let mean: Vec<f64> = (0..n_dof).map(|d| 6.0 + (d % 5) as f64).collect();
    let mut data = Vec::with_capacity(n_snapshots * n_dof);
    for _ in 0..n_snapshots {
        let amps: Vec<f64> = (0..n_terms)
            .map(|k| rng.sample::<f64, _>(StandardNormal) * 10f64.powf(-(k as f64) / 10.0))
            .collect();
        for dof_idx in 0..n_dof {
            let mut value = mean[dof_idx];
            for k in 0..n_terms {
                value += amps[k] * spatial[k][dof_idx];
            }
            data.push(value);
        }
    }
    (InMemorySnapshots::new(n_snapshots, n_dof, data), weights)
}

/// The method of snapshots and the thin SVD are the same decomposition (Sirovich 1987;
/// Holmes, Lumley & Berkooz 1996, §3.3): energies agree to 1e-8 relative for every mode above
/// 1e-6 of the total, leading modes agree up to sign.
#[test]
fn method_of_snapshots_agrees_with_thin_svd() {
    let (data, weights) = decaying_field(100, 80, 11);
    let by_snapshots = run_pod(&data, &weights, 3, PodMethod::Snapshots, Rank::Count(5));
    let by_svd = run_pod(&data, &weights, 3, PodMethod::Svd, Rank::Count(5));
    let total: f64 = by_svd.energies.iter().sum();
    let mut n_checked = 0;
    for (a, b) in by_snapshots.energies.iter().zip(&by_svd.energies) {
        if *b > 1e-6 * total {
            assert_close(*a, *b, 0.0, 1e-8);
            n_checked += 1;
        }
    }
    assert!(
        n_checked >= 20,
        "only {n_checked} modes above 1e-6 of the total"
    );
    for mode_idx in 0..5 {
        let dist = distance_up_to_sign(&mode(&by_snapshots, mode_idx), &mode(&by_svd, mode_idx));
        assert!(dist < 1e-8, "mode {mode_idx}: off by {dist}");
    }
    for (a, b) in by_snapshots.mean.iter().zip(&by_svd.mean) {
        assert_close(*a, *b, 1e-13, 1e-13);
    }
}

/// A non-uniform grid whose wide cells carry twice the weight gives the same weighted POD as
/// the uniform grid that splits each wide cell in two, for a field constant over each wide
/// cell: the weighted sum is then an exact quadrature of the fine sum (common practice).
#[test]
fn cell_weights_match_uniform_refinement() {
    let (nx_fine, ny, n_channels, n_snapshots) = (16usize, 6usize, 2usize, 30usize);
    // Coarse columns 0..4 each cover two fine columns (0-1, 2-3, 4-5, 6-7); 4..12 cover one.
    let nx_coarse = 12usize;
    let fine_to_coarse = |i: usize| if i < 8 { i / 2 } else { i - 4 };
    let (dx, dy) = (1.5, 2.0);
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let coarse_values: Vec<f64> = (0..n_snapshots * nx_coarse * ny * n_channels)
        .map(|_| rng.random_range(-1.0..1.0) + 4.0)
        .collect();
    let coarse_dof =
        |t: usize, i: usize, j: usize, c: usize| ((t * ny + j) * nx_coarse + i) * n_channels + c;
    let mut fine_values = Vec::new();
    for t in 0..n_snapshots {
        for j in 0..ny {
            for i in 0..nx_fine {
                for c in 0..n_channels {
                    fine_values.push(coarse_values[coarse_dof(t, fine_to_coarse(i), j, c)]);
                }
            }
        }
    }
    let coarse_weights: Vec<f64> = (0..ny * nx_coarse)
        .map(|p| {
            if p % nx_coarse < 4 {
                2.0 * dx * dy
            } else {
                dx * dy
            }
        })
        .collect();
    let fine_weights = vec![dx * dy; ny * nx_fine];
    let coarse = InMemorySnapshots::new(n_snapshots, nx_coarse * ny * n_channels, coarse_values);
    let fine = InMemorySnapshots::new(n_snapshots, nx_fine * ny * n_channels, fine_values);
    for method in METHODS {
        let a = run_pod(&coarse, &coarse_weights, n_channels, method, Rank::Count(6));
        let b = run_pod(&fine, &fine_weights, n_channels, method, Rank::Count(6));
        assert_eq!(a.energies.len(), b.energies.len());
        for (ea, eb) in a.energies.iter().zip(&b.energies) {
            assert_close(*ea, *eb, 1e-12 * b.energies[0], 1e-10);
        }
        // Mode values agree node by node (each fine node reads its coarse cell).
        for mode_idx in 0..6 {
            let coarse_mode = mode(&a, mode_idx);
            let fine_mode = mode(&b, mode_idx);
            let mapped: Vec<f64> = (0..ny * nx_fine * n_channels)
                .map(|d| {
                    let (p, c) = (d / n_channels, d % n_channels);
                    let (i, j) = (p % nx_fine, p / nx_fine);
                    coarse_mode[(j * nx_coarse + fine_to_coarse(i)) * n_channels + c]
                })
                .collect();
            assert!(distance_up_to_sign(&mapped, &fine_mode) < 1e-9);
        }
    }
}

/// `ΦᵀWΦ = I` to 1e-10 for both routes, with solid (zero-weight) points and three channels
/// (the defining property of POD modes; Holmes, Lumley & Berkooz 1996, §3.1).
#[test]
fn modes_are_orthonormal_in_the_weighted_inner_product() {
    let (data, weights) = decaying_field(150, 60, 3);
    let w = dof_weights(&weights, 3);
    for (method, rank) in [
        (PodMethod::Snapshots, Rank::EnergyFraction(0.9999)),
        (PodMethod::Svd, Rank::Count(40)),
    ] {
        let basis = run_pod(&data, &weights, 3, method, rank);
        assert!(basis.n_modes() >= 10);
        let defect = orthonormality_defect(basis.modes.as_ref(), &w);
        assert!(defect < 1e-10, "{method:?}: defect {defect}");
        for (dof_idx, &wd) in w.iter().enumerate() {
            if wd <= 0.0 {
                assert!(basis.modes.row(dof_idx).iter().all(|v| v.abs() < 1e-300));
            }
        }
    }
}

/// Results are bit-identical with 1 and 2 threads (fixed-order reductions; project rule).
#[test]
fn results_are_bit_identical_across_thread_counts() {
    let (data, weights) = decaying_field(1500, 240, 8);
    for method in METHODS {
        let run = |n_threads: usize| {
            let options = PodOptions {
                method,
                rank: Rank::Count(20),
                block_size: Some(1024),
                memory_limit: None,
                par: Par::rayon(n_threads),
            };
            let mut source = data.clone();
            pod(&mut source, &weights, 3, &options, &mut |_, _| {}).unwrap()
        };
        let (one, two) = (run(1), run(2));
        let bits = |b: &Basis| -> Vec<u64> {
            b.energies
                .iter()
                .chain(&b.mean)
                .chain(b.modes.col_iter().flat_map(|c| c.iter()))
                .map(|v| v.to_bits())
                .collect()
        };
        assert!(
            bits(&one) == bits(&two),
            "{method:?}: 1 vs 2 threads differ"
        );
    }
}

/// Projecting the training snapshots: the coefficient variances are the energies (the
/// definition of λ_i), the summed truncation residual is T times the dropped energy, and
/// `project_field` agrees with the streamed projection.
#[test]
fn projection_recovers_energies_and_truncation_residual() {
    let (data, weights) = decaying_field(90, 50, 21);
    let basis = run_pod(&data, &weights, 3, PodMethod::Svd, Rank::Count(8));
    let mut source = data.clone();
    let mut calls = 0;
    let projection = project(&basis, &mut source, &mut |_, _| calls += 1).unwrap();
    assert!(calls >= 2);
    assert_eq!(projection.coeffs.nrows(), 50);
    assert_eq!(projection.coeffs.ncols(), 8);
    for mode_idx in 0..8 {
        let variance: f64 = projection
            .coeffs
            .col(mode_idx)
            .iter()
            .map(|a| a * a)
            .sum::<f64>()
            / 50.0;
        assert_close(variance, basis.energies[mode_idx], 0.0, 1e-10);
    }
    let dropped: f64 = basis.energies[8..].iter().sum();
    let residual: f64 = projection.residual_sq.iter().sum();
    assert_close(residual, 50.0 * dropped, 1e-10 * basis.total_energy(), 1e-8);
    let n_dof = data.n_dof;
    let snapshot_7 = &data.data[7 * n_dof..8 * n_dof];
    let coeffs = project_field(&basis, snapshot_7);
    for (mode_idx, a) in coeffs.iter().enumerate() {
        assert_close(*a, projection.coeffs[(7, mode_idx)], 1e-12, 1e-12);
    }
}

#[test]
fn rank_is_validated_before_and_after_the_decomposition() {
    let (data, weights) = decaying_field(20, 10, 1);
    let options = |rank| PodOptions {
        rank,
        ..PodOptions::default()
    };
    let mut source = data.clone();
    let err = pod(
        &mut source,
        &weights,
        3,
        &options(Rank::EnergyFraction(1.5)),
        &mut |_, _| {},
    )
    .unwrap_err();
    assert!(matches!(err, BasisError::BadEnergyFraction { .. }));
    assert!(err.to_string().contains("1.5"));
    let err = pod(
        &mut source,
        &weights,
        3,
        &options(Rank::Count(10)),
        &mut |_, _| {},
    )
    .unwrap_err();
    assert!(matches!(
        err,
        BasisError::TooManyModes { n_available: 9, .. }
    ));
    // Wrong number of values per snapshot.
    let err = pod(
        &mut source,
        &weights[1..],
        3,
        &options(Rank::Count(2)),
        &mut |_, _| {},
    )
    .unwrap_err();
    assert!(matches!(err, BasisError::DofMismatch { .. }));
    // A steady field has no modes.
    let mut steady = InMemorySnapshots::new(5, 6, vec![1.0; 30]);
    let err = pod(
        &mut steady,
        &[1.0; 2],
        3,
        &options(Rank::Count(1)),
        &mut |_, _| {},
    )
    .unwrap_err();
    assert!(matches!(err, BasisError::NoFluctuation));
}
