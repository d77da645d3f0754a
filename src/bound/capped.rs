//! The rate-capped program (methods, section 5) solved by a barrier method of our own, with a
//! certificate that holds whatever the solver did.
//!
//! Owns: the log-barrier path-following solve of
//! `max Phi(p) - sum_e (f_e - g_e) ln(f_e / g_e)` subject to flux balance, the simplex and
//! `0 < f_e <= cap p_a`, `0 < g_e <= cap p_b` (Boyd and Vandenberghe, *Convex Optimization*,
//! Cambridge 2004, section 11.3: Newton centering with equality constraints, the barrier weight
//! cut tenfold), and the upper value from concavity and weak duality (methods, section 5).
//! It must not verify designs (that is [`super::design`]'s independent steady-state solve), nor
//! read or print anything.
//!
//! Newton runs in relative coordinates `dx = x * dy`: every Hessian block is then a one-way flux
//! or a barrier weight, so probabilities from 1 down to 1e-30 share one scale. Each pathway's
//! two fluxes are eliminated pair by pair (a 2x2 block each), leaving a dense system of size
//! `2 n` in the step of `p` and the multipliers, whatever the number of candidate pairs.
//!
//! The certificate: `F` is concave and 1-homogeneous, so for any multipliers `lambda` of the
//! balance rows the optimum is at most `max_i r_i`, with
//! `r_i = dF/dp_i - (R^T lambda)_i + cap * (sum of the cap multipliers nu at state i)` and
//! `nu_e = max(0, dF/df_e - (lambda_b - lambda_a))` (likewise for `g`): the linear bound
//! `F(x) + grad F . (y - x)` maximised over the feasible polytope, dualised. It needs no
//! feasibility of the iterate, only `p, f, g > 0`.

use super::conic::{Candidate, CappedSolution};
use super::objective::Objective;
use super::CERTIFIED_GAP;
use crate::solve_error::SolveError;
use nalgebra::{DMatrix, DVector};

/// Relative gap the barrier path aims at, and the largest optimisation gap it returns (beyond
/// it the conic program is tried instead). Measured: 1e-11 to 1e-10 on the shipped models; on
/// slowly switching joint chains at large caps the multipliers stall near 1e-7 while the
/// value still converges, and the certified upper value stays where it stalled. Round-off may widen the certified gap beyond it, up
/// to the bound's own limit: the certificate's terms grow with the cap (measured: 1e-8 relative
/// at caps of 1e9 per time unit on the photoswitch, whose fastest rate is 1e7).
pub const TARGET_GAP: f64 = 1e-10;
pub const ACCEPTED_GAP: f64 = 1e-6;

/// How the capped program was solved.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CappedRoute {
    /// Our barrier path, certified by its own dual bound.
    Barrier,
    /// Clarabel's exponential-cone program (the fallback).
    Conic,
}

/// The capped program by the barrier path, or by the conic program when that fails: neither
/// solver alone decides whether a capped design exists.
pub fn best(
    objective: &Objective,
    candidates: &[Candidate],
    cap: f64,
    start: &[f64],
) -> Result<CappedSolution, SolveError> {
    if !cap.is_finite() {
        // No cap: the program is the pair-restricted bound, left to the conic program.
        return super::conic::capped(objective, candidates, cap, super::conic::TIGHT);
    }
    solve(objective, candidates, cap, start, TARGET_GAP).or_else(|barrier| {
        super::conic::capped(objective, candidates, cap, super::conic::TIGHT).map_err(|conic| {
            let barrier = match barrier {
                SolveError::Uncertified(why) => why,
                other => other.to_string(),
            };
            SolveError::Uncertified(format!("{barrier}; the conic fallback failed too: {conic}"))
        })
    })
}

/// Cap on Newton steps over the whole path (measured: 60 to 120 on the shipped models).
const MAX_NEWTON_STEPS: usize = 600;

/// The iterate: probabilities and the one-way fluxes of each candidate.
#[derive(Debug, Clone)]
struct Point {
    p: Vec<f64>,
    f: Vec<f64>,
    g: Vec<f64>,
}

/// The program's data.
struct Program<'a> {
    objective: &'a Objective,
    candidates: &'a [Candidate],
    cap: f64,
    rows: Rows,
}

/// The balance constraints in a well-conditioned basis: for each group of states joined by
/// candidates, one row summing the group's balance (only the jumps that leave or enter the
/// group enter it, so it is exact however slow they are), and one row per state except the
/// group's last. The last group's sum is implied by the others and left out. Slowly switching
/// environments make the plain per-state rows nearly dependent: the multipliers then lose
/// digits to the fast jumps' round-off (measured: a certificate stuck 0.4% above the value).
struct Rows {
    group_of: Vec<usize>,
    /// Constraint row (0-based, after the simplex row) of each group's sum, if kept.
    group_row: Vec<Option<usize>>,
    /// Constraint row of each state's own balance, if kept.
    state_row: Vec<Option<usize>>,
}

impl Rows {
    fn new(n: usize, candidates: &[Candidate]) -> Self {
        let groups = crate::model::components(n, candidates.iter().map(|c| (c.a, c.b)));
        let mut group_of = vec![0; n];
        let mut group_row = vec![None; groups.len()];
        let mut state_row = vec![None; n];
        let mut next = 0;
        for (g, members) in groups.iter().enumerate() {
            for &i in members {
                group_of[i] = g;
            }
            if g + 1 < groups.len() {
                group_row[g] = Some(next);
                next += 1;
            }
            for &i in &members[..members.len().saturating_sub(1)] {
                state_row[i] = Some(next);
                next += 1;
            }
        }
        Self {
            group_of,
            group_row,
            state_row,
        }
    }

    /// Multipliers of the per-state balance rows equivalent to `kept` on these rows.
    fn per_state(&self, kept: &[f64]) -> Vec<f64> {
        (0..self.state_row.len())
            .map(|i| {
                self.state_row[i].map_or(0.0, |r| kept[r])
                    + self.group_row[self.group_of[i]].map_or(0.0, |r| kept[r])
            })
            .collect()
    }
}

/// The entropy production `(f - g) ln(f / g)` of one pathway's one-way fluxes.
fn production(f: f64, g: f64) -> f64 {
    (f - g) * (f / g).ln()
}

impl Program<'_> {
    fn n(&self) -> usize {
        self.objective.n
    }

    /// Number of barrier terms: `p`, `f`, `g` and both caps of each candidate.
    fn barriers(&self) -> f64 {
        (self.n() + 4 * self.candidates.len()) as f64
    }

    fn slacks(&self, x: &Point, e: usize) -> (f64, f64) {
        let c = self.candidates[e];
        (self.cap * x.p[c.a] - x.f[e], self.cap * x.p[c.b] - x.g[e])
    }

    fn interior(&self, x: &Point) -> bool {
        x.p.iter()
            .chain(&x.f)
            .chain(&x.g)
            .all(|v| *v > 0.0 && v.is_finite())
            && (0..self.candidates.len()).all(|e| {
                let (u, v) = self.slacks(x, e);
                u > 0.0 && v > 0.0
            })
    }

    /// What a relative gap is measured against: the larger of the values and the gain over
    /// the start (the baseline's power), but never less than a thousand times the value's
    /// round-off, which no solver can beat.
    fn gap_scale(&self, x: &Point, upper: f64, value: f64, start_value: f64) -> f64 {
        let log_p: Vec<f64> = x.p.iter().map(|v| v.ln()).collect();
        let roundoff = self.objective.value_roundoff(&x.p, &log_p);
        upper
            .abs()
            .max(value.abs())
            .max((value - start_value).abs())
            .max(1e3 * roundoff)
            .max(f64::MIN_POSITIVE)
    }

    /// `F(x)`, the program's objective.
    fn value(&self, x: &Point) -> f64 {
        let log_p: Vec<f64> = x.p.iter().map(|v| v.ln()).collect();
        self.objective.value(&x.p, &log_p)
            - x.f
                .iter()
                .zip(&x.g)
                .map(|(f, g)| production(*f, *g))
                .sum::<f64>()
    }

    /// The barrier objective `F + mu * (sum of the logs of every positive quantity)`.
    fn barrier_value(&self, x: &Point, mu: f64) -> f64 {
        let logs: f64 =
            x.p.iter()
                .chain(&x.f)
                .chain(&x.g)
                .map(|v| v.ln())
                .sum::<f64>()
                + (0..self.candidates.len())
                    .map(|e| {
                        let (u, v) = self.slacks(x, e);
                        u.ln() + v.ln()
                    })
                    .sum::<f64>();
        self.value(x) + mu * logs
    }

    /// Net inflow of each group of states (see [`Rows`]), from the jumps that cross its edge,
    /// set to zero below its round-off.
    fn group_balance(&self, x: &Point) -> Vec<f64> {
        let groups = self.rows.group_row.len();
        let (mut out, mut magnitude) = (vec![0.0; groups], vec![0.0; groups]);
        for jump in &self.objective.jumps {
            let (from, to) = (
                self.rows.group_of[jump.source],
                self.rows.group_of[jump.target],
            );
            if from != to {
                let flux = jump.rate * x.p[jump.source];
                out[to] += flux;
                out[from] -= flux;
                magnitude[to] += flux;
                magnitude[from] += flux;
            }
        }
        for (r, m) in out.iter_mut().zip(&magnitude) {
            if r.abs() <= 8.0 * f64::EPSILON * m {
                *r = 0.0;
            }
        }
        out
    }

    /// Net inflow of each state: `(R p)_i` plus the candidates' net fluxes, set to zero where
    /// it is below the round-off of its own terms. A state whose fluxes are far below those
    /// of its neighbours would otherwise be asked to correct pure round-off, by steps of many
    /// orders of magnitude that point downhill (measured on a slowly switching pump).
    fn balance(&self, x: &Point) -> Vec<f64> {
        let mut out = self.objective.generator_times(&x.p);
        let mut magnitude: Vec<f64> = (0..self.n())
            .map(|i| self.objective.exit[i] * x.p[i])
            .collect();
        for jump in &self.objective.jumps {
            magnitude[jump.target] += jump.rate * x.p[jump.source];
        }
        for (e, c) in self.candidates.iter().enumerate() {
            let net = x.f[e] - x.g[e];
            out[c.b] += net;
            out[c.a] -= net;
            let traffic = x.f[e] + x.g[e];
            magnitude[c.a] += traffic;
            magnitude[c.b] += traffic;
        }
        for (r, m) in out.iter_mut().zip(&magnitude) {
            if r.abs() <= 8.0 * f64::EPSILON * m {
                *r = 0.0;
            }
        }
        out
    }

    /// One Newton step of the barrier problem at weight `mu`, in relative coordinates, and the
    /// multipliers of the balance rows (true units; the last row, implied by the others, has
    /// multiplier 0).
    fn newton_step(&self, x: &Point, mu: f64) -> Option<(Point, Vec<f64>, f64)> {
        let n = self.n();
        let size = 2 * n;
        let mut k = DMatrix::<f64>::zeros(size, size);
        let mut rhs = DVector::<f64>::zeros(size);
        // p block: Phi's Hessian in relative coordinates, -sum r p_s (e_s - e_t)(e_s - e_t)^T,
        // and the barrier on p.
        for jump in &self.objective.jumps {
            let (s, t) = (jump.source, jump.target);
            let w = jump.rate * x.p[s];
            k[(s, s)] -= w;
            k[(t, t)] -= w;
            k[(s, t)] += w;
            k[(t, s)] += w;
        }
        let log_p: Vec<f64> = x.p.iter().map(|v| v.ln()).collect();
        let gradient = self.objective.gradient(&log_p);
        for i in 0..n {
            k[(i, i)] -= mu;
            rhs[i] = -(x.p[i] * gradient[i] + mu);
        }
        // Constraint rows (symmetric form, rows negated): the simplex at n, then the balance
        // rows of [`Rows`] from n + 1.
        let rows = &self.rows;
        let row = |i: usize| rows.state_row[i].map(|r| n + 1 + r);
        for i in 0..n {
            k[(n, i)] = -x.p[i];
            k[(i, n)] = -x.p[i];
            if let Some(r) = row(i) {
                k[(r, i)] += self.objective.exit[i] * x.p[i];
                k[(i, r)] += self.objective.exit[i] * x.p[i];
            }
        }
        for jump in &self.objective.jumps {
            let (s, t) = (jump.source, jump.target);
            let v = jump.rate * x.p[s];
            if let Some(r) = row(t) {
                k[(r, s)] -= v;
                k[(s, r)] -= v;
            }
            let (from, to) = (rows.group_of[s], rows.group_of[t]);
            if from != to {
                if let Some(r) = rows.group_row[to] {
                    k[(n + 1 + r, s)] -= v;
                    k[(s, n + 1 + r)] -= v;
                }
                if let Some(r) = rows.group_row[from] {
                    k[(n + 1 + r, s)] += v;
                    k[(s, n + 1 + r)] += v;
                }
            }
        }
        rhs[n] = -(1.0 - x.p.iter().sum::<f64>());
        for (i, b) in self.balance(x).into_iter().enumerate() {
            if let Some(r) = row(i) {
                rhs[r] = b;
            }
        }
        for (g, b) in self.group_balance(x).into_iter().enumerate() {
            if let Some(r) = rows.group_row[g] {
                rhs[n + 1 + r] = b;
            }
        }
        // Each candidate: its 2x2 block, eliminated into the 4 entries it touches.
        let mut blocks = Vec::with_capacity(self.candidates.len());
        for (e, c) in self.candidates.iter().enumerate() {
            let (f, g) = (x.f[e], x.g[e]);
            let (u, v) = self.slacks(x, e);
            let (alpha_f, beta_f) = (self.cap * x.p[c.a] / u, f / u);
            let (alpha_g, beta_g) = (self.cap * x.p[c.b] / v, g / v);
            let ratio = (f / g).ln();
            // Gradient in relative coordinates.
            let grad_f = -f * (ratio + 1.0 - g / f) + mu - mu * beta_f;
            let grad_g = -g * (-ratio + 1.0 - f / g) + mu - mu * beta_g;
            rhs[c.a] -= mu * alpha_f;
            rhs[c.b] -= mu * alpha_g;
            k[(c.a, c.a)] -= mu * alpha_f * alpha_f;
            k[(c.b, c.b)] -= mu * alpha_g * alpha_g;
            let h = [
                [-(f + g) - mu - mu * beta_f * beta_f, f + g],
                [f + g, -(f + g) - mu - mu * beta_g * beta_g],
            ];
            let det = h[0][0] * h[1][1] - h[0][1] * h[1][0];
            if !(det > 0.0 && det.is_finite()) {
                return None;
            }
            let m = [
                [h[1][1] / det, -h[0][1] / det],
                [-h[1][0] / det, h[0][0] / det],
            ];
            // Coupling E (rows of the reduced system) to (f, g).
            let mut coupling: Vec<(usize, [f64; 2])> = vec![
                (c.a, [mu * alpha_f * beta_f, 0.0]),
                (c.b, [0.0, mu * alpha_g * beta_g]),
            ];
            if let Some(r) = row(c.a) {
                coupling.push((r, [f, -g]));
            }
            if let Some(r) = row(c.b) {
                coupling.push((r, [-f, g]));
            }
            let gz = [grad_f, grad_g];
            for (ri, ei) in &coupling {
                // E M (row ri)
                let em = [
                    ei[0] * m[0][0] + ei[1] * m[1][0],
                    ei[0] * m[0][1] + ei[1] * m[1][1],
                ];
                rhs[*ri] += em[0] * gz[0] + em[1] * gz[1];
                for (rj, ej) in &coupling {
                    k[(*ri, *rj)] -= em[0] * ej[0] + em[1] * ej[1];
                }
            }
            blocks.push((m, coupling, gz));
        }
        let w = solve_equilibrated(&k, &rhs)?;
        let mut step = Point {
            p: (0..n).map(|i| w[i]).collect(),
            f: vec![0.0; self.candidates.len()],
            g: vec![0.0; self.candidates.len()],
        };
        for (e, (m, coupling, gz)) in blocks.iter().enumerate() {
            let mut t = [-gz[0], -gz[1]];
            for (r, ei) in coupling {
                t[0] -= ei[0] * w[*r];
                t[1] -= ei[1] * w[*r];
            }
            step.f[e] = m[0][0] * t[0] + m[0][1] * t[1];
            step.g[e] = m[1][0] * t[0] + m[1][1] * t[1];
        }
        // Multipliers in the convention grad G = A^T lambda at a centre, per state.
        let kept: Vec<f64> = (n + 1..size).map(|r| w[r]).collect();
        let lambda = rows.per_state(&kept);
        let gain = self.directional(x, &gradient, mu, &step);
        Some((step, lambda, gain))
    }

    /// `grad G . dy` (relative coordinates): the first-order gain of a step.
    fn directional(&self, x: &Point, gradient: &[f64], mu: f64, dy: &Point) -> f64 {
        let mut total: f64 = (0..self.n())
            .map(|i| (x.p[i] * gradient[i] + mu) * dy.p[i])
            .sum();
        for (e, c) in self.candidates.iter().enumerate() {
            let (f, g) = (x.f[e], x.g[e]);
            let (u, v) = self.slacks(x, e);
            let ratio = (f / g).ln();
            total += (-f * (ratio + 1.0 - g / f) + mu - mu * f / u) * dy.f[e];
            total += (-g * (-ratio + 1.0 - f / g) + mu - mu * g / v) * dy.g[e];
            total += mu * self.cap * x.p[c.a] / u * dy.p[c.a];
            total += mu * self.cap * x.p[c.b] / v * dy.p[c.b];
        }
        total
    }

    /// `x * (1 + t dy)`.
    fn moved(x: &Point, dy: &Point, t: f64) -> Point {
        let go = |a: &[f64], d: &[f64]| a.iter().zip(d).map(|(a, d)| a * (1.0 + t * d)).collect();
        Point {
            p: go(&x.p, &dy.p),
            f: go(&x.f, &dy.f),
            g: go(&x.g, &dy.g),
        }
    }

    /// Largest step (up to 1) that keeps 1% of every positive quantity's distance to zero.
    fn longest_step(&self, x: &Point, dy: &Point) -> f64 {
        let mut t: f64 = 1.0;
        for d in dy.p.iter().chain(&dy.f).chain(&dy.g) {
            if *d < 0.0 {
                t = t.min(-0.99 / d);
            }
        }
        for (e, c) in self.candidates.iter().enumerate() {
            let (u, v) = self.slacks(x, e);
            let du = self.cap * x.p[c.a] * dy.p[c.a] - x.f[e] * dy.f[e];
            let dv = self.cap * x.p[c.b] * dy.p[c.b] - x.g[e] * dy.g[e];
            if du < 0.0 {
                t = t.min(-0.99 * u / du);
            }
            if dv < 0.0 {
                t = t.min(-0.99 * v / dv);
            }
        }
        t
    }

    /// The certified upper value at `x` with multipliers `lambda`, and its round-off.
    fn certificate(&self, x: &Point, lambda: &[f64]) -> (f64, f64) {
        let n = self.n();
        let log_p: Vec<f64> = x.p.iter().map(|v| v.ln()).collect();
        let parts = self.objective.gradient_parts(&log_p);
        let mut r = parts.gradient();
        let mut magnitude: Vec<f64> = (0..n)
            .map(|k| parts.rest[k].abs() + parts.log_inflow[k].exp())
            .collect();
        // -(R^T lambda)_s = -sum over jumps s -> t of rate (lambda_t - lambda_s).
        for jump in &self.objective.jumps {
            let term = jump.rate * (lambda[jump.target] - lambda[jump.source]);
            r[jump.source] -= term;
            magnitude[jump.source] +=
                jump.rate * (lambda[jump.target].abs() + lambda[jump.source].abs());
        }
        for (e, c) in self.candidates.iter().enumerate() {
            let (f, g) = (x.f[e], x.g[e]);
            let ratio = (f / g).ln();
            let lift = lambda[c.b] - lambda[c.a];
            // Each multiplier is raised by its own round-off, so that the fluxes' reduced
            // costs are truly at most zero; the cap then carries that allowance into `r`.
            let known = lambda[c.a].abs() + lambda[c.b].abs() + ratio.abs() + 1.0;
            let nu_f =
                (-(ratio + 1.0 - g / f) - lift + 4.0 * f64::EPSILON * (known + g / f)).max(0.0);
            let nu_g =
                (-(-ratio + 1.0 - f / g) + lift + 4.0 * f64::EPSILON * (known + f / g)).max(0.0);
            r[c.a] += self.cap * nu_f;
            r[c.b] += self.cap * nu_g;
            magnitude[c.a] += self.cap * nu_f;
            magnitude[c.b] += self.cap * nu_g;
        }
        // Every state's own round-off counts: the largest value plus its error, not the error
        // of the largest value (terms of 1e11 cancel to 1e2 at states a cap binds on).
        (0..n)
            .map(|i| (r[i], 4.0 * f64::EPSILON * magnitude[i]))
            .max_by(|a, b| (a.0 + a.1).total_cmp(&(b.0 + b.1)))
            .unwrap_or((f64::INFINITY, 0.0))
    }
}

/// Solves `k w = rhs` after symmetric equilibration (rows and columns scaled to unit largest
/// entry, a few sweeps), by LU with partial pivoting and one refinement step.
fn solve_equilibrated(k: &DMatrix<f64>, rhs: &DVector<f64>) -> Option<DVector<f64>> {
    let size = k.nrows();
    let mut scale = DVector::<f64>::from_element(size, 1.0);
    let mut scaled = k.clone();
    for _ in 0..8 {
        for i in 0..size {
            let largest = scaled.row(i).amax();
            if largest > 0.0 && largest.is_finite() {
                let s = 1.0 / largest.sqrt();
                scale[i] *= s;
                scaled.row_mut(i).scale_mut(s);
                scaled.column_mut(i).scale_mut(s);
            }
        }
    }
    let b = rhs.component_mul(&scale);
    let lu = scaled.clone().full_piv_lu();
    let mut z = lu.solve(&b)?;
    for _ in 0..3 {
        let correction = lu.solve(&(&b - &scaled * &z))?;
        z += correction;
    }
    let w = z.component_mul(&scale);
    w.iter().all(|v| v.is_finite()).then_some(w)
}

/// Solves the capped program from the baseline steady state `start` to relative gap
/// `tolerance` (certified upper minus value, over the larger of the two magnitudes plus
/// `scale`, a power scale such as the headroom).
pub fn solve(
    objective: &Objective,
    candidates: &[Candidate],
    cap: f64,
    start: &[f64],
    tolerance: f64,
) -> Result<CappedSolution, SolveError> {
    let n = objective.n;
    if !(cap > 0.0 && cap.is_finite()) || start.len() != n || n < 2 {
        return Err(SolveError::Uncertified(format!(
            "the capped program needs a positive finite cap and a start of {n} probabilities"
        )));
    }
    let program = Program {
        objective,
        candidates,
        cap,
        rows: Rows::new(n, candidates),
    };
    let floor = f64::MIN_POSITIVE.sqrt();
    let p: Vec<f64> = start.iter().map(|v| v.max(floor)).collect();
    let total: f64 = p.iter().sum();
    let p: Vec<f64> = p.iter().map(|v| v / total).collect();
    let half: Vec<f64> = candidates
        .iter()
        .map(|c| 0.5 * cap * p[c.a].min(p[c.b]))
        .collect();
    let mut x = Point {
        p,
        f: half.clone(),
        g: half,
    };
    if !program.interior(&x) {
        return Err(SolveError::Uncertified(
            "the capped program's start is not strictly inside its domain".into(),
        ));
    }
    let (upper0, _) = program.certificate(&x, &vec![0.0; n]);
    let value0 = program.value(&x);
    let power_scale = (upper0 - value0)
        .abs()
        .max(value0.abs())
        .max(f64::MIN_POSITIVE);
    let barriers = program.barriers();
    let mut mu = power_scale / barriers;
    let mut lambda = vec![0.0; n];
    let mut best: Option<(f64, f64, f64)> = None; // (upper, roundoff, value)
    let mut steps = 0;
    let mut stalled = 0;
    loop {
        // Centre at this weight.
        for _ in 0..60 {
            steps += 1;
            if steps > MAX_NEWTON_STEPS {
                break;
            }
            let Some((dy, multipliers, gain)) = program.newton_step(&x, mu) else {
                break;
            };
            lambda = multipliers;
            if !(gain.is_finite()) {
                break;
            }
            let here = program.barrier_value(&x, mu);
            let mut t = program.longest_step(&x, &dy);
            let mut accepted = false;
            for _ in 0..60 {
                let trial = Program::moved(&x, &dy, t);
                if program.interior(&trial) {
                    let there = program.barrier_value(&trial, mu);
                    let slack = 1e-13 * (here.abs() + power_scale);
                    if there >= here + 1e-4 * t * gain - slack {
                        x = trial;
                        accepted = true;
                        break;
                    }
                }
                t *= 0.5;
            }
            if !accepted || gain <= 1e-3 * mu {
                break;
            }
        }
        let (upper, roundoff) = program.certificate(&x, &lambda);
        let value = program.value(&x);
        if upper.is_finite() && best.is_none_or(|(b, r, _)| upper + roundoff < b + r) {
            best = Some((upper, roundoff, value));
            stalled = 0;
        } else {
            stalled += 1;
        }
        let (upper, roundoff, _) = best.unwrap_or((f64::INFINITY, 0.0, value));
        // Stop when the optimisation has closed the gap, or when round-off is all that is left.
        let open = upper - value;
        let scale = program.gap_scale(&x, upper, value, value0);
        if open <= tolerance * scale
            || open <= roundoff
            || stalled >= 3
            || steps > MAX_NEWTON_STEPS
            || mu < 1e-30 * power_scale
        {
            break;
        }
        mu *= 0.1;
    }
    let Some((upper, roundoff, _)) = best else {
        return Err(SolveError::Uncertified(
            "the capped program gave no finite certificate".into(),
        ));
    };
    let value = program.value(&x);
    let scale = program.gap_scale(&x, upper, value, value0);
    let (open, relative) = ((upper - value) / scale, (upper + roundoff - value) / scale);
    // The optimisation must be done (or stopped by round-off); the certified upper value then
    // includes the round-off, which must stay below the bound's own acceptance limit.
    if !((open <= ACCEPTED_GAP || upper - value <= 2.0 * roundoff) && relative <= CERTIFIED_GAP) {
        return Err(SolveError::Uncertified(format!(
            "the capped program's barrier path stopped at relative gap {relative:.1e} (round-off {:.1e}) after {steps} Newton steps",
            roundoff / scale
        )));
    }
    Ok(CappedSolution {
        route: CappedRoute::Barrier,
        dual_bound: Some(upper + roundoff),
        p: x.p,
        forward_flux: x.f,
        backward_flux: x.g,
    })
}
