//! The independent cycles of a model (methods, section 1): each cycle's states, affinity in kT
//! and in the energy unit, work stored and drive drawn per turn, and, with a steady state, its
//! cycle flux. Shared by `check` (no fluxes) and `steady`. Presentation only: the basis comes
//! from [`crate::model::cycles`], the fluxes from the steady state.

use super::table::{bounded, num, Align, Table};
use crate::model::cycles::Cycle;
use crate::model::Model;
use serde::Serialize;

/// One cycle in the model's units.
#[derive(Debug, Clone, Serialize)]
pub struct CycleJson {
    /// States in order, starting where the closing transition leaves.
    pub states: Vec<String>,
    /// Drive minus work per turn, in kT (`sum +-ln(k+/k-)` along the cycle).
    pub affinity_kt: f64,
    /// The same in the model's energy unit.
    pub affinity: f64,
    pub work_per_turn: f64,
    pub drive_per_turn: f64,
    /// Cycle flux (turns per time unit, along `states`): the net flux of the transition that
    /// closes it. `None` in `check`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub flux: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub flux_roundoff: Option<f64>,
}

/// The cycles of `model`, with each chord's net flux and round-off where given.
pub fn cycles_json(
    model: &Model,
    cycles: &[Cycle],
    fluxes: Option<(&[f64], &[f64])>,
) -> Vec<CycleJson> {
    let u = &model.units;
    cycles
        .iter()
        .map(|c| CycleJson {
            states: c
                .states
                .iter()
                .map(|&s| model.state_names[s].clone())
                .collect(),
            affinity_kt: c.affinity(),
            affinity: u.from_kt(c.affinity()),
            work_per_turn: u.from_kt(c.work),
            drive_per_turn: u.from_kt(c.drive),
            flux: fluxes.map(|(f, _)| f[c.chord]),
            flux_roundoff: fluxes.map(|(_, r)| r[c.chord]),
        })
        .collect()
}

/// The cycle table (one row per cycle), with a flux column when the cycles carry fluxes.
pub fn cycles_text(model: &Model, cycles: &[CycleJson]) -> String {
    let count = model.network.cycle_count();
    if cycles.is_empty() && count > 0 {
        return format!(
            "  {count} independent cycles: more than {} are not listed\n",
            crate::model::cycles::LISTED_CYCLES
        );
    }
    if cycles.is_empty() {
        return "  no cycles: a tree network carries no steady current, so it stores no work\n"
            .into();
    }
    let (e, t) = (model.units.energy.name(), model.units.time.name());
    let with_flux = cycles.iter().any(|c| c.flux.is_some());
    let mut columns = vec![
        ("cycle (states in order)".to_string(), Align::Left),
        ("affinity kT".to_string(), Align::Right),
        (format!("affinity {e}"), Align::Right),
        (format!("work/turn {e}"), Align::Right),
    ];
    if with_flux {
        columns.push((format!("cycle flux /{t}"), Align::Right));
    }
    let header: Vec<(&str, Align)> = columns.iter().map(|(n, a)| (n.as_str(), *a)).collect();
    let mut table = Table::new(&header);
    for c in cycles {
        let mut row = vec![
            format!("{} -> {}", c.states.join(" -> "), c.states[0]),
            num(c.affinity_kt),
            num(c.affinity),
            num(c.work_per_turn),
        ];
        if let (Some(f), Some(r)) = (c.flux, c.flux_roundoff) {
            row.push(bounded(f, r));
        }
        table.row(row);
    }
    let mut out = String::from(
        "Independent cycles (a basis from a spanning tree; Hill 1966, Schnakenberg 1976):\n",
    );
    out.push_str(&table.render());
    if with_flux {
        out.push_str("  every transition's net flux is the sum of the fluxes of the cycles through it;\n  entropy production = sum of cycle flux x affinity (kT)\n");
    }
    out
}

/// The cycle table as CSV (the text's columns, the states as one `a -> b -> a` cell; the drive
/// per turn and the flux's round-off bound beside them).
pub fn cycles_csv(model: &Model, cycles: &[CycleJson]) -> String {
    use super::csv::{per, with_unit, Csv};
    let (e, t) = (model.units.energy.name(), model.units.time.name());
    let mut table = Csv::new(&[
        "cycle".to_string(),
        with_unit("affinity_kt", "kT"),
        with_unit("affinity", e),
        with_unit("work_per_turn", e),
        with_unit("drive_per_turn", e),
        with_unit("cycle_flux", &per(t)),
        with_unit("cycle_flux_roundoff", &per(t)),
    ]);
    for c in cycles {
        table.row(vec![
            format!("{} -> {}", c.states.join(" -> "), c.states[0]).into(),
            c.affinity_kt.into(),
            c.affinity.into(),
            c.work_per_turn.into(),
            c.drive_per_turn.into(),
            c.flux.into(),
            c.flux_roundoff.into(),
        ]);
    }
    table.finish()
}
