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

/// Share of the curvature term of `ln p` coordinates used by the damped step: shrinking
/// components then move by up to about 16 e-folds per iteration (1 made large networks crawl).
const DAMPING: f64 = 1.0 / 16.0;

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
    Certified {
        log_p,
        p,
        value,
        upper: best_upper.max(value),
    }
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
    let g = objective.gradient(log_p);
    let mut hessian = objective.scaled_hessian(p);
    if damped {
        // The Hessian in u = ln p is M + diag(p (g - lambda)) at multiplier lambda (the term
        // vanishes at the optimum). A fraction of its negative part keeps the model concave and
        // limits the relative step of components the gradient says to shrink to about
        // 1 / DAMPING e-folds.
        let lambda: f64 = g.iter().zip(p).map(|(g, p)| g * p).sum();
        hessian.extend((0..n).map(|k| (k, k, DAMPING * (p[k] * (g[k] - lambda)).min(0.0))));
    }
    let mut diagonal = vec![0.0; n];
    for &(k, l, v) in &hessian {
        if k == l {
            diagonal[k] += v;
        }
    }
    // Symmetric Jacobi scaling: s_k = 1/sqrt(|M_kk|) (M_kk < 0 strictly).
    let s: Vec<f64> = diagonal.iter().map(|d| 1.0 / d.abs().sqrt()).collect();
    let scaled: Vec<(usize, usize, f64)> = hessian
        .iter()
        .map(|&(k, l, v)| (k, l, s[k] * v * s[l]))
        .collect();
    let gradient_rhs: Vec<f64> = (0..n).map(|k| -s[k] * p[k] * g[k]).collect();
    let (y, mu) = if !constraints.rows.is_empty() {
        bordered_solve(&scaled, &s, p, constraints, &gradient_rhs)?
    } else if damped {
        (schur_solve(&scaled, &s, p, &gradient_rhs)?, Vec::new())
    } else {
        (
            reduced_solve(&scaled, &s, p, &g, &gradient_rhs)?,
            Vec::new(),
        )
    };
    let du: Vec<f64> = (0..n).map(|k| s[k] * y[k]).collect();
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
) -> Result<Vec<Vec<f64>>, SolveError> {
    let triplets: Vec<Triplet<usize, usize, f64>> = entries
        .iter()
        .map(|&(k, l, v)| Triplet::new(k, l, v))
        .collect();
    let mut rhs = Mat::<f64>::from_fn(size, columns.len(), |i, j| columns[j][i]);
    SparseLu::factor(size, &triplets)?.solve_in_place(rhs.as_mut());
    Ok((0..columns.len())
        .map(|j| (0..size).map(|i| rhs[(i, j)]).collect())
        .collect())
}

/// Undamped and unconstrained: `M 1 = 0` (Phi is 1-homogeneous), so with `nu = -p . g` (from
/// `1' M = 0` and `1' p = 1`) the system `M du + nu p = -D g` is consistent, and fixing `du_r = 0`
/// at the most probable state `r` leaves a nonsingular sparse system with no dense border:
/// one factorisation, one solve. (`du` is defined up to a multiple of 1, which normalisation
/// removes.) Works in the Jacobi-scaled variables `y = du / s`.
fn reduced_solve(
    scaled: &[(usize, usize, f64)],
    s: &[f64],
    p: &[f64],
    g: &[f64],
    gradient_rhs: &[f64],
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let r = (0..n)
        .max_by(|&a, &b| p[a].total_cmp(&p[b]))
        .expect("states");
    let index = |k: usize| if k < r { k } else { k - 1 };
    let entries: Vec<(usize, usize, f64)> = scaled
        .iter()
        .filter(|e| e.0 != r && e.1 != r)
        .map(|&(k, l, v)| (index(k), index(l), v))
        .collect();
    let nu: f64 = -p.iter().zip(g).map(|(p, g)| p * g).sum::<f64>();
    let rhs: Vec<f64> = (0..n)
        .filter(|&k| k != r)
        .map(|k| gradient_rhs[k] - nu * s[k] * p[k])
        .collect();
    let x = solve_columns(n - 1, &entries, &[rhs])?.remove(0);
    Ok((0..n)
        .map(|k| if k == r { 0.0 } else { x[index(k)] })
        .collect())
}

/// Damped and unconstrained: the damped matrix is negative definite, so
/// `du = M^-1 (-D g - nu p)` with `nu` chosen for `p . du = 0`: two solves, one factorisation.
fn schur_solve(
    scaled: &[(usize, usize, f64)],
    s: &[f64],
    p: &[f64],
    gradient_rhs: &[f64],
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let border: Vec<f64> = (0..n).map(|k| s[k] * p[k]).collect();
    let mut solved = solve_columns(n, scaled, &[gradient_rhs.to_vec(), border.clone()])?;
    let (w2, w1) = (
        solved.pop().expect("two columns"),
        solved.pop().expect("two columns"),
    );
    let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
    let nu = dot(&border, &w1) / dot(&border, &w2);
    Ok(w1.iter().zip(&w2).map(|(a, b)| a - nu * b).collect())
}

/// With routability rows: the full bordered KKT system
/// `[M, p, (A D)'; p', 0, 0; A D, 0, 0] [du; nu; mu] = [-D g; 0; -A p]` by sparse LU.
fn bordered_solve(
    scaled: &[(usize, usize, f64)],
    s: &[f64],
    p: &[f64],
    constraints: &Constraints,
    gradient_rhs: &[f64],
) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
    let n = p.len();
    let m = constraints.rows.len();
    let mut entries = scaled.to_vec();
    for k in 0..n {
        entries.push((k, n, s[k] * p[k]));
        entries.push((n, k, s[k] * p[k]));
    }
    for (r, row) in constraints.rows.iter().enumerate() {
        for &(k, a) in row {
            let v = a * p[k] * s[k];
            entries.push((n + 1 + r, k, v));
            entries.push((k, n + 1 + r, v));
        }
    }
    let residuals = constraints.residuals(p);
    let rhs: Vec<f64> = gradient_rhs
        .iter()
        .copied()
        .chain(std::iter::once(0.0))
        .chain(residuals.iter().map(|r| -r))
        .collect();
    let x = solve_columns(n + 1 + m, &entries, &[rhs])?.remove(0);
    Ok((x[..n].to_vec(), x[n + 1..].to_vec()))
}
