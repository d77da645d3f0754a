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

use super::objective::{GradientParts, Objective};
use crate::linalg::{conjugate_gradient, CompressedRows, SparseLu, SymbolicReuse};
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

/// A step in `ln p` below this many times the largest `|ln p|` is round-off.
const ROUNDOFF_STEP: f64 = 64.0 * f64::EPSILON;

/// Largest step (e-folds) the line search starts from.
const STEP_CAP: f64 = 30.0;

/// Iterations without progress (a rise of `Phi` beyond round-off, or a 0.1% smaller certified
/// gap) before giving up.
const STALL_ITERATIONS: usize = 40;
/// The same once the relative gap is below 1e-9 (reports need 1e-8).
const STALL_ITERATIONS_NEAR: usize = 5;

/// Linear equality constraints `A p = 0`, one sparse row each: the routability rows of a
/// pair restriction, `sum_{i in G} (R p)_i = 0` for every group `G` of states that the allowed
/// pairs connect but one.
#[derive(Debug, Clone, Default)]
pub struct Constraints {
    pub rows: Vec<Vec<(usize, f64)>>,
    /// The group of each state (empty without constraints), and the number of groups.
    pub group_of: Vec<usize>,
    pub groups: usize,
}

impl Constraints {
    pub fn residuals(&self, p: &[f64]) -> Vec<f64> {
        self.rows
            .iter()
            .map(|row| row.iter().map(|&(k, a)| a * p[k]).sum())
            .collect()
    }

    /// The feasible point nearest in kind to `log_p`: each group's probabilities scaled by one
    /// factor `c_G`, so that every group's baseline inflow equals its outflow. With the flows
    /// `F_GH = sum_{s in G, t in H} r_ts p_s`, the balance `sum_H c_H F_HG = c_G sum_H F_GH`
    /// says that `c` is the stationary vector of the chain of groups with rates `F` (unique,
    /// since the network is irreducible), found by the steady-state solver. A line search in
    /// `ln p` leaves the linearised constraints after any step shorter than Newton's, and
    /// `Phi` at an infeasible point is attained by no design (measured: a joint chain of two
    /// light levels switching at 1e-3 per ms drifted to all probability in the bright copy,
    /// with a `Phi` of 540 that no design reaches). `None` if the groups' solve fails.
    fn restore(&self, objective: &Objective, log_p: &[f64]) -> Option<Vec<f64>> {
        if self.rows.is_empty() {
            let mut normalised = log_p.to_vec();
            normalise_logs(&mut normalised);
            return Some(normalised);
        }
        let mut flows = std::collections::BTreeMap::new();
        for jump in &objective.jumps {
            let (from, to) = (self.group_of[jump.source], self.group_of[jump.target]);
            if from != to {
                let key = (from.min(to), from.max(to));
                let flow = jump.rate * log_p[jump.source].exp();
                let entry = flows.entry(key).or_insert((0.0, 0.0));
                if from < to {
                    entry.0 += flow;
                } else {
                    entry.1 += flow;
                }
            }
        }
        let groups = crate::model::Network {
            energies: vec![0.0; self.groups],
            channels: flows
                .into_iter()
                .map(|((from, to), (forward, backward))| crate::model::Channel {
                    from,
                    to,
                    forward,
                    backward,
                    work: 0.0,
                    drive: 0.0,
                })
                .collect(),
        };
        let scale = crate::steady::solve(&groups, &Default::default())
            .ok()?
            .probabilities;
        let mut restored: Vec<f64> = log_p
            .iter()
            .zip(&self.group_of)
            .map(|(l, &g)| l + scale[g].ln())
            .collect();
        normalise_logs(&mut restored);
        restored.iter().all(|l| l.is_finite()).then_some(restored)
    }
}

/// Settings of the Newton solve.
#[derive(Debug, Clone, Copy)]
pub struct NewtonSettings {
    /// Iteration limit. Default 1000 (the 10^5-state banded benchmark network needs 350 steps;
    /// a stalled solve ends far earlier, after `STALL_ITERATIONS`).
    pub max_iterations: usize,
    /// Stop when the certified gap is below this fraction of `|Phi|` (plus a round-off floor).
    /// Default 1e-12 (reports require 1e-8; much below 1e-12 is round-off on large networks).
    pub relative_gap: f64,
    /// Networks of at least this many states try conjugate gradients before the sparse LU.
    /// Default [`ITERATIVE_MIN`].
    pub iterative_from: usize,
}

impl Default for NewtonSettings {
    fn default() -> Self {
        Self {
            max_iterations: 1000,
            relative_gap: 1e-12,
            iterative_from: ITERATIVE_MIN,
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
    /// Newton systems solved by conjugate gradients instead of the sparse LU.
    pub iterative_solves: usize,
}

impl Certified {
    /// No point found (not even the uniform law gave a finite `Phi`): value `-inf`, upper
    /// `+inf`, which the bound refuses as non-finite.
    fn unsolved(n: usize) -> Self {
        let uniform = 1.0 / n.max(1) as f64;
        Self {
            log_p: vec![uniform.ln(); n],
            p: vec![uniform; n],
            value: f64::NEG_INFINITY,
            upper: f64::INFINITY,
            steps: 0,
            analyses: 0,
            iterative_solves: 0,
        }
    }
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
fn certificate(constraints: &Constraints, g: &[f64], p: &[f64], value: f64, mu: &[f64]) -> f64 {
    let mut h = g.to_vec();
    for (row, m) in constraints.rows.iter().zip(mu) {
        for &(k, a) in row {
            h[k] += a * m;
        }
    }
    let top = h.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mean: f64 = h.iter().zip(p).map(|(h, p)| h * p).sum();
    if !(top.is_finite() && mean.is_finite()) {
        // A gradient beyond the double range (a state e^-700 below an inflowing neighbour)
        // proves nothing.
        return f64::INFINITY;
    }
    let infeasibility: f64 = constraints
        .residuals(p)
        .iter()
        .zip(mu)
        .map(|(r, m)| r * m)
        .sum();
    value + (top - mean).max(0.0) + infeasibility
}

/// Most routability rows for which [`fitted_multipliers`] runs (its SVD costs `n m^2`).
pub(crate) const FITTED_ROWS_LIMIT: usize = 64;

/// Multipliers that make `h = g + A^T mu` as level as possible, by least squares on
/// `A^T mu - lambda 1 = -g` (columns scaled to unit length, SVD). At a feasible point the
/// certificate is `Phi(p) + max h - h . p` whatever `mu` is, so any `mu` gives a valid bound
/// and the levellest gives the tightest. The KKT solve's own multipliers carry the error of a
/// system whose rows hold rates of up to 1e6 beside probabilities of 1e-9 (measured: a gap of
/// 4.6% that these multipliers close to 1e-7 on a 6-state network restricted to one pair).
/// `None` without rows, with too many, or if the fit is not finite.
pub(crate) fn fitted_multipliers(constraints: &Constraints, g: &[f64]) -> Option<Vec<f64>> {
    let m = constraints.rows.len();
    if m == 0 || m > FITTED_ROWS_LIMIT {
        return None;
    }
    let n = g.len();
    let mut design = nalgebra::DMatrix::<f64>::zeros(n, m + 1);
    for (c, row) in constraints.rows.iter().enumerate() {
        for &(k, a) in row {
            design[(k, c)] += a;
        }
    }
    for k in 0..n {
        design[(k, m)] = -1.0;
    }
    let norms: Vec<f64> = (0..=m).map(|c| design.column(c).norm()).collect();
    for (c, norm) in norms.iter().enumerate() {
        if *norm > 0.0 {
            design.column_mut(c).scale_mut(1.0 / norm);
        }
    }
    let rhs = nalgebra::DVector::from_iterator(n, g.iter().map(|v| -v));
    let solution = design.svd(true, true).solve(&rhs, 1e-14).ok()?;
    let mu: Vec<f64> = (0..m)
        .map(|c| {
            if norms[c] > 0.0 {
                solution[c] / norms[c]
            } else {
                0.0
            }
        })
        .collect();
    mu.iter().all(|v| v.is_finite()).then_some(mu)
}

/// An iterate: normalised `ln p`, `p`, `Phi(p)` and the gradient there (computed once per
/// point: the step, the certificate and the lift all use it).
struct Point {
    log_p: Vec<f64>,
    p: Vec<f64>,
    value: f64,
    parts: GradientParts,
    g: Vec<f64>,
}

impl Point {
    /// The point `log_p` (any normalisation), or `None` if `Phi` is not finite there.
    fn new(objective: &Objective, mut log_p: Vec<f64>) -> Option<Self> {
        normalise_logs(&mut log_p);
        let p: Vec<f64> = log_p.iter().map(|l| l.exp()).collect();
        let value = objective.value(&p, &log_p);
        value
            .is_finite()
            .then(|| Self::with_value(objective, log_p, p, value))
    }

    /// The point whose normalised logs, probabilities and value are already known (a
    /// line-search trial): only the gradient is computed.
    fn with_value(objective: &Objective, log_p: Vec<f64>, p: Vec<f64>, value: f64) -> Self {
        let parts = objective.gradient_parts(&log_p);
        let g = parts.gradient();
        Self {
            log_p,
            p,
            value,
            parts,
            g,
        }
    }

    /// The largest `|ln p|` (at least 1): what a step in `ln p` is resolved against.
    fn depth(&self) -> f64 {
        self.log_p.iter().map(|l| l.abs()).fold(1.0, f64::max)
    }

    /// Round-off of `Phi` and of its certificate here.
    fn noise(&self, objective: &Objective) -> f64 {
        objective.value_roundoff(&self.p, &self.log_p)
            + objective.flux_roundoff(&self.p, &self.log_p)
    }
}

/// Maximises `Phi` from the interior start `log_p` (any normalisation). It cannot fail: a
/// singular step ends the iteration, and the result always carries a valid certificate.
pub fn maximise(
    objective: &Objective,
    constraints: &Constraints,
    start: &[f64],
    settings: &NewtonSettings,
) -> Certified {
    // A start where Phi is not finite falls back to the uniform distribution, where it always
    // is (every term is a finite rate times a finite log ratio).
    let Some(mut x) = constraints
        .restore(objective, start)
        .and_then(|start| Point::new(objective, start))
        .or_else(|| Point::new(objective, vec![0.0; objective.n]))
    else {
        return Certified::unsolved(objective.n);
    };
    let mut mu = vec![0.0; constraints.rows.len()];
    let mut best_upper = certificate(constraints, &x.g, &x.p, x.value, &mu);
    let mut iterations = 0;
    let mut last_progress = 0;
    let mut analyses = Analyses::new(objective.n, settings.iterative_from);
    // Once a plain step has been wild, damped steps follow until they move less than the
    // damping allows (each wild plain step costs a factorisation for nothing).
    let mut damped = false;
    let mut previous_upper = best_upper;
    while iterations < settings.max_iterations {
        let floor = 16.0 * x.noise(objective);
        if best_upper - x.value <= settings.relative_gap * x.value.abs() + floor {
            break;
        }
        iterations += 1;
        // The plain Newton step is exact for decoupled tiny components (it jumps straight to
        // their level); when it is wild, fall back to the damped model.
        // A singular system (possible once the iterate is at working precision) ends the
        // polish at the best certified point so far.
        let Ok((mut du, mut new_mu)) =
            newton_step(objective, constraints, &x, damped, &mut analyses)
        else {
            break;
        };
        if !damped && du.iter().any(|d| d.abs() > WILD_STEP) {
            let Ok(step) = newton_step(objective, constraints, &x, true, &mut analyses) else {
                break;
            };
            (du, new_mu) = step;
            damped = true;
        }
        let largest = du.iter().map(|d| d.abs()).fold(0.0, f64::max);
        if damped && largest < DAMPED_EXIT / DAMPING {
            damped = false;
        }
        best_upper = best_upper.min(certificate(constraints, &x.g, &x.p, x.value, &new_mu));
        mu = new_mu;
        let (accepted, alpha) = line_search(objective, constraints, &mut x, &du, largest);
        if accepted.is_some_and(|rose| rose) {
            last_progress = iterations;
        }
        lift_sunken_states(objective, constraints, &mut x);
        let upper = certificate(constraints, &x.g, &x.p, x.value, &mu);
        let nearly = best_upper - x.value <= 1e-9 * x.value.abs().max(1e-300);
        // Far from the end any visible shrinking of the gap is progress; near it (far below
        // what reports need) only halving is, so that round-off plateaus end quickly.
        // The current point's own certificate counts too: after a damped phase it can sit far
        // above the best one for a while and still fall steadily towards it.
        // Steps at the round-off of ln p do not count as progress against the previous
        // certificate: there it cycles (measured: a period of three steps, 900 iterations, on a
        // slowly switching 10^4-state chain).
        let progress = if nearly { 0.5 } else { 1e-3 };
        let resolving = largest > ROUNDOFF_STEP * x.depth();
        if upper < best_upper - progress * (best_upper - x.value)
            || (!nearly
                && resolving
                && upper < previous_upper - progress * (previous_upper - x.value))
        {
            last_progress = iterations;
        }
        let upper = match fitted_multipliers(constraints, &x.g) {
            Some(fitted) if largest < 1e-3 => {
                upper.min(certificate(constraints, &x.g, &x.p, x.value, &fitted))
            }
            _ => upper,
        };
        previous_upper = upper;
        best_upper = best_upper.min(upper);
        let at_roundoff = alpha == 1.0 && largest < ROUNDOFF_STEP * x.depth();
        let window = if nearly {
            STALL_ITERATIONS_NEAR
        } else {
            STALL_ITERATIONS
        };
        let stalled = iterations - last_progress > window;
        if accepted.is_none() || at_roundoff || stalled {
            break; // converged to working precision, or no progress possible there
        }
    }
    Certified {
        upper: best_upper.max(x.value),
        log_p: x.log_p,
        p: x.p,
        value: x.value,
        steps: iterations,
        analyses: analyses.reduced.analyses + analyses.damped.analyses + analyses.bordered.analyses,
        iterative_solves: analyses.iterative_solves,
    }
}

/// Backtracking along `du`: the largest step in `a, a/2, a/4, ...` (`a = 1`, or less if the
/// step is longer than [`STEP_CAP`]) at which `Phi` does not fall beyond round-off. Moves `x`
/// there and returns whether `Phi` rose visibly (`None` if no step was accepted) and the step.
fn line_search(
    objective: &Objective,
    constraints: &Constraints,
    x: &mut Point,
    du: &[f64],
    largest: f64,
) -> (Option<bool>, f64) {
    let mut alpha: f64 = if largest > STEP_CAP {
        STEP_CAP / largest
    } else {
        1.0
    };
    for _ in 0..60 {
        let moved: Vec<f64> = x.log_p.iter().zip(du).map(|(l, d)| l + alpha * d).collect();
        let Some(trial) = constraints.restore(objective, &moved) else {
            alpha *= 0.5;
            continue;
        };
        // Phi and its round-off first; the gradient only for the accepted trial.
        let p: Vec<f64> = trial.iter().map(|l| l.exp()).collect();
        let value = objective.value(&p, &trial);
        let roundoff = objective.value_roundoff(&p, &trial);
        if value.is_finite() && value >= x.value - 4.0 * roundoff {
            let rose = value > x.value + 4.0 * roundoff;
            *x = Point::with_value(objective, trial, p, value);
            return (Some(rose), alpha);
        }
        alpha *= 0.5;
    }
    (None, alpha)
}

/// Raises each state that sits more than an e-fold below its own balance to that balance.
///
/// With its neighbours held, `g_k` at `u_k + d` is `Q_k e^-d + rest_k - exit_k d`
/// ([`Objective::gradient_parts`]), so `g_k = lambda` has the root
/// `d = W((Q_k / exit_k) e^(-b / exit_k)) + b / exit_k`, `b = rest_k - lambda` (Lambert W).
/// Newton's linear model climbs only about one e-fold per step towards it (the inflow term is
/// exponential in `-d`), which made states that a damped step had pushed too deep creep back
/// over dozens of steps. With `lambda = Phi(p)` this is exact coordinate ascent on
/// `Phi - lambda (sum p - 1)`, and by homogeneity the renormalised point has `Phi` no lower;
/// the new point is kept only if that holds to round-off (several states move at once).
fn lift_sunken_states(objective: &Objective, constraints: &Constraints, x: &mut Point) {
    let mut lifted = x.log_p.clone();
    let mut any = false;
    let mut steepest: Option<(usize, f64)> = None;
    for (k, level) in lifted.iter_mut().enumerate() {
        let exit = objective.exit[k];
        let log_inflow = x.parts.log_inflow[k];
        let b = x.parts.rest[k] - x.value;
        // Only where even one e-fold up leaves g_k above lambda (Q e^-1 > exit - b).
        let sunken = exit - b <= 0.0 || log_inflow - 1.0 > (exit - b).ln();
        if exit <= 0.0 || log_inflow == f64::NEG_INFINITY || !sunken {
            continue;
        }
        let d = lambert_w_of_log(log_inflow - exit.ln() - b / exit) + b / exit;
        if d > 1.0 {
            *level += d;
            any = true;
            if steepest.is_none_or(|(s, _)| x.g[k] > x.g[s]) {
                steepest = Some((k, d));
            }
        }
    }
    if !any {
        return;
    }
    if let Some(next) = constraints
        .restore(objective, &lifted)
        .and_then(|l| Point::new(objective, l))
    {
        if next.value >= x.value - 4.0 * next.noise(objective) {
            *x = next;
            return;
        }
    }
    // Lifting every sunken state at once can lower Phi where they feed each other (a fast
    // chain of improbable states); the steepest one alone is exact coordinate ascent.
    let Some((k, d)) = steepest else { return };
    let mut single = x.log_p.clone();
    single[k] += d;
    if let Some(next) = constraints
        .restore(objective, &single)
        .and_then(|l| Point::new(objective, l))
    {
        if next.value >= x.value - 4.0 * next.noise(objective) {
            *x = next;
        }
    }
}

/// `W(e^L)`, the principal branch of Lambert's W (`W e^W = z`) at `z = e^L`, from `L` alone so
/// that `z` may lie beyond the double range.
fn lambert_w_of_log(log_z: f64) -> f64 {
    if log_z < -30.0 {
        return log_z.exp(); // W(z) = z - z^2 + ...
    }
    // w + ln w = L, by Newton from above the root (w = L for large L, z otherwise).
    let mut w: f64 = if log_z > 1.0 { log_z } else { log_z.exp() };
    for _ in 0..100 {
        let step = (w + w.ln() - log_z) / (1.0 + 1.0 / w);
        w = (w - step).max(w / 16.0);
        if step.abs() <= 1e-14 * w {
            break;
        }
    }
    w
}

/// The symbolic analyses kept across Newton steps, one per kind of linear system (their
/// patterns differ; the reduced one also depends on the state held fixed).
/// Also whether conjugate gradients are still worth trying first.
struct Analyses {
    reduced: SymbolicReuse,
    damped: SymbolicReuse,
    bordered: SymbolicReuse,
    iterative: bool,
    /// Newton systems solved by conjugate gradients.
    iterative_solves: usize,
}

impl Analyses {
    fn new(n: usize, iterative_from: usize) -> Self {
        Self {
            reduced: SymbolicReuse::default(),
            damped: SymbolicReuse::default(),
            bordered: SymbolicReuse::default(),
            iterative: n >= iterative_from,
            iterative_solves: 0,
        }
    }

    /// Solves `rows` restricted to `keep` by conjugate gradients while that works; after the
    /// first failure this solve and every later one go to the sparse LU.
    fn try_iterative(
        &mut self,
        rows: &ScaledRows,
        keep: impl Fn(usize) -> bool,
        columns: &[Vec<f64>],
    ) -> Option<Vec<Vec<f64>>> {
        if !self.iterative {
            return None;
        }
        let solved = rows.solve_iteratively(keep, columns);
        match solved {
            Some(_) => self.iterative_solves += 1,
            None => self.iterative = false,
        }
        solved
    }
}

/// Networks from this size on try conjugate gradients before the sparse LU: on the
/// random-chord benchmark (expander-like) the LU fills in (measured on 2 cores: 4.5 s per
/// factorisation at 10^4 states) while CG converges in a few hundred products; on banded
/// networks CG stalls (the condition number grows like n^2) and the first failure hands every
/// later step to the LU.
pub const ITERATIVE_MIN: usize = 2000;
/// Relative residual at which CG stops (the certificate, not this, decides acceptance).
const ITERATIVE_TOLERANCE: f64 = 1e-11;
/// CG iterations allowed per solve.
const ITERATIVE_STEPS: usize = 400;

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
    /// `1 /` each row's diagonal magnitude before scaling (damping included).
    inverse: Vec<f64>,
    /// `ln sqrt(d_k)`, `d_k = p_k |A_kk|` (the diagonal of `M`): `diag(sqrt d)` turns these
    /// rows into the symmetric `S M S` (see [`ScaledRows::solve_iteratively`]).
    half_log_weight: Vec<f64>,
}

impl ScaledRows {
    /// With `damping = Some(lambda)` the damped model adds `DAMPING * min(g_k - lambda, 0)`
    /// to the diagonal (the row-scaled share of the curvature of `ln p` coordinates).
    fn new(objective: &Objective, x: &Point, damping: Option<f64>) -> Self {
        let n = objective.n;
        let log_inflow = &x.parts.log_inflow;
        let mut log_scale: Vec<f64> = (0..n)
            .map(|k| log_add(objective.exit[k].ln(), log_inflow[k]))
            .collect();
        if let Some(lambda) = damping {
            for (k, scale) in log_scale.iter_mut().enumerate() {
                let extra = DAMPING * (lambda - x.g[k]);
                if extra > 0.0 {
                    *scale = log_add(*scale, extra.ln());
                }
            }
        }
        // 1 / scale; it may underflow to 0 only where the outflow share is below 1e-308.
        let inverse: Vec<f64> = log_scale.iter().map(|l| (-l).exp()).collect();
        let mut entries = Vec::with_capacity(2 * objective.jumps.len() + n);
        for j in &objective.jumps {
            let (s, t) = (j.source, j.target);
            // Jump s -> t: r in row s (column t), r p_s / p_t in row t (column s).
            entries.push((s, t, j.rate * inverse[s]));
            let inflow = j.log_rate + x.log_p[s] - x.log_p[t];
            entries.push((t, s, (inflow - log_scale[t]).exp()));
        }
        entries.extend((0..n).map(|k| (k, k, -1.0)));
        let half_log_weight = (0..n).map(|k| (x.log_p[k] + log_scale[k]) / 2.0).collect();
        Self {
            entries,
            inverse,
            half_log_weight,
        }
    }

    /// Solves these rows (`A z = b` for each column `b`), restricted to the states where
    /// `keep` holds, by conjugate gradients: with `W = diag(sqrt d)`, `W A W^-1 = S M S` is
    /// symmetric negative definite with unit diagonal, so `-(W A W^-1) y = -W b`, `z = W^-1 y`.
    /// `None` if the weights leave the double range or CG does not converge (it is tried on
    /// expander-like networks, where direct factorisation fills in and CG converges fast).
    fn solve_iteratively(
        &self,
        keep: impl Fn(usize) -> bool,
        columns: &[Vec<f64>],
    ) -> Option<Vec<Vec<f64>>> {
        let n = self.inverse.len();
        let weight: Vec<f64> = self.half_log_weight.iter().map(|h| h.exp()).collect();
        if weight.iter().any(|w| !(w.is_normal())) {
            return None;
        }
        let mut index = vec![usize::MAX; n];
        let mut kept = 0;
        for (k, slot) in index.iter_mut().enumerate() {
            if keep(k) {
                *slot = kept;
                kept += 1;
            }
        }
        let entries: Vec<(usize, usize, f64)> = self
            .entries
            .iter()
            .filter(|e| keep(e.0) && keep(e.1))
            .map(|&(k, l, v)| (index[k], index[l], -v * weight[k] / weight[l]))
            .collect();
        let matrix = CompressedRows::new(kept, &entries);
        columns
            .iter()
            .map(|b| {
                let rhs: Vec<f64> = (0..n)
                    .filter(|&k| keep(k))
                    .map(|k| -b[k] * weight[k])
                    .collect();
                let y = conjugate_gradient(&matrix, &rhs, ITERATIVE_TOLERANCE, ITERATIVE_STEPS)?;
                Some(
                    (0..n)
                        .map(|k| {
                            if keep(k) {
                                y[index[k]] / weight[k]
                            } else {
                                0.0
                            }
                        })
                        .collect(),
                )
            })
            .collect()
    }

    /// `v_k` divided by row `k`'s scale.
    fn scale(&self, k: usize, v: f64) -> f64 {
        v * self.inverse[k]
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
    x: &Point,
    damped: bool,
    analyses: &mut Analyses,
) -> Result<(Vec<f64>, Vec<f64>), SolveError> {
    let (p, g) = (&x.p[..], &x.g[..]);
    // lambda = p . g = Phi(p) (Euler's relation: Phi is homogeneous of degree one).
    let lambda: f64 = g.iter().zip(p).map(|(g, p)| g * p).sum();
    let rows = ScaledRows::new(objective, x, damped.then_some(lambda));
    let (du, mu) = if !constraints.rows.is_empty() {
        bordered_solve(&rows, p, constraints, g, &mut analyses.bordered)?
    } else if damped {
        (damped_solve(&rows, p, g, analyses)?, Vec::new())
    } else {
        (reduced_solve(&rows, p, g, lambda, analyses)?, Vec::new())
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
    analyses: &mut Analyses,
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let r = (0..n).max_by(|&a, &b| p[a].total_cmp(&p[b])).unwrap_or(0);
    let full_rhs: Vec<f64> = (0..n).map(|k| rows.scale(k, lambda - g[k])).collect();
    if let Some(mut solved) = analyses.try_iterative(rows, |k| k != r, &[full_rhs]) {
        return Ok(solved.remove(0));
    }
    let reuse = &mut analyses.reduced;
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
    analyses: &mut Analyses,
) -> Result<Vec<f64>, SolveError> {
    let n = p.len();
    let gradient: Vec<f64> = (0..n).map(|k| rows.scale(k, -g[k])).collect();
    let ones: Vec<f64> = (0..n).map(|k| rows.scale(k, 1.0)).collect();
    let columns = [gradient, ones];
    let mut solved = match analyses.try_iterative(rows, |_| true, &columns) {
        Some(solved) => solved,
        None => solve_columns(n, &rows.entries, &columns, &mut analyses.damped)?,
    };
    let (Some(w2), Some(w1)) = (solved.pop(), solved.pop()) else {
        return Err(SolveError::Unresolved(
            "the Newton system returned fewer columns than it was given".into(),
        ));
    };
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
    for (k, pk) in p.iter().enumerate() {
        entries.push((k, n, rows.scale(k, 1.0)));
        entries.push((n, k, pk / top));
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bench::{synthetic, Family};

    /// Each Newton row, unscaled, is the derivative of the stationarity equation in `ln p`:
    /// `A_kl = d g_k / d u_l`, checked against central differences of the gradient; rows sum
    /// to zero (`Phi` is homogeneous of degree one).
    #[test]
    fn newton_rows_are_derivatives_of_the_gradient() {
        let objective = Objective::new(&synthetic(Family::RandomChords, 7, 3));
        let log_p: Vec<f64> = (0..7).map(|k| -1.0 - 0.7 * k as f64).collect();
        let x = Point::new(&objective, log_p).unwrap();
        let rows = ScaledRows::new(&objective, &x, None);
        let mut a = [[0.0; 7]; 7];
        for &(k, l, v) in &rows.entries {
            a[k][l] += v / rows.inverse[k];
        }
        let h = 1e-6;
        for l in 0..7 {
            let (mut up, mut down) = (x.log_p.clone(), x.log_p.clone());
            up[l] += h;
            down[l] -= h;
            let (gu, gd) = (objective.gradient(&up), objective.gradient(&down));
            for k in 0..7 {
                let fd = (gu[k] - gd[k]) / (2.0 * h);
                assert!(
                    (fd - a[k][l]).abs() < 1e-6 * (1.0 + fd.abs()),
                    "A[{k}][{l}] = {} vs {fd}",
                    a[k][l]
                );
            }
        }
        for (k, row) in a.iter().enumerate() {
            let scale: f64 = row.iter().map(|v| v.abs()).sum();
            assert!(
                row.iter().sum::<f64>().abs() < 1e-12 * scale,
                "row {k} sums to {}",
                row.iter().sum::<f64>()
            );
        }
    }
}
