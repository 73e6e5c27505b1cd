//! Pivoted QR for single-row candidates by pool and sweep: the pivot search of `qr.rs` when
//! every block is one row (point candidates), where a million candidates make the lazy search's
//! random row reads the cost.
//!
//! A *sweep* brings every residual norm up to date with the `Q` columns added since the last
//! one — one streaming pass over the rows in contiguous chunks, each a faer product with the
//! new columns, so the rows are read in order and never gathered. It also copies the `POOL`
//! largest residuals' rows into a contiguous *pool* and notes `τ`, the largest residual left
//! outside. Pivots are then taken from the pool alone, its norms updated eagerly with each new
//! column: residual norms only shrink, so every candidate outside the pool stays at or below
//! `τ`, and while the pool's best exceeds `τ` it is the exact pivot over all candidates (ties
//! go to the lower index, as in LAPACK's `idamax`, because a tie with an outside candidate
//! ends the pool). When the pool's best falls to `τ` or below, the next sweep starts.
//!
//! Tasks are cut at fixed sizes and every value depends only on its own row, so the pivots do
//! not depend on the number of threads.

use faer::linalg::matmul::matmul;
use faer::{Accum, MatMut, MatRef, Par};
use rayon::prelude::*;

use super::qr::{Basis, QrOrder, RANK_TOL, RECOMPUTE_FRACTION};
use super::rows::{dot, CandidateRows};

/// Rows per task of a sweep (one product each).
const SWEEP_CHUNK: usize = 2048;
/// Rows per task of a pool update.
const POOL_CHUNK: usize = 4096;
/// Pool size: this share of the candidates, within the bounds below.
const POOL_SHARE: usize = 32;
const POOL_MIN: usize = 4096;
const POOL_MAX: usize = 1 << 18;
/// Candidates sampled to estimate the pool's threshold.
const POOL_SAMPLE: usize = 8192;

/// Pivoted QR of single-row candidates (see the module comment); same contract as
/// [`super::qr::lazy_pivoted_qr`].
pub(super) fn pooled_pivoted_qr(
    rows: &CandidateRows,
    start: &[usize],
    n_pick: usize,
    mut accept: impl FnMut(usize) -> bool,
) -> QrOrder {
    let r = rows.n_modes();
    let n = rows.n_blocks();
    let mut basis = Basis::new(r);
    for &b in start {
        basis.absorb(rows.block(b));
    }
    let original: Vec<f64> = (0..n).map(|b| rows.block_norm_sq(b)).collect();
    let largest = original.iter().copied().fold(0.0, f64::max);
    let mut norm_sq = original.clone();
    let mut alive = vec![true; n];
    start.iter().for_each(|&b| alive[b] = false);
    let mut synced = 0;
    let pool_size = (n / POOL_SHARE).clamp(POOL_MIN, POOL_MAX).min(n);
    let mut out = QrOrder::default();
    while out.order.len() < n_pick {
        if basis.n_q() >= r {
            out.rank_exhausted = true;
            return out;
        }
        sweep(rows, &basis, synced, &original, &mut norm_sq);
        synced = basis.n_q();
        let Some(mut pool) = Pool::fill(rows, &norm_sq, &alive, pool_size, synced) else {
            return out;
        };
        loop {
            pool.update(&basis, &original);
            let Some((slot, value)) = pool.best() else {
                break;
            };
            if value <= pool.tau {
                break;
            }
            let b = pool.index[slot];
            if value <= RANK_TOL * RANK_TOL * largest {
                out.rank_exhausted = true;
                return out;
            }
            pool.norm_sq[slot] = f64::NEG_INFINITY;
            alive[b] = false;
            if !accept(b) {
                continue;
            }
            out.pivot_norms.push(value.sqrt());
            basis.absorb(rows.block(b));
            out.order.push(b);
            if out.order.len() >= n_pick || basis.n_q() >= r {
                break;
            }
        }
    }
    out
}

/// `norm_sq[i] ← norm_sq[i] − Σ_{j ≥ from} (q_j · a_i)²` for every row, by contiguous chunks.
fn sweep(rows: &CandidateRows, basis: &Basis, from: usize, original: &[f64], norm_sq: &mut [f64]) {
    let r = rows.n_modes();
    let m = basis.n_q() - from;
    if m == 0 {
        return;
    }
    let pending = MatRef::from_row_major_slice(&basis.q[from * r..], m, r);
    norm_sq
        .par_chunks_mut(SWEEP_CHUNK)
        .enumerate()
        .for_each(|(c, values)| {
            let first = c * SWEEP_CHUNK;
            let n_rows = values.len();
            let block = rows.rows_slice(first, n_rows);
            let mut prod = vec![0.0; n_rows * m];
            matmul(
                MatMut::from_row_major_slice_mut(&mut prod, n_rows, m),
                Accum::Replace,
                MatRef::from_row_major_slice(block, n_rows, r),
                pending.transpose(),
                1.0,
                Par::Seq,
            );
            for (k, v) in values.iter_mut().enumerate() {
                let sq: f64 = prod[k * m..(k + 1) * m].iter().map(|c| c * c).sum();
                *v = checked(
                    basis,
                    &block[k * r..(k + 1) * r],
                    *v - sq,
                    original[first + k],
                );
            }
        });
}

/// `s` unless cancellation ate most of its digits; then the explicit residual norm².
fn checked(basis: &Basis, row: &[f64], s: f64, original: f64) -> f64 {
    if s >= RECOMPUTE_FRACTION * original {
        return s;
    }
    let mut v = row.to_vec();
    basis.project_out(&mut v);
    dot(&v, &v)
}

/// The candidates with the largest residuals, their rows copied contiguously.
struct Pool {
    /// Candidate index of each slot, ascending (about the pool size, by a sampled threshold).
    index: Vec<usize>,
    rows: Vec<f64>,
    norm_sq: Vec<f64>,
    /// Columns of `Q` the pool's norms include.
    synced: usize,
    /// Largest residual of a live candidate outside the pool (−∞ when none).
    tau: f64,
}

impl Pool {
    /// About `size` live candidates with the largest residuals: those at or above the
    /// residual ranked `size` in a fixed, evenly strided sample of the live candidates (a
    /// quantile estimate, so no sort of all of them); `None` when no candidate is live.
    fn fill(
        rows: &CandidateRows,
        norm_sq: &[f64],
        alive: &[bool],
        size: usize,
        synced: usize,
    ) -> Option<Self> {
        let n = norm_sq.len();
        let stride = (n / POOL_SAMPLE).max(1);
        let mut sample: Vec<f64> = (0..n)
            .step_by(stride)
            .filter(|&i| alive[i])
            .map(|i| norm_sq[i])
            .collect();
        if sample.is_empty() && !alive.iter().any(|&a| a) {
            return None;
        }
        sample.sort_unstable_by(|a, b| b.total_cmp(a));
        let rank = (size * sample.len()) / n.max(1);
        let threshold = if rank < sample.len() {
            sample[rank]
        } else {
            f64::NEG_INFINITY
        };
        // Members (ascending) and the largest live residual left out, chunk by chunk.
        let parts: Vec<(Vec<usize>, f64)> = norm_sq
            .par_chunks(SWEEP_CHUNK)
            .zip(alive.par_chunks(SWEEP_CHUNK))
            .enumerate()
            .map(|(c, (values, live))| {
                let mut members = Vec::new();
                let mut outside = f64::NEG_INFINITY;
                for (k, (&v, &a)) in values.iter().zip(live).enumerate() {
                    if !a {
                        continue;
                    }
                    if v >= threshold {
                        members.push(c * SWEEP_CHUNK + k);
                    } else {
                        outside = outside.max(v);
                    }
                }
                (members, outside)
            })
            .collect();
        let tau = parts.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
        let index: Vec<usize> = parts.into_iter().flat_map(|p| p.0).collect();
        if index.is_empty() {
            return None;
        }
        let r = rows.n_modes();
        let mut pool_rows = vec![0.0; index.len() * r];
        pool_rows
            .par_chunks_mut(POOL_CHUNK * r)
            .zip(index.par_chunks(POOL_CHUNK))
            .for_each(|(dst, idx)| {
                for (d, &i) in dst.chunks_exact_mut(r).zip(idx) {
                    d.copy_from_slice(rows.row(i));
                }
            });
        Some(Pool {
            norm_sq: index.iter().map(|&i| norm_sq[i]).collect(),
            index,
            rows: pool_rows,
            synced,
            tau,
        })
    }

    /// Brings the live pool norms up to date with the columns added since the last update.
    fn update(&mut self, basis: &Basis, original: &[f64]) {
        let r = basis.n_modes;
        let (from, to) = (self.synced, basis.n_q());
        if from == to {
            return;
        }
        let (rows, index) = (&self.rows, &self.index);
        self.norm_sq
            .par_chunks_mut(POOL_CHUNK)
            .enumerate()
            .for_each(|(c, values)| {
                for (k, v) in values.iter_mut().enumerate() {
                    if *v == f64::NEG_INFINITY {
                        continue;
                    }
                    let slot = c * POOL_CHUNK + k;
                    let row = &rows[slot * r..(slot + 1) * r];
                    let mut s = *v;
                    for j in from..to {
                        let q = basis.q_col(j);
                        let c = dot(row, q);
                        s -= c * c;
                    }
                    *v = checked(basis, row, s, original[index[slot]]);
                }
            });
        self.synced = to;
    }

    /// Slot and value of the largest live norm (lowest candidate index on ties).
    fn best(&self) -> Option<(usize, f64)> {
        let mut best: Option<(usize, f64)> = None;
        for (slot, &v) in self.norm_sq.iter().enumerate() {
            if v == f64::NEG_INFINITY {
                continue;
            }
            if best.is_none_or(|(_, b)| v > b) {
                best = Some((slot, v));
            }
        }
        best
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::select::qr::lazy_pivoted_qr_by_search;
    use rand::{Rng, SeedableRng};

    /// The pool and sweep search and the lazy search give the same pivots, with pools far
    /// smaller than the candidate set (several sweeps) and with rejected pivots.
    #[test]
    fn pool_order_equals_lazy_order() {
        for seed in 0..4u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let (r, n) = (9, 30_000);
            let data: Vec<f64> = (0..n * r)
                .map(|i| {
                    let x = (i / r) as f64 / n as f64;
                    (x * (1 + i % r) as f64 * 3.1).sin() + 0.05 * rng.random_range(-1.0..1.0)
                })
                .collect();
            let rows = CandidateRows::from_single_rows(r, data);
            let reject = |b: usize| b % 7 != 3;
            let pooled = pooled_pivoted_qr(&rows, &[5], 8, reject);
            let lazy = lazy_pivoted_qr_by_search(&rows, &[5], 8, reject);
            assert_eq!(pooled.order, lazy.order, "seed {seed}");
            assert_eq!(pooled.rank_exhausted, lazy.rank_exhausted);
            for (a, b) in pooled.pivot_norms.iter().zip(&lazy.pivot_norms) {
                assert!((a - b).abs() <= 1e-9 * b, "{a} {b}");
            }
        }
    }
}
