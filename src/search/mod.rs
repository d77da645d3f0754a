//! Design search under budgets (methods, section 5, last bullet): which added pathways to
//! build, with which rates, when the number of pathways, their rates, their total rate or their
//! work per jump is limited.
//!
//! Owns the enumeration of pathway sets (exhaustive branch-and-bound below a stated limit, beam
//! search above it), the pruning with the rate-capped convex relaxation (a valid upper bound for
//! every superset of allowed pairs), the deterministic split into shards and their merge, and the
//! verification of every design it returns. Scoring one set is in [`local`] and [`evaluate`].
//! No I/O and no printing: progress goes through [`Observer`].

pub mod evaluate;
pub mod local;

use crate::bound::conic::Candidate;
use crate::bound::design::{verify, Pathway};
use crate::bound::objective::Objective;
use crate::model::Network;
use crate::steady::SolveError;
use evaluate::Evaluator;
use local::{Layout, RateMap};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicUsize, Ordering};

/// Limits on the added pathways. Rates per the model's time unit, work in kT.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Budget {
    pub max_pathways: usize,
    /// Per-direction rate limit of each pathway.
    pub rate_cap: Option<f64>,
    /// Limit on the sum of all added rates (both directions).
    pub total_rate: Option<f64>,
    /// Limit on |work per jump| of each pathway (kT).
    pub work_limit: Option<f64>,
}

/// Added rates are searched up to this factor above the fastest baseline rate. Beyond it the
/// one-way fluxes of a pathway are so much larger than the network's own that the verifying
/// steady state no longer determines a design's power (measured: the walker at a cap of 1e16 /s
/// ranked a design at 116% of the headroom with a round-off of 116 pN nm/s), while the tree
/// design already reaches the universal bound there: the bound is the answer for larger caps.
pub const RATE_CEILING_FACTOR: f64 = 1e12;

/// The largest added rate searched on `network` (per its time unit).
pub fn rate_ceiling(network: &crate::model::Network) -> f64 {
    network.max_rate() * RATE_CEILING_FACTOR
}

impl Budget {
    /// The budget with a rate cap or total rate above `ceiling` lowered to it.
    pub fn within_ceiling(self, ceiling: f64) -> Self {
        Self {
            rate_cap: self.rate_cap.map(|c| c.min(ceiling)),
            total_rate: self.total_rate.map(|t| t.min(ceiling)),
            ..self
        }
    }

    /// The per-direction rate limit implied by the budget (a total limit bounds each rate too).
    pub fn relaxed_cap(&self) -> Option<f64> {
        match (self.rate_cap, self.total_rate) {
            (Some(c), Some(t)) => Some(c.min(t)),
            (c, t) => c.or(t),
        }
    }

    /// True when the rate cap is the only continuous limit: then the capped convex program on a
    /// set is the exact best design for that set.
    pub fn is_convex(&self) -> bool {
        self.total_rate.is_none() && self.work_limit.is_none()
    }
}

/// Which slice of the branches a run scores: branch `b` belongs to shard `b mod count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    pub const WHOLE: Shard = Shard { index: 0, count: 1 };
}

/// Settings of a search.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SearchSettings {
    pub budget: Budget,
    /// Length of the ranking.
    pub top: usize,
    /// Seeded random starts of the local optimisation per set (besides the convex start).
    pub starts: usize,
    pub seed: u64,
    /// Largest number of pathway sets searched exhaustively (with pruning).
    pub exhaustive_limit: u64,
    /// Sets kept per level by the beam search.
    pub beam_width: usize,
}

impl SearchSettings {
    pub fn new(budget: Budget) -> Self {
        Self {
            budget,
            top: 10,
            starts: 2,
            seed: 1,
            exhaustive_limit: EXHAUSTIVE_LIMIT,
            beam_width: 48,
        }
    }
}

/// Default limit of the exhaustive search: sum over sizes 1..k of C(pairs, size). Measured on 2
/// cores, a 12-state model settles its 47 971 sets of up to 3 of 66 pairs in 13 s (98% pruned).
pub const EXHAUSTIVE_LIMIT: u64 = 100_000;

/// One scored design: pathway pairs and log-rates (kT, model time unit).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Found {
    /// Indices into the candidate pair list, ascending.
    pub set: Vec<usize>,
    /// `(from, to)` per pathway.
    pub pairs: Vec<(usize, usize)>,
    /// `[ln q+_1, ln q-_1, ...]`.
    pub log_rates: Vec<f64>,
    /// Power found by the optimiser.
    pub power: f64,
    /// Independently verified power and its round-off bound (ranked designs only).
    pub verified: Option<(f64, f64)>,
    /// Entropy production of the added pathways at the joint steady state (k_B per time unit).
    pub added_entropy: f64,
    /// Some pathway adds a negligible share of the headroom at the optimum
    /// ([`NEGLIGIBLE_GAIN`]): the design is really one of a smaller set, so it is not ranked.
    pub reducible: bool,
    /// Pairs each pathway acts on: 1, or the number of environment states when it acts the
    /// same in all of them (then `pairs` and `log_rates` list every copy).
    pub copies: usize,
}

/// Added rates are kept within this many decades below the rate limit.
pub const RATE_FLOOR_DECADES: f64 = 40.0;

/// A pathway whose removal changes a design's power by less than this share of the headroom
/// (plus the power's round-off) is negligible: every report prints shares of the headroom to at
/// most four digits, so such a pathway changes nothing a user can see, and the design is ranked
/// as the smaller set it really is.
pub const NEGLIGIBLE_GAIN: f64 = 1e-6;

impl Found {
    pub fn pathways(&self, network: &Network) -> Vec<Pathway> {
        self.pairs
            .iter()
            .enumerate()
            .map(|(e, &(a, b))| {
                let (f, g) = (self.log_rates[2 * e].exp(), self.log_rates[2 * e + 1].exp());
                Pathway::with_rates(network, a, b, f, g)
            })
            .collect()
    }

    /// Ranking order: higher power first, then the set's indices (so ties are deterministic).
    fn ranks_before(&self, other: &Found) -> std::cmp::Ordering {
        other
            .power
            .total_cmp(&self.power)
            .then_with(|| self.set.cmp(&other.set))
    }
}

/// Counts of one branch (sets of two or more pathways whose first pair in search order is
/// `branch`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BranchTally {
    pub branch: usize,
    pub scored: u64,
    /// Sets skipped because the relaxation proved they cannot enter the ranking.
    pub pruned: u64,
    /// Steady-state evaluations spent.
    pub scorings: u64,
}

/// What one run (or one shard) found. Serialised as a part file for `merge`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Part {
    /// Identifies the model and the search, so parts of different searches never merge.
    pub fingerprint: String,
    pub settings: SearchSettings,
    /// Where each candidate pathway acts (one pair, or its copies in every environment state).
    pub candidates: Vec<Vec<(usize, usize)>>,
    pub strategy: Strategy,
    pub shard: Shard,
    /// Sets in the search space (all sizes 1..k).
    pub space: u64,
    /// Single-pathway sets scored (every shard scores them; counted once in a merge).
    pub singles: u64,
    pub single_scorings: u64,
    pub branches: Vec<BranchTally>,
    /// The best designs of this part, ranked, verified.
    pub designs: Vec<Found>,
    /// Designs that reached the ranking but whose verified power is not determined by double
    /// precision (its round-off bound covers its gain over the baseline): left out of it.
    #[serde(default)]
    pub undetermined: u64,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Strategy {
    Exhaustive,
    Beam,
}

impl Strategy {
    pub fn describe(self) -> &'static str {
        match self {
            Strategy::Exhaustive => "exhaustive with branch-and-bound pruning",
            Strategy::Beam => "beam search",
        }
    }
}

/// One finished branch: its counts and its best designs (what a checkpoint keeps).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BranchResult {
    pub tally: BranchTally,
    pub designs: Vec<Found>,
}

/// Keeps finished branches across an interruption. The search asks it which branches are
/// already done, hands it every branch it finishes, and stops starting new branches once it
/// says so (on Ctrl-C). Storage is the caller's business: the search does no I/O.
pub trait Keeper: Sync {
    fn finished(&self) -> Vec<BranchResult> {
        Vec::new()
    }
    fn record(&self, _result: &BranchResult) {}
    fn should_stop(&self) -> bool {
        false
    }
}

/// No checkpoint: nothing kept, never stops early.
pub struct NoCheckpoint;
impl Keeper for NoCheckpoint {}

/// Reports progress of a long search (a terminal progress bar, or nothing).
pub trait Observer: Sync {
    fn start(&self, _steps: u64, _what: &str) {}
    fn advance(&self, _scored: u64, _best_power: f64) {}
    fn finish(&self) {}
}

/// An observer that shows nothing.
pub struct Silent;
impl Observer for Silent {}

/// How a caller other than the terminal steers a long run (the Python package, a service): a
/// flag that asks the run to stop after the branches or budget points in flight, and an
/// observer of its progress. The default never stops and shows nothing through this channel.
#[derive(Clone, Default)]
pub struct Control {
    pub stop: Option<std::sync::Arc<std::sync::atomic::AtomicBool>>,
    pub observer: Option<std::sync::Arc<dyn Observer + Send>>,
}

impl Control {
    /// Whether the caller asked the run to stop.
    pub fn stop_requested(&self) -> bool {
        self.stop.as_ref().is_some_and(|s| s.load(Ordering::SeqCst))
    }
}

impl std::fmt::Debug for Control {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Control")
            .field("stop", &self.stop)
            .field("observer", &self.observer.as_ref().map(|_| "set"))
            .finish()
    }
}

/// Without a checkpoint the control's stop flag is the only reason to stop early.
impl Keeper for Control {
    fn should_stop(&self) -> bool {
        self.stop_requested()
    }
}

/// Errors of the search boundary.
#[derive(Debug, thiserror::Error)]
pub enum SearchError {
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error("{0}")]
    Settings(String),
    #[error("cannot merge: {0}")]
    Merge(String),
    /// Stopped on request; `finished` of `total` steps (`what`: branches, which the keeper
    /// keeps, or beam levels, which are not kept) are done.
    #[error("interrupted after {finished} of {total} {what}")]
    Interrupted {
        finished: usize,
        total: usize,
        what: &'static str,
    },
}

/// `C(n, k)` as a float (exact below 2^53).
fn binomial(n: usize, k: usize) -> f64 {
    if k > n {
        return 0.0;
    }
    (0..k).fold(1.0, |acc, i| acc * (n - i) as f64 / (i + 1) as f64)
}

/// Sets of sizes `1..=k` from `pairs` candidates.
pub fn space_size(pairs: usize, k: usize) -> u64 {
    (1..=k).map(|j| binomial(pairs, j)).sum::<f64>().round() as u64
}

/// Sets of up to `depth` further pairs chosen from `rest` (counting the empty choice).
fn subtree_size(rest: usize, depth: usize) -> u64 {
    (0..=depth).map(|j| binomial(rest, j)).sum::<f64>().round() as u64
}

/// Why the rate-capped convex relaxation gave no upper bound (an outcome, not a failure: the
/// search then prunes nothing on its word).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, thiserror::Error)]
pub enum RelaxationGap {
    #[error("{0}")]
    SolverFailed(String),
    #[error("the conic solver stopped short of full accuracy (answers short of it were measured 3e-5 off)")]
    NotFullyAccurate,
    #[error("the conic solution gave a non-finite value")]
    NotFinite,
}

/// A ranking of at most `top` designs.
struct Ranking {
    top: usize,
    designs: Vec<Found>,
}

impl Ranking {
    fn new(top: usize) -> Self {
        Self {
            top,
            designs: Vec::new(),
        }
    }

    /// Inserts `found` in rank order unless it ranks below the top or its set is present.
    fn offer(&mut self, found: Found) {
        if found.reducible || self.designs.iter().any(|d| d.set == found.set) {
            return;
        }
        let at = self
            .designs
            .partition_point(|d| d.ranks_before(&found).is_lt());
        if at < self.top {
            self.designs.insert(at, found);
            self.designs.truncate(self.top);
        }
    }

    /// Power a design must beat to enter; -inf while the ranking is not full.
    fn threshold(&self) -> f64 {
        if self.designs.len() < self.top {
            f64::NEG_INFINITY
        } else {
            self.designs.last().map_or(f64::NEG_INFINITY, |d| d.power)
        }
    }
}

/// Everything a search needs about one network.
pub struct Searcher<'a> {
    network: &'a Network,
    objective: Objective,
    /// The baseline steady state: where the capped relaxation's barrier path starts.
    start: Vec<f64>,
    evaluator: Evaluator,
    candidates: Vec<Vec<(usize, usize)>>,
    settings: SearchSettings,
    baseline: f64,
    /// Headroom to the universal bound: the optimiser's scale and the pruning margin's.
    headroom: f64,
}

impl<'a> Searcher<'a> {
    /// A searcher over `candidates`, each a pathway acting on one pair or, environment-blind,
    /// on several pairs with shared rates. `baseline_power` and `headroom` come from the bound.
    pub fn new(
        network: &'a Network,
        candidates: Vec<Vec<(usize, usize)>>,
        settings: SearchSettings,
        (baseline_power, headroom): (f64, f64),
    ) -> Result<Self, SearchError> {
        if network.len() > evaluate::DENSE_LIMIT {
            return Err(SearchError::Settings(format!(
                "the design search scores designs with a dense solver and takes models of up to {} states; this one has {}",
                evaluate::DENSE_LIMIT,
                network.len()
            )));
        }
        if settings.budget.relaxed_cap().is_none() {
            return Err(SearchError::Settings(
                "a design search needs a rate budget: give --rate-cap K or --total-rate T (or rate_cap / total_rate in [pathways]); without one the best designs need unbounded rates, and `ergopath bound` gives their limit".into(),
            ));
        }
        let start =
            crate::steady::solve(network, &crate::steady::SteadySettings::default())?.probabilities;
        Ok(Self {
            network,
            objective: Objective::new(network),
            start,
            evaluator: Evaluator::new(network),
            candidates,
            settings,
            baseline: baseline_power,
            headroom: headroom.abs().max(1e-12 * baseline_power.abs()).max(1e-300),
        })
    }

    fn k(&self) -> usize {
        self.settings.budget.max_pathways.min(self.candidates.len())
    }

    /// Deterministic seed of a set: the same set gets the same starts in every run and shard.
    fn seed_of(&self, set: &[usize]) -> u64 {
        let mut rng = crate::rng::SplitMix::new(self.settings.seed);
        for &i in set {
            rng = crate::rng::SplitMix::new(rng.next_u64() ^ (i as u64 + 1));
        }
        rng.next_u64()
    }

    /// Starting rates: the rates of the capped relaxation's optimum (projected by the rate map
    /// onto the budget), then seeded random rates below the rate limit. When the cap is the only
    /// limit, the relaxation's optimum is the global best for the set and the random starts
    /// are skipped.
    fn starts(&self, set: &[usize], map: &RateMap, relaxed: Option<&Relaxed>) -> Vec<Vec<f64>> {
        let budget = &self.settings.budget;
        let limit = budget.relaxed_cap().unwrap_or(1.0);
        let level = match budget.total_rate {
            Some(t) => limit.min(t / (2.0 * set.len() as f64)),
            None => limit,
        };
        let mut starts = Vec::with_capacity(self.settings.starts + 1);
        if let Some(r) = relaxed {
            let floor = 1e-9 * level;
            let rates: Vec<(f64, f64)> = r
                .rates
                .iter()
                .map(|&(f, g)| (f.clamp(floor, limit), g.clamp(floor, limit)))
                .collect();
            starts.push(map.parameters_for(&rates));
            if budget.is_convex() {
                return starts;
            }
        }
        let mut rng = crate::rng::SplitMix::new(self.seed_of(set));
        for _ in 0..self.settings.starts {
            let rates: Vec<(f64, f64)> = set
                .iter()
                .map(|_| {
                    let top = level * (-4.0 * rng.uniform()).exp();
                    let other = top * (-6.0 * rng.uniform()).exp();
                    if rng.uniform() < 0.5 {
                        (top, other)
                    } else {
                        (other, top)
                    }
                })
                .collect();
            starts.push(map.parameters_for(&rates));
        }
        starts
    }

    /// The best rates found for the pathway set `set` (candidate indices, ascending), or `None`
    /// when the set's relaxation shows it cannot beat `threshold` (then no optimisation runs).
    fn score(&self, set: &[usize], threshold: f64, scorings: &AtomicUsize) -> Option<Found> {
        let relaxed = self.relaxation(set);
        if relaxed.as_ref().is_some_and(|r| r.upper <= threshold) {
            return None;
        }
        let layout = Layout {
            members: set.iter().map(|&i| self.candidates[i].clone()).collect(),
        };
        let map = RateMap {
            budget: &self.settings.budget,
            // Copies of one pathway join states of equal energies, so the first one speaks for all.
            drops: layout
                .members
                .iter()
                .map(|m| self.network.energies[m[0].0] - self.network.energies[m[0].1])
                .collect(),
        };
        let scale = (self.baseline, self.headroom);
        let best = self
            .starts(set, &map, relaxed.as_ref())
            .into_iter()
            .map(|start| local::maximise(&self.evaluator, &map, &layout, start, scale, scorings))
            .fold(None::<local::LocalBest>, |best, next| match best {
                Some(b) if b.power >= next.power => Some(b),
                _ => Some(next),
            })?;
        // Where every pathway only costs power (no headroom), the optimiser drives rates toward
        // zero without end; a floor far below the limit keeps them positive and the work per
        // jump finite, at no visible cost in power.
        let floor = self.settings.budget.relaxed_cap().unwrap_or(1.0).ln()
            - RATE_FLOOR_DECADES * 10f64.ln();
        let floored: Vec<f64> = map
            .log_rates(&best.theta)
            .iter()
            .map(|x| x.max(floor))
            .collect();
        let (own_rates, eval) = self.fill_budget(&layout, floored, scorings);
        let (pairs, log_rates) = (layout.pairs(), layout.expand(&own_rates));
        let one_way: Vec<(f64, f64)> = pairs
            .iter()
            .enumerate()
            .map(|(e, &(a, b))| {
                (
                    log_rates[2 * e].exp() * eval.p[a],
                    log_rates[2 * e + 1].exp() * eval.p[b],
                )
            })
            .collect();
        let added_entropy = one_way
            .iter()
            .map(|&(f, g)| {
                if f > 0.0 && g > 0.0 {
                    (f - g) * (f / g).ln()
                } else {
                    0.0
                }
            })
            .sum();
        // A pathway whose removal leaves the power where it was (or raises it) makes this set a
        // copy of a smaller one, which the search scores on its own.
        let reducible = set.len() > 1 && self.has_negligible_pathway(&layout, &log_rates, &eval);
        Some(Found {
            set: set.to_vec(),
            pairs,
            log_rates,
            power: eval.power,
            verified: None,
            added_entropy,
            reducible,
            copies: layout.members[0].len(),
        })
    }

    /// Whether some pathway of a design adds less than [`NEGLIGIBLE_GAIN`] of the headroom plus
    /// round-off: the power of the design without it (other rates unchanged) is compared with
    /// the design's own.
    fn has_negligible_pathway(
        &self,
        layout: &Layout,
        log_rates: &[f64],
        eval: &evaluate::Evaluation,
    ) -> bool {
        let pairs = layout.pairs();
        let tolerance = NEGLIGIBLE_GAIN * self.headroom + eval.power_roundoff;
        let mut start = 0;
        layout.members.iter().any(|member| {
            let range = start..start + member.len();
            start = range.end;
            let kept_pairs: Vec<(usize, usize)> = pairs
                .iter()
                .enumerate()
                .filter(|(e, _)| !range.contains(e))
                .map(|(_, &pair)| pair)
                .collect();
            let kept_rates: Vec<f64> = log_rates
                .iter()
                .enumerate()
                .filter(|(i, _)| !range.contains(&(i / 2)))
                .map(|(_, &x)| x)
                .collect();
            let without = self.evaluator.evaluate(&kept_pairs, &kept_rates, false);
            eval.power - without.power < tolerance + without.power_roundoff
        })
    }

    /// The smooth rate limits leave a little of the budget unused; scaling every rate up by the
    /// same factor until a limit binds keeps each pathway's work per jump and usually speeds
    /// the cycle up. Kept only if the power does not fall.
    fn fill_budget(
        &self,
        layout: &Layout,
        log_rates: Vec<f64>,
        scorings: &AtomicUsize,
    ) -> (Vec<f64>, evaluate::Evaluation) {
        let budget = &self.settings.budget;
        let peak = log_rates.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let total: f64 = log_rates.iter().map(|x| x.exp()).sum();
        let room = [
            budget.rate_cap.map(|c| c.ln() - peak),
            budget.total_rate.map(|t| t.ln() - total.ln()),
        ]
        .into_iter()
        .flatten()
        .fold(f64::INFINITY, f64::min);
        let pairs = layout.pairs();
        let base = self
            .evaluator
            .evaluate(&pairs, &layout.expand(&log_rates), false);
        scorings.fetch_add(2, Ordering::Relaxed);
        if !(room.is_finite() && room > 0.0) {
            return (log_rates, base);
        }
        // Stay a hair inside the limits so round-off never breaks them.
        let shift = room - 1e-12;
        let filled: Vec<f64> = log_rates.iter().map(|x| x + shift).collect();
        let eval = self
            .evaluator
            .evaluate(&pairs, &layout.expand(&filled), false);
        if eval.power >= base.power {
            (filled, eval)
        } else {
            (log_rates, base)
        }
    }

    /// The capped convex program over the pairs of `set` (work and total-rate limits dropped,
    /// which only relaxes it): an upper bound on the power of every design whose pairs are
    /// among `set`, plus a margin for the conic solver's tolerance, and the rates at its
    /// optimum. `None` if the program fails or stops short of full accuracy, so that nothing is
    /// pruned on its word.
    fn relaxation(&self, set: &[usize]) -> Option<Relaxed> {
        self.relaxation_checked(set).ok()
    }

    /// [`Self::relaxation`], saying why it is missing.
    fn relaxation_checked(&self, set: &[usize]) -> Result<Relaxed, RelaxationGap> {
        let cap = self.settings.budget.relaxed_cap().unwrap_or(f64::INFINITY);
        // Copies of a blind pathway get their own rates here: a relaxation of the shared ones.
        let list: Vec<Candidate> = set
            .iter()
            .flat_map(|&i| &self.candidates[i])
            .map(|&(a, b)| Candidate { a, b })
            .collect();
        let s = crate::bound::capped::best(&self.objective, &list, cap, &self.start)
            .map_err(|e| RelaxationGap::SolverFailed(e.to_string()))?;
        let dual_bound = s.dual_bound.ok_or(RelaxationGap::NotFullyAccurate)?;
        let log_p: Vec<f64> = s.p.iter().map(|x| x.max(1e-300).ln()).collect();
        let mut value = self.objective.value(&s.p, &log_p);
        for (f, g) in s.forward_flux.iter().zip(&s.backward_flux) {
            if *f > 0.0 && *g > 0.0 {
                value -= (f - g) * (f / g).ln();
            }
        }
        // The larger of the primal value and the dual bound, plus a margin well above the
        // solver's tolerance: pruning must never drop a set that could enter the ranking.
        let value = value.max(dual_bound);
        let margin = 1e-5 * (self.headroom + self.baseline.abs());
        // One start per candidate: the geometric mean of its copies' optimal rates.
        let mut per_pair = list.iter().enumerate().map(|(e, c)| {
            (
                (s.forward_flux[e] / s.p[c.a].max(f64::MIN_POSITIVE))
                    .max(f64::MIN_POSITIVE)
                    .ln(),
                (s.backward_flux[e] / s.p[c.b].max(f64::MIN_POSITIVE))
                    .max(f64::MIN_POSITIVE)
                    .ln(),
            )
        });
        let rates = set
            .iter()
            .map(|&i| {
                let copies = self.candidates[i].len();
                let (f, g) = per_pair
                    .by_ref()
                    .take(copies)
                    .fold((0.0, 0.0), |(f, g), (x, y)| (f + x, g + y));
                ((f / copies as f64).exp(), (g / copies as f64).exp())
            })
            .collect();
        if !value.is_finite() {
            return Err(RelaxationGap::NotFinite);
        }
        Ok(Relaxed {
            upper: value + margin,
            rates,
        })
    }

    /// [`Self::relaxation`]'s bound alone; `+inf` when the program fails.
    fn upper(&self, set: &[usize]) -> f64 {
        self.relaxation(set).map_or(f64::INFINITY, |r| r.upper)
    }

    /// What identifies this search: the network's fingerprint, the settings, the candidates.
    pub fn identity(&self) -> (String, SearchSettings, Vec<Vec<(usize, usize)>>) {
        (
            fingerprint(self.network),
            self.settings,
            self.candidates.clone(),
        )
    }

    /// Upper bound on every design within the budget on any of the candidate pairs, whatever
    /// the number of pathways (the capped relaxation over all candidates), or why there is none.
    pub fn relaxation_all(&self) -> Result<f64, RelaxationGap> {
        let all: Vec<usize> = (0..self.candidates.len()).collect();
        self.relaxation_checked(&all).map(|r| r.upper)
    }

    /// Runs the search (or one shard of it) and returns its part, designs verified.
    pub fn run(
        &self,
        shard: Shard,
        observer: &dyn Observer,
        keeper: &dyn Keeper,
    ) -> Result<Part, SearchError> {
        if shard.count == 0 || shard.index >= shard.count {
            return Err(SearchError::Settings(format!(
                "shard {}/{} does not exist: give i/N with 0 <= i < N",
                shard.index, shard.count
            )));
        }
        let space = space_size(self.candidates.len(), self.k());
        let strategy = if space <= self.settings.exhaustive_limit {
            Strategy::Exhaustive
        } else {
            Strategy::Beam
        };
        if strategy == Strategy::Beam && shard != Shard::WHOLE {
            return Err(SearchError::Settings(format!(
                "this search has {space} pathway sets, above the exhaustive limit {}, so it runs as a beam search, which is not split into shards: drop --shard, or raise --exhaustive-limit",
                self.settings.exhaustive_limit
            )));
        }
        let scorings = AtomicUsize::new(0);
        let singles: Option<Vec<Found>> = (0..self.candidates.len())
            .into_par_iter()
            .map(|i| {
                if keeper.should_stop() {
                    return None;
                }
                self.score(&[i], f64::NEG_INFINITY, &scorings)
            })
            .collect::<Option<Vec<_>>>();
        if keeper.should_stop() {
            return Err(SearchError::Interrupted {
                finished: 0,
                total: self.candidates.len(),
                what: "single pathways",
            });
        }
        let singles: Vec<Found> = singles.ok_or_else(|| {
            // With no threshold every set is scored; only a set without starts lands here.
            SearchError::Settings("a single pathway could not be scored (no start)".into())
        })?;
        let single_scorings = scorings.load(Ordering::Relaxed) as u64;
        let (ranking, branches) = match strategy {
            Strategy::Exhaustive => self.exhaustive(&singles, shard, observer, keeper)?,
            Strategy::Beam => self.beam(&singles, observer, keeper)?,
        };
        let baseline = verify(self.network, &[])?;
        let mut designs = Vec::with_capacity(ranking.designs.len());
        let mut undetermined = 0;
        for mut d in ranking.designs {
            let v = verify(self.network, &d.pathways(self.network))?;
            d.verified = Some((v.power, v.roundoff));
            if determined_gain(&baseline, &v) {
                designs.push(d);
            } else {
                undetermined += 1;
            }
        }
        Ok(Part {
            fingerprint: fingerprint(self.network),
            settings: self.settings,
            candidates: self.candidates.clone(),
            strategy,
            shard,
            space,
            singles: singles.len() as u64,
            single_scorings,
            branches,
            designs,
            undetermined,
        })
    }

    /// Branch-and-bound over sets in the order of their single-pathway scores. Branch `b` holds
    /// the sets whose first pair (in that order) is `b`; each branch is searched depth-first
    /// with its own ranking, seeded by the single-pathway sets, so its counts do not depend on
    /// how branches are spread over threads or shards.
    fn exhaustive(
        &self,
        singles: &[Found],
        shard: Shard,
        observer: &dyn Observer,
        keeper: &dyn Keeper,
    ) -> Result<(Ranking, Vec<BranchTally>), SearchError> {
        let top = self.settings.top;
        let done: std::collections::HashMap<usize, BranchResult> = keeper
            .finished()
            .into_iter()
            .map(|r| (r.tally.branch, r))
            .collect();
        let mut order: Vec<usize> = (0..singles.len()).collect();
        order.sort_by(|&x, &y| singles[x].ranks_before(&singles[y]));
        let mut seed = Ranking::new(top);
        singles.iter().for_each(|s| seed.offer(s.clone()));
        let branch_ids: Vec<usize> = if self.k() >= 2 {
            (0..order.len().saturating_sub(1))
                .filter(|b| b % shard.count == shard.index)
                .collect()
        } else {
            Vec::new()
        };
        observer.start(branch_ids.len() as u64, "branches");
        let results: Vec<Option<BranchResult>> = branch_ids
            .par_iter()
            .map(|&b| {
                if let Some(kept) = done.get(&b) {
                    observer.advance(0, kept.designs.first().map_or(f64::NAN, |d| d.power));
                    return Some(kept.clone());
                }
                if keeper.should_stop() {
                    return None;
                }
                let mut ranking = Ranking {
                    top,
                    designs: seed.designs.clone(),
                };
                let scorings = AtomicUsize::new(0);
                let mut tally = BranchTally {
                    branch: b,
                    scored: 0,
                    pruned: 0,
                    scorings: 0,
                };
                self.grow(&order, &mut vec![b], &mut ranking, &mut tally, &scorings);
                tally.scorings = scorings.load(Ordering::Relaxed) as u64;
                let best = ranking.designs.first().map_or(f64::NAN, |d| d.power);
                observer.advance(tally.scored, best);
                let result = BranchResult {
                    tally,
                    designs: ranking.designs,
                };
                keeper.record(&result);
                Some(result)
            })
            .collect();
        observer.finish();
        let finished = results.iter().filter(|r| r.is_some()).count();
        if finished < results.len() {
            return Err(SearchError::Interrupted {
                finished,
                total: results.len(),
                what: "branches",
            });
        }
        let mut ranking = seed;
        let mut tallies = Vec::with_capacity(results.len());
        for result in results.into_iter().flatten() {
            result.designs.into_iter().for_each(|d| ranking.offer(d));
            tallies.push(result.tally);
        }
        Ok((ranking, tallies))
    }

    /// Extends `path` (positions in `order`) by one pair at a time, depth first, skipping every
    /// extension whose relaxation cannot beat the ranking's threshold.
    fn grow(
        &self,
        order: &[usize],
        path: &mut Vec<usize>,
        ranking: &mut Ranking,
        tally: &mut BranchTally,
        scorings: &AtomicUsize,
    ) {
        let k = self.k();
        let count = order.len();
        let start = path.last().map_or(0, |&m| m + 1);
        if path.len() >= k || start >= count {
            return;
        }
        // The relaxation over path + positions m.. can only fall as m grows (fewer pairs), so
        // the first m where it drops below the threshold cuts off all later ones too.
        let threshold = ranking.threshold();
        let bound_from = |m: usize| {
            let mut set: Vec<usize> = path
                .iter()
                .chain(&(m..count).collect::<Vec<_>>())
                .map(|&q| order[q])
                .collect();
            set.sort_unstable();
            self.upper(&set)
        };
        let (mut lo, mut hi) = (start, count);
        if threshold > f64::NEG_INFINITY && bound_from(start) <= threshold {
            // The commonest case deep in a search: nothing below this node can enter.
            hi = start;
        }
        if threshold > f64::NEG_INFINITY {
            while lo < hi {
                let mid = (lo + hi) / 2;
                if bound_from(mid) <= threshold {
                    hi = mid;
                } else {
                    lo = mid + 1;
                }
            }
        } else {
            lo = count;
        }
        let cut = lo;
        let depth = k - path.len() - 1;
        tally.pruned += (cut..count)
            .map(|m| subtree_size(count - 1 - m, depth))
            .sum::<u64>();
        for m in start..cut {
            path.push(m);
            let mut set: Vec<usize> = path.iter().map(|&q| order[q]).collect();
            set.sort_unstable();
            match self.score(&set, ranking.threshold(), scorings) {
                Some(found) => {
                    ranking.offer(found);
                    tally.scored += 1;
                }
                None => tally.pruned += 1,
            }
            self.grow(order, path, ranking, tally, scorings);
            path.pop();
        }
    }

    /// Beam search: keep the `beam_width` best sets of each size, extend each by one pair.
    /// Stops between sets and levels when `keeper` says so (nothing of a beam is kept).
    fn beam(
        &self,
        singles: &[Found],
        observer: &dyn Observer,
        keeper: &dyn Keeper,
    ) -> Result<(Ranking, Vec<BranchTally>), SearchError> {
        let mut ranking = Ranking::new(self.settings.top);
        singles.iter().for_each(|s| ranking.offer(s.clone()));
        let mut level: Vec<Found> = singles.to_vec();
        let mut tallies = Vec::new();
        observer.start(self.k().saturating_sub(1) as u64, "beam levels");
        for size in 2..=self.k() {
            level.sort_by(Found::ranks_before);
            level.truncate(self.settings.beam_width);
            let mut children = std::collections::BTreeSet::new();
            for parent in &level {
                for i in 0..self.candidates.len() {
                    if !parent.set.contains(&i) {
                        let mut set = parent.set.clone();
                        set.push(i);
                        set.sort_unstable();
                        children.insert(set);
                    }
                }
            }
            let scorings = AtomicUsize::new(0);
            let children: Vec<Vec<usize>> = children.into_iter().collect();
            level = children
                .par_iter()
                .filter_map(|set| {
                    if keeper.should_stop() {
                        return None;
                    }
                    self.score(set, f64::NEG_INFINITY, &scorings)
                })
                .collect();
            if keeper.should_stop() {
                observer.finish();
                return Err(SearchError::Interrupted {
                    finished: size - 2,
                    total: self.k() - 1,
                    what: "beam levels",
                });
            }
            level.iter().for_each(|d| ranking.offer(d.clone()));
            tallies.push(BranchTally {
                branch: size,
                scored: level.len() as u64,
                pruned: 0,
                scorings: scorings.load(Ordering::Relaxed) as u64,
            });
            observer.advance(level.len() as u64, ranking.designs[0].power);
        }
        observer.finish();
        Ok((ranking, tallies))
    }
}

/// The capped relaxation of one set: its upper bound (margin included) and optimal rates.
struct Relaxed {
    upper: f64,
    /// `(q+, q-)` per pair of the set.
    rates: Vec<(f64, f64)>,
}

/// A short identity of the network (every number that defines it), so that parts of searches
/// on different models are never merged.
pub fn fingerprint(network: &Network) -> String {
    let mut h: u64 = 0xcbf29ce484222325;
    let mut feed = |x: f64| {
        for byte in x.to_bits().to_le_bytes() {
            h = (h ^ byte as u64).wrapping_mul(0x100000001b3);
        }
    };
    network.energies.iter().for_each(|&e| feed(e));
    for c in &network.channels {
        [
            c.from as f64,
            c.to as f64,
            c.forward,
            c.backward,
            c.work,
            c.drive,
        ]
        .into_iter()
        .for_each(&mut feed);
    }
    format!("{}-states-{:016x}", network.len(), h)
}

/// The final outcome of a search: the ranking over every part, with the totals.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    pub settings: SearchSettings,
    pub candidate_pairs: usize,
    /// Each candidate acts with shared rates on its copies in every environment state.
    pub blind: bool,
    pub strategy: Strategy,
    pub space: u64,
    /// Sets scored (each once).
    pub evaluated: u64,
    pub pruned: u64,
    /// Steady-state evaluations spent.
    pub scorings: u64,
    pub designs: Vec<Found>,
    /// Ranked designs left out because their power is not determined by double precision.
    pub undetermined: u64,
}

/// Whether a verified design's gain over the baseline is larger than the round-off bounds of
/// both powers: otherwise its power says nothing and it must not be ranked.
fn determined_gain(
    baseline: &crate::bound::design::Verified,
    design: &crate::bound::design::Verified,
) -> bool {
    let gain = design.power - baseline.power;
    gain.is_finite() && gain > design.roundoff + baseline.roundoff
}

/// Combines the parts of a sharded search into exactly the outcome of one run.
pub fn merge(parts: Vec<Part>) -> Result<Outcome, SearchError> {
    let Some(first) = parts.first() else {
        return Err(SearchError::Merge("no parts given".into()));
    };
    let count = first.shard.count;
    let mut seen = vec![false; count];
    for part in &parts {
        let same = part.fingerprint == first.fingerprint
            && part.settings == first.settings
            && part.candidates == first.candidates
            && part.shard.count == count;
        if !same {
            return Err(SearchError::Merge(format!(
                "shard {}/{} comes from a different model or search settings than shard {}/{}",
                part.shard.index, part.shard.count, first.shard.index, first.shard.count
            )));
        }
        if part.shard.index >= count {
            return Err(SearchError::Merge(format!(
                "shard {}/{count} does not exist: indices run from 0 to {}",
                part.shard.index,
                count.saturating_sub(1)
            )));
        }
        if std::mem::replace(&mut seen[part.shard.index], true) {
            return Err(SearchError::Merge(format!(
                "shard {}/{count} is given twice",
                part.shard.index
            )));
        }
    }
    if let Some(missing) = seen.iter().position(|s| !s) {
        return Err(SearchError::Merge(format!(
            "shard {missing}/{count} is missing: give all {count} parts"
        )));
    }
    let mut ranking = Ranking::new(first.settings.top);
    let mut branches: Vec<BranchTally> = Vec::new();
    for part in &parts {
        part.designs.iter().for_each(|d| ranking.offer(d.clone()));
        branches.extend(&part.branches);
    }
    // The search's scores pick the kept designs; they are shown in the order of their
    // verified power (the more accurate figure), so a rank never sits above a better design.
    let verified = |d: &Found| d.verified.map_or(d.power, |(power, _)| power);
    ranking
        .designs
        .sort_by(|a, b| verified(b).total_cmp(&verified(a)));
    Ok(Outcome {
        settings: first.settings,
        candidate_pairs: first.candidates.len(),
        blind: first.candidates.iter().any(|c| c.len() > 1),
        strategy: first.strategy,
        space: first.space,
        evaluated: first.singles + branches.iter().map(|b| b.scored).sum::<u64>(),
        pruned: branches.iter().map(|b| b.pruned).sum(),
        scorings: first.single_scorings + branches.iter().map(|b| b.scorings).sum::<u64>(),
        designs: ranking.designs,
        undetermined: parts.iter().map(|p| p.undetermined).sum(),
    })
}
