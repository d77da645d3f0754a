//! Continuous rates inside one pathway set: a smooth map from free parameters onto the designs
//! that respect the budget, and its local maximisation with L-BFGS (`argmin`) from several
//! starts, using the adjoint gradient of [`super::evaluate`].
//!
//! Owns the parametrisation and the optimiser settings. It must not choose pathway sets or
//! report anything.

use super::evaluate::{Evaluation, Evaluator};
use super::Budget;
use argmin::core::{CostFunction, Error as ArgminError, Executor, Gradient};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::quasinewton::LBFGS;
use std::cell::RefCell;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Sharpness of the smooth total-rate limit: the rates are scaled by
/// `(1 + (S/T)^m)^(-1/m)`, which is 1 for a sum `S` well below `T` and `T/S` well above it.
const TOTAL_RATE_SHARPNESS: f64 = 64.0;

/// L-BFGS iterations per start.
const MAX_ITERATIONS: u64 = 120;

/// Power evaluations per start, line searches included: a bound on the work of one start
/// whatever the line search does (on a 3-state ring with a cap of 1e308, rates near the top
/// of the double range once kept the More-Thuente search busy for minutes).
const MAX_EVALUATIONS: usize = 40 * MAX_ITERATIONS as usize;

fn softplus(x: f64) -> f64 {
    if x > 30.0 {
        x
    } else {
        x.exp().ln_1p()
    }
}

fn sigmoid(x: f64) -> f64 {
    1.0 / (1.0 + (-x).exp())
}

/// Maps parameters `[z_1, y_1, z_2, y_2, ...]` (two per pathway) to log-rates that meet the
/// budget: `z` sets the work per jump (`v = W tanh z` under a work limit `W`, else `v = z`), `y`
/// sets the larger of the two log-rates (`ln K - softplus(-y)` under a cap `K`, else `y`), and a
/// total-rate limit scales all rates down smoothly.
pub struct RateMap<'a> {
    pub budget: &'a Budget,
    /// `F_a - F_b` per pathway (kT).
    pub drops: Vec<f64>,
}

/// The largest double `l` with `exp(l) <= cap`: `exp(ln 10)` rounds to 10.000000000000002, so a
/// design at its cap would otherwise list a rate one rounding step above the budget.
fn log_not_above(cap: f64) -> f64 {
    let mut level = cap.ln();
    for _ in 0..8 {
        if !(level.is_finite() && level.exp() > cap) {
            break;
        }
        // One step towards -inf (`f64::next_down`, written out for Rust 1.84).
        let bits = level.to_bits();
        level = if level > 0.0 {
            f64::from_bits(bits - 1)
        } else if level < 0.0 {
            f64::from_bits(bits + 1)
        } else {
            -f64::from_bits(1)
        };
    }
    level
}

impl RateMap<'_> {
    fn work(&self, z: f64) -> (f64, f64) {
        match self.budget.work_limit {
            Some(w) => (w * z.tanh(), w * (1.0 - z.tanh().powi(2))),
            None => (z, 1.0),
        }
    }

    fn level(&self, y: f64) -> (f64, f64) {
        match self.budget.rate_cap {
            Some(cap) => (log_not_above(cap) - softplus(-y), sigmoid(-y)),
            None => (y, 1.0),
        }
    }

    /// Log-rates `[ln q+_1, ln q-_1, ...]` for `theta`.
    pub fn log_rates(&self, theta: &[f64]) -> Vec<f64> {
        self.forward(theta).0
    }

    /// Log-rates and what the chain rule needs: per pathway `(dv/dz, du/dy, d)` and the
    /// total-rate factor `(sigma, softmax)`.
    #[allow(clippy::type_complexity)]
    fn forward(&self, theta: &[f64]) -> (Vec<f64>, Vec<(f64, f64, f64)>, Option<(f64, Vec<f64>)>) {
        let mut x = Vec::with_capacity(theta.len());
        let mut local = Vec::with_capacity(self.drops.len());
        for (e, drop) in self.drops.iter().enumerate() {
            let (v, dv) = self.work(theta[2 * e]);
            let (u, du) = self.level(theta[2 * e + 1]);
            let d = drop - v; // ln(q+/q-)
            x.push(u - (-d).max(0.0));
            x.push(u - d.max(0.0));
            local.push((dv, du, d));
        }
        let total = self.budget.total_rate.map(|t| {
            let peak = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let weights: Vec<f64> = x.iter().map(|xi| (xi - peak).exp()).collect();
            let sum: f64 = weights.iter().sum();
            let log_sum = peak + sum.ln();
            let m = TOTAL_RATE_SHARPNESS;
            let shift = -softplus(m * (log_sum - t.ln())) / m;
            x.iter_mut().for_each(|xi| *xi += shift);
            let softmax = weights.iter().map(|w| w / sum).collect();
            (sigmoid(m * (log_sum - t.ln())), softmax)
        });
        (x, local, total)
    }

    /// Gradient with respect to `theta` from the gradient with respect to the log-rates.
    pub fn pull_back(&self, theta: &[f64], by_log_rate: &[f64]) -> Vec<f64> {
        let (_, local, total) = self.forward(theta);
        let mut g = by_log_rate.to_vec();
        if let Some((s, softmax)) = total {
            let sum: f64 = by_log_rate.iter().sum();
            for (gj, w) in g.iter_mut().zip(&softmax) {
                *gj -= sum * s * w;
            }
        }
        let mut out = Vec::with_capacity(theta.len());
        for (e, &(dv, du, d)) in local.iter().enumerate() {
            let (gf, gb) = (g[2 * e], g[2 * e + 1]);
            let by_d = if d < 0.0 { gf } else { 0.0 } - if d > 0.0 { gb } else { 0.0 };
            out.push(-by_d * dv);
            out.push((gf + gb) * du);
        }
        out
    }

    /// Parameters that give (approximately, within the budget) the rates `forward`, `backward`.
    pub fn parameters_for(&self, rates: &[(f64, f64)]) -> Vec<f64> {
        let mut theta = Vec::with_capacity(2 * rates.len());
        for (&(f, b), drop) in rates.iter().zip(&self.drops) {
            let v = drop - (f / b).ln();
            theta.push(match self.budget.work_limit {
                Some(w) => (v / w).clamp(-0.999_999, 0.999_999).atanh(),
                None => v,
            });
            let u = f.max(b).ln();
            theta.push(match self.budget.rate_cap {
                // y = -softplus^-1(ln K - u), with the gap kept off zero.
                Some(cap) => -(((log_not_above(cap) - u).max(1e-9)).exp_m1()).ln(),
                None => u,
            });
        }
        theta
    }
}

/// Where the pathways of one design act: each candidate pathway acts on one pair of states or,
/// when environment-blind, on its copies in every environment state with the same rates.
pub struct Layout {
    pub members: Vec<Vec<(usize, usize)>>,
}

impl Layout {
    /// Every pair the design acts on, candidate by candidate.
    pub fn pairs(&self) -> Vec<(usize, usize)> {
        self.members.iter().flatten().copied().collect()
    }

    /// Log-rates per pair from log-rates per candidate (two each).
    pub fn expand(&self, x: &[f64]) -> Vec<f64> {
        self.members
            .iter()
            .enumerate()
            .flat_map(|(e, m)| m.iter().flat_map(move |_| [x[2 * e], x[2 * e + 1]]))
            .collect()
    }

    /// Gradient per candidate from the gradient per pair (shared rates add up).
    pub fn collapse(&self, g: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; 2 * self.members.len()];
        let mut k = 0;
        for (e, m) in self.members.iter().enumerate() {
            for _ in m {
                out[2 * e] += g[2 * k];
                out[2 * e + 1] += g[2 * k + 1];
                k += 1;
            }
        }
        out
    }
}

/// The cost seen by argmin: minus the power gain over the baseline in units of `scale`, with
/// the last evaluation cached (L-BFGS asks for cost and gradient at the same point).
struct Problem<'a> {
    evaluator: &'a Evaluator,
    map: &'a RateMap<'a>,
    layout: &'a Layout,
    pairs: Vec<(usize, usize)>,
    baseline: f64,
    scale: f64,
    scorings: &'a AtomicUsize,
    cache: RefCell<Option<(Vec<f64>, Evaluation)>>,
    /// Evaluations so far, and the best finite power seen with its parameters.
    evaluations: std::cell::Cell<usize>,
    best_seen: &'a RefCell<Option<(Vec<f64>, f64)>>,
}

impl Problem<'_> {
    /// The evaluation at `theta`, or an error once the evaluation budget is spent (which ends
    /// the optimiser's run; the best point seen is kept in `best_seen`).
    fn evaluation(&self, theta: &[f64]) -> Result<Evaluation, ArgminError> {
        if let Some((at, eval)) = self.cache.borrow().as_ref() {
            if at == theta {
                return Ok(eval.clone());
            }
        }
        if self.evaluations.get() >= MAX_EVALUATIONS {
            return Err(ArgminError::msg("evaluation budget of this start spent"));
        }
        self.evaluations.set(self.evaluations.get() + 1);
        self.scorings.fetch_add(1, Ordering::Relaxed);
        let log_rates = self.layout.expand(&self.map.log_rates(theta));
        let eval = self.evaluator.evaluate(&self.pairs, &log_rates, true);
        if eval.power.is_finite()
            && self
                .best_seen
                .borrow()
                .as_ref()
                .is_none_or(|(_, best)| eval.power > *best)
        {
            *self.best_seen.borrow_mut() = Some((theta.to_vec(), eval.power));
        }
        *self.cache.borrow_mut() = Some((theta.to_vec(), eval.clone()));
        Ok(eval)
    }
}

impl CostFunction for Problem<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, theta: &Self::Param) -> Result<f64, ArgminError> {
        let power = self.evaluation(theta)?.power;
        Ok(if power.is_finite() {
            -(power - self.baseline) / self.scale
        } else {
            f64::INFINITY
        })
    }
}

impl Gradient for Problem<'_> {
    type Param = Vec<f64>;
    type Gradient = Vec<f64>;
    fn gradient(&self, theta: &Self::Param) -> Result<Vec<f64>, ArgminError> {
        let eval = self.evaluation(theta)?;
        let by_rate = self.layout.collapse(&eval.gradient.unwrap_or_default());
        let gradient: Vec<f64> = self
            .map
            .pull_back(theta, &by_rate)
            .into_iter()
            .map(|g| -g / self.scale)
            .collect();
        if gradient.iter().all(|g| g.is_finite()) {
            Ok(gradient)
        } else {
            // A step into rates where the adjoint overflows ends this start's run.
            Err(ArgminError::msg("non-finite gradient"))
        }
    }
}

/// The best point found from `start` and its power.
pub struct LocalBest {
    pub theta: Vec<f64>,
    pub power: f64,
}

/// Maximises the power over the parameters from `start` with L-BFGS. Never worse than `start`.
pub fn maximise(
    evaluator: &Evaluator,
    map: &RateMap,
    layout: &Layout,
    start: Vec<f64>,
    (baseline, scale): (f64, f64),
    scorings: &AtomicUsize,
) -> LocalBest {
    let pairs = layout.pairs();
    let start_power = evaluator
        .evaluate(&pairs, &layout.expand(&map.log_rates(&start)), false)
        .power;
    let best_seen = RefCell::new(None);
    let problem = Problem {
        evaluator,
        map,
        layout,
        pairs,
        baseline,
        scale: scale.max(f64::MIN_POSITIVE),
        scorings,
        cache: RefCell::new(None),
        evaluations: std::cell::Cell::new(0),
        best_seen: &best_seen,
    };
    scorings.fetch_add(1, Ordering::Relaxed);
    let mut best = LocalBest {
        theta: start.clone(),
        power: if start_power.is_finite() {
            start_power
        } else {
            f64::NEG_INFINITY
        },
    };
    // The settings are constants within argmin's accepted ranges, so building cannot fail;
    // should it, the start is returned unchanged.
    let solver = MoreThuenteLineSearch::new()
        .with_c(1e-4, 0.9)
        .and_then(|search| LBFGS::new(search, 7).with_tolerance_cost(1e-13))
        .and_then(|solver| solver.with_tolerance_grad(1e-10));
    let Ok(solver) = solver else {
        return best;
    };
    let outcome = Executor::new(problem, solver)
        .configure(|state| state.param(start).max_iters(MAX_ITERATIONS))
        .run();
    // Whether the run ended normally, by a failed line search or by the evaluation budget,
    // the best point evaluated is kept if it improves on the start.
    drop(outcome);
    if let Some((theta, power)) = best_seen.borrow_mut().take() {
        if power > best.power {
            best = LocalBest { theta, power };
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rates_at_the_cap_never_exceed_it() {
        // exp(ln 10) = 10.000000000000002 in double precision (IEEE 754 rounding).
        assert!(10f64.ln().exp() > 10.0);
        for cap in [10.0, 1000.0, 50.0, 0.3, 7e-5, 1e300, 3.0e-300] {
            let level = log_not_above(cap);
            assert!(level.exp() <= cap, "{cap}");
            // One step of `ln cap` moves `exp` by about |ln cap| epsilon, relative.
            let step = (cap.ln().abs() + 2.0) * f64::EPSILON;
            assert!(level.exp() >= cap * (1.0 - 2.0 * step), "{cap}");
        }
    }

    fn budget(cap: Option<f64>, total: Option<f64>, work: Option<f64>) -> Budget {
        Budget {
            max_pathways: 2,
            rate_cap: cap,
            total_rate: total,
            work_limit: work,
        }
    }

    #[test]
    fn every_parameter_meets_the_budget() {
        let b = budget(Some(50.0), Some(60.0), Some(3.0));
        let map = RateMap {
            budget: &b,
            drops: vec![1.0, -2.5],
        };
        for k in 0..200 {
            let theta: Vec<f64> = (0..4)
                .map(|i| ((k * 7 + i * 13) % 41) as f64 - 20.0)
                .collect();
            let x = map.log_rates(&theta);
            let total: f64 = x.iter().map(|v| v.exp()).sum();
            assert!(total <= 60.0 * (1.0 + 1e-12), "total {total}");
            for e in 0..2 {
                assert!(x[2 * e].exp() <= 50.0 * (1.0 + 1e-12));
                let work = map.drops[e] - (x[2 * e] - x[2 * e + 1]);
                assert!(work.abs() <= 3.0 * (1.0 + 1e-12), "work {work}");
            }
        }
    }

    #[test]
    fn pull_back_matches_central_differences() {
        // Central differences (step 1e-6) on the composite map, component by component.
        let b = budget(Some(50.0), Some(40.0), Some(3.0));
        let map = RateMap {
            budget: &b,
            drops: vec![1.0, -2.5],
        };
        let theta = vec![0.3, 1.2, -0.7, 2.5];
        let weights = [0.7, -1.3, 2.1, 0.4];
        let f = |t: &[f64]| -> f64 {
            map.log_rates(t)
                .iter()
                .zip(&weights)
                .map(|(x, w)| x * w)
                .sum()
        };
        let g = map.pull_back(&theta, &weights);
        for k in 0..4 {
            let (mut up, mut down) = (theta.clone(), theta.clone());
            up[k] += 1e-6;
            down[k] -= 1e-6;
            let fd = (f(&up) - f(&down)) / 2e-6;
            assert!((g[k] - fd).abs() < 1e-6, "component {k}: {} vs {fd}", g[k]);
        }
    }
}
