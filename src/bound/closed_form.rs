//! Closed-form estimates of the bound (theory note, section 6).
//!
//! Near equilibrium, `Phi(pi + eps) ~ W_base + v . eps - (1/2) eps' H eps` with `v` the
//! gradient of the linear benefit `B` at the baseline steady state `pi` and
//! `H = -(D^-1 R + R' D^-1)`, `D = diag(pi)` (positive semidefinite, null vector `pi`).
//! Maximising over `sum eps = 0` gives `H eps = v - c 1`, `1' eps = 0`, and the headroom
//! `v . eps / 2` (kT units): quadratic in the drive. No I/O.

use super::objective::Objective;
use crate::linalg::SparseLu;
use crate::model::Network;
use crate::steady::SolveError;
use faer::sparse::Triplet;
use faer::Mat;

/// The near-equilibrium estimate: headroom and the shift of the optimal distribution.
#[derive(Debug, Clone)]
pub struct NearEquilibrium {
    /// Estimated headroom `v . eps / 2` (kT per time unit).
    pub headroom: f64,
    /// Estimated `p* - pi`.
    pub shift: Vec<f64>,
}

/// The quadratic (near-equilibrium) estimate around the baseline steady state `pi`.
pub fn near_equilibrium(network: &Network, pi: &[f64]) -> Result<NearEquilibrium, SolveError> {
    let objective = Objective::new(network);
    let n = objective.n;
    // v_k = a_k + sum_i R_ik psi_i, psi = ln(pi / peq).
    let psi: Vec<f64> = (0..n)
        .map(|i| pi[i].ln() - objective.log_equilibrium[i])
        .collect();
    let mut v: Vec<f64> = (0..n)
        .map(|k| objective.work_gradient[k] - objective.exit[k] * psi[k])
        .collect();
    let mut triplets = Vec::with_capacity(2 * objective.jumps.len() + 3 * n);
    for (k, (exit, p)) in objective.exit.iter().zip(pi).enumerate() {
        triplets.push(Triplet::new(k, k, 2.0 * exit / p));
        triplets.push(Triplet::new(k, n, 1.0));
        triplets.push(Triplet::new(n, k, 1.0));
    }
    for jump in &objective.jumps {
        // R_ts = r for the jump s -> t: H_ts and H_st both get -r / pi_t.
        let (s, t, r) = (jump.source, jump.target, jump.rate);
        v[s] += r * psi[t];
        triplets.push(Triplet::new(t, s, -r / pi[t]));
        triplets.push(Triplet::new(s, t, -r / pi[t]));
    }
    let mut rhs = Mat::<f64>::from_fn(n + 1, 1, |i, _| if i < n { v[i] } else { 0.0 });
    SparseLu::factor(n + 1, &triplets)?.solve_in_place(rhs.as_mut());
    let shift: Vec<f64> = (0..n).map(|k| rhs[(k, 0)]).collect();
    let headroom = 0.5 * v.iter().zip(&shift).map(|(a, b)| a * b).sum::<f64>();
    Ok(NearEquilibrium { headroom, shift })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Channel;

    /// Ring of n states, rates k both ways, one step storing and drawing theta: the theory
    /// note's closed form theta^2 k (n - 1) / (4 n^2) is exact for the quadratic estimate.
    #[test]
    fn ring_estimate_matches_the_closed_form() {
        for n in [3usize, 5, 12] {
            let (k, theta) = (1.7, 0.3);
            let channels = (0..n)
                .map(|i| {
                    let labels = if i == 0 { theta } else { 0.0 };
                    Channel {
                        from: i,
                        to: (i + 1) % n,
                        forward: k,
                        backward: k,
                        work: labels,
                        drive: labels,
                    }
                })
                .collect();
            let net = Network {
                energies: vec![0.0; n],
                channels,
            };
            let pi = vec![1.0 / n as f64; n];
            let estimate = near_equilibrium(&net, &pi).unwrap();
            let exact = theta * theta * k * (n as f64 - 1.0) / (4.0 * (n * n) as f64);
            assert!(
                (estimate.headroom - exact).abs() < 1e-12 * exact,
                "n = {n}: {} vs {exact}",
                estimate.headroom
            );
            assert!(estimate.shift.iter().sum::<f64>().abs() < 1e-14);
        }
    }
}
