//! `ergopath uncertainty` and the ranking under uncertainty of `design --samples`: load, sample
//! through [`crate::uncertainty`], build the report. Nothing here samples or solves by itself.

use super::{emit, resolve_pairs, Error, Format, Rendered, SearchKnobs};
use crate::model::Model;
use crate::report::output::to_json;
use crate::report::uncertainty::{RobustDesignJson, RobustRankingJson, UncertaintyReport};
use crate::uncertainty::{self as stage, Summary, MAX_SAMPLES};
use std::path::{Path, PathBuf};

/// Settings of `ergopath uncertainty`.
#[derive(Debug, Clone, Default)]
pub struct UncertaintyRequest {
    pub pairs: Option<String>,
    pub samples: usize,
    pub seed: u64,
    /// Threads, quiet and the caller's control (the other search knobs are unused).
    pub knobs: SearchKnobs,
    pub format: Format,
    pub save_root: Option<PathBuf>,
}

/// The refusal of a model without uncertainty keys.
fn no_uncertainty(model: &Model) -> Error {
    Error::Usage(format!(
        "{} gives no uncertainty: add rate_uncertainty = 3 (a factor at 95%) or energy_uncertainty = 1 (energy unit) at the top or to states and transitions (see `ergopath reference`)",
        model.source.display()
    ))
}

/// `--samples N` checked.
pub(crate) fn check_samples(samples: usize) -> Result<(), Error> {
    if (2..=MAX_SAMPLES).contains(&samples) {
        Ok(())
    } else {
        Err(Error::Usage(format!(
            "--samples {samples}: give between 2 and {MAX_SAMPLES} samples, e.g. --samples 1000"
        )))
    }
}

/// `ergopath uncertainty`: quantiles of the baseline power, the bound and the headroom.
pub fn uncertainty(path: &Path, request: &UncertaintyRequest) -> Result<String, Error> {
    uncertainty_on(&Model::load(path)?, request)
}

/// [`uncertainty`] on a model in memory.
pub fn uncertainty_on(model: &Model, request: &UncertaintyRequest) -> Result<String, Error> {
    if model.uncertainty.is_none() {
        return Err(no_uncertainty(model));
    }
    check_samples(request.samples)?;
    let pairs = resolve_pairs(model, request.pairs.as_deref())?;
    let nominal = crate::bound::solve(&model.network, &pairs, &Default::default())?;
    let knobs = &request.knobs;
    let observer = knobs.observer(model);
    let outcomes = knobs.in_pool(|| {
        stage::solve_samples(
            model,
            &pairs,
            request.seed,
            request.samples,
            &*observer,
            &knobs.control,
        )
    })?;
    let Some(outcomes) = outcomes else {
        return Err(Error::Interrupted(
            "interrupted on request: nothing was printed or saved".into(),
        ));
    };
    let summary = Summary::of(&outcomes);
    if summary.bound.len() < 2 {
        return Err(Error::Usage(format!(
            "only {} of {} samples could be solved ({} out of range, {} not certified): narrow the uncertainties",
            summary.bound.len(),
            summary.samples,
            summary.out_of_range,
            summary.unsolved
        )));
    }
    let report = UncertaintyReport::new(
        model,
        crate::report::bound::describe_pairs(model, &pairs),
        request.seed,
        (nominal.baseline_power, nominal.power),
        &summary,
    );
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: report.tables(),
        svg: report.svg(),
    };
    emit(
        model,
        "uncertainty",
        request.format,
        request.save_root.as_deref(),
        rendered,
    )
}

/// The ranking under uncertainty of the designs `designs` (in nominal rank order) for
/// `design --samples N --quantile q`, keeping the best `top`.
pub(crate) fn robust_ranking(
    model: &Model,
    designs: &[Vec<crate::bound::design::Pathway>],
    (samples, q): (usize, f64),
    knobs: &SearchKnobs,
) -> Result<RobustRankingJson, Error> {
    if model.uncertainty.is_none() {
        return Err(no_uncertainty(model));
    }
    let ranked = knobs
        .in_pool(|| stage::rank_designs(model, designs, q, knobs.seed, samples, &knobs.control))?;
    // A stop on request is an interruption (exit 130, KeyboardInterrupt), not a failed solve.
    if knobs.control.stop_requested() {
        return Err(Error::Interrupted(
            "interrupted on request: nothing was printed or saved".into(),
        ));
    }
    let (scores, used) = ranked?;
    let u = &model.units;
    Ok(RobustRankingJson {
        samples,
        samples_used: used,
        seed: knobs.seed,
        quantile: q,
        designs: scores
            .iter()
            .take(knobs.top)
            .enumerate()
            .map(|(i, s)| RobustDesignJson {
                rank: i + 1,
                nominal_rank: s.design + 1,
                quantile_power: u.from_kt(s.quantile_power),
                first_share: s.first_share,
            })
            .collect(),
        caution: crate::report::uncertainty::CAUTION.to_string(),
    })
}
