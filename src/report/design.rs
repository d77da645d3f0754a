//! The `design` report: the budget, how the search went, and the ranked designs with their
//! pathways, verified power, share of the headroom and cost figures; as text, JSON, CSV and a
//! chart of the share of the headroom by rank.

use super::bound::{BoundNumbers, PathwayJson};
use super::precision::{PrecisionJson, PRECISION_CAUTION};
use super::table::{bounded, num, percent, sci, wrap, Align, Table};
use super::UnitsJson;
use crate::bound::{design::Pathway, Bound};
use crate::model::Model;
use crate::search::{Budget, Found, Outcome};
use serde::Serialize;

/// The limits used, in the model's units.
#[derive(Debug, Clone, Serialize)]
pub struct BudgetJson {
    pub max_pathways: usize,
    pub rate_cap: Option<f64>,
    pub total_rate: Option<f64>,
    pub work_limit: Option<f64>,
    /// Largest added rate searched ([`crate::search::rate_ceiling`]): a larger cap or total rate
    /// was lowered to it.
    pub rate_ceiling: f64,
}

impl BudgetJson {
    pub fn of(budget: &Budget, model: &Model) -> Self {
        Self {
            max_pathways: budget.max_pathways,
            rate_cap: budget.rate_cap,
            total_rate: budget.total_rate,
            work_limit: budget.work_limit.map(|w| model.units.from_kt(w)),
            rate_ceiling: crate::search::rate_ceiling(&model.network),
        }
    }

    /// Whether a cap or total rate sits at the ceiling (was lowered to it).
    fn at_ceiling(&self) -> bool {
        [self.rate_cap, self.total_rate]
            .iter()
            .flatten()
            .any(|&r| r >= self.rate_ceiling)
    }

    /// `up to 2 pathways, each rate <= 1000 /s, ...`.
    pub fn describe(&self, units: &UnitsJson) -> String {
        let mut parts = vec![format!(
            "up to {} pathway{}",
            self.max_pathways,
            if self.max_pathways == 1 { "" } else { "s" }
        )];
        if let Some(c) = self.rate_cap {
            parts.push(format!("each rate <= {} /{}", num(c), units.time));
        }
        if let Some(t) = self.total_rate {
            parts.push(format!(
                "all added rates together <= {} /{}",
                num(t),
                units.time
            ));
        }
        if let Some(w) = self.work_limit {
            parts.push(format!("|work per jump| <= {} {}", num(w), units.energy));
        }
        let mut text = parts.join(", ");
        if self.at_ceiling() {
            text.push_str(&format!(
                " (a larger cap is lowered to {} /{}, 10^12 times the fastest baseline rate: beyond it a design's power is not determined by double precision, and the universal bound is the answer)",
                num(self.rate_ceiling),
                units.time
            ));
        }
        text
    }
}

/// How the search went.
#[derive(Debug, Clone, Serialize)]
pub struct SearchJson {
    pub strategy: &'static str,
    pub candidate_pairs: usize,
    /// Pathway sets of sizes 1..k.
    pub space: u64,
    pub pruned: u64,
    /// Steady-state evaluations spent.
    pub scorings: u64,
    pub starts: usize,
    pub seed: u64,
}

/// One ranked design.
#[derive(Debug, Clone, Serialize)]
pub struct RankedDesign {
    pub rank: usize,
    pub pathways: Vec<PathwayJson>,
    /// Total power of baseline plus the pathways, from an independent steady-state solve.
    pub achieved_power: f64,
    pub achieved_power_roundoff: f64,
    pub fraction_of_headroom: Option<f64>,
    /// Sum of all added rates, both directions.
    pub total_rate: f64,
    /// Largest |work per jump| of the pathways.
    pub largest_work: f64,
    /// Entropy production of the added pathways (k_B per time unit).
    pub added_entropy_production: f64,
    /// Fluctuations of the work current of baseline plus pathways (methods, section 12).
    pub precision: Option<PrecisionJson>,
}

#[derive(Debug, Clone, Serialize)]
pub struct DesignReport {
    pub title: String,
    pub units: UnitsJson,
    pub pairs: String,
    pub baseline_power: f64,
    pub bound: BoundNumbers,
    pub budget: BudgetJson,
    pub search: SearchJson,
    /// Pathway sets scored.
    pub evaluated: u64,
    pub designs: Vec<RankedDesign>,
    /// Designs left out of the ranking: their verified power is not determined by double
    /// precision (its round-off bound covers their gain over the baseline).
    pub undetermined_designs: u64,
    /// `--max-fano`: the Fano-factor limit (energy unit) the ranked designs meet.
    pub max_fano: Option<f64>,
    /// Designs the search ranked that `max_fano` left out.
    pub left_out_by_fano: usize,
    /// How many times `--top` designs the search kept for the screen.
    #[serde(skip)]
    pub fano_pool: usize,
    pub cautions: Vec<crate::model::Caution>,
    /// `--samples N --quantile q`: the designs ranked under the model's uncertainty.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub uncertainty: Option<super::uncertainty::RobustRankingJson>,
}

impl RankedDesign {
    /// `pathways`: those of `found`, written along their net flux.
    fn new(rank: usize, found: &Found, pathways: &[Pathway], model: &Model, bound: &Bound) -> Self {
        let u = &model.units;
        let (power, roundoff) = found.verified.unwrap_or((found.power, f64::NAN));
        let headroom = bound.headroom();
        Self {
            rank,
            pathways: pathways.iter().map(|p| PathwayJson::of(p, model)).collect(),
            achieved_power: u.from_kt(power),
            achieved_power_roundoff: u.from_kt(roundoff),
            fraction_of_headroom: (headroom > 0.0)
                .then(|| (power - bound.baseline_power) / headroom),
            // A pathway acting in every environment state counts once against the budget.
            total_rate: pathways.iter().map(|p| p.forward + p.backward).sum::<f64>()
                / found.copies.max(1) as f64,
            largest_work: u.from_kt(pathways.iter().map(|p| p.work.abs()).fold(0.0, f64::max)),
            added_entropy_production: found.added_entropy,
            precision: None,
        }
    }
}

/// The model's cautions and those of the fastest ranked design.
fn design_cautions(model: &Model, outcome: &Outcome) -> Vec<crate::model::Caution> {
    let largest = outcome
        .designs
        .iter()
        .flat_map(|f| f.pathways(&model.network))
        .map(|p| p.forward.max(p.backward))
        .fold(0.0, f64::max);
    crate::model::caution::with_designs(model, largest)
}

impl DesignReport {
    /// `oriented`: the pathways of each ranked design along their net flux
    /// ([`crate::bound::design::oriented`]).
    pub fn new(
        model: &Model,
        bound: &Bound,
        pairs: String,
        outcome: &Outcome,
        oriented: &[Vec<Pathway>],
    ) -> Self {
        let s = &outcome.settings;
        Self {
            title: model.title.clone(),
            units: UnitsJson::of(model),
            pairs: if outcome.blind {
                format!("{pairs}; environment-blind: each pathway acts with the same rates in every environment state (its copies are listed)")
            } else {
                pairs
            },
            baseline_power: model.units.from_kt(bound.baseline_power),
            bound: BoundNumbers::of(bound, &model.units),
            budget: BudgetJson::of(&s.budget, model),
            search: SearchJson {
                strategy: outcome.strategy.describe(),
                candidate_pairs: outcome.candidate_pairs,
                space: outcome.space,
                pruned: outcome.pruned,
                scorings: outcome.scorings,
                starts: s.starts,
                seed: s.seed,
            },
            evaluated: outcome.evaluated,
            undetermined_designs: outcome.undetermined,
            max_fano: None,
            left_out_by_fano: 0,
            fano_pool: 1,
            cautions: design_cautions(model, outcome),
            uncertainty: None,
            designs: outcome
                .designs
                .iter()
                .zip(oriented)
                .enumerate()
                .map(|(i, (f, pathways))| RankedDesign::new(i + 1, f, pathways, model, bound))
                .collect(),
        }
    }

    /// The precision of each ranked design (in rank order) and the Fano-factor screen.
    pub fn attach_precision(
        &mut self,
        precisions: &[crate::fluctuation::Precision],
        units: &crate::units::Units,
        max_fano: Option<f64>,
        left_out: usize,
        fano_pool: usize,
    ) {
        for (d, p) in self.designs.iter_mut().zip(precisions) {
            d.precision = Some(PrecisionJson::of(p, units));
        }
        self.max_fano = max_fano;
        self.left_out_by_fano = left_out;
        self.fano_pool = fano_pool;
    }

    /// The precision table of the ranked designs, with the screen's note.
    fn precision_text(&self) -> String {
        let (e, t) = (&self.units.energy, &self.units.time);
        let mut out = String::from(
            "\nHow steady each ranked design's power is (fluctuations of the work current):\n",
        );
        let mut table = Table::new(&[
            ("rank", Align::Right),
            (&format!("diffusion D {e}^2/{t}"), Align::Right),
            (&format!("Fano 2D/J {e}"), Align::Right),
            ("uncertainty product Q", Align::Right),
        ]);
        for d in &self.designs {
            let Some(pr) = &d.precision else { continue };
            table.row(vec![
                d.rank.to_string(),
                bounded(pr.diffusion, pr.diffusion_roundoff),
                pr.fano_text(),
                pr.product_text(),
            ]);
        }
        out.push_str(&table.render());
        if let Some(x) = self.max_fano {
            out.push_str(&wrap(&format!("--max-fano {}: only designs whose Fano factor |2D/J| is at most {} {e} within its round-off are ranked; {} of the designs the search kept ({} times --top, by power) {} left out (a design whose Fano factor is not determined is left out too). The limit screens those best designs by power; it does not search for the most regular ones.", num(x), num(x), self.left_out_by_fano, self.fano_pool, if self.left_out_by_fano == 1 { "was" } else { "were" }), "  ", 78));
            out.push('\n');
        }
        out.push_str(&wrap(PRECISION_CAUTION, "  ", 78));
        out.push('\n');
        out
    }

    pub fn text(&self) -> String {
        let (p, t, e) = (&self.units.power, &self.units.time, &self.units.energy);
        let search = &self.search;
        let mut out = format!(
            "Design search for {}\n{}\n{}\n",
            self.title,
            wrap(
                &format!("budget: {}", self.budget.describe(&self.units)),
                "  ",
                78
            ),
            wrap(&format!("added pathways on: {}", self.pairs), "  ", 78),
        );
        out.push_str(&format!(
            "  search: {}; {} pathway sets from {} candidate pairs, {} scored, {} pruned ({}), {} steady-state evaluations\n\n",
            search.strategy,
            search.space,
            search.candidate_pairs,
            self.evaluated,
            search.pruned,
            percent(search.pruned as f64 / search.space.max(1) as f64),
            search.scorings
        ));
        out.push_str(&format!(
            "  baseline power    {} {p}\n  universal bound   {} {p}  (headroom {} {p})\n\n",
            num(self.baseline_power),
            num(self.bound.power),
            num(self.bound.headroom)
        ));
        let mut ranking = Table::new(&[
            ("rank", Align::Right),
            (&format!("power {p}"), Align::Right),
            ("share of headroom", Align::Right),
            (&format!("total rate /{t}"), Align::Right),
            (&format!("max |work| {e}"), Align::Right),
            (&format!("added entropy k_B/{t}"), Align::Right),
            ("pathways", Align::Left),
        ]);
        for d in &self.designs {
            ranking.row(vec![
                d.rank.to_string(),
                num(d.achieved_power),
                d.fraction_of_headroom.map_or("-".into(), percent),
                num(d.total_rate),
                num(d.largest_work),
                num(d.added_entropy_production),
                super::bound::pair_names(&d.pathways, ", "),
            ]);
        }
        out.push_str(&ranking.render());
        if self.undetermined_designs > 0 {
            out.push_str(&wrap(&format!("{} further designs are not ranked: their power is not determined by double precision (the round-off bound of the verifying steady state covers their gain over the baseline)", self.undetermined_designs), "  ", 78));
            out.push('\n');
        }
        let mut rates = Table::new(&[
            ("rank", Align::Right),
            ("pathway", Align::Left),
            (&format!("forward /{t}"), Align::Right),
            (&format!("backward /{t}"), Align::Right),
            (&format!("work/jump {e}"), Align::Right),
        ]);
        for d in &self.designs {
            for w in &d.pathways {
                rates.row(vec![
                    d.rank.to_string(),
                    format!("{} -> {}", w.from, w.to),
                    sci(w.forward),
                    sci(w.backward),
                    num(w.work),
                ]);
            }
        }
        out.push_str(
            "\nRates of the ranked designs (each verified by an independent steady-state solve; every\npathway written in the direction of its net flux):\n",
        );
        out.push_str(&rates.render());
        if self.designs.iter().any(|d| d.precision.is_some()) || self.max_fano.is_some() {
            out.push_str(&self.precision_text());
        }
        out.push_str(&super::cautions_text(&self.cautions));
        out
    }

    /// The report's tables as CSV: `pathways` (first; one row per pathway of every ranked
    /// design, with its design's figures), `ranking` (one row per design, the text's ranking
    /// columns) and, where computed, `precision` (the text's precision table).
    pub fn tables(&self) -> Vec<(&'static str, String)> {
        use super::csv::{per, with_unit, Csv};
        let (p, t, e) = (&self.units.power, self.units.time, self.units.energy);
        let entropy = format!("k_B/{t}");
        let mut pathways = Csv::new(&[
            "rank".to_string(),
            with_unit("achieved_power", p),
            "fraction_of_headroom".into(),
            with_unit("total_rate", &per(t)),
            with_unit("largest_work", e),
            with_unit("added_entropy_production", &entropy),
            "from".into(),
            "to".into(),
            with_unit("forward", &per(t)),
            with_unit("backward", &per(t)),
            with_unit("work", e),
        ]);
        let mut ranking = Csv::new(&[
            "rank".to_string(),
            with_unit("power", p),
            with_unit("power_roundoff", p),
            "fraction_of_headroom".into(),
            with_unit("total_rate", &per(t)),
            with_unit("largest_work", e),
            with_unit("added_entropy_production", &entropy),
            "pathways".into(),
        ]);
        let mut precision = Csv::new(&[
            "rank".to_string(),
            with_unit("diffusion", &format!("{e}^2/{t}")),
            with_unit("diffusion_roundoff", &format!("{e}^2/{t}")),
            with_unit("fano_factor", e),
            with_unit("fano_factor_roundoff", e),
            "uncertainty_product".into(),
            "uncertainty_product_roundoff".into(),
        ]);
        for d in &self.designs {
            for w in &d.pathways {
                pathways.row(vec![
                    d.rank.into(),
                    d.achieved_power.into(),
                    d.fraction_of_headroom.into(),
                    d.total_rate.into(),
                    d.largest_work.into(),
                    d.added_entropy_production.into(),
                    (&w.from).into(),
                    (&w.to).into(),
                    w.forward.into(),
                    w.backward.into(),
                    w.work.into(),
                ]);
            }
            ranking.row(vec![
                d.rank.into(),
                d.achieved_power.into(),
                d.achieved_power_roundoff.into(),
                d.fraction_of_headroom.into(),
                d.total_rate.into(),
                d.largest_work.into(),
                d.added_entropy_production.into(),
                super::bound::pair_names(&d.pathways, ", ").into(),
            ]);
            if let Some(pr) = &d.precision {
                precision.row(vec![
                    d.rank.into(),
                    pr.diffusion.into(),
                    pr.diffusion_roundoff.into(),
                    pr.fano_factor.into(),
                    pr.fano_factor_roundoff.into(),
                    pr.uncertainty_product.into(),
                    pr.uncertainty_product_roundoff.into(),
                ]);
            }
        }
        let mut tables = vec![
            ("pathways", pathways.finish()),
            ("ranking", ranking.finish()),
        ];
        if self.designs.iter().any(|d| d.precision.is_some()) {
            tables.push(("precision", precision.finish()));
        }
        tables
    }

    /// Share of the headroom by rank, with the universal bound as a dashed line.
    pub fn svg(&self) -> Option<String> {
        use super::svg::{Chart, Series};
        let points: Vec<(f64, f64)> = self
            .designs
            .iter()
            .filter_map(|d| d.fraction_of_headroom.map(|f| (d.rank as f64, f)))
            .collect();
        if points.is_empty() {
            return None;
        }
        let last = points.len().max(2) as f64;
        Some(
            Chart {
                title: format!("Best designs within the budget: {}", self.title),
                x_label: "rank".into(),
                y_label: "share of the headroom reached".into(),
                log_x: false,
                log_y: false,
                series: vec![
                    Series {
                        name: "ranked designs".into(),
                        points,
                        dashed: false,
                        markers: true,
                        joined: false,
                    },
                    Series {
                        name: "universal bound".into(),
                        points: vec![(1.0, 1.0), (last, 1.0)],
                        dashed: true,
                        markers: false,
                        joined: true,
                    },
                ],
            }
            .render(),
        )
    }
}
