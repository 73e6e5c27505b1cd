//! The reduced model: the time split of the coefficient trajectory, and the one-step models
//! fitted on the training span by Tikhonov-regularised least squares (faer QR):
//!
//! - linear `a_{t+1} = A a_t + c`, the DMD-style one-step operator (Schmid 2010, "Dynamic mode
//!   decomposition of numerical and experimental data", JFM 656; Tu et al. 2014, "On dynamic
//!   mode decomposition: theory and applications", J. Comput. Dyn. 1);
//! - quadratic `a_{t+1} = A a_t + F (a_t ⊗ a_t)_sym + c` by operator inference (Peherstorfer &
//!   Willcox 2016, "Data-driven operator inference for nonintrusive projection-based model
//!   reduction", CMAME 306), `(a ⊗ a)_sym` the `r(r+1)/2` products `a_i a_j`, `i ≤ j`.
//!
//! Model-error covariance `Q` is the sample second moment of the one-step residuals (after any
//! damping). Stability: a spectral radius of `A` above 1 is reported and `A` is scaled to the
//! damping factor (default 0.999). A quadratic model must also stay bounded in free runs from
//! training states (see `check_bounded`); its quadratic Tikhonov weight is raised tenfold until
//! it does, and the fit is refused when even the largest weight leaves it unbounded. Models
//! advance at the snapshot step `dt`.

use faer::linalg::solvers::SolveLstsq;
use faer::{Mat, MatRef};

use super::dense::{col_major, gemv_add, spectral_radius};
use super::{ModelKind, ModelSettings, TwinError};

/// How the snapshot record is split by time: training first, then the held-out test span.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TimeSplit {
    pub n_train: usize,
    pub n_test: usize,
}

/// Minimum test span, in snapshots: an initial state and at least one forecast.
pub const MIN_TEST_SNAPSHOTS: usize = 2;

impl TimeSplit {
    /// Splits `n_snapshots` at `floor(fraction · n_snapshots)`; the training span must give at
    /// least as many one-step pairs as the linear model has unknowns per row (`n_modes + 1`).
    pub fn new(n_snapshots: usize, train_fraction: f64, n_modes: usize) -> Result<Self, TwinError> {
        let n_train = ((n_snapshots as f64) * train_fraction).floor() as usize;
        let n_test = n_snapshots - n_train.min(n_snapshots);
        let need_train = n_modes + 2;
        if n_train < need_train || n_test < MIN_TEST_SNAPSHOTS {
            return Err(TwinError::TooFewSnapshots {
                n_snapshots,
                train_fraction,
                n_train,
                n_test,
                need_train,
                need_test: MIN_TEST_SNAPSHOTS,
            });
        }
        Ok(Self { n_train, n_test })
    }
}

/// What the fit found, for reports.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelReport {
    pub kind: ModelKind,
    /// Spectral radius of the fitted linear operator `A` before damping.
    pub fitted_spectral_radius: f64,
    /// `Some(s)` when `A` was multiplied by `s = damping / fitted_spectral_radius`.
    pub damping_scale: Option<f64>,
    /// Spectral radius of the `A` in use.
    pub spectral_radius: f64,
    /// RMS of the one-step residuals over modes and training pairs (coefficient units).
    pub one_step_rms: f64,
    pub n_train_pairs: usize,
    /// Tikhonov weight of the quadratic block in use (quadratic only; may be raised above
    /// the setting until free runs stay bounded).
    pub quadratic_tikhonov: Option<f64>,
}

/// A fitted one-step model of the modal coefficients.
#[derive(Debug, Clone)]
pub struct ReducedModel {
    pub kind: ModelKind,
    pub n_modes: usize,
    /// Linear operator, `n_modes × n_modes`.
    pub a: Mat<f64>,
    /// Quadratic operator on `(a ⊗ a)_sym`, `n_modes × n_modes(n_modes+1)/2` (quadratic only).
    pub f: Option<Mat<f64>>,
    /// Constant term, length `n_modes`.
    pub c: Vec<f64>,
    /// Model-error covariance, `n_modes × n_modes`, positive definite.
    pub q: Mat<f64>,
    pub report: ModelReport,
    a_cm: Vec<f64>,
    f_cm: Vec<f64>,
}

/// Number of distinct products `a_i a_j`, `i ≤ j`.
pub fn n_quadratic(n_modes: usize) -> usize {
    n_modes * (n_modes + 1) / 2
}

/// Writes the products `a_i a_j`, `i ≤ j`, in row order (i outer), into `out`.
#[inline]
pub fn quadratic_features(a: &[f64], out: &mut [f64]) {
    let mut k = 0;
    for i in 0..a.len() {
        for j in i..a.len() {
            out[k] = a[i] * a[j];
            k += 1;
        }
    }
}

impl ReducedModel {
    /// Builds a model from known operators (tests, or a site that provides its own operator).
    #[track_caller]
    pub fn from_operators(a: Mat<f64>, f: Option<Mat<f64>>, c: Vec<f64>, q: Mat<f64>) -> Self {
        let n_modes = a.nrows();
        assert!(
            a.ncols() == n_modes
                && c.len() == n_modes
                && q.nrows() == n_modes
                && q.ncols() == n_modes
        );
        if let Some(f) = &f {
            assert!(f.nrows() == n_modes && f.ncols() == n_quadratic(n_modes));
        }
        let rho = spectral_radius(a.as_ref()).unwrap_or(f64::NAN);
        let kind = if f.is_some() {
            ModelKind::Quadratic
        } else {
            ModelKind::Linear
        };
        let report = ModelReport {
            kind,
            fitted_spectral_radius: rho,
            damping_scale: None,
            spectral_radius: rho,
            one_step_rms: 0.0,
            n_train_pairs: 0,
            quadratic_tikhonov: None,
        };
        let a_cm = col_major(a.as_ref());
        let f_cm = f
            .as_ref()
            .map(|f| col_major(f.as_ref()))
            .unwrap_or_default();
        Self {
            kind,
            n_modes,
            a,
            f,
            c,
            q,
            report,
            a_cm,
            f_cm,
        }
    }

    /// Fits the model of `settings.model` on `train` (`n_train × n_modes`, rows in time order).
    pub fn fit(train: MatRef<'_, f64>, settings: &ModelSettings) -> Result<Self, TwinError> {
        let n_pairs = train.nrows().saturating_sub(1);
        Self::fit_pairs(
            train.subrows(0, n_pairs),
            train.subrows(1.min(train.nrows()), n_pairs),
            settings,
        )
    }

    /// Fits on one-step pairs: row `t` of `next` follows row `t` of `current`. Several short
    /// trajectories can be fitted together this way.
    pub fn fit_pairs(
        current: MatRef<'_, f64>,
        next: MatRef<'_, f64>,
        settings: &ModelSettings,
    ) -> Result<Self, TwinError> {
        assert_eq!(current.nrows(), next.nrows());
        assert_eq!(current.ncols(), next.ncols());
        let n_modes = current.ncols();
        let n_pairs = current.nrows();
        let quadratic = settings.model == ModelKind::Quadratic;
        let n_quad = if quadratic { n_quadratic(n_modes) } else { 0 };
        let n_feat = n_modes + n_quad + 1;
        if n_pairs < n_modes + 1 {
            return Err(TwinError::FitFailed(format!(
                "{n_pairs} training pairs for {n_modes} modes; need at least {}",
                n_modes + 1
            )));
        }
        // Features [a_t, (a_t ⊗ a_t)_sym, 1] and targets a_{t+1}.
        let mut quad = vec![0.0; n_quad];
        let mut x = Mat::<f64>::zeros(n_pairs, n_feat);
        for t in 0..n_pairs {
            let a_t: Vec<f64> = (0..n_modes).map(|j| current[(t, j)]).collect();
            for j in 0..n_modes {
                x[(t, j)] = a_t[j];
            }
            if quadratic {
                quadratic_features(&a_t, &mut quad);
                for (k, &v) in quad.iter().enumerate() {
                    x[(t, n_modes + k)] = v;
                }
            }
            x[(t, n_feat - 1)] = 1.0;
        }
        let y = Mat::from_fn(n_pairs, n_modes, |t, j| next[(t, j)]);

        let fit_with =
            |quad_tikhonov: f64| fit_regularised(current, next, &x, &y, settings, quad_tikhonov);
        if !quadratic || settings.tikhonov == 0.0 {
            let model = fit_with(settings.tikhonov)?;
            if quadratic {
                model.check_bounded(
                    current,
                    "with no Tikhonov regularisation (a weight of 0 cannot be raised); set \
                     --tikhonov > 0 or use the linear model",
                )?;
            }
            return Ok(model);
        }
        // Operator inference: raise the quadratic block's weight tenfold until free runs stay
        // bounded (the selection rule of McQuarrie, Huang & Willcox 2021, "Data-driven
        // reduced-order models via regularised operator inference for a single-injector
        // combustion process", J. R. Soc. N. Z. 51).
        let mut last_err = None;
        for k in 0..=QUADRATIC_ESCALATIONS {
            let weight = settings.tikhonov * 10f64.powi(k as i32);
            let mut model = fit_with(weight)?;
            let note = format!(
                "even with the quadratic Tikhonov weight raised from {:.1e} to {weight:.1e} \
                 ({k} tenfold raises); try a larger --tikhonov or the linear model",
                settings.tikhonov
            );
            match model.check_bounded(current, &note) {
                Ok(()) => {
                    model.report.quadratic_tikhonov = Some(weight);
                    return Ok(model);
                }
                Err(e) => last_err = Some(e),
            }
        }
        Err(last_err.unwrap_or_else(|| TwinError::FitFailed("no quadratic fit was tried".into())))
    }

    /// Runs the model freely for `n_train` steps from 8 evenly spaced training states, each
    /// as is and shifted by ±0.5 of every mode's RMS (signs alternating), and refuses it when
    /// a state leaves 10× the largest training norm or stops being finite.
    fn check_bounded(&self, train: MatRef<'_, f64>, note: &str) -> Result<(), TwinError> {
        let n_train = train.nrows();
        let max_norm = (0..n_train)
            .map(|t| train.row(t).iter().map(|v| v * v).sum::<f64>().sqrt())
            .fold(0.0_f64, f64::max);
        let bound = 10.0 * max_norm.max(f64::MIN_POSITIVE);
        let rms: Vec<f64> = (0..self.n_modes)
            .map(|j| (train.col(j).iter().map(|v| v * v).sum::<f64>() / n_train as f64).sqrt())
            .collect();
        let mut next = vec![0.0; self.n_modes];
        let mut quad = vec![0.0; n_quadratic(self.n_modes)];
        for start_idx in 0..8 {
            let t0 = start_idx * (n_train - 1) / 7;
            for shift in [0.0, 0.5] {
                let mut state: Vec<f64> = (0..self.n_modes)
                    .map(|j| train[(t0, j)] + if j % 2 == 0 { shift } else { -shift } * rms[j])
                    .collect();
                for step in 1..=n_train {
                    self.step_with(&state, &mut quad, &mut next);
                    std::mem::swap(&mut state, &mut next);
                    let norm = state.iter().map(|v| v * v).sum::<f64>().sqrt();
                    if norm.is_nan() || norm > bound {
                        return Err(TwinError::UnstableModel {
                            model: self.kind.name(),
                            message: format!(
                                "a free run from training state {t0}{} reaches coefficient norm \
                                 {norm:.3e} at step {step}, beyond 10× the largest training norm \
                                 ({max_norm:.3e}), {note}",
                                if shift > 0.0 { " (shifted)" } else { "" },
                            ),
                        });
                    }
                }
            }
        }
        Ok(())
    }

    /// One deterministic step `out = A a + F (a ⊗ a)_sym + c`.
    #[inline]
    pub fn step(&self, a: &[f64], out: &mut [f64]) {
        out.copy_from_slice(&self.c);
        gemv_add(&self.a_cm, a, out);
        if self.f.is_some() {
            let mut quad = vec![0.0; n_quadratic(self.n_modes)];
            quadratic_features(a, &mut quad);
            gemv_add(&self.f_cm, &quad, out);
        }
    }

    /// One step with a caller-owned buffer for the quadratic features (no allocation).
    #[inline]
    pub(crate) fn step_with(&self, a: &[f64], quad: &mut [f64], out: &mut [f64]) {
        out.copy_from_slice(&self.c);
        gemv_add(&self.a_cm, a, out);
        if self.f.is_some() {
            quadratic_features(a, quad);
            gemv_add(&self.f_cm, quad, out);
        }
    }
}

/// Number of tenfold raises of the quadratic Tikhonov weight tried before a quadratic fit is
/// refused (up to 1e8 × the base weight).
pub const QUADRATIC_ESCALATIONS: usize = 8;

/// One regularised least-squares fit with features `x` and targets `y`, damping and `Q`.
fn fit_regularised(
    current: MatRef<'_, f64>,
    next: MatRef<'_, f64>,
    x: &Mat<f64>,
    y: &Mat<f64>,
    settings: &ModelSettings,
    quad_tikhonov: f64,
) -> Result<ReducedModel, TwinError> {
    let n_modes = current.ncols();
    let n_pairs = current.nrows();
    let n_feat = x.ncols();
    let quadratic = settings.model == ModelKind::Quadratic;
    let n_quad = n_feat - n_modes - 1;
    // Tikhonov rows: sqrt(λ_k) on feature k, λ_k = tikhonov · mean squared column norm of
    // k's block (linear or quadratic), so the weight is independent of coefficient units.
    // The constant is not penalised.
    let block_mean_sq = |cols: std::ops::Range<usize>| -> f64 {
        let n = cols.len().max(1) as f64;
        cols.map(|k| x.col(k).iter().map(|v| v * v).sum::<f64>())
            .sum::<f64>()
            / n
    };
    let lin_scale = block_mean_sq(0..n_modes);
    let quad_scale = if quadratic {
        block_mean_sq(n_modes..n_modes + n_quad)
    } else {
        0.0
    };
    let n_reg = if settings.tikhonov > 0.0 || quad_tikhonov > 0.0 {
        n_modes + n_quad
    } else {
        0
    };
    let mut xs = Mat::<f64>::zeros(n_pairs + n_reg, n_feat);
    let mut ys = Mat::<f64>::zeros(n_pairs + n_reg, n_modes);
    for t in 0..n_pairs {
        for k in 0..n_feat {
            xs[(t, k)] = x[(t, k)];
        }
        for j in 0..n_modes {
            ys[(t, j)] = y[(t, j)];
        }
    }
    for k in 0..n_reg {
        let scale = if k < n_modes { lin_scale } else { quad_scale };
        let weight = if k < n_modes {
            settings.tikhonov
        } else {
            quad_tikhonov
        };
        xs[(n_pairs + k, k)] = (weight * scale).sqrt();
    }
    if xs.nrows() < n_feat {
        return Err(TwinError::FitFailed(format!(
            "{n_pairs} training pairs for {n_feat} unknowns per mode and no regularisation; \
             set a Tikhonov weight > 0 or use more training snapshots"
        )));
    }
    let theta = xs.qr().solve_lstsq(&ys); // n_feat × n_modes
    if !theta.col_iter().all(|c| c.iter().all(|v| v.is_finite())) {
        return Err(TwinError::FitFailed(
            "least squares gave non-finite operators".into(),
        ));
    }
    let mut a = Mat::from_fn(n_modes, n_modes, |i, j| theta[(j, i)]);
    let f = quadratic.then(|| Mat::from_fn(n_modes, n_quad, |i, k| theta[(n_modes + k, i)]));
    let c: Vec<f64> = (0..n_modes).map(|i| theta[(n_feat - 1, i)]).collect();

    let model_name = settings.model.name();
    let fitted_rho = spectral_radius(a.as_ref()).ok_or_else(|| TwinError::UnstableModel {
        model: model_name,
        message: "the eigenvalues of the linear operator could not be computed".into(),
    })?;
    let mut damping_scale = None;
    if fitted_rho > 1.0 {
        let s = settings.damping / fitted_rho;
        a *= faer::Scale(s);
        damping_scale = Some(s);
    }
    let rho = spectral_radius(a.as_ref()).unwrap_or(f64::INFINITY);
    if !(rho < 1.0 || damping_scale.is_none() && rho <= 1.0) {
        return Err(TwinError::UnstableModel {
            model: model_name,
            message: format!(
                "spectral radius {fitted_rho:.6} damped by {:.6} is still {rho:.6}",
                damping_scale.unwrap_or(1.0)
            ),
        });
    }

    let mut model = ReducedModel::from_operators(a, f, c, Mat::identity(n_modes, n_modes));
    // Residuals of the model in use, and Q from them.
    let mut q = Mat::<f64>::zeros(n_modes, n_modes);
    let mut forecast = vec![0.0; n_modes];
    let mut sum_sq = 0.0;
    for t in 0..n_pairs {
        let a_t: Vec<f64> = (0..n_modes).map(|j| current[(t, j)]).collect();
        model.step(&a_t, &mut forecast);
        let res: Vec<f64> = (0..n_modes).map(|j| next[(t, j)] - forecast[j]).collect();
        for i in 0..n_modes {
            sum_sq += res[i] * res[i];
            for j in 0..n_modes {
                q[(i, j)] += res[i] * res[j] / n_pairs as f64;
            }
        }
    }
    // A floor of 1e-9 × the mean coefficient variance keeps Q positive definite when the
    // training data are (nearly) noise free.
    let mean_var = (0..n_modes)
        .map(|j| current.col(j).iter().map(|v| v * v).sum::<f64>() / n_pairs as f64)
        .sum::<f64>()
        / n_modes as f64;
    let floor = 1e-9 * mean_var.max(f64::MIN_POSITIVE);
    for i in 0..n_modes {
        q[(i, i)] += floor;
    }
    model.q = q;
    model.report = ModelReport {
        kind: settings.model,
        fitted_spectral_radius: fitted_rho,
        damping_scale,
        spectral_radius: rho,
        one_step_rms: (sum_sq / (n_pairs * n_modes) as f64).sqrt(),
        n_train_pairs: n_pairs,
        quadratic_tikhonov: quadratic.then_some(quad_tikhonov),
    };
    Ok(model)
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use faer::linalg::solvers::DenseSolveCore;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    fn trajectory(model: &ReducedModel, start: &[f64], n: usize) -> Mat<f64> {
        let r = start.len();
        let mut out = Mat::zeros(n, r);
        let mut state = start.to_vec();
        let mut next = vec![0.0; r];
        for t in 0..n {
            for j in 0..r {
                out[(t, j)] = state[j];
            }
            model.step(&state, &mut next);
            std::mem::swap(&mut state, &mut next);
        }
        out
    }

    fn exact(model: ModelKind) -> ModelSettings {
        ModelSettings {
            model,
            tikhonov: 0.0,
            ..ModelSettings::default()
        }
    }

    /// DMD recovers the eigenvalues of a known linear system from noise-free data to 1e-10
    /// (Schmid 2010 §2: exact for data generated by a linear map with enough independent
    /// snapshots). System: block-diagonal rotations 0.95·R(0.2), 0.8·R(0.7) and a real 0.6.
    #[test]
    fn dmd_recovers_known_eigenvalues() {
        let mut a = Mat::<f64>::zeros(5, 5);
        for (blk, (rho, th)) in [(0.95f64, 0.2f64), (0.8, 0.7)].iter().enumerate() {
            let o = 2 * blk;
            a[(o, o)] = rho * th.cos();
            a[(o, o + 1)] = -rho * th.sin();
            a[(o + 1, o)] = rho * th.sin();
            a[(o + 1, o + 1)] = rho * th.cos();
        }
        a[(4, 4)] = 0.6;
        // Mix the blocks with a well-conditioned change of basis so A is not block diagonal.
        let t = Mat::from_fn(5, 5, |i, j| {
            if i == j {
                2.0
            } else {
                0.3 * ((i + 2 * j) % 3) as f64 - 0.2
            }
        });
        let t_inv = t.partial_piv_lu().inverse();
        let a = &t * &a * &t_inv;
        let truth = ReducedModel::from_operators(a, None, vec![0.0; 5], Mat::identity(5, 5));
        let data = trajectory(&truth, &[1.0, -0.5, 0.8, 0.3, -1.2], 40);
        let fitted = ReducedModel::fit(data.as_ref(), &exact(ModelKind::Linear)).unwrap();
        let mut got: Vec<(f64, f64)> = fitted
            .a
            .eigenvalues()
            .unwrap()
            .iter()
            .map(|z| (z.re, z.im))
            .collect();
        let mut want = vec![
            (0.95 * 0.2f64.cos(), 0.95 * 0.2f64.sin()),
            (0.95 * 0.2f64.cos(), -0.95 * 0.2f64.sin()),
            (0.8 * 0.7f64.cos(), 0.8 * 0.7f64.sin()),
            (0.8 * 0.7f64.cos(), -0.8 * 0.7f64.sin()),
            (0.6, 0.0),
        ];
        let key = |z: &(f64, f64)| (z.0 * 1e6).round() as i64 * 10 + (z.1 > 0.0) as i64;
        got.sort_by_key(key);
        want.sort_by_key(key);
        for (g, w) in got.iter().zip(&want) {
            assert!(
                (g.0 - w.0).abs() < 1e-10 && (g.1 - w.1).abs() < 1e-10,
                "{g:?} vs {w:?}"
            );
        }
        assert!(fitted.c.iter().all(|v| v.abs() < 1e-10));
        assert!(fitted.report.damping_scale.is_none());
    }

    /// Operator inference recovers known quadratic operators from the data they generated
    /// (Peherstorfer & Willcox 2016, §3: the least-squares problem is exact for data from the
    /// model class when the data matrix has full column rank). Random trajectories from many
    /// starts keep the quadratic features independent.
    #[test]
    fn operator_inference_recovers_quadratic_operators() {
        let r = 3;
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(11);
        let a = Mat::from_fn(r, r, |i, j| {
            if i == j {
                0.7
            } else {
                0.1 * (i as f64 - j as f64)
            }
        });
        let f = Mat::from_fn(r, n_quadratic(r), |i, k| {
            0.05 * ((i + 2 * k) % 5) as f64 - 0.1
        });
        let c = vec![0.02, -0.01, 0.03];
        let truth = ReducedModel::from_operators(
            a.clone(),
            Some(f.clone()),
            c.clone(),
            Mat::identity(r, r),
        );
        // Short bursts from random starts keep the quadratic features linearly independent
        // (one long run would settle on the fixed point and make them degenerate).
        let n_bursts = 30;
        let burst_len = 4;
        let mut current = Mat::zeros(n_bursts * (burst_len - 1), r);
        let mut next = Mat::zeros(n_bursts * (burst_len - 1), r);
        for b in 0..n_bursts {
            let start: Vec<f64> = (0..r).map(|_| StandardNormal.sample(&mut rng)).collect();
            let burst = trajectory(&truth, &start, burst_len);
            for t in 0..burst_len - 1 {
                for j in 0..r {
                    current[(b * (burst_len - 1) + t, j)] = burst[(t, j)];
                    next[(b * (burst_len - 1) + t, j)] = burst[(t + 1, j)];
                }
            }
        }
        let fitted = ReducedModel::fit_pairs(
            current.as_ref(),
            next.as_ref(),
            &exact(ModelKind::Quadratic),
        )
        .unwrap();
        let fitted_f = fitted.f.as_ref().unwrap();
        let mut max_err: f64 = 0.0;
        for i in 0..r {
            for j in 0..r {
                max_err = max_err.max((fitted.a[(i, j)] - a[(i, j)]).abs());
            }
            for k in 0..n_quadratic(r) {
                max_err = max_err.max((fitted_f[(i, k)] - f[(i, k)]).abs());
            }
            max_err = max_err.max((fitted.c[i] - c[i]).abs());
        }
        assert!(max_err < 1e-10, "max operator error {max_err}");
    }

    #[test]
    fn unstable_operator_is_damped_and_reported() {
        let a = faer::mat![[1.05, 0.0], [0.0, 0.5]];
        let truth = ReducedModel::from_operators(a, None, vec![0.0; 2], Mat::identity(2, 2));
        let data = trajectory(&truth, &[1.0, 1.0], 30);
        let fitted = ReducedModel::fit(data.as_ref(), &exact(ModelKind::Linear)).unwrap();
        assert!((fitted.report.fitted_spectral_radius - 1.05).abs() < 1e-9);
        let s = fitted.report.damping_scale.unwrap();
        assert!((s - 0.999 / 1.05).abs() < 1e-9);
        assert!((fitted.report.spectral_radius - 0.999).abs() < 1e-9);
    }

    /// The Tikhonov fit equals the closed-form ridge solution θ = (XᵀX + Λ)⁻¹ XᵀY (Hoerl &
    /// Kennard 1970, "Ridge regression: biased estimation for nonorthogonal problems",
    /// Technometrics 12, eq. 2.2) with Λ = λ · (mean squared feature column norm) on the linear
    /// features and 0 on the constant, computed here by normal equations and an LU solve.
    #[test]
    fn tikhonov_fit_equals_closed_form_ridge() {
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(21);
        let (r, n) = (3, 40);
        let data = Mat::from_fn(n, r, |_, _| StandardNormal.sample(&mut rng));
        let lambda = 0.3;
        let settings = ModelSettings {
            model: ModelKind::Linear,
            tikhonov: lambda,
            damping: 0.999,
            ..ModelSettings::default()
        };
        let fitted = ReducedModel::fit(data.as_ref(), &settings).unwrap();
        let n_pairs = n - 1;
        let x = Mat::from_fn(
            n_pairs,
            r + 1,
            |t, k| if k < r { data[(t, k)] } else { 1.0 },
        );
        let y = Mat::from_fn(n_pairs, r, |t, j| data[(t + 1, j)]);
        let scale = (0..r)
            .map(|k| (0..n_pairs).map(|t| x[(t, k)] * x[(t, k)]).sum::<f64>())
            .sum::<f64>()
            / r as f64;
        let mut normal = x.transpose() * &x;
        for k in 0..r {
            normal[(k, k)] += lambda * scale;
        }
        let theta = normal.partial_piv_lu().inverse() * (x.transpose() * &y);
        assert!(fitted.report.damping_scale.is_none());
        for i in 0..r {
            for j in 0..r {
                assert!((fitted.a[(i, j)] - theta[(j, i)]).abs() < 1e-10);
            }
            assert!((fitted.c[i] - theta[(r, i)]).abs() < 1e-10);
        }
        // The penalty matters: the unregularised fit differs.
        let plain = ReducedModel::fit(data.as_ref(), &exact(ModelKind::Linear)).unwrap();
        assert!((plain.a[(0, 0)] - fitted.a[(0, 0)]).abs() > 1e-3);
    }

    /// Q is the second moment of the one-step residuals plus a floor of 1e-9 × the mean
    /// coefficient second moment, checked by hand: pairs 1→2, 2→1, 1→2, 2→2 give the
    /// least-squares line a' = −0.5 a + 2.5 (slope Sxy/Sxx = −0.5/1), residuals 0, −0.5, 0, 0.5,
    /// so Q = 0.5/4 = 0.125, floor 1e-9 × (1 + 4 + 1 + 4)/4 = 2.5e-9, one-step RMS √0.125.
    #[test]
    fn q_from_residuals_with_floor_matches_hand_computation() {
        let data = faer::mat![[1.0], [2.0], [1.0], [2.0], [2.0]];
        let fitted = ReducedModel::fit(data.as_ref(), &exact(ModelKind::Linear)).unwrap();
        assert!((fitted.a[(0, 0)] + 0.5).abs() < 1e-12);
        assert!((fitted.c[0] - 2.5).abs() < 1e-12);
        assert!((fitted.q[(0, 0)] - (0.125 + 2.5e-9)).abs() < 1e-15);
        assert!((fitted.report.one_step_rms - 0.125f64.sqrt()).abs() < 1e-12);
        // Noise-free data: the residuals vanish and the floor alone keeps Q positive definite.
        let alt = faer::mat![[1.0], [0.0], [1.0], [0.0], [1.0]];
        let fitted = ReducedModel::fit(alt.as_ref(), &exact(ModelKind::Linear)).unwrap();
        assert!(
            (fitted.q[(0, 0)] - 1e-9 * 0.5).abs() < 1e-20,
            "{}",
            fitted.q[(0, 0)]
        );
    }

    /// Data from a_{t+1} = 0.923 a_t + a_t², started just above its unstable fixed point 0.077:
    /// the exact quadratic fit runs away in free runs, so with a tiny base weight the fit raises
    /// the quadratic Tikhonov weight tenfold until free runs stay bounded and reports it; with
    /// weight 0 it cannot raise it and says so.
    #[test]
    fn quadratic_weight_is_escalated_until_bounded() {
        let n = 280;
        let mut data = Mat::<f64>::zeros(n, 2);
        let mut x = 0.077 + 1e-10;
        for t in 0..n {
            data[(t, 0)] = x;
            data[(t, 1)] = 0.5 * (0.3 * t as f64).sin();
            x = 0.923 * x + x * x;
        }
        let base = 1e-6;
        let settings = ModelSettings {
            model: ModelKind::Quadratic,
            tikhonov: base,
            ..ModelSettings::default()
        };
        let fitted = ReducedModel::fit(data.as_ref(), &settings).unwrap();
        let used = fitted.report.quadratic_tikhonov.unwrap();
        let raises = (used / base).log10().round();
        assert!(raises >= 1.0, "weight {used:e} was not raised");
        assert!((used / base - 10f64.powf(raises)).abs() < 1e-6 * used / base);
        let zero = ReducedModel::fit(data.as_ref(), &exact(ModelKind::Quadratic));
        match zero {
            Err(TwinError::UnstableModel { message, .. }) => {
                assert!(message.contains("no Tikhonov regularisation"), "{message}");
                assert!(!message.contains("0.0e0"), "{message}");
            }
            other => panic!(
                "expected an unstable model, got {:?}",
                other.map(|m| m.report)
            ),
        }
    }

    #[test]
    fn split_refuses_short_records() {
        assert!(TimeSplit::new(100, 0.7, 5).is_ok());
        let err = TimeSplit::new(8, 0.7, 5).unwrap_err();
        assert!(err.to_string().contains("too few snapshots"), "{err}");
        assert!(TimeSplit::new(100, 0.99, 5).is_err());
    }
}
