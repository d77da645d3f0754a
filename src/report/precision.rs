//! The precision block shared by the `steady`, `bound` and `design` reports, and the
//! `simulate` report: fluctuations of the work current in the model's units, as text and JSON.
//!
//! Presentation only: the figures come from [`crate::fluctuation`]; here they are converted to
//! the model's units and printed through [`bounded`], so a figure whose round-off bound exceeds
//! 1% of it is shown as not determined.

use super::table::{bounded, num, wrap};
use super::UnitsJson;
use crate::fluctuation::{Empirical, Figure, Precision, Randomness, Ratio};
use crate::model::Model;
use crate::units::Units;
use serde::Serialize;

/// Where the randomness parameter applies.
#[derive(Debug, Clone, Copy, Serialize, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
pub enum RandomnessStatus {
    /// One cycle storing work: `randomness` is given.
    Unicyclic,
    /// More than one independent cycle: no single turn to count.
    Multicyclic,
    /// The one cycle stores no work.
    NoWorkPerTurn,
}

/// `precision` in the JSON of every object that carries a power (model-format.md).
#[derive(Debug, Clone, Serialize)]
pub struct PrecisionJson {
    /// Diffusion coefficient of the accumulated work, energy^2 per time unit.
    pub diffusion: f64,
    pub diffusion_roundoff: f64,
    /// `2D / J` in the energy unit; `null` when the power is zero within its round-off.
    pub fano_factor: Option<f64>,
    pub fano_factor_roundoff: Option<f64>,
    /// `2 D sigma / J^2` (dimensionless, at least 2); `null` as `fano_factor`.
    pub uncertainty_product: Option<f64>,
    pub uncertainty_product_roundoff: Option<f64>,
    pub randomness_status: RandomnessStatus,
    /// Work stored per turn of the one cycle (energy unit), for a unicyclic network.
    pub work_per_turn: Option<f64>,
    /// `2D / (J d)`, `d` the work per turn; `null` unless unicyclic with a determined power.
    pub randomness: Option<f64>,
    pub randomness_roundoff: Option<f64>,
}

fn split(r: Ratio, scale: f64) -> (Option<f64>, Option<f64>) {
    match r.figure() {
        Some(Figure { value, roundoff }) => (Some(value * scale), Some(roundoff * scale)),
        None => (None, None),
    }
}

impl PrecisionJson {
    pub fn of(p: &Precision, units: &Units) -> Self {
        let energy = units.from_kt(1.0);
        let (fano_factor, fano_factor_roundoff) = split(p.fano_factor, energy);
        let (uncertainty_product, uncertainty_product_roundoff) = split(p.uncertainty_product, 1.0);
        let (randomness_status, work_per_turn, randomness, randomness_roundoff) = match p.randomness
        {
            Randomness::Unicyclic {
                work_per_turn,
                value,
            } => {
                let (r, e) = split(value, 1.0);
                (
                    RandomnessStatus::Unicyclic,
                    Some(units.from_kt(work_per_turn)),
                    r,
                    e,
                )
            }
            Randomness::Multicyclic => (RandomnessStatus::Multicyclic, None, None, None),
            Randomness::NoWorkPerTurn => (RandomnessStatus::NoWorkPerTurn, None, None, None),
        };
        Self {
            diffusion: p.diffusion.value * energy * energy,
            diffusion_roundoff: p.diffusion.roundoff * energy * energy,
            fano_factor,
            fano_factor_roundoff,
            uncertainty_product,
            uncertainty_product_roundoff,
            randomness_status,
            work_per_turn,
            randomness,
            randomness_roundoff,
        }
    }

    /// The Fano factor as printed: bounded, or why it is not determined.
    pub fn fano_text(&self) -> String {
        ratio_text(self.fano_factor, self.fano_factor_roundoff, "")
    }

    /// The uncertainty product as printed.
    pub fn product_text(&self) -> String {
        ratio_text(
            self.uncertainty_product,
            self.uncertainty_product_roundoff,
            "",
        )
    }

    /// Indented lines for a report (`indent` before each), in `units`.
    pub fn lines(&self, units: &UnitsJson, indent: &str) -> String {
        let (e, t) = (units.energy, &units.time);
        let randomness = match self.randomness_status {
            RandomnessStatus::Unicyclic => format!(
                "{}  (2D/(J d), d = {} {e} per turn)",
                ratio_text(self.randomness, self.randomness_roundoff, ""),
                self.work_per_turn.map_or("-".into(), num)
            ),
            RandomnessStatus::Multicyclic => {
                "n/a (more than one cycle: no single turn to count)".into()
            }
            RandomnessStatus::NoWorkPerTurn => "n/a (the cycle stores no work)".into(),
        };
        format!(
            "{indent}work diffusion D     {} {e}^2/{t}\n{indent}Fano factor 2D/J     {}\n{indent}uncertainty product  {}  (2 D sigma / J^2; at least 2)\n{indent}randomness           {randomness}\n",
            bounded(self.diffusion, self.diffusion_roundoff),
            ratio_text(self.fano_factor, self.fano_factor_roundoff, &format!(" {e}")),
            self.product_text(),
        )
    }
}

/// A ratio over the power, printed through [`bounded`] followed by `unit`, or not determined
/// with the reason.
pub fn ratio_text(value: Option<f64>, roundoff: Option<f64>, unit: &str) -> String {
    match (value, roundoff) {
        (Some(v), Some(r)) => format!("{}{unit}", bounded(v, r)),
        _ => "not determined (the power is zero within round-off)".into(),
    }
}

/// The caution printed under every precision figure.
pub const PRECISION_CAUTION: &str = "Precision figures are exact for the model as written (Markov jumps, the rates given); a real machine's fluctuations also carry what the model leaves out, so a design chosen for regularity needs experimental validation.";

/// The `simulate` report: empirical mean power and diffusion beside the exact figures.
#[derive(Debug, Clone, Serialize)]
pub struct SimulateReport {
    pub title: String,
    pub units: UnitsJson,
    /// Design file whose pathways were added, if any.
    pub design: Option<String>,
    pub time: f64,
    pub runs: usize,
    pub seed: u64,
    pub jumps: u64,
    /// Confidence level of the intervals (two-sided).
    pub confidence: f64,
    pub power: SimulatedFigure,
    pub diffusion: SimulatedFigure,
    pub exact_power_roundoff: f64,
    pub exact_diffusion_roundoff: f64,
    /// Accumulated work (energy unit) at `trajectory_times` for the first runs.
    pub trajectory_times: Vec<f64>,
    pub trajectories: Vec<Vec<f64>>,
}

/// An empirical estimate with its interval beside the exact value (model's units).
#[derive(Debug, Clone, Serialize)]
pub struct SimulatedFigure {
    pub estimate: f64,
    pub low: f64,
    pub high: f64,
    pub exact: f64,
    /// Whether the exact value lies inside the interval.
    pub inside: bool,
}

impl SimulateReport {
    /// The estimates as one CSV row: runs, run length, jumps, then for the mean power and for
    /// the work diffusion the estimate, its interval, the exact value and whether it lies inside.
    pub fn csv(&self) -> String {
        use super::csv::{with_unit, Csv};
        let (p, t) = (&self.units.power, self.units.time);
        let d = format!("{}^2/{t}", self.units.energy);
        let figure = |name: &str, unit: &str| {
            [
                with_unit(name, unit),
                with_unit(&format!("{name}_low"), unit),
                with_unit(&format!("{name}_high"), unit),
                with_unit(&format!("{name}_exact"), unit),
                format!("{name}_inside"),
            ]
        };
        let mut header = vec!["runs".to_string(), with_unit("time", t), "jumps".into()];
        header.extend(figure("power", p));
        header.extend(figure("diffusion", &d));
        let mut table = Csv::new(&header);
        let cells = |f: &SimulatedFigure| {
            [
                f.estimate.into(),
                f.low.into(),
                f.high.into(),
                f.exact.into(),
                f.inside.into(),
            ]
        };
        let mut row = vec![self.runs.into(), self.time.into(), self.jumps.into()];
        row.extend(cells(&self.power));
        row.extend(cells(&self.diffusion));
        table.row(row);
        table.finish()
    }

    #[allow(clippy::too_many_arguments)]
    pub fn new(
        model: &Model,
        design: Option<String>,
        settings: &crate::fluctuation::SimulationSettings,
        empirical: &Empirical,
        exact: &Precision,
        trajectory_times: Vec<f64>,
        trajectories: Vec<Vec<f64>>,
    ) -> Self {
        let u = &model.units;
        let energy = u.from_kt(1.0);
        let figure = |e: crate::fluctuation::Estimate, exact: f64, scale: f64| {
            let (low, high) = (
                (e.value - e.half_width) * scale,
                (e.value + e.half_width) * scale,
            );
            SimulatedFigure {
                estimate: e.value * scale,
                low,
                high,
                exact: exact * scale,
                inside: low <= exact * scale && exact * scale <= high,
            }
        };
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            design,
            time: settings.time,
            runs: empirical.runs,
            seed: settings.seed,
            jumps: empirical.jumps,
            confidence: 0.99,
            power: figure(empirical.power, exact.current.value, energy),
            diffusion: figure(empirical.diffusion, exact.diffusion.value, energy * energy),
            exact_power_roundoff: exact.current.roundoff * energy,
            exact_diffusion_roundoff: exact.diffusion.roundoff * energy * energy,
            trajectory_times,
            trajectories: trajectories
                .into_iter()
                .map(|t| t.into_iter().map(|w| w * energy).collect())
                .collect(),
        }
    }

    pub fn text(&self) -> String {
        let (p, e, t) = (&self.units.power, self.units.energy, &self.units.time);
        let mut out = format!(
            "Stochastic simulation of {}{}\n  {} runs of {} {t} each, seed {}, {} jumps (Gillespie's direct method, each run from a state drawn from the steady distribution)\n\n",
            self.title,
            self.design
                .as_ref()
                .map_or(String::new(), |d| format!(" with the design of {d}")),
            self.runs,
            num(self.time),
            self.seed,
            self.jumps
        );
        let row = |name: &str, unit: &str, f: &SimulatedFigure, roundoff: f64| {
            format!(
                "  {name:<16} {:>12}  [{}, {}]  {} {unit}{}\n",
                num(f.estimate),
                num(f.low),
                num(f.high),
                bounded(f.exact, roundoff),
                if f.inside { "" } else { "  (outside)" }
            )
        };
        out.push_str("  figure               simulated  99% interval          exact\n");
        out.push_str(&row(
            "mean power",
            p,
            &self.power,
            self.exact_power_roundoff,
        ));
        out.push_str(&row(
            "work diffusion",
            &format!("{e}^2/{t}"),
            &self.diffusion,
            self.exact_diffusion_roundoff,
        ));
        out.push('\n');
        out.push_str(&wrap("Intervals: mean power s/sqrt(N) and diffusion from the large-sample error of a sample variance, sqrt((m4 - s^4)/N)/(2T), both at 2.576 standard errors; the diffusion estimate also carries a bias of order 1/T (the relaxation of the work's variance), small when T is much longer than the slowest relaxation time.", "  ", 78));
        out.push('\n');
        out
    }

    /// Accumulated work against time for the recorded runs, with the exact mean `J t`.
    pub fn svg(&self) -> Option<String> {
        use super::svg::{Chart, Series};
        if self.trajectories.is_empty() {
            return None;
        }
        let mut series: Vec<Series> = self
            .trajectories
            .iter()
            .enumerate()
            .map(|(i, w)| Series {
                name: format!("run {}", i + 1),
                points: self
                    .trajectory_times
                    .iter()
                    .copied()
                    .zip(w.iter().copied())
                    .collect(),
                dashed: false,
                markers: false,
                joined: true,
            })
            .collect();
        series.push(Series {
            name: "exact mean J t".into(),
            points: vec![(0.0, 0.0), (self.time, self.power.exact * self.time)],
            dashed: true,
            markers: false,
            joined: true,
        });
        Some(
            Chart {
                title: format!("Accumulated work: {}", self.title),
                x_label: format!("time ({})", self.units.time),
                y_label: format!("work stored ({})", self.units.energy),
                log_x: false,
                log_y: false,
                series,
            }
            .render(),
        )
    }
}
