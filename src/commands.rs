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

/// `ergopath bench`: steady-state timings on the seeded synthetic families; the table is
/// returned and also written to `<out_dir>/steady.csv`.
pub fn bench(sizes: &[usize], runs: usize, out_dir: &Path) -> Result<String, Error> {
    use crate::bench::{time_steady, Family};
    use crate::report::table::{Align, Table};
    if let Some(&bad) = sizes.iter().find(|&&n| n < 4) {
        return Err(Error::Usage(format!(
            "benchmark size {bad} is too small: give sizes of at least 4 states"
        )));
    }
    let rows = time_steady(sizes, &[Family::Banded, Family::RandomChords], runs)?;
    let mut table = Table::new(&[
        ("family", Align::Left),
        ("states", Align::Right),
        ("median s", Align::Right),
        ("method", Align::Left),
        ("residual", Align::Right),
    ]);
    let mut csv = String::from("family,states,median_seconds,method,relative_residual\n");
    for r in &rows {
        table.row(vec![
            r.family.name().into(),
            r.states.to_string(),
            format!("{:.4}", r.seconds),
            r.method.into(),
            format!("{:.1e}", r.relative_residual),
        ]);
        csv.push_str(&format!(
            "{},{},{:e},{},{:e}\n",
            r.family.name(),
            r.states,
            r.seconds,
            r.method,
            r.relative_residual
        ));
    }
    let path = out_dir.join("steady.csv");
    crate::report::output::write_atomic(&path, csv.as_bytes())?;
    Ok(format!(
        "Steady-state solve, median of {runs} runs (2n channels each; random chords only up to {} states)\n\n{}\n  written: {}\n",
        crate::bench::RANDOM_CHORDS_LIMIT,
        table.render(),
        path.display()
    ))
}
