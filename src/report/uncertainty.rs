//! The `uncertainty` report: quantiles of the baseline power, the bound and the headroom over
//! networks sampled from the model's uncertainty, each with its distribution-free 95% interval;
//! as text, JSON, CSV (one row per sample) and a chart of the empirical distributions; and the
//! design ranking under uncertainty shown by `design --samples`. Presentation only: the numbers
//! come from [`crate::uncertainty`].

use super::table::{num, percent, wrap, Align, Table};
use super::UnitsJson;
use crate::model::Model;
use crate::uncertainty::{quantiles, Quantile, Summary};
use serde::Serialize;

/// A quantile in the model's power unit, with its 95% interval.
#[derive(Debug, Clone, Serialize)]
pub struct QuantileJson {
    pub level: f64,
    pub value: f64,
    pub low: f64,
    pub high: f64,
}

/// The nominal model's figures beside the sampled ones (power unit).
#[derive(Debug, Clone, Serialize)]
pub struct NominalJson {
    pub baseline_power: f64,
    pub bound: f64,
    pub headroom: f64,
}

#[derive(Debug, Clone, Serialize)]
pub struct UncertaintyReport {
    pub title: String,
    pub units: UnitsJson,
    pub pairs: String,
    pub samples: usize,
    pub seed: u64,
    /// Parameters with a nonzero spread (state energies, forward rates, drives).
    pub sampled_parameters: usize,
    /// Samples whose derived backward rate left the double range.
    pub out_of_range: usize,
    /// Samples whose steady state or bound could not be certified.
    pub unsolved: usize,
    pub nominal: NominalJson,
    pub baseline_power: Vec<QuantileJson>,
    pub bound: Vec<QuantileJson>,
    pub headroom: Vec<QuantileJson>,
    /// Per solved sample, in sample order: `[baseline power, bound, headroom]`.
    pub values: Vec<[f64; 3]>,
    pub caution: String,
}

/// The caution every uncertainty figure carries.
pub const CAUTION: &str = "Parameters are sampled independently (log-normal rates, normal energies and drives) from the spreads in the model file; correlations between parameters, model-structure errors and unlisted parameters are not sampled. Quantiles describe this model's sensitivity to its stated uncertainty, not the real machine: real designs need experimental validation.";

fn in_units(model: &Model, qs: &[Quantile]) -> Vec<QuantileJson> {
    let u = &model.units;
    qs.iter()
        .map(|q| QuantileJson {
            level: q.level,
            value: u.from_kt(q.value),
            low: u.from_kt(q.low),
            high: u.from_kt(q.high),
        })
        .collect()
}

impl UncertaintyReport {
    pub fn new(
        model: &Model,
        pairs: String,
        seed: u64,
        nominal: (f64, f64),
        summary: &Summary,
    ) -> Self {
        let u = &model.units;
        let values = summary
            .baseline_power
            .iter()
            .zip(&summary.bound)
            .zip(&summary.headroom)
            .map(|((p, b), h)| [u.from_kt(*p), u.from_kt(*b), u.from_kt(*h)])
            .collect();
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            pairs,
            samples: summary.samples,
            seed,
            sampled_parameters: model.uncertainty.as_ref().map_or(0, |x| x.sampled_count()),
            out_of_range: summary.out_of_range,
            unsolved: summary.unsolved,
            nominal: NominalJson {
                baseline_power: u.from_kt(nominal.0),
                bound: u.from_kt(nominal.1),
                headroom: u.from_kt(nominal.1 - nominal.0),
            },
            baseline_power: in_units(model, &quantiles(&summary.baseline_power)),
            bound: in_units(model, &quantiles(&summary.bound)),
            headroom: in_units(model, &quantiles(&summary.headroom)),
            values,
            caution: CAUTION.to_string(),
        }
    }

    pub fn text(&self) -> String {
        let p = &self.units.power;
        let solved = self.values.len();
        let mut out = format!(
            "{}\n  {} samples (seed {}), {} uncertain parameters, pathways over {}\n  solved {solved}; derived rate out of range {}; not certified {}\n\n",
            self.title, self.samples, self.seed, self.sampled_parameters, self.pairs, self.out_of_range, self.unsolved
        );
        let mut table = Table::new(&[
            ("quantile", Align::Left),
            (&format!("baseline power {p}"), Align::Right),
            (&format!("bound {p}"), Align::Right),
            (&format!("headroom {p}"), Align::Right),
        ]);
        table.row(vec![
            "nominal".into(),
            num(self.nominal.baseline_power),
            num(self.nominal.bound),
            num(self.nominal.headroom),
        ]);
        for i in 0..self.bound.len() {
            table.row(vec![
                percent(self.bound[i].level),
                num(self.baseline_power[i].value),
                num(self.bound[i].value),
                num(self.headroom[i].value),
            ]);
        }
        out.push_str(&table.render());
        out.push_str(
            "\n95% intervals of each quantile (distribution-free, from order statistics):\n",
        );
        let mut intervals = Table::new(&[
            ("quantile", Align::Left),
            ("baseline power", Align::Right),
            ("bound", Align::Right),
            ("headroom", Align::Right),
        ]);
        let span = |q: &QuantileJson| format!("{} .. {}", num(q.low), num(q.high));
        for i in 0..self.bound.len() {
            intervals.row(vec![
                percent(self.bound[i].level),
                span(&self.baseline_power[i]),
                span(&self.bound[i]),
                span(&self.headroom[i]),
            ]);
        }
        out.push_str(&intervals.render());
        out.push('\n');
        out.push_str(&wrap(&format!("caution: {}", self.caution), "  ", 92));
        out.push('\n');
        out
    }

    /// The report's tables as CSV: `samples` (first; one row per solved sample) and
    /// `quantiles` (the text's two tables as one: each quantile with its 95% interval, after the
    /// nominal model's row, whose `quantile` is `nominal` and intervals empty).
    pub fn tables(&self) -> Vec<(&'static str, String)> {
        use super::csv::{with_unit, Cell, Csv};
        let p = &self.units.power;
        let mut samples = Csv::new(&[
            "sample".to_string(),
            with_unit("baseline_power", p),
            with_unit("bound", p),
            with_unit("headroom", p),
        ]);
        for (i, [a, b, c]) in self.values.iter().enumerate() {
            samples.row(vec![i.into(), (*a).into(), (*b).into(), (*c).into()]);
        }
        let mut header = vec!["quantile".to_string()];
        for name in ["baseline_power", "bound", "headroom"] {
            for suffix in ["", "_low", "_high"] {
                header.push(with_unit(&format!("{name}{suffix}"), p));
            }
        }
        let mut quantiles = Csv::new(&header);
        let n = &self.nominal;
        quantiles.row(vec![
            "nominal".into(),
            n.baseline_power.into(),
            Cell::Missing,
            Cell::Missing,
            n.bound.into(),
            Cell::Missing,
            Cell::Missing,
            n.headroom.into(),
            Cell::Missing,
            Cell::Missing,
        ]);
        for i in 0..self.bound.len() {
            let mut row: Vec<Cell> = vec![self.bound[i].level.into()];
            for q in [&self.baseline_power[i], &self.bound[i], &self.headroom[i]] {
                row.extend([q.value.into(), q.low.into(), q.high.into()]);
            }
            quantiles.row(row);
        }
        vec![
            ("samples", samples.finish()),
            ("quantiles", quantiles.finish()),
        ]
    }

    /// The empirical distribution functions of the three figures.
    pub fn svg(&self) -> Option<String> {
        if self.values.len() < 2 {
            return None;
        }
        let ecdf = |k: usize| {
            let mut v: Vec<f64> = self.values.iter().map(|r| r[k]).collect();
            v.sort_by(f64::total_cmp);
            let n = v.len() as f64;
            v.iter()
                .enumerate()
                .map(|(i, x)| (*x, (i + 1) as f64 / n))
                .collect::<Vec<_>>()
        };
        let series = ["baseline power", "bound", "headroom"]
            .iter()
            .enumerate()
            .map(|(k, name)| super::svg::Series {
                name: name.to_string(),
                points: ecdf(k),
                dashed: k == 2,
                markers: false,
                joined: true,
            })
            .collect();
        let chart = super::svg::Chart {
            title: format!(
                "{}: distributions over {} samples",
                self.title,
                self.values.len()
            ),
            x_label: format!("power / {}", self.units.power),
            y_label: "share of samples at or below".into(),
            log_x: false,
            log_y: false,
            series,
        };
        Some(chart.render())
    }
}

/// One design of `design --samples`, ranked by a quantile of its power over the samples.
#[derive(Debug, Clone, Serialize)]
pub struct RobustDesignJson {
    pub rank: usize,
    /// Its rank by the nominal model's verified power (`designs[]`).
    pub nominal_rank: usize,
    pub quantile_power: f64,
    /// Share of the samples in which it has the highest power of the designs ranked.
    pub first_share: f64,
}

/// The ranking under uncertainty of `design --samples N --quantile q`.
#[derive(Debug, Clone, Serialize)]
pub struct RobustRankingJson {
    pub samples: usize,
    /// Samples in which every design could be solved (the others are left out for all).
    pub samples_used: usize,
    pub seed: u64,
    pub quantile: f64,
    pub designs: Vec<RobustDesignJson>,
    pub caution: String,
}

impl RobustRankingJson {
    pub fn text(&self, power_unit: &str) -> String {
        let mut out = format!(
            "\nRanking under uncertainty: the {} quantile of each design's power over {} sampled networks (seed {}, {} used; the design's rates fixed):\n\n",
            percent(self.quantile),
            self.samples,
            self.seed,
            self.samples_used
        );
        let mut table = Table::new(&[
            ("rank", Align::Right),
            ("nominal rank", Align::Right),
            (&format!("quantile power /{power_unit}"), Align::Right),
            ("ranks first in", Align::Right),
        ]);
        for d in &self.designs {
            table.row(vec![
                d.rank.to_string(),
                d.nominal_rank.to_string(),
                num(d.quantile_power),
                percent(d.first_share),
            ]);
        }
        out.push_str(&table.render());
        out.push('\n');
        out.push_str(&wrap(&format!("caution: {}", self.caution), "  ", 92));
        out.push('\n');
        out
    }
}
