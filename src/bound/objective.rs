//! The concave bound function `Phi(p) = W(p) + sum_i (R p)_i ln(p_i / peq_i)` (kT units) with
//! its gradient (split so that the inflow term, unbounded as `p_k -> 0`, stays a logarithm) and
//! the round-off scales of both, evaluated in the log domain.
//!
//! Written with the off-diagonal generator entries `r_ij` (rate j -> i, channels merged) and
//! `phi = ln p - ln peq`, the entropic part is `-sum r_ij p_j (phi_j - phi_i)`, a negative sum of
//! relative-entropy perspectives, so every quantity is computed from `ln p` without forming
//! `p_i / p_j` ratios that could overflow. No solving happens here.

use crate::model::Network;

/// One off-diagonal generator entry: jumps `source -> target` at total `rate`.
#[derive(Debug, Clone, Copy)]
pub struct Jump {
    pub source: usize,
    pub target: usize,
    pub rate: f64,
    /// `ln rate`, kept because the Newton solver needs it for every jump at every step.
    pub log_rate: f64,
}

/// The gradient of `Phi` in two parts (see [`Objective::gradient_parts`]).
#[derive(Debug, Clone)]
pub struct GradientParts {
    pub rest: Vec<f64>,
    pub log_inflow: Vec<f64>,
}

impl GradientParts {
    /// `g = rest + exp(log_inflow)`.
    pub fn gradient(&self) -> Vec<f64> {
        self.rest
            .iter()
            .zip(&self.log_inflow)
            .map(|(r, q)| r + q.exp())
            .collect()
    }
}

/// The data of `Phi` for one network.
#[derive(Debug, Clone)]
pub struct Objective {
    pub n: usize,
    /// Off-diagonal generator entries, parallel jumps merged.
    pub jumps: Vec<Jump>,
    /// `a_k = dW/dp_k`: work stored per unit probability at state k.
    pub work_gradient: Vec<f64>,
    /// `ln peq`.
    pub log_equilibrium: Vec<f64>,
    /// Total exit rate of each state.
    pub exit: Vec<f64>,
}

impl Objective {
    pub fn new(network: &Network) -> Self {
        let n = network.len();
        let mut merged = std::collections::BTreeMap::new();
        let mut work_gradient = vec![0.0; n];
        let mut exit = vec![0.0; n];
        for c in &network.channels {
            *merged.entry((c.from, c.to)).or_insert(0.0) += c.forward;
            *merged.entry((c.to, c.from)).or_insert(0.0) += c.backward;
            work_gradient[c.from] += c.work * c.forward;
            work_gradient[c.to] -= c.work * c.backward;
            exit[c.from] += c.forward;
            exit[c.to] += c.backward;
        }
        let jumps = merged
            .into_iter()
            .map(|((source, target), rate): ((usize, usize), f64)| Jump {
                source,
                target,
                rate,
                log_rate: rate.ln(),
            })
            .collect();
        Self {
            n,
            jumps,
            work_gradient,
            log_equilibrium: network.log_equilibrium(),
            exit,
        }
    }

    /// Harvesting power of the baseline channels `W(p) = a . p`.
    pub fn work(&self, p: &[f64]) -> f64 {
        self.work_gradient.iter().zip(p).map(|(a, p)| a * p).sum()
    }

    /// `sum_i (R p)_i phi_i = -sum r_ij p_j (phi_j - phi_i)` with `phi = ln p - ln peq`.
    pub fn entropic(&self, p: &[f64], log_p: &[f64]) -> f64 {
        let phi = |i: usize| log_p[i] - self.log_equilibrium[i];
        -self
            .jumps
            .iter()
            .map(|j| j.rate * p[j.source] * (phi(j.source) - phi(j.target)))
            .sum::<f64>()
    }

    /// `Phi(p)`.
    pub fn value(&self, p: &[f64], log_p: &[f64]) -> f64 {
        self.work(p) + self.entropic(p, log_p)
    }

    /// Round-off scale of [`Objective::value`]: the sum of the magnitudes of its terms times
    /// machine epsilon (a sum of many terms is only known to about this absolute accuracy).
    pub fn value_roundoff(&self, p: &[f64], log_p: &[f64]) -> f64 {
        let phi = |i: usize| log_p[i] - self.log_equilibrium[i];
        // Each log ratio phi_s - phi_t is a difference of numbers known to epsilon of their own
        // size, so a term is known to epsilon times r p_s (|phi_s| + |phi_t|), not times its
        // (possibly tiny) value: the smaller estimate made the line search refuse steps of
        // 1e-7 whose value moved by 1.5e-12 at 606 with rates up to 1e7.
        let entropic: f64 = self
            .jumps
            .iter()
            .map(|j| j.rate * p[j.source] * (1.0 + phi(j.source).abs() + phi(j.target).abs()))
            .sum();
        let work: f64 = self
            .work_gradient
            .iter()
            .zip(p)
            .map(|(a, p)| (a * p).abs())
            .sum();
        f64::EPSILON * (entropic + work)
    }

    /// Round-off scale of the `g . p` term of the certificate `max g - g . p`: each term is a
    /// one-way flux `r p_s` times a log ratio, known to machine epsilon of its size.
    pub fn flux_roundoff(&self, p: &[f64], log_p: &[f64]) -> f64 {
        let phi = |i: usize| log_p[i] - self.log_equilibrium[i];
        f64::EPSILON
            * self
                .jumps
                .iter()
                .map(|j| j.rate * p[j.source] * (1.0 + (phi(j.source) - phi(j.target)).abs()))
                .sum::<f64>()
    }

    /// Round-off scale of `max g`: epsilon times the largest sum of magnitudes of one state's
    /// gradient terms. With fast jumps out of an improbable state `g_k` is a difference of two
    /// large terms (measured: 3.5e9 /s out of a state at e^-16 left a certificate gap of 2e-7
    /// beside a bound of 9e-6), and no step can close the gap below this.
    pub fn gradient_roundoff(&self, log_p: &[f64]) -> f64 {
        let phi = |i: usize| log_p[i] - self.log_equilibrium[i];
        let parts = self.gradient_parts(log_p);
        let mut magnitude: Vec<f64> = (0..self.n)
            .map(|k| {
                self.work_gradient[k].abs()
                    + self.exit[k] * (phi(k).abs() + 1.0)
                    + parts.log_inflow[k].exp()
            })
            .collect();
        for j in &self.jumps {
            magnitude[j.source] += j.rate * phi(j.target).abs();
        }
        f64::EPSILON * magnitude.iter().copied().fold(0.0, f64::max)
    }

    /// `(R p)_i`: net probability inflow of each state under the baseline.
    pub fn generator_times(&self, p: &[f64]) -> Vec<f64> {
        let mut out: Vec<f64> = (0..self.n).map(|i| -self.exit[i] * p[i]).collect();
        for j in &self.jumps {
            out[j.target] += j.rate * p[j.source];
        }
        out
    }

    /// Gradient `g_k = a_k + sum_i R_ik phi_i + (R p)_k / p_k`, with
    /// `(R p)_k / p_k = sum_j r_kj exp(ln p_j - ln p_k) - exit_k` computed from logs.
    pub fn gradient(&self, log_p: &[f64]) -> Vec<f64> {
        self.gradient_parts(log_p).gradient()
    }

    /// The gradient split as `g_k = rest_k + exp(log_inflow_k)`: the inflow term
    /// `(sum_j r_kj p_j) / p_k`, which grows without limit as `p_k -> 0`, kept as a logarithm
    /// (`-inf` for a state nothing jumps into), and the rest, linear in `ln p`.
    pub fn gradient_parts(&self, log_p: &[f64]) -> GradientParts {
        let phi: Vec<f64> = (0..self.n)
            .map(|i| log_p[i] - self.log_equilibrium[i])
            .collect();
        let mut rest: Vec<f64> = (0..self.n)
            .map(|k| self.work_gradient[k] - self.exit[k] * (phi[k] + 1.0))
            .collect();
        // Streaming log-sum-exp of the inflow terms: one exponential per jump, rescaling the
        // running sum whenever a larger term arrives.
        let mut top = vec![f64::NEG_INFINITY; self.n];
        let mut sum = vec![0.0; self.n];
        for j in &self.jumps {
            rest[j.source] += j.rate * phi[j.target];
            let t = j.target;
            let term = j.log_rate + log_p[j.source] - log_p[t];
            if term == f64::NEG_INFINITY {
                continue; // a zero rate (or an empty source) adds nothing
            } else if term > top[t] {
                sum[t] = sum[t] * (top[t] - term).exp() + 1.0;
                top[t] = term;
            } else {
                sum[t] += (term - top[t]).exp();
            }
        }
        let log_inflow = top.iter().zip(&sum).map(|(t, s)| t + s.ln()).collect();
        GradientParts { rest, log_inflow }
    }

    /// The benefit/cost split `Phi = B - sigma_na` at `p`, given the baseline steady state `pi`:
    /// `B(p) = W(p) + sum_i (R p)_i ln(pi_i / peq_i)` and
    /// `sigma_na(p) = -sum_i (R p)_i ln(p_i / pi_i) >= 0` (kT per time unit).
    pub fn split(&self, p: &[f64], log_p: &[f64], log_pi: &[f64]) -> (f64, f64) {
        let rp = self.generator_times(p);
        let benefit = self.work(p)
            + (0..self.n)
                .map(|i| rp[i] * (log_pi[i] - self.log_equilibrium[i]))
                .sum::<f64>();
        let cost = -self
            .jumps
            .iter()
            .map(|j| {
                let (a, b) = (j.source, j.target);
                // pairwise form of -sum_i (Rp)_i psi_i, psi = ln p - ln pi, as for `entropic`
                -j.rate * p[a] * ((log_p[a] - log_pi[a]) - (log_p[b] - log_pi[b]))
            })
            .sum::<f64>();
        (benefit, cost)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Channel;

    fn small() -> Network {
        let ch = |from, to, forward, backward, work| Channel {
            from,
            to,
            forward,
            backward,
            work,
            drive: 0.0,
        };
        Network {
            energies: vec![0.0, 1.0, -0.5],
            channels: vec![
                ch(0, 1, 2.0, 0.3, 0.7),
                ch(1, 2, 1.5, 0.2, 0.0),
                ch(2, 0, 0.9, 1.1, -0.2),
                ch(0, 1, 0.4, 0.1, 0.0),
            ],
        }
    }

    fn logs(p: &[f64]) -> Vec<f64> {
        p.iter().map(|x| x.ln()).collect()
    }

    #[test]
    fn gradient_matches_central_differences() {
        let obj = Objective::new(&small());
        let p = [0.2, 0.5, 0.3];
        let g = obj.gradient(&logs(&p));
        for k in 0..3 {
            let h = 1e-6;
            let (mut up, mut down) = (p, p);
            up[k] += h;
            down[k] -= h;
            let fd = (obj.value(&up, &logs(&up)) - obj.value(&down, &logs(&down))) / (2.0 * h);
            assert!(
                (fd - g[k]).abs() < 1e-7 * (1.0 + g[k].abs()),
                "{k}: {fd} vs {}",
                g[k]
            );
        }
    }
}
