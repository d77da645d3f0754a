//! Plausibility cautions: values that the format accepts but that are often a slip or physically
//! implausible (no temperature given, a temperature that looks like degrees Celsius, rates faster
//! than any thermally activated step, designs far faster than the model's own steps). The
//! thresholds are common practice, not limits. Computes cautions; never prints or refuses.

use super::Network;
use crate::units::{Units, BOLTZMANN, PLANCK};
use serde::Serialize;

/// What a caution is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CautionKind {
    /// The model names no temperature, so the default is used.
    DefaultTemperature,
    /// A temperature outside the range of living matter (possibly degrees Celsius).
    UnusualTemperature,
    /// A rate above kT/h, the fastest a thermally activated step can go.
    FasterThanActivation,
    /// A designed rate orders of magnitude above the model's fastest rate.
    FarFasterThanModel,
}

/// One caution with its explanation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Caution {
    pub kind: CautionKind,
    pub message: String,
}

/// Temperatures (kelvin) outside which a biological or molecular model gets a caution: water is
/// liquid from about 273 to 373 K; the margins are ours.
pub const PLAUSIBLE_TEMPERATURES: (f64, f64) = (200.0, 400.0);

/// A designed rate more than this factor above the model's fastest rate gets a caution.
pub const DESIGN_SPEEDUP: f64 = 1e3;

/// `k_B T / h` per the model's time unit: the prefactor of transition-state theory (Eyring,
/// J. Chem. Phys. 3, 107 (1935)), 6.2e12 per second at 300 K.
pub fn activation_limit(units: &Units) -> f64 {
    BOLTZMANN * units.temperature / PLANCK * units.time.seconds()
}

/// Cautions about a model as written.
pub fn of_model(
    units: &Units,
    temperature_given: bool,
    network: &Network,
    names: &[String],
) -> Vec<Caution> {
    let mut out = Vec::new();
    if !temperature_given {
        out.push(Caution {
            kind: CautionKind::DefaultTemperature,
            message: format!(
                "no temperature given: the default {} K is used for kT{}; add `temperature = ...` (kelvin) to the model",
                units.temperature,
                if units.energy.name() == "kT" { " (it only converts powers to watts here)" } else { " and every energy conversion" }
            ),
        });
    }
    let (low, high) = PLAUSIBLE_TEMPERATURES;
    if temperature_given && !(low..=high).contains(&units.temperature) {
        out.push(Caution {
            kind: CautionKind::UnusualTemperature,
            message: format!(
                "temperature {} K is outside {low}-{high} K: the key is in kelvin (37 degrees Celsius is 310.15 K)",
                units.temperature
            ),
        });
    }
    let limit = activation_limit(units);
    let fastest = network
        .channels
        .iter()
        .flat_map(|c| [(c.forward, c.from, c.to), (c.backward, c.to, c.from)])
        .max_by(|a, b| a.0.total_cmp(&b.0));
    if let Some((rate, from, to)) = fastest.filter(|(rate, _, _)| *rate > limit) {
        let count = network
            .channels
            .iter()
            .flat_map(|c| [c.forward, c.backward])
            .filter(|r| *r > limit)
            .count();
        out.push(Caution {
            kind: CautionKind::FasterThanActivation,
            message: format!(
                "{count} rate{} above kT/h = {limit:.2e} per {} (the fastest a thermally activated step can go, transition-state theory), the largest {rate:.2e} for {} -> {}: check the energies, drives and units of those transitions (implied backward rates included)",
                if count == 1 { " is" } else { "s are" },
                units.time.name(),
                names.get(from).map_or("?", String::as_str),
                names.get(to).map_or("?", String::as_str),
            ),
        });
    }
    out
}

/// Cautions about a design whose largest added rate is `largest_rate`.
pub fn of_design(units: &Units, network: &Network, largest_rate: f64) -> Vec<Caution> {
    let mut out = Vec::new();
    let limit = activation_limit(units);
    let time = units.time.name();
    if largest_rate > limit {
        out.push(Caution {
            kind: CautionKind::FasterThanActivation,
            message: format!(
                "a design needs an added rate of {largest_rate:.2e} per {time}, above kT/h = {limit:.2e} per {time}: no thermally activated catalyst is that fast; read it as a limit, and cap the rates (--rate-cap) for buildable designs"
            ),
        });
    }
    let fastest = network.max_rate();
    if largest_rate > DESIGN_SPEEDUP * fastest {
        out.push(Caution {
            kind: CautionKind::FarFasterThanModel,
            message: format!(
                "a design needs an added rate of {largest_rate:.2e} per {time}, more than {DESIGN_SPEEDUP:.0e} times the model's fastest rate ({fastest:.2e}): such a catalyst is far beyond the machinery the model describes"
            ),
        });
    }
    out
}

/// The model's own cautions followed by those of designs whose largest added rate is
/// `largest_rate`.
pub fn with_designs(model: &super::Model, largest_rate: f64) -> Vec<Caution> {
    let mut cautions = model.cautions.clone();
    cautions.extend(of_design(&model.units, &model.network, largest_rate));
    cautions
}
