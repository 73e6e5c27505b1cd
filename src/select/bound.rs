//! Upper bound on the best D criterion any feasible layout can reach: the convex relaxation of
//! Joshi & Boyd (2009), `max log det(Λ⁻¹ + Σ_b z_b H_bᵀR_b⁻¹H_b)` over `0 ≤ z ≤ 1` with
//! `Σ z ≤ k` (count) or `Σ cost_b z_b ≤ B` (budget), kept sensors fixed at `z = 1`.
//!
//! Every integer layout that meets the count or budget is a point of this polytope, so the
//! relaxed maximum bounds the D value of every layout, whatever the spacing, zone, kind and
//! one-per-mount constraints (dropping constraints only enlarges the set). The maximum is
//! approached by projected gradient ascent with Armijo backtracking; the bound we report is
//! the Frank–Wolfe certificate `f(z) + max_{s ∈ C} ∇f(z)ᵀ(s − z)`, which is ≥ the relaxed
//! maximum at *any* feasible `z` because `f` is concave — so it stays a true upper bound even if
//! the iteration is stopped early; stopping early only makes the gap look larger. The gradient
//! is `∂f/∂z_b = trace(B_b M⁻¹ B_bᵀ)`, O(n·r²) per iteration with one Cholesky of `M`.
//!
//! With the flat prior the bound is on log det(εI + Σ z HᵀR⁻¹H) with the same ε as the layout
//! criterion, so layout value and bound are comparable and the bound is valid for that
//! regularised criterion (the classical criterion is its ε → 0 limit).

use super::constraints::Feasibility;
use super::dense::{cholesky_in_place, forward_solve};
use super::greedy::Limit;
use super::problem::Problem;

/// The certified upper bound and how it was reached.
#[derive(Debug, Clone)]
pub struct BoundReport {
    /// Upper bound on log det J over all layouts within the limit.
    pub bound: f64,
    /// log det J at the best relaxed point found (a lower bound on the relaxed maximum).
    pub relaxed_value: f64,
    pub n_iterations: usize,
    /// True when the certificate closed to the tolerance.
    pub converged: bool,
}

/// Stop when the certificate is this close to the relaxed value (nats, absolute + relative).
const ABS_TOL: f64 = 1e-4;
const REL_TOL: f64 = 1e-6;
const MAX_ITERATIONS: usize = 400;

struct Relaxation<'a> {
    problem: &'a Problem,
    vars: Vec<usize>,
    base: Vec<f64>,
    limit: Limit,
}

impl Relaxation<'_> {
    /// `(f(z), gradient)` in scaled coordinates; `None` if M(z) is not positive definite.
    fn evaluate(&self, z: &[f64], want_gradient: bool) -> Option<(f64, Vec<f64>)> {
        let r = self.problem.n_modes();
        let rows = &self.problem.rows;
        let mut m = self.base.clone();
        for (&b, &zb) in self.vars.iter().zip(z) {
            if zb <= 0.0 {
                continue;
            }
            for row in rows.block(b).chunks_exact(r) {
                for i in 0..r {
                    let f = zb * row[i];
                    for j in 0..=i {
                        m[i * r + j] += f * row[j];
                    }
                }
            }
        }
        for i in 0..r {
            for j in 0..i {
                m[j * r + i] = m[i * r + j];
            }
        }
        cholesky_in_place(&mut m, r)?;
        let value: f64 = (0..r).map(|i| 2.0 * m[i * r + i].ln()).sum();
        if !want_gradient {
            return Some((value, Vec::new()));
        }
        let mut work = vec![0.0; r];
        let gradient = self
            .vars
            .iter()
            .map(|&b| {
                rows.block(b)
                    .chunks_exact(r)
                    .map(|row| {
                        work.copy_from_slice(row);
                        forward_solve(&m, r, &mut work);
                        work.iter().map(|v| v * v).sum::<f64>()
                    })
                    .sum()
            })
            .collect();
        Some((value, gradient))
    }

    fn cost(&self, i: usize) -> f64 {
        self.problem.block_cost[self.vars[i]]
    }

    /// Euclidean projection onto the polytope: `clip(y − τ·a, 0, 1)` with the smallest τ ≥ 0
    /// that satisfies the limit (a = 1 for a count, a = cost for a budget).
    fn project(&self, y: &[f64]) -> Vec<f64> {
        let (weight, cap): (Box<dyn Fn(usize) -> f64>, f64) = match self.limit {
            Limit::Count(k) => (Box::new(|_| 1.0), k as f64),
            Limit::Budget(b) => (Box::new(|i| self.cost(i)), b),
        };
        let at = |tau: f64| -> Vec<f64> {
            y.iter()
                .enumerate()
                .map(|(i, &v)| (v - tau * weight(i)).clamp(0.0, 1.0))
                .collect()
        };
        let used = |z: &[f64]| {
            z.iter()
                .enumerate()
                .map(|(i, v)| v * weight(i))
                .sum::<f64>()
        };
        let z0 = at(0.0);
        if used(&z0) <= cap {
            return z0;
        }
        let mut hi = y
            .iter()
            .enumerate()
            .filter(|&(i, _)| weight(i) > 0.0)
            .map(|(i, &v)| v / weight(i))
            .fold(0.0, f64::max)
            .max(0.0)
            + 1.0;
        let mut lo = 0.0;
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            if used(&at(mid)) > cap {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let mut z = at(hi);
        // Guard against rounding: shrink uniformly if still a hair over.
        let u = used(&z);
        if u > cap && u > 0.0 {
            let f = cap / u;
            z.iter_mut().for_each(|v| *v *= f);
        }
        z
    }

    /// `max_{s ∈ C} gᵀ s` (the linear maximisation oracle; g ≥ 0).
    fn linear_max(&self, g: &[f64]) -> f64 {
        match self.limit {
            Limit::Count(k) => {
                let mut sorted: Vec<f64> = g.iter().map(|v| v.max(0.0)).collect();
                sorted.sort_by(|a, b| b.total_cmp(a));
                sorted.iter().take(k).sum()
            }
            Limit::Budget(budget) => {
                // Fractional knapsack: free items first, then by value per cost.
                let mut total = 0.0;
                let mut items: Vec<(f64, f64)> = Vec::new();
                for (i, &gi) in g.iter().enumerate() {
                    let c = self.cost(i);
                    if gi <= 0.0 {
                        continue;
                    }
                    if c <= 0.0 {
                        total += gi;
                    } else {
                        items.push((gi, c));
                    }
                }
                items.sort_by(|a, b| (b.0 / b.1).total_cmp(&(a.0 / a.1)));
                let mut left = budget;
                for (gi, c) in items {
                    if left <= 0.0 {
                        break;
                    }
                    let take = (left / c).min(1.0);
                    total += take * gi;
                    left -= take * c;
                }
                total
            }
        }
    }
}

/// Certified upper bound on log det J for layouts of the kept sensors plus new blocks within
/// `limit` (static admissibility from `feas`).
pub fn d_upper_bound(problem: &Problem, feas: &Feasibility, limit: Limit) -> BoundReport {
    let r = problem.n_modes();
    let mut base = vec![0.0; r * r];
    (0..r).for_each(|i| base[i * r + i] = 1.0);
    for &b in &feas.kept_blocks {
        for row in problem.rows.block(b).chunks_exact(r) {
            for i in 0..r {
                for j in 0..r {
                    base[i * r + j] += row[i] * row[j];
                }
            }
        }
    }
    let vars: Vec<usize> = (0..problem.n_blocks())
        .filter(|&b| feas.admissible(b))
        .collect();
    let relax = Relaxation {
        problem,
        vars,
        base,
        limit,
    };
    let n = relax.vars.len();
    let offset = problem.log_det_prior_inv;
    let start = match limit {
        Limit::Count(k) => vec![(k as f64 / n.max(1) as f64).min(1.0); n],
        Limit::Budget(b) => {
            let total: f64 = (0..n).map(|i| relax.cost(i)).sum();
            let t = if total > 0.0 {
                (b / total).min(1.0)
            } else {
                1.0
            };
            vec![t; n]
        }
    };
    let mut z = relax.project(&start);
    let Some((mut f, mut g)) = relax.evaluate(&z, true) else {
        return BoundReport {
            bound: f64::INFINITY,
            relaxed_value: f64::NEG_INFINITY,
            n_iterations: 0,
            converged: false,
        };
    };
    let mut best_bound = f64::INFINITY;
    let mut step = 1.0 / g.iter().copied().fold(1e-12, f64::max);
    let mut converged = false;
    let mut n_iterations = 0;
    for iteration in 0..MAX_ITERATIONS {
        n_iterations = iteration + 1;
        let gz: f64 = g.iter().zip(&z).map(|(a, b)| a * b).sum();
        let certificate = f + relax.linear_max(&g) - gz;
        best_bound = best_bound.min(certificate);
        if best_bound - f <= ABS_TOL + REL_TOL * f.abs() {
            converged = true;
            break;
        }
        // Armijo backtracking along the projection arc.
        let mut accepted = false;
        for _ in 0..40 {
            let y: Vec<f64> = z.iter().zip(&g).map(|(zi, gi)| zi + step * gi).collect();
            let trial = relax.project(&y);
            let ascent: f64 = g
                .iter()
                .zip(trial.iter().zip(&z))
                .map(|(gi, (t, zi))| gi * (t - zi))
                .sum();
            if let Some((ft, _)) = relax.evaluate(&trial, false) {
                if ft >= f + 1e-4 * ascent && ascent > 0.0 {
                    z = trial;
                    accepted = true;
                    break;
                }
            }
            step *= 0.5;
        }
        if !accepted {
            break;
        }
        step *= 2.0;
        match relax.evaluate(&z, true) {
            Some((fz, gz)) => {
                f = fz;
                g = gz;
            }
            None => break,
        }
    }
    BoundReport {
        bound: best_bound + offset,
        relaxed_value: f + offset,
        n_iterations,
        converged,
    }
}
