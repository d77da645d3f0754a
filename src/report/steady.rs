//! The `steady` report: stationary distribution, per-transition fluxes and the power budget.

use super::precision::{PrecisionJson, PRECISION_CAUTION};
use super::table::wrap;
use super::table::{bounded, num, percent, sci, Align, Table};
use super::{named_distribution, transition_name, StateProbability, UnitsJson};
use crate::fluctuation::Precision;
use crate::model::Model;
use crate::steady::{Observables, SteadyState};
use serde::Serialize;

/// Everything the steady report shows, in the model's units.
#[derive(Debug, Clone, Serialize)]
pub struct SteadyReport {
    pub title: String,
    pub units: UnitsJson,
    pub method: &'static str,
    pub relative_residual: f64,
    pub states: Vec<StateProbability>,
    pub transitions: Vec<TransitionFlux>,
    pub power: f64,
    /// Round-off bound of `power` (same unit): a figure it exceeds 1% of is not determined.
    pub power_roundoff: f64,
    pub drive_power: f64,
    pub drive_power_roundoff: f64,
    /// In units of k_B per time unit.
    pub entropy_production: f64,
    pub efficiency: Option<f64>,
    pub power_watts_per_molecule: f64,
    /// Relative error of `drive power - power = kT * entropy production`.
    pub free_energy_balance_error: f64,
    /// Fluctuations of the work current (methods, section 12).
    pub precision: PrecisionJson,
    /// The independent cycles with their affinities and cycle fluxes.
    pub cycles: Vec<super::cycles::CycleJson>,
    pub cautions: Vec<crate::model::Caution>,
}

#[derive(Debug, Clone, Serialize)]
pub struct TransitionFlux {
    pub from: String,
    pub to: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    pub flux: f64,
    pub flux_roundoff: f64,
    pub work_rate: f64,
    pub drive_rate: f64,
}

impl SteadyReport {
    pub fn new(
        model: &Model,
        steady: &SteadyState,
        obs: &Observables,
        precision: &Precision,
        cycles: &[crate::model::cycles::Cycle],
    ) -> Self {
        let u = &model.units;
        let transitions = model
            .network
            .channels
            .iter()
            .enumerate()
            .map(|(c, ch)| TransitionFlux {
                from: model.state_names[ch.from].clone(),
                to: model.state_names[ch.to].clone(),
                label: model.transitions[c].label.clone(),
                flux: obs.fluxes[c],
                flux_roundoff: obs.flux_roundoff[c],
                work_rate: u.from_kt(obs.work_rates[c]),
                drive_rate: u.from_kt(obs.drive_rates[c]),
            })
            .collect();
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            method: steady.method.name(),
            relative_residual: steady.relative_residual,
            states: named_distribution(model, &steady.probabilities),
            transitions,
            power: u.from_kt(obs.power),
            power_roundoff: u.from_kt(obs.power_roundoff),
            drive_power: u.from_kt(obs.drive_power),
            drive_power_roundoff: u.from_kt(obs.drive_power_roundoff),
            entropy_production: obs.entropy_production,
            efficiency: obs.efficiency,
            power_watts_per_molecule: u.watts(obs.power),
            free_energy_balance_error: obs.balance_error,
            precision: PrecisionJson::of(precision, u),
            cycles: super::cycles::cycles_json(
                model,
                cycles,
                Some((&obs.fluxes, &obs.flux_roundoff)),
            ),
            cautions: model.cautions.clone(),
        }
    }

    /// The readable report.
    pub fn text(&self, model: &Model) -> String {
        let t = &self.units.time;
        let mut out = format!(
            "Steady state of {}\n  {} states, solved by {}\n\n",
            self.title,
            self.states.len(),
            self.method
        );
        let mut states = Table::new(&[("state", Align::Left), ("probability", Align::Right)]);
        for s in &self.states {
            states.row(vec![s.name.clone(), sci(s.probability)]);
        }
        out.push_str(&states.render());
        out.push('\n');
        let p = &self.units.power;
        let mut flows = Table::new(&[
            ("transition", Align::Left),
            (&format!("flux /{t}"), Align::Right),
            (&format!("work rate {p}"), Align::Right),
            (&format!("drive rate {p}"), Align::Right),
        ]);
        for (c, tr) in self.transitions.iter().enumerate() {
            flows.row(vec![
                transition_name(model, c),
                bounded(tr.flux, tr.flux_roundoff),
                num(tr.work_rate),
                num(tr.drive_rate),
            ]);
        }
        out.push_str(&flows.render());
        out.push_str(&format!(
            "\n  harvesting power     {} {p}  ({:.4e} W per molecule)\n  drive power          {} {p}\n  entropy production   {} k_B/{t}\n  efficiency           {}\n",
            bounded(self.power, self.power_roundoff),
            self.power_watts_per_molecule,
            bounded(self.drive_power, self.drive_power_roundoff),
            num(self.entropy_production),
            self.efficiency.map_or("n/a (no drive power)".to_string(), percent),
        ));
        out.push_str(&format!(
            "  checks               free-energy balance {:.1e}, residual {:.1e}\n",
            self.free_energy_balance_error, self.relative_residual
        ));
        out.push('\n');
        out.push_str(&super::cycles::cycles_text(model, &self.cycles));
        out.push_str("\nHow steady the harvested power is (fluctuations of the work current):\n");
        out.push_str(&self.precision.lines(&self.units, "  "));
        out.push_str(&wrap(PRECISION_CAUTION, "  ", 78));
        out.push('\n');
        out.push_str(&super::cautions_text(&self.cautions));
        out
    }

    /// The report's tables as CSV: transitions (first), states, cycles.
    pub fn tables(&self, model: &Model) -> Vec<(&'static str, String)> {
        use super::csv::{per, with_unit, Csv};
        let (t, p) = (self.units.time, &self.units.power);
        let mut flows = Csv::new(&[
            "index".to_string(),
            "from".into(),
            "to".into(),
            "label".into(),
            with_unit("flux", &per(t)),
            with_unit("flux_roundoff", &per(t)),
            with_unit("work_rate", p),
            with_unit("drive_rate", p),
        ]);
        for (i, tr) in self.transitions.iter().enumerate() {
            flows.row(vec![
                i.into(),
                (&tr.from).into(),
                (&tr.to).into(),
                tr.label.as_deref().into(),
                tr.flux.into(),
                tr.flux_roundoff.into(),
                tr.work_rate.into(),
                tr.drive_rate.into(),
            ]);
        }
        let mut states = Csv::new(&["state", "probability"]);
        for s in &self.states {
            states.row(vec![(&s.name).into(), s.probability.into()]);
        }
        vec![
            ("transitions", flows.finish()),
            ("states", states.finish()),
            ("cycles", super::cycles::cycles_csv(model, &self.cycles)),
        ]
    }
}
