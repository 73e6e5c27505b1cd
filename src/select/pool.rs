//! The exact arg-max by pool and sweep, for single-row candidates whose values only ever drop
//! by squares of dot products with a growing list of columns: `v_i ← v_i − Σ_j (c_j · b_i)²`
//! (residual norms for pivoted QR, `1 + bᵀPb` for greedy D). With a million candidates the
//! lazy search's random row reads are the cost; this search reads the rows in order.
//!
//! A *sweep* brings every value up to date with the columns added since the last one — one
//! streaming pass over the rows in contiguous chunks, each a faer product with the new
//! columns. Then about `POOL` candidates with the largest keys (a key grows with the value:
//! the value itself, or a gain per cost) have their rows copied into a contiguous *pool*, and
//! `τ`, the largest key left outside, is noted. The arg-max is then searched in the pool alone,
//! its values updated eagerly with each new column: values only drop, so every candidate
//! outside stays at or below `τ`, and while the pool's best key exceeds `τ` it is the exact
//! arg-max over all candidates (ties go to the lower index, as in LAPACK's `idamax`, because a
//! tie with an outside candidate ends the pool). When the pool's best falls to `τ` or below,
//! the next call sweeps again.
//!
//! Tasks are cut at fixed sizes and every value depends only on its own row, so the results do
//! not depend on the number of threads.

use faer::linalg::matmul::matmul;
use faer::{Accum, MatMut, MatRef, Par};
use rayon::prelude::*;

use super::rows::{dot, CandidateRows};

/// Rows per task of a sweep (one product each) and of the pool's selection.
const SWEEP_CHUNK: usize = 2048;
/// Rows per task of a pool update.
const POOL_CHUNK: usize = 4096;
/// Pool size: this share of the candidates, within the bounds below (measured at 1,000,000 ×
/// 50: a 32nd beat a 16th, an 8th and a 64th; see docs/performance.md).
const POOL_SHARE: usize = 32;
const POOL_MIN: usize = 4096;
const POOL_MAX: usize = 1 << 18;
/// Candidates sampled to estimate the pool's threshold.
const POOL_SAMPLE: usize = 8192;

/// Key of candidate `i` at value `v`; must not decrease when `v` grows.
pub(crate) type KeyFn<'k> = dyn Fn(usize, f64) -> f64 + Sync + 'k;
/// A value just brought up to date, `(i, row, v)` → the value to keep (e.g. recomputed when
/// cancellation ate its digits). Called for live candidates only.
pub(crate) type FixFn<'k> = dyn Fn(usize, &[f64], f64) -> f64 + Sync + 'k;

/// The search state: every candidate's value and whether it is still live.
pub(crate) struct PooledArgmax<'a> {
    rows: &'a CandidateRows,
    values: Vec<f64>,
    /// Columns every value in `values` includes.
    synced: usize,
    alive: Vec<bool>,
    pool: Option<Pool>,
    pool_size: usize,
}

impl<'a> PooledArgmax<'a> {
    /// `values[i]`: candidate `i`'s value before any column; `alive[i]`: whether it may be
    /// returned.
    pub(crate) fn new(rows: &'a CandidateRows, values: Vec<f64>, alive: Vec<bool>) -> Self {
        debug_assert!(rows.all_single(), "the pool reads candidate i as row i");
        let n = values.len();
        PooledArgmax {
            rows,
            values,
            synced: 0,
            alive,
            pool: None,
            pool_size: (n / POOL_SHARE).clamp(POOL_MIN, POOL_MAX).min(n),
        }
    }

    /// Never return candidate `i` again.
    pub(crate) fn remove(&mut self, i: usize) {
        self.alive[i] = false;
        if let Some(pool) = &mut self.pool {
            if let Ok(slot) = pool.index.binary_search(&i) {
                pool.values[slot] = f64::NEG_INFINITY;
            }
        }
    }

    /// The live candidate with the largest key after the columns `cols` (row-major, `n_cols ×
    /// n_modes`; earlier calls' columns first), with its value; `None` when none is live.
    pub(crate) fn argmax(
        &mut self,
        cols: &[f64],
        key: &KeyFn<'_>,
        fix: &FixFn<'_>,
    ) -> Option<(usize, f64)> {
        let n_cols = cols.len() / self.rows.n_modes();
        if let Some(pool) = &mut self.pool {
            pool.update(cols, n_cols, fix);
            if let Some((slot, k)) = pool.best(key) {
                if k > pool.tau {
                    return Some((pool.index[slot], pool.values[slot]));
                }
            }
            self.pool = None;
        }
        sweep(
            self.rows,
            cols,
            self.synced,
            n_cols,
            &self.alive,
            &mut self.values,
            fix,
        );
        self.synced = n_cols;
        let pool = Pool::fill(
            self.rows,
            &self.values,
            &self.alive,
            self.pool_size,
            n_cols,
            key,
        )?;
        // A fresh pool holds every key at or above its threshold and τ is below it, so its
        // best beats τ unless every live key is −∞ or NaN: nothing left worth returning.
        let (slot, k) = pool.best(key)?;
        if k <= pool.tau {
            return None;
        }
        let found = (pool.index[slot], pool.values[slot]);
        self.pool = Some(pool);
        Some(found)
    }
}

/// `values[i] ← values[i] − Σ_{from ≤ j < to} (c_j · b_i)²` for every live row, by contiguous
/// chunks.
fn sweep(
    rows: &CandidateRows,
    cols: &[f64],
    from: usize,
    to: usize,
    alive: &[bool],
    values: &mut [f64],
    fix: &FixFn<'_>,
) {
    let r = rows.n_modes();
    let m = to - from;
    if m == 0 {
        return;
    }
    let pending = MatRef::from_row_major_slice(&cols[from * r..to * r], m, r);
    values
        .par_chunks_mut(SWEEP_CHUNK)
        .enumerate()
        .for_each(|(c, chunk)| {
            let first = c * SWEEP_CHUNK;
            let n_rows = chunk.len();
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
            for (k, v) in chunk.iter_mut().enumerate() {
                if !alive[first + k] {
                    continue;
                }
                let sq: f64 = prod[k * m..(k + 1) * m].iter().map(|c| c * c).sum();
                *v = fix(first + k, &block[k * r..(k + 1) * r], *v - sq);
            }
        });
}

/// The candidates with the largest keys, their rows copied contiguously.
struct Pool {
    /// Candidate index of each slot, ascending (about the pool size, by a sampled threshold).
    index: Vec<usize>,
    n_modes: usize,
    rows: Vec<f64>,
    /// Value of each slot (−∞ once removed).
    values: Vec<f64>,
    /// Columns the pool's values include.
    synced: usize,
    /// Largest key of a live candidate outside the pool (−∞ when none).
    tau: f64,
}

impl Pool {
    /// The live candidates whose key is at or above the key ranked `size` in a fixed, evenly
    /// strided sample of the candidates (a quantile estimate, so no sort of all of them);
    /// `None` when no candidate is live.
    fn fill(
        rows: &CandidateRows,
        values: &[f64],
        alive: &[bool],
        size: usize,
        synced: usize,
        key: &KeyFn<'_>,
    ) -> Option<Self> {
        let n = values.len();
        let stride = (n / POOL_SAMPLE).max(1);
        let mut sample: Vec<f64> = (0..n)
            .step_by(stride)
            .filter(|&i| alive[i])
            .map(|i| key(i, values[i]))
            .filter(|k| !k.is_nan())
            .collect();
        sample.sort_unstable_by(|a, b| b.total_cmp(a));
        let rank = (size * (n / stride).max(1)) / n.max(1);
        let threshold = sample.get(rank).copied().unwrap_or(f64::NEG_INFINITY);
        // Members (ascending) and the largest live key left out, chunk by chunk.
        let parts: Vec<(Vec<usize>, f64)> = values
            .par_chunks(SWEEP_CHUNK)
            .zip(alive.par_chunks(SWEEP_CHUNK))
            .enumerate()
            .map(|(c, (vals, live))| {
                let mut members = Vec::new();
                let mut outside = f64::NEG_INFINITY;
                for (k, (&v, &a)) in vals.iter().zip(live).enumerate() {
                    if !a {
                        continue;
                    }
                    let i = c * SWEEP_CHUNK + k;
                    let kv = key(i, v);
                    if kv >= threshold {
                        members.push(i);
                    } else {
                        outside = outside.max(kv);
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
            values: index.iter().map(|&i| values[i]).collect(),
            index,
            n_modes: r,
            rows: pool_rows,
            synced,
            tau,
        })
    }

    /// Brings the live pool values up to date with columns `synced..n_cols`.
    fn update(&mut self, cols: &[f64], n_cols: usize, fix: &FixFn<'_>) {
        let from = self.synced;
        if from == n_cols {
            return;
        }
        let r = self.n_modes;
        let (rows, index) = (&self.rows, &self.index);
        self.values
            .par_chunks_mut(POOL_CHUNK)
            .enumerate()
            .for_each(|(c, vals)| {
                for (k, v) in vals.iter_mut().enumerate() {
                    if *v == f64::NEG_INFINITY {
                        continue;
                    }
                    let slot = c * POOL_CHUNK + k;
                    let row = &rows[slot * r..(slot + 1) * r];
                    let mut s = *v;
                    for j in from..n_cols {
                        let c = dot(row, &cols[j * r..(j + 1) * r]);
                        s -= c * c;
                    }
                    *v = fix(index[slot], row, s);
                }
            });
        self.synced = n_cols;
    }

    /// Slot and key of the largest live key (lowest candidate index on ties).
    fn best(&self, key: &KeyFn<'_>) -> Option<(usize, f64)> {
        let mut best: Option<(usize, f64)> = None;
        for (slot, &v) in self.values.iter().enumerate() {
            if v == f64::NEG_INFINITY {
                continue;
            }
            let k = key(self.index[slot], v);
            if k.is_nan() {
                continue;
            }
            if best.is_none_or(|(_, b)| k > b) {
                best = Some((slot, k));
            }
        }
        best
    }
}
