//! Baselines a planner would compare against: random layouts (seeded ChaCha, the best of M
//! draws by the criterion) and the evenly spaced grid an engineer lays out by hand.
//!
//! Grid rule: take the bounding box of the admissible candidate positions and a square lattice
//! of spacing h with nodes at the cell centres `x_min + (i + ½)h, y_min + (j + ½)h`. Each node,
//! row by row, takes the nearest admissible candidate not yet used, if it lies within the
//! node's cell half-diagonal `h/√2` (so nodes over exclusion zones, water or buildings take
//! nothing) and the constraints allow it. Start from `h = √(area / k)` and shrink h by 5 % until
//! at least k candidates are taken; if more than k are taken, thin them by farthest-point
//! sampling from the one nearest the box centre. Each position gets its cheapest admissible
//! kind. Under a budget, k is the largest count whose grid layout fits the budget.
//! This file does no linear algebra beyond scoring whole layouts.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::constraints::Feasibility;
use super::criterion::{evaluate_set, Criterion};
use super::greedy::Limit;
use super::problem::Problem;

/// The best of `n_draws` random feasible layouts by `criterion`.
pub(crate) fn random_best(
    problem: &Problem,
    feas: &Feasibility,
    criterion: Criterion,
    limit: Limit,
    seed: u64,
    n_draws: usize,
) -> Vec<usize> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let pool: Vec<usize> = (0..problem.n_blocks())
        .filter(|&b| feas.admissible(b))
        .collect();
    let (max_count, budget) = match limit {
        Limit::Count(k) => (k, f64::INFINITY),
        Limit::Budget(b) => (usize::MAX, b),
    };
    let mut best: Option<(f64, Vec<usize>)> = None;
    for _ in 0..n_draws.max(1) {
        let mut order = pool.clone();
        let mut state = feas.with_chosen(&[]);
        let mut chosen = Vec::new();
        let mut left = budget;
        // Partial Fisher–Yates: draw until the layout is full or the pool is used up.
        for i in 0..order.len() {
            if chosen.len() >= max_count {
                break;
            }
            let j = rng.random_range(i..order.len());
            order.swap(i, j);
            let b = order[i];
            if state.can_add(b) && problem.block_cost[b] <= left {
                state.add(b);
                left -= problem.block_cost[b];
                chosen.push(b);
            }
        }
        let mut all = feas.kept_blocks.clone();
        all.extend_from_slice(&chosen);
        let value = evaluate_set(problem, &all, criterion);
        if best
            .as_ref()
            .is_none_or(|(bv, _)| criterion.improvement(*bv, value) > 0.0)
        {
            best = Some((value, chosen));
        }
    }
    best.map(|(_, c)| c).unwrap_or_default()
}

/// Cheapest admissible block at each candidate (ties: lower kind index), if any.
fn cheapest_block_per_candidate(problem: &Problem, feas: &Feasibility) -> Vec<Option<usize>> {
    let mut best: Vec<Option<usize>> = vec![None; problem.places.len()];
    for b in 0..problem.n_blocks() {
        if !feas.admissible(b) {
            continue;
        }
        let c = problem.block_candidate[b];
        let better = match best[c] {
            None => true,
            Some(o) => {
                let (cb, co) = (problem.block_cost[b], problem.block_cost[o]);
                cb < co || (cb <= co && problem.block_kind[b] < problem.block_kind[o])
            }
        };
        if better {
            best[c] = Some(b);
        }
    }
    best
}

/// The hand-laid grid layout of `k` new blocks (see the module text for the rule).
fn grid_count(problem: &Problem, feas: &Feasibility, k: usize) -> Vec<usize> {
    let cheapest = cheapest_block_per_candidate(problem, feas);
    let cands: Vec<usize> = (0..problem.places.len())
        .filter(|&c| cheapest[c].is_some())
        .collect();
    if cands.is_empty() || k == 0 {
        return Vec::new();
    }
    let pos = |c: usize| problem.places[c].position;
    let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
    for &c in &cands {
        for a in 0..2 {
            lo[a] = lo[a].min(pos(c)[a]);
            hi[a] = hi[a].max(pos(c)[a]);
        }
    }
    let (w, h_extent) = (hi[0] - lo[0], hi[1] - lo[1]);
    let scale = w.max(h_extent).max(1e-9);
    let (w, h_extent) = (w.max(1e-9 * scale), h_extent.max(1e-9 * scale));
    let mut h = if h_extent <= 1e-6 * w {
        w / k as f64
    } else if w <= 1e-6 * h_extent {
        h_extent / k as f64
    } else {
        (w * h_extent / k as f64).sqrt()
    };
    let mut picks: Vec<usize> = Vec::new();
    for _ in 0..400 {
        let nx = ((w / h).ceil() as usize).max(1);
        let ny = ((h_extent / h).ceil() as usize).max(1);
        if nx.saturating_mul(ny) > 64 * cands.len() + 64 {
            // A finer grid reaches no new mount: the constraints allow no more (keep the last).
            break;
        }
        let mut state = feas.with_chosen(&[]);
        let mut used = vec![false; problem.places.len()];
        picks.clear();
        for j in 0..ny {
            for i in 0..nx {
                let node = [lo[0] + (i as f64 + 0.5) * h, lo[1] + (j as f64 + 0.5) * h];
                let node = [node[0].min(hi[0].max(lo[0])), node[1].min(hi[1].max(lo[1]))];
                let nearest = cands
                    .iter()
                    .copied()
                    .filter(|&c| !used[c])
                    .map(|c| {
                        let p = pos(c);
                        ((p[0] - node[0]).powi(2) + (p[1] - node[1]).powi(2), c)
                    })
                    .min_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                let Some((d2, c)) = nearest else { continue };
                if d2 > 0.5 * h * h * (1.0 + 1e-12) {
                    continue;
                }
                let Some(b) = cheapest[c] else { continue };
                if state.can_add(b) {
                    state.add(b);
                    used[c] = true;
                    picks.push(b);
                }
            }
        }
        if picks.len() >= k {
            break;
        }
        h *= 0.95;
    }
    if picks.len() <= k {
        return picks;
    }
    // Farthest-point thinning, starting nearest the box centre.
    let centre = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
    let bpos = |b: usize| pos(problem.block_candidate[b]);
    let d2 = |a: [f64; 2], b: [f64; 2]| (a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2);
    let first = (0..picks.len())
        .min_by(|&a, &b| d2(bpos(picks[a]), centre).total_cmp(&d2(bpos(picks[b]), centre)))
        .unwrap_or(0);
    let mut chosen = vec![picks[first]];
    let mut min_d: Vec<f64> = picks
        .iter()
        .map(|&b| d2(bpos(b), bpos(picks[first])))
        .collect();
    while chosen.len() < k {
        let next = (0..picks.len())
            .max_by(|&a, &b| min_d[a].total_cmp(&min_d[b]).then(b.cmp(&a)))
            .unwrap_or(0);
        chosen.push(picks[next]);
        for (i, &b) in picks.iter().enumerate() {
            min_d[i] = min_d[i].min(d2(bpos(b), bpos(picks[next])));
        }
    }
    chosen
}

/// The hand-laid grid baseline under a count or a budget.
pub(crate) fn grid_layout(problem: &Problem, feas: &Feasibility, limit: Limit) -> Vec<usize> {
    match limit {
        Limit::Count(k) => grid_count(problem, feas, k),
        Limit::Budget(budget) => {
            let cheapest = (0..problem.n_blocks())
                .filter(|&b| feas.admissible(b))
                .map(|b| problem.block_cost[b])
                .fold(f64::INFINITY, f64::min);
            let n_positions = feas.n_admissible_positions();
            let mut k = if cheapest > 0.0 {
                ((budget / cheapest).floor() as usize).min(n_positions)
            } else {
                n_positions
            };
            while k > 0 {
                let layout = grid_count(problem, feas, k);
                let cost: f64 = layout.iter().map(|&b| problem.block_cost[b]).sum();
                if cost <= budget {
                    return layout;
                }
                k -= 1;
            }
            Vec::new()
        }
    }
}
