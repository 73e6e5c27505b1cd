//! [`rank`]: the one entry point that validates a request, runs the chosen method, turns its
//! order into a [`Layout`] with marginal gains and cumulative values ([`score_order`]), and
//! attaches the D bound and the gap. Methods live in their own files; this file only
//! dispatches and checks the request against the problem (count, budget, admissibility).

use super::baseline::{grid_layout, random_best};
use super::bound::{d_upper_bound_near, BoundReport};
use super::constraints::{Constraints, Feasibility};
use super::criterion::{evaluate_set, Criterion, InfoState};
use super::exchange::exchange;
use super::greedy::{greedy_order, greedy_order_from, order_within, Limit};
use super::problem::Problem;
use super::qr::lazy_pivoted_qr;
use super::{Layout, LayoutEntry, SelectError};

/// How the layout is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    Greedy,
    Qr,
    Exchange,
    Random,
    Grid,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::Greedy => "greedy",
            Method::Qr => "qr",
            Method::Exchange => "exchange",
            Method::Random => "random",
            Method::Grid => "grid",
        }
    }
}

/// A complete ranking request.
#[derive(Debug, Clone)]
pub struct RankOptions {
    pub criterion: Criterion,
    pub method: Method,
    pub limit: Limit,
    pub constraints: Constraints,
    /// Seed of the random baseline.
    pub seed: u64,
    /// Draws of the random baseline (the best is kept).
    pub n_random_draws: usize,
}

/// A ranked layout with its certificate.
#[derive(Debug, Clone)]
pub struct Ranking {
    pub layout: Layout,
    pub method: Method,
    pub criterion: Criterion,
    pub flat_prior: bool,
    /// D value (log det J) of the whole layout.
    pub d_value: f64,
    /// Upper bound on log det J over every layout within the limit.
    pub bound: BoundReport,
    /// `bound − d_value`, nats (≥ 0): how far the layout can at most be from the best.
    pub gap: f64,
    pub warnings: Vec<String>,
}

/// Marginal gains and cumulative values of the kept blocks followed by `order`.
pub fn score_order(
    problem: &Problem,
    kept: &[usize],
    order: &[usize],
    criterion: Criterion,
) -> Layout {
    let mut state = InfoState::new(problem.n_modes(), criterion == Criterion::E);
    let mut value = state.value(criterion, problem);
    let mut cost = 0.0;
    let entries = kept
        .iter()
        .map(|&b| (b, true))
        .chain(order.iter().map(|&b| (b, false)))
        .enumerate()
        .map(|(i, (b, kept))| {
            state.add_block(problem.rows.block(b));
            let after = state.value(criterion, problem);
            cost += problem.block_cost[b];
            let entry = LayoutEntry {
                rank: i + 1,
                candidate_idx: problem.block_candidate[b],
                kind_idx: problem.block_kind[b],
                marginal_gain: criterion.improvement(value, after),
                cumulative_criterion: after,
                cumulative_cost: cost,
                kept,
            };
            value = after;
            entry
        })
        .collect();
    Layout { entries }
}

fn check_request(problem: &Problem, feas: &Feasibility, limit: Limit) -> Result<(), SelectError> {
    let n_admissible = feas.n_admissible_positions();
    if n_admissible == 0 && feas.n_open_positions > 0 {
        // Every mount left after exclusions and removals holds a kept sensor.
        return Err(SelectError::AllMountsKept {
            n_open: feas.n_open_positions,
            n_kept: feas.kept_blocks.len(),
        });
    }
    if n_admissible == 0 {
        return Err(SelectError::NoAdmissibleCandidates {
            n_candidates: problem.places.len(),
        });
    }
    match limit {
        Limit::Count(0) => Err(SelectError::CountZero),
        Limit::Count(k) if k > n_admissible => Err(SelectError::CountTooLarge {
            requested: k,
            n_admissible,
        }),
        Limit::Count(_) => Ok(()),
        Limit::Budget(b) if !(b.is_finite() && b >= 0.0) => Err(SelectError::BadBudget(b)),
        Limit::Budget(b) => {
            let cheapest = (0..problem.n_blocks())
                .filter(|&i| feas.admissible(i))
                .min_by(|&x, &y| {
                    problem.block_cost[x]
                        .total_cmp(&problem.block_cost[y])
                        .then(x.cmp(&y))
                });
            match cheapest {
                Some(i) if problem.block_cost[i] > b => {
                    let (candidate, kind) = problem.block_name(i);
                    Err(SelectError::BudgetTooSmall {
                        budget: b,
                        cheapest: problem.block_cost[i],
                        candidate,
                        kind,
                    })
                }
                _ => Ok(()),
            }
        }
    }
}

/// Pivoted QR, continued by greedy once the chosen rows span the mode space.
fn qr_order(
    problem: &Problem,
    feas: &Feasibility,
    criterion: Criterion,
    limit: Limit,
) -> Vec<usize> {
    let (n_pick, budget) = match limit {
        Limit::Count(k) => (k, f64::INFINITY),
        Limit::Budget(b) => (usize::MAX, b),
    };
    let mut state = feas.with_chosen(&[]);
    let mut left = budget;
    let qr = lazy_pivoted_qr(&problem.rows, &feas.kept_blocks, n_pick, |b| {
        if state.can_add(b) && problem.block_cost[b] <= left {
            state.add(b);
            left -= problem.block_cost[b];
            true
        } else {
            false
        }
    });
    let mut order = qr.order;
    let rest = match limit {
        Limit::Count(k) => Limit::Count(k.saturating_sub(order.len())),
        Limit::Budget(_) => Limit::Budget(left),
    };
    if qr.rank_exhausted && rest != Limit::Count(0) {
        let more = greedy_order_from(problem, feas, &order, criterion, rest);
        order.extend(more);
    }
    order
}

/// Ranks sensors for `problem` as `options` asks.
pub fn rank(problem: &Problem, options: &RankOptions) -> Result<Ranking, SelectError> {
    let feas = Feasibility::new(problem, &options.constraints)?;
    check_request(problem, &feas, options.limit)?;
    let criterion = options.criterion;
    let limit = options.limit;
    let mut warnings = problem.warnings.clone();
    warnings.extend(feas.warnings.iter().cloned());
    let order = match options.method {
        Method::Greedy => greedy_order(problem, &feas, criterion, limit),
        Method::Qr => qr_order(problem, &feas, criterion, limit),
        Method::Exchange => {
            let start = greedy_order(problem, &feas, criterion, limit);
            let done = exchange(problem, &feas, criterion, limit, &start);
            if done.capped {
                warnings.push(format!(
                    "note: exchange stopped at its cap of {} swaps while swaps still improved the criterion; the layout is valid but may not be a local optimum",
                    done.n_swaps
                ));
            }
            order_within(problem, &feas, criterion, &done.set)
        }
        Method::Random => {
            let set = random_best(
                problem,
                &feas,
                criterion,
                limit,
                options.seed,
                options.n_random_draws,
            );
            order_within(problem, &feas, criterion, &set)
        }
        Method::Grid => {
            let set = grid_layout(problem, &feas, limit);
            order_within(problem, &feas, criterion, &set)
        }
    };
    if let Limit::Count(k) = limit {
        if order.len() < k {
            warnings.push(format!(
                "warning: only {} of the {k} requested sensors could be placed; the spacing, zone, kind or one-per-mount limits leave no other admissible mount",
                order.len()
            ));
        }
    }
    let layout = score_order(problem, &feas.kept_blocks, &order, criterion);
    let mut all = feas.kept_blocks.clone();
    all.extend_from_slice(&order);
    let d_value = evaluate_set(problem, &all, Criterion::D);
    let bound = d_upper_bound_near(problem, &feas, limit, &order);
    if !bound.converged {
        warnings.push(format!(
            "note: the optimality bound did not fully converge ({} Newton steps, {} passes over the candidates, working set of {}); it is still a valid upper bound, the gap may be overstated",
            bound.n_iterations, bound.n_passes, bound.n_active
        ));
    }
    let gap = (bound.bound - d_value).max(0.0);
    Ok(Ranking {
        layout,
        method: options.method,
        criterion,
        flat_prior: problem.flat_prior,
        d_value,
        bound,
        gap,
        warnings,
    })
}
