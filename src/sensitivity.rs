//! Sensitivities of the baseline power and of the universal bound to every parameter of a
//! model (methods, section 10): the log of each transition's rates at fixed affinity, each
//! state energy, each work label, each drive and, where energies are not given in kT, the
//! temperature.
//!
//! The bound's derivative follows the envelope theorem: the bound is the maximum over `p` of
//! `Phi(p; theta)`, so `dPhi*/dtheta = dPhi/dtheta` at the certified optimum `p*` held fixed
//! (no re-optimisation). The power's derivative differentiates the steady state. Both are
//! central differences with a Richardson step (`h` and `h/2`), whose difference is the stated
//! error estimate; a derivative whose estimate exceeds 1% of it is reported as such by the
//! report. Owns the perturbation of a network by one parameter; it must not print or read
//! files.

use crate::bound::objective::Objective;
use crate::bound::Bound;
use crate::model::{Channel, Model, Network};
use crate::steady::{self, SolveError, SteadySettings};
use rayon::prelude::*;

/// Kind of a model parameter.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
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

/// A derivative and its error estimate (the Richardson difference).
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

/// Largest network analysed: each parameter costs four steady-state solves.
pub const SENSITIVITY_LIMIT: usize = 400;

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

/// Central difference of `f` at step `h` and `h/2`: the Richardson value and the difference
/// of the two as its error estimate; `None` when `f` fails at a step.
fn differentiate(f: impl Fn(f64) -> Option<f64>, h: f64) -> Option<Derivative> {
    let central = |h: f64| Some((f(h)? - f(-h)?) / (2.0 * h));
    let (coarse, fine) = (central(h)?, central(h / 2.0)?);
    let value = (4.0 * fine - coarse) / 3.0;
    value.is_finite().then(|| Derivative {
        value,
        error: (fine - coarse).abs(),
    })
}

/// Step of each kind: 1e-3 in `ln k` or kT (small against every rate and label scale that the
/// curvature could have, large against round-off), 1e-3 of the temperature.
fn step(kind: ParameterKind, temperature: f64) -> f64 {
    match kind {
        ParameterKind::Temperature => 1e-3 * temperature,
        _ => 1e-3,
    }
}

/// Every parameter's derivatives of the baseline power and of the certified bound `bound`.
pub fn analyse(model: &Model, bound: &Bound) -> Result<Vec<Sensitivity>, SolveError> {
    let network = &model.network;
    if network.len() > SENSITIVITY_LIMIT {
        return Err(SolveError::Unresolved(format!(
            "{} states: sensitivities cost four steady-state solves per parameter and are computed up to {SENSITIVITY_LIMIT} states; fix: analyse a reduced model",
            network.len()
        )));
    }
    let t = model.units.temperature;
    let power = |net: &Network| -> Option<f64> {
        let p = steady::solve(net, &SteadySettings::default())
            .ok()?
            .probabilities;
        Some(steady::observe(net, &p).power)
    };
    let envelope = |net: &Network| Objective::new(net).value(&bound.p, &bound.log_p);
    parameters(model)
        .into_par_iter()
        .map(|parameter| {
            let h = step(parameter.kind, t);
            let moved = |x: f64| perturbed(network, parameter, x, t);
            let d_power = differentiate(|x| power(&moved(x)), h);
            let d_bound = differentiate(|x| Some(envelope(&moved(x))), h);
            match (d_power, d_bound) {
                (Some(d_power), Some(d_bound)) => Ok(Sensitivity {
                    parameter,
                    d_power,
                    d_bound,
                }),
                _ => Err(SolveError::Unresolved(format!(
                    "a steady state moved by one parameter ({:?} {}) could not be solved; fix: rescale the rates that span many decades",
                    parameter.kind, parameter.index
                ))),
            }
        })
        .collect()
}
