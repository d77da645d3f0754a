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
pub mod design;
pub mod output;
pub mod regimes;
pub mod steady;
pub mod summary;
pub mod svg;
pub mod sweep;
pub mod table;

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
}

pub fn named_distribution(model: &Model, p: &[f64]) -> Vec<StateProbability> {
    model
        .state_names
        .iter()
        .zip(p)
        .map(|(name, &probability)| StateProbability {
            name: name.clone(),
            probability,
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

/// Escapes one CSV field (RFC 4180).
pub fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}
