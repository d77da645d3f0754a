//! Fluctuations of the work current: how steady the harvested power is.
//!
//! Owns the exact mean and diffusion coefficient of the accumulated work from the tilted
//! generator (methods, section 12), the Fano factor `2D/J`, the randomness parameter of a
//! unicyclic machine and the thermodynamic uncertainty product `Q = 2 D sigma / J^2`, each with
//! a round-off bound; and the stochastic simulation that checks them ([`simulate`], Gillespie's
//! direct method, methods, section 13). Energies in kT, rates in the model's time unit. It uses
//! the steady state's own factorisation ([`steady::Factors`]) and must not print, read files or
//! convert units.

use crate::model::Network;
use crate::rng::SplitMix;
use crate::steady::{self, Factors, Observables, SolveError, SteadySettings, SteadyState};

/// A figure with its round-off bound (same unit).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figure {
    pub value: f64,
    pub roundoff: f64,
}

/// A ratio over the mean current: a figure, or not determined because the current itself is
/// zero within its round-off bound (a machine that harvests nothing has no Fano factor).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Ratio {
    Determined(Figure),
    CurrentNotDetermined,
}

impl Ratio {
    pub fn figure(self) -> Option<Figure> {
        match self {
            Ratio::Determined(f) => Some(f),
            Ratio::CurrentNotDetermined => None,
        }
    }
}

/// The randomness parameter `r = 2D / (J d)`, `d` the work stored per turn of the one cycle
/// (methods, section 12): defined for a unicyclic network whose cycle stores work.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Randomness {
    /// One cycle storing `work_per_turn` (kT) per forward turn.
    Unicyclic { work_per_turn: f64, value: Ratio },
    /// More than one independent cycle: there is no single turn to count.
    Multicyclic,
    /// The one cycle stores no work (its work labels cancel around it).
    NoWorkPerTurn,
}

/// Fluctuations of the work current at the steady state.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Precision {
    /// Mean work current `J = lambda'(0)`, kT per time unit (the harvesting power).
    pub current: Figure,
    /// Diffusion coefficient `D = lambda''(0) / 2`, kT^2 per time unit: the variance of the
    /// accumulated work grows like `2 D t`.
    pub diffusion: Figure,
    /// `2D / J`, kT.
    pub fano_factor: Ratio,
    /// `2 D sigma / J^2` (dimensionless, at least 2 by the uncertainty relation).
    pub uncertainty_product: Ratio,
    pub randomness: Randomness,
}

/// Margin on the epsilon-scale estimates, as for the bound's round-off allowance.
const MARGIN: f64 = 10.0;

/// The fluctuations of the work current of `network` at its steady state `state`, whose
/// factorisation is `factors` and whose observables are `obs` (all of one solve).
///
/// One solve `R x = J p - R' p` with the kept factorisation, one refinement solve to measure
/// its accuracy; then `D = (1/2) sum_jumps k w^2 p + sum_jumps k w x` (methods, section 12).
pub fn precision(
    network: &Network,
    state: &SteadyState,
    factors: &Factors,
    obs: &Observables,
) -> Precision {
    let p = &state.probabilities;
    let n = network.len();
    let current = Figure {
        value: obs.power,
        roundoff: obs.power_roundoff,
    };
    // b = J p - R' p: (R' p)_j sums k w p over the jumps into j.
    let mut b: Vec<f64> = p.iter().map(|pi| obs.power * pi).collect();
    for c in network.channels.iter().filter(|c| c.work != 0.0) {
        b[c.to] -= c.forward * c.work * p[c.from];
        b[c.from] += c.backward * c.work * p[c.to];
    }
    let project = |y: &mut Vec<f64>| {
        let total: f64 = y.iter().sum();
        y.iter_mut().zip(p).for_each(|(yi, pi)| *yi -= total * pi);
    };
    let mut x = factors.solve(&b);
    project(&mut x);
    // One refinement step: its correction measures the error left in the first solution.
    let rx = steady::apply_generator(network, &x);
    let residual: Vec<f64> = b.iter().zip(&rx).map(|(bi, ri)| bi - ri).collect();
    let mut correction = factors.solve(&residual);
    project(&mut correction);
    x.iter_mut().zip(&correction).for_each(|(xi, ci)| *xi += ci);
    // 1^T R' y: the work-weighted one-way traffic of a vector y.
    let tilted = |y: &[f64]| -> (f64, f64) {
        let (mut sum, mut size) = (0.0, 0.0);
        for c in network.channels.iter().filter(|c| c.work != 0.0) {
            let (f, g) = (
                c.forward * c.work * y[c.from],
                c.backward * c.work * y[c.to],
            );
            sum += f - g;
            size += f.abs() + g.abs();
        }
        (sum, size)
    };
    let (mut second, mut second_size) = (0.0, 0.0);
    for c in network.channels.iter().filter(|c| c.work != 0.0) {
        let t = (c.forward * p[c.from] + c.backward * p[c.to]) * c.work * c.work;
        second += t;
        second_size += t;
    }
    let (cross, cross_size) = tilted(&x);
    let (change, _) = tilted(&correction);
    let value = 0.5 * second + cross;
    let accuracy = steady::probability_accuracy(n) + 4.0 * f64::EPSILON;
    let terms = 0.5 * second_size + cross_size;
    let diffusion = Figure {
        value,
        roundoff: MARGIN * (change.abs() + accuracy * terms),
    };
    let sigma = Figure {
        value: obs.entropy_production,
        roundoff: obs.drive_power_roundoff + obs.power_roundoff,
    };
    let fano_factor = ratio(&[(diffusion, 1)], current, 1, 2.0);
    let uncertainty_product = ratio(&[(diffusion, 1), (sigma, 1)], current, 2, 2.0);
    let randomness = match network.cycle_count() {
        1 => {
            let d = work_per_turn(network);
            if d == 0.0 {
                Randomness::NoWorkPerTurn
            } else {
                // d is a sum of at most n exact labels.
                let d_figure = Figure {
                    value: d,
                    roundoff: n as f64 * f64::EPSILON * d.abs(),
                };
                Randomness::Unicyclic {
                    work_per_turn: d,
                    value: ratio(&[(diffusion, 1)], product(current, d_figure), 1, 2.0),
                }
            }
        }
        _ => Randomness::Multicyclic,
    };
    Precision {
        current,
        diffusion,
        fano_factor,
        uncertainty_product,
        randomness,
    }
}

/// `a * b` with a first-order round-off bound.
fn product(a: Figure, b: Figure) -> Figure {
    Figure {
        value: a.value * b.value,
        roundoff: a.roundoff * b.value.abs() + b.roundoff * a.value.abs(),
    }
}

/// `factor * prod(numerators) / current^power`, not determined when the current is zero within
/// its round-off. The relative bounds add (first order), plus a few roundings; a numerator that
/// is zero leaves a bound of its own round-off over the denominator.
fn ratio(numerators: &[(Figure, i32)], current: Figure, power: i32, factor: f64) -> Ratio {
    if !(current.value.abs() > current.roundoff && current.value.is_finite()) {
        return Ratio::CurrentNotDetermined;
    }
    let denominator = current.value.powi(power);
    let mut value = factor / denominator;
    let mut relative = power as f64 * current.roundoff / current.value.abs();
    let mut absolute_scale = factor / denominator.abs();
    for (f, k) in numerators {
        value *= f.value.powi(*k);
        absolute_scale *= f.value.abs().max(f.roundoff).powi(*k);
        relative += *k as f64 * f.roundoff / f.value.abs().max(f.roundoff).max(f64::MIN_POSITIVE);
    }
    let roundoff = absolute_scale * (relative + 8.0 * f64::EPSILON);
    Ratio::Determined(Figure { value, roundoff })
}

/// Work stored per forward turn of the one cycle of a unicyclic network: the chord's work plus
/// the work along the tree path closing it (labels are exact doubles; no rates enter).
fn work_per_turn(network: &Network) -> f64 {
    let n = network.len();
    let mut adjacent: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (c, ch) in network.channels.iter().enumerate() {
        adjacent[ch.from].push(c);
        adjacent[ch.to].push(c);
    }
    // Breadth-first tree from state 0; `phi[s]` the work gained along the tree from 0 to s.
    let mut phi = vec![f64::NAN; n];
    let mut in_tree = vec![false; network.channels.len()];
    phi[0] = 0.0;
    let mut queue = std::collections::VecDeque::from([0usize]);
    while let Some(s) = queue.pop_front() {
        for &c in &adjacent[s] {
            let ch = &network.channels[c];
            let (t, gain) = if ch.from == s {
                (ch.to, ch.work)
            } else {
                (ch.from, -ch.work)
            };
            if phi[t].is_nan() {
                phi[t] = phi[s] + gain;
                in_tree[c] = true;
                queue.push_back(t);
            }
        }
    }
    network
        .channels
        .iter()
        .zip(&in_tree)
        .find(|(_, &t)| !t)
        .map_or(0.0, |(ch, _)| ch.work + phi[ch.from] - phi[ch.to])
}

/// The steady state, its observables and the fluctuations of the work current of `network`,
/// from one factorisation.
pub fn of_network(
    network: &Network,
    settings: &SteadySettings,
) -> Result<(SteadyState, Observables, Precision), SolveError> {
    let (state, factors) = steady::solve_factored(network, settings)?;
    let obs = steady::observe(network, &state.probabilities);
    let precision = precision(network, &state, &factors, &obs);
    Ok((state, obs, precision))
}

/// Settings of a stochastic simulation.
#[derive(Debug, Clone, Copy)]
pub struct SimulationSettings {
    /// Length of each run, in the model's time unit.
    pub time: f64,
    pub runs: usize,
    pub seed: u64,
    /// Runs whose accumulated work is recorded on a time grid (for a trajectory chart).
    pub recorded_runs: usize,
    /// Points of that grid (including `t = 0` and `t = time`).
    pub grid_points: usize,
}

/// One simulated run.
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// Work stored over the run (kT).
    pub work: f64,
    pub jumps: u64,
    /// Accumulated work at the grid times (empty unless the run is recorded).
    pub trajectory: Vec<f64>,
}

/// Jump tables for Gillespie's direct method: for every state its exit rate and its jumps as
/// cumulative rates with their targets and work.
pub struct JumpTable {
    exit: Vec<f64>,
    start: Vec<usize>,
    cumulative: Vec<f64>,
    target: Vec<usize>,
    work: Vec<f64>,
}

impl JumpTable {
    pub fn new(network: &Network) -> Self {
        let n = network.len();
        let mut out: Vec<Vec<(usize, f64, f64)>> = vec![Vec::new(); n];
        for c in &network.channels {
            out[c.from].push((c.to, c.forward, c.work));
            out[c.to].push((c.from, c.backward, -c.work));
        }
        let mut table = Self {
            exit: Vec::with_capacity(n),
            start: Vec::with_capacity(n + 1),
            cumulative: Vec::new(),
            target: Vec::new(),
            work: Vec::new(),
        };
        for jumps in &mut out {
            // Fastest first, so that the linear search usually stops at once.
            jumps.sort_by(|a, b| b.1.total_cmp(&a.1));
            table.start.push(table.cumulative.len());
            let mut total = 0.0;
            for &(to, rate, w) in jumps.iter() {
                total += rate;
                table.cumulative.push(total);
                table.target.push(to);
                table.work.push(w);
            }
            table.exit.push(total);
        }
        table.start.push(table.cumulative.len());
        table
    }

    /// Total exit rate of every state.
    pub fn exit_rates(&self) -> &[f64] {
        &self.exit
    }

    /// The state a walker in `s` jumps to, and the work it stores, for a uniform `u` in [0, 1).
    #[inline]
    fn jump(&self, s: usize, u: f64) -> (usize, f64) {
        let threshold = u * self.exit[s];
        let (lo, hi) = (self.start[s], self.start[s + 1]);
        let mut k = lo;
        while k + 1 < hi && self.cumulative[k] <= threshold {
            k += 1;
        }
        (self.target[k], self.work[k])
    }
}

/// The seed of run `index`: every run its own SplitMix64 stream, derived from the seed by the
/// generator itself, so a run's result depends only on `(seed, index)`, never on threads.
pub fn run_seed(seed: u64, index: usize) -> u64 {
    let mut mixer = SplitMix::new(seed ^ (index as u64).wrapping_mul(0xd1b54a32d192ed03));
    mixer.next_u64()
}

/// Jumps between two looks at the stop flag.
const STOP_CHECK: u64 = 1 << 14;

/// One run of Gillespie's direct method (Gillespie, J. Phys. Chem. 81, 2340 (1977)) from a
/// state drawn from the steady distribution `p` (cumulative `stationary`), over `settings.time`;
/// `None` if `stop` was raised meanwhile (Ctrl-C).
pub fn simulate_run(
    table: &JumpTable,
    stationary: &[f64],
    settings: &SimulationSettings,
    index: usize,
    stop: &std::sync::atomic::AtomicBool,
) -> Option<Run> {
    let mut rng = SplitMix::new(run_seed(settings.seed, index));
    let u = rng.uniform();
    let mut s = stationary
        .iter()
        .position(|&c| u < c)
        .unwrap_or(stationary.len().saturating_sub(1));
    let record = index < settings.recorded_runs && settings.grid_points >= 2;
    let step = settings.time / (settings.grid_points.max(2) - 1) as f64;
    let mut trajectory = Vec::new();
    if record {
        trajectory.push(0.0);
    }
    let (mut t, mut work, mut jumps) = (0.0, 0.0, 0u64);
    loop {
        // Exponential waiting time; 1 - u lies in (0, 1], so the logarithm is finite.
        let dt = -(1.0 - rng.uniform()).ln() / table.exit[s];
        let next = t + dt;
        if record {
            while trajectory.len() < settings.grid_points
                && (trajectory.len() as f64) * step <= next.min(settings.time)
            {
                trajectory.push(work);
            }
        }
        if next > settings.time {
            break;
        }
        let (to, w) = table.jump(s, rng.uniform());
        s = to;
        work += w;
        jumps += 1;
        t = next;
        if jumps % STOP_CHECK == 0 && stop.load(std::sync::atomic::Ordering::Relaxed) {
            return None;
        }
    }
    if record {
        trajectory.resize(settings.grid_points, work);
    }
    Some(Run {
        work,
        jumps,
        trajectory,
    })
}

/// An estimate with the half-width of its confidence interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    pub value: f64,
    /// Half-width of the interval at [`CONFIDENCE_Z`] standard errors.
    pub half_width: f64,
}

/// Standard normal quantile of the two-sided 99% intervals of the simulation estimates.
pub const CONFIDENCE_Z: f64 = 2.5758293035489004;

/// Empirical mean power and diffusion of a set of runs (methods, section 13).
#[derive(Debug, Clone, PartialEq)]
pub struct Empirical {
    /// Mean of `W / T` over runs, kT per time unit.
    pub power: Estimate,
    /// Sample variance of `W` over runs divided by `2T`, kT^2 per time unit.
    pub diffusion: Estimate,
    pub jumps: u64,
    pub runs: usize,
}

/// Estimates from the works `W` of independent runs of length `time`: the mean power with its
/// standard error `s / sqrt(N)`; the diffusion `s^2 / 2T` with the large-sample standard error
/// of a sample variance, `sqrt((m4 - s^4) / N) / 2T` (`m4` the fourth central moment).
pub fn estimate(runs: &[Run], time: f64) -> Empirical {
    let count = runs.len().max(1) as f64;
    let mean = runs.iter().map(|r| r.work).sum::<f64>() / count;
    let (mut m2, mut m4) = (0.0, 0.0);
    for r in runs {
        let d = r.work - mean;
        m2 += d * d;
        m4 += d * d * d * d;
    }
    let variance = m2 / (count - 1.0).max(1.0);
    let m4 = m4 / count;
    let variance_error = ((m4 - variance * variance).max(0.0) / count).sqrt();
    Empirical {
        power: Estimate {
            value: mean / time,
            half_width: CONFIDENCE_Z * (variance / count).sqrt() / time,
        },
        diffusion: Estimate {
            value: variance / (2.0 * time),
            half_width: CONFIDENCE_Z * variance_error / (2.0 * time),
        },
        jumps: runs.iter().map(|r| r.jumps).sum(),
        runs: runs.len(),
    }
}

/// Cumulative steady distribution for drawing a run's first state.
pub fn cumulative(p: &[f64]) -> Vec<f64> {
    let mut total = 0.0;
    let mut out: Vec<f64> = p
        .iter()
        .map(|x| {
            total += x;
            total
        })
        .collect();
    if let Some(last) = out.last_mut() {
        *last = f64::INFINITY;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Channel;

    fn ring(n: usize, forward: f64, backward: f64, work: f64) -> Network {
        let drive = (forward / backward).ln() + work;
        let channels = (0..n)
            .map(|i| Channel {
                from: i,
                to: (i + 1) % n,
                forward,
                backward,
                work,
                drive,
            })
            .collect();
        Network {
            energies: vec![0.0; n],
            channels,
        }
    }

    #[test]
    fn uniform_ring_diffuses_like_a_biased_walk() {
        // A uniform ring is a biased random walk on the turns: D = w^2 (k+ + k-) / 2 exactly.
        for limit in [0, 1000] {
            let net = ring(5, 3.0, 0.5, 0.7);
            let settings = SteadySettings {
                dense_limit: limit,
                ..Default::default()
            };
            let (_, _, pr) = of_network(&net, &settings).unwrap();
            let exact = 0.5 * 0.7 * 0.7 * 3.5;
            assert!((pr.diffusion.value - exact).abs() < 1e-13, "{pr:?}");
            assert!(pr.diffusion.roundoff < 1e-10);
            let Randomness::Unicyclic { work_per_turn, .. } = pr.randomness else {
                panic!("a ring is unicyclic");
            };
            assert!((work_per_turn - 3.5).abs() < 1e-14);
        }
    }

    #[test]
    fn equilibrium_leaves_the_ratios_undetermined() {
        // No drive: the current is zero and so is every ratio over it.
        let mut net = ring(4, 2.0, 2.0, 0.0);
        for c in &mut net.channels {
            c.work = 1.0;
            c.drive = 1.0;
        }
        let (_, _, pr) = of_network(&net, &SteadySettings::default()).unwrap();
        assert_eq!(pr.fano_factor, Ratio::CurrentNotDetermined);
        assert_eq!(pr.uncertainty_product, Ratio::CurrentNotDetermined);
    }
}
