//! Reports: what each command shows, as a readable table, as JSON (`--json`) and as CSV.
//!
//! Owns presentation and the JSON schema of `model-format.md`: it converts internal results
//! (kT, model time unit) back to the model's units and lays them out. It never computes a
//! physical result itself and never prints; it returns strings, and writes files only through
//! [`output::write_atomic`].

pub mod bench;
pub mod bound;
pub mod check;
pub mod compare;
pub mod csv;
pub mod cycles;
pub mod design;
pub mod html;
pub mod layout;
pub mod network;
pub mod output;
pub mod precision;
pub mod regimes;
pub mod sensitivity;
pub mod steady;
pub mod summary;
pub mod svg;
pub mod sweep;
pub mod table;
pub mod uncertainty;

use crate::model::Model;
use serde::Serialize;

/// The unit system of a report, as stated in its JSON.
#[derive(Debug, Clone, Serialize)]
pub struct UnitsJson {
    pub energy: &'static str,
    pub time: &'static str,
    pub power: String,
    pub temperature: f64,
}

impl UnitsJson {
    pub fn of(model: &Model) -> Self {
        Self {
            energy: model.units.energy.name(),
            time: model.units.time.name(),
            power: model.units.power_label(),
            temperature: model.units.temperature,
        }
    }
}

/// `{name, probability}` entries of a distribution.
#[derive(Debug, Clone, Serialize)]
pub struct StateProbability {
    pub name: String,
    pub probability: f64,
    /// `ln probability`, given only where the probability lies below the smallest normal
    /// double (optima of large networks reach e^-1000 and beyond; `probability` is then 0 or
    /// subnormal and this is the number to use).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ln_probability: Option<f64>,
}

impl StateProbability {
    /// The probability in scientific notation, from its logarithm where it underflows.
    pub fn text(&self) -> String {
        match self.ln_probability {
            Some(ln) => sci_from_ln(ln),
            None => table::sci(self.probability),
        }
    }
}

/// `e^ln` in the notation of [`table::sci`], also beyond the double range.
pub fn sci_from_ln(ln: f64) -> String {
    if ln == f64::NEG_INFINITY {
        return table::sci(0.0);
    }
    let decimal = ln / std::f64::consts::LN_10;
    let mut exponent = decimal.floor();
    let mut mantissa = 10f64.powf(decimal - exponent);
    if format!("{mantissa:.5}").starts_with("10") {
        mantissa /= 10.0;
        exponent += 1.0;
    }
    format!("{mantissa:.5}e{exponent}")
}

/// A distribution given by its logarithms (see [`StateProbability::ln_probability`]).
pub fn named_log_distribution(model: &Model, log_p: &[f64]) -> Vec<StateProbability> {
    model
        .state_names
        .iter()
        .zip(log_p)
        .map(|(name, &ln)| {
            let probability = ln.exp();
            StateProbability {
                name: name.clone(),
                probability,
                ln_probability: (probability < f64::MIN_POSITIVE).then_some(ln),
            }
        })
        .collect()
}

pub fn named_distribution(model: &Model, p: &[f64]) -> Vec<StateProbability> {
    model
        .state_names
        .iter()
        .zip(p)
        .map(|(name, &probability)| StateProbability {
            name: name.clone(),
            probability,
            ln_probability: None,
        })
        .collect()
}

/// `from -> to` (with the label when there is one) for transition `c` of the model.
pub fn transition_name(model: &Model, c: usize) -> String {
    let ch = &model.network.channels[c];
    let arrow = format!(
        "{} -> {}",
        model.state_names[ch.from], model.state_names[ch.to]
    );
    match &model.transitions[c].label {
        Some(label) => format!("{arrow} ({label})"),
        None => arrow,
    }
}

/// The cautions block of a text report (empty when there are none).
pub fn cautions_text(cautions: &[crate::model::Caution]) -> String {
    if cautions.is_empty() {
        return String::new();
    }
    let mut out = String::from(
        "\nCautions (common practice, not limits; a real design needs experimental validation):\n",
    );
    for c in cautions {
        let item = table::wrap(&c.message, "    ", 78);
        out.push_str("  - ");
        out.push_str(item.trim_start());
        out.push('\n');
    }
    out
}
