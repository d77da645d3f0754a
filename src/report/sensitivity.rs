//! The `sensitivity` report: which parameter limits the bound and the baseline power, ranked by
//! its effect on the headroom; as text, JSON, CSV and a bar chart. Presentation only: the
//! derivatives come from [`crate::sensitivity`].

use super::table::{bounded, num, Align, Table};
use super::{transition_name, UnitsJson};
use crate::bound::Bound;
use crate::model::Model;
use crate::sensitivity::{Derivative, ParameterKind, Sensitivity};
use serde::Serialize;

/// One parameter's derivatives in the model's units: powers in the model's power unit, per unit
/// of the parameter (per e-fold for rates, per energy unit for energies and labels, per kelvin
/// for the temperature). `*_error` is each derivative's error bound (methods, section 10).
#[derive(Debug, Clone, Serialize)]
pub struct ParameterJson {
    pub kind: ParameterKind,
    pub name: String,
    pub d_power: f64,
    pub d_power_error: f64,
    pub d_bound: f64,
    pub d_bound_error: f64,
    pub d_headroom: f64,
    /// Change of the headroom per natural step of the parameter (one e-fold of a rate, 1 kT of
    /// an energy or label, 1 K): the ranking key, comparable across kinds.
    pub headroom_per_step: f64,
    /// `d ln P / d ln x` (for rates `d ln P / d ln k`); null where the value or the parameter
    /// is zero.
    pub power_elasticity: Option<f64>,
    pub bound_elasticity: Option<f64>,
    /// With `--design FILE`: the derivative of that design's power (its added rates held
    /// fixed), and its error bound.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub d_design_power: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub d_design_power_error: Option<f64>,
}

#[derive(Debug, Clone, Serialize)]
pub struct SensitivityReport {
    pub title: String,
    pub units: UnitsJson,
    pub baseline_power: f64,
    pub bound: f64,
    /// Ranked by `|d_headroom|` in natural steps (one e-fold of a rate, 1 kT of an energy or a
    /// label, 1 K), largest first.
    pub parameters: Vec<ParameterJson>,
    /// The model has environments: parameters are those of the joint chain, one per copy.
    pub joint_chain: bool,
    /// The design given with `--design FILE` (its file and rank), if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub design: Option<String>,
}

/// Parameter value in the model's units (`None` for rates, whose elasticity is per `ln k`).
fn parameter_value(model: &Model, kind: ParameterKind, index: usize) -> Option<f64> {
    let (net, u) = (&model.network, &model.units);
    match kind {
        ParameterKind::Rate => None,
        ParameterKind::Energy => Some(u.from_kt(net.energies[index])),
        ParameterKind::Work => Some(u.from_kt(net.channels[index].work)),
        ParameterKind::Drive => Some(u.from_kt(net.channels[index].drive)),
        ParameterKind::Temperature => Some(u.temperature),
    }
}

impl SensitivityReport {
    /// `design`: a description of the design and its derivatives in the order of
    /// `sensitivities`.
    pub fn new(
        model: &Model,
        bound: &Bound,
        sensitivities: &[Sensitivity],
        design: Option<(String, f64, &[Derivative])>,
    ) -> Self {
        let u = &model.units;
        // Internal derivatives are per kT of energy-like parameters; per model energy unit a
        // derivative is that times kT per unit.
        let per_unit = |kind: ParameterKind| match kind {
            ParameterKind::Energy | ParameterKind::Work | ParameterKind::Drive => u.kt_per_unit(),
            _ => 1.0,
        };
        let natural_step = |kind: ParameterKind| match kind {
            ParameterKind::Energy | ParameterKind::Work | ParameterKind::Drive => {
                1.0 / u.kt_per_unit()
            }
            _ => 1.0,
        };
        let elasticity = |d: f64, value: f64, x: Option<f64>| -> Option<f64> {
            let scale = x.unwrap_or(1.0);
            (value != 0.0 && scale != 0.0).then(|| d * scale / value)
        };
        let (power, upper) = (u.from_kt(bound.baseline_power), u.from_kt(bound.power));
        let mut parameters: Vec<(f64, ParameterJson)> = sensitivities
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let (kind, index) = (s.parameter.kind, s.parameter.index);
                let k = per_unit(kind);
                // A power in the model's unit is `P_kT kT / unit`: at fixed energies in their
                // unit, the temperature also moves the conversion, by `P / T` per kelvin.
                let moved_unit = |value_kt: f64| match kind {
                    ParameterKind::Temperature => value_kt / u.temperature,
                    _ => 0.0,
                };
                let convert = |d: &Derivative, value_kt: f64| {
                    (
                        u.from_kt(d.value + moved_unit(value_kt)) * k,
                        u.from_kt(d.error) * k,
                    )
                };
                let (dp, ep) = convert(&s.d_power, bound.baseline_power);
                let (db, eb) = convert(&s.d_bound, bound.power);
                let x = parameter_value(model, kind, index);
                let designed = design
                    .as_ref()
                    .and_then(|(_, power, d)| d.get(i).map(|d| convert(d, *power)));
                let json = ParameterJson {
                    kind,
                    name: parameter_name(model, kind, index),
                    d_power: dp,
                    d_power_error: ep,
                    d_bound: db,
                    d_bound_error: eb,
                    d_headroom: db - dp,
                    headroom_per_step: (db - dp) * natural_step(kind),
                    power_elasticity: elasticity(dp, power, x),
                    bound_elasticity: elasticity(db, upper, x),
                    d_design_power: designed.map(|d| d.0),
                    d_design_power_error: designed.map(|d| d.1),
                };
                ((db - dp).abs() * natural_step(kind), json)
            })
            .collect();
        parameters.sort_by(|a, b| b.0.total_cmp(&a.0));
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            baseline_power: power,
            bound: upper,
            parameters: parameters.into_iter().map(|(_, p)| p).collect(),
            joint_chain: model.environments.is_some(),
            design: design.map(|(name, _, _)| name),
        }
    }

    pub fn text(&self) -> String {
        let (p, e) = (&self.units.power, &self.units.energy);
        // More rows than a reader scans; the machine forms keep all of them.
        const TEXT_ROWS: usize = 60;
        let mut out = format!(
            "Sensitivities of {}\n  baseline power {} {p}, universal bound {} {p}\n  derivatives in {p} per e-fold of a rate (forward and backward together), per {e} of\n  an energy or label, per kelvin; ranked by the change of the headroom per e-fold of a rate,\n  per kT of an energy or label, per kelvin\n\n",
            self.title,
            num(self.baseline_power),
            num(self.bound)
        );
        let mut table = Table::new(&[
            ("parameter", Align::Left),
            ("d bound", Align::Right),
            ("d power", Align::Right),
            ("d headroom", Align::Right),
            ("per e-fold/kT/K", Align::Right),
            ("elasticity of bound", Align::Right),
        ]);
        if self.design.is_some() {
            table = Table::new(&[
                ("parameter", Align::Left),
                ("d bound", Align::Right),
                ("d power", Align::Right),
                ("d design power", Align::Right),
                ("d headroom", Align::Right),
                ("per e-fold/kT/K", Align::Right),
                ("elasticity of bound", Align::Right),
            ]);
        }
        for q in self.parameters.iter().take(TEXT_ROWS) {
            let mut row = vec![
                q.name.clone(),
                bounded(q.d_bound, q.d_bound_error),
                bounded(q.d_power, q.d_power_error),
            ];
            if let (Some(d), Some(e)) = (q.d_design_power, q.d_design_power_error) {
                row.push(bounded(d, e));
            }
            row.extend([
                num(q.d_headroom),
                num(q.headroom_per_step),
                q.bound_elasticity.map_or("-".into(), num),
            ]);
            table.row(row);
        }
        out.push_str(&table.render());
        if self.parameters.len() > TEXT_ROWS {
            out.push_str(&format!(
                "  ... {} more parameters of smaller effect: every one is in --json and --csv\n",
                self.parameters.len() - TEXT_ROWS
            ));
        }
        if let Some(d) = &self.design {
            out.push_str(&super::table::wrap(&format!("d design power: the power of the design {d}, its added rates held fixed (an energy then moves the added pathways' work labels, not their rates)."), "  ", 78));
            out.push('\n');
        }
        if self.joint_chain {
            out.push_str(&super::table::wrap("This model has environments: each parameter is one copy in the joint chain (state@environment), moved alone; a physical parameter shared by all copies moves them together, the sum of their derivatives.", "  ", 78));
            out.push('\n');
        }
        out.push_str(&super::table::wrap("The bound's derivative is the envelope theorem's: the derivative of Phi at the certified optimum held fixed, with the routability multipliers where pathways are restricted; the power's is the adjoint of the steady state (one transposed solve for every parameter; methods, section 10). Each derivative's error bound is shown where it exceeds 1%. Derivatives are local: a factor of 2 to 10 in a rate is not a small change, and a real design needs experimental validation.", "  ", 78));
        out.push('\n');
        out
    }

    /// The table as CSV: the text's columns (every parameter, not only the first rows). A
    /// derivative is per unit of its parameter, which `parameter_unit` names row by row
    /// (`e-fold` for a rate, the energy unit, `K`); `headroom_per_step` is per natural step
    /// (one e-fold, 1 kT, 1 K), in the power unit.
    pub fn csv(&self) -> String {
        use super::csv::{with_unit, Csv};
        let p = &self.units.power;
        let per = format!("{p} per parameter_unit");
        let mut table = Csv::new(&[
            "kind".to_string(),
            "name".into(),
            "parameter_unit".into(),
            with_unit("d_bound", &per),
            with_unit("d_bound_error", &per),
            with_unit("d_power", &per),
            with_unit("d_power_error", &per),
            with_unit("d_headroom", &per),
            with_unit("headroom_per_step", p),
            "power_elasticity".into(),
            "bound_elasticity".into(),
            with_unit("d_design_power", &per),
            with_unit("d_design_power_error", &per),
        ]);
        for q in &self.parameters {
            let unit = match q.kind {
                ParameterKind::Rate => "e-fold",
                ParameterKind::Energy | ParameterKind::Work | ParameterKind::Drive => {
                    self.units.energy
                }
                ParameterKind::Temperature => "K",
            };
            table.row(vec![
                serde_json::to_value(q.kind)
                    .ok()
                    .and_then(|v| v.as_str().map(str::to_string))
                    .unwrap_or_default()
                    .into(),
                (&q.name).into(),
                unit.into(),
                q.d_bound.into(),
                q.d_bound_error.into(),
                q.d_power.into(),
                q.d_power_error.into(),
                q.d_headroom.into(),
                q.headroom_per_step.into(),
                q.power_elasticity.into(),
                q.bound_elasticity.into(),
                q.d_design_power.into(),
                q.d_design_power_error.into(),
            ]);
        }
        table.finish()
    }

    /// The twelve parameters with the largest effect, as bars of their bound and power
    /// derivatives.
    pub fn svg(&self) -> String {
        let top: Vec<&ParameterJson> = self.parameters.iter().take(12).collect();
        super::svg::Bars {
            title: format!("What limits the bound: {}", self.title),
            value_label: format!(
                "derivative ({} per e-fold, per {}, per K)",
                self.units.power, self.units.energy
            ),
            categories: top.iter().map(|q| q.name.clone()).collect(),
            series: vec![
                (
                    "bound".into(),
                    top.iter().map(|q| Some(q.d_bound)).collect(),
                ),
                (
                    "baseline power".into(),
                    top.iter().map(|q| Some(q.d_power)).collect(),
                ),
            ],
        }
        .render()
    }
}

/// The name of a parameter as the report prints it.
pub fn parameter_name(model: &Model, kind: ParameterKind, index: usize) -> String {
    match kind {
        ParameterKind::Rate => format!("rate of {}", transition_name(model, index)),
        ParameterKind::Energy => format!("energy of {}", model.state_names[index]),
        ParameterKind::Work => format!("work of {}", transition_name(model, index)),
        ParameterKind::Drive => format!("drive of {}", transition_name(model, index)),
        ParameterKind::Temperature => "temperature".into(),
    }
}
