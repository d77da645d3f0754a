//! The `bench` report: timing tables for the terminal and the same rows as CSV.

use super::csv::{Cell, Csv};
use super::table::{Align, Table};
use crate::bench::{BoundTiming, DesignTiming, SteadyTiming};

/// One table in two forms: aligned text and CSV (CSV keeps full precision, in the one number
/// format of [`super::csv`]).
fn tabulate(
    columns: &[(&str, Align)],
    csv_header: &[&str],
    rows: Vec<(Vec<String>, Vec<Cell>)>,
) -> (String, String) {
    let mut table = Table::new(columns);
    let mut csv = Csv::new(csv_header);
    for (cells, line) in rows {
        table.row(cells);
        csv.row(line);
    }
    (table.render(), csv.finish())
}

/// Peak memory in MB for a table cell (`-` where unknown).
fn megabytes(mb: Option<f64>) -> String {
    mb.map_or("-".into(), |m| format!("{m:.0}"))
}

/// Design-search timing as (text table, CSV).
pub fn design_tables(r: &DesignTiming) -> (String, String) {
    let per_second = |x: u64| x as f64 / r.seconds.max(1e-12);
    let cells = vec![
        r.states.to_string(),
        r.max_pathways.to_string(),
        r.sets.to_string(),
        r.scored.to_string(),
        format!("{:.1}%", 100.0 * r.pruned as f64 / r.sets.max(1) as f64),
        format!("{:.2}", r.seconds),
        format!("{:.0}", per_second(r.sets)),
        format!("{:.0}", per_second(r.evaluations)),
        format!("{:.0}", r.raw_scorings_per_second),
    ];
    let line: Vec<Cell> = vec![
        r.states.into(),
        r.max_pathways.into(),
        r.sets.into(),
        r.scored.into(),
        r.pruned.into(),
        r.evaluations.into(),
        r.seconds.into(),
        per_second(r.evaluations).into(),
        r.raw_scorings_per_second.into(),
    ];
    let columns = [
        ("states", Align::Right),
        ("k", Align::Right),
        ("sets", Align::Right),
        ("optimised", Align::Right),
        ("pruned", Align::Right),
        ("median s", Align::Right),
        ("sets/s", Align::Right),
        ("scorings/s in search", Align::Right),
        ("raw scorings/s", Align::Right),
    ];
    tabulate(
        &columns,
        &[
            "states",
            "max_pathways",
            "sets",
            "optimised",
            "pruned",
            "evaluations",
            "median [s]",
            "scorings_per_second [1/s]",
            "raw_scorings_per_second [1/s]",
        ],
        vec![(cells, line)],
    )
}

/// Steady-state timings as (text table, CSV).
pub fn steady_tables(rows: &[SteadyTiming]) -> (String, String) {
    let rows: Vec<(Vec<String>, Vec<Cell>)> = rows
        .iter()
        .map(|r| {
            let cells = vec![
                r.family.name().into(),
                r.states.to_string(),
                format!("{:.4}", r.seconds),
                r.method.into(),
                format!("{:.1e}", r.relative_residual),
                megabytes(r.peak_mb),
                format!("{:.2}", r.precision_seconds / r.observed_seconds),
            ];
            let line: Vec<Cell> = vec![
                r.family.name().into(),
                r.states.into(),
                r.seconds.into(),
                r.method.into(),
                r.relative_residual.into(),
                r.peak_mb.into(),
                r.observed_seconds.into(),
                r.precision_seconds.into(),
            ];
            (cells, line)
        })
        .collect();
    let columns = [
        ("family", Align::Left),
        ("states", Align::Right),
        ("median s", Align::Right),
        ("method", Align::Left),
        ("residual", Align::Right),
        ("peak MB", Align::Right),
        ("x with precision", Align::Right),
    ];
    tabulate(
        &columns,
        &[
            "family",
            "states",
            "median [s]",
            "method",
            "relative_residual",
            "peak_memory [MB]",
            "observed [s]",
            "with_precision [s]",
        ],
        rows,
    )
}

/// Bound timings as (text table, CSV).
pub fn bound_tables(rows: &[BoundTiming]) -> (String, String) {
    let rows: Vec<(Vec<String>, Vec<Cell>)> = rows
        .iter()
        .map(|r| {
            let cells = vec![
                r.family.name().into(),
                r.states.to_string(),
                r.route.into(),
                format!("{:.4}", r.seconds),
                format!("{:.0}", r.seconds / r.steady_seconds),
                if r.refused.is_some() {
                    "-".into()
                } else {
                    r.newton_steps.to_string()
                },
                if r.refused.is_some() {
                    "refused".into()
                } else {
                    format!("{:.1e}", r.relative_gap)
                },
                r.design_seconds.map_or("-".into(), |s| format!("{s:.4}")),
                megabytes(r.peak_mb),
            ];
            let line: Vec<Cell> = vec![
                r.family.name().into(),
                r.states.into(),
                r.route.into(),
                r.seconds.into(),
                r.steady_seconds.into(),
                r.newton_steps.into(),
                r.relative_gap.into(),
                r.headroom.into(),
                r.design_seconds.into(),
                r.peak_mb.into(),
                r.refused.as_deref().into(),
            ];
            (cells, line)
        })
        .collect();
    let columns = [
        ("family", Align::Left),
        ("states", Align::Right),
        ("route", Align::Left),
        ("median s", Align::Right),
        ("x steady", Align::Right),
        ("Newton steps", Align::Right),
        ("rel. gap", Align::Right),
        ("design+verify s", Align::Right),
        ("peak MB", Align::Right),
    ];
    tabulate(
        &columns,
        &[
            "family",
            "states",
            "route",
            "median [s]",
            "steady [s]",
            "newton_steps",
            "relative_gap",
            "headroom [kT]",
            "design [s]",
            "peak_memory [MB]",
            "refused",
        ],
        rows,
    )
}

/// The reasons of the bound rows that were refused, one line each (empty if none).
pub fn refusals(rows: &[BoundTiming]) -> String {
    rows.iter()
        .filter_map(|r| {
            r.refused.as_ref().map(|reason| {
                format!(
                    "  {} {} ({}): {reason}\n",
                    r.family.name(),
                    r.states,
                    r.route
                )
            })
        })
        .collect()
}
