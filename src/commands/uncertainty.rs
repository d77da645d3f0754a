//! `ergopath uncertainty` and the ranking under uncertainty of `design --samples`: load, sample
//! through [`crate::uncertainty`], build the report. Nothing here samples or solves by itself.

use super::files::{self, UNCERTAINTY_CHECKPOINT_FORMAT};
use super::search::{
    check_checkpoint_for, ctrl_c_pressed, damaged_checkpoint, foreign_checkpoint, locked,
    read_checkpoint, stop_on_ctrl_c,
};
use super::{emit, resolve_pairs, Error, Format, Rendered, SearchKnobs};
use crate::model::{Model, PairSelection};
use crate::report::output::{to_json, write_atomic, OutputError};
use crate::report::uncertainty::{RobustDesignJson, RobustRankingJson, UncertaintyReport};
use crate::uncertainty::{self as stage, SampleKeeper, SampleOutcome, Summary, MAX_SAMPLES};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

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
    /// Keep solved samples in this file (rewritten atomically as the run goes).
    pub checkpoint: Option<PathBuf>,
    /// Continue from the checkpoint file.
    pub resume: bool,
    /// Testing aid: stop as if interrupted after this many newly solved samples.
    pub stop_after: Option<usize>,
}

/// What an uncertainty checkpoint holds: the identity of the run and its solved samples. The
/// number of samples is not part of the identity: sample `i` depends only on the seed and `i`,
/// so a run with more samples continues a smaller one.
#[derive(Debug, Serialize, Deserialize)]
struct SampleCheckpoint {
    /// [`UNCERTAINTY_CHECKPOINT_FORMAT`]: files of another version are refused.
    format: String,
    fingerprint: String,
    seed: u64,
    /// The pairs added pathways may use (`None`: every pair).
    pairs: Option<Vec<(usize, usize)>>,
    solved: Vec<KeptSample>,
}

#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
struct KeptSample {
    index: u64,
    #[serde(flatten)]
    outcome: SampleOutcome,
}

/// The identity of the sampled networks: the nominal network and every spread.
fn sampling_fingerprint(model: &Model) -> String {
    let network = crate::search::fingerprint(&model.network);
    let Some(u) = &model.uncertainty else {
        return network;
    };
    let mut h: u64 = 0xcbf29ce484222325;
    let numbers = u.energy_sd.iter().chain(&u.ln_rate_sd).chain(&u.drive_sd);
    let links = u
        .channel_transition
        .iter()
        .map(|t| t.map_or(u64::MAX, |t| t as u64))
        .chain(u.state_system.iter().map(|&s| s as u64));
    for word in numbers.map(|x| x.to_bits()).chain(links) {
        for byte in word.to_le_bytes() {
            h = (h ^ byte as u64).wrapping_mul(0x100000001b3);
        }
    }
    format!("{network}-spread-{h:016x}")
}

/// Keeps solved samples in a file, rewritten atomically at most about once a second (and never
/// taking more than a tenth of the run), and stops the run on Ctrl-C, on a failed write or,
/// for tests, after a given number of new samples.
struct SampleFile {
    path: PathBuf,
    /// Samples read from the file on `--resume`.
    earlier: BTreeMap<u64, SampleOutcome>,
    content: Mutex<SampleCheckpoint>,
    /// When the file was last written and how long that took.
    last_write: Mutex<(Instant, Duration)>,
    new_samples: AtomicUsize,
    stop_after: Option<usize>,
    failure: Mutex<Option<OutputError>>,
    on_disk: AtomicUsize,
}

impl SampleFile {
    /// A keeper at `path`; with `resume`, the file must exist, belong to the same run and hold
    /// samples that re-solve to what it states. Written once at once, so that a checkpoint that
    /// cannot be written fails the command before any work is done.
    fn open(
        path: &Path,
        model: &Model,
        pairs: &PairSelection,
        (seed, resume, stop_after): (u64, bool, Option<usize>),
    ) -> Result<Self, Error> {
        let mut content = SampleCheckpoint {
            format: UNCERTAINTY_CHECKPOINT_FORMAT.into(),
            fingerprint: sampling_fingerprint(model),
            seed,
            pairs: match pairs {
                PairSelection::All => None,
                PairSelection::Only(p) => Some(p.clone()),
            },
            solved: Vec::new(),
        };
        let mut earlier = BTreeMap::new();
        if resume {
            let kept: SampleCheckpoint = read_checkpoint(path, "uncertainty")?;
            if kept.format != content.format
                || kept.fingerprint != content.fingerprint
                || kept.seed != content.seed
                || kept.pairs != content.pairs
            {
                return Err(foreign_checkpoint(path));
            }
            earlier = check_kept(&kept.solved, model, pairs, seed)
                .map_err(|why| damaged_checkpoint(path, &why))?;
            content.solved = kept.solved;
        }
        let started = Instant::now();
        write_atomic(path, files::sealed_json(&content)?.as_bytes())?;
        stop_on_ctrl_c();
        Ok(Self {
            path: path.to_path_buf(),
            on_disk: AtomicUsize::new(content.solved.len()),
            earlier,
            content: Mutex::new(content),
            last_write: Mutex::new((Instant::now(), started.elapsed())),
            new_samples: AtomicUsize::new(0),
            stop_after,
            failure: Mutex::new(None),
        })
    }

    /// Writes every solved sample to the file now.
    fn write(&self) {
        let content = locked(&self.content);
        let started = Instant::now();
        match files::sealed_json(&*content).and_then(|j| write_atomic(&self.path, j.as_bytes())) {
            Ok(()) => self.on_disk.store(content.solved.len(), Ordering::SeqCst),
            Err(e) => {
                locked(&self.failure).get_or_insert(e);
            }
        }
        *locked(&self.last_write) = (Instant::now(), started.elapsed());
    }

    /// Whether the file is due for a rewrite.
    fn due(&self) -> bool {
        let (at, took) = *locked(&self.last_write);
        at.elapsed() >= Duration::from_secs(1).max(took * 10)
    }
}

impl SampleKeeper for SampleFile {
    fn kept(&self, index: u64) -> Option<SampleOutcome> {
        self.earlier.get(&index).copied()
    }

    fn record(&self, index: u64, outcome: SampleOutcome) {
        self.new_samples.fetch_add(1, Ordering::SeqCst);
        locked(&self.content)
            .solved
            .push(KeptSample { index, outcome });
        if self.due() {
            self.write();
        }
    }

    fn should_stop(&self) -> bool {
        ctrl_c_pressed()
            || locked(&self.failure).is_some()
            || self
                .stop_after
                .is_some_and(|n| self.new_samples.load(Ordering::SeqCst) >= n)
    }
}

/// How many kept samples are re-solved on `--resume` to check the file's values.
const RESOLVED_ON_RESUME: usize = 3;

/// The kept samples by index, after checking that they hold up: indices in range and unique,
/// solved values finite and consistent, and a few of them (the first, middle and last solved)
/// giving the stated values again when re-solved.
fn check_kept(
    kept: &[KeptSample],
    model: &Model,
    pairs: &PairSelection,
    seed: u64,
) -> Result<BTreeMap<u64, SampleOutcome>, String> {
    let mut by_index = BTreeMap::new();
    for k in kept {
        if k.index >= MAX_SAMPLES as u64 {
            return Err(format!(
                "it holds sample {} beyond the {MAX_SAMPLES} allowed",
                k.index
            ));
        }
        if by_index.insert(k.index, k.outcome).is_some() {
            return Err(format!("it holds sample {} twice", k.index));
        }
        if let SampleOutcome::Solved {
            baseline_power,
            bound,
            headroom,
        } = k.outcome
        {
            let consistent = [baseline_power, bound, headroom]
                .iter()
                .all(|x| x.is_finite())
                && (bound - baseline_power - headroom).abs()
                    <= 1e-12 * bound.abs().max(headroom.abs());
            if !consistent {
                return Err(format!(
                    "its sample {} states the baseline power {baseline_power:e}, the bound {bound:e} and the headroom {headroom:e}, which do not fit together",
                    k.index
                ));
            }
        }
    }
    let solved: Vec<&KeptSample> = kept
        .iter()
        .filter(|k| matches!(k.outcome, SampleOutcome::Solved { .. }))
        .collect();
    let picks = [0, solved.len() / 2, solved.len().saturating_sub(1)];
    for &k in picks
        .iter()
        .take(RESOLVED_ON_RESUME)
        .filter_map(|&i| solved.get(i))
    {
        let fresh = stage::solve_sample(model, pairs, seed, k.index);
        if !outcomes_agree(&fresh, &k.outcome) {
            return Err(format!(
                "its sample {} states {:?}, but solving it again gives {fresh:?}",
                k.index, k.outcome
            ));
        }
    }
    Ok(by_index)
}

/// Whether two outcomes of the same sample agree (to round-off: a kept value went through JSON
/// with shortest round-trip digits, so it is in fact bit-identical).
fn outcomes_agree(a: &SampleOutcome, b: &SampleOutcome) -> bool {
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-12 * x.abs().max(y.abs());
    match (a, b) {
        (
            SampleOutcome::Solved {
                baseline_power: p1,
                bound: b1,
                headroom: h1,
            },
            SampleOutcome::Solved {
                baseline_power: p2,
                bound: b2,
                headroom: h2,
            },
        ) => close(*p1, *p2) && close(*b1, *b2) && close(*h1, *h2),
        _ => a == b,
    }
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
    let solve = |keeper: &dyn SampleKeeper| {
        knobs.in_pool(|| {
            stage::solve_samples(
                model,
                &pairs,
                request.seed,
                request.samples,
                &*observer,
                keeper,
            )
        })
    };
    let outcomes = match &request.checkpoint {
        None => solve(&knobs.control)?.ok_or_else(|| {
            Error::Interrupted("interrupted on request: nothing was printed or saved".into())
        })?,
        Some(file) => solve_kept(model, &pairs, request, file, &solve)?,
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

/// Solves the run's samples with a given keeper (`None`: stopped early).
type SolveWith<'a> = dyn Fn(&dyn SampleKeeper) -> Result<Option<Vec<SampleOutcome>>, Error> + 'a;

/// The samples of a run with `--checkpoint file`: the file ends holding every solved sample,
/// also when the run stops early (then the command fails with what it kept).
fn solve_kept(
    model: &Model,
    pairs: &PairSelection,
    request: &UncertaintyRequest,
    file: &Path,
    solve: &SolveWith,
) -> Result<Vec<SampleOutcome>, Error> {
    check_checkpoint_for(
        Some(file),
        &model.source,
        model,
        request.save_root.as_deref(),
    )?;
    let flags = (request.seed, request.resume, request.stop_after);
    let keeper = SampleFile::open(file, model, pairs, flags)?;
    let outcomes = solve(&keeper);
    keeper.write();
    if let Some(failure) = locked(&keeper.failure).take() {
        return Err(Error::Checkpoint {
            source: failure,
            kept: format!("{} solved samples", keeper.on_disk.load(Ordering::SeqCst)),
        });
    }
    outcomes?.ok_or_else(|| {
        Error::Interrupted(format!(
            "interrupted: {} of {} samples solved and kept in {}; `--resume` continues from there",
            keeper.on_disk.load(Ordering::SeqCst).min(request.samples),
            request.samples,
            file.display()
        ))
    })
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
