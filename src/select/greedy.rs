//! Greedy selection: add the block with the largest gain (or gain per unit cost) until the
//! count or the budget is used up, honouring the constraints.
//!
//! D uses lazy evaluation (Minoux 1978, "accelerated greedy"): the D gain
//! `log det(I + B P Bᵀ)` is submodular (it is 2 × a Gaussian mutual information), so a gain
//! computed earlier is an upper bound on the gain now. Only blocks whose stale bound could still
//! beat the best fresh gain are brought up to date (batched search in `lazy.rs`). Bringing a block up to date
//! applies only the posterior columns added since its last refresh (`S ← S − (B u)(B u)ᵀ` on
//! its cached `S = I + B P Bᵀ`), so a whole run costs O(k·n·r) at worst and far less in
//! practice; there is never a factorisation per candidate.
//!
//! A and E gains are not submodular (a sensor added now can raise another's gain later), so a
//! stale gain is no upper bound and lazy evaluation would not be exact; they are rescored every
//! step. A keeps `P bᵀ` for every row and updates it by one O(r) step per new posterior column,
//! so a score is the Sherman–Morrison trace reduction `‖Λ^{1/2}Pb‖²/(1 + bᵀPb)` (Woodbury with a
//! `p × p` solve for a `p`-row block): O(k·n·r) for a whole run, like D. E (λ_min) has no cheap
//! exact update for blocks; per step it does one `r × r` eigensolve of `J`, bounds every
//! candidate's new λ_min from above (Rayleigh quotient at the current minimum eigenvector and
//! Cauchy interlacing) and evaluates exactly only the candidates whose bound can still win,
//! best bound first: single rows by the secular equation of the rank-one update (Golub 1973,
//! O(r²)), multi-row blocks by a fresh `r × r` eigensolve — the one place a factorisation per
//! candidate remains, limited to the candidates the bound cannot rule out. Ties in E are
//! broken by the D gain.
//!
//! Budgets use cost-benefit greedy (gain per unit cost) guarded by the best single affordable
//! block and by the plain greedy within budget; the best of the three is returned, which keeps
//! the ½(1 − 1/e) guarantee of Khuller, Moss & Naor (1999) and Krause & Guestrin (2005).

use std::cmp::Ordering;

use rayon::prelude::*;

use super::constraints::Feasibility;
use super::criterion::{a_reduction_from, evaluate_set, Criterion, InfoState};
use super::dense::{symmetric_eigen, symmetric_min_eigenvalue};
use super::lazy::{lazy_argmax, Refresh};
use super::pool::PooledArgmax;
use super::problem::Problem;
use super::rows::dot;

/// How many sensors a layout may have beyond the kept ones.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Limit {
    /// Exactly this many new sensors (fewer only if the constraints run out).
    Count(usize),
    /// New sensors whose costs sum to at most this.
    Budget(f64),
}

impl Limit {
    /// Most new sensors and money left: a count leaves the money unbounded, a budget the count.
    pub(crate) fn count_and_budget(self) -> (usize, f64) {
        match self {
            Limit::Count(k) => (k, f64::INFINITY),
            Limit::Budget(budget) => (usize::MAX, budget),
        }
    }
}

/// Total order on f64 for heap keys.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Key(pub f64);
impl Eq for Key {}
impl PartialOrd for Key {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Key {
    fn cmp(&self, other: &Self) -> Ordering {
        self.0.total_cmp(&other.0)
    }
}

/// The lowest cost of any block: once the remaining budget is below it nothing more fits, so
/// a budgeted search stops instead of drawing every candidate only to drop it.
fn cheapest_cost(problem: &Problem) -> f64 {
    problem
        .block_cost
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .max(0.0)
}

/// Floor under costs for gain-per-cost keys, so free sensors rank first without dividing by 0.
fn cost_floor(problem: &Problem) -> f64 {
    1e-9 * problem.block_cost.iter().copied().fold(1.0, f64::max)
}

/// The kept sensors absorbed into a fresh state.
pub(crate) fn kept_state(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    track_dense: bool,
) -> InfoState {
    let mut state = InfoState::new(problem.n_modes(), track_dense);
    for &b in feas.kept_blocks.iter().chain(start) {
        state.add_block(problem.rows.block(b));
    }
    state
}

/// Cached `S_b = I + B_b P B_bᵀ` per block and how many posterior columns it has absorbed.
struct LazyGains {
    s_start: Vec<usize>,
    s: Vec<f64>,
    stamp: Vec<usize>,
}

impl LazyGains {
    fn new(problem: &Problem) -> Self {
        let rows = &problem.rows;
        let r = rows.n_modes();
        let mut s_start = Vec::with_capacity(rows.n_blocks() + 1);
        s_start.push(0);
        let mut s = Vec::new();
        for b in 0..rows.n_blocks() {
            let block = rows.block(b);
            let p = block.len() / r;
            for i in 0..p {
                for j in 0..p {
                    let v = dot(&block[i * r..(i + 1) * r], &block[j * r..(j + 1) * r]);
                    s.push(v + if i == j { 1.0 } else { 0.0 });
                }
            }
            s_start.push(s.len());
        }
        LazyGains {
            s_start,
            s,
            stamp: vec![0; rows.n_blocks()],
        }
    }

    /// D gain `log det S` from a cached `S` (row-major `p × p`).
    fn gain_of(s: &[f64]) -> f64 {
        if s.len() == 1 {
            return s[0].max(1.0).ln();
        }
        let p = (s.len() as f64).sqrt().round() as usize;
        super::dense::spd_log_det(s, p).unwrap_or(0.0).max(0.0)
    }

    fn gain(&self, b: usize) -> f64 {
        Self::gain_of(&self.s[self.s_start[b]..self.s_start[b + 1]])
    }

    /// `S` of block `b` brought up to date with the posterior columns added since its stamp;
    /// returns the new stamp. A single-row block stops early once `S < threshold`.
    fn updated(
        &self,
        problem: &Problem,
        state: &InfoState,
        b: usize,
        s: &mut [f64],
        threshold: f64,
    ) -> usize {
        let r = problem.n_modes();
        let block = problem.rows.block(b);
        let p = block.len() / r;
        s.copy_from_slice(&self.s[self.s_start[b]..self.s_start[b + 1]]);
        let n_u = state.n_u();
        if p == 1 {
            for j in self.stamp[b]..n_u {
                let v = dot(block, state.u_col(j));
                s[0] -= v * v;
                if s[0] < threshold && j + 1 < n_u {
                    return j + 1;
                }
            }
            return n_u;
        }
        let mut v = vec![0.0; p];
        for j in self.stamp[b]..state.n_u() {
            let u = state.u_col(j);
            for (i, vi) in v.iter_mut().enumerate() {
                *vi = dot(&block[i * r..(i + 1) * r], u);
            }
            for i in 0..p {
                for l in 0..p {
                    s[i * p + l] -= v[i] * v[l];
                }
            }
        }
        n_u
    }
}

/// Refreshes below this many items run on one thread (rayon overhead).
const PARALLEL_MIN: usize = 2048;

/// The greedy's side of the lazy arg-max: keys are D gains (or gains per unit cost).
struct GainSource<'a> {
    problem: &'a Problem,
    state: &'a InfoState,
    lazy: &'a mut LazyGains,
    per_cost: bool,
    floor: f64,
}

impl GainSource<'_> {
    fn key(&self, gain: f64, b: usize) -> f64 {
        if self.per_cost {
            gain / self.problem.block_cost[b].max(self.floor)
        } else {
            gain
        }
    }
}

impl Refresh for GainSource<'_> {
    fn stamps(&self) -> (&[usize], usize) {
        (&self.lazy.stamp, self.state.n_u())
    }

    fn refresh(&mut self, items: &[usize], threshold: f64, out: &mut [f64]) {
        let (problem, state) = (self.problem, self.state);
        let lazy = &*self.lazy;
        let single = items
            .iter()
            .all(|&b| lazy.s_start[b + 1] - lazy.s_start[b] == 1);
        if single {
            // Key threshold → threshold on S = e^gain (keys are gains, or gains per cost).
            let s_threshold = |b: usize| {
                let gain = if self.per_cost {
                    threshold * problem.block_cost[b].max(self.floor)
                } else {
                    threshold
                };
                if gain == f64::NEG_INFINITY {
                    f64::NEG_INFINITY
                } else {
                    gain.exp()
                }
            };
            let compute = |&b: &usize| {
                let mut s = [0.0];
                let stamp = lazy.updated(problem, state, b, &mut s, s_threshold(b));
                (s[0], stamp)
            };
            let values: Vec<(f64, usize)> = if items.len() >= PARALLEL_MIN {
                items.par_iter().map(compute).collect()
            } else {
                items.iter().map(compute).collect()
            };
            for ((&b, (v, stamp)), o) in items.iter().zip(values).zip(out.iter_mut()) {
                self.lazy.s[self.lazy.s_start[b]] = v;
                self.lazy.stamp[b] = stamp;
                *o = self.key(LazyGains::gain_of(&[v]), b);
            }
        } else {
            let compute = |&b: &usize| {
                let mut s = vec![0.0; lazy.s_start[b + 1] - lazy.s_start[b]];
                let stamp = lazy.updated(problem, state, b, &mut s, f64::NEG_INFINITY);
                (s, stamp)
            };
            let values: Vec<(Vec<f64>, usize)> = if items.len() >= PARALLEL_MIN {
                items.par_iter().map(compute).collect()
            } else {
                items.iter().map(compute).collect()
            };
            for ((&b, (v, stamp)), o) in items.iter().zip(values).zip(out.iter_mut()) {
                let range = self.lazy.s_start[b]..self.lazy.s_start[b + 1];
                self.lazy.s[range].copy_from_slice(&v);
                self.lazy.stamp[b] = stamp;
                *o = self.key(LazyGains::gain_of(&v), b);
            }
        }
    }
}

/// Lazy greedy on the D gain. `per_cost` ranks by gain per unit cost. Returns the new blocks
/// in the order chosen.
fn lazy_greedy_d(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    limit: Limit,
    per_cost: bool,
) -> Vec<usize> {
    if problem.rows.all_single() {
        return pooled_greedy_d(problem, feas, start, limit, per_cost);
    }
    let mut feas = feas.with_chosen(start);
    let mut state = kept_state(problem, &feas, start, false);
    let mut lazy = LazyGains::new(problem);
    let floor = cost_floor(problem);
    let mut bound: Vec<f64> = (0..problem.n_blocks())
        .map(|b| {
            if !feas.can_add(b) {
                return f64::NEG_INFINITY;
            }
            let gain = lazy.gain(b);
            if per_cost {
                gain / problem.block_cost[b].max(floor)
            } else {
                gain
            }
        })
        .collect();
    let (max_count, mut remaining) = limit.count_and_budget();
    let cheapest = cheapest_cost(problem);
    let mut order = Vec::new();
    let mut hot = Vec::new();
    while order.len() < max_count && remaining >= cheapest {
        let mut source = GainSource {
            problem,
            state: &state,
            lazy: &mut lazy,
            per_cost,
            floor,
        };
        let Some(b) = lazy_argmax(&mut bound, &mut hot, &mut source) else {
            break;
        };
        bound[b] = f64::NEG_INFINITY;
        if !feas.can_add(b) || problem.block_cost[b] > remaining {
            continue; // constraints and the remaining budget only tighten: drop for good
        }
        state.add_block(problem.rows.block(b));
        feas.add(b);
        remaining -= problem.block_cost[b];
        order.push(b);
    }
    order
}

/// [`lazy_greedy_d`] for single-row candidates: the arg-max of `S_b = 1 + b_bᵀ P b_b` (key:
/// the gain `ln S_b`, or the gain per cost) by the pool and sweep search of `pool.rs`, which
/// reads the rows in order instead of gathering them; same picks as the lazy search.
fn pooled_greedy_d(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    limit: Limit,
    per_cost: bool,
) -> Vec<usize> {
    let mut feas = feas.with_chosen(start);
    let mut state = kept_state(problem, &feas, start, false);
    let n = problem.n_blocks();
    let rows = &problem.rows;
    let values: Vec<f64> = (0..n).map(|b| 1.0 + rows.block_norm_sq(b)).collect();
    let alive: Vec<bool> = (0..n).map(|b| feas.can_add(b)).collect();
    let mut search = PooledArgmax::new(rows, values, alive);
    let floor = cost_floor(problem);
    let key = |b: usize, v: f64| {
        let gain = LazyGains::gain_of(&[v]);
        if per_cost {
            gain / problem.block_cost[b].max(floor)
        } else {
            gain
        }
    };
    let keep = |_: usize, _: &[f64], v: f64| v;
    let (max_count, mut remaining) = limit.count_and_budget();
    let cheapest = cheapest_cost(problem);
    let mut order = Vec::new();
    while order.len() < max_count && remaining >= cheapest {
        let Some((b, _)) = search.argmax(state.u_all(), &key, &keep) else {
            break;
        };
        search.remove(b);
        if !feas.can_add(b) || problem.block_cost[b] > remaining {
            continue; // constraints and the remaining budget only tighten: drop for good
        }
        state.add_block(problem.rows.block(b));
        feas.add(b);
        remaining -= problem.block_cost[b];
        order.push(b);
    }
    order
}

/// Exact E gain search: the block that most raises λ_min(J), ties broken by the D gain, then by
/// the lower index. `J` is the current unscaled information.
fn best_e_addition(
    problem: &Problem,
    j: &[f64],
    candidates: &[usize],
    d_state: &InfoState,
    per_cost: bool,
) -> Option<usize> {
    let r = problem.n_modes();
    let (d, v) = symmetric_eigen(j, r)?;
    let floor = cost_floor(problem);
    let tol = 1e-9
        * d[0]
            .abs()
            .max(d[r - 1].abs() * 1e-12)
            .max(f64::MIN_POSITIVE);
    let inv_sqrt: Vec<f64> = problem.prior_var.iter().map(|l| 1.0 / l.sqrt()).collect();
    // Upper bound on the new λ_min: Rayleigh quotient at the current minimum eigenvector, and
    // Cauchy interlacing (a rank-p update cannot lift λ_min above the (p+1)-th eigenvalue).
    let mut bounded: Vec<(f64, usize)> = candidates
        .iter()
        .map(|&b| {
            let block = problem.rows.block(b);
            let p = block.len() / r;
            let mut ray = 0.0;
            for row in block.chunks_exact(r) {
                let z: f64 = (0..r).map(|m| row[m] * inv_sqrt[m] * v[m * r]).sum();
                ray += z * z;
            }
            let mut ub = d[0] + ray;
            if p < r {
                ub = ub.min(d[p]);
            }
            let ub_gain = (ub - d[0]).max(0.0);
            let div = if per_cost {
                problem.block_cost[b].max(floor)
            } else {
                1.0
            };
            (ub_gain / div, b)
        })
        .collect();
    bounded.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    let mut best: Option<(f64, f64, usize)> = None; // (key, d gain, block)
    let mut trial = j.to_vec();
    for &(ub_key, b) in &bounded {
        if let Some((best_key, _, _)) = best {
            if ub_key < best_key - tol {
                break;
            }
        }
        let div = if per_cost {
            problem.block_cost[b].max(floor)
        } else {
            1.0
        };
        let gain = if ub_key * div <= tol {
            0.0
        } else {
            let block = problem.rows.block(b);
            if block.len() == r {
                // Rank-one update: the new λ_min is the root of the secular equation in
                // [d_0, d_1] (Golub 1973), O(r²) for the projection instead of an eigensolve.
                let h: Vec<f64> = (0..r).map(|m| block[m] * inv_sqrt[m]).collect();
                let c: Vec<f64> = (0..r)
                    .map(|i| (0..r).map(|m| v[m * r + i] * h[m]).sum())
                    .collect();
                (secular_min_root(&d, &c) - d[0]).max(0.0)
            } else {
                trial.copy_from_slice(j);
                for row in block.chunks_exact(r) {
                    for a in 0..r {
                        for c in 0..r {
                            trial[a * r + c] += row[a] * inv_sqrt[a] * row[c] * inv_sqrt[c];
                        }
                    }
                }
                (symmetric_min_eigenvalue(&trial, r)? - d[0]).max(0.0)
            }
        };
        let k = gain / div;
        let dg = d_state.d_gain(problem.rows.block(b));
        let better = match best {
            None => true,
            Some((bk, bd, bb)) => {
                if (k - bk).abs() > tol {
                    k > bk
                } else if (dg - bd).abs() > 1e-12 * (1.0 + bd.abs()) {
                    dg > bd
                } else {
                    b < bb
                }
            }
        };
        if better {
            best = Some((k, dg, b));
        }
    }
    best.map(|(_, _, b)| b)
}

/// Smallest eigenvalue of `diag(d) + c cᵀ` (`d` ascending): the root of the secular equation
/// `1 + Σ c_i² / (d_i − λ) = 0` in `[d_0, min(d_1, d_0 + ‖c‖²)]`, by bisection (the function
/// rises monotonically there; Golub 1973, "Some modified matrix eigenvalue problems").
pub(crate) fn secular_min_root(d: &[f64], c: &[f64]) -> f64 {
    let norm: f64 = c.iter().map(|v| v * v).sum();
    let mut lo = d[0];
    let mut hi = d[0] + norm;
    if d.len() > 1 {
        hi = hi.min(d[1]);
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        let g: f64 = 1.0
            + d.iter()
                .zip(c)
                .map(|(di, ci)| ci * ci / (di - mid))
                .sum::<f64>();
        if g < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// The block of `candidates` that most raises λ_min(J) from `state` (E criterion).
pub(crate) fn best_e_block(
    problem: &Problem,
    state: &InfoState,
    candidates: &[usize],
) -> Option<usize> {
    let j = state.information(&problem.prior_var);
    best_e_addition(problem, &j, candidates, state, false)
}

/// `P bᵀ` cached for every candidate row (A criterion), brought up to date with one O(r) step
/// per row and new posterior column `u` (`P ← P − u uᵀ`, so `P b ← P b − u (uᵀ b)`).
struct PosteriorRows {
    pb: Vec<f64>,
    n_u: usize,
}

/// Rows per task when updating [`PosteriorRows`] (fixed: bit-identical for any thread count).
const POST_CHUNK: usize = 1024;

impl PosteriorRows {
    fn new(problem: &Problem, state: &InfoState) -> Self {
        let r = problem.n_modes();
        let mut pb = vec![0.0; problem.rows.n_rows() * r];
        pb.par_chunks_mut(POST_CHUNK * r)
            .enumerate()
            .for_each(|(chunk, out)| {
                for (i, o) in out.chunks_exact_mut(r).enumerate() {
                    state.apply_p(problem.rows.row(chunk * POST_CHUNK + i), o);
                }
            });
        PosteriorRows {
            pb,
            n_u: state.n_u(),
        }
    }

    fn catch_up(&mut self, problem: &Problem, state: &InfoState) {
        let r = problem.n_modes();
        let from = self.n_u;
        if from == state.n_u() {
            return;
        }
        self.pb
            .par_chunks_mut(POST_CHUNK * r)
            .enumerate()
            .for_each(|(chunk, out)| {
                for (i, o) in out.chunks_exact_mut(r).enumerate() {
                    let row = problem.rows.row(chunk * POST_CHUNK + i);
                    for j in from..state.n_u() {
                        let u = state.u_col(j);
                        let c = dot(u, row);
                        o.iter_mut().zip(u).for_each(|(p, ui)| *p -= c * ui);
                    }
                }
            });
        self.n_u = state.n_u();
    }

    /// Decrease of trace J⁻¹ from adding block `b`, from the cached `P Bᵀ` rows.
    fn a_reduction(&self, problem: &Problem, b: usize) -> f64 {
        let r = problem.n_modes();
        let range = problem.rows.block_range(b);
        let pb = &self.pb[range.start * r..range.end * r];
        a_reduction_from(problem.rows.block(b), pb, &problem.prior_var)
    }
}

/// Greedy that rescores every feasible block each step (A and E). A gains are not submodular
/// (adding a sensor can raise another's trace reduction), so lazy evaluation would not be exact;
/// instead each rescoring is cheap: O(r) per row and step through [`PosteriorRows`].
fn rescoring_greedy(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    criterion: Criterion,
    limit: Limit,
    per_cost: bool,
) -> Vec<usize> {
    let mut feas = feas.with_chosen(start);
    let mut state = kept_state(problem, &feas, start, criterion == Criterion::E);
    let mut post = (criterion == Criterion::A).then(|| PosteriorRows::new(problem, &state));
    let floor = cost_floor(problem);
    let (max_count, mut remaining) = limit.count_and_budget();
    let mut order = Vec::new();
    while order.len() < max_count {
        let open: Vec<usize> = (0..problem.n_blocks())
            .filter(|&b| feas.can_add(b) && problem.block_cost[b] <= remaining)
            .collect();
        if open.is_empty() {
            break;
        }
        let chosen = match criterion {
            Criterion::E => {
                let j = state.information(&problem.prior_var);
                best_e_addition(problem, &j, &open, &state, per_cost)
            }
            _ => {
                let gains: Vec<f64> = match post.as_mut() {
                    Some(post) => {
                        post.catch_up(problem, &state);
                        let post = &*post;
                        let gain = |&b: &usize| post.a_reduction(problem, b);
                        if open.len() >= PARALLEL_MIN {
                            open.par_iter().map(gain).collect()
                        } else {
                            open.iter().map(gain).collect()
                        }
                    }
                    None => open
                        .iter()
                        .map(|&b| state.d_gain(problem.rows.block(b)))
                        .collect(),
                };
                let mut best: Option<(f64, usize)> = None;
                for (&b, &gain) in open.iter().zip(&gains) {
                    let k = if per_cost {
                        gain / problem.block_cost[b].max(floor)
                    } else {
                        gain
                    };
                    if best.is_none_or(|(bk, _)| k > bk) {
                        best = Some((k, b));
                    }
                }
                best.map(|(_, b)| b)
            }
        };
        let Some(b) = chosen else { break };
        state.add_block(problem.rows.block(b));
        feas.add(b);
        remaining -= problem.block_cost[b];
        order.push(b);
    }
    order
}

fn plain_greedy(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    criterion: Criterion,
    limit: Limit,
    per_cost: bool,
) -> Vec<usize> {
    match criterion {
        Criterion::D => lazy_greedy_d(problem, feas, start, limit, per_cost),
        _ => rescoring_greedy(problem, feas, start, criterion, limit, per_cost),
    }
}

/// Greedy order of new blocks (kept sensors excluded) for `criterion` under `limit`.
/// Under a budget: the best (by the criterion) of cost-benefit greedy, plain greedy within the
/// budget, and the best single affordable block.
pub fn greedy_order(
    problem: &Problem,
    feas: &Feasibility,
    criterion: Criterion,
    limit: Limit,
) -> Vec<usize> {
    greedy_order_from(problem, feas, &[], criterion, limit)
}

/// Like [`greedy_order`], continuing after the new blocks in `start` (already chosen; their cost
/// is not taken from `limit`, which applies to the blocks returned).
pub fn greedy_order_from(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    criterion: Criterion,
    limit: Limit,
) -> Vec<usize> {
    budgeted_with_guards(problem, feas, start, criterion, limit, Guards::ALL)
}

/// Which guards back up cost-benefit greedy under a budget (all of them outside tests).
#[derive(Debug, Clone, Copy)]
struct Guards {
    /// Plain greedy (largest gain first) within the budget (Krause & Guestrin 2005).
    plain: bool,
    /// The best single affordable block (Khuller, Moss & Naor 1999).
    single: bool,
}

impl Guards {
    const ALL: Guards = Guards {
        plain: true,
        single: true,
    };
}

fn budgeted_with_guards(
    problem: &Problem,
    feas: &Feasibility,
    start: &[usize],
    criterion: Criterion,
    limit: Limit,
    guards: Guards,
) -> Vec<usize> {
    match limit {
        Limit::Count(_) => plain_greedy(problem, feas, start, criterion, limit, false),
        Limit::Budget(_) => {
            let with_kept = |order: &[usize]| {
                let mut all = feas.kept_blocks.clone();
                all.extend_from_slice(start);
                all.extend_from_slice(order);
                evaluate_set(problem, &all, criterion)
            };
            let mut options = vec![plain_greedy(problem, feas, start, criterion, limit, true)];
            if guards.plain {
                options.push(plain_greedy(problem, feas, start, criterion, limit, false));
            }
            let single = if guards.single {
                plain_greedy(problem, feas, start, criterion, Limit::Count(1), false)
            } else {
                Vec::new()
            };
            if let (Some(&b), Limit::Budget(budget)) = (single.first(), limit) {
                if problem.block_cost[b] <= budget {
                    options.push(single);
                } else {
                    // The best affordable single block, scored directly.
                    let state = kept_state(problem, feas, start, criterion == Criterion::E);
                    let before = state.value(criterion, problem);
                    let open = feas.with_chosen(start);
                    let best = (0..problem.n_blocks())
                        .filter(|&c| open.can_add(c) && problem.block_cost[c] <= budget)
                        .map(|c| (criterion.improvement(before, with_kept(&[c])), c))
                        .max_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)));
                    if let Some((_, c)) = best {
                        options.push(vec![c]);
                    }
                }
            }
            let mut best: Option<(f64, Vec<usize>)> = None;
            for order in options {
                let v = with_kept(&order);
                let better = match &best {
                    None => true,
                    Some((bv, _)) => criterion.improvement(*bv, v) > 1e-12 * (1.0 + bv.abs()),
                };
                if better {
                    best = Some((v, order));
                }
            }
            best.map(|(_, o)| o).unwrap_or_default()
        }
    }
}

/// Orders a fixed set of new blocks greedily (for exchange, random and grid layouts), so their
/// table reads like a ranking: each step adds the member with the largest gain.
pub(crate) fn order_within(
    problem: &Problem,
    feas: &Feasibility,
    criterion: Criterion,
    set: &[usize],
) -> Vec<usize> {
    let mut state = kept_state(problem, feas, &[], criterion == Criterion::E);
    let mut left: Vec<usize> = set.to_vec();
    let mut order = Vec::with_capacity(set.len());
    while !left.is_empty() {
        let before = state.value(criterion, problem);
        let mut best: Option<(f64, usize)> = None;
        for (i, &b) in left.iter().enumerate() {
            let gain = match criterion {
                Criterion::D => state.d_gain(problem.rows.block(b)),
                Criterion::A => state.a_reduction(problem.rows.block(b), &problem.prior_var),
                Criterion::E => {
                    let mut trial = state.clone();
                    trial.add_block(problem.rows.block(b));
                    trial.value(criterion, problem) - before
                }
            };
            if best.is_none_or(|(bg, _)| gain > bg) {
                best = Some((gain, i));
            }
        }
        let (_, i) = best.expect("left is not empty");
        let b = left.remove(i);
        state.add_block(problem.rows.block(b));
        order.push(b);
    }
    order
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::select::{CandidatePlace, CandidateRows, Constraints, Prior};

    /// The pool-and-sweep search where the pool is a third of the candidates (so it sweeps
    /// again and again): plain and cost-benefit greedy pick what the textbook eager greedy
    /// picks, every gain recomputed from scratch each step (common practice).
    #[test]
    fn pooled_greedy_equals_eager_greedy_beyond_the_pool() {
        use crate::select::evaluate_set;
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let (n, r) = (12_000, 5);
        let data: Vec<f64> = (0..n * r).map(|_| rng.random_range(-1.0..1.0)).collect();
        let costs: Vec<f64> = (0..n).map(|_| rng.random_range(1.0..4.0)).collect();
        let problem = Problem::from_noise_whitened(
            CandidateRows::from_single_rows(r, data),
            (0..n).collect(),
            vec![0; n],
            costs.clone(),
            &Prior::Energies((0..r).map(|i| 0.6f64.powi(i as i32)).collect()),
            (0..n)
                .map(|i| CandidatePlace {
                    id: format!("c{i}"),
                    position: [i as f64, 0.0],
                    zone: String::new(),
                })
                .collect(),
            vec!["p".into()],
        )
        .unwrap();
        let c = Constraints::default();
        let feas = Feasibility::new(&problem, &c).unwrap();
        let floor = cost_floor(&problem);
        for (limit, per_cost) in [
            (Limit::Count(6), false),
            (Limit::Budget(9.0), true),
            (Limit::Budget(9.0), false),
        ] {
            let pooled = plain_greedy(&problem, &feas, &[], Criterion::D, limit, per_cost);
            let (max_count, mut remaining) = limit.count_and_budget();
            let mut eager: Vec<usize> = Vec::new();
            while eager.len() < max_count {
                let base = evaluate_set(&problem, &eager, Criterion::D);
                let best = (0..n)
                    .filter(|b| !eager.contains(b) && costs[*b] <= remaining)
                    .map(|b| {
                        let mut set = eager.clone();
                        set.push(b);
                        let gain = evaluate_set(&problem, &set, Criterion::D) - base;
                        let per = if per_cost { costs[b].max(floor) } else { 1.0 };
                        (gain / per, b)
                    })
                    .max_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)));
                let Some((_, b)) = best else { break };
                remaining -= costs[b];
                eager.push(b);
            }
            assert!(eager.len() >= 3, "{limit:?}: {eager:?}");
            assert_eq!(pooled, eager, "{limit:?}, per cost {per_cost}");
        }
    }

    /// Khuller, Moss & Naor (1999): cheap sensor with a tiny gain (best gain per cost) versus
    /// one that costs the whole budget. Cost-benefit greedy alone is arbitrarily bad here; the
    /// best-single guard on its own (plain-greedy guard off) must pick the expensive sensor.
    /// Fails if the best-single guard is removed.
    #[test]
    fn best_single_guard_decides_adversarial_budget() {
        let problem = Problem::from_noise_whitened(
            CandidateRows::from_single_rows(2, vec![0.01, 0.0, 0.0, 1000.0]),
            vec![0, 1],
            vec![0, 0],
            vec![1e-4, 100.0],
            &Prior::Energies(vec![1.0, 1.0]),
            (0..2)
                .map(|i| CandidatePlace {
                    id: format!("c{i}"),
                    position: [i as f64, 0.0],
                    zone: String::new(),
                })
                .collect(),
            vec!["p".into()],
        )
        .unwrap();
        let c = Constraints::default();
        let feas = Feasibility::new(&problem, &c).unwrap();
        let run = |plain, single| {
            budgeted_with_guards(
                &problem,
                &feas,
                &[],
                Criterion::D,
                Limit::Budget(100.0),
                Guards { plain, single },
            )
        };
        // Cost-benefit greedy alone: the cheap sensor, ≈ 10⁻⁴ nats of the optimum's 13.8.
        assert_eq!(run(false, false), vec![0]);
        assert_eq!(run(false, true), vec![1]);
        assert_eq!(run(true, false), vec![1]);
        assert_eq!(
            greedy_order(&problem, &feas, Criterion::D, Limit::Budget(100.0)),
            vec![1]
        );
    }
}
