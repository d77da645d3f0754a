//! The precision side of the commands: fluctuations of every ranked design, the Fano-factor
//! limit of `design --max-fano`, and `ergopath simulate` (with its `--design` file reader).
//!
//! Runs stages and builds reports only: the physics is in [`crate::fluctuation`], the layout in
//! [`crate::report::precision`]. Nothing here prints or exits.

use super::{emit, Error, Format, Rendered};
use crate::bound::design::Pathway;
use crate::fluctuation::{self, Precision, SimulationSettings};
use crate::model::{Model, Network};
use crate::report::output::to_json;
use crate::report::precision::{PrecisionJson, SimulateReport};
use crate::search::Outcome;
use crate::steady::SteadySettings;
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};

/// Fluctuations of the work current of `network` with `pathways` added.
pub(crate) fn design_precision(
    network: &Network,
    pathways: &[Pathway],
) -> Result<Precision, Error> {
    let extra: Vec<crate::model::Channel> = pathways.iter().map(Pathway::channel).collect();
    let joint = network.with_channels(&extra);
    Ok(fluctuation::of_network(&joint, &SteadySettings::default())?.2)
}

/// The ranked designs of `outcome` with their precision; with `max_fano` (energy unit), only
/// those whose `|2D/J|` plus its round-off bound is at most the limit (a design whose Fano factor
/// is not determined cannot be shown to meet it and is left out). Returns the kept outcome,
/// the precision of each kept design in rank order, and how many were left out.
/// How many times `--top` designs the search keeps by power when `--max-fano` screens them.
pub const FANO_POOL: usize = 10;

pub(crate) fn screen(
    model: &Model,
    outcome: &Outcome,
    max_fano: Option<(f64, usize)>,
) -> Result<(Outcome, Vec<Precision>, usize), Error> {
    let (max_fano, top) = match max_fano {
        Some((x, top)) => (Some(x), top),
        None => (None, usize::MAX),
    };
    if let Some(x) = max_fano.filter(|x| !(x.is_finite() && *x > 0.0)) {
        return Err(Error::Usage(format!(
            "--max-fano {x}: give a positive Fano factor 2D/J in the model's energy unit ({}), e.g. --max-fano 10",
            model.units.energy.name()
        )));
    }
    let limit_kt = max_fano.map(|x| model.units.to_kt(x));
    let mut kept = outcome.clone();
    kept.designs.clear();
    let mut precisions = Vec::new();
    let mut left_out = 0;
    for found in &outcome.designs {
        let precision = design_precision(&model.network, &found.pathways(&model.network))?;
        let meets = match (limit_kt, precision.fano_factor.figure()) {
            (None, _) => true,
            (Some(limit), Some(f)) => f.value.abs() + f.roundoff <= limit,
            (Some(_), None) => false,
        };
        if meets && kept.designs.len() == top {
            break;
        }
        if meets {
            kept.designs.push(found.clone());
            precisions.push(precision);
        } else {
            left_out += 1;
        }
    }
    Ok((kept, precisions, left_out))
}

/// Settings of `ergopath simulate`.
#[derive(Debug, Clone)]
pub struct SimulateRequest {
    /// A design saved by `design --save` / `--json` (its rank-1 design) or by `bound` (its
    /// attaining design), whose pathways are added to the model.
    pub design: Option<PathBuf>,
    /// Length of each run, in the model's time unit.
    pub time: f64,
    pub runs: usize,
    pub seed: u64,
    pub quiet: bool,
    pub format: Format,
    pub save_root: Option<PathBuf>,
    /// A caller's stop flag (without one, Ctrl-C stops the runs).
    pub control: crate::search::Control,
}

/// Most runs accepted (the works are kept in memory, 32 bytes a run).
pub const MAX_RUNS: usize = 10_000_000;

/// Runs whose accumulated work is charted.
const CHARTED_RUNS: usize = 5;

/// Points of the charted time grid.
const CHART_POINTS: usize = 201;

/// Most jumps expected over all runs (about 10 minutes of one core at the measured speed).
pub const MAX_EXPECTED_JUMPS: f64 = 1e11;

/// Set by the Ctrl-C handler of `simulate`.
static STOP: AtomicBool = AtomicBool::new(false);

/// `ergopath simulate`: Gillespie runs of the model (with a saved design's pathways), the
/// empirical mean power and diffusion with 99% intervals beside the exact values.
pub fn simulate(path: &Path, request: &SimulateRequest) -> Result<String, Error> {
    simulate_on(&Model::load(path)?, request)
}

/// [`simulate`] on a model in memory.
pub fn simulate_on(model: &Model, request: &SimulateRequest) -> Result<String, Error> {
    let t_unit = model.units.time.name();
    if !(request.time.is_finite() && request.time > 0.0) {
        return Err(Error::Usage(format!(
            "--time {}: give the length of each run as a positive number of {t_unit}, e.g. --time 100",
            request.time
        )));
    }
    if !(2..=MAX_RUNS).contains(&request.runs) {
        return Err(Error::Usage(format!(
            "--runs {}: give between 2 and {MAX_RUNS} runs (the intervals need at least 2), e.g. --runs 1000",
            request.runs
        )));
    }
    let pathways = match &request.design {
        Some(file) => read_design(file, model)?,
        None => Vec::new(),
    };
    let extra: Vec<crate::model::Channel> = pathways.iter().map(Pathway::channel).collect();
    let network = model.network.with_channels(&extra);
    let (state, _, exact) = fluctuation::of_network(&network, &SteadySettings::default())?;
    let table = fluctuation::JumpTable::new(&network);
    // Expected jumps: the steady mean exit rate times the simulated time.
    let mean_exit: f64 = state
        .probabilities
        .iter()
        .zip(table.exit_rates())
        .map(|(p, k)| p * k)
        .sum();
    let expected = mean_exit * request.time * request.runs as f64;
    if !expected.is_finite() || expected > MAX_EXPECTED_JUMPS {
        return Err(Error::Usage(format!(
            "--time {} --runs {}: about {expected:.1e} jumps (mean exit rate {mean_exit:.3e} /{t_unit}), more than the {MAX_EXPECTED_JUMPS:.0e} accepted: give a shorter --time or fewer --runs",
            request.time, request.runs
        )));
    }
    let settings = SimulationSettings {
        time: request.time,
        runs: request.runs,
        seed: request.seed,
        recorded_runs: if request.save_root.is_some() {
            CHARTED_RUNS.min(request.runs)
        } else {
            0
        },
        grid_points: CHART_POINTS,
    };
    let stationary = fluctuation::cumulative(&state.probabilities);
    let stop: &AtomicBool = match &request.control.stop {
        Some(flag) => flag,
        None => {
            let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
            &STOP
        }
    };
    let bar = crate::progress::Bar::new(request.quiet, model.units.power_label(), 1.0);
    bar.start_counting(request.runs as u64, "runs");
    let jumps = AtomicU64::new(0);
    let runs: Vec<Option<fluctuation::Run>> = (0..request.runs)
        .into_par_iter()
        .map(|i| {
            if stop.load(Ordering::Relaxed) {
                return None;
            }
            let run = fluctuation::simulate_run(&table, &stationary, &settings, i, stop)?;
            let total = jumps.fetch_add(run.jumps, Ordering::Relaxed) + run.jumps;
            bar.step(format!("{total} jumps"));
            Some(run)
        })
        .collect();
    bar.finish_counting();
    let finished: Vec<fluctuation::Run> = runs.into_iter().flatten().collect();
    if finished.len() < request.runs {
        return Err(Error::Interrupted(format!(
            "interrupted: {} of {} runs finished; nothing was printed or saved (rerun with fewer --runs or a shorter --time)",
            finished.len(),
            request.runs
        )));
    }
    let empirical = fluctuation::estimate(&finished, request.time);
    let step = request.time / (CHART_POINTS - 1) as f64;
    let times: Vec<f64> = if settings.recorded_runs > 0 {
        (0..CHART_POINTS).map(|k| k as f64 * step).collect()
    } else {
        Vec::new()
    };
    let trajectories: Vec<Vec<f64>> = finished
        .iter()
        .take(settings.recorded_runs)
        .map(|r| r.trajectory.clone())
        .collect();
    let report = SimulateReport::new(
        model,
        request.design.as_ref().map(|p| p.display().to_string()),
        &settings,
        &empirical,
        &exact,
        times,
        trajectories,
    );
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: vec![("estimates", report.csv())],
        svg: report.svg(),
    };
    emit(
        model,
        "simulate",
        request.format,
        request.save_root.as_deref(),
        rendered,
    )
}

/// Largest design file read (a saved design report is a few kilobytes).
const DESIGN_FILE_LIMIT: u64 = 16 << 20;

/// LDB tolerance (kT) between a saved pathway's rates and its work label.
const DESIGN_LDB_TOLERANCE: f64 = 1e-6;

/// The pathways of a design saved by `design` (`designs[0]`, the best-ranked) or by `bound`
/// (`design`, the attaining design), checked against `model` in full: every failure names the
/// file, the place in it and a fix.
pub fn read_design(file: &Path, model: &Model) -> Result<Vec<Pathway>, Error> {
    read_ranked_design(file, model, 1)
}

/// [`read_design`] of the design ranked `rank` (1 = best) in a saved `design.json`; a
/// `bound.json` holds one design, rank 1.
pub fn read_ranked_design(file: &Path, model: &Model, rank: usize) -> Result<Vec<Pathway>, Error> {
    let name = file.display();
    let bad = |place: &str, problem: String, fix: &str| {
        Error::Usage(format!("{name}: {place}: {problem}\n  fix: {fix}"))
    };
    let regenerate = "give the design.json or bound.json that `ergopath design --save` or `ergopath bound --save` wrote for this model (or their --json output), unedited";
    let text = crate::model::read_text_file(file, DESIGN_FILE_LIMIT).map_err(|e| {
        bad(
            "cannot read the design file",
            e.to_string(),
            "give the path of a saved design.json or bound.json",
        )
    })?;
    let value: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        bad(
            &format!("line {}, column {}", e.line(), e.column()),
            format!("not JSON ({e})"),
            regenerate,
        )
    })?;
    let energy = value
        .pointer("/units/energy")
        .and_then(|v| v.as_str())
        .ok_or_else(|| {
            bad(
                "units.energy",
                "missing: this is not a saved ergopath report".into(),
                regenerate,
            )
        })?;
    if energy != model.units.energy.name() {
        return Err(bad(
            "units.energy",
            format!(
                "'{energy}', but {} is written in '{}'",
                model.source.display(),
                model.units.energy.name()
            ),
            "give a design saved for this model",
        ));
    }
    let place = format!("designs[{}]", rank.saturating_sub(1));
    let (place, design) = if let Some(designs) = value.get("designs") {
        let ranked = designs.as_array().map_or(0, Vec::len);
        if ranked == 0 {
            return Err(bad(
                "designs",
                "no ranked design in this file".into(),
                "rerun `ergopath design` with a budget that admits designs, and save it",
            ));
        }
        let chosen = designs
            .as_array()
            .and_then(|a| a.get(rank.wrapping_sub(1)))
            .ok_or_else(|| {
                bad(
                    "designs",
                    format!("no design ranked {rank}: the file ranks {ranked}"),
                    &format!("give a rank from 1 to {ranked}"),
                )
            })?;
        (place.as_str(), chosen)
    } else if let Some(d) = value.get("design").filter(|d| !d.is_null()) {
        if rank != 1 {
            return Err(bad(
                "design",
                format!("a bound report holds one design (rank 1), not rank {rank}"),
                "give rank 1, or a design.json that ranks several designs",
            ));
        }
        ("design", d)
    } else {
        return Err(bad(
            "top level",
            "neither `designs` (a design report) nor `design` (a bound report) is present".into(),
            regenerate,
        ));
    };
    let list = design
        .get("pathways")
        .and_then(|p| p.as_array())
        .filter(|a| !a.is_empty())
        .ok_or_else(|| {
            bad(
                &format!("{place}.pathways"),
                "missing or empty".into(),
                regenerate,
            )
        })?;
    let mut pathways = Vec::with_capacity(list.len());
    for (k, entry) in list.iter().enumerate() {
        let at = |key: &str| format!("{place}.pathways[{k}].{key}");
        let state = |key: &str| -> Result<usize, Error> {
            let text = entry
                .get(key)
                .and_then(|v| v.as_str())
                .ok_or_else(|| bad(&at(key), "missing or not a state name".into(), regenerate))?;
            model.state_index(text).ok_or_else(|| {
                bad(
                    &at(key),
                    format!(
                        "no state '{text}' in {}",
                        crate::report::output::printable(&model.source.display().to_string())
                    ),
                    "give a design saved for this model (state names must match)",
                )
            })
        };
        let number = |key: &str, positive: bool| -> Result<f64, Error> {
            let x = entry
                .get(key)
                .and_then(|v| v.as_f64())
                .ok_or_else(|| bad(&at(key), "missing or not a number".into(), regenerate))?;
            let usable = x.is_finite() && (!positive || x >= f64::MIN_POSITIVE);
            if !usable {
                return Err(bad(
                    &at(key),
                    format!(
                        "{x:e} is not a {}",
                        if positive {
                            "positive normal rate"
                        } else {
                            "finite work"
                        }
                    ),
                    regenerate,
                ));
            }
            Ok(x)
        };
        let (from, to) = (state("from")?, state("to")?);
        if from == to {
            return Err(bad(
                &at("to"),
                "a pathway must join two different states".into(),
                regenerate,
            ));
        }
        let (forward, backward) = (number("forward", true)?, number("backward", true)?);
        let work = model.units.to_kt(number("work", false)?);
        let pathway = Pathway::with_rates(&model.network, from, to, forward, backward);
        let mismatch = (pathway.work - work).abs();
        if !pathway.work.is_finite() || mismatch > DESIGN_LDB_TOLERANCE * (1.0 + work.abs()) {
            return Err(bad(
                &at("work"),
                format!(
                    "{} {} per jump, but the rates and the model's energies give {} (local detailed balance)",
                    model.units.from_kt(work),
                    model.units.energy.name(),
                    model.units.from_kt(pathway.work)
                ),
                "give a design saved for this model and these energies, unedited",
            ));
        }
        pathways.push(pathway);
    }
    Ok(pathways)
}

/// Sets the precision of each sweep point's best design (`bests` in point order) and returns
/// the baseline's.
pub(crate) fn sweep_precision(
    model: &Model,
    bests: &[Option<&crate::search::Found>],
    points: &mut [crate::report::sweep::SweepPoint],
) -> Result<PrecisionJson, Error> {
    for (point, best) in points.iter_mut().zip(bests) {
        if let Some(found) = best {
            let precision = design_precision(&model.network, &found.pathways(&model.network))?;
            point.precision = Some(PrecisionJson::of(&precision, &model.units));
        }
    }
    Ok(PrecisionJson::of(
        &design_precision(&model.network, &[])?,
        &model.units,
    ))
}

/// The power-precision frontier of a sweep: in the text output after the sweep's own report,
/// and with `--save` as its own report (`frontier-<over>.txt`, `.json`, `.svg`).
pub(crate) fn emit_frontier(
    model: &Model,
    report: &crate::report::sweep::SweepReport,
    baseline: &PrecisionJson,
    request: &super::SweepRequest,
    printed: String,
) -> Result<String, Error> {
    let text = report.frontier_text(baseline);
    let Some(root) = request.save_root.as_deref() else {
        return Ok(if request.format == Format::Text {
            format!("{printed}\n{text}")
        } else {
            printed
        });
    };
    #[derive(serde::Serialize)]
    struct Frontier<'a> {
        title: &'a str,
        over: &'a str,
        baseline_power: f64,
        baseline_precision: &'a PrecisionJson,
        points: &'a [crate::report::sweep::SweepPoint],
    }
    let json = to_json(&Frontier {
        title: &report.title,
        over: report.over,
        baseline_power: report.baseline_power,
        baseline_precision: baseline,
        points: &report.points,
    })?;
    let rendered = Rendered {
        text: text.clone(),
        json,
        tables: vec![("frontier", report.frontier_csv(baseline))],
        svg: report.frontier_svg(baseline),
    };
    // The text form with its own "saved:" note.
    let shown = emit(
        model,
        &format!("frontier-{}", report.over),
        Format::Text,
        Some(root),
        rendered,
    )?;
    Ok(if request.format == Format::Text {
        format!("{printed}\n{shown}")
    } else {
        printed
    })
}
