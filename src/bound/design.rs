//! Explicit Markovian designs: the tree design that attains the bound in the fast limit (methods,
//! section 4), its speed-versus-gap table, the exact rate-capped design (section 5), and
//! the independent verification of any design by a steady-state solve of baseline + added rates.

use super::conic::Candidate;
use super::objective::Objective;
use super::Bound;
use crate::model::{components, Channel, Network, PairSelection};
use crate::steady::{self, SolveError, SteadySettings};

/// Largest model for which the capped design may consider every pair of states.
pub const CAPPED_ALL_PAIRS_LIMIT: usize = 60;

/// Shares of the headroom in the speed table.
pub const SPEED_TABLE_FRACTIONS: [f64; 4] = [0.5, 0.9, 0.99, 0.999];

/// An added pathway: rates and the work it stores per forward jump (kT). Zero drive.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pathway {
    pub from: usize,
    pub to: usize,
    pub forward: f64,
    pub backward: f64,
    pub work: f64,
}

impl Pathway {
    /// The same channel written the other way round (rates swapped, work negated).
    pub fn reversed(self) -> Self {
        Self {
            from: self.to,
            to: self.from,
            forward: self.backward,
            backward: self.forward,
            work: -self.work,
        }
    }

    /// The pathway with rates `forward`, `backward` between `from` and `to`, its work fixed by
    /// LDB with zero drive: `v = E_from - E_to - ln(forward / backward)`.
    pub fn with_rates(
        network: &Network,
        from: usize,
        to: usize,
        forward: f64,
        backward: f64,
    ) -> Self {
        let work = network.energies[from]
            - network.energies[to]
            - crate::model::log_ratio(forward, backward);
        Self {
            from,
            to,
            forward,
            backward,
            work,
        }
    }

    pub fn channel(&self) -> Channel {
        Channel {
            from: self.from,
            to: self.to,
            forward: self.forward,
            backward: self.backward,
            work: self.work,
            drive: 0.0,
        }
    }
}

/// The outcome of verifying a design by an independent steady-state solve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Verified {
    /// Total harvesting power of baseline plus added pathways (kT per time unit).
    pub power: f64,
    /// Round-off bound of `power` ([`steady::observe`]): the cycle fluxes are differences of
    /// one-way fluxes, each known to a relative `8 n eps`, so fast pathways whose cycles carry
    /// work make this large: it is the price of verifying a near-limit design in floating
    /// point.
    pub roundoff: f64,
}

/// Power of the baseline plus `pathways`, from an independent steady-state solve of the joint
/// network, with its round-off bound.
pub fn verify(network: &Network, pathways: &[Pathway]) -> Result<Verified, SolveError> {
    verify_with_fluxes(network, pathways).map(|(verified, _)| verified)
}

/// [`verify`], with the net flux of each added pathway (from `from` to `to`) at the joint
/// steady state.
fn verify_with_fluxes(
    network: &Network,
    pathways: &[Pathway],
) -> Result<(Verified, Vec<f64>), SolveError> {
    let extra: Vec<Channel> = pathways.iter().map(Pathway::channel).collect();
    let joint = network.with_channels(&extra);
    let p = steady::solve(&joint, &SteadySettings::default())?.probabilities;
    let observed = steady::observe(&joint, &p);
    let fluxes = observed.fluxes[network.channels.len()..].to_vec();
    Ok((
        Verified {
            power: observed.power,
            roundoff: observed.power_roundoff,
        },
        fluxes,
    ))
}

/// `pathways`, each written in the direction of its net flux at the joint steady state, so that
/// reports read "from -> to" as the way the probability goes (rates and work swap with it).
pub fn oriented(network: &Network, pathways: Vec<Pathway>) -> Result<Vec<Pathway>, SolveError> {
    let (_, fluxes) = verify_with_fluxes(network, &pathways)?;
    Ok(orient(pathways, &fluxes))
}

fn orient(pathways: Vec<Pathway>, fluxes: &[f64]) -> Vec<Pathway> {
    pathways
        .into_iter()
        .zip(fluxes)
        .map(|(p, &j)| if j < 0.0 { p.reversed() } else { p })
        .collect()
}

/// A design with the power its construction predicts and the power verified independently.
#[derive(Debug, Clone)]
pub struct VerifiedDesign {
    pub pathways: Vec<Pathway>,
    pub predicted_power: f64,
    pub verified: Verified,
}

impl VerifiedDesign {
    pub fn check(
        network: &Network,
        pathways: Vec<Pathway>,
        predicted_power: f64,
    ) -> Result<Self, SolveError> {
        let (verified, fluxes) = verify_with_fluxes(network, &pathways)?;
        let pathways = orient(pathways, &fluxes);
        Ok(Self {
            pathways,
            predicted_power,
            verified,
        })
    }
}

/// What the speed table measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SpeedBasis {
    /// The exact frontier: the smallest per-pathway rate cap at which some design on the
    /// allowed pairs reaches each share (the capped program's certified upper value, bisected
    /// in the cap; methods, section 11).
    #[default]
    Frontier,
    /// The tree design's own scaling: the largest rate that one design needs, an upper bound
    /// on the frontier (used beyond [`CAPPED_ALL_PAIRS_LIMIT`] states, or where the capped
    /// program fails).
    TreeDesign,
}

/// One entry of the speed table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Speed {
    /// The rate cap (frontier) or largest rate (tree design) that reaches the share.
    Reached(f64),
    /// No cap up to the rate ceiling reaches it.
    NotReached,
    /// The capped program failed on the way: the frontier is not determined here.
    NotDetermined,
}

impl Speed {
    pub fn rate(self) -> Option<f64> {
        match self {
            Speed::Reached(r) => Some(r),
            _ => None,
        }
    }
}

/// The attaining tree design and its speed table.
#[derive(Debug, Clone, Default)]
pub struct Attaining {
    /// The verified design at the target share; `None` without headroom.
    pub design: Option<VerifiedDesign>,
    /// `(share of the headroom, rate cap needed)`.
    pub speeds: Vec<(f64, Speed)>,
    /// What `speeds` and `curve` measure.
    pub basis: SpeedBasis,
    /// `(rate cap, share of the headroom)` along the basis, for plotting.
    pub curve: Vec<(f64, f64)>,
    /// `(largest added rate, share of the headroom)` along the tree design.
    pub tree_curve: Vec<(f64, f64)>,
}

/// The attaining tree design at `target` share of the headroom (verified), and the rate cap
/// needed for each share in `fractions`: the exact frontier up to [`CAPPED_ALL_PAIRS_LIMIT`]
/// states, the tree design's own scaling beyond. Empty when there is no headroom.
pub fn attaining(
    network: &Network,
    bound: &Bound,
    pairs: &PairSelection,
    target: f64,
    fractions: &[f64],
) -> Result<Attaining, SolveError> {
    let headroom = bound.headroom();
    let has_headroom = headroom > 1e-12 * bound.power.abs().max(network.max_rate() * 1e-300);
    if !has_headroom {
        return Ok(Attaining::default());
    }
    let tree = TreeDesign::new(network, bound, pairs);
    let tree_rates: Vec<(f64, Option<f64>)> = fractions
        .iter()
        .map(|&f| {
            (
                f,
                tree.speed_for(network, bound.baseline_power, headroom, f),
            )
        })
        .collect();
    let design = match tree
        .speed_for(network, bound.baseline_power, headroom, target)
        .and_then(|speed| tree.at_speed(network, speed))
    {
        Some((pathways, predicted)) => Some(VerifiedDesign::check(network, pathways, predicted)?),
        None => None,
    };
    let share = |speed: f64| {
        tree.at_speed(network, speed)
            .map(|(_, w)| (w - bound.baseline_power) / headroom)
    };
    let span = (
        tree.speed_for(network, bound.baseline_power, headroom, 0.01),
        tree.speed_for(network, bound.baseline_power, headroom, 0.9999),
    );
    let tree_curve: Vec<(f64, f64)> = match span {
        (Some(lo), Some(hi)) if hi > lo => (0..=60)
            .filter_map(|k| {
                let speed = lo * (hi / lo).powf(k as f64 / 60.0);
                share(speed).map(|f| (speed, f))
            })
            .collect(),
        _ => Vec::new(),
    };
    let frontier = (network.len() <= CAPPED_ALL_PAIRS_LIMIT)
        .then(|| Frontier::new(network, bound, pairs))
        .and_then(|f| f.table(fractions, &tree_rates));
    let (speeds, basis, curve) = match frontier {
        Some((speeds, curve)) => (speeds, SpeedBasis::Frontier, curve),
        None => {
            let speeds = tree_rates
                .iter()
                .map(|&(f, r)| (f, r.map_or(Speed::NotReached, Speed::Reached)))
                .collect();
            (speeds, SpeedBasis::TreeDesign, tree_curve.clone())
        }
    };
    Ok(Attaining {
        design,
        speeds,
        basis,
        curve,
        tree_curve,
    })
}

/// The speed frontier: the capped program's certified share of the headroom as a function of
/// the per-pathway rate cap (non-decreasing in the cap), and its inverse by bisection.
struct Frontier {
    objective: Objective,
    candidates: Vec<Candidate>,
    start: Vec<f64>,
    baseline_power: f64,
    headroom: f64,
    /// No searched design goes above this rate (methods, section 5, rate ceiling).
    ceiling: f64,
    /// The fastest baseline rate: where the bracket starts at most (the tree design's speeds
    /// are often orders of magnitude above the frontier, where the program is stiffer).
    fastest: f64,
}

/// Relative width in the cap to which the frontier's bisection is carried.
const FRONTIER_TOLERANCE: f64 = 1e-6;

impl Frontier {
    fn new(network: &Network, bound: &Bound, pairs: &PairSelection) -> Self {
        Self {
            objective: Objective::new(network),
            candidates: candidates(network.len(), pairs),
            start: bound.baseline.clone(),
            baseline_power: bound.baseline_power,
            headroom: bound.headroom(),
            ceiling: 1e12 * network.max_rate(),
            fastest: network.max_rate(),
        }
    }

    /// Upper bound on the share of the headroom that any design with every added rate at most
    /// `cap` reaches (certified by the capped program), or `None` if that program fails.
    fn share(&self, cap: f64) -> Option<f64> {
        let solution = super::capped::best(&self.objective, &self.candidates, cap, &self.start);
        let upper = solution.ok()?.dual_bound?;
        Some((upper - self.baseline_power) / self.headroom)
    }

    /// The smallest cap whose certified share reaches `fraction`, bracketed from `guess` (a cap
    /// known or expected to reach it); `Ok(None)` if no cap up to the rate ceiling does, `Err`
    /// if the program fails on the way.
    fn smallest_cap(&self, fraction: f64, guess: Option<f64>) -> Result<Option<f64>, ()> {
        let reaches = |cap: f64| self.share(cap).map(|s| s >= fraction).ok_or(());
        let mut hi = guess.unwrap_or(self.ceiling).min(self.ceiling);
        let mut grown = 0;
        while !reaches(hi)? {
            if hi >= self.ceiling || grown > 40 {
                return Ok(None);
            }
            hi = (hi * 16.0).min(self.ceiling);
            grown += 1;
        }
        let mut lo = hi / 16.0;
        let mut shrunk = 0;
        while reaches(lo)? {
            hi = lo;
            lo /= 16.0;
            shrunk += 1;
            if shrunk > 200 {
                return Ok(Some(hi));
            }
        }
        while hi / lo > 1.0 + FRONTIER_TOLERANCE {
            let mid = (lo * hi).sqrt();
            if reaches(mid)? {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        Ok(Some(hi))
    }

    /// The table for `fractions` (bracketed by the tree design's speeds) and a curve of 41
    /// points spanning it; `None` if the capped program fails anywhere.
    #[allow(clippy::type_complexity)]
    fn table(
        &self,
        fractions: &[f64],
        tree_speeds: &[(f64, Option<f64>)],
    ) -> Option<(Vec<(f64, Speed)>, Vec<(f64, f64)>)> {
        let mut speeds = Vec::with_capacity(fractions.len());
        for (&fraction, &(_, guess)) in fractions.iter().zip(tree_speeds) {
            let need = match self.smallest_cap(fraction, guess.map(|g| g.min(self.fastest))) {
                Ok(Some(cap)) => Speed::Reached(cap),
                Ok(None) => Speed::NotReached,
                Err(()) => Speed::NotDetermined,
            };
            speeds.push((fraction, need));
        }
        if speeds.iter().all(|(_, s)| *s == Speed::NotDetermined) {
            return None;
        }
        let reached: Vec<f64> = speeds.iter().filter_map(|(_, s)| s.rate()).collect();
        let (lo, hi) = match (reached.first(), reached.last()) {
            (Some(&lo), Some(&hi)) => (lo / 30.0, hi * 3.0),
            _ => return Some((speeds, Vec::new())),
        };
        // Points where the program fails are left out of the curve, not guessed.
        let curve = crate::numeric::log_spaced(lo, hi, 41)
            .into_iter()
            .filter_map(|cap| self.share(cap).map(|s| (cap, s)))
            .collect();
        Some((speeds, curve))
    }
}

/// Largest network whose all-pairs tree design is a star on the most probable state (one hop
/// from the hub to every state, so each pathway carries only its own state's supply). Beyond
/// it the star makes the verifying factorisation fill in (measured on 2 cores: 10^4 banded
/// states, 17 s for the star design and its verification against 2 s for the bound), and the
/// tree follows the baseline's channels instead, keeping the joint generator's sparsity.
pub const STAR_LIMIT: usize = 1000;

/// States this many e-folds below the most probable one get no pathway: their share of the
/// power is below e^-600, and the verifying steady-state solve could not hold them anyway
/// (doubles end near e^-745). Left to the baseline, such a state settles near the level of
/// the kept states that feed it.
pub const NEGLIGIBLE_DEPTH: f64 = 600.0;

/// Neighbour lists of the undirected graph of `links`.
fn adjacency(n: usize, links: impl Iterator<Item = (usize, usize)>) -> Vec<Vec<usize>> {
    let mut adjacent = vec![Vec::new(); n];
    for (a, b) in links {
        adjacent[a].push(b);
        adjacent[b].push(a);
    }
    adjacent
}

/// Breadth-first tree from `root` over the `kept` states, appended to `order` with parents.
fn breadth_first(
    adjacent: &[Vec<usize>],
    root: usize,
    kept: &[bool],
    parent: &mut [Option<usize>],
    order: &mut Vec<usize>,
) {
    let mut seen: Vec<bool> = kept.iter().map(|k| !k).collect();
    seen[root] = true;
    let mut head = order.len();
    order.push(root);
    while head < order.len() {
        let v = order[head];
        head += 1;
        for &w in &adjacent[v] {
            if !seen[w] {
                seen[w] = true;
                parent[w] = Some(v);
                order.push(w);
            }
        }
    }
}

/// The fewest pathways that hold `p` stationary: a tree over the states that routes the net
/// inflow `s = -(R p)` they must supply. Edge `(a, b, J)`: net flux `J` from `a` to `b`.
#[derive(Debug, Clone)]
pub struct TreeDesign {
    pub edges: Vec<(usize, usize, f64)>,
    p: Vec<f64>,
    /// `Phi(p)`, reached as every rate grows.
    pub limit_power: f64,
}

impl TreeDesign {
    /// Tree for the bound's `p*`: with all pairs allowed, a star on the most probable state up
    /// to [`STAR_LIMIT`] states and beyond it a breadth-first tree along the baseline's own
    /// channels; with a pair restriction, a breadth-first spanning forest of each group of
    /// allowed pairs. States more than [`NEGLIGIBLE_DEPTH`] e-folds below the most probable one
    /// are left out (with the states reached only through them).
    pub fn new(network: &Network, bound: &Bound, pairs: &PairSelection) -> Self {
        let n = network.len();
        let p = &bound.p;
        let inflow_needed: Vec<f64> = Objective::new(network)
            .generator_times(p)
            .iter()
            .map(|x| -x)
            .collect();
        // Groups of connected components are never empty; 0 stands in for the impossible.
        let hub_of = |group: &[usize]| {
            group
                .iter()
                .copied()
                .max_by(|&a, &b| p[a].total_cmp(&p[b]))
                .unwrap_or(0)
        };
        let top = bound
            .log_p
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        let kept: Vec<bool> = bound
            .log_p
            .iter()
            .map(|l| *l >= top - NEGLIGIBLE_DEPTH)
            .collect();
        let mut parent: Vec<Option<usize>> = vec![None; n];
        let mut order = Vec::with_capacity(n);
        match pairs {
            PairSelection::All if n <= STAR_LIMIT => {
                let hub = hub_of(&(0..n).collect::<Vec<_>>());
                order.push(hub);
                for i in (0..n).filter(|&i| i != hub && kept[i]) {
                    parent[i] = Some(hub);
                    order.push(i);
                }
            }
            PairSelection::All => {
                let links = network.channels.iter().map(|c| (c.from, c.to));
                let adjacent = adjacency(n, links);
                let hub = hub_of(&(0..n).collect::<Vec<_>>());
                breadth_first(&adjacent, hub, &kept, &mut parent, &mut order);
            }
            PairSelection::Only(list) => {
                let adjacent = adjacency(n, list.iter().copied());
                for group in components(n, list.iter().copied()) {
                    let root = hub_of(&group);
                    breadth_first(&adjacent, root, &kept, &mut parent, &mut order);
                }
            }
        }
        // Net flux into each subtree, accumulated from the leaves up.
        let mut subtree = inflow_needed;
        let mut edges = Vec::new();
        for &v in order.iter().rev() {
            if let Some(u) = parent[v] {
                edges.push((u, v, subtree[v]));
                subtree[u] += subtree[v];
            }
        }
        edges.reverse();
        Self {
            edges,
            p: p.clone(),
            limit_power: bound.power,
        }
    }

    /// Pathways with every rate at most `speed`, each carrying its net flux with the least loss,
    /// and the predicted power `Phi(p) - sum_e J_e ln(f_e / g_e)`. `None` if `speed` is too slow
    /// to carry some net flux.
    pub fn at_speed(&self, network: &Network, speed: f64) -> Option<(Vec<Pathway>, f64)> {
        let mut pathways = Vec::with_capacity(self.edges.len());
        let mut loss = 0.0;
        for &(a, b, j) in &self.edges {
            // A tiny net flux may be all that holds an improbable state at p*: only an exactly
            // zero flux needs no pathway.
            if j == 0.0 {
                continue;
            }
            let (pa, pb) = (self.p[a], self.p[b]);
            let (f, g) = if j > 0.0 {
                let g = (speed * pb).min(speed * pa - j);
                (g + j, g)
            } else {
                let f = (speed * pa).min(speed * pb + j);
                (f, f - j)
            };
            if !(f > 0.0 && g > 0.0) {
                return None;
            }
            loss += j * (f / g).ln();
            pathways.push(Pathway::with_rates(network, a, b, f / pa, g / pb));
        }
        Some((pathways, self.limit_power - loss))
    }

    /// Smallest speed (largest added rate) at which the design reaches `fraction` of `headroom`
    /// above `baseline_power`, by bisection in log speed.
    pub fn speed_for(
        &self,
        network: &Network,
        baseline_power: f64,
        headroom: f64,
        fraction: f64,
    ) -> Option<f64> {
        let reaches = |speed: f64| {
            self.at_speed(network, speed)
                .is_some_and(|(_, power)| power - baseline_power >= fraction * headroom)
        };
        let mut hi = self
            .edges
            .iter()
            .map(|&(a, b, j)| j.abs() / self.p[a].min(self.p[b]))
            .fold(1e-300, f64::max);
        let mut doublings = 0;
        while !reaches(hi) {
            hi *= 2.0;
            doublings += 1;
            if doublings > 2000 {
                return None;
            }
        }
        let mut lo = hi / 2.0;
        for _ in 0..200 {
            if hi / lo < 1.0 + 1e-10 {
                break;
            }
            let mid = (lo * hi).sqrt();
            if reaches(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        Some(hi)
    }
}

/// Candidate pairs for the capped design: every pair, or the allowed ones.
pub fn candidates(n: usize, pairs: &PairSelection) -> Vec<Candidate> {
    match pairs {
        PairSelection::All => (0..n)
            .flat_map(|a| (a + 1..n).map(move |b| Candidate { a, b }))
            .collect(),
        PairSelection::Only(list) => list.iter().map(|&(a, b)| Candidate { a, b }).collect(),
    }
}

/// The exact best design with every added rate at most `cap` (pathways with negligible net flux
/// dropped), verified.
pub fn capped_design(
    network: &Network,
    pairs: &PairSelection,
    cap: f64,
) -> Result<VerifiedDesign, SolveError> {
    let objective = Objective::new(network);
    let list = candidates(network.len(), pairs);
    let start = steady::solve(network, &SteadySettings::default())?.probabilities;
    let solution = super::capped::best(&objective, &list, cap, &start)?;
    // A pathway whose net flux is negligible beside the busiest one's only adds a detailed-
    // balanced link (an interior-point solution keeps every unused pair strictly inside its
    // caps, with f = g): it is left out.
    let net: Vec<f64> = solution
        .forward_flux
        .iter()
        .zip(&solution.backward_flux)
        .map(|(f, g)| (f - g).abs())
        .collect();
    let busiest = net.iter().copied().fold(0.0, f64::max);
    let mut pathways = Vec::new();
    let mut predicted = objective.value(
        &solution.p,
        &solution
            .p
            .iter()
            .map(|x| x.max(1e-300).ln())
            .collect::<Vec<_>>(),
    );
    for (e, c) in list.iter().enumerate() {
        let (f, g) = (solution.forward_flux[e], solution.backward_flux[e]);
        if net[e] <= 1e-9 * busiest || f <= 0.0 || g <= 0.0 {
            continue;
        }
        predicted -= (f - g) * (f / g).ln();
        let forward = (f / solution.p[c.a]).min(cap);
        let backward = (g / solution.p[c.b]).min(cap);
        pathways.push(Pathway::with_rates(network, c.a, c.b, forward, backward));
    }
    VerifiedDesign::check(network, pathways, predicted)
}
