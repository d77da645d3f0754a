//! The `bound` report: baseline power, certified universal bound, headroom, benefit/cost split,
//! optimal distribution beside the baseline, the attaining design, its speed table, and the
//! rate-capped design when a cap is given.

use super::precision::PrecisionJson;
use super::table::{bounded, num, percent, wrap, Align, Table};
use super::{named_distribution, named_log_distribution, StateProbability, UnitsJson};
use crate::bound::design::{Attaining, Speed, SpeedBasis, VerifiedDesign};
use crate::bound::{closed_form, Bound};
use crate::model::{Model, PairSelection};
use serde::Serialize;

#[derive(Debug, Clone, Serialize)]
pub struct BoundNumbers {
    pub power: f64,
    /// Round-off bound of `power` (already included in `certified_upper`).
    pub power_roundoff: f64,
    pub certified_upper: f64,
    pub headroom: f64,
    /// Round-off bound of `headroom` (the bound's and the baseline power's together).
    pub headroom_roundoff: f64,
    pub relative_gap: f64,
}

impl BoundNumbers {
    /// The bound's numbers in the model's units.
    pub fn of(bound: &Bound, units: &crate::units::Units) -> Self {
        Self {
            power: units.from_kt(bound.power),
            power_roundoff: units.from_kt(bound.roundoff),
            certified_upper: units.from_kt(bound.certified_upper),
            headroom: units.from_kt(bound.headroom()),
            headroom_roundoff: units.from_kt(bound.roundoff + bound.baseline_roundoff),
            relative_gap: bound.relative_gap(),
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct PathwayJson {
    pub from: String,
    pub to: String,
    pub forward: f64,
    pub backward: f64,
    pub work: f64,
}

/// The pairs of `pathways` as `from-to`, joined by `separator` (the design and sweep tables).
pub fn pair_names(pathways: &[PathwayJson], separator: &str) -> String {
    pathways
        .iter()
        .map(|w| format!("{}-{}", w.from, w.to))
        .collect::<Vec<_>>()
        .join(separator)
}

impl PathwayJson {
    /// An added pathway with state names, rates per time unit and work in the model's unit.
    pub fn of(p: &crate::bound::design::Pathway, model: &Model) -> Self {
        Self {
            from: model.state_names[p.from].clone(),
            to: model.state_names[p.to].clone(),
            forward: p.forward,
            backward: p.backward,
            work: model.units.from_kt(p.work),
        }
    }
}

/// A verified design: `achieved_power` is from an independent steady-state solve.
#[derive(Debug, Clone, Serialize)]
pub struct DesignJson {
    pub pathways: Vec<PathwayJson>,
    pub achieved_power: f64,
    /// Round-off bound of `achieved_power` (fast pathways make it grow).
    pub achieved_power_roundoff: f64,
    pub fraction_of_headroom: Option<f64>,
    /// What the construction predicts (fast-limit formula or convex program).
    pub predicted_power: f64,
    /// Largest added rate.
    pub largest_rate: f64,
    /// Fluctuations of the work current of baseline plus pathways (methods, section 12).
    pub precision: Option<PrecisionJson>,
}

#[derive(Debug, Clone, Serialize)]
pub struct SpeedRow {
    pub fraction: f64,
    /// Rate cap needed, per time unit (`null` unless `status` is `reached`).
    pub speed: Option<f64>,
    pub status: SpeedStatus,
}

/// Whether a speed-table entry is a number.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SpeedStatus {
    Reached,
    NotReached,
    NotDetermined,
}

impl SpeedRow {
    fn of(fraction: f64, speed: Speed) -> Self {
        let status = match speed {
            Speed::Reached(_) => SpeedStatus::Reached,
            Speed::NotReached => SpeedStatus::NotReached,
            Speed::NotDetermined => SpeedStatus::NotDetermined,
        };
        Self {
            fraction,
            speed: speed.rate(),
            status,
        }
    }

    fn text(&self) -> String {
        match (self.status, self.speed) {
            (SpeedStatus::Reached, Some(s)) => num(s),
            (SpeedStatus::NotDetermined, _) => "not determined".into(),
            _ => "not reached".into(),
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct CappedJson {
    pub rate_cap: f64,
    #[serde(flatten)]
    pub design: DesignJson,
}

#[derive(Debug, Clone, Serialize)]
pub struct CappedFailure {
    pub rate_cap: f64,
    pub reason: String,
}

#[derive(Debug, Clone, Serialize)]
pub struct BoundReport {
    pub title: String,
    pub units: UnitsJson,
    pub pairs: String,
    pub route: &'static str,
    pub baseline_power: f64,
    /// Round-off bound of `baseline_power`.
    pub baseline_power_roundoff: f64,
    pub bound: BoundNumbers,
    pub benefit: f64,
    pub maintenance_cost: f64,
    pub optimal_distribution: Vec<StateProbability>,
    pub baseline_distribution: Vec<StateProbability>,
    pub design: Option<DesignJson>,
    pub target_fraction: f64,
    /// The rate cap needed for each share: `speed_basis` says whether it is the exact frontier
    /// (smallest cap at which some design reaches the share) or the tree design's own scaling.
    pub speed_table: Vec<SpeedRow>,
    pub speed_basis: SpeedBasis,
    pub rate_capped: Option<CappedJson>,
    /// Why the rate-capped design is missing when a cap was asked for.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rate_capped_failure: Option<CappedFailure>,
    /// `(rate cap, share of the headroom)` along the speed basis.
    pub speed_curve: Vec<(f64, f64)>,
    /// `(largest added rate, share of the headroom)` along the tree design.
    pub tree_speed_curve: Vec<(f64, f64)>,
    pub regime: RegimeJson,
    pub closed_forms: ClosedForms,
    /// Fluctuations of the baseline's work current (methods, section 12); set by the command.
    pub precision: Option<PrecisionJson>,
    pub cautions: Vec<crate::model::Caution>,
}

/// Closed-form estimates of the headroom (model-format.md keys); `None` where not computed.
#[derive(Debug, Clone, Serialize)]
pub struct ClosedForms {
    pub near_equilibrium: Option<Estimate>,
    /// Corner limit with its first correction.
    pub strong_drive: Option<Estimate>,
}

/// The regime verdict: `indicator` is chi (work per escape from the best state, in kT), `shift`
/// the relative shift of the near-equilibrium optimum.
#[derive(Debug, Clone, Serialize)]
pub struct RegimeJson {
    /// The verdict; checked against the exact headroom when `checked` (a regime is named only
    /// where its form is within 10%), else the prediction.
    pub name: &'static str,
    /// What the indicators alone predict.
    pub predicted: &'static str,
    pub checked: bool,
    /// Whether some closed form is within 10% of the exact headroom (`None` when unchecked).
    pub some_form_within_10_percent: Option<bool>,
    pub indicator: f64,
    pub shift: Option<f64>,
}

impl RegimeJson {
    pub fn of(forms: &closed_form::ClosedForms) -> Self {
        Self {
            name: forms.regime.name(),
            predicted: forms.prediction.name(),
            checked: forms.exact_headroom.is_some(),
            some_form_within_10_percent: forms.exact_headroom.map(|_| forms.some_form_holds()),
            indicator: forms.indicator,
            shift: forms.shift,
        }
    }
}

impl ClosedForms {
    /// The estimates in the model's units.
    pub fn of(forms: &closed_form::ClosedForms, units: &crate::units::Units) -> Self {
        let estimate = |h: f64| Estimate {
            headroom: units.from_kt(h),
        };
        Self {
            near_equilibrium: forms
                .near_equilibrium
                .as_ref()
                .map(|e| estimate(e.headroom)),
            strong_drive: forms.strong_drive.as_ref().map(|s| estimate(s.headroom)),
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct Estimate {
    pub headroom: f64,
}

impl DesignJson {
    fn new(d: &VerifiedDesign, model: &Model, bound: &Bound) -> Self {
        let u = &model.units;
        let headroom = bound.headroom();
        DesignJson {
            pathways: d
                .pathways
                .iter()
                .map(|p| PathwayJson::of(p, model))
                .collect(),
            achieved_power: u.from_kt(d.verified.power),
            achieved_power_roundoff: u.from_kt(d.verified.roundoff),
            fraction_of_headroom: (headroom > 0.0)
                .then(|| (d.verified.power - bound.baseline_power) / headroom),
            predicted_power: u.from_kt(d.predicted_power),
            largest_rate: d
                .pathways
                .iter()
                .map(|p| p.forward.max(p.backward))
                .fold(0.0, f64::max),
            precision: None,
        }
    }
}

/// The model's cautions and those of the designs the bound report prints.
fn bound_cautions(
    model: &Model,
    design: Option<&VerifiedDesign>,
    capped: Option<(f64, &VerifiedDesign)>,
) -> Vec<crate::model::Caution> {
    let largest = design
        .into_iter()
        .chain(capped.map(|(_, d)| d))
        .flat_map(|d| &d.pathways)
        .map(|p| p.forward.max(p.backward))
        .fold(0.0, f64::max);
    crate::model::caution::with_designs(model, largest)
}

impl BoundReport {
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        model: &Model,
        bound: &Bound,
        pairs: &PairSelection,
        attaining: &Attaining,
        target_fraction: f64,
        capped: Option<(f64, &VerifiedDesign)>,
        forms: &closed_form::ClosedForms,
    ) -> Self {
        let u = &model.units;
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            pairs: describe_pairs(model, pairs),
            route: bound.route,
            baseline_power: u.from_kt(bound.baseline_power),
            baseline_power_roundoff: u.from_kt(bound.baseline_roundoff),
            bound: BoundNumbers::of(bound, u),
            benefit: u.from_kt(bound.benefit),
            maintenance_cost: u.from_kt(bound.maintenance),
            optimal_distribution: named_log_distribution(model, &bound.log_p),
            baseline_distribution: named_distribution(model, &bound.baseline),
            design: attaining
                .design
                .as_ref()
                .map(|d| DesignJson::new(d, model, bound)),
            target_fraction,
            speed_table: attaining
                .speeds
                .iter()
                .map(|&(fraction, speed)| SpeedRow::of(fraction, speed))
                .collect(),
            speed_basis: attaining.basis,
            speed_curve: attaining.curve.clone(),
            tree_speed_curve: attaining.tree_curve.clone(),
            regime: RegimeJson::of(forms),
            closed_forms: ClosedForms::of(forms, u),
            rate_capped_failure: None,
            rate_capped: capped.map(|(rate_cap, d)| CappedJson {
                rate_cap,
                design: DesignJson::new(d, model, bound),
            }),
            precision: None,
            cautions: bound_cautions(model, attaining.design.as_ref(), capped),
        }
    }

    pub fn text(&self) -> String {
        let p = &self.units.power;
        let t = &self.units.time;
        let mut out = format!(
            "Universal bound for {}\n{}\n\n",
            self.title,
            wrap(&format!("added pathways on: {}", self.pairs), "  ", 78)
        );
        out.push_str(&format!(
            "  baseline power       {} {p}\n  bound                {} {p}\n  certified upper      {} {p}  (relative gap {:.1e})\n  headroom             {} {p}\n{}  benefit at optimum   {} {p}, minus maintenance cost {} {p}\n  solved by            {}\n\n",
            bounded(self.baseline_power, self.baseline_power_roundoff),
            bounded(self.bound.power, self.bound.power_roundoff),
            num(self.bound.certified_upper),
            self.bound.relative_gap,
            bounded(self.bound.headroom, self.bound.headroom_roundoff),
            self.closed_form_lines(),
            num(self.benefit),
            num(self.maintenance_cost),
            self.route
        ));
        if let Some(pr) = &self.precision {
            out.push_str("  baseline fluctuations of the work current:\n");
            out.push_str(&pr.lines(&self.units, "    "));
            out.push('\n');
        }
        let mut dist = Table::new(&[
            ("state", Align::Left),
            ("baseline p", Align::Right),
            ("optimal p", Align::Right),
        ]);
        for (b, o) in self
            .baseline_distribution
            .iter()
            .zip(&self.optimal_distribution)
        {
            dist.row(vec![b.name.clone(), b.text(), o.text()]);
        }
        out.push_str(&dist.render());
        match &self.design {
            None => out.push_str("\n  No headroom: added pathways cannot raise the harvesting power of this network.\n"),
            Some(d) => {
                out.push_str(&format!("\nAttaining design at {} of the headroom (fewest pathways; tree design):\n", percent(self.target_fraction)));
                out.push_str(&design_text(d, &self.units));
                let (heading, column) = speed_heading(self.speed_basis);
                let mut speed = Table::new(&[("share of headroom", Align::Right), (&format!("{column} /{t}"), Align::Right)]);
                for row in &self.speed_table {
                    speed.row(vec![percent(row.fraction), row.text()]);
                }
                out.push('\n');
                out.push_str(&wrap(heading, "", 78));
                out.push('\n');
                out.push_str(&speed.render());
            }
        }
        if let Some(c) = &self.rate_capped {
            out.push_str(&format!(
                "\nBest design with every added rate <= {} /{t} (exact convex program):\n",
                num(c.rate_cap)
            ));
            out.push_str(&design_text(&c.design, &self.units));
        }
        if let Some(f) = &self.rate_capped_failure {
            out.push_str(&format!(
                "\nBest design with every added rate <= {} /{t}: not available ({}). `ergopath design` searches such designs without relying on the conic solver alone.\n",
                num(f.rate_cap),
                f.reason
            ));
        }
        if self.precision.is_some() {
            out.push('\n');
            out.push_str(&wrap(super::precision::PRECISION_CAUTION, "  ", 78));
            out.push('\n');
        }
        out.push_str(&super::cautions_text(&self.cautions));
        out
    }
}

impl BoundReport {
    /// The report's tables as CSV: `summary` (first; one row with the text's figures: powers,
    /// round-off bounds, gap, regime, closed forms, benefit and cost, and each printed
    /// design's verified power), `states` (baseline and optimal distribution; the optimum's
    /// logarithm too, since it may lie below the double range), `pathways` (the attaining
    /// design's and the rate-capped design's pathways, `design` naming which) and `speed`
    /// (the speed table).
    pub fn tables(&self) -> Vec<(&'static str, String)> {
        use super::csv::{per, with_unit, Cell, Csv};
        let (p, t, e) = (&self.units.power, self.units.time, self.units.energy);
        let mut summary = Csv::new(&[
            with_unit("baseline_power", p),
            with_unit("baseline_power_roundoff", p),
            with_unit("bound", p),
            with_unit("bound_roundoff", p),
            with_unit("certified_upper", p),
            "relative_gap".into(),
            with_unit("headroom", p),
            with_unit("headroom_roundoff", p),
            "regime".into(),
            "predicted_regime".into(),
            with_unit("indicator", "kT"),
            "shift".into(),
            with_unit("near_equilibrium", p),
            with_unit("strong_drive", p),
            with_unit("benefit", p),
            with_unit("maintenance_cost", p),
            "route".into(),
            "target_fraction".into(),
            with_unit("attaining_power", p),
            with_unit("attaining_power_roundoff", p),
            "attaining_fraction_of_headroom".into(),
            with_unit("rate_cap", &per(t)),
            with_unit("capped_power", p),
            with_unit("capped_power_roundoff", p),
            "capped_fraction_of_headroom".into(),
        ]);
        let design = |d: Option<&DesignJson>| -> [Cell; 3] {
            match d {
                Some(d) => [
                    d.achieved_power.into(),
                    d.achieved_power_roundoff.into(),
                    d.fraction_of_headroom.into(),
                ],
                None => [Cell::Missing, Cell::Missing, Cell::Missing],
            }
        };
        let capped = self.rate_capped.as_ref();
        let cap = capped
            .map(|c| c.rate_cap)
            .or(self.rate_capped_failure.as_ref().map(|f| f.rate_cap));
        let mut row: Vec<Cell> = vec![
            self.baseline_power.into(),
            self.baseline_power_roundoff.into(),
            self.bound.power.into(),
            self.bound.power_roundoff.into(),
            self.bound.certified_upper.into(),
            self.bound.relative_gap.into(),
            self.bound.headroom.into(),
            self.bound.headroom_roundoff.into(),
            self.regime.name.into(),
            self.regime.predicted.into(),
            self.regime.indicator.into(),
            self.regime.shift.into(),
            self.closed_forms
                .near_equilibrium
                .as_ref()
                .map(|x| x.headroom)
                .into(),
            self.closed_forms
                .strong_drive
                .as_ref()
                .map(|x| x.headroom)
                .into(),
            self.benefit.into(),
            self.maintenance_cost.into(),
            self.route.into(),
            self.target_fraction.into(),
        ];
        row.extend(design(self.design.as_ref()));
        row.push(cap.into());
        row.extend(design(capped.map(|c| &c.design)));
        summary.row(row);

        let mut states = Csv::new(&[
            "state",
            "baseline_probability",
            "optimal_probability",
            "optimal_ln_probability",
        ]);
        for (b, o) in self
            .baseline_distribution
            .iter()
            .zip(&self.optimal_distribution)
        {
            states.row(vec![
                (&b.name).into(),
                b.probability.into(),
                o.probability.into(),
                o.ln_probability.unwrap_or(o.probability.ln()).into(),
            ]);
        }

        let mut pathways = Csv::new(&[
            "design".to_string(),
            "from".into(),
            "to".into(),
            with_unit("forward", &per(t)),
            with_unit("backward", &per(t)),
            with_unit("work_per_jump", e),
        ]);
        let designs = self
            .design
            .iter()
            .map(|d| ("attaining", d))
            .chain(capped.map(|c| ("rate-capped", &c.design)));
        for (name, d) in designs {
            for w in &d.pathways {
                pathways.row(vec![
                    name.into(),
                    (&w.from).into(),
                    (&w.to).into(),
                    w.forward.into(),
                    w.backward.into(),
                    w.work.into(),
                ]);
            }
        }

        let mut speed = Csv::new(&[
            "fraction_of_headroom".to_string(),
            with_unit("rate_needed", &per(t)),
            "basis".to_string(),
        ]);
        let basis = match self.speed_basis {
            SpeedBasis::Frontier => "frontier",
            SpeedBasis::TreeDesign => "tree_design",
        };
        for r in &self.speed_table {
            speed.row(vec![r.fraction.into(), r.speed.into(), basis.into()]);
        }
        vec![
            ("summary", summary.finish()),
            ("states", states.finish()),
            ("pathways", pathways.finish()),
            ("speed", speed.finish()),
        ]
    }

    /// The regime line and one line per closed-form estimate with its error.
    fn closed_form_lines(&self) -> String {
        let r = &self.regime;
        let mut out = format!(
            "  regime               {} (indicator {}, shift {})\n",
            r.name,
            num(r.indicator),
            r.shift.map_or("-".into(), num)
        );
        if r.checked && r.predicted != r.name {
            out.push_str(&format!(
                "  {:<20} the indicators point to {}, but that form is more than 10% off\n",
                "", r.predicted
            ));
        }
        if r.some_form_within_10_percent == Some(false) {
            out.push_str(&format!(
                "  {:<20} no closed form is within 10% of the exact headroom here\n",
                ""
            ));
        }
        if !r.checked {
            out.push_str(&format!(
                "  {:<20} the closed forms estimate the bound over all pairs, not this restricted one\n",
                ""
            ));
        }
        let forms = [
            (
                "near equilibrium",
                "quadratic form",
                &self.closed_forms.near_equilibrium,
            ),
            (
                "strong drive",
                "corner limit, first correction",
                &self.closed_forms.strong_drive,
            ),
        ];
        for (name, what, estimate) in forms {
            let Some(e) = estimate else { continue };
            // A form is shown only in its own regime (or at the crossover, where both are
            // candidates): elsewhere its number would mislead.
            if r.name != name && r.name != "crossover" {
                out.push_str(&format!(
                    "  {name:<20} not applicable (the regime is {})\n",
                    r.name
                ));
                continue;
            }
            let error = if r.checked && self.bound.headroom != 0.0 {
                let off = (e.headroom - self.bound.headroom).abs() / self.bound.headroom.abs();
                format!("  ({what}, {} off)", percent(off))
            } else {
                format!("  ({what})")
            };
            out.push_str(&format!(
                "  {name:<20} {} {}{error}\n",
                num(e.headroom),
                self.units.power
            ));
        }
        out
    }

    /// Share of the headroom against the rate cap: the frontier (or, beyond its size limit, the
    /// tree design's curve alone), the tree design's own curve, the speed table's points, the
    /// exact capped design, and the universal bound as a dashed line.
    pub fn svg(&self) -> Option<String> {
        use super::svg::{Chart, Series};
        let spans = [&self.speed_curve, &self.tree_speed_curve];
        let lo = spans
            .iter()
            .filter_map(|c| c.first())
            .map(|p| p.0)
            .fold(f64::INFINITY, f64::min);
        let hi = spans
            .iter()
            .filter_map(|c| c.last())
            .map(|p| p.0)
            .fold(0.0, f64::max);
        if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
            return None;
        }
        let line = |name: &str, points: &[(f64, f64)], dashed: bool| Series {
            name: name.into(),
            points: points.to_vec(),
            dashed,
            markers: false,
            joined: true,
        };
        let mut series = Vec::new();
        if self.speed_basis == SpeedBasis::Frontier && !self.speed_curve.is_empty() {
            series.push(line(
                "frontier (best design at each cap)",
                &self.speed_curve,
                false,
            ));
        }
        if !self.tree_speed_curve.is_empty() {
            series.push(line("tree design scaled", &self.tree_speed_curve, false));
        }
        series.push(line("universal bound", &[(lo, 1.0), (hi, 1.0)], true));
        let table: Vec<(f64, f64)> = self
            .speed_table
            .iter()
            .filter_map(|r| r.speed.map(|s| (s, r.fraction)))
            .collect();
        if !table.is_empty() {
            series.push(Series {
                name: "speed table".into(),
                points: table,
                dashed: false,
                markers: true,
                joined: false,
            });
        }
        if let Some(c) = &self.rate_capped {
            if let Some(f) = c.design.fraction_of_headroom {
                series.push(Series {
                    name: "exact best at cap".into(),
                    points: vec![(c.rate_cap, f)],
                    dashed: false,
                    markers: true,
                    joined: false,
                });
            }
        }
        let chart = Chart {
            title: format!("How fast added pathways must be: {}", self.title),
            x_label: format!("rate cap: largest added rate (per {})", self.units.time),
            y_label: "share of the headroom reached".into(),
            log_x: true,
            log_y: false,
            series,
        };
        Some(chart.render())
    }
}

/// The speed table's heading and rate column for its basis.
fn speed_heading(basis: SpeedBasis) -> (&'static str, &'static str) {
    match basis {
        SpeedBasis::Frontier => (
            "How fast added pathways must be: the smallest per-pathway rate cap at which some design on the allowed pairs reaches each share (the exact capped program, certified; no design with every rate below it does):",
            "smallest rate cap",
        ),
        SpeedBasis::TreeDesign => (
            "How fast the tree design above must be: the largest added rate it needs for each share (one design scaled up, so an upper bound on the smallest cap; the exact frontier is computed up to 60 states):",
            "tree design's largest rate",
        ),
    }
}

/// `all pairs` or `A/B,C/D` with state names.
pub fn describe_pairs(model: &Model, pairs: &PairSelection) -> String {
    if let Some(envs) = &model.environments {
        if *pairs == envs.within_each(&PairSelection::All) {
            return format!(
                "every pair of system states, within each environment state ({})",
                envs.names.join(", ")
            );
        }
    }
    match pairs {
        PairSelection::All => "all pairs".to_string(),
        PairSelection::Only(list) => list
            .iter()
            .map(|&(a, b)| format!("{}/{}", model.state_names[a], model.state_names[b]))
            .collect::<Vec<_>>()
            .join(", "),
    }
}

fn design_text(d: &DesignJson, units: &UnitsJson) -> String {
    let power_unit = units.power.as_str();
    let (forward, backward, work) = (
        format!("forward /{}", units.time),
        format!("backward /{}", units.time),
        format!("work/jump {}", units.energy),
    );
    let mut table = Table::new(&[
        ("pathway (net flux from -> to)", Align::Left),
        (&forward, Align::Right),
        (&backward, Align::Right),
        (&work, Align::Right),
    ]);
    for pw in &d.pathways {
        table.row(vec![
            format!("{} -> {}", pw.from, pw.to),
            num(pw.forward),
            num(pw.backward),
            num(pw.work),
        ]);
    }
    let mut out = table.render();
    if super::table::determined(d.achieved_power, d.achieved_power_roundoff) {
        out.push_str(&format!(
            "  verified power {} +- {:.1e} {power_unit} ({} of headroom)\n",
            num(d.achieved_power),
            d.achieved_power_roundoff,
            d.fraction_of_headroom.map_or("n/a".into(), percent),
        ));
    } else {
        // Never called verified: the independent solve does not determine this power.
        out.push_str(&format!(
            "  power of this design not determined by double precision: {} {power_unit}\n",
            bounded(d.achieved_power, d.achieved_power_roundoff),
        ));
    }
    out.push_str(&format!(
        "  construction predicts {} {power_unit}\n",
        num(d.predicted_power)
    ));
    if let Some(pr) = &d.precision {
        out.push_str("  fluctuations of the work current with this design:\n");
        out.push_str(&pr.lines(units, "    "));
    }
    out
}
