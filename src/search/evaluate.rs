//! Scoring one concrete design fast: the joint steady state of baseline plus added pathways, the
//! total harvesting power, and its gradient with respect to the added log-rates by one adjoint
//! solve.
//!
//! Owns the dense inner loop of the design search (GTH for the steady state, a pivoted LU for the
//! adjoint). It must not decide which designs to try or how to report them; the independent
//! verification of reported designs lives in [`crate::bound::design::verify`], not here.

use crate::bound::objective::Objective;
use crate::model::Network;
use crate::steady::gth_rates;

/// Largest network the dense evaluator accepts (the same limit as the dense steady-state path).
pub const DENSE_LIMIT: usize = 400;

/// The baseline network prepared for repeated scoring.
pub struct Evaluator {
    n: usize,
    /// `rates[i*n + j]`: baseline rate i -> j.
    rates: Vec<f64>,
    /// `dW_base/dp_i`: the baseline power is linear in `p`.
    work_gradient: Vec<f64>,
    energies: Vec<f64>,
}

/// The joint steady state of one design and what it yields.
#[derive(Debug, Clone)]
pub struct Evaluation {
    pub p: Vec<f64>,
    /// Total harvesting power (kT per time unit).
    pub power: f64,
    /// Round-off bound of `power`: `8 n eps` (the componentwise accuracy the steady state
    /// assumes for GTH) times the sum of the magnitudes of its terms.
    pub power_roundoff: f64,
    /// `dW / d ln q` in the order of the log-rates given (forward, backward per pathway).
    pub gradient: Option<Vec<f64>>,
}

impl Evaluator {
    pub fn new(network: &Network) -> Self {
        let n = network.len();
        let mut rates = vec![0.0; n * n];
        for c in &network.channels {
            rates[c.from * n + c.to] += c.forward;
            rates[c.to * n + c.from] += c.backward;
        }
        Self {
            n,
            rates,
            work_gradient: Objective::new(network).work_gradient,
            energies: network.energies.clone(),
        }
    }

    /// Work stored per forward jump (kT) by an added pathway `a -> b` with the log-rate ratio
    /// `ln(q+/q-)`, from LDB with zero drive.
    pub fn pathway_work(&self, a: usize, b: usize, log_ratio: f64) -> f64 {
        self.energies[a] - self.energies[b] - log_ratio
    }

    /// Scores added pathways on `pairs` with log-rates `log_rates = [ln q+_1, ln q-_1, ...]`.
    pub fn evaluate(
        &self,
        pairs: &[(usize, usize)],
        log_rates: &[f64],
        with_gradient: bool,
    ) -> Evaluation {
        let n = self.n;
        let mut a = self.rates.clone();
        for (e, &(from, to)) in pairs.iter().enumerate() {
            a[from * n + to] += log_rates[2 * e].exp();
            a[to * n + from] += log_rates[2 * e + 1].exp();
        }
        let joint = with_gradient.then(|| a.clone());
        let p = gth_rates(&mut a, n);
        let mut g = self.work_gradient.clone();
        let mut power: f64 = g.iter().zip(&p).map(|(g, p)| g * p).sum();
        let mut magnitude: f64 = g.iter().zip(&p).map(|(g, p)| (g * p).abs()).sum();
        let mut flows = Vec::with_capacity(pairs.len());
        for (e, &(from, to)) in pairs.iter().enumerate() {
            let (x_f, x_b) = (log_rates[2 * e], log_rates[2 * e + 1]);
            let v = self.pathway_work(from, to, x_f - x_b);
            let (f, b) = (x_f.exp() * p[from], x_b.exp() * p[to]);
            power += v * (f - b);
            magnitude += v.abs() * (f + b);
            g[from] += v * x_f.exp();
            g[to] -= v * x_b.exp();
            flows.push((v, f, b));
        }
        let gradient = joint.map(|joint| {
            let lambda = adjoint(&joint, n, &p, &g, power);
            pairs
                .iter()
                .zip(&flows)
                .flat_map(|(&(from, to), &(v, f, b))| {
                    let (j, pull) = (f - b, lambda[to] - lambda[from]);
                    [v * f - j - f * pull, -v * b + j + b * pull]
                })
                .collect()
        });
        let power_roundoff = 8.0 * n as f64 * f64::EPSILON * magnitude;
        Evaluation {
            p,
            power,
            power_roundoff,
            gradient,
        }
    }
}

/// Solves `L^T lambda = g - (g . p) 1` with `lambda_r = 0` at the most probable state `r`, where
/// `L` is the joint generator (`rates[i*n + j]`: rate i -> j). Then
/// `dW/dtheta = dW/dtheta|_p - lambda . (dL/dtheta) p` for every rate parameter `theta`: the
/// derivative of the steady state never has to be formed.
fn adjoint(rates: &[f64], n: usize, p: &[f64], g: &[f64], power: f64) -> Vec<f64> {
    let r = (0..n).fold(0, |best, i| if p[i] > p[best] { i } else { best });
    let keep: Vec<usize> = (0..n).filter(|&i| i != r).collect();
    let m = keep.len();
    // (L^T lambda)_i = sum_j rate(i -> j) (lambda_j - lambda_i).
    let mut matrix = vec![0.0; m * m];
    let mut rhs = vec![0.0; m];
    for (row, &i) in keep.iter().enumerate() {
        let exit: f64 = (0..n).filter(|&j| j != i).map(|j| rates[i * n + j]).sum();
        matrix[row * m + row] = -exit;
        for (col, &j) in keep.iter().enumerate() {
            if j != i {
                matrix[row * m + col] += rates[i * n + j];
            }
        }
        rhs[row] = g[i] - power;
    }
    let solution = solve_dense(&mut matrix, &mut rhs, m);
    let mut lambda = vec![0.0; n];
    for (k, &i) in keep.iter().enumerate() {
        lambda[i] = solution[k];
    }
    lambda
}

/// Gaussian elimination with partial pivoting on a small dense system (row-major `m x m`).
/// The matrix is a principal block of a transposed generator of an irreducible chain, so it is
/// nonsingular.
fn solve_dense(matrix: &mut [f64], rhs: &mut [f64], m: usize) -> Vec<f64> {
    for k in 0..m {
        let pivot = (k..m)
            .max_by(|&x, &y| matrix[x * m + k].abs().total_cmp(&matrix[y * m + k].abs()))
            .unwrap_or(k);
        if pivot != k {
            for c in 0..m {
                matrix.swap(k * m + c, pivot * m + c);
            }
            rhs.swap(k, pivot);
        }
        let d = matrix[k * m + k];
        for i in k + 1..m {
            let f = matrix[i * m + k] / d;
            if f != 0.0 {
                for c in k..m {
                    matrix[i * m + c] -= f * matrix[k * m + c];
                }
                rhs[i] -= f * rhs[k];
            }
        }
    }
    let mut x = vec![0.0; m];
    for k in (0..m).rev() {
        let tail: f64 = (k + 1..m).map(|c| matrix[k * m + c] * x[c]).sum();
        x[k] = (rhs[k] - tail) / matrix[k * m + k];
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bound::design::{verify, Pathway};
    use crate::model::Channel;

    fn walker() -> Network {
        let energies = vec![0.0, -1.5, 0.7, 2.0];
        let mut channels = Vec::new();
        for (a, b, k, w, d) in [
            (0, 1, 3.0, 0.5, 2.0),
            (1, 2, 1.5, 1.0, 3.0),
            (2, 3, 0.8, 0.0, 1.0),
            (3, 0, 2.2, 0.3, 0.5),
        ] {
            channels.push(Channel::balanced(&energies, a, b, k, w, d));
        }
        Network { energies, channels }
    }

    #[test]
    fn power_matches_the_independent_verification() {
        let net = walker();
        let pairs = [(0, 2), (1, 3)];
        let x = [2.0_f64, -1.0, 0.3, 1.2];
        let score = Evaluator::new(&net).evaluate(&pairs, &x, false);
        let pathways: Vec<Pathway> = pairs
            .iter()
            .enumerate()
            .map(|(e, &(a, b))| Pathway::with_rates(&net, a, b, x[2 * e].exp(), x[2 * e + 1].exp()))
            .collect();
        let verified = verify(&net, &pathways).unwrap();
        assert!((score.power - verified.power).abs() <= 1e-12 * verified.power.abs().max(1.0));
    }

    #[test]
    fn adjoint_gradient_matches_central_differences() {
        check_gradient(
            &walker(),
            &[(0, 2), (1, 3), (2, 0)],
            &[1.1, -0.4, 0.2, 0.9, -2.0, 0.5],
        );
        // Seeded random networks (ring plus random chords, 9 states) with three pathways.
        for seed in 1..=8 {
            let net = crate::bench::synthetic(crate::bench::Family::RandomChords, 9, seed);
            let mut rng = crate::bench::SplitMix::new(seed + 100);
            let mut pick = || (rng.uniform() * 9.0) as usize % 9;
            let pairs: Vec<(usize, usize)> = (0..3)
                .map(|_| {
                    let a = pick();
                    (a, (a + 1 + pick() % 8) % 9)
                })
                .collect();
            let x: Vec<f64> = (0..6)
                .map(|k| ((seed as f64 + k as f64) * 1.7).sin() * 2.0)
                .collect();
            check_gradient(&net, &pairs, &x);
        }
    }

    /// Central differences with step h have error O(h^2 f'''): h = 1e-4 keeps it near 1e-8,
    /// well inside the 1e-6 relative tolerance, while round-off stays ~1e-16 / 1e-4.
    fn check_gradient(net: &Network, pairs: &[(usize, usize)], x: &[f64]) {
        let (pairs, x) = (pairs.to_vec(), x.to_vec());
        let eval = Evaluator::new(net);
        let gradient = eval.evaluate(&pairs, &x, true).gradient.unwrap();
        let h = 1e-4;
        for k in 0..x.len() {
            let (mut up, mut down) = (x.clone(), x.clone());
            up[k] += h;
            down[k] -= h;
            let fd = (eval.evaluate(&pairs, &up, false).power
                - eval.evaluate(&pairs, &down, false).power)
                / (2.0 * h);
            let scale = gradient.iter().map(|g| g.abs()).fold(0.0, f64::max);
            assert!(
                (gradient[k] - fd).abs() <= 1e-6 * scale,
                "component {k}: adjoint {} vs central difference {fd}",
                gradient[k]
            );
        }
    }
}
