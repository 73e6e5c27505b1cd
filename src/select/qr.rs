//! Column-pivoted QR on the whitened mode rows (Businger & Golub 1965, the pivoting of LAPACK
//! `dgeqp3`), with group pivoting for multi-row blocks and a lazy search for the pivot.
//!
//! The matrix is `Aᵀ` with one column per candidate row (`A` = stacked whitened rows, see
//! [`CandidateRows`]). Each step picks the block whose residual — its rows with the span of the
//! rows already chosen projected out — has the largest Frobenius norm, then appends its
//! orthonormalised rows to `Q` (classical Gram–Schmidt, two passes). For single-row blocks this
//! is exactly the pivot order of `dgeqp3` up to rounding at near-ties.
//!
//! Residual norms only ever shrink, so a norm computed earlier is an upper bound: only blocks
//! whose stale norm could still beat the best fresh one are brought up to date, by the `Q`
//! columns added since their last refresh (batched search in `lazy.rs`). Only `k` pivots are computed, never a full
//! factorisation. When a refreshed norm has lost most of its digits to cancellation it is
//! recomputed from the explicit residual, as LAPACK does.
//!
//! QR stops once the chosen rows span the whole mode space (every residual is round-off); the
//! caller continues with the D-greedy rule (see `rank.rs`).

use rayon::prelude::*;

use super::lazy::{lazy_argmax, Refresh};
use super::pool::PooledArgmax;
use super::rows::{dot, CandidateRows};

/// The pivots of a lazy pivoted QR.
#[derive(Debug, Clone, Default)]
pub struct QrOrder {
    /// Chosen blocks in pivot order (not including `start`).
    pub order: Vec<usize>,
    /// Residual Frobenius norm of each pivot when it was chosen.
    pub pivot_norms: Vec<f64>,
    /// True when the search stopped because the chosen rows span the mode space.
    pub rank_exhausted: bool,
}

/// Relative size below which a residual counts as round-off.
const RANK_TOL: f64 = 1e-12;
/// A refreshed squared norm below this fraction of the original is recomputed explicitly.
const RECOMPUTE_FRACTION: f64 = 1e-6;

/// The orthonormal directions of the rows chosen so far (`Q`, one row-major column each).
struct Basis {
    n_modes: usize,
    q: Vec<f64>,
}

impl Basis {
    fn new(n_modes: usize) -> Self {
        Basis {
            n_modes,
            q: Vec::new(),
        }
    }

    fn n_q(&self) -> usize {
        self.q.len() / self.n_modes
    }

    fn q_col(&self, j: usize) -> &[f64] {
        &self.q[j * self.n_modes..(j + 1) * self.n_modes]
    }

    /// `v ← (I − Q Qᵀ)² v`: two Gram–Schmidt passes ("twice is enough", Giraud et al. 2005).
    fn project_out(&self, v: &mut [f64]) {
        for _ in 0..2 {
            for q in self.q.chunks_exact(self.n_modes) {
                let c = dot(q, v);
                for (vi, qi) in v.iter_mut().zip(q) {
                    *vi -= c * qi;
                }
            }
        }
    }

    /// Appends the orthonormalised rows of a block.
    fn absorb(&mut self, block: &[f64]) {
        for row in block.chunks_exact(self.n_modes) {
            let mut v = row.to_vec();
            self.project_out(&mut v);
            let norm = dot(&v, &v).sqrt();
            if norm > RANK_TOL * dot(row, row).sqrt() && norm > 0.0 {
                self.q.extend(v.iter().map(|x| x / norm));
            }
        }
    }
}

/// The QR side of the lazy arg-max: bounds are squared residual norms.
struct NormSource<'a> {
    rows: &'a CandidateRows,
    basis: &'a Basis,
    original: &'a [f64],
    norm_sq: &'a mut [f64],
    stamp: &'a mut [usize],
}

impl NormSource<'_> {
    /// Exact squared residual norm of block `b` now.
    fn updated(&self, b: usize) -> f64 {
        let r = self.rows.n_modes();
        let block = self.rows.block(b);
        let mut s = self.norm_sq[b];
        let n_q = self.basis.n_q();
        for j in self.stamp[b]..n_q {
            let q = self.basis.q_col(j);
            for row in block.chunks_exact(r) {
                let c = dot(row, q);
                s -= c * c;
            }
        }
        self.checked(b, s)
    }

    /// `s` unless cancellation ate most of its digits; then the explicit residual norm².
    fn checked(&self, b: usize, s: f64) -> f64 {
        checked_residual(self.basis, self.rows.block(b), s, self.original[b])
    }
}

impl Refresh for NormSource<'_> {
    fn stamps(&self) -> (&[usize], usize) {
        (self.stamp, self.basis.n_q())
    }

    fn refresh(&mut self, items: &[usize], _threshold: f64, out: &mut [f64]) {
        let this = &*self;
        let values: Vec<f64> = if items.len() >= PARALLEL_MIN {
            items.par_iter().map(|&b| this.updated(b)).collect()
        } else {
            items.iter().map(|&b| this.updated(b)).collect()
        };
        let n_q = self.basis.n_q();
        for ((&b, v), o) in items.iter().zip(values).zip(out.iter_mut()) {
            self.norm_sq[b] = v;
            self.stamp[b] = n_q;
            *o = v;
        }
    }
}

/// Refreshes below this many items run on one thread (rayon overhead).
const PARALLEL_MIN: usize = 2048;

/// Lazy group-pivoted QR: up to `n_pick` blocks after the blocks in `start` (already chosen,
/// projected out first). `accept(b)` is asked when `b` is the pivot; returning false drops it
/// for good (constraints, budget). Blocks never offered to `accept` are never chosen.
/// Single-row candidates go through the pool and sweep search of `pool.rs`, blocks of several
/// rows through the lazy search of `lazy.rs`; both give the pivots of the eager algorithm.
pub fn lazy_pivoted_qr(
    rows: &CandidateRows,
    start: &[usize],
    n_pick: usize,
    accept: impl FnMut(usize) -> bool,
) -> QrOrder {
    if rows.all_single() {
        pooled_pivoted_qr(rows, start, n_pick, accept)
    } else {
        lazy_pivoted_qr_by_search(rows, start, n_pick, accept)
    }
}

/// [`lazy_pivoted_qr`] for single-row candidates, by [`PooledArgmax`] over residual norms.
fn pooled_pivoted_qr(
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
    let mut alive = vec![true; n];
    start.iter().for_each(|&b| alive[b] = false);
    let mut search = PooledArgmax::new(rows, original.clone(), alive);
    let key = |_: usize, v: f64| v;
    let mut out = QrOrder::default();
    while out.order.len() < n_pick {
        if basis.n_q() >= r {
            out.rank_exhausted = true;
            break;
        }
        let fix = |i: usize, row: &[f64], s: f64| checked_residual(&basis, row, s, original[i]);
        let Some((b, value)) = search.argmax(&basis.q, &key, &fix) else {
            break;
        };
        if value <= RANK_TOL * RANK_TOL * largest {
            out.rank_exhausted = true;
            break;
        }
        search.remove(b);
        if !accept(b) {
            continue;
        }
        out.pivot_norms.push(value.sqrt());
        basis.absorb(rows.block(b));
        out.order.push(b);
    }
    out
}

/// `s`, the refreshed squared residual norm of `block` (its rows), unless cancellation ate
/// most of its digits (below [`RECOMPUTE_FRACTION`] of `original`, the norm² before any
/// column); then the norm² of the explicit residual, as LAPACK does.
fn checked_residual(basis: &Basis, block: &[f64], s: f64, original: f64) -> f64 {
    if s >= RECOMPUTE_FRACTION * original {
        return s.max(0.0);
    }
    let mut explicit = 0.0;
    for row in block.chunks_exact(basis.n_modes) {
        let mut v = row.to_vec();
        basis.project_out(&mut v);
        explicit += dot(&v, &v);
    }
    explicit
}

/// [`lazy_pivoted_qr`] by the lazy arg-max over stale norms (any block sizes).
fn lazy_pivoted_qr_by_search(
    rows: &CandidateRows,
    start: &[usize],
    n_pick: usize,
    mut accept: impl FnMut(usize) -> bool,
) -> QrOrder {
    let r = rows.n_modes();
    let mut basis = Basis::new(r);
    for &b in start {
        basis.absorb(rows.block(b));
    }
    let n_blocks = rows.n_blocks();
    let original: Vec<f64> = (0..n_blocks).map(|b| rows.block_norm_sq(b)).collect();
    let largest = original.iter().copied().fold(0.0, f64::max);
    let mut norm_sq = original.clone();
    let mut stamp = vec![0usize; n_blocks];
    let mut bound = original.clone();
    start.iter().for_each(|&b| bound[b] = f64::NEG_INFINITY);
    let mut out = QrOrder::default();
    let mut hot = Vec::new();
    while out.order.len() < n_pick {
        if basis.n_q() >= r {
            out.rank_exhausted = true;
            break;
        }
        let mut source = NormSource {
            rows,
            basis: &basis,
            original: &original,
            norm_sq: &mut norm_sq,
            stamp: &mut stamp,
        };
        let Some(b) = lazy_argmax(&mut bound, &mut hot, &mut source) else {
            break;
        };
        if norm_sq[b] <= RANK_TOL * RANK_TOL * largest {
            out.rank_exhausted = true;
            break;
        }
        bound[b] = f64::NEG_INFINITY;
        if !accept(b) {
            continue;
        }
        out.pivot_norms.push(norm_sq[b].sqrt());
        basis.absorb(rows.block(b));
        out.order.push(b);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Plain (eager) pivoted Gram–Schmidt: the textbook algorithm, every norm every step.
    fn eager(rows: &CandidateRows, n_pick: usize) -> Vec<usize> {
        let r = rows.n_modes();
        let mut basis = Basis::new(r);
        let mut chosen = vec![false; rows.n_blocks()];
        let mut order = Vec::new();
        for _ in 0..n_pick {
            let mut best = (f64::NEG_INFINITY, usize::MAX);
            for (b, &taken) in chosen.iter().enumerate() {
                if taken {
                    continue;
                }
                let mut s = 0.0;
                for row in rows.block(b).chunks_exact(r) {
                    let mut v = row.to_vec();
                    basis.project_out(&mut v);
                    s += dot(&v, &v);
                }
                if s > best.0 {
                    best = (s, b);
                }
            }
            chosen[best.1] = true;
            basis.absorb(rows.block(best.1));
            order.push(best.1);
        }
        order
    }

    #[test]
    fn lazy_order_equals_eager_order_for_blocks() {
        use rand::{Rng, SeedableRng};
        for seed in 0..5u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let r = 7;
            let sizes: Vec<usize> = (0..40).map(|_| rng.random_range(1..=3)).collect();
            let n_rows: usize = sizes.iter().sum();
            let data: Vec<f64> = (0..n_rows * r)
                .map(|_| rng.random_range(-1.0..1.0))
                .collect();
            let rows = CandidateRows::from_blocks(r, data, &sizes);
            let lazy = lazy_pivoted_qr(&rows, &[], 3, |_| true);
            assert_eq!(lazy.order, eager(&rows, 3), "seed {seed}");
        }
    }

    /// The pool and sweep search and the lazy search give the same pivots, with pools far
    /// smaller than the candidate set (several sweeps) and with rejected pivots.
    #[test]
    fn pool_order_equals_lazy_order() {
        use rand::{Rng, SeedableRng};
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

    #[test]
    fn stops_when_rank_is_exhausted() {
        // Three rows in a 2-D mode space: after two pivots every residual is round-off.
        let rows = CandidateRows::from_single_rows(2, vec![1.0, 0.0, 0.0, 2.0, 1.0, 1.0]);
        let out = lazy_pivoted_qr(&rows, &[], 3, |_| true);
        assert_eq!(out.order, vec![1, 0]);
        assert!(out.rank_exhausted);
    }
}
