//! Monte Carlo scoring of one layout: [`prepare`] does the per-layout work once (time split,
//! model fit, row-major copies of the truth), [`run_monte_carlo`] builds the shared gains for a
//! setting and runs R independent twin experiments in parallel with rayon.
//!
//! Determinism: run `i` draws from ChaCha8 generators seeded by a splitmix64 mix of (master
//! seed, FNV-1a hash of the layout id, setting id) with stream `4 i + purpose` (background,
//! readings, ensemble), so a run's numbers do not depend on which thread ran it; per-run
//! results are collected in run order and reduced sequentially, so summaries are bit-identical
//! for any thread count. A run that diverges reports the step and reason and is left out of
//! the summaries (counted in `n_diverged`).

use std::sync::atomic::{AtomicUsize, Ordering};

use faer::Mat;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use super::batch::{fused_ops, gain_block, RUN_BLOCK};
use super::dense::row_major;
use super::enkf::{run_enkf, spread_trace, EnkfSettings};
use super::kalman::{
    kalman_gains, oi_gain, run_with_gains, static_gains, Divergence, GainSequence, NoisyReadings,
};
use super::metrics::{field_rmse, Summary};
use super::nudge::{crossing, nudging_gain, tune_strength};
use super::schedule::{Schedule, SensorRows};
use super::{
    FilterKind, ModelSettings, NudgeGain, ReducedModel, RunSettings, TimeSplit, TwinError,
};

/// Plain-matrix inputs of a twin experiment for one layout.
#[derive(Debug, Clone)]
pub struct TwinCase {
    /// Modal coefficients of every snapshot, `n_snapshots × n_modes` (truth projection).
    pub coeffs: Mat<f64>,
    /// Weighted squared truncation residual `‖x_t − mean − Φ a_t‖²_W` per snapshot.
    pub residual_sq: Vec<f64>,
    /// Noise-free readings of the full truth field, row-major `n_snapshots × n_rows`.
    pub truth_readings: Vec<f64>,
    pub rows: SensorRows,
    /// POD energy (coefficient variance) of each kept mode.
    pub energies: Vec<f64>,
    /// `Σ_p w_p · n_channels`, the RMSE normaliser.
    pub field_norm: f64,
    /// Snapshot time step, seconds.
    pub dt_s: f64,
}

impl TwinCase {
    pub fn n_snapshots(&self) -> usize {
        self.coeffs.nrows()
    }

    pub fn n_modes(&self) -> usize {
        self.coeffs.ncols()
    }
}

/// Per-layout work done once: the split, the model and flat copies for the run loops.
#[derive(Debug, Clone)]
pub struct Prepared {
    pub case: TwinCase,
    pub split: TimeSplit,
    pub model: ReducedModel,
    pub layout_id: String,
    pub(super) layout_hash: u64,
    pub(super) h_rm: Vec<f64>,
    coeffs_rm: Vec<f64>,
}

/// Splits the record and fits the model of `settings` on the training span.
pub fn prepare(
    case: TwinCase,
    layout_id: &str,
    settings: &ModelSettings,
) -> Result<Prepared, TwinError> {
    let split = TimeSplit::new(case.n_snapshots(), settings.train_fraction, case.n_modes())?;
    let model = ReducedModel::fit(case.coeffs.as_ref().subrows(0, split.n_train), settings)?;
    Ok(prepare_with_model(case, layout_id, split, model))
}

/// As [`prepare`] with a model fitted elsewhere (shared by the layouts of a sweep).
#[track_caller]
pub fn prepare_with_model(
    case: TwinCase,
    layout_id: &str,
    split: TimeSplit,
    model: ReducedModel,
) -> Prepared {
    assert_eq!(split.n_train + split.n_test, case.n_snapshots());
    assert_eq!(model.n_modes, case.n_modes());
    assert_eq!(
        case.truth_readings.len(),
        case.n_snapshots() * case.rows.n_rows()
    );
    assert_eq!(case.residual_sq.len(), case.n_snapshots());
    let h_rm = row_major(case.rows.h.as_ref());
    let coeffs_rm = row_major(case.coeffs.as_ref());
    Prepared {
        layout_hash: fnv1a(layout_id.as_bytes()),
        layout_id: layout_id.to_string(),
        case,
        split,
        model,
        h_rm,
        coeffs_rm,
    }
}

/// What one run found.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    pub run_idx: usize,
    /// Field RMSE of the filter at each test step (NaN after a divergence).
    pub rmse: Vec<f64>,
    /// Field RMSE of the free run from the same background.
    pub free_rmse: Vec<f64>,
    /// Modal part of the error only, `sqrt(‖a − â‖² / norm)`, to set beside the spread.
    pub modal_rmse: Vec<f64>,
    /// `sqrt(tr P / norm)` of the filter's own covariance (Kalman, EnKF), NaN otherwise.
    pub spread: Vec<f64>,
    pub mean_rmse: f64,
    pub final_rmse: f64,
    pub free_mean_rmse: f64,
    /// `mean_rmse / free_mean_rmse`.
    pub ratio_to_free: f64,
    pub mean_spread: f64,
    pub mean_modal_rmse: f64,
    pub divergence: Option<Divergence>,
}

/// Mean and spread over the runs at one test step.
#[derive(Debug, Clone, Copy)]
pub struct StepStats {
    pub step: usize,
    /// Time since the start of the test span, seconds.
    pub time_s: f64,
    pub mean_rmse: f64,
    pub std_rmse: f64,
    pub free_mean_rmse: f64,
    pub free_std_rmse: f64,
    pub mean_modal_rmse: f64,
    pub mean_spread: f64,
    /// `sqrt(residual_sq / norm)`: the floor no filter on this basis can beat.
    pub truncation_rmse: f64,
    /// Runs that had not diverged at this step.
    pub n_runs_ok: usize,
}

/// The score of one layout under one setting.
#[derive(Debug, Clone)]
pub struct ScoreResult {
    pub layout_id: String,
    pub settings: RunSettings,
    pub model_report: super::ModelReport,
    pub split: TimeSplit,
    pub n_rows: usize,
    /// Steps between readings of each sensor row.
    pub every_row: Vec<usize>,
    /// Nudging strength used (set or tuned), for the nudge filter.
    pub nudge_strength: Option<f64>,
    /// Per-mode standard deviation of the background perturbation, coefficient units.
    pub background_modal_sd: f64,
    pub curves: Vec<StepStats>,
    pub runs: Vec<RunOutcome>,
    pub n_diverged: usize,
    pub mean_rmse: Summary,
    pub final_rmse: Summary,
    pub free_mean_rmse: Summary,
    pub ratio_to_free: Summary,
    pub mean_spread: Summary,
    /// Time-mean modal error `sqrt(‖a − â‖² / norm)`: what the spread estimates.
    pub mean_modal_rmse: Summary,
    /// Time-mean truncation floor over the test span.
    pub truncation_rmse: f64,
}

/// The id that seeds a layout's random streams, derived from its sensors alone: the
/// `candidate:kind` pairs, sorted, joined with `;`. The name of a layout file changes nothing,
/// and `crowsnest score` and a sweep cell that score the same sensors under the same setting
/// draw the same numbers.
pub fn layout_id<C: AsRef<str>, K: AsRef<str>>(
    sensors: impl IntoIterator<Item = (C, K)>,
) -> String {
    let mut pairs: Vec<String> = sensors
        .into_iter()
        .map(|(c, k)| format!("{}:{}", c.as_ref(), k.as_ref()))
        .collect();
    pairs.sort();
    pairs.join(";")
}

/// 64-bit FNV-1a (Fowler–Noll–Vo), a fixed hash that does not change between Rust versions.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// splitmix64 finaliser (Steele, Lea & Flood 2014), to mix seed parts.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

pub(super) const STREAM_BACKGROUND: u64 = 0;
pub(super) const STREAM_READINGS: u64 = 1;
const STREAM_ENSEMBLE: u64 = 2;

/// The generator of every run stream: ChaCha with 8 rounds (Bernstein 2008; the 8-round
/// variant is rand's fast choice and passes the statistical batteries), a counter-based
/// stream cipher whose `set_stream` gives each (run, purpose) its own independent stream.
pub type RunRng = rand_chacha::ChaCha8Rng;

/// The generator for `purpose` of run `run_idx`.
pub fn run_rng(seed: u64, layout_hash: u64, setting_id: u64, run_idx: u64, purpose: u64) -> RunRng {
    let key = mix(mix(mix(seed) ^ layout_hash) ^ setting_id);
    let mut rng = RunRng::seed_from_u64(key);
    rng.set_stream(run_idx.wrapping_mul(4).wrapping_add(purpose));
    rng
}

/// A contiguous span of the record (training or test) as the run loops see it.
pub(super) struct Span<'a> {
    pub(super) coeffs_rm: &'a [f64],
    pub(super) residual_sq: &'a [f64],
    pub(super) readings: &'a [f64],
    pub(super) n_steps: usize,
}

/// Everything shared by the runs of one setting.
pub(super) struct Shared<'a> {
    pub(super) prep: &'a Prepared,
    pub(super) settings: &'a RunSettings,
    pub(super) schedule: Schedule,
    pub(super) noise_sd: Vec<f64>,
    pub(super) noise_var: Vec<f64>,
    pub(super) gains: Option<GainSequence>,
    pub(super) background_sd: f64,
}

impl Prepared {
    fn span(&self, start: usize, n_steps: usize) -> Span<'_> {
        let r = self.case.n_modes();
        let p = self.case.rows.n_rows();
        Span {
            coeffs_rm: &self.coeffs_rm[start * r..(start + n_steps) * r],
            residual_sq: &self.case.residual_sq[start..start + n_steps],
            readings: &self.case.truth_readings[start * p..(start + n_steps) * p],
            n_steps,
        }
    }

    fn test_span(&self) -> Span<'_> {
        self.span(self.split.n_train, self.split.n_test)
    }
}

/// Runs `settings.n_runs` twin experiments of the prepared layout; `progress(done, total)` is
/// called after each finished run (from rayon's threads).
pub fn run_monte_carlo(
    prep: &Prepared,
    settings: &RunSettings,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<ScoreResult, TwinError> {
    if settings.n_runs == 0 {
        return Err(TwinError::BadSetting {
            name: "runs",
            message: "found 0, expected at least 1 Monte Carlo run".into(),
        });
    }
    if settings.filter == FilterKind::Enkf && settings.n_ensemble < 2 {
        return Err(TwinError::BadSetting {
            name: "ensemble",
            message: format!("found {}, expected at least 2 members", settings.n_ensemble),
        });
    }
    if settings.filter == FilterKind::Kalman && prep.model.f.is_some() {
        return Err(TwinError::BadSetting {
            name: "model",
            message: "the Kalman filter needs the linear model; use the enkf filter for the quadratic model".into(),
        });
    }
    let (shared, nudge_strength) = shared_for(prep, settings)?;
    let n_runs = settings.n_runs;
    let done = AtomicUsize::new(0);
    // Runs go in fixed blocks of RUN_BLOCK (by run index, not by thread): gain filters advance
    // a whole block with small matrix products; the EnKF runs one by one.
    let block = if settings.filter == FilterKind::Enkf {
        1
    } else {
        RUN_BLOCK
    };
    let n_blocks = n_runs.div_ceil(block);
    let test_span = prep.test_span();
    let fused = if settings.filter == FilterKind::Enkf {
        None
    } else {
        fused_ops(&shared, &test_span)
    };
    let blocks: Vec<Vec<RunOutcome>> = (0..n_blocks)
        .into_par_iter()
        .map(|block_idx| {
            let runs = block_idx * block..((block_idx + 1) * block).min(n_runs);
            let span = prep.test_span();
            let out: Vec<RunOutcome> = if settings.filter == FilterKind::Enkf {
                runs.map(|run_idx| one_run(&shared, &span, run_idx))
                    .collect()
            } else {
                gain_block(&shared, &span, fused.as_ref(), runs)
            };
            progress(
                done.fetch_add(out.len(), Ordering::Relaxed) + out.len(),
                n_runs,
            );
            out
        })
        .collect();
    let runs: Vec<RunOutcome> = blocks.into_iter().flatten().collect();
    Ok(summarise(&shared, runs, nudge_strength))
}

/// The per-setting work shared by every run: schedule, noise levels, background spread, gains.
pub(super) fn shared_for<'a>(
    prep: &'a Prepared,
    settings: &'a RunSettings,
) -> Result<(Shared<'a>, Option<f64>), TwinError> {
    let case = &prep.case;
    let n_modes = case.n_modes();
    let schedule = Schedule::new(&case.rows, case.dt_s, prep.split.n_test, settings.every)?;
    let noise_sd: Vec<f64> = case
        .rows
        .noise_sd
        .iter()
        .map(|s| s * settings.noise_scale)
        .collect();
    let noise_var: Vec<f64> = noise_sd.iter().map(|s| s * s).collect();
    // Background: δ ~ N(0, s² I) in modal coordinates gives E‖Φδ‖²_W = r s², so a field RMSE
    // of σ_b needs s = σ_b · sqrt(Σ_p w_p · n_channels / r).
    let background_sd = settings.background_sd * (case.field_norm / n_modes as f64).sqrt();
    let mut nudge_strength = None;
    let gains = match settings.filter {
        FilterKind::Kalman => {
            let p0 =
                Mat::<f64>::identity(n_modes, n_modes) * faer::Scale(background_sd * background_sd);
            Some(kalman_gains(
                &prep.model,
                case.rows.h.as_ref(),
                &noise_var,
                &schedule,
                p0.as_ref(),
                false,
            ))
        }
        FilterKind::Oi => {
            let b = Mat::from_fn(n_modes, n_modes, |i, j| {
                if i == j {
                    settings.oi_scale * case.energies[i]
                } else {
                    0.0
                }
            });
            Some(static_gains(
                n_modes,
                &schedule,
                "optimal interpolation",
                |rows| oi_gain(b.as_ref(), case.rows.h.as_ref(), &noise_var, rows),
            ))
        }
        FilterKind::Nudge => {
            let strength = match settings.nudge_gain {
                NudgeGain::Fixed(g) => g,
                NudgeGain::Tuned => tune_nudging(prep, settings)?.strength,
            };
            nudge_strength = Some(strength);
            Some(static_gains(n_modes, &schedule, "nudging", |rows| {
                nudging_gain(case.rows.h.as_ref(), &noise_var, rows, strength)
            }))
        }
        FilterKind::Enkf | FilterKind::Free => None,
    };
    let shared = Shared {
        prep,
        settings,
        schedule,
        noise_sd,
        noise_var,
        gains,
        background_sd,
    };
    Ok((shared, nudge_strength))
}

/// Field RMSE of an estimate at `step` of `span`.
pub(super) fn step_rmse(
    span: &Span<'_>,
    step: usize,
    estimate: &[f64],
    field_norm: f64,
) -> (f64, f64) {
    let r = estimate.len();
    let truth = &span.coeffs_rm[step * r..(step + 1) * r];
    let modal: f64 = truth
        .iter()
        .zip(estimate)
        .map(|(a, b)| (a - b) * (a - b))
        .sum();
    (
        field_rmse(modal, span.residual_sq[step], field_norm),
        (modal / field_norm).sqrt(),
    )
}

pub(super) fn background(shared: &Shared<'_>, span: &Span<'_>, rng: &mut RunRng) -> Vec<f64> {
    let r = shared.prep.case.n_modes();
    (0..r)
        .map(|j| {
            span.coeffs_rm[j]
                + shared.background_sd
                    * <StandardNormal as Distribution<f64>>::sample(&StandardNormal, rng)
        })
        .collect::<Vec<f64>>()
}

/// One run on its own (the EnKF path, and the reference the batched gain filters are tested
/// against).
pub(super) fn one_run(shared: &Shared<'_>, span: &Span<'_>, run_idx: usize) -> RunOutcome {
    let prep = shared.prep;
    let s = shared.settings;
    let norm = prep.case.field_norm;
    let n_steps = span.n_steps;
    let rng_for = |purpose| {
        run_rng(
            s.seed,
            prep.layout_hash,
            s.setting_id,
            run_idx as u64,
            purpose,
        )
    };
    let a0 = background(shared, span, &mut rng_for(STREAM_BACKGROUND));

    let free_rmse = free_run(&prep.model, span, &a0, norm);
    let mut rmse = vec![f64::NAN; n_steps];
    let mut modal_rmse = vec![f64::NAN; n_steps];
    let mut spread = vec![f64::NAN; n_steps];
    let mut readings = NoisyReadings {
        truth: span.readings,
        n_rows: prep.case.rows.n_rows(),
        noise_sd: &shared.noise_sd,
        rng: rng_for(STREAM_READINGS),
    };
    let result = match (s.filter, &shared.gains) {
        (FilterKind::Free, _) => {
            rmse.copy_from_slice(&free_rmse);
            let mut state = a0.clone();
            let mut next = vec![0.0; a0.len()];
            for (step, m) in modal_rmse.iter_mut().enumerate() {
                if step > 0 {
                    prep.model.step(&state, &mut next);
                    std::mem::swap(&mut state, &mut next);
                }
                *m = step_rmse(span, step, &state, norm).1;
            }
            Ok(())
        }
        (FilterKind::Enkf, _) => {
            let enkf = EnkfSettings {
                n_ensemble: s.n_ensemble,
                inflation: s.inflation,
                initial_sd: shared.background_sd,
            };
            let mut member_rng = rng_for(STREAM_ENSEMBLE);
            run_enkf(
                &prep.model,
                &prep.h_rm,
                &prep.case.rows.offset,
                &shared.noise_var,
                &shared.schedule,
                &enkf,
                &mut readings,
                &mut member_rng,
                &a0,
                |step, mean, members| {
                    (rmse[step], modal_rmse[step]) = step_rmse(span, step, mean, norm);
                    spread[step] = (spread_trace(members, mean) / norm).sqrt();
                },
            )
        }
        (_, Some(gains)) => run_with_gains(
            &prep.model,
            &prep.h_rm,
            &prep.case.rows.offset,
            &shared.schedule,
            gains,
            &mut readings,
            &a0,
            |step, estimate| {
                (rmse[step], modal_rmse[step]) = step_rmse(span, step, estimate, norm);
                if let Some(tr) = &gains.posterior_trace {
                    spread[step] = (tr[step] / norm).sqrt();
                }
            },
        ),
        (_, None) => unreachable!("gain filters always have gains"),
    };
    finish_run(run_idx, rmse, free_rmse, modal_rmse, spread, result.err())
}

/// Assembles a run's outcome from its per-step curves.
pub(super) fn finish_run(
    run_idx: usize,
    rmse: Vec<f64>,
    free_rmse: Vec<f64>,
    modal_rmse: Vec<f64>,
    spread: Vec<f64>,
    divergence: Option<Divergence>,
) -> RunOutcome {
    let n_steps = rmse.len();
    let time_mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (mean_rmse, final_rmse) = if divergence.is_some() {
        (f64::NAN, f64::NAN)
    } else {
        (time_mean(&rmse), rmse[n_steps - 1])
    };
    let free_mean_rmse = time_mean(&free_rmse);
    RunOutcome {
        run_idx,
        mean_spread: if divergence.is_some() {
            f64::NAN
        } else {
            time_mean(&spread)
        },
        mean_modal_rmse: if divergence.is_some() {
            f64::NAN
        } else {
            time_mean(&modal_rmse)
        },
        rmse,
        free_rmse,
        modal_rmse,
        spread,
        mean_rmse,
        final_rmse,
        free_mean_rmse,
        ratio_to_free: mean_rmse / free_mean_rmse,
        divergence,
    }
}

/// Field RMSE of the model run without readings from `a0` (NaN once it stops being finite).
pub(super) fn free_run(model: &ReducedModel, span: &Span<'_>, a0: &[f64], norm: f64) -> Vec<f64> {
    let mut state = a0.to_vec();
    let mut next = vec![0.0; a0.len()];
    let mut quad = vec![0.0; super::model::n_quadratic(a0.len())];
    (0..span.n_steps)
        .map(|step| {
            if step > 0 {
                model.step_with(&state, &mut quad, &mut next);
                std::mem::swap(&mut state, &mut next);
            }
            let e = step_rmse(span, step, &state, norm).0;
            if e.is_finite() {
                e
            } else {
                f64::NAN
            }
        })
        .collect()
}

/// Runs of the training span the nudging strength is tuned on: one full block, on streams no
/// scoring run uses, so the objective is a smooth, deterministic function of the strength.
pub const N_TUNING_RUNS: usize = RUN_BLOCK;

/// First run index of the tuning streams (far above any scoring run).
const FIRST_TUNING_RUN: usize = (u32::MAX / 2) as usize;

/// Score on the **training** span of nudging at `strength` (the objective the tuned strength
/// minimises): the mean over runs of the time-mean field RMSE divided by the free run's from
/// the same start, so a calm window and a stormy one weigh alike (the error a noisy reading
/// adds is the same in both, the error it removes is not); `INFINITY` when a run diverges.
pub fn nudging_training_score(
    prep: &Prepared,
    settings: &RunSettings,
    strength: f64,
) -> Result<f64, TwinError> {
    Ok(mean(&nudging_window_scores(prep, settings, strength)?))
}

/// [`nudging_training_score`] per training window (mean over the window's runs). Windows as
/// long as the test span (so the objective weighs the start-up from the background as the
/// scoring runs do) start at up to [`MAX_TUNING_WINDOWS`] points spread evenly over the
/// training span; in each, [`N_TUNING_RUNS`] runs start from the window's first state plus the
/// background perturbation and read its truth through the layout's sensors with fresh noise,
/// as the scoring runs do on the test span. A window with a diverged run scores `INFINITY`.
pub fn nudging_window_scores(
    prep: &Prepared,
    settings: &RunSettings,
    strength: f64,
) -> Result<Vec<f64>, TwinError> {
    Ok(window_means(&nudging_tuning_runs(
        prep, settings, strength,
    )?))
}

/// Mean score of each window's runs.
fn window_means(runs: &[Vec<f64>]) -> Vec<f64> {
    runs.iter().map(|w| mean(w)).collect()
}

/// Ratio to the free run of every tuning run, per training window (see
/// [`nudging_window_scores`]); a window with a diverged run holds one `INFINITY`.
fn nudging_tuning_runs(
    prep: &Prepared,
    settings: &RunSettings,
    strength: f64,
) -> Result<Vec<Vec<f64>>, TwinError> {
    let fixed = RunSettings {
        nudge_gain: NudgeGain::Fixed(strength),
        ..settings.clone()
    };
    let (mut shared, _) = shared_for(prep, &fixed)?;
    let n_train = prep.split.n_train;
    let len = prep.split.n_test.min(n_train);
    let slack = n_train - len;
    let n_windows = (slack + 1).min(MAX_TUNING_WINDOWS);
    shared.schedule = Schedule::new(&prep.case.rows, prep.case.dt_s, len, settings.every)?;
    let h = prep.case.rows.h.as_ref();
    let noise_var = shared.noise_var.clone();
    shared.gains = Some(static_gains(
        prep.case.n_modes(),
        &shared.schedule,
        "nudging",
        |rows| nudging_gain(h, &noise_var, rows, strength),
    ));
    let mut scores = Vec::with_capacity(n_windows);
    for w in 0..n_windows {
        let start = if n_windows > 1 {
            w * slack / (n_windows - 1)
        } else {
            0
        };
        let span = prep.span(start, len);
        let fused = fused_ops(&shared, &span);
        let first = FIRST_TUNING_RUN + w * N_TUNING_RUNS;
        let runs = gain_block(&shared, &span, fused.as_ref(), first..first + N_TUNING_RUNS);
        // The free run does not depend on the strength: a run whose free run blew up drops
        // out for every strength alike. Only a diverged nudged run makes the window infinite.
        let usable: Vec<&RunOutcome> = runs
            .iter()
            .filter(|r| r.free_mean_rmse.is_finite() && r.free_mean_rmse > 0.0)
            .collect();
        if usable.is_empty() {
            continue;
        }
        let diverged = usable
            .iter()
            .any(|r| r.divergence.is_some() || !r.ratio_to_free.is_finite());
        scores.push(if diverged {
            vec![f64::INFINITY]
        } else {
            usable.iter().map(|r| r.ratio_to_free).collect()
        });
    }
    Ok(scores)
}

/// Most training windows the nudging strength is tuned on.
pub const MAX_TUNING_WINDOWS: usize = 8;

/// Mean of tuning scores; none at all (every free run blew up) scores as the worst.
fn mean(values: &[f64]) -> f64 {
    if values.is_empty() {
        return f64::INFINITY;
    }
    values.iter().sum::<f64>() / values.len() as f64
}

/// Standard error of the mean of `values` (0 for fewer than two or any not finite).
fn standard_error(values: &[f64]) -> f64 {
    let n = values.len();
    if n < 2 || values.iter().any(|v| !v.is_finite()) {
        return 0.0;
    }
    let m = mean(values);
    let var = values.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (n - 1) as f64;
    (var / n as f64).sqrt()
}

/// How the nudging strength was tuned: the minimiser of the training score, and the strength
/// used — the weakest whose score lies within one standard error (over the training windows)
/// of that minimum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NudgeTuning {
    pub best_strength: f64,
    pub best_score: f64,
    pub standard_error: f64,
    pub strength: f64,
    pub score: f64,
}

/// Tunes the nudging strength on the training span. First the minimiser of
/// [`nudging_training_score`]: the best of a log-spaced grid over
/// [`super::nudge::MIN_TUNED_STRENGTH`, 1], refined by Brent's method in log γ between its
/// grid neighbours (kept only when it scores better). Then the one-standard-error rule
/// (Breiman, Friedman, Olshen & Stone 1984, *Classification and Regression Trees*, §3.4.3;
/// Hastie, Tibshirani & Friedman 2009, *The Elements of Statistical Learning*, §7.10): the
/// weakest strength whose score is within one standard error of the minimum, found by Brent's
/// root finder in log γ. Stronger nudging pulls harder on noisy readings, and the training
/// windows cannot show every calm spell the test span may hold, where that pull costs more
/// than it gains; the rule leans towards the weaker gain the training data cannot tell apart.
pub fn tune_nudging(prep: &Prepared, settings: &RunSettings) -> Result<NudgeTuning, TwinError> {
    let grid = super::nudge::strength_grid();
    let mut grid_runs = Vec::with_capacity(grid.len());
    for &g in &grid {
        grid_runs.push(nudging_tuning_runs(prep, settings, g)?);
    }
    let scores: Vec<f64> = grid_runs.iter().map(|r| mean(&window_means(r))).collect();
    let best = (0..grid.len())
        .min_by(|&i, &j| scores[i].total_cmp(&scores[j]).then(i.cmp(&j)))
        .unwrap_or(0);
    let lo = grid[best.saturating_sub(1)];
    let hi = grid[(best + 1).min(grid.len() - 1)];
    let objective = |log_g: f64| -> f64 {
        nudging_training_score(prep, settings, log_g.exp()).unwrap_or(f64::INFINITY)
    };
    let refined = tune_strength(&objective, lo.ln(), hi.ln())?.exp();
    let refined_runs = nudging_tuning_runs(prep, settings, refined)?;
    let (best_strength, best_runs) = if mean(&window_means(&refined_runs)) < scores[best] {
        (refined, refined_runs)
    } else {
        (grid[best], grid_runs.swap_remove(best))
    };
    let best_windows = window_means(&best_runs);
    let best_score = mean(&best_windows);
    // Over the windows when there are several (their spread holds the change of conditions
    // along the record), else over the runs of the one window. Windows overlap when the
    // training span is short, so they count as only as many as fit side by side.
    let len = prep.split.n_test.min(prep.split.n_train).max(1);
    let side_by_side = (prep.split.n_train / len).max(1);
    let se = match best_runs.as_slice() {
        [only] => standard_error(only),
        _ => {
            standard_error(&best_windows)
                * (best_windows.len() as f64 / side_by_side as f64)
                    .max(1.0)
                    .sqrt()
        }
    };
    let threshold = best_score + se;
    // The weakest grid strength inside the band, else the minimiser itself; the crossing
    // lies between it and the grid strength below it (if any).
    let inside = (0..grid.len()).find(|&i| grid[i] <= best_strength && scores[i] <= threshold);
    let (mut strength, mut score) = match inside {
        Some(i) => (grid[i], scores[i]),
        None => (best_strength, best_score),
    };
    let below = grid.iter().copied().rev().find(|&g| g < strength);
    if let (Some(below), true) = (below, se > 0.0) {
        let above = strength;
        let excess = |log_g: f64| -> f64 {
            nudging_training_score(prep, settings, log_g.exp()).unwrap_or(f64::INFINITY) - threshold
        };
        // The crossing to Brent's tolerance (its score may exceed the band by that much).
        if let Some(root) = crossing(&excess, below.ln(), above.ln())? {
            let g = root.exp();
            let s = nudging_training_score(prep, settings, g)?;
            if s.is_finite() {
                (strength, score) = (g, s);
            }
        }
    }
    Ok(NudgeTuning {
        best_strength,
        best_score,
        standard_error: se,
        strength,
        score,
    })
}

fn summarise(
    shared: &Shared<'_>,
    runs: Vec<RunOutcome>,
    nudge_strength: Option<f64>,
) -> ScoreResult {
    let prep = shared.prep;
    let span = prep.test_span();
    let n_steps = span.n_steps;
    let norm = prep.case.field_norm;
    let ok: Vec<&RunOutcome> = runs.iter().filter(|r| r.divergence.is_none()).collect();
    // Per-step statistics over the runs, each run's curve read once in order (runs outer,
    // steps inner) and summed in run order, so the numbers do not depend on the threads.
    let rmse = StepMoments::of(&runs, |r| &r.rmse, n_steps);
    let free = StepMoments::of(&runs, |r| &r.free_rmse, n_steps);
    let modal = StepMoments::of(&runs, |r| &r.modal_rmse, n_steps);
    let spread = StepMoments::of(&runs, |r| &r.spread, n_steps);
    let curves = (0..n_steps)
        .map(|step| StepStats {
            step,
            time_s: step as f64 * prep.case.dt_s,
            mean_rmse: rmse.mean[step],
            std_rmse: rmse.std[step],
            free_mean_rmse: free.mean[step],
            free_std_rmse: free.std[step],
            mean_modal_rmse: modal.mean[step],
            mean_spread: spread.mean[step],
            truncation_rmse: (span.residual_sq[step] / norm).sqrt(),
            n_runs_ok: rmse.n[step],
        })
        .collect::<Vec<_>>();
    let pick = |f: &dyn Fn(&RunOutcome) -> f64| -> Vec<f64> { ok.iter().map(|r| f(r)).collect() };
    let truncation_rmse = curves.iter().map(|c| c.truncation_rmse).sum::<f64>() / n_steps as f64;
    ScoreResult {
        layout_id: prep.layout_id.clone(),
        settings: shared.settings.clone(),
        model_report: prep.model.report.clone(),
        split: prep.split,
        n_rows: prep.case.rows.n_rows(),
        every_row: shared.schedule.every_row.clone(),
        nudge_strength,
        background_modal_sd: shared.background_sd,
        curves,
        n_diverged: runs.len() - ok.len(),
        mean_rmse: Summary::of(&pick(&|r| r.mean_rmse)),
        final_rmse: Summary::of(&pick(&|r| r.final_rmse)),
        free_mean_rmse: Summary::of(&runs.iter().map(|r| r.free_mean_rmse).collect::<Vec<_>>()),
        ratio_to_free: Summary::of(&pick(&|r| r.ratio_to_free)),
        mean_spread: Summary::of(&pick(&|r| r.mean_spread)),
        mean_modal_rmse: Summary::of(&pick(&|r| r.mean_modal_rmse)),
        truncation_rmse,
        runs,
    }
}

/// Mean and sample standard deviation (n − 1) at each step over the finite values of the
/// runs' curves.
struct StepMoments {
    n: Vec<usize>,
    mean: Vec<f64>,
    std: Vec<f64>,
}

impl StepMoments {
    fn of(runs: &[RunOutcome], curve: impl Fn(&RunOutcome) -> &Vec<f64>, n_steps: usize) -> Self {
        let mut n = vec![0usize; n_steps];
        let mut sum = vec![0.0; n_steps];
        for r in runs {
            for ((v, s), k) in curve(r).iter().zip(&mut sum).zip(&mut n) {
                if v.is_finite() {
                    *s += v;
                    *k += 1;
                }
            }
        }
        let mean: Vec<f64> = sum
            .iter()
            .zip(&n)
            .map(|(&s, &k)| if k == 0 { f64::NAN } else { s / k as f64 })
            .collect();
        let mut sq = vec![0.0; n_steps];
        for r in runs {
            for ((v, s), m) in curve(r).iter().zip(&mut sq).zip(&mean) {
                if v.is_finite() {
                    *s += (v - m) * (v - m);
                }
            }
        }
        let std = sq
            .iter()
            .zip(&n)
            .map(|(&s, &k)| match k {
                0 => f64::NAN,
                1 => 0.0,
                _ => (s / (k - 1) as f64).sqrt(),
            })
            .collect();
        Self { n, mean, std }
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::twin::testcase::{synthetic_case, SyntheticSpec};
    use crate::twin::TwinSettings;

    /// The batched block path gives the one-run path's numbers (same streams, same order of
    /// draws; only the summation order of the small products differs).
    #[test]
    fn block_runs_match_single_runs() {
        let case = synthetic_case(&SyntheticSpec {
            interval_s: 2.0,
            ..SyntheticSpec::default()
        });
        for filter in [
            FilterKind::Kalman,
            FilterKind::Oi,
            FilterKind::Nudge,
            FilterKind::Free,
        ] {
            let s = TwinSettings::new(filter)
                .with_runs(5)
                .unwrap()
                .with_nudge_gain(NudgeGain::Fixed(0.5))
                .unwrap();
            let prep = prepare(case.clone(), "x", &s.model).unwrap();
            let (shared, _) = shared_for(&prep, &s.run).unwrap();
            let span = prep.test_span();
            let fused = fused_ops(&shared, &span);
            let block = gain_block(&shared, &span, fused.as_ref(), 0..5);
            for (run_idx, b) in block.iter().enumerate() {
                let single = one_run(&shared, &span, run_idx);
                for (x, y) in b.rmse.iter().zip(&single.rmse) {
                    assert!(
                        (x - y).abs() <= 1e-12 * (1.0 + y.abs()),
                        "{filter:?} run {run_idx}: {x} vs {y}"
                    );
                }
                assert!((b.free_mean_rmse - single.free_mean_rmse).abs() < 1e-12);
            }
        }
    }
}
