//! The lazy arg-max shared by greedy D and pivoted QR: find the exact maximum of values that
//! only ever decrease, from stale upper bounds, refreshing as few items as possible.
//!
//! Minoux's (1978) accelerated greedy keeps the stale bounds in a priority queue and refreshes
//! the top until it is fresh. With a million candidates a heap costs two cache-missing
//! O(log n) operations per refresh, and a smooth field has thousands of near-equal bounds at the
//! top, so we refresh in batches instead: (1) refresh the `TOP` largest bounds and the items
//! that led the previous search ("hot": after a pick the largest stale bounds belong to its
//! neighbours, whose gains just collapsed, while last time's runners-up keep theirs) and take
//! their best exact value `g₀` — a lower bound on the maximum; (2) refresh every item whose bound is
//! still ≥ `g₀` (in index order, in parallel); (3) every other item has a bound, hence a value,
//! below `g₀`, so the best fresh item is the exact arg-max. In step (2) a refresh may stop as
//! soon as the partly updated bound falls below `g₀` (each posterior column only lowers it), so
//! most candidates are ruled out after a few of their pending columns. Ties go to the lower index, as in
//! LAPACK's `idamax`. Scans are over one contiguous `f64` array; the refresh itself is the
//! caller's, so this file knows nothing about criteria.

use std::cmp::Reverse;
use std::collections::BinaryHeap;

use super::greedy::Key;

/// How many of the largest bounds are refreshed first to find a good threshold.
const TOP: usize = 1024;
/// How many of the best fresh items are carried to the next search.
const HOT: usize = 4096;

/// The caller's side of the search: which bounds are exact, and how to make them exact.
pub(crate) trait Refresh {
    /// Per item, the version its bound was computed at, and the current version: the bound
    /// of item `i` is exact when `stamps[i] == current`.
    fn stamps(&self) -> (&[usize], usize);
    /// Whether the bound of item `i` is already its exact current value.
    fn is_fresh(&self, i: usize) -> bool {
        let (stamps, current) = self.stamps();
        stamps[i] == current
    }
    /// Writes the current value of each item (ascending indices) into `out`: exact, or — when
    /// the value drops below `threshold` part way — the partly updated bound (still ≥ the value,
    /// and the item stays stale). Pass `f64::NEG_INFINITY` to force exact values.
    fn refresh(&mut self, items: &[usize], threshold: f64, out: &mut [f64]);
}

/// Exact arg-max of the live items (`bound > −∞`). Returns `None` when no item is live.
/// `hot` carries, from one call to the next, the items that were near the top last time; they
/// are refreshed first, since the new maximum is usually among them.
pub(crate) fn lazy_argmax(
    bound: &mut [f64],
    hot: &mut Vec<usize>,
    source: &mut dyn Refresh,
) -> Option<usize> {
    // (1) last call's leaders plus the TOP largest live bounds.
    let mut top: BinaryHeap<Reverse<(Key, Reverse<usize>)>> = BinaryHeap::with_capacity(TOP + 1);
    for (i, &b) in bound.iter().enumerate() {
        if b == f64::NEG_INFINITY {
            continue;
        }
        if top.len() < TOP {
            top.push(Reverse((Key(b), Reverse(i))));
        } else if let Some(Reverse((Key(min), _))) = top.peek() {
            if b > *min {
                top.pop();
                top.push(Reverse((Key(b), Reverse(i))));
            }
        }
    }
    if top.is_empty() {
        return None;
    }
    let mut items: Vec<usize> = top.into_iter().map(|Reverse((_, Reverse(i)))| i).collect();
    items.extend(
        hot.iter()
            .copied()
            .filter(|&i| bound[i] != f64::NEG_INFINITY),
    );
    items.sort_unstable();
    items.dedup();
    refresh_stale(bound, source, &items, f64::NEG_INFINITY);
    let g0 = items
        .iter()
        .map(|&i| bound[i])
        .fold(f64::NEG_INFINITY, f64::max);
    // (2) everything else that might still beat g0.
    let rest: Vec<usize> = {
        let (stamps, current) = source.stamps();
        (0..bound.len())
            .filter(|&i| bound[i] >= g0 && bound[i] != f64::NEG_INFINITY && stamps[i] != current)
            .collect()
    };
    refresh_stale(bound, source, &rest, g0);
    // (3) the best fresh item, lowest index on ties.
    let mut best: Option<usize> = None;
    for &i in items.iter().chain(&rest) {
        if bound[i] == f64::NEG_INFINITY || !source.is_fresh(i) {
            continue;
        }
        best = match best {
            None => Some(i),
            Some(j) if bound[i] > bound[j] || (bound[i] >= bound[j] && i < j) => Some(i),
            keep => keep,
        };
    }
    // Leaders for the next call: the HOT best fresh values (several peaks of the field, so
    // some survive the pick that collapses the gains around the winner).
    if let Some(b) = best {
        let mut fresh: Vec<usize> = items
            .iter()
            .chain(&rest)
            .copied()
            .filter(|&i| i != b)
            .collect();
        if fresh.len() > HOT {
            fresh.select_nth_unstable_by(HOT, |&x, &y| {
                bound[y].total_cmp(&bound[x]).then(x.cmp(&y))
            });
            fresh.truncate(HOT);
        }
        fresh.sort_unstable();
        *hot = fresh;
    }
    best
}

fn refresh_stale(bound: &mut [f64], source: &mut dyn Refresh, items: &[usize], threshold: f64) {
    let stale: Vec<usize> = items
        .iter()
        .copied()
        .filter(|&i| !source.is_fresh(i))
        .collect();
    if stale.is_empty() {
        return;
    }
    let mut out = vec![0.0; stale.len()];
    source.refresh(&stale, threshold, &mut out);
    for (&i, &v) in stale.iter().zip(&out) {
        debug_assert!(
            v <= bound[i] * (1.0 + 1e-9) + 1e-12,
            "values must only decrease"
        );
        bound[i] = v;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Truth<'a> {
        truth: &'a [f64],
        stamps: Vec<usize>,
        n_refreshed: usize,
    }

    impl Refresh for Truth<'_> {
        fn stamps(&self) -> (&[usize], usize) {
            (&self.stamps, 1)
        }
        fn refresh(&mut self, items: &[usize], _threshold: f64, out: &mut [f64]) {
            for (o, &i) in out.iter_mut().zip(items) {
                *o = self.truth[i];
                self.stamps[i] = 1;
                self.n_refreshed += 1;
            }
        }
    }

    #[test]
    fn finds_the_exact_maximum_from_loose_bounds() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for n in [1usize, 2, 63, 64, 65, 1000] {
            let truth: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..1.0)).collect();
            let mut bound: Vec<f64> = truth
                .iter()
                .map(|t| t + rng.random_range(0.0..0.5))
                .collect();
            let mut source = Truth {
                truth: &truth,
                stamps: vec![0; n],
                n_refreshed: 0,
            };
            let mut hot = Vec::new();
            let best = lazy_argmax(&mut bound, &mut hot, &mut source);
            let want = (0..n).max_by(|&a, &b| truth[a].total_cmp(&truth[b]).then(b.cmp(&a)));
            assert_eq!(best, want, "n = {n}");
            assert!(source.n_refreshed <= n);
            // Searching again from the partly refreshed bounds gives the same answer.
            assert_eq!(lazy_argmax(&mut bound, &mut hot, &mut source), want);
        }
    }
}
