//! The one heavy kernel of the lazy searches: bring many single-row candidates up to date with
//! the columns added since each was last refreshed, `v_i ← v_i − Σ_{j ≥ stamp_i} (c_j · b_i)²`
//! (residual norms for QR, `1 + bᵀPb` for greedy D).
//!
//! Items with the same stamp share their pending columns, so they are gathered into a
//! contiguous block and multiplied with the pending columns by one faer matrix product (which
//! picks the widest SIMD the CPU offers at run time). Tasks are cut at a fixed size, so the
//! result is bit-identical whatever the number of threads.

use faer::linalg::matmul::matmul;
use faer::{Accum, MatMut, MatRef, Par};
use rayon::prelude::*;

use super::rows::CandidateRows;

/// Rows per matrix product.
const CHUNK: usize = 256;
/// Below this many items the work stays on the calling thread.
const PARALLEL_MIN: usize = 2048;

/// New values for single-row blocks `items` (block = row index) with stamps `stamps` and
/// current values `values`, given `cols` (`n_cols × n_modes`, row-major).
pub(crate) fn subtract_pending_squares(
    rows: &CandidateRows,
    cols: &[f64],
    items: &[usize],
    stamps: &[usize],
    values: &[f64],
) -> Vec<f64> {
    let r = rows.n_modes();
    let n_cols = cols.len() / r;
    // Counting sort by stamp (stamps ≤ n_cols), stable, so equal stamps keep item order.
    let mut count = vec![0usize; n_cols + 2];
    for &s in stamps {
        count[s.min(n_cols) + 1] += 1;
    }
    for i in 1..count.len() {
        count[i] += count[i - 1];
    }
    let mut order = vec![0usize; items.len()];
    for (p, &s) in stamps.iter().enumerate() {
        let slot = &mut count[s.min(n_cols)];
        order[*slot] = p;
        *slot += 1;
    }
    let mut tasks = Vec::new();
    let mut start = 0;
    while start < order.len() {
        let stamp = stamps[order[start]].min(n_cols);
        let mut end = start;
        while end < order.len() && stamps[order[end]].min(n_cols) == stamp && end - start < CHUNK {
            end += 1;
        }
        tasks.push((start, end));
        start = end;
    }
    let run = |&(a, b): &(usize, usize)| -> Vec<f64> {
        let stamp = stamps[order[a]].min(n_cols);
        let n = b - a;
        let m = n_cols.saturating_sub(stamp);
        if m == 0 {
            return (a..b).map(|k| values[order[k]]).collect();
        }
        let mut gathered = Vec::with_capacity(n * r);
        for k in a..b {
            gathered.extend_from_slice(rows.row(items[order[k]]));
        }
        let lhs = MatRef::from_row_major_slice(&gathered, n, r);
        let pending = MatRef::from_row_major_slice(&cols[stamp * r..n_cols * r], m, r);
        let mut prod = vec![0.0; n * m];
        matmul(
            MatMut::from_row_major_slice_mut(&mut prod, n, m),
            Accum::Replace,
            lhs,
            pending.transpose(),
            1.0,
            Par::Seq,
        );
        (0..n)
            .map(|i| {
                let sq: f64 = prod[i * m..(i + 1) * m].iter().map(|c| c * c).sum();
                values[order[a + i]] - sq
            })
            .collect()
    };
    let results: Vec<Vec<f64>> = if items.len() >= PARALLEL_MIN {
        tasks.par_iter().map(run).collect()
    } else {
        tasks.iter().map(run).collect()
    };
    let mut out = vec![0.0; items.len()];
    for (&(a, _), res) in tasks.iter().zip(results) {
        for (k, v) in res.into_iter().enumerate() {
            out[order[a + k]] = v;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_one_dot_at_a_time() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let (r, n_rows, n_cols) = (7, 600, 9);
        let data: Vec<f64> = (0..n_rows * r)
            .map(|_| rng.random_range(-1.0..1.0))
            .collect();
        let rows = CandidateRows::from_single_rows(r, data);
        let cols: Vec<f64> = (0..n_cols * r)
            .map(|_| rng.random_range(-1.0..1.0))
            .collect();
        let items: Vec<usize> = (0..n_rows).step_by(2).collect();
        let stamps: Vec<usize> = items.iter().map(|_| rng.random_range(0..=n_cols)).collect();
        let values: Vec<f64> = items.iter().map(|_| rng.random_range(10.0..20.0)).collect();
        let got = subtract_pending_squares(&rows, &cols, &items, &stamps, &values);
        for (p, &i) in items.iter().enumerate() {
            let mut want = values[p];
            for j in stamps[p]..n_cols {
                let c: f64 = (0..r).map(|m| rows.row(i)[m] * cols[j * r + m]).sum();
                want -= c * c;
            }
            assert!((got[p] - want).abs() < 1e-12 * (1.0 + want.abs()), "{p}");
        }
    }
}
