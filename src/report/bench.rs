//! The `bench` report: timing tables for the terminal and the same rows as CSV.

use super::table::{Align, Table};
use crate::bench::{BoundTiming, SteadyTiming};

/// One table in two forms: aligned text and CSV (CSV keeps full precision).
fn tabulate(
    columns: &[(&str, Align)],
    csv_header: &str,
    rows: &[(Vec<String>, String)],
) -> (String, String) {
    let mut table = Table::new(columns);
    let mut csv = format!("{csv_header}\n");
    for (cells, line) in rows {
        table.row(cells.clone());
        csv.push_str(line);
        csv.push('\n');
    }
    (table.render(), csv)
}

/// Steady-state timings as (text table, CSV).
pub fn steady_tables(rows: &[SteadyTiming]) -> (String, String) {
    let rows: Vec<(Vec<String>, String)> = rows
        .iter()
        .map(|r| {
            let cells = vec![
                r.family.name().into(),
                r.states.to_string(),
                format!("{:.4}", r.seconds),
                r.method.into(),
                format!("{:.1e}", r.relative_residual),
            ];
            let line = format!(
                "{},{},{:e},{},{:e}",
                r.family.name(),
                r.states,
                r.seconds,
                r.method,
                r.relative_residual
            );
            (cells, line)
        })
        .collect();
    let columns = [
        ("family", Align::Left),
        ("states", Align::Right),
        ("median s", Align::Right),
        ("method", Align::Left),
        ("residual", Align::Right),
    ];
    tabulate(
        &columns,
        "family,states,median_seconds,method,relative_residual",
        &rows,
    )
}

/// Bound timings as (text table, CSV).
pub fn bound_tables(rows: &[BoundTiming]) -> (String, String) {
    let rows: Vec<(Vec<String>, String)> = rows
        .iter()
        .map(|r| {
            let cells = vec![
                r.family.name().into(),
                r.states.to_string(),
                r.route.into(),
                format!("{:.4}", r.seconds),
                format!("{:.1e}", r.relative_gap),
            ];
            let line = format!(
                "{},{},{},{:e},{:e},{:e}",
                r.family.name(),
                r.states,
                r.route,
                r.seconds,
                r.relative_gap,
                r.headroom
            );
            (cells, line)
        })
        .collect();
    let columns = [
        ("family", Align::Left),
        ("states", Align::Right),
        ("route", Align::Left),
        ("median s", Align::Right),
        ("rel. gap", Align::Right),
    ];
    tabulate(
        &columns,
        "family,states,route,median_seconds,relative_gap,headroom_kT",
        &rows,
    )
}
