//! The universal bound on harvesting power under added pathways, its certificate, and the
//! designs that attain it (methods, sections 3 to 5).
//!
//! Owns: the routability constraints of a pair restriction, the solve of `Phi* = max Phi(p)`
//! (log-domain Newton from the baseline steady state, with Clarabel's exponential-cone program
//! polished by Newton as the fallback when that is not tight), the certified upper value and
//! its acceptance limit, the benefit/cost split,
//! and (in [`design`]) the attaining tree design, its speed table and the rate-capped design.
//! All quantities are in kT and the model's time unit. No I/O, no printing.

pub mod capped;
pub mod closed_form;
pub mod conic;
pub mod design;
pub mod newton;
pub mod objective;

use crate::model::{components, Network, PairSelection};
use crate::steady::{self, SolveError, SteadySettings};
use newton::{Certified, Constraints, NewtonSettings};
use objective::Objective;

/// Largest relative gap (certified upper minus attained value, over the larger of the value
/// and the headroom) accepted as a bound; beyond it the solve is an error, never a number.
/// Every report prints the gap itself; this limit only turns a failed solve (measured: 0.92 on
/// a photoswitch restricted to one pair, where Newton stalls at the baseline) into an error.
/// Stiff but solved networks reach gaps of a few 1e-6 (rates spanning 1e-8..1e11).
pub const CERTIFIED_GAP: f64 = 1e-3;

/// Settings of the bound solve.
#[derive(Debug, Clone, Copy)]
pub struct BoundSettings {
    pub newton: NewtonSettings,
    /// Skip the conic solver and run Newton from the baseline steady state only.
    pub newton_only: bool,
    /// Start with the conic program (then Newton from the baseline if that is not tight);
    /// by default Newton runs first and the conic program only when Newton is not tight.
    pub conic_first: bool,
    /// Largest network given to the conic solver (fallback or cross-check). Default 3000:
    /// measured on 2 cores, the conic program costs about 1 s at 3000 banded states but more
    /// than 6 minutes at 10^4, where Newton alone certifies in 2 s.
    pub conic_limit: usize,
}

impl Default for BoundSettings {
    fn default() -> Self {
        Self {
            newton: NewtonSettings::default(),
            newton_only: false,
            conic_first: false,
            conic_limit: 3000,
        }
    }
}

/// The certified bound of one network.
#[derive(Debug, Clone)]
pub struct Bound {
    /// Baseline steady state `pi`.
    pub baseline: Vec<f64>,
    /// `W(pi)`, from the steady-state observables, and its round-off bound.
    pub baseline_power: f64,
    pub baseline_roundoff: f64,
    /// Maximiser `p*` (every component > 0) and its logarithm.
    pub p: Vec<f64>,
    pub log_p: Vec<f64>,
    /// `Phi(p*)`: attained in the fast limit by the tree design.
    pub power: f64,
    /// Proven upper bound on `Phi*`, round-off included.
    pub certified_upper: f64,
    /// Round-off allowance of `power` (already added to `certified_upper`).
    pub roundoff: f64,
    /// `B(p*)` and `kT sigma_na(p*)`.
    pub benefit: f64,
    pub maintenance: f64,
    /// How the maximiser was found (for reports).
    pub route: &'static str,
    /// Newton steps of the final solve, and the symbolic analyses they needed.
    pub newton_steps: usize,
    pub symbolic_analyses: usize,
    /// Newton systems of the final solve that conjugate gradients solved.
    pub iterative_solves: usize,
}

impl Bound {
    pub fn headroom(&self) -> f64 {
        self.power - self.baseline_power
    }

    /// The optimisation's own gap, `(certified_upper - roundoff - power) / max(|power|,
    /// |headroom|)`; 0 when both vanish. The round-off allowance is reported beside it.
    pub fn relative_gap(&self) -> f64 {
        let scale = self.power.abs().max(self.headroom().abs());
        if scale > 0.0 {
            (self.certified_upper - self.roundoff - self.power).max(0.0) / scale
        } else {
            0.0
        }
    }
}

/// Rows `sum_{i in G} (R p)_i = 0` for every connected group `G` of (states, allowed pairs)
/// but one (their sum is identically zero). Empty for `PairSelection::All`.
pub fn routability(objective: &Objective, pairs: &PairSelection) -> Constraints {
    let PairSelection::Only(list) = pairs else {
        return Constraints::default();
    };
    let groups = components(objective.n, list.iter().copied());
    let mut group_of = vec![0; objective.n];
    for (g, members) in groups.iter().enumerate() {
        for &i in members {
            group_of[i] = g;
        }
    }
    let mut rows: Vec<std::collections::BTreeMap<usize, f64>> =
        vec![Default::default(); groups.len()];
    for jump in &objective.jumps {
        let (gs, gt) = (group_of[jump.source], group_of[jump.target]);
        if gs != gt {
            *rows[gt].entry(jump.source).or_insert(0.0) += jump.rate;
            *rows[gs].entry(jump.source).or_insert(0.0) -= jump.rate;
        }
    }
    rows.pop();
    Constraints {
        rows: rows.into_iter().map(|r| r.into_iter().collect()).collect(),
        group_of,
        groups: groups.len(),
    }
}

/// A bound counts as zero to round-off only while its round-off stays below this share of the
/// network's one-way traffic `sum r p` (k_B T per time unit of entropy-like terms): the running
/// error estimates are about `1e-14` of it on networks whose rates span a few decades.
pub const ZERO_BOUND_TRAFFIC_SHARE: f64 = 1e-6;

/// The refusal of a bound whose relative gap, round-off included, exceeds [`CERTIFIED_GAP`]:
/// says whether round-off or the optimisation left the gap, and what to try.
fn uncertified(
    network: &Network,
    certified: &Certified,
    gap: f64,
    roundoff: f64,
    scale: f64,
) -> SolveError {
    let (slowest, fastest) = (
        network
            .channels
            .iter()
            .map(|c| c.forward.min(c.backward))
            .fold(f64::INFINITY, f64::min),
        network.max_rate(),
    );
    let relative = gap / scale.max(f64::MIN_POSITIVE);
    if !roundoff.is_finite() {
        SolveError::NotDetermined(format!(
            "the round-off allowance of the best value found, {:.6e}, leaves the double range (a gradient term beyond 1e308: rates, probabilities or labels of extreme size, here rates from {slowest:.1e} to {fastest:.1e} per time unit); fix: rescale the time or energy unit so that rates and work labels sit nearer 1, or restrict the added pathways with --pairs",
            certified.value
        ))
    } else if roundoff >= 0.5 * gap {
        let relative = relative.max(roundoff / scale.max(f64::MIN_POSITIVE));
        SolveError::NotDetermined(format!(
            "the best value found, {:.6e}, carries a round-off of +- {roundoff:.1e} (relative {relative:.1e}, more than {CERTIFIED_GAP:.0e}) because the network's rates span {slowest:.1e} to {fastest:.1e} per time unit; fix: merge states that are in fast equilibrium with a neighbour, remove channels far slower than the rest, or restrict the added pathways with --pairs",
            certified.value
        ))
    } else {
        SolveError::Uncertified(format!(
            "the best value found, {:.6e}, is proven only to within {gap:.1e} (relative gap {relative:.1e}, more than {CERTIFIED_GAP:.0e}); the network's rates span {slowest:.1e} to {fastest:.1e} per time unit, too stiff for the solver from this start; fix: restrict the added pathways with --pairs, or merge states that are in fast equilibrium with a neighbour",
            certified.value
        ))
    }
}

/// Solves and certifies the bound for added pathways restricted to `pairs`.
pub fn solve(
    network: &Network,
    pairs: &PairSelection,
    settings: &BoundSettings,
) -> Result<Bound, SolveError> {
    let objective = Objective::new(network);
    let constraints = routability(&objective, pairs);
    let baseline = steady::solve(network, &SteadySettings::default())?.probabilities;
    let log_baseline: Vec<f64> = baseline.iter().map(|p| p.ln()).collect();
    let mut best: Option<(Certified, &'static str)> = None;
    let mut conic_error = None;
    let tight = |c: &Certified| c.upper - c.value <= 1e-10 * c.value.abs().max(1e-300);
    let keep_better = |best: &mut Option<(Certified, &'static str)>, next: Certified, route| {
        if best
            .as_ref()
            .is_none_or(|(c, _)| next.upper - next.value < c.upper - c.value)
        {
            *best = Some((next, route));
        }
    };
    let conic_allowed = !settings.newton_only && network.len() <= settings.conic_limit;
    let mut run_conic = |best: &mut Option<(Certified, &'static str)>| match conic::universal(
        &objective,
        &constraints,
    ) {
        Ok(p) => {
            let start: Vec<f64> = p.iter().map(|x| x.max(1e-300).ln()).collect();
            let polished = newton::maximise(&objective, &constraints, &start, &settings.newton);
            keep_better(best, polished, "conic program (Clarabel), Newton polish");
        }
        Err(e) => conic_error = Some(e),
    };
    // Newton from the baseline (always feasible) certifies most networks in a few sparse
    // factorisations; the conic program is the fallback, or the first route when asked (as a
    // cross-check).
    if settings.conic_first && conic_allowed {
        run_conic(&mut best);
    }
    if best.as_ref().is_none_or(|(c, _)| !tight(c)) {
        let from_baseline =
            newton::maximise(&objective, &constraints, &log_baseline, &settings.newton);
        keep_better(
            &mut best,
            from_baseline,
            "Newton from the baseline steady state",
        );
    }
    if !settings.conic_first && conic_allowed && best.as_ref().is_none_or(|(c, _)| !tight(c)) {
        run_conic(&mut best);
    }
    let Some((certified, route)) = best else {
        return Err(conic_error.unwrap_or_else(|| {
            SolveError::Uncertified("no route to the bound was allowed to run".into())
        }));
    };
    if !(certified.value.is_finite() && certified.upper.is_finite()) {
        return Err(conic_error
            .unwrap_or_else(|| SolveError::Uncertified("the bound came out non-finite".into())));
    }
    let scale = certified
        .value
        .abs()
        .max((certified.value - objective.work(&baseline)).abs());
    // Round-off allowance of Phi's value and of the certificate `max g - g.p`: each estimate is
    // epsilon times the size of the terms, and the factor 10 covers the accumulation over the
    // terms of a sum and the error of each term (common practice for running error estimates;
    // the exact-arithmetic tests check it). It is added to the printed certified upper value,
    // so that the certificate holds including round-off; the relative gap measures the
    // optimisation alone.
    let (p, log_p) = (&certified.p, &certified.log_p);
    let roundoff = 10.0
        * (objective.value_roundoff(p, log_p)
            + objective.flux_roundoff(p, log_p)
            + objective.gradient_roundoff(log_p));
    let certified_upper = certified.upper + roundoff;
    let gap = certified.upper - certified.value;
    // A bound that is zero to round-off (no work labels, or none the optimum can use) is a true
    // statement, `Phi* <= certified_upper`, and is reported as not determined; any other bound
    // must meet the relative gap, whatever its round-off. "Zero" is judged against the
    // network's own traffic: a round-off far above it (a 4-state ring with energy steps of
    // 480 kT has rates of 1e208 and a round-off of 6e202 kT/s beside a bound of 0.2) is not
    // a zero bound but one that double precision cannot determine.
    let traffic: f64 = objective.jumps.iter().map(|j| j.rate * p[j.source]).sum();
    let zero_to_roundoff = roundoff.is_finite()
        && scale <= roundoff
        && gap <= roundoff
        && roundoff <= ZERO_BOUND_TRAFFIC_SHARE * traffic;
    let swamped = scale <= roundoff && !zero_to_roundoff;
    if !certified_upper.is_finite() || swamped || (gap > CERTIFIED_GAP * scale && !zero_to_roundoff)
    {
        return Err(uncertified(network, &certified, gap, roundoff, scale));
    }
    // The baseline network is itself a design (no pathway added), so a sound certificate can
    // never fall below its power; the baseline's power is taken from the steady-state observables
    // (fluxes from conservation, a stated round-off) rather than from Phi's terms.
    let observed = crate::steady::observe(network, &baseline);
    if certified_upper < observed.power - observed.power_roundoff {
        return Err(SolveError::Uncertified(format!(
            "the certified upper value {certified_upper:.6e} fell below the baseline's own power {:.6e} (+- {:.1e}): round-off dominates this network's bound program, so no value is given; fix: rescale the rates or energies that span many decades, or restrict the added pathways with --pairs",
            observed.power, observed.power_roundoff
        )));
    }
    let (benefit, maintenance) = objective.split(&certified.p, &certified.log_p, &log_baseline);
    Ok(Bound {
        baseline_power: observed.power,
        baseline_roundoff: observed.power_roundoff,
        baseline,
        power: certified.value,
        certified_upper,
        roundoff,
        benefit,
        maintenance,
        p: certified.p,
        log_p: certified.log_p,
        route,
        newton_steps: certified.steps,
        symbolic_analyses: certified.analyses,
        iterative_solves: certified.iterative_solves,
    })
}
