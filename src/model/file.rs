//! Serde types mirroring the TOML model format, exactly as written in the file.
//!
//! These types exist only at the edge: [`super::parse`] turns them into the validated
//! [`super::Model`]. Every table denies unknown keys so a typo is an error, and every value
//! that validation may complain about keeps its span so the message can name line and column.
//! Nothing here checks meaning (ranges, names, LDB).

use serde::Deserialize;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelFile {
    pub title: Option<String>,
    pub temperature: Option<Spanned<f64>>,
    pub energy_unit: Option<Spanned<String>>,
    pub time_unit: Option<Spanned<String>>,
    pub ldb_tolerance: Option<Spanned<f64>>,
    #[serde(default)]
    pub state: Vec<Spanned<StateEntry>>,
    #[serde(default)]
    pub transition: Vec<Spanned<TransitionEntry>>,
    pub pathways: Option<Spanned<PathwaysEntry>>,
    #[serde(default)]
    pub environment: Vec<Spanned<EnvironmentEntry>>,
    #[serde(default)]
    pub switch: Vec<Spanned<SwitchEntry>>,
}

/// A state of a fluctuating environment (light, dark; fuel present, absent).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnvironmentEntry {
    pub name: Spanned<String>,
}

/// Switching of the environment between two of its states, in both directions.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SwitchEntry {
    pub from: Spanned<String>,
    pub to: Spanned<String>,
    pub forward: Spanned<f64>,
    pub backward: Spanned<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StateEntry {
    pub name: Spanned<String>,
    pub energy: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransitionEntry {
    pub from: Spanned<String>,
    pub to: Spanned<String>,
    pub forward: Spanned<f64>,
    pub backward: Option<Spanned<f64>>,
    pub drive: Option<Spanned<f64>>,
    pub work: Option<Spanned<f64>>,
    pub label: Option<String>,
    /// Environment states in which the transition exists (default: all).
    pub environments: Option<Spanned<Vec<String>>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PathwaysEntry {
    pub pairs: Option<Spanned<PairsEntry>>,
    pub max_pathways: Option<Spanned<i64>>,
    pub rate_cap: Option<Spanned<f64>>,
    pub total_rate: Option<Spanned<f64>>,
    pub work_limit: Option<Spanned<f64>>,
}

/// `pairs = "all"` or `pairs = [["a", "b"], ...]`.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum PairsEntry {
    Keyword(String),
    List(Vec<[String; 2]>),
}
