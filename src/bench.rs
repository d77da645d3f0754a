//! Seeded synthetic networks and timing of the pipeline stages (`ergopath bench`).
//!
//! Owns the two benchmark families: *banded* (a ring plus chords reaching at most 20 states
//! ahead, like joint system-environment chains) and *random chords* (expander-like, the hardest
//! case for direct factorisation), each with 2n channels. Timing uses wall-clock medians of
//! several runs; nothing here asserts speed.

use crate::model::{Channel, Network};
use crate::steady::{self, SolveError, SteadySettings};
use std::time::Instant;

/// Benchmark network families.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    Banded,
    RandomChords,
}

impl Family {
    pub fn name(self) -> &'static str {
        match self {
            Family::Banded => "banded",
            Family::RandomChords => "random-chords",
        }
    }
}

pub use crate::rng::SplitMix;

/// A seeded network of `n` states and 2n channels: a ring, plus one chord per state. Energies
/// are uniform in +-2 kT, rates log-uniform in 0.1..10, every ring step stores 0.2 kT of work and
/// draws 1 kT of drive.
pub fn synthetic(family: Family, n: usize, seed: u64) -> Network {
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
            Family::Banded => 2 + (rng.next_u64() % 19) as usize,
            Family::RandomChords => 2 + (rng.next_u64() % (n as u64 - 3).max(1)) as usize,
        };
        add(&mut rng, i, (i + reach) % n, 0.0, 0.0);
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
