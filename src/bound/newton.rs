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
use crate::linalg::SparseLu;
use crate::steady::SolveError;
use faer::sparse::Triplet;
use faer::Mat;

/// A plain Newton step larger than this (in `ln p`; e^-700 is near the end of the double
/// range) is replaced by the damped one.
const WILD_STEP: f64 = 700.0;

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
    pub iterations: usize,
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

/// Maximises `Phi` from the interior start `log_p` (any normalisation).
pub fn maximise(
    objective: &Objective,
    constraints: &Constraints,
    start: &[f64],
    settings: &NewtonSettings,
) -> Result<Certified, SolveError> {
    let mut log_p = start.to_vec();
    normalise_logs(&mut log_p);
    let mut p: Vec<f64> = log_p.iter().map(|l| l.exp()).collect();
    let mut value = objective.value(&p, &log_p);
    let mut mu = vec![0.0; constraints.rows.len()];
    let mut best_upper = certificate(objective, constraints, &log_p, &p, &mu);
    let scale = objective.exit.iter().copied().fold(0.0, f64::max);
    let mut iterations = 0;
    let mut last_progress = 0;
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
        let Ok((mut du, mut new_mu)) = newton_step(objective, constraints, &p, &log_p, false)
        else {
            break;
        };
        if du.iter().any(|d| d.abs() > WILD_STEP) {
            let Ok(damped) = newton_step(objective, constraints, &p, &log_p, true) else {
                break;
            };
            (du, new_mu) = damped;
        }
        let upper = certificate(objective, constraints, &log_p, &p, &new_mu);
        if upper < best_upper {
            best_upper = upper;
        }
        mu = new_mu;
        // Backtracking: the largest step in 1, 1/2, 1/4, ... that does not decrease Phi.
        let largest = du.iter().map(|d| d.abs()).fold(0.0, f64::max);
        let mut alpha: f64 = if largest > 30.0 { 30.0 / largest } else { 1.0 };
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
        if upper < best_upper - 1e-3 * (best_upper - value) {
            last_progress = iterations;
        }
        best_upper = best_upper.min(upper);
        let at_roundoff = alpha == 1.0 && largest < 1e-15;
        // Once the gap is far below what reports need, a short plateau means round-off; before
        // that, tiny components may move for a while without visible change of value or gap.
        let nearly = best_upper - value <= 1e-10 * value.abs().max(1e-300);
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
    Ok(Certified {
        log_p,
        p,
        value,
        upper: best_upper.max(value),
        iterations,
    })
}

/// One Newton direction `du` (in `ln p`) and the constraint multipliers `mu`.
fn newton_step(
    objective: &Objective,
    constraints: &Constraints,
    p: &[f64],
    log_p: &[f64],
    damped: bool,
) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
    let n = objective.n;
    let m = constraints.rows.len();
    let g = objective.gradient(log_p);
    let mut hessian = objective.scaled_hessian(p);
    if damped {
        // The Hessian in u = ln p is M + diag(p (g - lambda)) at multiplier lambda (the term
        // vanishes at the optimum). Its negative part keeps the model concave and limits the
        // relative step of components the gradient says to shrink to about one e-fold.
        let lambda: f64 = g.iter().zip(p).map(|(g, p)| g * p).sum();
        hessian.extend((0..n).map(|k| (k, k, (p[k] * (g[k] - lambda)).min(0.0))));
    }
    let mut diagonal = vec![0.0; n];
    for &(k, l, v) in &hessian {
        if k == l {
            diagonal[k] += v;
        }
    }
    // Symmetric Jacobi scaling: s_k = 1/sqrt(|M_kk|) (M_kk < 0 strictly).
    let s: Vec<f64> = diagonal.iter().map(|d| 1.0 / d.abs().sqrt()).collect();
    let mut triplets: Vec<Triplet<usize, usize, f64>> = hessian
        .iter()
        .map(|&(k, l, v)| Triplet::new(k, l, s[k] * v * s[l]))
        .collect();
    for k in 0..n {
        triplets.push(Triplet::new(k, n, s[k] * p[k]));
        triplets.push(Triplet::new(n, k, s[k] * p[k]));
    }
    for (r, row) in constraints.rows.iter().enumerate() {
        for &(k, a) in row {
            let v = a * p[k] * s[k];
            triplets.push(Triplet::new(n + 1 + r, k, v));
            triplets.push(Triplet::new(k, n + 1 + r, v));
        }
    }
    let size = n + 1 + m;
    let residuals = constraints.residuals(p);
    let mut rhs = Mat::<f64>::from_fn(size, 1, |i, _| {
        if i < n {
            -s[i] * p[i] * g[i]
        } else if i == n {
            0.0
        } else {
            -residuals[i - n - 1]
        }
    });
    SparseLu::factor(size, &triplets)?.solve_in_place(rhs.as_mut());
    let du: Vec<f64> = (0..n).map(|k| s[k] * rhs[(k, 0)]).collect();
    if du.iter().any(|d| !d.is_finite()) {
        return Err(SolveError::Unresolved(
            "the Newton system of the bound is singular".into(),
        ));
    }
    let mu: Vec<f64> = (0..m).map(|r| rhs[(n + 1 + r, 0)]).collect();
    Ok((du, mu))
}
