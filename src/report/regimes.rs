//! The `regimes` report: along a sweep of one scaling of the energy labels, the exact headroom
//! beside each closed form, their relative errors, the regime indicator and verdict; as text,
//! JSON, CSV and a log-log chart with the regime changes marked.

use super::table::{num, percent, Align, Table};
use super::UnitsJson;
use serde::Serialize;

/// One scale of the sweep. Headrooms in the model's power unit.
#[derive(Debug, Clone, Serialize)]
pub struct RegimePoint {
    pub scale: f64,
    /// `None` with `failure` when the bound could not be certified (or the rates left the
    /// floating-point range).
    pub headroom: Option<f64>,
    pub failure: Option<String>,
    pub indicator: Option<f64>,
    pub shift: Option<f64>,
    /// The checked verdict: a regime whose closed form is within 10% of `headroom`, else
    /// crossover.
    pub regime: Option<&'static str>,
    /// What the indicators alone predict (differs from `regime` where that form is off).
    pub predicted: Option<&'static str>,
    pub near_equilibrium: Option<f64>,
    pub strong_drive: Option<f64>,
}

impl RegimePoint {
    fn error(&self, estimate: Option<f64>) -> Option<f64> {
        let (exact, estimate) = (self.headroom?, estimate?);
        (exact != 0.0).then(|| (estimate - exact) / exact.abs())
    }

    pub fn near_equilibrium_error(&self) -> Option<f64> {
        self.error(self.near_equilibrium)
    }

    pub fn strong_drive_error(&self) -> Option<f64> {
        self.error(self.strong_drive)
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct RegimesReport {
    pub title: String,
    pub units: UnitsJson,
    /// What was scaled (`work`, `drive`, `energies`, `stored`, or a comma list).
    pub scaled: String,
    /// Where the added pathways may act (the model's own pairs).
    pub pairs: String,
    /// Whether the closed forms estimate this bound: they estimate the bound over all pairs,
    /// so over restricted pairs (each environment state, or `[pathways]`) they are shown
    /// without an error and the regime is the indicators' prediction, unchecked.
    pub closed_forms_compared: bool,
    pub points: Vec<RegimePoint>,
}

impl RegimesReport {
    /// A closed form's error, where the closed forms estimate this bound.
    fn compared(&self, error: Option<f64>) -> Option<f64> {
        error.filter(|_| self.closed_forms_compared)
    }

    pub fn text(&self) -> String {
        let p = &self.units.power;
        let mut out = format!(
            "Regimes of {} as the {} labels are scaled\n  added pathways: {}\n  headrooms in {p}; error = (estimate - exact) / exact\n",
            self.title, self.scaled, self.pairs
        );
        if !self.closed_forms_compared {
            out.push_str("  the closed forms estimate the bound over all pairs, not this restricted one: no errors\n  are given, and the regime is the indicators' prediction, unchecked\n");
        }
        out.push('\n');
        let mut table = Table::new(&[
            ("scale", Align::Right),
            ("indicator", Align::Right),
            ("shift", Align::Right),
            ("regime", Align::Left),
            ("exact headroom", Align::Right),
            ("near equilibrium", Align::Right),
            ("error", Align::Right),
            ("strong drive", Align::Right),
            ("error", Align::Right),
        ]);
        let opt = |x: Option<f64>| x.map_or("-".to_string(), num);
        let err = |x: Option<f64>| {
            x.map_or("-".to_string(), |e| {
                let sign = if e < 0.0 { "-" } else { "" };
                if e.abs() < 10.0 {
                    format!("{sign}{}", percent(e.abs()))
                } else {
                    format!("{:.1e}%", 100.0 * e)
                }
            })
        };
        for pt in &self.points {
            table.row(vec![
                num(pt.scale),
                opt(pt.indicator),
                opt(pt.shift),
                match (pt.regime, pt.predicted) {
                    (Some(r), Some(p)) if r != p => format!("{r}*"),
                    (r, _) => r.unwrap_or("-").to_string(),
                },
                pt.headroom.map_or_else(|| "not certified".to_string(), num),
                opt(pt.near_equilibrium),
                err(self.compared(pt.near_equilibrium_error())),
                opt(pt.strong_drive),
                err(self.compared(pt.strong_drive_error())),
            ]);
        }
        out.push_str(&table.render());
        for pt in self.points.iter().filter(|p| p.failure.is_some()) {
            out.push_str(&format!(
                "  at scale {}: {}\n",
                num(pt.scale),
                pt.failure.as_deref().unwrap_or_default()
            ));
        }
        out.push_str(&format!(
            "  regime: the indicators predict strong drive when the indicator exceeds {} and the\n  strong-drive correction is under {} of the corner value, else near equilibrium when the\n  shift is below {}, else crossover (methods, section 6); a regime is named only where its\n  form is within {} of the exact headroom (else crossover). '*': not what the indicators\n  predicted (their form is off, or the named form holds where they predicted another).\n",
            crate::bound::closed_form::STRONG_DRIVE_ABOVE,
            crate::bound::closed_form::STRONG_DRIVE_CORRECTION_BELOW,
            crate::bound::closed_form::NEAR_EQUILIBRIUM_SHIFT,
            percent(crate::bound::closed_form::VERDICT_ACCURACY)
        ));
        if !self.closed_forms_compared {
            out.push_str(
                "  (here unchecked: over restricted pairs the regime is the prediction)\n",
            );
        }
        out
    }

    /// The table as CSV: the text's columns (headrooms in the power unit, errors as
    /// fractions), the predicted regime and why a point failed.
    pub fn csv(&self) -> String {
        use super::csv::{with_unit, Csv};
        let p = &self.units.power;
        let mut table = Csv::new(&[
            "scale".to_string(),
            with_unit("indicator", "kT"),
            "shift".into(),
            "regime".into(),
            "predicted_regime".into(),
            with_unit("headroom", p),
            with_unit("near_equilibrium", p),
            "near_equilibrium_error".into(),
            with_unit("strong_drive", p),
            "strong_drive_error".into(),
            "failure".into(),
        ]);
        for pt in &self.points {
            table.row(vec![
                pt.scale.into(),
                pt.indicator.into(),
                pt.shift.into(),
                pt.regime.into(),
                pt.predicted.into(),
                pt.headroom.into(),
                pt.near_equilibrium.into(),
                self.compared(pt.near_equilibrium_error()).into(),
                pt.strong_drive.into(),
                self.compared(pt.strong_drive_error()).into(),
                pt.failure.as_deref().into(),
            ]);
        }
        table.finish()
    }

    /// Log-log chart of the exact headroom and both estimates against the scale, with a
    /// dashed vertical line wherever the regime verdict changes.
    pub fn svg(&self) -> String {
        use super::svg::{Chart, Series};
        let series =
            |name: &str, pick: &dyn Fn(&RegimePoint) -> Option<f64>, markers: bool| Series {
                name: name.into(),
                points: self
                    .points
                    .iter()
                    .filter_map(|p| pick(p).map(|y| (p.scale, y)))
                    .collect(),
                dashed: !markers,
                markers,
                joined: true,
            };
        let mut all = vec![
            series("exact headroom", &|p| p.headroom, true),
            series("near-equilibrium form", &|p| p.near_equilibrium, false),
            series("strong-drive form", &|p| p.strong_drive, false),
        ];
        let ys: Vec<f64> = all
            .iter()
            .flat_map(|s| s.points.iter().map(|p| p.1))
            .filter(|y| *y > 0.0)
            .collect();
        let (lo, hi) = (
            ys.iter().copied().fold(f64::INFINITY, f64::min),
            ys.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        );
        for pair in self.points.windows(2) {
            if let (Some(a), Some(b)) = (pair[0].regime, pair[1].regime) {
                if a != b && lo.is_finite() {
                    let x = (pair[0].scale * pair[1].scale).sqrt();
                    all.push(Series {
                        name: format!("{a} -> {b}"),
                        points: vec![(x, lo), (x, hi)],
                        dashed: true,
                        markers: false,
                        joined: true,
                    });
                }
            }
        }
        Chart {
            title: format!("Headroom and closed forms: {}", self.title),
            x_label: format!("scale of the {} labels", self.scaled),
            y_label: format!("headroom ({})", self.units.power),
            log_x: true,
            log_y: true,
            series: all,
        }
        .render()
    }
}
