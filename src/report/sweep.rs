//! The `sweep` report: the best design found at each value of one budget quantity, beside the
//! capped relaxation (an upper bound at that budget) and the universal bound; as text, JSON,
//! CSV and a chart of power against the budget.

use super::bound::{BoundNumbers, PathwayJson};
use super::design::BudgetJson;
use super::precision::PrecisionJson;
use super::table::{num, percent, wrap, Align, Table};
use super::UnitsJson;
use crate::bound::Bound;
use crate::model::Model;
use crate::search::Found;
use serde::Serialize;

/// One budget value and the best design found there.
#[derive(Debug, Clone, Serialize)]
pub struct SweepPoint {
    pub value: f64,
    /// Verified power of the best design (model units); `None` if nothing was found.
    pub best_power: Option<f64>,
    pub fraction_of_headroom: Option<f64>,
    pub pathways: Vec<PathwayJson>,
    /// Pathway sets scored at this value.
    pub evaluated: u64,
    /// The best design is the one found at a tighter budget (still within this one), because
    /// the search at this value found nothing better.
    pub carried_over: bool,
    /// Capped convex relaxation over all candidate pairs: no design within the budget exceeds
    /// it, whatever the number of pathways.
    pub relaxation: Option<f64>,
    /// Why `relaxation` is missing.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub relaxation_missing: Option<String>,
    /// Fluctuations of the work current with the best design (methods, section 12).
    pub precision: Option<PrecisionJson>,
}

impl SweepPoint {
    pub fn new(
        model: &Model,
        bound: &Bound,
        value: f64,
        best: Option<&Found>,
        carried_over: bool,
        evaluated: u64,
        relaxation: Result<f64, String>,
    ) -> Self {
        let u = &model.units;
        let power = best.map(|f| f.verified.map_or(f.power, |v| v.0));
        let headroom = bound.headroom();
        Self {
            value,
            best_power: power.map(|p| u.from_kt(p)),
            fraction_of_headroom: power
                .filter(|_| headroom > 0.0)
                .map(|p| (p - bound.baseline_power) / headroom),
            pathways: best.map_or_else(Vec::new, |f| {
                f.pathways(&model.network)
                    .iter()
                    .map(|p| PathwayJson::of(p, model))
                    .collect()
            }),
            evaluated,
            carried_over,
            relaxation: relaxation.as_ref().ok().map(|r| u.from_kt(*r)),
            relaxation_missing: relaxation.err(),
            precision: None,
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct SweepReport {
    pub title: String,
    pub units: UnitsJson,
    pub pairs: String,
    /// The budget quantity varied (`rate-cap`, `total-rate`, `max-pathways`, `work-limit`).
    pub over: &'static str,
    /// The budget at the first value (the other limits stay as they are).
    pub budget: BudgetJson,
    pub baseline_power: f64,
    pub bound: BoundNumbers,
    pub points: Vec<SweepPoint>,
}

impl SweepReport {
    /// Why an upper bound at a budget is missing ('-'), one line per reason with its values.
    fn missing_relaxations(&self) -> String {
        let mut reasons: Vec<(&str, Vec<String>)> = Vec::new();
        for pt in &self.points {
            if let Some(why) = pt.relaxation_missing.as_deref() {
                match reasons.iter_mut().find(|(r, _)| *r == why) {
                    Some((_, values)) => values.push(num(pt.value)),
                    None => reasons.push((why, vec![num(pt.value)])),
                }
            }
        }
        reasons
            .iter()
            .map(|(why, values)| {
                let line = format!("'-' (no upper bound) at {}: {why}.", values.join(", "));
                format!("\n{}", wrap(&line, "  ", 78))
            })
            .collect()
    }

    pub fn new(
        model: &Model,
        bound: &Bound,
        pairs: String,
        over: &'static str,
        budget: BudgetJson,
        points: Vec<SweepPoint>,
    ) -> Self {
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            pairs,
            over,
            budget,
            baseline_power: model.units.from_kt(bound.baseline_power),
            bound: BoundNumbers::of(bound, &model.units),
            points,
        }
    }

    fn value_unit(&self) -> String {
        match self.over {
            "rate-cap" | "total-rate" => format!("/{}", self.units.time),
            "work-limit" => self.units.energy.to_string(),
            _ => String::new(),
        }
    }

    pub fn text(&self) -> String {
        let p = &self.units.power;
        let mut out = format!(
            "Budget sweep over {} for {}\n{}\n{}\n  baseline power    {} {p}\n  universal bound   {} {p}\n\n",
            self.over,
            self.title,
            wrap(
                &format!(
                    "budget at the first point: {} ({} varies)",
                    self.budget.describe(&self.units),
                    self.over
                ),
                "  ",
                78
            ),
            wrap(&format!("added pathways on: {}", self.pairs), "  ", 78),
            num(self.baseline_power),
            num(self.bound.power),
        );
        let mut table = Table::new(&[
            (
                &format!("{} {}", self.over, self.value_unit()),
                Align::Right,
            ),
            (&format!("best power {p}"), Align::Right),
            ("share of headroom", Align::Right),
            ("upper bound at budget", Align::Right),
            ("sets scored", Align::Right),
            ("pathways", Align::Left),
        ]);
        for pt in &self.points {
            table.row(vec![
                num(pt.value),
                pt.best_power.map_or("-".into(), num),
                pt.fraction_of_headroom.map_or("-".into(), percent),
                pt.relaxation.map_or("-".into(), num),
                pt.evaluated.to_string(),
                super::bound::pair_names(&pt.pathways, ", ")
                    + if pt.carried_over { " (carried)" } else { "" },
            ]);
        }
        out.push_str(&table.render());
        out.push_str(&wrap("The upper bound at each budget is the rate-capped convex relaxation over all candidate pairs (work and pathway-count limits dropped); (carried) marks a design kept from a tighter budget because the search found nothing better.", "  ", 78));
        out.push_str(&self.missing_relaxations());
        out.push('\n');
        out
    }

    /// The unit of the swept quantity in a CSV header (`None`: a count).
    fn value_csv_unit(&self) -> Option<String> {
        match self.over {
            "rate-cap" | "total-rate" => Some(super::csv::per(self.units.time)),
            "work-limit" => Some(self.units.energy.to_string()),
            _ => None,
        }
    }

    /// The table as CSV: the text's columns (pathways as `a/b` pairs separated by spaces),
    /// whether the design was carried over, and why an upper bound is missing.
    pub fn csv(&self) -> String {
        use super::csv::{with_unit, Csv};
        let p = &self.units.power;
        let name = self.over.replace('-', "_");
        let mut table = Csv::new(&[
            self.value_csv_unit()
                .map_or(name.clone(), |u| with_unit(&name, &u)),
            with_unit("best_power", p),
            "fraction_of_headroom".into(),
            with_unit("upper_bound", p),
            "sets_scored".into(),
            "pathways".into(),
            "carried_over".into(),
            "upper_bound_missing".into(),
        ]);
        for pt in &self.points {
            let names: Vec<String> = pt
                .pathways
                .iter()
                .map(|w| format!("{}/{}", w.from, w.to))
                .collect();
            table.row(vec![
                pt.value.into(),
                pt.best_power.into(),
                pt.fraction_of_headroom.into(),
                pt.relaxation.into(),
                pt.evaluated.into(),
                names.join(" ").into(),
                pt.carried_over.into(),
                pt.relaxation_missing.as_deref().into(),
            ]);
        }
        table.finish()
    }

    /// The frontier table as CSV (the text's columns; the baseline as the first row, its
    /// budget value empty).
    pub fn frontier_csv(&self, baseline: &PrecisionJson) -> String {
        use super::csv::{with_unit, Csv};
        let (p, e) = (&self.units.power, self.units.energy);
        let name = self.over.replace('-', "_");
        let mut table = Csv::new(&[
            "design".to_string(),
            self.value_csv_unit()
                .map_or(name.clone(), |u| with_unit(&name, &u)),
            with_unit("power", p),
            with_unit("fano_factor", e),
            "uncertainty_product".into(),
        ]);
        table.row(vec![
            "baseline".into(),
            super::csv::Cell::Missing,
            self.baseline_power.into(),
            baseline.fano_factor.into(),
            baseline.uncertainty_product.into(),
        ]);
        for pt in &self.points {
            let Some(pr) = &pt.precision else { continue };
            table.row(vec![
                "best".into(),
                pt.value.into(),
                pt.best_power.into(),
                pr.fano_factor.into(),
                pr.uncertainty_product.into(),
            ]);
        }
        table.finish()
    }

    /// Power against the Fano factor of the best design at each budget value (the
    /// power-precision trade-off), with the baseline's own point: a table.
    pub fn frontier_text(&self, baseline: &PrecisionJson) -> String {
        let (p, e) = (&self.units.power, self.units.energy);
        let mut out = format!(
            "Power against precision of the best designs ({} sweep) for {}

",
            self.over, self.title
        );
        let mut table = Table::new(&[
            (
                &format!("{} {}", self.over, self.value_unit()),
                Align::Right,
            ),
            (&format!("power {p}"), Align::Right),
            (&format!("Fano 2D/J {e}"), Align::Right),
            ("uncertainty product Q", Align::Right),
        ]);
        table.row(vec![
            "baseline".into(),
            num(self.baseline_power),
            baseline.fano_text(),
            baseline.product_text(),
        ]);
        for point in &self.points {
            let (Some(power), Some(pr)) = (point.best_power, &point.precision) else {
                continue;
            };
            table.row(vec![
                num(point.value),
                num(power),
                pr.fano_text(),
                pr.product_text(),
            ]);
        }
        out.push_str(&table.render());
        out.push_str(&wrap("A smaller Fano factor is a more regular work current. The designs are the best by power at each budget; the chart shows what regularity that power comes with, not the most regular design the budget allows.", "  ", 78));
        out.push('\n');
        out.push_str(&wrap(super::precision::PRECISION_CAUTION, "  ", 78));
        out.push('\n');
        out
    }

    /// Power against the Fano factor (`|2D/J|`, points with a determined Fano factor only):
    /// the best design at each budget value and the baseline.
    pub fn frontier_svg(&self, baseline: &PrecisionJson) -> Option<String> {
        use super::svg::{Chart, Series};
        let fano = |pr: &PrecisionJson| {
            pr.fano_factor
                .zip(pr.fano_factor_roundoff)
                .filter(|(f, r)| super::table::determined(*f, *r))
                .map(|(f, _)| f.abs())
        };
        let points: Vec<(f64, f64)> = self
            .points
            .iter()
            .filter_map(|p| Some((fano(p.precision.as_ref()?)?, p.best_power?)))
            .collect();
        if points.is_empty() {
            return None;
        }
        let mut series = vec![Series {
            name: "best design at each budget".into(),
            points,
            dashed: false,
            markers: true,
            joined: true,
        }];
        if let Some(f) = fano(baseline) {
            series.push(Series {
                name: "baseline".into(),
                points: vec![(f, self.baseline_power)],
                dashed: false,
                markers: true,
                joined: false,
            });
        }
        Some(
            Chart {
                title: format!("Power and precision of the best designs: {}", self.title),
                x_label: format!("Fano factor 2D/J ({})", self.units.energy),
                y_label: format!("power ({})", self.units.power),
                log_x: false,
                log_y: false,
                series,
            }
            .render(),
        )
    }

    /// Power against the budget: best design, the relaxation, the universal bound and the
    /// baseline as reference lines; log budget axis for rates.
    pub fn svg(&self) -> String {
        use super::svg::{Chart, Series};
        let xs: Vec<f64> = self.points.iter().map(|p| p.value).collect();
        let (lo, hi) = (xs[0], xs[xs.len() - 1]);
        let line = |name: &str, y: f64| Series {
            name: name.into(),
            points: vec![(lo, y), (hi, y)],
            dashed: true,
            markers: false,
            joined: true,
        };
        let log_x = hi / lo >= 100.0;
        Chart {
            title: format!("Best power within the budget: {}", self.title),
            x_label: format!("{} {}", self.over, self.value_unit()),
            y_label: format!("power ({})", self.units.power),
            log_x,
            log_y: false,
            series: vec![
                Series {
                    name: "best design found".into(),
                    points: self
                        .points
                        .iter()
                        .filter_map(|p| p.best_power.map(|y| (p.value, y)))
                        .collect(),
                    dashed: false,
                    markers: true,
                    joined: true,
                },
                Series {
                    name: "upper bound at budget".into(),
                    points: self
                        .points
                        .iter()
                        .filter_map(|p| p.relaxation.map(|y| (p.value, y)))
                        .collect(),
                    dashed: true,
                    markers: false,
                    joined: true,
                },
                line("universal bound", self.bound.power),
                line("baseline", self.baseline_power),
            ],
        }
        .render()
    }
}
