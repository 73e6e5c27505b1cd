//! Batched runs of the gain filters (Kalman, OI, nudging) and the free run: a block of
//! [`RUN_BLOCK`] Monte Carlo runs advances together as the columns of an `n_modes × RUN_BLOCK`
//! matrix, so a model step, the predicted readings and the gain update are small matrix
//! products (faer `matmul`, sequential) instead of per-run vector loops. Blocks are fixed by run
//! index and padded to the full width, so a run's numbers depend neither on the thread count
//! nor on the number of runs. Each run keeps its own random streams, drawn in the same order as
//! in the one-run path ([`super::montecarlo`]), which a test checks the block path against.

use std::ops::Range;

use faer::linalg::matmul::matmul;
use faer::reborrow::{Reborrow, ReborrowMut};
use faer::{Accum, Mat, MatRef, Par};
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

use super::kalman::Divergence;
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

/// Runs `runs` (at most [`RUN_BLOCK`]) of a gain filter, or of the free run when the setting
/// has no gains.
pub(super) fn gain_block(
    shared: &Shared<'_>,
    span: &Span<'_>,
    runs: Range<usize>,
) -> Vec<RunOutcome> {
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
    let mut reading_rngs: Vec<ChaCha20Rng> =
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
                break;
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
