//! Steady state of a network and the observables measured there.
//!
//! Owns the generator and the unique stationary distribution of an irreducible [`Network`]:
//! - dense networks (up to [`SteadySettings::dense_limit`] states) use the subtraction-free
//!   elimination of Grassmann, Taksar & Heyman (1985, Oper. Res. 33, 1107), which keeps every
//!   probability, however tiny, to full relative accuracy;
//! - larger ones use a sparse LU (faer) of the generator with one state eliminated, followed by
//!   iterative refinement and a level-by-level re-solve of components too small for the LU's
//!   absolute accuracy, so that no probability is returned as zero or negative.
//!
//! It also computes fluxes, powers and entropy production at any distribution ([`observe`]).
//! Energies are in kT, rates in the model's time unit. No file I/O, no printing.

use crate::linalg::SparseLu;
use crate::model::Network;
use faer::sparse::Triplet;
use faer::Mat;

/// Errors of the numerical layer.
#[derive(Debug, thiserror::Error)]
pub enum SolveError {
    #[error("the sparse factorisation failed: {0}")]
    Factorisation(String),
    #[error("the steady state could not be resolved: {0}")]
    Unresolved(String),
    #[error("the conic solver (Clarabel) did not solve the bound program: status {0}")]
    Conic(String),
    #[error("the bound could not be certified: {0}")]
    Uncertified(String),
}

/// How the steady state was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Dense Grassmann-Taksar-Heyman elimination.
    DenseGth,
    /// Sparse LU with one state eliminated, refined.
    SparseLu,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::DenseGth => "dense GTH elimination",
            Method::SparseLu => "sparse LU",
        }
    }
}

/// Settings of the steady-state solve.
#[derive(Debug, Clone, Copy)]
pub struct SteadySettings {
    /// Largest network solved densely (GTH is O(n^3) but exact in relative terms). Default 400.
    pub dense_limit: usize,
    /// Levels of re-solving ever smaller components on the sparse path (each level extends full
    /// relative accuracy by about 8 decades). Default 48.
    pub max_levels: usize,
}

impl Default for SteadySettings {
    fn default() -> Self {
        Self {
            dense_limit: 400,
            max_levels: 48,
        }
    }
}

/// The stationary distribution with the diagnostics of its solve.
#[derive(Debug, Clone)]
pub struct SteadyState {
    pub probabilities: Vec<f64>,
    pub method: Method,
    /// `max_i |(R p)_i| / (largest rate * max p)`.
    pub relative_residual: f64,
}

/// Solves `R p = 0`, `sum p = 1` for an irreducible network.
pub fn solve(network: &Network, settings: &SteadySettings) -> Result<SteadyState, SolveError> {
    let (probabilities, method) = if network.len() <= settings.dense_limit {
        (gth(network), Method::DenseGth)
    } else {
        (sparse(network, settings)?, Method::SparseLu)
    };
    if let Some(bad) = probabilities
        .iter()
        .position(|p| !(p.is_finite() && *p > 0.0))
    {
        return Err(SolveError::Unresolved(format!(
            "probability of state {bad} came out as {} ({})",
            probabilities[bad],
            method.name()
        )));
    }
    let relative_residual = relative_residual(network, &probabilities);
    Ok(SteadyState {
        probabilities,
        method,
        relative_residual,
    })
}

/// `R p` for the network's generator (net probability inflow into each state).
pub fn apply_generator(network: &Network, p: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; network.len()];
    for c in &network.channels {
        let j = c.flux(p);
        out[c.from] -= j;
        out[c.to] += j;
    }
    out
}

/// `max_i |(R p)_i| / (largest rate * max p)`.
pub fn relative_residual(network: &Network, p: &[f64]) -> f64 {
    let rp = apply_generator(network, p);
    let scale = network.max_rate() * p.iter().copied().fold(0.0, f64::max);
    rp.iter().map(|x| x.abs()).fold(0.0, f64::max) / scale
}

/// Dense GTH on the network's rate matrix.
fn gth(network: &Network) -> Vec<f64> {
    let n = network.len();
    let mut a = vec![0.0; n * n]; // a[i*n + j]: rate i -> j
    for c in &network.channels {
        a[c.from * n + c.to] += c.forward;
        a[c.to * n + c.from] += c.backward;
    }
    gth_rates(&mut a, n)
}

/// Dense GTH (Grassmann-Taksar-Heyman): censor states n-1, ..., 1 in turn, then rebuild by back
/// substitution. `a[i*n + j]` is the total rate i -> j (diagonal ignored); `a` is overwritten.
/// Subtraction-free, so every probability keeps a small relative error however tiny it is.
pub fn gth_rates(a: &mut [f64], n: usize) -> Vec<f64> {
    let mut exit = vec![0.0; n];
    for k in (1..n).rev() {
        let s: f64 = a[k * n..k * n + k].iter().sum();
        exit[k] = s;
        for i in 0..k {
            let f = a[i * n + k] / s;
            if f != 0.0 {
                for j in 0..k {
                    a[i * n + j] += f * a[k * n + j];
                }
            }
        }
    }
    let mut p = vec![0.0; n];
    p[0] = 1.0;
    for k in 1..n {
        p[k] = (0..k).map(|i| p[i] * a[i * n + k]).sum::<f64>() / exit[k];
    }
    normalise(&mut p);
    p
}

fn normalise(p: &mut [f64]) {
    let total: f64 = p.iter().sum();
    p.iter_mut().for_each(|x| *x /= total);
}

/// Per-state jump lists used by the sparse path: (neighbour, rate into this state from it)
/// and total exit rate.
struct Adjacency {
    inflow: Vec<Vec<(usize, f64)>>,
    exit: Vec<f64>,
}

impl Adjacency {
    fn new(network: &Network) -> Self {
        let n = network.len();
        let mut inflow = vec![Vec::new(); n];
        let mut exit = vec![0.0; n];
        for c in &network.channels {
            inflow[c.to].push((c.from, c.forward));
            inflow[c.from].push((c.to, c.backward));
            exit[c.from] += c.forward;
            exit[c.to] += c.backward;
        }
        Self { inflow, exit }
    }
}

/// Sparse LU of the generator with the row and column of a reference state removed.
///
/// The reference state should be a probable one (eliminating an improbable state scales the
/// solve by its tiny probability), so the state with the largest exit rate is tried first and,
/// if it turns out to be improbable, the solve is repeated with the most probable state.
fn sparse(network: &Network, settings: &SteadySettings) -> Result<Vec<f64>, SolveError> {
    let n = network.len();
    let adjacency = Adjacency::new(network);
    let first = (0..n)
        .max_by(|&a, &b| adjacency.exit[a].total_cmp(&adjacency.exit[b]))
        .unwrap_or(0);
    let mut p = sparse_with_reference(network, &adjacency, first)?;
    // A badly scaled first solve can return the most probable state with the wrong sign.
    let best = (0..n)
        .max_by(|&a, &b| p[a].abs().total_cmp(&p[b].abs()))
        .unwrap_or(first);
    let first_is_probable = p[first] >= 1e-3 * p[best].abs(); // false also for NaN
    if best != first && !first_is_probable {
        p = sparse_with_reference(network, &adjacency, best)?;
    }
    resolve_small_components(&adjacency, &mut p, settings.max_levels)?;
    normalise(&mut p);
    Ok(p)
}

/// One sparse solve with `reference` eliminated (its probability fixed to 1), refined twice.
fn sparse_with_reference(
    network: &Network,
    adjacency: &Adjacency,
    reference: usize,
) -> Result<Vec<f64>, SolveError> {
    let n = network.len();
    let reduced = |i: usize| if i < reference { i } else { i - 1 };
    let mut triplets = Vec::with_capacity(4 * network.channels.len() + n);
    let mut rhs = Mat::<f64>::zeros(n - 1, 1);
    for i in 0..n {
        if i != reference {
            triplets.push(Triplet::new(reduced(i), reduced(i), -adjacency.exit[i]));
        }
    }
    let mut jump = |from: usize, to: usize, rate: f64| {
        if to == reference {
            return;
        }
        if from == reference {
            rhs[(reduced(to), 0)] -= rate;
        } else {
            triplets.push(Triplet::new(reduced(to), reduced(from), rate));
        }
    };
    for c in &network.channels {
        jump(c.from, c.to, c.forward);
        jump(c.to, c.from, c.backward);
    }
    let lu = SparseLu::factor(n - 1, &triplets)?;
    let mut x = rhs;
    lu.solve_in_place(x.as_mut());
    let expand = |x: &Mat<f64>| -> Vec<f64> {
        (0..n)
            .map(|i| {
                if i == reference {
                    1.0
                } else {
                    x[(reduced(i), 0)]
                }
            })
            .collect()
    };
    for _ in 0..2 {
        let rp = apply_generator(network, &expand(&x));
        let mut correction = Mat::<f64>::from_fn(n - 1, 1, |r, _| {
            let i = if r < reference { r } else { r + 1 };
            -rp[i]
        });
        lu.solve_in_place(correction.as_mut());
        for r in 0..n - 1 {
            x[(r, 0)] += correction[(r, 0)];
        }
    }
    Ok(expand(&x))
}

/// Re-solves, level by level, the components too small for the previous solve's absolute
/// accuracy (below 1e-8 of that level's largest, or not positive).
///
/// With the larger components `L` held fixed, the small set `S` satisfies
/// `exit_i p_i - sum_{j in S} k_ji p_j = sum_{j in L} k_ji p_j` for `i` in `S`: a nonsingular
/// M-matrix with a nonnegative right-hand side whose scale is that of `S` itself, so the new
/// solution is accurate relative to the largest member of `S`. Repeating on what is still small
/// extends full accuracy down the whole range of doubles.
fn resolve_small_components(
    adjacency: &Adjacency,
    p: &mut [f64],
    max_levels: usize,
) -> Result<(), SolveError> {
    let n = p.len();
    let mut active: Vec<usize> = (0..n).collect();
    for _ in 0..max_levels {
        let max = active.iter().map(|&i| p[i]).fold(0.0, f64::max);
        let small: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&i| p[i] < 1e-8 * max || p[i].is_nan())
            .collect();
        if small.is_empty() || small.len() == active.len() {
            return Ok(());
        }
        let mut slot = vec![usize::MAX; n];
        for (k, &i) in small.iter().enumerate() {
            slot[i] = k;
        }
        let mut triplets = Vec::new();
        let mut rhs = Mat::<f64>::zeros(small.len(), 1);
        for (k, &i) in small.iter().enumerate() {
            triplets.push(Triplet::new(k, k, adjacency.exit[i]));
            for &(j, rate) in &adjacency.inflow[i] {
                match slot[j] {
                    usize::MAX => rhs[(k, 0)] += rate * p[j],
                    col => triplets.push(Triplet::new(k, col, -rate)),
                }
            }
        }
        let m = small.len();
        SparseLu::factor(m, &triplets)?.solve_in_place(rhs.as_mut());
        for (k, &i) in small.iter().enumerate() {
            p[i] = rhs[(k, 0)];
        }
        active = small;
    }
    Ok(())
}

/// Observables of a network at a distribution `p` (energies in kT, rates per time unit).
#[derive(Debug, Clone)]
pub struct Observables {
    /// Net flux of each channel.
    pub fluxes: Vec<f64>,
    /// Work stored per time unit by each channel (kT per time unit).
    pub work_rates: Vec<f64>,
    /// Free energy drawn from the environment per time unit by each channel.
    pub drive_rates: Vec<f64>,
    /// Harvesting power `sum_c w_c J_c`.
    pub power: f64,
    /// Drive power `sum_c d_c J_c`.
    pub drive_power: f64,
    /// Entropy production rate in units of k_B per time unit.
    pub entropy_production: f64,
    /// `power / drive_power`, `None` when the drive power is zero (to round-off).
    pub efficiency: Option<f64>,
    /// `|drive - power - entropy production|` relative to the largest term that enters it.
    pub balance_error: f64,
}

/// Fluxes, powers and entropy production of `network` at distribution `p`.
pub fn observe(network: &Network, p: &[f64]) -> Observables {
    let m = network.channels.len();
    let (mut fluxes, mut work_rates, mut drive_rates) = (
        Vec::with_capacity(m),
        Vec::with_capacity(m),
        Vec::with_capacity(m),
    );
    let (mut sigma, mut scale, mut drive_traffic) = (0.0, 0.0, 0.0);
    for c in &network.channels {
        drive_traffic += (c.forward * p[c.from] + c.backward * p[c.to]) * c.drive.abs();
        let j = c.flux(p);
        let force = (c.forward / c.backward).ln() + (p[c.from] / p[c.to]).ln();
        sigma += j * force;
        scale += (j * force).abs() + (j * c.work).abs() + (j * c.drive).abs();
        fluxes.push(j);
        work_rates.push(j * c.work);
        drive_rates.push(j * c.drive);
    }
    let power: f64 = work_rates.iter().sum();
    let drive_power: f64 = drive_rates.iter().sum();
    let balance_error = if scale > 0.0 {
        (drive_power - power - sigma).abs() / scale
    } else {
        0.0
    };
    // Below round-off of the gross drive traffic the drive power is zero and so undefined.
    let efficiency = (drive_power.abs() > 1e-12 * drive_traffic).then(|| power / drive_power);
    Observables {
        fluxes,
        work_rates,
        drive_rates,
        power,
        drive_power,
        entropy_production: sigma,
        efficiency,
        balance_error,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Channel;

    fn ring(n: usize, forward: f64, backward: f64) -> Network {
        let channels = (0..n)
            .map(|i| Channel {
                from: i,
                to: (i + 1) % n,
                forward,
                backward,
                work: 0.0,
                drive: (forward / backward).ln(),
            })
            .collect();
        Network {
            energies: vec![0.0; n],
            channels,
        }
    }

    #[test]
    fn uniform_ring_is_uniform_both_ways() {
        // A ring with identical rates is symmetric under rotation: p = 1/n exactly.
        let net = ring(7, 3.0, 0.5);
        for limit in [0, 1000] {
            let s = solve(
                &net,
                &SteadySettings {
                    dense_limit: limit,
                    ..Default::default()
                },
            )
            .unwrap();
            for p in &s.probabilities {
                assert!((p - 1.0 / 7.0).abs() < 1e-14);
            }
        }
    }
}
