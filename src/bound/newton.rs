//! Newton's method for `max Phi(p)` over the simplex (and linear routability constraints
//! `A p = 0`), in the log domain: steps are taken in `u = ln p` and `p <- p * exp(du)`, so every
//! component stays positive and keeps full relative accuracy however small it becomes.
//!
//! Each step solves the KKT system of the quadratic model,
//! `[M, p, (A D)^T; p^T, 0, 0; A D, 0, 0] [du; nu; mu] = [-D g; 0; -A p]` with `M = D H D`
//! (`D = diag p`), after symmetric Jacobi scaling, by sparse LU; a backtracking line search keeps
//! `Phi` from decreasing. Used to polish the conic solver's answer and as a standalone solver
//! started from the baseline steady state (always feasible: `R pi = 0`). Reference: Boyd &
//! Vandenberghe, *Convex Optimization* (2004), section 10.2 (Newton's method with equality
//! constraints).

use super::objective::Objective;
use crate::linalg::{SparseLu, SymbolicReuse};
use crate::steady::SolveError;
use faer::sparse::Triplet;
use faer::Mat;

/// A plain Newton step larger than this (in `ln p`; e^-700 is near the end of the double
/// range) is replaced by the damped one.
const WILD_STEP: f64 = 700.0;

/// Share of the curvature term of `ln p` coordinates used by the damped step: shrinking
/// components then move by up to about 16 e-folds per iteration. Measured on the 2 x 10^4
/// banded benchmark network, whose optimum falls linearly along the ring to e^-790: 1 made
/// it crawl; 1/32 and 1/128 let the far states fall past their optimum (to e^-5800 at 1/128),
/// and climbing back took longer than the descent saved.
const DAMPING: f64 = 1.0 / 16.0;

/// Damped steps continue until their largest component is below this share of `1/DAMPING`.
const DAMPED_EXIT: f64 = 0.5;

/// Largest step (e-folds) the line search starts from.
const STEP_CAP: f64 = 30.0;

/// Iterations without progress (a rise of `Phi` beyond round-off, or a 0.1% smaller certified
/// gap) before giving up.
const STALL_ITERATIONS: usize = 40;
/// The same once the relative gap is below 1e-10.
const STALL_ITERATIONS_NEAR: usize = 5;

/// Linear equality constraints `A p = 0`, one sparse row each.
#[derive(Debug, Clone, Default)]
pub struct Constraints {
    pub rows: Vec<Vec<(usize, f64)>>,
}

impl Constraints {
    pub fn residuals(&self, p: &[f64]) -> Vec<f64> {
        self.rows
            .iter()
            .map(|row| row.iter().map(|&(k, a)| a * p[k]).sum())
            .collect()
    }
}

/// Settings of the Newton solve.
#[derive(Debug, Clone, Copy)]
pub struct NewtonSettings {
    /// Iteration limit. Default 200.
    pub max_iterations: usize,
    /// Stop when the certified gap is below this fraction of `|Phi|` (plus a round-off floor).
    /// Default 1e-12 (reports require 1e-8; much below 1e-12 is round-off on large networks).
    pub relative_gap: f64,
}

impl Default for NewtonSettings {
    fn default() -> Self {
        Self {
            max_iterations: 200,
            relative_gap: 1e-12,
        }
    }
}

/// A point with its certificate.
#[derive(Debug, Clone)]
pub struct Certified {
    pub log_p: Vec<f64>,
    pub p: Vec<f64>,
    /// `Phi(p)` in kT per time unit.
    pub value: f64,
    /// A proven upper bound on the constrained maximum of `Phi`.
    pub upper: f64,
    /// Newton steps taken, and how many of them needed a new symbolic analysis.
    pub steps: usize,
    pub analyses: usize,
}

/// `ln p` normalised so that `sum p = 1`.
pub fn normalise_logs(log_p: &mut [f64]) {
    let top = log_p.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let lse = top + log_p.iter().map(|l| (l - top).exp()).sum::<f64>().ln();
    log_p.iter_mut().for_each(|l| *l -= lse);
}

/// The Frank-Wolfe / Lagrangian certificate at `p`: for concave `Phi` and any multipliers `mu`,
/// `max { Phi(q) : q in simplex, A q = 0 } <= Phi(p) + max_i h_i - h . p + mu . (A p)`
/// with `h = g + A^T mu`.
pub fn certificate(
    objective: &Objective,
    constraints: &Constraints,
    log_p: &[f64],
    p: &[f64],
    mu: &[f64],
) -> f64 {
    let mut h = objective.gradient(log_p);
    for (row, m) in constraints.rows.iter().zip(mu) {
        for &(k, a) in row {
            h[k] += a * m;
        }
    }
    let top = h.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mean: f64 = h.iter().zip(p).map(|(h, p)| h * p).sum();
    let infeasibility: f64 = constraints
        .residuals(p)
        .iter()
        .zip(mu)
        .map(|(r, m)| r * m)
        .sum();
    objective.value(p, log_p) + (top - mean).max(0.0) + infeasibility
}

/// Maximises `Phi` from the interior start `log_p` (any normalisation). It cannot fail: a
/// singular step ends the iteration, and the result always carries a valid certificate.
pub fn maximise(
    objective: &Objective,
    constraints: &Constraints,
    start: &[f64],
    settings: &NewtonSettings,
) -> Certified {
    let mut log_p = start.to_vec();
    normalise_logs(&mut log_p);
    let mut p: Vec<f64> = log_p.iter().map(|l| l.exp()).collect();
    let mut value = objective.value(&p, &log_p);
    let mut mu = vec![0.0; constraints.rows.len()];
    let mut best_upper = certificate(objective, constraints, &log_p, &p, &mu);
    let scale = objective.exit.iter().copied().fold(0.0, f64::max);
    let mut iterations = 0;
    let mut last_progress = 0;
    let mut analyses = Analyses::default();
    // Once a plain step has been wild, damped steps follow until they move less than the
    // damping allows (each wild plain step costs a factorisation for nothing).
    let mut damped = false;
    while iterations < settings.max_iterations {
        let floor = 16.0 * objective.value_roundoff(&p, &log_p) + 1e-15 * scale;
        if best_upper - value <= settings.relative_gap * value.abs() + floor {
            break;
        }
        iterations += 1;
        // The plain Newton step is exact for decoupled tiny components (it jumps straight to
        // their level); when it is wild, fall back to the damped model.
        // A singular system (possible once the iterate is at working precision) ends the
        // polish at the best certified point so far.
        let Ok((mut du, mut new_mu)) =
            newton_step(objective, constraints, &p, &log_p, damped, &mut analyses)
        else {
            break;
        };
        if !damped && du.iter().any(|d| d.abs() > WILD_STEP) {
            let Ok(step) = newton_step(objective, constraints, &p, &log_p, true, &mut analyses)
            else {
                break;
            };
            (du, new_mu) = step;
            damped = true;
        }
        let largest = du.iter().map(|d| d.abs()).fold(0.0, f64::max);
        if damped && largest < DAMPED_EXIT / DAMPING {
            damped = false;
        }
        let upper = certificate(objective, constraints, &log_p, &p, &new_mu);
        if upper < best_upper {
            best_upper = upper;
        }
        mu = new_mu;
        // Backtracking: the largest step in 1, 1/2, 1/4, ... that does not decrease Phi.
        let mut alpha: f64 = if largest > STEP_CAP {
            STEP_CAP / largest
        } else {
            1.0
        };
        let mut accepted = false;
        for _ in 0..60 {
            let mut trial: Vec<f64> = log_p.iter().zip(&du).map(|(l, d)| l + alpha * d).collect();
            normalise_logs(&mut trial);
            let trial_p: Vec<f64> = trial.iter().map(|l| l.exp()).collect();
            let trial_value = objective.value(&trial_p, &trial);
            let noise = 4.0 * objective.value_roundoff(&trial_p, &trial);
            if trial_value.is_finite() && trial_value >= value - noise {
                accepted = true;
                if trial_value > value + noise {
                    last_progress = iterations;
                }
                log_p = trial;
                p = trial_p;
                value = trial_value;
                break;
            }
            alpha *= 0.5;
        }
        let upper = certificate(objective, constraints, &log_p, &p, &mu);
        let nearly = best_upper - value <= 1e-10 * value.abs().max(1e-300);
        // Far from the end any visible shrinking of the gap is progress; near it (far below
        // what reports need) only halving is, so that round-off plateaus end quickly.
        let progress = if nearly { 0.5 } else { 1e-3 };
        if upper < best_upper - progress * (best_upper - value) {
            last_progress = iterations;
        }
        best_upper = best_upper.min(upper);
        let at_roundoff = alpha == 1.0 && largest < 1e-15;
        let window = if nearly {
            STALL_ITERATIONS_NEAR
        } else {
            STALL_ITERATIONS
        };
        let stalled = iterations - last_progress > window;
        if !accepted || at_roundoff || stalled {
            break; // converged to working precision, or no progress possible there
        }
    }
    Certified {
        log_p,
        p,
        value,
        upper: best_upper.max(value),
        steps: iterations,
        analyses: analyses.reduced.analyses + analyses.damped.analyses + analyses.bordered.analyses,
    }
}

/// The symbolic analyses kept across Newton steps, one per kind of linear system (their
/// patterns differ; the reduced one also depends on the state held fixed).
#[derive(Default)]
struct Analyses {
    reduced: SymbolicReuse,
    damped: SymbolicReuse,
    bordered: SymbolicReuse,
}

/// The Newton matrix in `ln p` coordinates, each row divided by `p_k` and then by its
/// diagonal magnitude.
///
/// Row `k` of `D^-1 M` is the derivative of the stationarity equation `g_k = lambda` in
/// `u = ln p`: zero row sum, off-diagonal entries `r_lk + r_kl p_l / p_k >= 0`, diagonal
/// `-(exit_k + inflow_k / p_k)`. It is the generator of a reversible chain with stationary law
/// `p`, diagonally dominant, and needs no `p_k` itself, only ratios of neighbours: states
/// whose probability is below the smallest double (near e^-745 and beyond on large networks)
/// keep well-scaled rows. (Scaling `M` symmetrically by `1/sqrt(|M_kk|)` instead, as an
/// earlier version did, needs `p_k` and broke down there.)
struct ScaledRows {
    /// Entries `(row, column, value)`, diagonal `-1` in every row.
    entries: Vec<(usize, usize, f64)>,
    /// `ln` of each row's diagonal magnitude before scaling (damping included).
    log_scale: Vec<f64>,
}

impl ScaledRows {
    /// `damping` is `(g, lambda)`: the damped model adds `DAMPING * min(g_k - lambda, 0)` to
    /// the diagonal (the row-scaled share of the curvature of `ln p` coordinates).
    fn new(objective: &Objective, log_p: &[f64], damping: Option<(&[f64], f64)>) -> Self {
        let n = objective.n;
        let log_inflow = objective.gradient_parts(log_p).log_inflow;
        let mut log_scale: Vec<f64> = (0..n)
            .map(|k| log_add(objective.exit[k].ln(), log_inflow[k]))
            .collect();
        if let Some((g, lambda)) = damping {
            for (k, scale) in log_scale.iter_mut().enumerate() {
                let extra = DAMPING * (lambda - g[k]);
                if extra > 0.0 {
                    *scale = log_add(*scale, extra.ln());
                }
            }
        }
        let mut entries = Vec::with_capacity(2 * objective.jumps.len() + n);
        for j in &objective.jumps {
            let (s, t) = (j.source, j.target);
            // Jump s -> t: r in row s (column t), r p_s / p_t in row t (column s).
            entries.push((s, t, (j.rate.ln() - log_scale[s]).exp()));
            let inflow = j.rate.ln() + log_p[s] - log_p[t];
            entries.push((t, s, (inflow - log_scale[t]).exp()));
        }
        entries.extend((0..n).map(|k| (k, k, -1.0)));
        Self { entries, log_scale }
    }

    /// `v_k` divided by row `k`'s scale.
    fn scale(&self, k: usize, v: f64) -> f64 {
        v * (-self.log_scale[k]).exp()
    }
}

/// `ln(e^a + e^b)` without overflow; `-inf` terms drop out.
fn log_add(a: f64, b: f64) -> f64 {
    let (high, low) = (a.max(b), a.min(b));
    if low == f64::NEG_INFINITY {
        high
    } else {
        high + (low - high).exp().ln_1p()
    }
}

/// One Newton direction `du` (in `ln p`) and the constraint multipliers `mu`.
fn newton_step(
    objective: &Objective,
    constraints: &Constraints,
    p: &[f64],
    log_p: &[f64],
    damped: bool,
    analyses: &mut Analyses,
) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
    let g = objective.gradient(log_p);
    // lambda = p . g = Phi(p) (Euler's relation: Phi is homogeneous of degree one).
    let lambda: f64 = g.iter().zip(p).map(|(g, p)| g * p).sum();
    let rows = ScaledRows::new(objective, log_p, damped.then_some((&g[..], lambda)));
    let (du, mu) = if !constraints.rows.is_empty() {
        bordered_solve(&rows, p, constraints, &g, &mut analyses.bordered)?
    } else if damped {
        (damped_solve(&rows, p, &g, &mut analyses.damped)?, Vec::new())
    } else {
        (
            reduced_solve(&rows, p, &g, lambda, &mut analyses.reduced)?,
            Vec::new(),
        )
    };
    if du.iter().any(|d| !d.is_finite()) {
        return Err(SolveError::Unresolved(
            "the Newton system of the bound is singular".into(),
        ));
    }
    Ok((du, mu))
}

/// Solves `A X = B` for the columns of `B` with one sparse LU of `A` (given by triplets).
fn solve_columns(
    size: usize,
    entries: &[(usize, usize, f64)],
    columns: &[Vec<f64>],
    reuse: &mut SymbolicReuse,
) -> Result<Vec<Vec<f64>>, SolveError> {
    let triplets: Vec<Triplet<usize, usize, f64>> = entries
        .iter()
        .map(|&(k, l, v)| Triplet::new(k, l, v))
        .collect();
    let mut rhs = Mat::<f64>::from_fn(size, columns.len(), |i, j| columns[j][i]);
    SparseLu::factor_reusing(size, &triplets, reuse)?.solve_in_place(rhs.as_mut());
    Ok((0..columns.len())
        .map(|j| (0..size).map(|i| rhs[(i, j)]).collect())
        .collect())
}

/// Undamped and unconstrained: `M 1 = 0` (Phi is 1-homogeneous), so with `nu = -p . g` (from
/// `1' M = 0` and `1' p = 1`) the system `D^-1 M du + nu 1 = -g` is consistent, and fixing
/// `du_r = 0` at the most probable state `r` leaves a nonsingular sparse system with no dense
/// border: one factorisation, one solve. (`du` is defined up to a multiple of 1, which
/// normalisation removes.)
fn reduced_solve(
    rows: &ScaledRows,
    p: &[f64],
    g: &[f64],
    lambda: f64,
    reuse: &mut SymbolicReuse,
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let r = (0..n)
        .max_by(|&a, &b| p[a].total_cmp(&p[b]))
        .expect("states");
    let index = |k: usize| if k < r { k } else { k - 1 };
    let entries: Vec<(usize, usize, f64)> = rows
        .entries
        .iter()
        .filter(|e| e.0 != r && e.1 != r)
        .map(|&(k, l, v)| (index(k), index(l), v))
        .collect();
    let rhs: Vec<f64> = (0..n)
        .filter(|&k| k != r)
        .map(|k| rows.scale(k, lambda - g[k]))
        .collect();
    let x = solve_columns(n - 1, &entries, &[rhs], reuse)?.remove(0);
    Ok((0..n)
        .map(|k| if k == r { 0.0 } else { x[index(k)] })
        .collect())
}

/// Damped and unconstrained: the damped matrix is nonsingular (strictly dominant rows where
/// `g_k < lambda`), so `du = A^-1 (-g - nu 1)` with `nu` chosen for `p . du = 0`: two solves,
/// one factorisation.
fn damped_solve(
    rows: &ScaledRows,
    p: &[f64],
    g: &[f64],
    reuse: &mut SymbolicReuse,
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let gradient: Vec<f64> = (0..n).map(|k| rows.scale(k, -g[k])).collect();
    let ones: Vec<f64> = (0..n).map(|k| rows.scale(k, 1.0)).collect();
    let mut solved = solve_columns(n, &rows.entries, &[gradient, ones], reuse)?;
    let (w2, w1) = (
        solved.pop().expect("two columns"),
        solved.pop().expect("two columns"),
    );
    let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
    let nu = dot(p, &w1) / dot(p, &w2);
    Ok(w1.iter().zip(&w2).map(|(a, b)| a - nu * b).collect())
}

/// With routability rows: the bordered system
/// `[D^-1 M, 1, A'; p', 0, 0; A D, 0, 0] [du; nu; mu] = [-g; 0; -A p]` by sparse LU, the first
/// block row scaled as in [`ScaledRows`], the border rows by their largest entry.
fn bordered_solve(
    rows: &ScaledRows,
    p: &[f64],
    constraints: &Constraints,
    g: &[f64],
    reuse: &mut SymbolicReuse,
) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
    let n = p.len();
    let mut entries = rows.entries.clone();
    let top = p.iter().copied().fold(0.0, f64::max);
    for k in 0..n {
        entries.push((k, n, rows.scale(k, 1.0)));
        entries.push((n, k, p[k] / top));
    }
    let residuals = constraints.residuals(p);
    let mut rhs: Vec<f64> = (0..n).map(|k| rows.scale(k, -g[k])).collect();
    rhs.push(0.0);
    for (c, row) in constraints.rows.iter().enumerate() {
        let largest = row
            .iter()
            .map(|&(k, a)| (a * p[k]).abs())
            .fold(0.0, f64::max)
            .max(f64::MIN_POSITIVE);
        for &(k, a) in row {
            entries.push((n + 1 + c, k, a * p[k] / largest));
            entries.push((k, n + 1 + c, rows.scale(k, a)));
        }
        rhs.push(-residuals[c] / largest);
    }
    let x = solve_columns(n + 1 + constraints.rows.len(), &entries, &[rhs], reuse)?.remove(0);
    Ok((x[..n].to_vec(), x[n + 1..].to_vec()))
}
