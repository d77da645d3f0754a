//! Exponential-cone formulations solved with Clarabel (Goulart & Chen, "Clarabel: An
//! interior-point solver for conic programs with quadratic objectives", 2024).
//!
//! - [`universal`]: `max Phi(p)` over the simplex with optional routability rows `A p = 0`;
//!   each off-diagonal generator entry is one cone `t >= p_j ln(p_j / (c_ij p_i))`, i.e.
//!   `(-t, p_j, c_ij p_i)` in `K_exp = {(r, s, u): s > 0, s exp(r/s) <= u}`.
//! - [`capped`]: the exact best design under a per-direction rate cap, with one-way fluxes
//!   `f_e, g_e` of each candidate pathway as extra variables (methods, section 5).
//!
//! Solver outcomes other than solved are returned as [`SolveError::Conic`] with the status.

use super::newton::Constraints;
use super::objective::Objective;
use crate::steady::SolveError;
use clarabel::algebra::CscMatrix;
use clarabel::solver::{
    DefaultSettingsBuilder, DefaultSolver, IPSolver, SolverStatus, SupportedConeT,
};

/// Tolerance for results that are reported (bounds, the exact capped design).
pub const TIGHT: f64 = 1e-10;

/// Sparse constraint rows being assembled: `A x + s = b`, `s` in the cones.
struct Program {
    /// Clarabel's gap and feasibility tolerances.
    tolerance: f64,
    rows: Vec<usize>,
    cols: Vec<usize>,
    vals: Vec<f64>,
    b: Vec<f64>,
    cones: Vec<SupportedConeT<f64>>,
}

impl Program {
    fn new(tolerance: f64) -> Self {
        Self {
            tolerance,
            rows: vec![],
            cols: vec![],
            vals: vec![],
            b: vec![],
            cones: vec![],
        }
    }

    /// Appends one row `sum coef * x[col] + s = rhs` and returns its index.
    fn row(&mut self, terms: &[(usize, f64)], rhs: f64) -> usize {
        let r = self.b.len();
        for &(c, v) in terms {
            if v != 0.0 {
                self.rows.push(r);
                self.cols.push(c);
                self.vals.push(v);
            }
        }
        self.b.push(rhs);
        r
    }

    /// Equalities `terms . x = rhs`.
    fn zero(&mut self, equations: &[(Vec<(usize, f64)>, f64)]) {
        for (terms, rhs) in equations {
            self.row(terms, *rhs);
        }
        if !equations.is_empty() {
            self.cones.push(SupportedConeT::ZeroConeT(equations.len()));
        }
    }

    /// Inequalities `terms . x <= rhs`.
    fn nonnegative(&mut self, inequalities: &[(Vec<(usize, f64)>, f64)]) {
        for (terms, rhs) in inequalities {
            self.row(terms, *rhs);
        }
        if !inequalities.is_empty() {
            self.cones
                .push(SupportedConeT::NonnegativeConeT(inequalities.len()));
        }
    }

    /// `t >= x ln(x / (c y))` for variable indices t, x, y: slack `(-t, x, c y)` in `K_exp`.
    fn relative_entropy(&mut self, t: usize, x: usize, y: usize, c: f64) {
        self.row(&[(t, 1.0)], 0.0);
        self.row(&[(x, -1.0)], 0.0);
        self.row(&[(y, -c)], 0.0);
        self.cones.push(SupportedConeT::ExponentialConeT());
    }

    /// The solution and, when the solver reached its full tolerance, the dual objective (a
    /// lower bound on `min q.x` to that tolerance). A reduced-accuracy ("almost solved")
    /// solution is still returned, without the dual objective: at large rate caps it was
    /// measured off by 3e-5 relative, too much to prune a search on.
    fn solve(self, q: &[f64], variables: usize) -> Result<(Vec<f64>, Option<f64>), SolveError> {
        let m = self.b.len();
        let a = CscMatrix::new_from_triplets(m, variables, self.rows, self.cols, self.vals);
        let p = CscMatrix::<f64>::zeros((variables, variables));
        let settings = DefaultSettingsBuilder::default()
            .verbose(false)
            .max_iter(400)
            .tol_gap_abs(self.tolerance)
            .tol_gap_rel(self.tolerance)
            .tol_feas(self.tolerance)
            .build()
            .map_err(|e| SolveError::Conic(format!("bad settings: {e:?}")))?;
        let mut solver = DefaultSolver::new(&p, q, &a, &self.b, &self.cones, settings)
            .map_err(|e| SolveError::Conic(format!("{e:?}")))?;
        solver.solve();
        match solver.solution.status {
            SolverStatus::Solved | SolverStatus::AlmostSolved => {
                let exact = solver.solution.status == SolverStatus::Solved;
                Ok((
                    solver.solution.x.clone(),
                    exact.then_some(solver.solution.obj_val_dual),
                ))
            }
            status => Err(SolveError::Conic(format!("{status:?}"))),
        }
    }
}

/// Adds the entropic cones of `Phi`: variables `p` at 0..n, one `t` per jump from `first_t`.
/// Returns the objective coefficients (minimise `-Phi`).
fn entropic_part(program: &mut Program, objective: &Objective, q: &mut [f64], first_t: usize) {
    for (qk, a) in q.iter_mut().zip(&objective.work_gradient) {
        *qk = -a;
    }
    for (e, jump) in objective.jumps.iter().enumerate() {
        // term r p_j ln(p_j / (c p_i)), j = source, i = target, c = peq_j / peq_i
        let (j, i) = (jump.source, jump.target);
        let c = (objective.log_equilibrium[j] - objective.log_equilibrium[i]).exp();
        program.relative_entropy(first_t + e, j, i, c);
        q[first_t + e] = jump.rate;
    }
}

fn simplex_and(constraints: &Constraints, n: usize) -> Vec<(Vec<(usize, f64)>, f64)> {
    let mut eq = vec![((0..n).map(|k| (k, 1.0)).collect::<Vec<_>>(), 1.0)];
    eq.extend(constraints.rows.iter().map(|row| (row.clone(), 0.0)));
    eq
}

/// Maximiser of `Phi` over the simplex with `A p = 0` (conic solve; accuracy about 1e-8).
pub fn universal(objective: &Objective, constraints: &Constraints) -> Result<Vec<f64>, SolveError> {
    let n = objective.n;
    let variables = n + objective.jumps.len();
    let mut program = Program::new(TIGHT);
    program.zero(&simplex_and(constraints, n));
    let mut q = vec![0.0; variables];
    entropic_part(&mut program, objective, &mut q, n);
    let (x, _) = program.solve(&q, variables)?;
    Ok(x[..n].to_vec())
}

/// A candidate added pathway between `a` and `b` (forward is a -> b).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    pub a: usize,
    pub b: usize,
}

/// Solution of the capped program: distribution and the one-way fluxes of each candidate.
#[derive(Debug, Clone)]
pub struct CappedSolution {
    pub route: super::capped::CappedRoute,
    /// Minus the dual objective: an upper bound on the program's optimum up to the tolerance;
    /// `None` when the solver stopped at reduced accuracy.
    pub dual_bound: Option<f64>,
    pub p: Vec<f64>,
    pub forward_flux: Vec<f64>,
    pub backward_flux: Vec<f64>,
}

/// Exact best design with every added rate at most `cap`: maximise
/// `Phi(p) - sum_e [f ln(f/g) + g ln(g/f)]` subject to flux balance, `f_e <= cap p_a`,
/// `g_e <= cap p_b`, `p` in the simplex.
pub fn capped(
    objective: &Objective,
    candidates: &[Candidate],
    cap: f64,
    tolerance: f64,
) -> Result<CappedSolution, SolveError> {
    let n = objective.n;
    let m = candidates.len();
    let jumps = objective.jumps.len();
    // Layout: p | t (jumps) | f | g | s1 | s2
    let (f0, g0) = (n + jumps, n + jumps + m);
    let (s10, s20) = (n + jumps + 2 * m, n + jumps + 3 * m);
    let variables = n + jumps + 4 * m;
    let mut program = Program::new(tolerance);
    let mut equations = simplex_and(&Constraints::default(), n);
    // Flux balance (R p)_i + sum_e inc(e, i)(f_e - g_e) = 0; the last row is implied by the rest.
    let mut balance: Vec<Vec<(usize, f64)>> =
        (0..n).map(|k| vec![(k, -objective.exit[k])]).collect();
    for jump in &objective.jumps {
        balance[jump.target].push((jump.source, jump.rate));
    }
    for (e, c) in candidates.iter().enumerate() {
        balance[c.b].extend([(f0 + e, 1.0), (g0 + e, -1.0)]);
        balance[c.a].extend([(f0 + e, -1.0), (g0 + e, 1.0)]);
    }
    balance.pop();
    equations.extend(balance.into_iter().map(|row| (row, 0.0)));
    program.zero(&equations);
    let mut caps = Vec::with_capacity(2 * m);
    for (e, c) in candidates.iter().enumerate() {
        caps.push((vec![(f0 + e, 1.0), (c.a, -cap)], 0.0));
        caps.push((vec![(g0 + e, 1.0), (c.b, -cap)], 0.0));
    }
    program.nonnegative(&caps);
    let mut q = vec![0.0; variables];
    entropic_part(&mut program, objective, &mut q, n);
    for e in 0..m {
        program.relative_entropy(s10 + e, f0 + e, g0 + e, 1.0);
        program.relative_entropy(s20 + e, g0 + e, f0 + e, 1.0);
        q[s10 + e] = 1.0;
        q[s20 + e] = 1.0;
    }
    let (x, dual) = program.solve(&q, variables)?;
    Ok(CappedSolution {
        route: super::capped::CappedRoute::Conic,
        dual_bound: dual.map(|d| -d),
        p: x[..n].to_vec(),
        forward_flux: x[f0..f0 + m].iter().map(|v| v.max(0.0)).collect(),
        backward_flux: x[g0..g0 + m].iter().map(|v| v.max(0.0)).collect(),
    })
}
