//! Batched runs of the gain filters (Kalman, OI, nudging) and the free run: a block of
//! [`RUN_BLOCK`] Monte Carlo runs advances together as the columns of a matrix, so each step is
//! one or two small matrix products (faer `matmul`, sequential) instead of per-run vector loops.
//! Blocks are fixed by run index and padded to the full width, so a run's numbers depend neither
//! on the thread count nor on the number of runs. Each run keeps its own random streams, drawn
//! in the same order as in the one-run path ([`super::montecarlo`]), which a test checks the
//! block path against.
//!
//! On the linear model the forecast and the analysis fold into one product per step
//! ([`FusedOps`]): with `a⁻ = A a + c` and `a⁺ = a⁻ + K (z − offset − H a⁻)`, `z = y + σ ε`
//! (`y` the noise-free truth reading, `ε` standard normal),
//! `a⁺ = [(I − K H) A | K diag σ] [a; ε] + (I − K H) c + K (y − offset)`. The operator depends
//! only on the gain and the last term only on the step, so both are computed once per setting
//! and every run only multiplies its state stacked over its fresh noise. The modal error that
//! the RMSE needs is taken column by column from the result, with no extra pass.

use std::collections::HashMap;
use std::ops::Range;

use faer::linalg::matmul::matmul;
use faer::reborrow::{Reborrow, ReborrowMut};
use faer::{Accum, Mat, MatRef, Par};
use rand_distr::{Distribution, StandardNormal};

use super::dense::col_major;
use super::kalman::Divergence;
use super::metrics::field_rmse;
use super::montecarlo::{
    background, finish_run, run_rng, step_rmse, RunOutcome, Shared, Span, STREAM_BACKGROUND,
    STREAM_READINGS,
};
use super::ReducedModel;

/// Runs advanced together by the gain filters.
pub const RUN_BLOCK: usize = 32;

/// `x ← model(x)` for every column, `tmp` as scratch of the same shape.
fn advance(model: &ReducedModel, x: &mut Mat<f64>, tmp: &mut Mat<f64>, quad: &mut [f64]) {
    if model.f.is_none() {
        matmul(
            tmp.as_mut(),
            Accum::Replace,
            model.a.as_ref(),
            x.as_ref(),
            1.0,
            Par::Seq,
        );
        for j in 0..tmp.ncols() {
            for (v, c) in tmp.col_as_slice_mut(j).iter_mut().zip(&model.c) {
                *v += c;
            }
        }
    } else {
        for j in 0..x.ncols() {
            model.step_with(x.col_as_slice(j), quad, tmp.col_as_slice_mut(j));
        }
    }
    std::mem::swap(x, tmp);
}

/// The per-step operators of a gain filter on the linear model, shared by every run of a setting
/// (see the module text).
pub(super) struct FusedOps {
    /// Column-major `n_modes × (n_modes + n_due)` operators `[(I − K H) A | K diag σ]`, or
    /// `[(I − K H) | K diag σ]` at step 0, where there is no forecast.
    ops: Vec<Vec<f64>>,
    /// Reading rows of each operator.
    n_due: Vec<usize>,
    /// Per step, the operator applied; `None` means a forecast only (or nothing at step 0).
    step_op: Vec<Option<usize>>,
    /// Per step with an operator, `(I − K H) c + K (y − offset)`; row-major `n_steps × n_modes`.
    d: Vec<f64>,
    /// `A` column-major, for the free run and the steps without readings.
    a: Vec<f64>,
}

/// The fused operators of the setting on `span`, when the model is linear. Each operator and
/// each step's constant is computed on its own (in parallel, rayon), from `M = A − K (H A)` and
/// `d = c + K (y − offset − H c)` (or `M = I − K H`, `d = K (y − offset)` at step 0).
pub(super) fn fused_ops(shared: &Shared<'_>, span: &Span<'_>) -> Option<FusedOps> {
    use rayon::prelude::*;
    let model = &shared.prep.model;
    if model.f.is_some() {
        return None;
    }
    let case = &shared.prep.case;
    let n = case.n_modes();
    let n_rows = case.rows.n_rows();
    let n_steps = span.n_steps;
    let mut out = FusedOps {
        ops: Vec::new(),
        n_due: Vec::new(),
        step_op: vec![None; n_steps],
        d: vec![0.0; n_steps * n],
        a: col_major(model.a.as_ref()),
    };
    let Some(gains) = &shared.gains else {
        return Some(out);
    };
    let schedule = &shared.schedule;
    // H, H A and H c of each reporting pattern.
    let h_of: Vec<Mat<f64>> = schedule
        .patterns
        .iter()
        .map(|rows| Mat::from_fn(rows.len(), n, |i, j| case.rows.h[(rows[i], j)]))
        .collect();
    let ha_of: Vec<Mat<f64>> = h_of.iter().map(|h| h * &model.a).collect();
    let hc_of: Vec<Vec<f64>> = h_of
        .iter()
        .map(|h| {
            (0..h.nrows())
                .map(|i| (0..n).map(|j| h[(i, j)] * model.c[j]).sum())
                .collect()
        })
        .collect();
    // Which operator each step applies: one per (gain, first step or not).
    let mut keys: Vec<(usize, usize, bool)> = Vec::new(); // (gain, pattern, first)
    let mut op_of: HashMap<(usize, bool), usize> = HashMap::new();
    for step in 0..n_steps {
        let (Some(g), Some(p)) = (gains.step_gain[step], schedule.step_pattern[step]) else {
            continue;
        };
        let key = (g, step == 0);
        let idx = *op_of.entry(key).or_insert_with(|| {
            keys.push((g, p, step == 0));
            keys.len() - 1
        });
        out.step_op[step] = Some(idx);
    }
    out.ops = keys
        .par_iter()
        .map(|&(g, p, first)| {
            let rows = &schedule.patterns[p];
            let k = MatRef::from_column_major_slice(&gains.gains[g], n, rows.len());
            let mut op = Mat::<f64>::zeros(n, n + rows.len());
            if first {
                op.as_mut()
                    .submatrix_mut(0, 0, n, n)
                    .copy_from(Mat::<f64>::identity(n, n));
                matmul(
                    op.as_mut().submatrix_mut(0, 0, n, n),
                    Accum::Add,
                    k,
                    h_of[p].as_ref(),
                    -1.0,
                    Par::Seq,
                );
            } else {
                op.as_mut().submatrix_mut(0, 0, n, n).copy_from(&model.a);
                matmul(
                    op.as_mut().submatrix_mut(0, 0, n, n),
                    Accum::Add,
                    k,
                    ha_of[p].as_ref(),
                    -1.0,
                    Par::Seq,
                );
            }
            for (kk, &row) in rows.iter().enumerate() {
                for i in 0..n {
                    op[(i, n + kk)] = k[(i, kk)] * shared.noise_sd[row];
                }
            }
            col_major(op.as_ref())
        })
        .collect();
    out.n_due = keys
        .iter()
        .map(|&(_, p, _)| schedule.patterns[p].len())
        .collect();
    let step_op = &out.step_op;
    out.d.par_chunks_mut(n).enumerate().for_each(|(step, d)| {
        let Some(op) = step_op[step] else {
            return;
        };
        let (g, p, first) = keys[op];
        let rows = &schedule.patterns[p];
        let k = MatRef::from_column_major_slice(&gains.gains[g], n, rows.len());
        if !first {
            d.copy_from_slice(&model.c);
        }
        for (kk, &row) in rows.iter().enumerate() {
            let mut innov = span.readings[step * n_rows + row] - case.rows.offset[row];
            if !first {
                innov -= hc_of[p][kk];
            }
            for (i, di) in d.iter_mut().enumerate() {
                *di += k[(i, kk)] * innov;
            }
        }
    });
    Some(out)
}

/// Runs `runs` (at most [`RUN_BLOCK`]) of a gain filter, or of the free run when the setting
/// has no gains: the fused path on the linear model, else step by step.
pub(super) fn gain_block(
    shared: &Shared<'_>,
    span: &Span<'_>,
    fused: Option<&FusedOps>,
    runs: Range<usize>,
) -> Vec<RunOutcome> {
    match fused {
        Some(ops) => fused_block(shared, span, ops, runs),
        None => general_block(shared, span, runs),
    }
}

/// Per-run curves of a block, NaN until filled.
struct Curves {
    rmse: Vec<Vec<f64>>,
    modal: Vec<Vec<f64>>,
    spread: Vec<Vec<f64>>,
    free_rmse: Vec<Vec<f64>>,
    divergence: Vec<Option<Divergence>>,
}

impl Curves {
    fn new(n_real: usize, n_steps: usize) -> Self {
        let nan = || (0..n_real).map(|_| vec![f64::NAN; n_steps]).collect();
        Self {
            rmse: nan(),
            modal: nan(),
            spread: nan(),
            free_rmse: nan(),
            divergence: vec![None; n_real],
        }
    }

    fn finish(mut self, runs: Range<usize>) -> Vec<RunOutcome> {
        runs.enumerate()
            .map(|(b, run_idx)| {
                finish_run(
                    run_idx,
                    std::mem::take(&mut self.rmse[b]),
                    std::mem::take(&mut self.free_rmse[b]),
                    std::mem::take(&mut self.modal[b]),
                    std::mem::take(&mut self.spread[b]),
                    self.divergence[b].take(),
                )
            })
            .collect()
    }
}

/// Squared distance of `x` from `truth`.
#[inline]
fn dist_sq(x: &[f64], truth: &[f64]) -> f64 {
    x.iter().zip(truth).map(|(a, b)| (a - b) * (a - b)).sum()
}

/// `out ← M x + v 1ᵀ` for every column (`M` column-major, `n × k`).
fn affine(m: &[f64], v: &[f64], x: MatRef<'_, f64>, mut out: faer::MatMut<'_, f64>) {
    let n = v.len();
    for j in 0..out.ncols() {
        out.rb_mut()
            .col_mut(j)
            .copy_from(faer::ColRef::from_slice(v));
    }
    matmul(
        out,
        Accum::Add,
        MatRef::from_column_major_slice(m, n, x.nrows()),
        x,
        1.0,
        Par::Seq,
    );
}

fn fused_block(
    shared: &Shared<'_>,
    span: &Span<'_>,
    fused: &FusedOps,
    runs: Range<usize>,
) -> Vec<RunOutcome> {
    let prep = shared.prep;
    let s = shared.settings;
    let case = &prep.case;
    let (n, n_steps, n_real) = (case.n_modes(), span.n_steps, runs.len());
    assert!(n_real <= RUN_BLOCK);
    let norm = case.field_norm;
    let rng_for = |run_idx: usize, purpose| {
        run_rng(
            s.seed,
            prep.layout_hash,
            s.setting_id,
            run_idx as u64,
            purpose,
        )
    };
    let max_due = fused.n_due.iter().copied().max().unwrap_or(0);
    // Rows 0..n of `y` hold the states, the rows below the step's noise.
    let mut y = Mat::<f64>::zeros(n + max_due, RUN_BLOCK);
    let mut y_next = Mat::<f64>::zeros(n + max_due, RUN_BLOCK);
    for (b, run_idx) in runs.clone().enumerate() {
        let a0 = background(shared, span, &mut rng_for(run_idx, STREAM_BACKGROUND));
        y.col_as_slice_mut(b)[..n].copy_from_slice(&a0);
    }
    let mut free = y.as_ref().subrows(0, n).to_owned();
    let mut free_next = free.clone();
    let mut reading_rngs: Vec<super::montecarlo::RunRng> =
        runs.clone().map(|i| rng_for(i, STREAM_READINGS)).collect();
    let mut curves = Curves::new(n_real, n_steps);
    let filtered = shared.gains.as_ref();
    let stop_at = filtered
        .and_then(|g| g.divergence.as_ref())
        .map_or(usize::MAX, |d| d.step);
    let c = &prep.model.c;

    for step in 0..n_steps {
        let truth = &span.coeffs_rm[step * n..(step + 1) * n];
        let residual = span.residual_sq[step];
        if step > 0 {
            affine(&fused.a, c, free.as_ref(), free_next.as_mut());
            std::mem::swap(&mut free, &mut free_next);
        }
        for b in 0..n_real {
            let e = dist_sq(free.col_as_slice(b), truth);
            let rmse = field_rmse(e, residual, norm);
            curves.free_rmse[b][step] = if rmse.is_finite() { rmse } else { f64::NAN };
            if filtered.is_none() {
                if rmse.is_finite() {
                    curves.rmse[b][step] = rmse;
                    curves.modal[b][step] = (e / norm).sqrt();
                } else if curves.divergence[b].is_none() {
                    curves.divergence[b] = Some(Divergence {
                        step,
                        reason: "state is not finite".into(),
                    });
                }
            }
        }
        let Some(gains) = filtered else {
            continue;
        };
        if step >= stop_at {
            if let Some(d) = &gains.divergence {
                for slot in curves.divergence.iter_mut().filter(|d| d.is_none()) {
                    *slot = Some(d.clone());
                }
            }
            // The free runs go on (they are the baseline); the filter stops here.
            continue;
        }
        match fused.step_op[step] {
            Some(op) => {
                let n_due = fused.n_due[op];
                for (b, rng) in reading_rngs.iter_mut().enumerate() {
                    for v in &mut y.col_as_slice_mut(b)[n..n + n_due] {
                        *v = StandardNormal.sample(rng);
                    }
                }
                affine(
                    &fused.ops[op],
                    &fused.d[step * n..(step + 1) * n],
                    y.as_ref().subrows(0, n + n_due),
                    y_next.as_mut().subrows_mut(0, n),
                );
                std::mem::swap(&mut y, &mut y_next);
            }
            None if step > 0 => {
                affine(
                    &fused.a,
                    c,
                    y.as_ref().subrows(0, n),
                    y_next.as_mut().subrows_mut(0, n),
                );
                std::mem::swap(&mut y, &mut y_next);
            }
            None => {}
        }
        let spread = gains
            .posterior_trace
            .as_ref()
            .map_or(f64::NAN, |tr| (tr[step] / norm).sqrt());
        for b in 0..n_real {
            if curves.divergence[b].is_some() {
                continue;
            }
            let e = dist_sq(&y.col_as_slice(b)[..n], truth);
            if !e.is_finite() {
                curves.divergence[b] = Some(Divergence {
                    step,
                    reason: "state is not finite".into(),
                });
                continue;
            }
            curves.rmse[b][step] = field_rmse(e, residual, norm);
            curves.modal[b][step] = (e / norm).sqrt();
            curves.spread[b][step] = spread;
        }
    }
    curves.finish(runs)
}

/// The step-by-step block path (any model).
fn general_block(shared: &Shared<'_>, span: &Span<'_>, runs: Range<usize>) -> Vec<RunOutcome> {
    let prep = shared.prep;
    let s = shared.settings;
    let model = &prep.model;
    let case = &prep.case;
    let (n_modes, n_steps, n_real) = (case.n_modes(), span.n_steps, runs.len());
    assert!(n_real <= RUN_BLOCK);
    let norm = case.field_norm;
    let n_rows = case.rows.n_rows();
    let rng_for = |run_idx: usize, purpose| {
        run_rng(
            s.seed,
            prep.layout_hash,
            s.setting_id,
            run_idx as u64,
            purpose,
        )
    };

    let mut x = Mat::<f64>::zeros(n_modes, RUN_BLOCK);
    for (b, run_idx) in runs.clone().enumerate() {
        let a0 = background(shared, span, &mut rng_for(run_idx, STREAM_BACKGROUND));
        x.col_as_slice_mut(b).copy_from_slice(&a0);
    }
    let mut free = x.clone();
    let mut tmp = Mat::<f64>::zeros(n_modes, RUN_BLOCK);
    let mut quad = vec![0.0; super::model::n_quadratic(n_modes)];
    let mut reading_rngs: Vec<super::montecarlo::RunRng> =
        runs.clone().map(|i| rng_for(i, STREAM_READINGS)).collect();
    // Sensor matrix of each reporting pattern.
    let h_patterns: Vec<Mat<f64>> = shared
        .schedule
        .patterns
        .iter()
        .map(|rows| Mat::from_fn(rows.len(), n_modes, |k, j| case.rows.h[(rows[k], j)]))
        .collect();
    let nan_curve = || vec![f64::NAN; n_steps];
    let mut rmse: Vec<Vec<f64>> = (0..n_real).map(|_| nan_curve()).collect();
    let mut modal: Vec<Vec<f64>> = (0..n_real).map(|_| nan_curve()).collect();
    let mut spread: Vec<Vec<f64>> = (0..n_real).map(|_| nan_curve()).collect();
    let mut free_rmse: Vec<Vec<f64>> = (0..n_real).map(|_| nan_curve()).collect();
    let mut divergence: Vec<Option<Divergence>> = vec![None; n_real];
    let mut innovation = Mat::<f64>::zeros(n_rows, RUN_BLOCK);
    let shared_divergence = shared.gains.as_ref().and_then(|g| g.divergence.clone());

    for step in 0..n_steps {
        if step > 0 {
            advance(model, &mut free, &mut tmp, &mut quad);
        }
        for (b, curve) in free_rmse.iter_mut().enumerate() {
            let e = step_rmse(span, step, free.col_as_slice(b), norm).0;
            curve[step] = if e.is_finite() { e } else { f64::NAN };
        }
        let Some(gains) = &shared.gains else {
            for b in 0..n_real {
                (rmse[b][step], modal[b][step]) = step_rmse(span, step, free.col_as_slice(b), norm);
                if !rmse[b][step].is_finite() && divergence[b].is_none() {
                    divergence[b] = Some(Divergence {
                        step,
                        reason: "state is not finite".into(),
                    });
                }
            }
            continue;
        };
        if let Some(d) = &shared_divergence {
            if d.step <= step {
                for slot in divergence.iter_mut().filter(|d| d.is_none()) {
                    *slot = Some(d.clone());
                }
                // The free runs go on (they are the baseline); the filter stops here.
                continue;
            }
        }
        if step > 0 {
            advance(model, &mut x, &mut tmp, &mut quad);
        }
        if let (Some(g), Some(pattern)) =
            (gains.step_gain[step], shared.schedule.step_pattern[step])
        {
            let rows = &shared.schedule.patterns[pattern];
            let mut innov = innovation.as_mut().subrows_mut(0, rows.len());
            // innov = −H x, then + (z − offset) for the real runs; padding columns stay at −H x.
            matmul(
                innov.rb_mut(),
                Accum::Replace,
                h_patterns[pattern].as_ref(),
                x.as_ref(),
                -1.0,
                Par::Seq,
            );
            for (b, rng) in reading_rngs.iter_mut().enumerate() {
                for (k, &row) in rows.iter().enumerate() {
                    let noise: f64 = StandardNormal.sample(rng);
                    let z = span.readings[step * n_rows + row] + shared.noise_sd[row] * noise;
                    innov[(k, b)] += z - case.rows.offset[row];
                }
            }
            let k = MatRef::from_column_major_slice(&gains.gains[g], n_modes, rows.len());
            matmul(x.as_mut(), Accum::Add, k, innov.rb(), 1.0, Par::Seq);
        }
        for b in 0..n_real {
            if divergence[b].is_some() {
                continue;
            }
            let col = x.col_as_slice(b);
            if !col.iter().all(|v| v.is_finite()) {
                divergence[b] = Some(Divergence {
                    step,
                    reason: "state is not finite".into(),
                });
                continue;
            }
            (rmse[b][step], modal[b][step]) = step_rmse(span, step, col, norm);
            if let Some(tr) = &gains.posterior_trace {
                spread[b][step] = (tr[step] / norm).sqrt();
            }
        }
    }
    runs.enumerate()
        .map(|(b, run_idx)| {
            let take = |v: &mut Vec<Vec<f64>>| std::mem::take(&mut v[b]);
            finish_run(
                run_idx,
                take(&mut rmse),
                take(&mut free_rmse),
                take(&mut modal),
                take(&mut spread),
                divergence[b].take(),
            )
        })
        .collect()
}
