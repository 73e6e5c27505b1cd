//! Twin experiments against outside references: filterpy's KalmanFilter, SciPy's discrete
//! algebraic Riccati solver, the EnKF → KF limit, a NEES χ² consistency test, thread-count
//! independence of the Monte Carlo, and the bad-input messages.

use crowsnest::twin::enkf::{run_enkf, EnkfSettings};
use crowsnest::twin::kalman::{kalman_gains, run_with_gains, NoisyReadings};
use crowsnest::twin::montecarlo::{nudging_training_score, tune_nudging};
use crowsnest::twin::schedule::{Schedule, SensorRows};
use crowsnest::twin::testcase::{synthetic_case, SyntheticSpec};
use crowsnest::twin::{
    prepare, run_monte_carlo, FilterKind, ModelKind, NudgeGain, ReducedModel, TwinError,
    TwinSettings,
};
use faer::Mat;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

use crate::common::{assert_close, repo_root};

struct Fixture {
    a: Mat<f64>,
    c: Vec<f64>,
    q: Mat<f64>,
    h: Mat<f64>,
    offset: Vec<f64>,
    r_diag: Vec<f64>,
    p0: Mat<f64>,
    x0: Vec<f64>,
    z: Vec<Vec<f64>>,
    estimates: Vec<Vec<f64>>,
    final_p: Mat<f64>,
    dare: Mat<f64>,
}

fn mat(v: &serde_json::Value) -> Mat<f64> {
    let rows: Vec<Vec<f64>> = serde_json::from_value(v.clone()).unwrap();
    Mat::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

fn vec_of(v: &serde_json::Value) -> Vec<f64> {
    serde_json::from_value(v.clone()).unwrap()
}

/// Loads `tests/fixtures/kalman/kalman_fixture.json` (made by `make_fixture.py` beside it).
fn fixture() -> Fixture {
    let path = repo_root().join("tests/fixtures/kalman/kalman_fixture.json");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    Fixture {
        a: mat(&v["a"]),
        c: vec_of(&v["c"]),
        q: mat(&v["q"]),
        h: mat(&v["h"]),
        offset: vec_of(&v["offset"]),
        r_diag: vec_of(&v["r_diag"]),
        p0: mat(&v["p0"]),
        x0: vec_of(&v["x0"]),
        z: serde_json::from_value(v["z"].clone()).unwrap(),
        estimates: serde_json::from_value(v["filterpy_estimates"].clone()).unwrap(),
        final_p: mat(&v["filterpy_final_p"]),
        dare: mat(&v["dare_prior_p"]),
    }
}

fn rows_of(f: &Fixture) -> SensorRows {
    let p = f.h.nrows();
    SensorRows::new(
        f.h.clone(),
        f.offset.clone(),
        f.r_diag.iter().map(|r| r.sqrt()).collect(),
        vec![1.0; p],
        vec!["fixture".into(); p],
    )
}

fn row_major(m: &Mat<f64>) -> Vec<f64> {
    (0..m.nrows())
        .flat_map(|i| (0..m.ncols()).map(move |j| m[(i, j)]))
        .collect()
}

/// Our Kalman filter on the fixture's readings equals filterpy.kalman.KalmanFilter run by
/// `tests/fixtures/kalman/make_fixture.py` to 1e-10 at every step, and its final covariance too.
#[test]
fn kalman_matches_filterpy_reference_run() {
    let f = fixture();
    let model = ReducedModel::from_operators(f.a.clone(), None, f.c.clone(), f.q.clone());
    let rows = rows_of(&f);
    let n_steps = f.z.len();
    let schedule = Schedule::new(&rows, 1.0, n_steps, None).unwrap();
    let gains = kalman_gains(
        &model,
        rows.h.as_ref(),
        &f.r_diag,
        &schedule,
        f.p0.as_ref(),
        true,
    );
    let truth: Vec<f64> = f.z.iter().flatten().copied().collect();
    let zero_noise = vec![0.0; rows.n_rows()];
    let mut readings = NoisyReadings {
        truth: &truth,
        n_rows: rows.n_rows(),
        noise_sd: &zero_noise,
        rng: ChaCha20Rng::seed_from_u64(0),
    };
    let mut got = Vec::new();
    run_with_gains(
        &model,
        &row_major(&f.h),
        &f.offset,
        &schedule,
        &gains,
        &mut readings,
        &f.x0,
        |_, est| got.push(est.to_vec()),
    )
    .unwrap();
    assert_eq!(got.len(), f.estimates.len());
    for (t, (g, w)) in got.iter().zip(&f.estimates).enumerate() {
        for (a, b) in g.iter().zip(w) {
            assert!((a - b).abs() <= 1e-10, "step {t}: {a} vs filterpy {b}");
        }
    }
    let p_last = gains.posterior.last().unwrap();
    for i in 0..4 {
        for j in 0..4 {
            assert!((p_last[(i, j)] - f.final_p[(i, j)]).abs() <= 1e-10);
        }
    }
}

/// The converged forecast (prior) covariance equals scipy.linalg.solve_discrete_are(Aᵀ, Hᵀ, Q, R)
/// from the fixture script (DARE gives the prior, not the posterior, covariance).
#[test]
fn converged_prior_covariance_equals_scipy_dare() {
    let f = fixture();
    let model = ReducedModel::from_operators(f.a.clone(), None, f.c.clone(), f.q.clone());
    let rows = rows_of(&f);
    let schedule = Schedule::new(&rows, 1.0, 400, None).unwrap();
    let gains = kalman_gains(
        &model,
        rows.h.as_ref(),
        &f.r_diag,
        &schedule,
        f.p0.as_ref(),
        true,
    );
    let prior = gains.prior.last().unwrap();
    for i in 0..4 {
        for j in 0..4 {
            assert_close(prior[(i, j)], f.dare[(i, j)], 1e-12, 1e-10);
        }
    }
}

/// Two-sided χ² quantile by the Wilson–Hilferty cube-root approximation (Wilson & Hilferty
/// 1931; accurate to ~1e-3 relative for k ≥ 100): k (1 − 2/(9k) + z √(2/(9k)))³.
fn chi2_quantile(k: f64, z: f64) -> f64 {
    let v = 2.0 / (9.0 * k);
    k * (1.0 - v + z * v.sqrt()).powi(3)
}

/// Fraction of steps whose run-averaged NEES falls outside the two-sided 95 % χ² bounds, for a
/// filter whose model error is `q_factor` × the true one.
fn nees_outside_fraction(q_factor: f64) -> f64 {
    let r = 3;
    let a = faer::mat![[0.95, 0.1, 0.0], [-0.1, 0.95, 0.05], [0.0, 0.0, 0.8]];
    let q = faer::mat![[0.02, 0.005, 0.0], [0.005, 0.01, 0.0], [0.0, 0.0, 0.03]];
    let h = faer::mat![[1.0, 0.0, 0.5], [0.0, 1.0, -0.3]];
    let r_diag: Vec<f64> = vec![0.05, 0.08];
    let p0 = Mat::<f64>::identity(r, r) * faer::Scale(0.5);
    let truth_model = ReducedModel::from_operators(a.clone(), None, vec![0.0; r], q.clone());
    let filter_model =
        ReducedModel::from_operators(a.clone(), None, vec![0.0; r], &q * faer::Scale(q_factor));
    let rows = SensorRows::new(
        h.clone(),
        vec![0.0; 2],
        r_diag.iter().map(|v| v.sqrt()).collect(),
        vec![1.0; 2],
        vec!["k".into(); 2],
    );
    let n_steps = 100;
    let n_runs = 100;
    let schedule = Schedule::new(&rows, 1.0, n_steps, None).unwrap();
    let gains = kalman_gains(
        &filter_model,
        h.as_ref(),
        &r_diag,
        &schedule,
        p0.as_ref(),
        true,
    );
    let p_inv: Vec<Mat<f64>> = gains
        .posterior
        .iter()
        .map(|p| {
            use faer::linalg::solvers::DenseSolveCore;
            p.partial_piv_lu().inverse()
        })
        .collect();
    let q_chol = q.llt(faer::Side::Lower).unwrap().L().to_owned();
    let mut nees_sum = vec![0.0; n_steps];
    let mut rng = ChaCha20Rng::seed_from_u64(77);
    for _ in 0..n_runs {
        // Truth from the model itself, initial state ~ N(0, P0); the filter starts at 0.
        let mut x: Vec<f64> = (0..r)
            .map(|_| {
                0.5f64.sqrt()
                    * <StandardNormal as Distribution<f64>>::sample(&StandardNormal, &mut rng)
            })
            .collect();
        let mut truth_states = Vec::new();
        let mut clean = Vec::new();
        for t in 0..n_steps {
            if t > 0 {
                let mut next = vec![0.0; r];
                truth_model.step(&x, &mut next);
                let xi: Vec<f64> = (0..r).map(|_| StandardNormal.sample(&mut rng)).collect();
                for i in 0..r {
                    next[i] += (0..=i).map(|j| q_chol[(i, j)] * xi[j]).sum::<f64>();
                }
                x = next;
            }
            truth_states.push(x.clone());
            for i in 0..2 {
                clean.push((0..r).map(|j| h[(i, j)] * x[j]).sum::<f64>());
            }
        }
        let sd = rows.noise_sd.clone();
        let mut readings = NoisyReadings {
            truth: &clean,
            n_rows: 2,
            noise_sd: &sd,
            rng: ChaCha20Rng::seed_from_u64(rng.next_u64_()),
        };
        run_with_gains(
            &filter_model,
            &row_major(&h),
            &[0.0, 0.0],
            &schedule,
            &gains,
            &mut readings,
            &[0.0; 3],
            |t, est| {
                let e: Vec<f64> = (0..r).map(|i| truth_states[t][i] - est[i]).collect();
                let pe: Vec<f64> = (0..r)
                    .map(|i| (0..r).map(|j| p_inv[t][(i, j)] * e[j]).sum())
                    .collect();
                nees_sum[t] += e.iter().zip(&pe).map(|(a, b)| a * b).sum::<f64>();
            },
        )
        .unwrap();
    }
    // Σ over runs of NEES ~ χ²(n_runs · r) for a consistent filter (Bar-Shalom, Li &
    // Kirubarajan 2001, "Estimation with Applications to Tracking and Navigation", §5.4.2).
    let k = (n_runs * r) as f64;
    let (lo, hi) = (chi2_quantile(k, -1.959964), chi2_quantile(k, 1.959964));
    nees_sum.iter().filter(|&&s| s < lo || s > hi).count() as f64 / n_steps as f64
}

trait NextU64 {
    fn next_u64_(&mut self) -> u64;
}
impl NextU64 for ChaCha20Rng {
    fn next_u64_(&mut self) -> u64 {
        rand::RngCore::next_u64(self)
    }
}

/// NEES χ² test at the two-sided 95 % level: with the true Q at most 12 % of the 100 steps fall
/// outside (5 % expected; steps are correlated, so the margin is wide), and a filter told a
/// Q 20× too small fails it (most steps outside), so the test can fail.
#[test]
fn kalman_nees_passes_chi_square_test() {
    // Wilson–Hilferty against SciPy: scipy.stats.chi2.ppf([0.025, 0.975], 300) =
    // [253.9123226, 349.8744688] (computed once with SciPy by tests/fixtures/kalman/nees_chi2_reference.py); the approximation agrees to 1e-4.
    assert_close(chi2_quantile(300.0, -1.959964), 253.9123226, 0.0, 1e-4);
    assert_close(chi2_quantile(300.0, 1.959964), 349.8744688, 0.0, 1e-4);
    let consistent = nees_outside_fraction(1.0);
    assert!(
        consistent <= 0.12,
        "consistent filter: {consistent} of steps outside the 95 % bounds"
    );
    let overconfident = nees_outside_fraction(0.05);
    assert!(
        overconfident >= 0.5,
        "overconfident filter passed: {overconfident}"
    );
}

/// The EnKF's mean and covariance approach the Kalman filter's as the ensemble grows
/// (Mandel, Cobb & Beezley 2011, "On the convergence of the ensemble Kalman filter"):
/// on the fixture system, fixed seed, the time-mean error of the mean (in units of the KF's
/// posterior standard deviation) and the relative Frobenius error of the covariance fall from
/// 20 to 2,000 members, and at 2,000 members are below 0.1 and 0.1.
#[test]
fn enkf_approaches_kalman_as_ensemble_grows() {
    let f = fixture();
    let model = ReducedModel::from_operators(f.a.clone(), None, f.c.clone(), f.q.clone());
    let rows = rows_of(&f);
    let n_steps = f.z.len();
    let schedule = Schedule::new(&rows, 1.0, n_steps, None).unwrap();
    let gains = kalman_gains(
        &model,
        rows.h.as_ref(),
        &f.r_diag,
        &schedule,
        f.p0.as_ref(),
        true,
    );
    let truth: Vec<f64> = f.z.iter().flatten().copied().collect();
    let zero = vec![0.0; rows.n_rows()];
    let mut errors = Vec::new();
    for &n_ens in &[20usize, 200, 2000] {
        let mut readings = NoisyReadings {
            truth: &truth,
            n_rows: rows.n_rows(),
            noise_sd: &zero,
            rng: ChaCha20Rng::seed_from_u64(1),
        };
        let mut member_rng = ChaCha20Rng::seed_from_u64(2024);
        let settings = EnkfSettings {
            n_ensemble: n_ens,
            inflation: 1.0,
            initial_sd: 0.5f64.sqrt(),
        };
        let (mut mean_err, mut cov_err) = (0.0, 0.0);
        run_enkf(
            &model,
            &row_major(&f.h),
            &f.offset,
            &f.r_diag,
            &schedule,
            &settings,
            &mut readings,
            &mut member_rng,
            &f.x0,
            |t, mean, members| {
                let p = &gains.posterior[t];
                let sd = (0..4).map(|i| p[(i, i)]).sum::<f64>().sqrt();
                let kf = &f.estimates[t];
                mean_err += (0..4)
                    .map(|i| (mean[i] - kf[i]).powi(2))
                    .sum::<f64>()
                    .sqrt()
                    / sd;
                let mut num = 0.0;
                let mut den = 0.0;
                for i in 0..4 {
                    for j in 0..4 {
                        let c = members
                            .iter()
                            .map(|m| (m[i] - mean[i]) * (m[j] - mean[j]))
                            .sum::<f64>()
                            / (n_ens - 1) as f64;
                        num += (c - p[(i, j)]).powi(2);
                        den += p[(i, j)].powi(2);
                    }
                }
                cov_err += (num / den).sqrt();
            },
        )
        .unwrap();
        errors.push((mean_err / n_steps as f64, cov_err / n_steps as f64));
    }
    assert!(
        errors[2].0 < errors[0].0 && errors[2].1 < errors[0].1,
        "{errors:?}"
    );
    assert!(errors[2].0 < 0.1 && errors[2].1 < 0.1, "{errors:?}");
}

/// More than two blocks of the batched filters (32 runs each), so two threads share the work.
const N_RUNS: usize = 70;

fn settings(filter: FilterKind) -> TwinSettings {
    TwinSettings::new(filter)
        .with_runs(N_RUNS)
        .unwrap()
        .with_background_sd(0.3)
        .unwrap()
}

/// Results are bit-identical for 1 and 2 threads (separate rayon pools), for every filter, with
/// enough runs for several blocks (rayon tasks) in the batched filters.
#[test]
fn monte_carlo_is_identical_across_thread_counts() {
    let case = synthetic_case(&SyntheticSpec::default());
    for filter in [
        FilterKind::Kalman,
        FilterKind::Enkf,
        FilterKind::Oi,
        FilterKind::Nudge,
        FilterKind::Free,
    ] {
        let s = settings(filter).with_ensemble(8).unwrap();
        let prep = prepare(case.clone(), "layout-a", &s.model).unwrap();
        let run_in = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap())
        };
        let (one, two) = (run_in(1), run_in(2));
        assert_eq!(one.runs.len(), N_RUNS);
        const { assert!(N_RUNS > 2 * crowsnest::twin::batch::RUN_BLOCK) };
        for (a, b) in one.runs.iter().zip(&two.runs) {
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&a.rmse), bits(&b.rmse), "{filter:?}");
            assert_eq!(a.mean_rmse.to_bits(), b.mean_rmse.to_bits());
        }
        assert_eq!(one.mean_rmse.mean.to_bits(), two.mean_rmse.mean.to_bits());
        assert_eq!(one.n_diverged, 0, "{filter:?}");
        // Readings help: every filter but the free run beats the free run on average.
        if filter != FilterKind::Free {
            assert!(
                one.ratio_to_free.mean < 1.0,
                "{filter:?}: ratio {}",
                one.ratio_to_free.mean
            );
        } else {
            assert_close(one.ratio_to_free.mean, 1.0, 1e-12, 0.0);
        }
        // No filter beats the truncation floor.
        assert!(one.mean_rmse.mean >= one.truncation_rmse);
    }
}

/// A run's numbers do not depend on how many runs there are: run i of 40 equals run i of 100
/// bit for bit (blocks are fixed by run index and padded), for a batched filter and the EnKF.
#[test]
fn a_run_does_not_depend_on_the_number_of_runs() {
    let case = synthetic_case(&SyntheticSpec::default());
    for filter in [FilterKind::Kalman, FilterKind::Nudge, FilterKind::Enkf] {
        let s = settings(filter)
            .with_ensemble(6)
            .unwrap()
            .with_nudge_gain(NudgeGain::Fixed(0.3))
            .unwrap();
        let prep = prepare(case.clone(), "layout-a", &s.model).unwrap();
        let n_runs = if filter == FilterKind::Enkf { 12 } else { 100 };
        let few = run_monte_carlo(&prep, &s.clone().with_runs(5).unwrap().run, &|_, _| {});
        let many = run_monte_carlo(&prep, &s.clone().with_runs(n_runs).unwrap().run, &|_, _| {});
        let few40 = run_monte_carlo(&prep, &s.clone().with_runs(40).unwrap().run, &|_, _| {});
        let (few, many, few40) = (few.unwrap(), many.unwrap(), few40.unwrap());
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for (i, r) in few40.runs.iter().enumerate().take(n_runs.min(40)) {
            assert_eq!(
                bits(&r.rmse),
                bits(&many.runs[i].rmse),
                "{filter:?} run {i}"
            );
            assert_eq!(bits(&r.free_rmse), bits(&many.runs[i].free_rmse));
        }
        for (i, r) in few.runs.iter().enumerate() {
            assert_eq!(
                bits(&r.rmse),
                bits(&many.runs[i].rmse),
                "{filter:?} run {i}"
            );
        }
    }
}

/// Another layout id or run index gives other noise; the same inputs give the same numbers.
#[test]
fn seeds_depend_on_layout_and_master_seed() {
    let case = synthetic_case(&SyntheticSpec::default());
    let s = settings(FilterKind::Kalman);
    let a = prepare(case.clone(), "layout-a", &s.model).unwrap();
    let b = prepare(case, "layout-b", &s.model).unwrap();
    let ra = run_monte_carlo(&a, &s.run, &|_, _| {}).unwrap();
    let rb = run_monte_carlo(&b, &s.run, &|_, _| {}).unwrap();
    let ra2 = run_monte_carlo(&a, &s.with_seed(99).run, &|_, _| {}).unwrap();
    assert_ne!(
        ra.runs[0].mean_rmse.to_bits(),
        rb.runs[0].mean_rmse.to_bits()
    );
    assert_ne!(
        ra.runs[0].mean_rmse.to_bits(),
        ra.runs[1].mean_rmse.to_bits()
    );
    assert_ne!(
        ra.runs[0].mean_rmse.to_bits(),
        ra2.runs[0].mean_rmse.to_bits()
    );
}

/// Tuning on the training span: the minimiser of the training score scores no worse there
/// than the fixed strengths a user would try (0.01, 0.1, 0.5, 1); the strength used is the
/// weakest within one standard error of that minimum (the one-standard-error rule of Breiman
/// et al. 1984, CART §3.4.3): inside the band, and nothing weaker on the grid is.
fn check_tuning(prep: &crowsnest::twin::Prepared, run: &crowsnest::twin::RunSettings) -> f64 {
    let t = tune_nudging(prep, run).unwrap();
    assert!((0.001..=1.0).contains(&t.strength), "{t:?}");
    assert!(t.strength <= t.best_strength, "{t:?}");
    for fixed in [0.01, 0.1, 0.5, 1.0] {
        let other = nudging_training_score(prep, run, fixed).unwrap();
        assert!(t.best_score <= other, "{t:?} > fixed {fixed}: {other}");
        if fixed < t.strength {
            // Brent's tolerance (1e-3 in log γ) lets the crossing sit a hair outside.
            assert!(
                other > t.best_score + t.standard_error,
                "{t:?}: weaker fixed {fixed} ({other}) is inside the band"
            );
        }
    }
    let band = t.best_score + t.standard_error;
    assert!(t.score <= band + 1e-2 * t.standard_error.max(1e-3), "{t:?}");
    t.strength
}

#[test]
fn tuned_nudging_reports_its_strength() {
    let case = synthetic_case(&SyntheticSpec::default());
    let s = settings(FilterKind::Nudge)
        .with_nudge_gain(NudgeGain::Tuned)
        .unwrap();
    let prep = prepare(case, "l", &s.model).unwrap();
    let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
    let g = check_tuning(&prep, &s.run);
    assert_eq!(res.nudge_strength, Some(g));
}

/// On the twin-site fixture the held-out span is calmer than any training window (its field
/// varies about half as much), which is where a gain tuned to the training minimum pulls too
/// hard on noisy readings (it scored 1.09 × the free run before the one-standard-error rule).
/// The tuned nudging must beat the free run on the held-out span at the default split and at
/// an even one.
#[test]
fn tuned_nudging_beats_the_free_run_on_held_out_data() {
    for fraction in [0.7, 0.5] {
        let (site, basis, projection, blocks) = fixture_parts(3);
        let s = TwinSettings::new(FilterKind::Nudge)
            .with_runs(32)
            .unwrap()
            .with_train_fraction(fraction)
            .unwrap();
        let mut source = crowsnest::io::open_snapshots(&site).unwrap();
        let case =
            crowsnest::twin::case_from_site(&site, &basis, &projection, source.as_mut(), &blocks)
                .unwrap();
        let prep = prepare(case, "fixture", &s.model).unwrap();
        let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
        let g = check_tuning(&prep, &s.run);
        assert_eq!(res.nudge_strength, Some(g));
        assert_eq!(res.n_diverged, 0);
        let mean = |f: &dyn Fn(&crowsnest::twin::StepStats) -> f64| {
            res.curves.iter().map(f).sum::<f64>() / res.curves.len() as f64
        };
        let ratio = mean(&|c| c.mean_rmse) / mean(&|c| c.free_mean_rmse);
        assert!(
            ratio < 1.0,
            "train fraction {fraction}: γ {g}, ratio {ratio}"
        );
    }
}

/// The twin-site fixture with `n_modes` POD modes: site, basis, projection and its layout's blocks.
fn fixture_parts(
    n_modes: usize,
) -> (
    crowsnest::io::Site,
    crowsnest::basis::Basis,
    crowsnest::basis::Projection,
    Vec<crowsnest::sensors::Block>,
) {
    use crowsnest::basis::{pod, project, PodOptions, Rank};
    let site = crowsnest::io::load_site(&twin_site()).unwrap();
    let mut source = crowsnest::io::open_snapshots(&site).unwrap();
    let options = PodOptions {
        rank: Rank::Count(n_modes),
        ..PodOptions::default()
    };
    let basis = pod(
        source.as_mut(),
        site.domain.weights(),
        site.n_channels(),
        &options,
        &mut |_, _| {},
    )
    .unwrap();
    let projection = project(&basis, source.as_mut(), &mut |_, _| {}).unwrap();
    let block_set = crowsnest::sensors::build_blocks(&site, &basis).unwrap();
    let rows = crowsnest::io::read_layout_csv(&twin_site().join("layout.csv")).unwrap();
    let blocks = crowsnest::twin::layout_blocks(&site, &block_set.blocks, &rows).unwrap();
    (site, basis, projection, blocks)
}

/// The layout id comes from the sensors: `crowsnest score`'s path (`layout_id_of` on the
/// layout file's blocks) and a sweep cell scoring the same blocks under the same setting draw
/// the same numbers, bit for bit.
#[test]
fn score_and_sweep_cell_share_seeds() {
    use crowsnest::select::{Constraints, Criterion};
    let (site, basis, projection, blocks) = fixture_parts(3);
    let s = TwinSettings::new(FilterKind::Kalman)
        .with_runs(8)
        .unwrap()
        .with_setting_id(1234);
    let mut source = crowsnest::io::open_snapshots(&site).unwrap();
    let via_score = crowsnest::twin::score_layout(
        &site,
        &basis,
        &projection,
        source.as_mut(),
        &blocks,
        &crowsnest::twin::layout_id_of(&site, &blocks),
        &s,
        &|_, _| {},
    )
    .unwrap();
    let pipe =
        crowsnest::sweep::SitePipeline::build(&site, basis, false, &s.model, &mut |_, _, _| {})
            .unwrap();
    let ctx = pipe.context(Constraints::default(), Criterion::D, s.clone(), 2, 1);
    let idx: Vec<usize> = blocks
        .iter()
        .map(|b| {
            pipe.blocks
                .iter()
                .position(|p| p.candidate_idx == b.candidate_idx && p.kind_idx == b.kind_idx)
                .unwrap()
        })
        .collect();
    let via_sweep = ctx.score_blocks(&idx, "any label", &s, 1.0).unwrap();
    assert_eq!(via_score.runs.len(), via_sweep.runs.len());
    for (a, b) in via_score.runs.iter().zip(&via_sweep.runs) {
        assert_eq!(a.mean_rmse.to_bits(), b.mean_rmse.to_bits());
        assert_eq!(a.final_rmse.to_bits(), b.final_rmse.to_bits());
    }
    // The id ignores row order and names only the sensors.
    assert_eq!(
        crowsnest::twin::layout_id([("roof-c", "lidar"), ("mast-a", "cup")]),
        "mast-a:cup;roof-c:lidar"
    );
}

/// A filter that diverges is reported per run (step and reason) and never panics; the free
/// run's summary is still there. Kalman: a model error covariance with a negative eigenvalue
/// makes P indefinite at the first forecast (checked once on the shared gain sequence). EnKF:
/// an absurd inflation (1e300 per step) overflows the ensemble anomalies at the first analysis.
#[test]
fn divergence_is_reported_per_run() {
    let case = synthetic_case(&SyntheticSpec::default());
    let s = settings(FilterKind::Kalman);
    let good = prepare(case.clone(), "l", &s.model).unwrap();
    let mut q = good.model.q.clone();
    q[(0, 0)] = -1.0;
    let bad_model =
        ReducedModel::from_operators(good.model.a.clone(), None, good.model.c.clone(), q);
    let prep = crowsnest::twin::prepare_with_model(case.clone(), "l", good.split, bad_model);
    let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
    assert_eq!(res.n_diverged, N_RUNS);
    for r in &res.runs {
        let d = r.divergence.as_ref().unwrap();
        assert!(d.reason.contains("positive definite"), "{}", d.reason);
        assert_eq!(d.step, 1, "P turns indefinite at the first forecast");
        assert!(r.mean_rmse.is_nan() && r.free_mean_rmse.is_finite());
    }
    assert_eq!(res.mean_rmse.n, 0);
    assert_eq!(res.free_mean_rmse.n, N_RUNS);

    // Five rows read six modes, so one direction is never corrected.
    let s = TwinSettings::new(FilterKind::Enkf)
        .with_runs(4)
        .unwrap()
        .with_ensemble(4)
        .unwrap()
        .with_inflation(1e300)
        .unwrap();
    let prep = prepare(case, "l", &s.model).unwrap();
    let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
    assert_eq!(res.n_diverged, 4);
    for r in &res.runs {
        let d = r.divergence.as_ref().unwrap();
        assert!(
            d.reason.contains("not finite") || d.reason.contains("positive definite"),
            "{}",
            d.reason
        );
    }
    assert_eq!(res.free_mean_rmse.n, 4);
}

/// The nudging divergence message names nudging, not the static covariance of OI.
#[test]
fn nudging_divergence_names_nudging() {
    let mut case = synthetic_case(&SyntheticSpec::default());
    // Sensors that read nothing of the modes.
    case.rows.h = Mat::zeros(case.rows.n_rows(), case.n_modes());
    let s = settings(FilterKind::Nudge)
        .with_nudge_gain(NudgeGain::Fixed(0.5))
        .unwrap();
    let prep = prepare(case, "l", &s.model).unwrap();
    let res = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap();
    assert_eq!(res.n_diverged, N_RUNS);
    let reason = &res.runs[0].divergence.as_ref().unwrap().reason;
    assert!(reason.starts_with("nudging gain"), "{reason}");
    assert!(!reason.contains("H B Hᵀ"), "{reason}");
}

#[test]
fn bad_inputs_get_clear_messages() {
    let msg = |e: TwinError| e.to_string();
    assert!(msg(TwinSettings::new(FilterKind::Kalman)
        .with_runs(0)
        .unwrap_err())
    .contains("at least 1"));
    assert!(msg(TwinSettings::new(FilterKind::Enkf)
        .with_ensemble(1)
        .unwrap_err())
    .contains("at least 2 members"));
    assert!(msg(TwinSettings::new(FilterKind::Kalman)
        .with_model(ModelKind::Quadratic)
        .unwrap_err())
    .contains("linear model"));
    assert!(msg(TwinSettings::new(FilterKind::Kalman)
        .with_train_fraction(1.2)
        .unwrap_err())
    .contains("(0, 1)"));
    // Too few snapshots for the split.
    let short = synthetic_case(&SyntheticSpec {
        n_snapshots: 9,
        ..SyntheticSpec::default()
    });
    let s = settings(FilterKind::Kalman);
    let e = prepare(short, "l", &s.model).unwrap_err();
    assert!(matches!(e, TwinError::TooFewSnapshots { .. }), "{e}");
    // A sampling interval longer than the test span (120 test steps of 1 s).
    let slow = synthetic_case(&SyntheticSpec {
        interval_s: 500.0,
        ..SyntheticSpec::default()
    });
    let prep = prepare(slow, "l", &s.model).unwrap();
    let e = run_monte_carlo(&prep, &s.run, &|_, _| {}).unwrap_err();
    assert!(
        e.to_string().contains("500 s is longer than the test span"),
        "{e}"
    );
}

/// A quadratic model whose free run explodes is refused. Mode 0 follows
/// a_{t+1} = 0.923 a_t + a_t², whose fixed point 0.077 is unstable (slope 1.077): started 1e-10
/// above it, the training record stays bounded (deviation ≈ 0.1 after 280 steps) but the fitted
/// model, run twice as long, leaves every bound.
#[test]
fn explosive_quadratic_fit_is_refused() {
    let mut case = synthetic_case(&SyntheticSpec::default());
    let s = TwinSettings::new(FilterKind::Enkf)
        .with_tikhonov(0.0)
        .unwrap();
    let n_train = (case.coeffs.nrows() as f64 * s.model.train_fraction).floor() as usize;
    let mut x = 0.077 + 1e-10;
    for t in 0..n_train {
        case.coeffs[(t, 0)] = x;
        x = 0.923 * x + x * x;
    }
    match prepare(case, "l", &s.model) {
        Err(TwinError::UnstableModel { message, .. }) => {
            assert!(message.contains("free run"), "{message}")
        }
        other => panic!(
            "expected an unstable-model error, got {:?}",
            other.map(|p| p.model.report)
        ),
    }
}

fn twin_site() -> std::path::PathBuf {
    repo_root().join("tests/fixtures/twin-site")
}

/// `crowsnest score` on the twin-site fixture prints the table and writes both CSV files with
/// the documented columns; bad inputs exit with code 2 and a message naming the value.
#[test]
fn score_command_writes_curves_and_runs() {
    let out = tempfile::tempdir().unwrap();
    let site = twin_site();
    let layout = site.join("layout.csv");
    let out_dir = out.path().join("scores");
    let args = [
        "score",
        site.to_str().unwrap(),
        "--layout",
        layout.to_str().unwrap(),
        "--runs",
        "6",
        "--modes",
        "3",
        "--out",
        out_dir.to_str().unwrap(),
    ];
    let o = crate::common::run_in(out.path(), &args);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        stdout.contains("ratio to free run") && stdout.contains("Caution"),
        "{stdout}"
    );
    let curves = std::fs::read_to_string(out_dir.join("curves.csv")).unwrap();
    assert!(
        curves.starts_with("step,time_s,mean_rmse,std_rmse,free_mean_rmse"),
        "{curves}"
    );
    assert_eq!(curves.lines().count(), 1 + 120, "header + 120 test steps");
    let runs = std::fs::read_to_string(out_dir.join("runs.csv")).unwrap();
    assert_eq!(runs.lines().count(), 1 + 6);
}

#[test]
fn score_command_bad_inputs_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let site = twin_site();
    let site_s = site.to_str().unwrap().to_string();
    let good = site.join("layout.csv").to_str().unwrap().to_string();
    let unknown = dir.path().join("unknown.csv");
    std::fs::write(&unknown, "candidate,kind\nmast-a,cup\nmast-zz,cup\n").unwrap();
    let bad_kind = dir.path().join("kind.csv");
    std::fs::write(&bad_kind, "candidate,kind\nmast-a,sonic\n").unwrap();
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            vec!["--layout".into(), unknown.to_str().unwrap().into()],
            "unknown candidate `mast-zz`",
        ),
        (
            vec!["--layout".into(), bad_kind.to_str().unwrap().into()],
            "unknown sensor kind `sonic`",
        ),
        (
            vec!["--layout".into(), good.clone(), "--runs".into(), "0".into()],
            "at least 1",
        ),
        (
            vec![
                "--layout".into(),
                good.clone(),
                "--filter".into(),
                "enkf".into(),
                "--ensemble".into(),
                "1".into(),
            ],
            "at least 2 members",
        ),
        (
            vec![
                "--layout".into(),
                good.clone(),
                "--every".into(),
                "500".into(),
            ],
            "longer than the test span",
        ),
        (
            vec![
                "--layout".into(),
                good.clone(),
                "--train-fraction".into(),
                "0.999".into(),
            ],
            "too few snapshots",
        ),
    ];
    for (extra, expect) in cases {
        let mut args = vec![
            "score".to_string(),
            site_s.clone(),
            "--modes".into(),
            "3".into(),
        ];
        args.extend(extra);
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = crate::common::run_in(dir.path(), &argv);
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(
            stderr.contains(expect),
            "{args:?}: expected `{expect}` in {stderr}"
        );
    }
}

/// Column names of a table in docs/formats.md: the first cell of each row after `heading`.
fn documented_columns(heading: &str) -> Vec<String> {
    let doc = std::fs::read_to_string(repo_root().join("docs/formats.md")).unwrap();
    let after = &doc[doc.find(heading).unwrap()..];
    after
        .lines()
        .skip_while(|l| !l.starts_with("| column"))
        .skip(2)
        .take_while(|l| l.starts_with('|'))
        .flat_map(|l| {
            l.split('|')
                .nth(1)
                .unwrap()
                .split(',')
                .map(|c| c.trim().trim_matches('`').to_string())
                .collect::<Vec<_>>()
        })
        .collect()
}

/// Runs `crowsnest score` on the twin-site fixture with `extra` options; returns stdout and
/// the bytes of runs.csv.
fn score_cli(dir: &std::path::Path, layout: &std::path::Path, extra: &[&str]) -> (String, String) {
    let site = twin_site();
    let out_dir = dir.join(format!(
        "out-{}",
        extra.join("_").replace(['-', '.', '/'], "")
    ));
    let mut args = vec![
        "score",
        site.to_str().unwrap(),
        "--layout",
        layout.to_str().unwrap(),
        "--runs",
        "4",
        "--modes",
        "3",
        "--out",
        out_dir.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = crate::common::run_in(dir, &args);
    let stdout = String::from_utf8_lossy(&o.stdout).into_owned();
    assert!(
        o.status.success(),
        "{args:?}\n{stdout}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    (
        stdout,
        std::fs::read_to_string(out_dir.join("runs.csv")).unwrap(),
    )
}

/// Every filter and option of `crowsnest score` runs; the seed changes the numbers and the same
/// seed repeats them byte for byte; renaming the layout file changes nothing (the seed id comes
/// from the sensors); runs.csv has the columns docs/formats.md lists; the spread is printed
/// beside the modal error it estimates.
#[test]
fn score_command_options() {
    let dir = tempfile::tempdir().unwrap();
    let layout = twin_site().join("layout.csv");
    let (_, base) = score_cli(dir.path(), &layout, &["--seed", "7"]);
    let header: Vec<String> = base
        .lines()
        .next()
        .unwrap()
        .split(',')
        .map(String::from)
        .collect();
    assert_eq!(
        header,
        documented_columns("`runs.csv`, one row per Monte Carlo run")
    );
    let (_, again) = score_cli(dir.path(), &layout, &["--seed", "7", "--noise-scale", "1"]);
    assert_eq!(base, again, "same seed, same bytes");
    let (_, other) = score_cli(dir.path(), &layout, &["--seed", "8"]);
    assert_ne!(base, other, "another seed, other numbers");
    let renamed = dir.path().join("renamed-layout.csv");
    std::fs::copy(&layout, &renamed).unwrap();
    let (_, moved) = score_cli(dir.path(), &renamed, &["--seed", "7"]);
    assert_eq!(base, moved, "the file name does not seed the runs");
    let (_, noisy) = score_cli(dir.path(), &layout, &["--seed", "7", "--noise-scale", "3"]);
    assert_ne!(base, noisy);
    let (_, bg) = score_cli(
        dir.path(),
        &layout,
        &["--seed", "7", "--background-noise", "1.5"],
    );
    assert_ne!(base, bg);
    let mean_col = |csv: &str, col: usize| -> f64 {
        let v: Vec<f64> = csv
            .lines()
            .skip(1)
            .map(|l| l.split(',').nth(col).unwrap().parse().unwrap())
            .collect();
        v.iter().sum::<f64>() / v.len() as f64
    };
    // A larger background error raises the free run's error (column 3: free_mean_rmse).
    assert!(mean_col(&bg, 3) > mean_col(&base, 3));

    let (stdout, _) = score_cli(dir.path(), &layout, &["--seed", "7"]);
    let lines: Vec<&str> = stdout.lines().collect();
    let spread = lines
        .iter()
        .position(|l| l.starts_with("filter spread"))
        .unwrap();
    assert!(lines[spread - 1].starts_with("modal error"), "{stdout}");
    for filter in ["enkf", "oi", "nudge", "free"] {
        let (stdout, runs) = score_cli(
            dir.path(),
            &layout,
            &["--filter", filter, "--ensemble", "8"],
        );
        assert!(stdout.contains(&format!("filter {filter}")), "{stdout}");
        assert_eq!(runs.lines().count(), 1 + 4);
    }
    let (stdout, _) = score_cli(
        dir.path(),
        &layout,
        &[
            "--filter",
            "oi",
            "--model",
            "quadratic",
            "--tikhonov",
            "1e-3",
        ],
    );
    assert!(stdout.contains("model quadratic"), "{stdout}");
}

/// A run that diverges does not stop the command: it exits 0, prints the count and reason and
/// the free run's summary, and runs.csv names the step and reason per run.
#[test]
fn score_command_reports_divergence_and_exits_0() {
    let dir = tempfile::tempdir().unwrap();
    let layout = twin_site().join("layout.csv");
    let (stdout, runs) = score_cli(
        dir.path(),
        &layout,
        &[
            "--filter",
            "enkf",
            "--model",
            "linear",
            "--ensemble",
            "3",
            "--inflation",
            "1e300",
        ],
    );
    assert!(stdout.contains("diverged runs: 4 of 4"), "{stdout}");
    assert!(stdout.contains("free run, time-mean"), "{stdout}");
    for line in runs.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        assert!(!cells[7].is_empty() && !cells[8].is_empty(), "{line}");
    }
}
