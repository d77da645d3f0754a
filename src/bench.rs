//! Seeded synthetic networks and timing of the pipeline stages (`ergopath bench`).
//!
//! Owns the benchmark families: *banded* (a ring plus chords reaching at most 20 states ahead,
//! like joint system-environment chains) and *random chords* (expander-like, the hardest case
//! for direct factorisation), each with 2n channels; and four that resemble users' networks:
//! *mixed work* (work labels of both signs, 0.1 to 10 kT, on most channels; rates over six
//! decades), *photon* (the same with a photon-like drive near 100 kT on every tenth ring step),
//! *switching* (the joint chain of a banded system with three environment states that switch
//! slowly) and *side chains* (a banded backbone carrying dead-end chains). Timing uses
//! wall-clock medians of several runs; nothing here asserts speed.

use crate::model::{Channel, Network};
use crate::steady::{self, SolveError, SteadySettings};
use std::time::Instant;

/// Benchmark network families.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    Banded,
    RandomChords,
    MixedWork,
    Photon,
    Switching,
    SideChains,
}

impl Family {
    /// Every family, in the order the benchmark tables list them.
    pub const ALL: [Family; 6] = [
        Family::Banded,
        Family::RandomChords,
        Family::MixedWork,
        Family::Photon,
        Family::Switching,
        Family::SideChains,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Family::Banded => "banded",
            Family::RandomChords => "random-chords",
            Family::MixedWork => "mixed-work",
            Family::Photon => "photon",
            Family::Switching => "switching",
            Family::SideChains => "side-chains",
        }
    }
}

pub use crate::rng::SplitMix;

/// A seeded network of `n` states of `family` (see the module header), connected.
pub fn synthetic(family: Family, n: usize, seed: u64) -> Network {
    match family {
        Family::Banded | Family::RandomChords => ring_with_chords(family, n, seed),
        Family::MixedWork => labelled(n, seed, None),
        Family::Photon => labelled(n, seed, Some(10)),
        Family::Switching => switching(n, seed),
        Family::SideChains => side_chains(n, seed),
    }
}

/// A ring plus one chord per state and 2n channels. Energies are uniform in +-2 kT, rates
/// log-uniform in 0.1..10, every ring step stores 0.2 kT of work and draws 1 kT of drive.
fn ring_with_chords(family: Family, n: usize, seed: u64) -> Network {
    let mut rng = SplitMix::new(seed);
    let energies: Vec<f64> = (0..n).map(|_| 4.0 * rng.uniform() - 2.0).collect();
    let mut channels = Vec::with_capacity(2 * n);
    let mut add = |rng: &mut SplitMix, from: usize, to: usize, work: f64, drive: f64| {
        let forward = 10f64.powf(2.0 * rng.uniform() - 1.0);
        channels.push(Channel::balanced(&energies, from, to, forward, work, drive));
    };
    for i in 0..n {
        add(&mut rng, i, (i + 1) % n, 0.2, 1.0);
    }
    for i in 0..n {
        let reach = match family {
            Family::RandomChords => 2 + (rng.next_u64() % (n as u64 - 3).max(1)) as usize,
            _ => 2 + (rng.next_u64() % 19) as usize,
        };
        add(&mut rng, i, (i + reach) % n, 0.0, 0.0);
    }
    Network { energies, channels }
}

/// A work label of random sign and magnitude log-uniform in 0.1..10 kT, on 90% of channels.
fn work_label(rng: &mut SplitMix) -> f64 {
    if rng.uniform() < 0.1 {
        return 0.0;
    }
    let size = 10f64.powf(2.0 * rng.uniform() - 1.0);
    if rng.uniform() < 0.5 {
        -size
    } else {
        size
    }
}

/// A forward rate log-uniform over six decades, 1e-3..1e3.
fn wide_rate(rng: &mut SplitMix) -> f64 {
    10f64.powf(6.0 * rng.uniform() - 3.0)
}

/// Ring-with-chords topology among `states` (offset `first`) with labelled channels: each ring
/// step draws 1 kT plus its work label (so it runs forward by 1 kT), chords draw nothing;
/// every `photon_every`-th ring step draws 100 kT instead and stores 5 kT.
fn labelled_block(
    rng: &mut SplitMix,
    energies: &[f64],
    (first, states): (usize, usize),
    photon_every: Option<usize>,
    drive_shift: f64,
    channels: &mut Vec<Channel>,
) {
    for i in 0..states {
        let (from, to) = (first + i, first + (i + 1) % states);
        let photon = photon_every.is_some_and(|k| i % k == 0);
        let (work, drive) = if photon {
            (5.0, 100.0)
        } else {
            let w = work_label(rng);
            (w, w + 1.0 + drive_shift)
        };
        let forward = if photon { 1.0 } else { wide_rate(rng) };
        channels.push(Channel::balanced(energies, from, to, forward, work, drive));
    }
    for i in 0..states {
        let reach = 2 + (rng.next_u64() % 19) as usize;
        let (from, to) = (first + i, first + (i + reach) % states);
        if from != to {
            let work = work_label(rng);
            let forward = wide_rate(rng);
            channels.push(Channel::balanced(energies, from, to, forward, work, 0.0));
        }
    }
}

fn spread_energies(rng: &mut SplitMix, n: usize) -> Vec<f64> {
    (0..n).map(|_| 6.0 * rng.uniform() - 3.0).collect()
}

/// [`Family::MixedWork`] and, with photon steps, [`Family::Photon`].
fn labelled(n: usize, seed: u64, photon_every: Option<usize>) -> Network {
    let mut rng = SplitMix::new(seed);
    let energies = spread_energies(&mut rng, n);
    let mut channels = Vec::with_capacity(2 * n);
    labelled_block(
        &mut rng,
        &energies,
        (0, n),
        photon_every,
        0.0,
        &mut channels,
    );
    Network { energies, channels }
}

/// Environment states of [`Family::Switching`], and their switching rate (per time unit).
const ENVIRONMENTS: usize = 3;
const SWITCHING_RATE: f64 = 1e-3;

/// [`Family::Switching`]: a mixed-work system of `n / 3` states copied into three environment
/// states (drives 0, 2 and 4 kT stronger), the copies of each system state joined in a cycle of
/// slow switches that carry no work or drive.
fn switching(n: usize, seed: u64) -> Network {
    let mut rng = SplitMix::new(seed);
    let system = (n / ENVIRONMENTS).max(2);
    let system_energies = spread_energies(&mut rng, system);
    let energies: Vec<f64> = (0..ENVIRONMENTS)
        .flat_map(|_| system_energies.iter().copied())
        .collect();
    let mut channels = Vec::with_capacity(3 * energies.len());
    for e in 0..ENVIRONMENTS {
        let mut copy = SplitMix::new(seed ^ 0x5eed);
        let block = (e * system, system);
        labelled_block(
            &mut copy,
            &energies,
            block,
            None,
            2.0 * e as f64,
            &mut channels,
        );
    }
    for e in 0..ENVIRONMENTS {
        let next = (e + 1) % ENVIRONMENTS;
        for s in 0..system {
            let (from, to) = (e * system + s, next * system + s);
            channels.push(Channel::balanced(
                &energies,
                from,
                to,
                SWITCHING_RATE,
                0.0,
                0.0,
            ));
        }
    }
    Network { energies, channels }
}

/// Length of each dead-end chain of [`Family::SideChains`].
const SIDE_CHAIN: usize = 5;

/// [`Family::SideChains`]: a mixed-work backbone of half the states, the other half in chains of
/// five states hanging off evenly spaced backbone states (wide rates, work labels).
fn side_chains(n: usize, seed: u64) -> Network {
    let mut rng = SplitMix::new(seed);
    let backbone = (n / 2).max(3);
    let energies = spread_energies(&mut rng, n.max(backbone));
    let mut channels = Vec::with_capacity(2 * n);
    labelled_block(&mut rng, &energies, (0, backbone), None, 0.0, &mut channels);
    let chains = (energies.len() - backbone) / SIDE_CHAIN;
    let spacing = (backbone / chains.max(1)).max(1);
    let mut next = backbone;
    for c in 0..chains {
        let mut at = (c * spacing) % backbone;
        for _ in 0..SIDE_CHAIN {
            let (work, forward) = (work_label(&mut rng), wide_rate(&mut rng));
            channels.push(Channel::balanced(&energies, at, next, forward, work, 0.0));
            at = next;
            next += 1;
        }
    }
    // States left over by the division hang off the backbone's first state.
    while next < energies.len() {
        let forward = wide_rate(&mut rng);
        channels.push(Channel::balanced(&energies, 0, next, forward, 0.0, 0.0));
        next += 1;
    }
    Network { energies, channels }
}

/// Median wall-clock seconds of `runs` calls of `f`.
pub fn median_seconds<T>(runs: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let start = Instant::now();
    let mut last = f();
    let mut times = vec![start.elapsed().as_secs_f64()];
    for _ in 1..runs.max(1) {
        let start = Instant::now();
        last = f();
        times.push(start.elapsed().as_secs_f64());
    }
    times.sort_by(f64::total_cmp);
    (times[times.len() / 2], last)
}

/// Resets the process's peak resident memory (Linux: `clear_refs` value 5), so that the next
/// [`peak_mb`] reports the peak of what follows. Elsewhere it does nothing.
fn reset_peak() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

/// Peak resident memory since the last [`reset_peak`], in MB (Linux `VmHWM`); `None` where the
/// system does not report it. The reset starts from the memory the process holds at that
/// moment (the allocator keeps some from earlier rows), so small rows show that floor.
fn peak_mb() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// One row of the steady-state benchmark.
#[derive(Debug, Clone)]
pub struct SteadyTiming {
    pub family: Family,
    pub states: usize,
    pub seconds: f64,
    /// Peak resident memory of the process during these runs (MB), where known.
    pub peak_mb: Option<f64>,
    pub method: &'static str,
    pub relative_residual: f64,
    /// Median time of what `steady` computes without fluctuations: solve and observables.
    pub observed_seconds: f64,
    /// The same with the fluctuations of the work current (methods, section 12): the solve
    /// keeps its factorisation and adds one solve and one refinement solve.
    pub precision_seconds: f64,
}

/// Largest random-chord network timed: beyond it the direct sparse LU fills in (measured: 2.6 s
/// at 10^4 states, 64 s at 3 x 10^4 on 2 cores) and an iterative solver is needed.
pub const RANDOM_CHORDS_LIMIT: usize = 10_000;

/// The benchmark networks of every family and size, seeded by size (random chords only up to
/// [`RANDOM_CHORDS_LIMIT`] states).
fn networks<'a>(
    sizes: &'a [usize],
    families: &'a [Family],
) -> impl Iterator<Item = (Family, usize, Network)> + 'a {
    families.iter().flat_map(move |&family| {
        sizes
            .iter()
            .filter(move |&&n| family != Family::RandomChords || n <= RANDOM_CHORDS_LIMIT)
            .map(move |&n| (family, n, synthetic(family, n, 2024 + n as u64)))
    })
}

/// Times the steady-state solve on each family and size.
pub fn time_steady(
    sizes: &[usize],
    families: &[Family],
    runs: usize,
) -> Result<Vec<SteadyTiming>, SolveError> {
    let mut rows = Vec::new();
    for (family, n, net) in networks(sizes, families) {
        reset_peak();
        let (seconds, result) =
            median_seconds(runs, || steady::solve(&net, &SteadySettings::default()));
        let state = result?;
        let peak = peak_mb();
        let (observed_seconds, observed) = median_seconds(runs, || {
            steady::solve(&net, &SteadySettings::default())
                .map(|s| steady::observe(&net, &s.probabilities).power)
        });
        observed?;
        let (precision_seconds, precision) = median_seconds(runs, || {
            crate::fluctuation::of_network(&net, &SteadySettings::default())
        });
        precision?;
        rows.push(SteadyTiming {
            family,
            states: n,
            seconds,
            peak_mb: peak,
            method: state.method.name(),
            relative_residual: state.relative_residual,
            observed_seconds,
            precision_seconds,
        });
    }
    Ok(rows)
}

/// One row of the bound benchmark.
#[derive(Debug, Clone)]
pub struct BoundTiming {
    pub family: Family,
    pub states: usize,
    pub route: &'static str,
    pub seconds: f64,
    pub relative_gap: f64,
    pub headroom: f64,
    /// Peak resident memory of the process during these runs (MB), where known.
    pub peak_mb: Option<f64>,
    /// The attaining tree design at 99% of the headroom with its speed table and its
    /// verification by a steady-state solve (timed once, after the bound; Newton rows only).
    pub design_seconds: Option<f64>,
    /// Newton steps of the solve.
    pub newton_steps: usize,
    /// One steady-state solve (sparse LU) of the same network, median of the same runs: the
    /// unit in which the bound's cost is judged.
    pub steady_seconds: f64,
    /// Why the bound was not certified (the time is then that of the attempt).
    pub refused: Option<String>,
}

/// Times the certified bound (all pairs) by each route: Newton alone from the baseline steady
/// state, and the conic program with Newton polish (only up to `conic_limit` states).
pub fn time_bound(
    sizes: &[usize],
    families: &[Family],
    runs: usize,
    conic_limit: usize,
) -> Result<Vec<BoundTiming>, SolveError> {
    use crate::bound::{self, BoundSettings};
    use crate::model::PairSelection;
    let mut rows = Vec::new();
    for (family, n, net) in networks(sizes, families) {
        let (steady_seconds, steady) =
            median_seconds(runs, || steady::solve(&net, &SteadySettings::default()));
        steady?;
        for newton_only in [true, false] {
            if !newton_only && n > conic_limit {
                continue;
            }
            // The benchmark's own conic limit decides which sizes the conic route gets.
            let settings = BoundSettings {
                newton_only,
                conic_first: !newton_only,
                conic_limit: usize::MAX,
                ..Default::default()
            };
            reset_peak();
            let (seconds, result) =
                median_seconds(runs, || bound::solve(&net, &PairSelection::All, &settings));
            let route = if newton_only {
                "newton"
            } else {
                "conic+newton"
            };
            // A bound the solver cannot certify is a result of the benchmark, not its end.
            let b = match result {
                Ok(b) => b,
                Err(SolveError::Uncertified(reason) | SolveError::NotDetermined(reason)) => {
                    rows.push(BoundTiming {
                        family,
                        states: n,
                        route,
                        seconds,
                        relative_gap: f64::NAN,
                        headroom: f64::NAN,
                        peak_mb: peak_mb(),
                        design_seconds: None,
                        newton_steps: 0,
                        steady_seconds,
                        refused: Some(reason),
                    });
                    continue;
                }
                Err(e) => return Err(e),
            };
            let design_seconds = if newton_only {
                let fractions = crate::bound::design::SPEED_TABLE_FRACTIONS;
                let (s, attained) = median_seconds(1, || {
                    crate::bound::design::attaining(&net, &b, &PairSelection::All, 0.99, &fractions)
                });
                attained?;
                Some(s)
            } else {
                None
            };
            rows.push(BoundTiming {
                family,
                states: n,
                route,
                seconds,
                relative_gap: b.relative_gap(),
                headroom: b.headroom(),
                peak_mb: peak_mb(),
                design_seconds,
                newton_steps: b.newton_steps,
                steady_seconds,
                refused: None,
            });
        }
    }
    Ok(rows)
}

/// The design-search benchmark on one seeded network.
#[derive(Debug, Clone)]
pub struct DesignTiming {
    pub states: usize,
    pub max_pathways: usize,
    /// Pathway sets in the search space, scored, pruned.
    pub sets: u64,
    pub scored: u64,
    pub pruned: u64,
    /// Steady-state evaluations (each scores one concrete design, with its gradient).
    pub evaluations: u64,
    pub seconds: f64,
    /// Designs scored per second when nothing but scoring runs (random rates, all threads).
    pub raw_scorings_per_second: f64,
}

/// Rate cap of the design benchmark (rates of the synthetic networks are 0.1..10).
pub const DESIGN_RATE_CAP: f64 = 10.0;

/// Times a full design search (all pairs, up to `k` pathways under [`DESIGN_RATE_CAP`], top
/// 10) on a seeded random-chord network of `states`, and the raw scoring throughput.
pub fn time_design(states: usize, k: usize, runs: usize) -> Result<DesignTiming, SolveError> {
    use crate::bound::{self, BoundSettings};
    use crate::model::PairSelection;
    use crate::search::{evaluate::Evaluator, Budget, SearchSettings, Searcher, Shard, Silent};
    use rayon::prelude::*;
    let net = synthetic(Family::RandomChords, states, 2024 + states as u64);
    let bound = bound::solve(&net, &PairSelection::All, &BoundSettings::default())?;
    let candidates: Vec<(usize, usize)> = (0..states)
        .flat_map(|a| (a + 1..states).map(move |b| (a, b)))
        .collect();
    let budget = Budget {
        max_pathways: k,
        rate_cap: Some(DESIGN_RATE_CAP),
        total_rate: None,
        work_limit: None,
    };
    let searcher = Searcher::new(
        &net,
        candidates.iter().map(|&c| vec![c]).collect(),
        SearchSettings::new(budget),
        (bound.baseline_power, bound.headroom()),
    )
    .map_err(|e| SolveError::Unresolved(e.to_string()))?;
    let (seconds, part) = median_seconds(runs, || {
        searcher.run(Shard::WHOLE, &Silent, &crate::search::NoCheckpoint)
    });
    let outcome = crate::search::merge(vec![
        part.map_err(|e| SolveError::Unresolved(e.to_string()))?
    ])
    .map_err(|e| SolveError::Unresolved(e.to_string()))?;
    let evaluator = Evaluator::new(&net);
    let count = 200_000;
    let start = Instant::now();
    let checksum: f64 = (0..count)
        .into_par_iter()
        .map(|i: u64| {
            let mut rng = SplitMix::new(i);
            let pairs: Vec<(usize, usize)> = (0..k.max(1))
                .map(|_| candidates[(rng.next_u64() % candidates.len() as u64) as usize])
                .collect();
            let log_rates: Vec<f64> = (0..2 * pairs.len())
                .map(|_| DESIGN_RATE_CAP.ln() - 6.0 * rng.uniform())
                .collect();
            evaluator.evaluate(&pairs, &log_rates, true).power
        })
        .sum();
    std::hint::black_box(checksum);
    let raw = count as f64 / start.elapsed().as_secs_f64();
    Ok(DesignTiming {
        states,
        max_pathways: k,
        sets: outcome.space,
        scored: outcome.evaluated,
        pruned: outcome.pruned,
        evaluations: outcome.scorings,
        seconds,
        raw_scorings_per_second: raw,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_family_is_connected_and_of_the_size_asked() {
        for family in Family::ALL {
            for n in [30, 301] {
                let net = synthetic(family, n, 7);
                assert_eq!(
                    net.len(),
                    n - n % ENVIRONMENTS * (family == Family::Switching) as usize,
                    "{}",
                    family.name()
                );
                assert_eq!(net.components().len(), 1, "{}", family.name());
                assert!(net
                    .channels
                    .iter()
                    .all(|c| c.forward > 0.0 && c.backward > 0.0));
            }
        }
    }

    #[test]
    fn synthetic_networks_are_connected_with_two_n_channels() {
        for family in [Family::Banded, Family::RandomChords] {
            let net = synthetic(family, 50, 1);
            assert_eq!(net.channels.len(), 100);
            assert_eq!(net.components().len(), 1);
            if family == Family::Banded {
                let reach = |c: &Channel| (c.to + 50 - c.from) % 50;
                assert!(net.channels.iter().all(|c| reach(c) <= 20));
            }
        }
    }
}
