//! What survives uncertain parameters: the distribution of the baseline power, of the bound and
//! of the headroom over networks sampled from the model's uncertainty, and designs ranked by a
//! quantile of their power over the same samples (methods, section 14).
//!
//! Owns the per-sample solves (each sample from its own random stream, so results never depend
//! on threads), the empirical quantiles with their distribution-free 95% intervals, and the
//! robust ranking of given designs. Sampling itself is `model::uncertainty`; no I/O, no
//! printing, no progress display (the caller passes an observer).

use crate::bound::design::{verify, Pathway};
use crate::bound::{self, BoundSettings};
use crate::model::{Model, Network, PairSelection};
use crate::search::{Control, Observer};
use crate::solve_error::SolveError;
use rayon::prelude::*;

/// Quantile levels reported.
pub const LEVELS: [f64; 5] = [0.05, 0.25, 0.5, 0.75, 0.95];

/// Most samples accepted in one run.
pub const MAX_SAMPLES: usize = 1_000_000;

/// What one sample gave (kT per time unit). Its serde form is the entry of a checkpoint.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "status", rename_all = "snake_case")]
pub enum SampleOutcome {
    Solved {
        baseline_power: f64,
        bound: f64,
        headroom: f64,
    },
    /// A derived backward rate left the double range: the sample is not a valid network.
    OutOfRange,
    /// The steady state or the bound of the sample could not be certified.
    Unsolved,
}

/// The baseline power and the certified bound of sample `index` (stream `seed`).
pub fn solve_sample(model: &Model, pairs: &PairSelection, seed: u64, index: u64) -> SampleOutcome {
    let Some(uncertainty) = &model.uncertainty else {
        return SampleOutcome::Unsolved;
    };
    let Some(network) = uncertainty.sample(&model.network, seed, index) else {
        return SampleOutcome::OutOfRange;
    };
    match bound::solve(&network, pairs, &BoundSettings::default()) {
        Ok(b) => SampleOutcome::Solved {
            baseline_power: b.baseline_power,
            bound: b.power,
            headroom: b.headroom(),
        },
        Err(_) => SampleOutcome::Unsolved,
    }
}

/// Where samples solved by an earlier run come from and where new ones go: a checkpoint file
/// for the command line; a [`Control`] keeps nothing and only passes on a stop request.
pub trait SampleKeeper: Sync {
    /// The outcome of sample `index`, if an earlier run solved it.
    fn kept(&self, _index: u64) -> Option<SampleOutcome> {
        None
    }

    /// Keeps a newly solved sample.
    fn record(&self, _index: u64, _outcome: SampleOutcome) {}

    /// Whether to stop before solving another sample.
    fn should_stop(&self) -> bool;
}

impl SampleKeeper for Control {
    fn should_stop(&self) -> bool {
        self.stop_requested()
    }
}

/// Solves samples `0..count` in parallel (rayon's current pool), taking those `keeper` kept
/// from an earlier run, giving it each new one, reporting each to `observer`, and stopping
/// early when `keeper` asks (then `None`). A sample's outcome depends only on `seed` and its
/// index, so a kept sample is the one a fresh solve would give.
pub fn solve_samples(
    model: &Model,
    pairs: &PairSelection,
    seed: u64,
    count: usize,
    observer: &dyn Observer,
    keeper: &dyn SampleKeeper,
) -> Option<Vec<SampleOutcome>> {
    observer.start(count as u64, "samples");
    let outcomes: Vec<Option<SampleOutcome>> = (0..count as u64)
        .into_par_iter()
        .map(|i| {
            let outcome = match keeper.kept(i) {
                Some(kept) => kept,
                None if keeper.should_stop() => return None,
                None => {
                    let fresh = solve_sample(model, pairs, seed, i);
                    keeper.record(i, fresh);
                    fresh
                }
            };
            let power = match outcome {
                SampleOutcome::Solved { bound, .. } => bound,
                _ => f64::NAN,
            };
            observer.advance(1, power);
            Some(outcome)
        })
        .collect();
    observer.finish();
    outcomes.into_iter().collect()
}

/// An empirical quantile and its distribution-free 95% interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantile {
    pub level: f64,
    pub value: f64,
    pub low: f64,
    pub high: f64,
}

/// The quantile `q` of sorted values by linear interpolation between order statistics
/// (Hyndman and Fan 1996, Am. Stat. 50, 361, definition 7: numpy's default).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * q;
    let (lo, frac) = (h.floor() as usize, h - h.floor());
    let hi = (lo + 1).min(n - 1);
    sorted[lo] + frac * (sorted[hi] - sorted[lo])
}

/// A 95% interval of the true quantile `q` from order statistics: the ranks `n q -+ 1.96
/// sqrt(n q (1 - q))` of the binomial count below it (normal approximation; e.g. Conover,
/// Practical Nonparametric Statistics, 3rd ed., section 3.2), clamped to the sample.
pub fn quantile_interval(sorted: &[f64], q: f64) -> (f64, f64) {
    let n = sorted.len();
    if n == 0 {
        return (f64::NAN, f64::NAN);
    }
    let spread = crate::model::uncertainty::Z_95 * (n as f64 * q * (1.0 - q)).sqrt();
    let centre = n as f64 * q;
    let low = ((centre - spread).floor().max(1.0) as usize).min(n) - 1;
    let high = ((centre + spread).ceil().max(1.0) as usize).min(n) - 1;
    (sorted[low], sorted[high])
}

/// The reported quantiles of `values` (not sorted; NaN-free).
pub fn quantiles(values: &[f64]) -> Vec<Quantile> {
    let mut sorted = values.to_vec();
    sorted.sort_by(f64::total_cmp);
    LEVELS
        .iter()
        .map(|&level| {
            let (low, high) = quantile_interval(&sorted, level);
            Quantile {
                level,
                value: quantile(&sorted, level),
                low,
                high,
            }
        })
        .collect()
}

/// The distributions over the samples (kT per time unit).
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    pub samples: usize,
    pub out_of_range: usize,
    pub unsolved: usize,
    pub baseline_power: Vec<f64>,
    pub bound: Vec<f64>,
    pub headroom: Vec<f64>,
}

impl Summary {
    pub fn of(outcomes: &[SampleOutcome]) -> Self {
        let mut s = Summary {
            samples: outcomes.len(),
            out_of_range: 0,
            unsolved: 0,
            baseline_power: Vec::new(),
            bound: Vec::new(),
            headroom: Vec::new(),
        };
        for o in outcomes {
            match *o {
                SampleOutcome::Solved {
                    baseline_power,
                    bound,
                    headroom,
                } => {
                    s.baseline_power.push(baseline_power);
                    s.bound.push(bound);
                    s.headroom.push(headroom);
                }
                SampleOutcome::OutOfRange => s.out_of_range += 1,
                SampleOutcome::Unsolved => s.unsolved += 1,
            }
        }
        s
    }
}

/// One design's standing over the samples.
#[derive(Debug, Clone, PartialEq)]
pub struct RobustScore {
    /// Index of the design in the list given.
    pub design: usize,
    /// The chosen quantile of its power over the samples (kT per time unit).
    pub quantile_power: f64,
    /// Share of the samples in which it has the highest power of the designs given.
    pub first_share: f64,
}

/// Ranks `designs` by the `q`-quantile of their power over samples `0..count` of `model`'s
/// uncertainty (the designs' rates fixed, the network sampled); samples that fail for any
/// design are left out for all, so every design is scored on the same networks. Returns the
/// scores best first and the number of samples used.
pub fn rank_designs(
    model: &Model,
    designs: &[Vec<Pathway>],
    q: f64,
    seed: u64,
    count: usize,
    control: &Control,
) -> Result<(Vec<RobustScore>, usize), SolveError> {
    let Some(uncertainty) = &model.uncertainty else {
        return Ok((Vec::new(), 0));
    };
    let powers: Vec<Option<Vec<f64>>> = (0..count as u64)
        .into_par_iter()
        .map(|i| {
            if control.stop_requested() {
                return None;
            }
            let network: Network = uncertainty.sample(&model.network, seed, i)?;
            designs
                .iter()
                .map(|d| verify(&network, d).ok().map(|v| v.power))
                .collect::<Option<Vec<f64>>>()
        })
        .collect();
    if control.stop_requested() {
        return Err(SolveError::Unresolved(
            "the ranking under uncertainty was stopped on request".into(),
        ));
    }
    let used: Vec<Vec<f64>> = powers.into_iter().flatten().collect();
    let mut firsts = vec![0usize; designs.len()];
    for sample in &used {
        let best = (0..sample.len()).max_by(|&a, &b| sample[a].total_cmp(&sample[b]));
        if let Some(best) = best {
            firsts[best] += 1;
        }
    }
    let mut scores: Vec<RobustScore> = (0..designs.len())
        .map(|d| {
            let mut column: Vec<f64> = used.iter().map(|s| s[d]).collect();
            column.sort_by(f64::total_cmp);
            RobustScore {
                design: d,
                quantile_power: quantile(&column, q),
                first_share: firsts[d] as f64 / used.len().max(1) as f64,
            }
        })
        .collect();
    scores.sort_by(|a, b| b.quantile_power.total_cmp(&a.quantile_power));
    Ok((scores, used.len()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantiles_follow_definition_7() {
        // numpy.quantile([1, 2, 3, 4, 10], [0.05, 0.25, 0.5, 0.75, 0.95]) (definition 7,
        // computed by hand: h = 4 q) = [1.2, 2, 3, 4, 8.8].
        let sorted = [1.0, 2.0, 3.0, 4.0, 10.0];
        let got: Vec<f64> = LEVELS.iter().map(|&q| quantile(&sorted, q)).collect();
        for (g, want) in got.iter().zip([1.2, 2.0, 3.0, 4.0, 8.8]) {
            assert!((g - want).abs() < 1e-12, "{got:?}");
        }
    }
}
