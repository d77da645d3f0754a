//! The `compare` report: alternative architectures ranked by the best power reachable within a
//! budget (else by the universal bound), with baseline, bound and headroom; as text, JSON, CSV
//! and a bar chart. Models may use different units, so the ranking is in watts per molecule.

use super::design::BudgetJson;
use super::table::{percent, sci, Align, Table};
use super::UnitsJson;
use crate::bound::Bound;
use crate::model::Model;
use crate::search::{Budget, Found};
use serde::Serialize;

/// One architecture. Powers in watts per molecule; `*_model_units` in the model's own units.
#[derive(Debug, Clone, Serialize)]
pub struct CompareRow {
    pub title: String,
    pub file: String,
    pub units: UnitsJson,
    pub baseline_power: f64,
    pub bound: f64,
    pub headroom: f64,
    /// Verified power of the best design within the budget.
    pub best_power: Option<f64>,
    pub best_fraction_of_headroom: Option<f64>,
    pub budget: Option<BudgetJson>,
    pub bound_model_units: f64,
    pub baseline_power_model_units: f64,
}

impl CompareRow {
    pub fn new(model: &Model, bound: &Bound, best: Option<&(Found, Budget)>) -> Self {
        let u = &model.units;
        let best_kt = best.map(|(f, _)| f.verified.map_or(f.power, |v| v.0));
        let headroom = bound.headroom();
        Self {
            title: model.title.clone(),
            file: model.source.display().to_string(),
            units: UnitsJson::of(model),
            baseline_power: u.watts(bound.baseline_power),
            bound: u.watts(bound.power),
            headroom: u.watts(headroom),
            best_power: best_kt.map(|p| u.watts(p)),
            best_fraction_of_headroom: best_kt
                .filter(|_| headroom > 0.0)
                .map(|p| (p - bound.baseline_power) / headroom),
            budget: best.map(|(_, b)| BudgetJson::of(b, model)),
            bound_model_units: u.from_kt(bound.power),
            baseline_power_model_units: u.from_kt(bound.baseline_power),
        }
    }

    fn score(&self) -> f64 {
        self.best_power.unwrap_or(self.bound)
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct CompareReport {
    /// Unit of every power column.
    pub power_unit: &'static str,
    /// Best first: by best power within the budget where there is one, else by the bound.
    pub ranking: Vec<CompareRow>,
}

impl CompareReport {
    pub fn new(mut rows: Vec<CompareRow>) -> Self {
        rows.sort_by(|a, b| b.score().total_cmp(&a.score()));
        Self {
            power_unit: "W per molecule",
            ranking: rows,
        }
    }

    pub fn text(&self) -> String {
        let mut table = Table::new(&[
            ("rank", Align::Right),
            ("model", Align::Left),
            ("file", Align::Left),
            ("baseline W", Align::Right),
            ("bound W", Align::Right),
            ("headroom W", Align::Right),
            ("best in budget W", Align::Right),
            ("share of headroom", Align::Right),
        ]);
        for (i, r) in self.ranking.iter().enumerate() {
            table.row(vec![
                (i + 1).to_string(),
                r.title.clone(),
                r.file.clone(),
                sci(r.baseline_power),
                sci(r.bound),
                sci(r.headroom),
                r.best_power.map_or("-".into(), sci),
                r.best_fraction_of_headroom.map_or("-".into(), percent),
            ]);
        }
        let mut out = String::from("Architectures ranked by the best power within the budget (else by the universal bound), in watts per molecule\n\n");
        out.push_str(&table.render());
        for r in &self.ranking {
            if let Some(b) = &r.budget {
                out.push_str(&format!(
                    "  {} ({}): {}\n",
                    r.title,
                    r.file,
                    b.describe(&r.units)
                ));
            }
        }
        if self.ranking.iter().any(|r| r.budget.is_none()) {
            out.push_str("  '-': no rate budget for that model (give --rate-cap or --total-rate, or set them in [pathways]).\n");
        }
        out
    }

    /// The ranking as CSV: the text's columns, powers in watts per molecule.
    pub fn csv(&self) -> String {
        use super::csv::{with_unit, Csv};
        let mut table = Csv::new(&[
            "rank".to_string(),
            "title".into(),
            "file".into(),
            with_unit("baseline_power", "W"),
            with_unit("bound", "W"),
            with_unit("headroom", "W"),
            with_unit("best_power", "W"),
            "best_fraction_of_headroom".into(),
        ]);
        for (i, r) in self.ranking.iter().enumerate() {
            table.row(vec![
                (i + 1).into(),
                (&r.title).into(),
                (&r.file).into(),
                r.baseline_power.into(),
                r.bound.into(),
                r.headroom.into(),
                r.best_power.into(),
                r.best_fraction_of_headroom.into(),
            ]);
        }
        table.finish()
    }

    pub fn svg(&self) -> String {
        let column = |f: &dyn Fn(&CompareRow) -> Option<f64>| self.ranking.iter().map(f).collect();
        super::svg::Bars {
            title: "Architectures: baseline, best within budget, universal bound".into(),
            value_label: "power (W per molecule)".into(),
            categories: self.ranking.iter().map(|r| r.title.clone()).collect(),
            series: vec![
                ("baseline".into(), column(&|r| Some(r.baseline_power))),
                ("best within budget".into(), column(&|r| r.best_power)),
                ("universal bound".into(), column(&|r| Some(r.bound))),
            ],
        }
        .render()
    }
}
