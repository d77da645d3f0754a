//! Sensitivities of the baseline power and of the universal bound to every parameter of a
//! model (methods, section 10): the log of each transition's rates at fixed affinity, each
//! state energy, each work label, each drive and, where energies are not given in kT, the
//! temperature.
//!
//! The bound's derivative follows the envelope theorem: the bound is the maximum over `p` of
//! `Phi(p; theta)`, so `dPhi*/dtheta = dPhi/dtheta` at the certified optimum `p*` held fixed
//! (no re-optimisation); over restricted pairs the routability multipliers enter
//! ([`routability_lift`]). The power's derivative is the adjoint of the steady state: one
//! transposed solve gives every parameter's. Each derivative carries a stated error (the
//! certificate's gap for the bound, the adjoint's refinement step for the power). Also the
//! derivatives of a given design's power, its added rates held fixed ([`design_power`]). Owns
//! the perturbation of a network by one parameter ([`perturbed`]); it must not print or read
//! files. Derivatives are per kT; the report converts them to the model's units.

use crate::bound::design::Pathway;
use crate::bound::newton::{fitted_multipliers, FITTED_ROWS_LIMIT};
use crate::bound::objective::Objective;
use crate::bound::Bound;
use crate::model::{Channel, Model, Network, PairSelection};
use crate::steady::{self, SolveError, SteadySettings};

/// Kind of a model parameter.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ParameterKind {
    /// `ln k` of a transition: forward and backward rates scaled together (affinity fixed).
    Rate,
    /// Free energy of a state (backward rates of its transitions follow by LDB).
    Energy,
    /// Work label of a transition.
    Work,
    /// Drive of a transition.
    Drive,
    /// Bath temperature (energies in a unit other than kT change their value in kT).
    Temperature,
}

/// One parameter: its kind and index (transition or state; 0 for the temperature).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Parameter {
    pub kind: ParameterKind,
    pub index: usize,
}

/// A derivative and its stated error bound (the certificate's gap for the bound, the adjoint's
/// refinement step for the power).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Derivative {
    pub value: f64,
    pub error: f64,
}

/// Derivatives of one parameter, internal units: powers in kT per time unit, per unit of the
/// parameter in kT (energies, labels), in `ln k` (rates) or in kelvin (temperature).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sensitivity {
    pub parameter: Parameter,
    pub d_power: Derivative,
    pub d_bound: Derivative,
}

/// The parameters of `model`, in the order: rates, energies, work labels, drives, temperature.
pub fn parameters(model: &Model) -> Vec<Parameter> {
    let (c, n) = (model.network.channels.len(), model.network.len());
    let each = |kind, count| (0..count).map(move |index| Parameter { kind, index });
    let mut all: Vec<Parameter> = each(ParameterKind::Rate, c)
        .chain(each(ParameterKind::Energy, n))
        .chain(each(ParameterKind::Work, c))
        .chain(each(ParameterKind::Drive, c))
        .collect();
    if model.units.energy != crate::units::EnergyUnit::KT {
        all.push(Parameter {
            kind: ParameterKind::Temperature,
            index: 0,
        });
    }
    all
}

/// The network with one parameter moved by `h` (kT for energies and labels, `ln k` for rates,
/// kelvin for the temperature at `temperature` K); forward rates are kept and backward rates
/// follow by LDB, except for a rate, where both scale.
pub fn perturbed(network: &Network, p: Parameter, h: f64, temperature: f64) -> Network {
    let mut energies = network.energies.clone();
    let mut labels: Vec<(f64, f64)> = network.channels.iter().map(|c| (c.work, c.drive)).collect();
    match p.kind {
        ParameterKind::Rate => {
            let mut out = network.clone();
            let ch = &mut out.channels[p.index];
            ch.forward *= h.exp();
            ch.backward *= h.exp();
            return out;
        }
        ParameterKind::Energy => energies[p.index] += h,
        ParameterKind::Work => labels[p.index].0 += h,
        ParameterKind::Drive => labels[p.index].1 += h,
        ParameterKind::Temperature => {
            // Energies in J/mol or similar are fixed; their value in kT scales as T0 / T.
            let factor = temperature / (temperature + h);
            energies.iter_mut().for_each(|e| *e *= factor);
            labels.iter_mut().for_each(|(w, d)| {
                *w *= factor;
                *d *= factor;
            });
        }
    }
    let channels = network
        .channels
        .iter()
        .zip(&labels)
        .map(|(c, &(work, drive))| {
            Channel::balanced(&energies, c.from, c.to, c.forward, work, drive)
        })
        .collect();
    Network { energies, channels }
}

/// How one parameter moves the net flux of one channel at a fixed distribution `q`: the
/// derivative of `J_c = f q_from - b q_to` (rates at fixed affinity scale both; a work label,
/// a drive or an energy moves the backward rate by LDB, `b = f exp(-(E_from - E_to + d - w))`).
/// `b_q` is `b q_to`.
fn flux_derivative(kind: ParameterKind, j: f64, b_q: f64, at_from: bool) -> f64 {
    match kind {
        ParameterKind::Rate => j,
        ParameterKind::Work => -b_q,
        ParameterKind::Drive => b_q,
        ParameterKind::Energy if at_from => b_q,
        ParameterKind::Energy => -b_q,
        ParameterKind::Temperature => 0.0,
    }
}

/// The derivative of `F(q) = sum_c J_c (u_c + explicit_c)` with respect to every parameter at
/// fixed `q`, where `u_c` multiplies the flux change and `explicit` says how the channel's own
/// factor moves with the parameter (`d u_c / d theta`); each is returned with a magnitude
/// that an error estimate scales: `sum_c m_c |dJ_c| + |explicit_c| (f_c q_from + b_c q_to)`,
/// where `|dJ_c|` counts a net flux as its one-way parts (a nearly balanced channel's `J`
/// carries the error of its parts, not its own size) and `m_c` is the given magnitude of the
/// weight's error or parts.
#[derive(Clone)]
struct Linearised<'a> {
    network: &'a Network,
    flux: ChannelFluxes,
    /// `u_c`.
    weight: Vec<f64>,
    /// `m_c`: the magnitude that multiplies each channel's flux change.
    magnitude: Vec<f64>,
    /// `J_c d u_c / d w_c`: 1 for the power (u = w) and for the bound (u = w + Delta).
    work_explicit: f64,
    /// `d u_c / d E_from` (and minus it for `E_to`): 0 for the power, -1 for the bound.
    energy_explicit: f64,
}

impl<'a> Linearised<'a> {
    /// The derivative's terms of channel `c` for a parameter of `kind` acting at its `from`
    /// end (or at its `to` end, for an energy): `(value, magnitude)`.
    fn term(&self, kind: ParameterKind, c: usize, at_from: bool) -> (f64, f64) {
        let f = &self.flux;
        let d_j = flux_derivative(kind, f.net[c], f.backward_inflow[c], at_from);
        // `dJ/d ln k = J` is a difference of one-way fluxes; the others are one product.
        let d_j_magnitude = match kind {
            ParameterKind::Rate => f.one_way[c],
            _ => f.backward_inflow[c],
        };
        let explicit = match kind {
            ParameterKind::Work => self.work_explicit,
            ParameterKind::Energy if at_from => self.energy_explicit,
            ParameterKind::Energy => -self.energy_explicit,
            _ => 0.0,
        };
        let value = self.weight[c] * d_j + explicit * f.net[c];
        let magnitude = self.magnitude[c] * d_j_magnitude + explicit.abs() * f.one_way[c];
        (value, magnitude)
    }

    /// Every state energy's derivative `(value, sum of magnitudes)`, in one pass over the
    /// channels (each channel moves the energies at its two ends).
    fn energy_derivatives(&self) -> Vec<(f64, f64)> {
        let mut out = vec![(0.0, 0.0); self.network.len()];
        for (c, ch) in self.network.channels.iter().enumerate() {
            for (state, at_from) in [(ch.from, true), (ch.to, false)] {
                let (t, m) = self.term(ParameterKind::Energy, c, at_from);
                out[state].0 += t;
                out[state].1 += m;
            }
        }
        out
    }

    /// Every parameter's derivative `(value, sum of magnitudes)`, in the order of
    /// [`parameters`]. The temperature derivative is at fixed forward rates: energies and
    /// labels in kT scale as `T0 / T`, so `dF/dT = -sum_x (dF/dx) x / T0` over every energy,
    /// work label and drive.
    fn all(&self, parameters: &[Parameter], temperature: f64) -> Vec<(f64, f64)> {
        let net = self.network;
        let energy = self.energy_derivatives();
        let single = |kind, c: usize| self.term(kind, c, true);
        let of = |p: &Parameter| match p.kind {
            ParameterKind::Energy => energy[p.index],
            ParameterKind::Temperature => {
                let scaled =
                    |(v, m): (f64, f64), x: f64| (-v * x / temperature, m * x.abs() / temperature);
                let energies = (0..net.len()).map(|k| scaled(energy[k], net.energies[k]));
                let labels = net.channels.iter().enumerate().flat_map(|(c, ch)| {
                    [
                        scaled(single(ParameterKind::Work, c), ch.work),
                        scaled(single(ParameterKind::Drive, c), ch.drive),
                    ]
                });
                energies
                    .chain(labels)
                    .fold((0.0, 0.0), |(v, m), (a, b)| (v + a, m + b))
            }
            kind => single(kind, p.index),
        };
        parameters.iter().map(of).collect()
    }
}

/// Each channel's net flux `J_c`, its backward part `b_c q_to` and both one-way parts
/// `f_c q_from + b_c q_to`, at one distribution `q`.
#[derive(Clone)]
struct ChannelFluxes {
    net: Vec<f64>,
    backward_inflow: Vec<f64>,
    one_way: Vec<f64>,
}

impl ChannelFluxes {
    fn at(network: &Network, q: &[f64]) -> Self {
        let channels = &network.channels;
        Self {
            net: channels.iter().map(|c| c.flux(q)).collect(),
            backward_inflow: channels.iter().map(|c| c.backward * q[c.to]).collect(),
            one_way: channels
                .iter()
                .map(|c| c.forward * q[c.from] + c.backward * q[c.to])
                .collect(),
        }
    }
}

/// The adjoint potentials, the refinement step's correction and the solution for the
/// round-off floor of the residual (both error estimates of `lambda`).
struct Adjoint {
    lambda: Vec<f64>,
    correction: Vec<f64>,
    below_floor: Vec<f64>,
}

impl Adjoint {
    /// The error estimate of `lambda_to - lambda_from` for channel `c`.
    fn difference_error(&self, c: &Channel) -> f64 {
        let d = |v: &[f64]| (v[c.to] - v[c.from]).abs();
        d(&self.correction) + d(&self.below_floor)
    }
}

/// The adjoint of the steady state: `lambda` with `R^T lambda = g - (g . p) 1`, `g` the
/// gradient of the power in `p` (`g_k = sum_c w_c (f_c [k = from] - b_c [k = to])`), and
/// `lambda` zero at the most probable state; with one refinement step, whose correction and
/// the solution for the residual's round-off floor are returned as its error estimates. Then `dP/dtheta = sum_c (w_c - lambda_to +
/// lambda_from) dJ_c/dtheta` at fixed `p` (methods, section 10).
fn adjoint(network: &Network, p: &[f64], factors: &steady::Factors) -> Result<Adjoint, SolveError> {
    let n = network.len();
    let mut g = vec![0.0; n];
    for c in &network.channels {
        g[c.from] += c.work * c.forward;
        g[c.to] -= c.work * c.backward;
    }
    let gp: f64 = g.iter().zip(p).map(|(g, p)| g * p).sum();
    let h: Vec<f64> = g.iter().map(|g| g - gp).collect();
    // The sparse steady solve's own factors solve the transposed system; after the dense
    // elimination (at most a few hundred states) a sparse LU of R^T is factored here.
    let own = match factors {
        steady::Factors::Sparse { .. } => None,
        steady::Factors::Gth { .. } => Some(transposed_lu(network, p)?),
    };
    let solve = |rhs: &[f64]| -> Vec<f64> {
        match &own {
            Some((lu, reference)) => solve_reduced(lu, *reference, rhs),
            None => factors.solve_transposed(rhs).unwrap_or_default(),
        }
    };
    let residual = |lambda: &[f64]| -> Vec<f64> {
        let mut r = h.clone();
        for c in &network.channels {
            let d = lambda[c.to] - lambda[c.from];
            r[c.from] -= c.forward * d;
            r[c.to] += c.backward * d;
        }
        r
    };
    let mut lambda = solve(&h);
    let correction = solve(&residual(&lambda));
    if lambda.len() != n || correction.len() != n {
        return Err(SolveError::Unresolved(
            "the adjoint of the steady state could not be solved".into(),
        ));
    }
    lambda
        .iter_mut()
        .zip(&correction)
        .for_each(|(l, d)| *l += d);
    if lambda.iter().any(|l| !l.is_finite()) {
        return Err(SolveError::Unresolved(
            "the adjoint of the steady state is not finite; fix: rescale the rates that span many decades".into(),
        ));
    }
    // The refinement sees only residuals above the round-off of computing them: that floor,
    // `eps` times the magnitudes of each row's terms, carried through one more solve, is the
    // error left below it (measured: on a stiff generated 4-state model the correction alone
    // stated 9.9e-19 where the 50-digit reference differed by 1.4e-18).
    let mut floor: Vec<f64> = h.iter().map(|v| v.abs()).collect();
    for c in &network.channels {
        let d = (lambda[c.to] - lambda[c.from]).abs();
        floor[c.from] += c.forward * d;
        floor[c.to] += c.backward * d;
    }
    floor.iter_mut().for_each(|v| *v *= 4.0 * f64::EPSILON);
    // Like `h`, the right-hand side must be orthogonal to `p` for `R^T x = rhs` to have a
    // solution; without the projection the excess lands at the reference state as a source.
    let floor_p: f64 = floor.iter().zip(p).map(|(f, p)| f * p).sum();
    floor.iter_mut().for_each(|v| *v -= floor_p);
    let mut below_floor = solve(&floor);
    below_floor.resize(n, 0.0);
    Ok(Adjoint {
        lambda,
        correction,
        below_floor,
    })
}

/// The power's derivatives of `network` for `parameters` (indices into its own channels and
/// states), from the steady state and its adjoint (methods, section 10). The error adds the
/// adjoint's (its correction and round-off floor through every term) to the steady state's
/// componentwise accuracy and the round-off of the sums, both on the magnitudes of the parts.
fn power_derivatives(
    network: &Network,
    parameters: &[Parameter],
    temperature: f64,
) -> Result<Vec<Derivative>, SolveError> {
    let (state, factors) = steady::solve_factored(network, &SteadySettings::default())?;
    let p = state.probabilities;
    let adjoint = adjoint(network, &p, &factors)?;
    let lambda = &adjoint.lambda;
    let difference = |v: &[f64], c: &Channel| v[c.to] - v[c.from];
    let fluxes = ChannelFluxes::at(network, &p);
    let power = Linearised {
        network,
        flux: fluxes.clone(),
        weight: network
            .channels
            .iter()
            .map(|c| c.work - difference(lambda, c))
            .collect(),
        magnitude: network
            .channels
            .iter()
            .map(|c| c.work.abs() + lambda[c.to].abs() + lambda[c.from].abs())
            .collect(),
        work_explicit: 1.0,
        energy_explicit: 0.0,
    };
    // The same magnitudes with the refinement correction in place of the weights bound the
    // error the adjoint leaves.
    let corrections: Vec<f64> = network
        .channels
        .iter()
        .map(|c| adjoint.difference_error(c))
        .collect();
    let power_error = Linearised {
        network,
        flux: fluxes,
        magnitude: corrections.clone(),
        weight: corrections,
        work_explicit: 0.0,
        energy_explicit: 0.0,
    };
    // The steady state's own componentwise error moves every one-way flux in proportion.
    let through_fluxes = Linearised {
        magnitude: power.weight.iter().map(|w| w.abs()).collect(),
        ..power.clone()
    };
    let accuracy = steady::probability_accuracy(network.len());
    let eps = 16.0 * f64::EPSILON;
    let magnitudes = through_fluxes.all(parameters, temperature);
    let adjoint_errors = power_error.all(parameters, temperature);
    Ok(power
        .all(parameters, temperature)
        .into_iter()
        .zip(magnitudes.iter().zip(&adjoint_errors))
        .map(
            |((value, parts), (&(_, flux_parts), &(_, adjoint_error)))| Derivative {
                value,
                error: adjoint_error + accuracy * flux_parts + eps * parts,
            },
        )
        .collect())
}

/// The derivative of a design's power (baseline plus `pathways`, the added rates held fixed)
/// with respect to every parameter of `model`, in the order of [`parameters`].
///
/// With the added rates fixed, a state energy moves each added pathway's work label
/// (`w = E_from - E_to - ln(forward / backward)`, zero drive) instead of its backward rate, so
/// an energy's derivative is the joint network's (labels fixed) plus the work derivatives of
/// the pathways at that state (plus for `from`, minus for `to`); the temperature's follows from
/// the corrected energies and the baseline's labels, as in [`Linearised::all`].
pub fn design_power(model: &Model, pathways: &[Pathway]) -> Result<Vec<Derivative>, SolveError> {
    let base = &model.network;
    let mut joint = base.clone();
    joint.channels.extend(pathways.iter().map(|w| w.channel()));
    let t = model.units.temperature;
    let own = parameters(model);
    let added = (0..pathways.len()).map(|e| Parameter {
        kind: ParameterKind::Work,
        index: base.channels.len() + e,
    });
    let asked: Vec<Parameter> = own
        .iter()
        .copied()
        .filter(|p| p.kind != ParameterKind::Temperature)
        .chain(added)
        .collect();
    let derivatives = power_derivatives(&joint, &asked, t)?;
    let derivative = |i: usize| derivatives[i];
    let first_added = asked.len() - pathways.len();
    let mut out: Vec<Derivative> = (0..first_added).map(derivative).collect();
    for (e, w) in pathways.iter().enumerate() {
        let d = derivative(first_added + e);
        for (state, sign) in [(w.from, 1.0), (w.to, -1.0)] {
            if let Some(i) = own
                .iter()
                .position(|p| p.kind == ParameterKind::Energy && p.index == state)
            {
                out[i].value += sign * d.value;
                out[i].error += d.error;
            }
        }
    }
    if own.iter().any(|p| p.kind == ParameterKind::Temperature) {
        // dF/dT = -sum_x (dF/dx) x / T0 over the energies and the baseline's labels (kT).
        let mut temperature = Derivative {
            value: 0.0,
            error: 0.0,
        };
        for (p, d) in own.iter().zip(&out) {
            let x = match p.kind {
                ParameterKind::Energy => base.energies[p.index],
                ParameterKind::Work => base.channels[p.index].work,
                ParameterKind::Drive => base.channels[p.index].drive,
                _ => continue,
            };
            temperature.value -= d.value * x / t;
            temperature.error += d.error * x.abs() / t;
        }
        out.push(temperature);
    }
    if let Some(bad) = out.iter().position(|d| !d.value.is_finite()) {
        return Err(SolveError::Unresolved(format!(
            "the design's derivative with respect to {:?} {} is not finite; fix: rescale the rates that span many decades",
            own[bad].kind, own[bad].index
        )));
    }
    Ok(out)
}

/// A sparse LU of `R^T` with the most probable state's row and column removed (its `lambda`
/// is zero).
fn transposed_lu(
    network: &Network,
    p: &[f64],
) -> Result<(crate::linalg::SparseLu, usize), SolveError> {
    let n = network.len();
    let reference = (0..n).max_by(|&a, &b| p[a].total_cmp(&p[b])).unwrap_or(0);
    let reduced = |k: usize| if k < reference { k } else { k - 1 };
    let mut triplets = Vec::with_capacity(4 * network.channels.len());
    let mut push = |row: usize, col: usize, v: f64| {
        if row != reference && col != reference {
            triplets.push(faer::sparse::Triplet::new(reduced(row), reduced(col), v));
        }
    };
    // Row j of R^T: sum over jumps j -> i of rate (lambda_i - lambda_j).
    for c in &network.channels {
        push(c.from, c.to, c.forward);
        push(c.from, c.from, -c.forward);
        push(c.to, c.from, c.backward);
        push(c.to, c.to, -c.backward);
    }
    Ok((
        crate::linalg::SparseLu::factor(n - 1, &triplets)?,
        reference,
    ))
}

/// `A y = b` for a reduced system without state `reference` (whose `y` is zero).
fn solve_reduced(lu: &crate::linalg::SparseLu, reference: usize, rhs: &[f64]) -> Vec<f64> {
    steady::on_reduced(reference, rhs, |x| lu.solve_in_place(x))
}

/// The routability multiplier of each state's group (zero without restricted pairs, and for
/// the last group, whose row the others imply). With added pathways confined to groups (each
/// environment state, or `--pairs`), the bound is `max Phi(p)` subject to `A(theta) p = 0`
/// (no net flux into a group through the baseline), so by the envelope theorem its derivative
/// is that of the Lagrangian `Phi + mu . A p` at the optimum: every channel crossing from group
/// `a` to group `b` weighs its flux change by `mu_b - mu_a` besides its `Phi` weight (methods,
/// section 10). `mu` is the certificate's levellest fit of `g + A^T mu = const`.
fn routability_lift(
    network: &Network,
    bound: &Bound,
    pairs: &PairSelection,
) -> Result<Vec<f64>, SolveError> {
    let objective = Objective::new(network);
    let constraints = crate::bound::routability(&objective, pairs);
    if constraints.rows.is_empty() {
        return Ok(vec![0.0; network.len()]);
    }
    let g = objective.gradient(&bound.log_p);
    let mu = fitted_multipliers(&constraints, &g).ok_or_else(|| {
        SolveError::NotDetermined(format!(
            "the bound's sensitivities need the multipliers of its {} routability rows, which could not be fitted (more than {FITTED_ROWS_LIMIT} rows, or not finite); fix: list pairs in the model's [pathways] table that join its states into fewer groups",
            constraints.rows.len()
        ))
    })?;
    Ok(constraints
        .group_of
        .iter()
        .map(|&g| mu.get(g).copied().unwrap_or(0.0))
        .collect())
}

/// Every parameter's derivatives of the baseline power (adjoint of the steady state: one
/// transposed solve for all parameters) and of the certified bound `bound` (envelope theorem:
/// the explicit derivative of `Phi` at `p*`, one pass over the channels per parameter).
/// Errors (methods, section 10): the adjoint's and the steady state's carried through the
/// one-way fluxes, and for the bound the first-order effect of `p*` being located only to the
/// certified gap or `Phi`'s round-off, each plus round-off of the sums.
pub fn analyse(
    model: &Model,
    bound: &Bound,
    pairs: &PairSelection,
) -> Result<Vec<Sensitivity>, SolveError> {
    let network = &model.network;
    let t = model.units.temperature;
    let all = parameters(model);
    let powers = power_derivatives(network, &all, t)?;
    let log_p = &bound.log_p;
    let lift = routability_lift(network, bound, pairs)?;
    let e = &network.energies;
    let envelope = Linearised {
        network,
        flux: ChannelFluxes::at(network, &bound.p),
        magnitude: network
            .channels
            .iter()
            .map(|c| {
                c.work.abs()
                    + log_p[c.to].abs()
                    + e[c.to].abs()
                    + log_p[c.from].abs()
                    + e[c.from].abs()
                    + lift[c.to].abs()
                    + lift[c.from].abs()
            })
            .collect(),
        weight: network
            .channels
            .iter()
            .map(|c| {
                c.work + log_p[c.to] + network.energies[c.to]
                    - log_p[c.from]
                    - network.energies[c.from]
                    + lift[c.to]
                    - lift[c.from]
            })
            .collect(),
        work_explicit: 1.0,
        energy_explicit: -1.0,
    };
    // The optimum is located only as well as `Phi` is resolved there: by the certified gap or,
    // where larger, by the round-off of `Phi` itself (both relative to the bound).
    let resolved = bound.roundoff / bound.power.abs().max(f64::MIN_POSITIVE);
    let gap = bound.relative_gap().max(resolved).sqrt();
    let eps = 16.0 * f64::EPSILON;
    let bounds = envelope.all(&all, t);
    // Where `p*` is optimal only to the gap, each `ln p` and each multiplier in a weight is
    // off by about `sqrt(gap)`, whatever the weight's own size, and each one-way flux by that
    // fraction of itself: four such shifts per channel besides the weight's own magnitude.
    let optimality = Linearised {
        magnitude: envelope.weight.iter().map(|w| w.abs() + 4.0).collect(),
        ..envelope.clone()
    }
    .all(&all, t);
    all.iter()
        .zip(powers.iter().zip(bounds.iter().zip(&optimality)))
        .map(|(&parameter, (&d_power, (&(db, db_parts), &(_, db_terms))))| {
            let d_bound = Derivative {
                value: db,
                error: gap * db_terms + eps * db_parts,
            };
            if d_power.value.is_finite() && d_bound.value.is_finite() {
                Ok(Sensitivity {
                    parameter,
                    d_power,
                    d_bound,
                })
            } else {
                Err(SolveError::Unresolved(format!(
                    "the derivative with respect to {:?} {} is not finite; fix: rescale the rates that span many decades",
                    parameter.kind, parameter.index
                )))
            }
        })
        .collect()
}
