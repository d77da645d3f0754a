//! One entry point per command: load the model, run the stages, build the report.
//!
//! This is the seam between the binary and the library: the binary turns flags into the plain
//! settings below and prints the returned text. Nothing here parses flags, prints or exits.

use crate::model::{Model, ModelError};
use crate::report::output::{to_json, OutputError};
use crate::report::{check::check_text, steady::SteadyReport};
use crate::steady::{self, SolveError, SteadySettings};
use std::path::Path;

/// Errors of a command run, by boundary.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error(transparent)]
    Model(#[from] ModelError),
    /// A flag value that is wrong for this model (e.g. a pair naming a missing state).
    #[error("{0}")]
    Usage(String),
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(transparent)]
    Output(#[from] OutputError),
}

impl Error {
    /// Exit status: 2 for bad input (model or flags), 1 for a failure of the computation.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Model(_) | Error::Usage(_) => 2,
            Error::Solve(_) | Error::Output(_) => 1,
        }
    }
}

/// Output format of a report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Format {
    #[default]
    Text,
    Json,
    Csv,
}

/// `ergopath check`: validate and summarise.
pub fn check(path: &Path) -> Result<String, Error> {
    let model = Model::load(path)?;
    Ok(check_text(&model))
}

/// `ergopath steady`: stationary distribution and power budget.
pub fn steady(path: &Path, format: Format) -> Result<String, Error> {
    let model = Model::load(path)?;
    let state = steady::solve(&model.network, &SteadySettings::default())?;
    let obs = steady::observe(&model.network, &state.probabilities);
    let report = SteadyReport::new(&model, &state, &obs);
    Ok(match format {
        Format::Text => report.text(&model),
        Format::Json => to_json(&report)?,
        Format::Csv => report.csv(),
    })
}
