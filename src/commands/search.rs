//! Entry points of the search commands: `design`, `merge`, `sweep`, `compare`.
//!
//! Turns flags and model defaults into a [`Budget`], runs the bound and the search, and hands
//! the outcome to the reports. Like the rest of [`crate::commands`], nothing here prints.

use super::files::{self, CHECKPOINT_FORMAT, PART_FORMAT, SWEEP_CHECKPOINT_FORMAT};
use super::{emit, emit_in, folder_name, resolve_pairs, Error, Format, Rendered};
use crate::bound::{self, design, Bound, BoundSettings};
use crate::model::{Model, PairSelection};
use crate::progress::Bar;
use crate::report::compare::{CompareReport, CompareRow};
use crate::report::design::{BudgetJson, DesignReport};
use crate::report::output::{to_json, write_atomic};
use crate::report::sweep::{SweepPoint, SweepReport};
use crate::search::{
    self, Budget, Observer, Outcome, Part, SearchError, SearchSettings, Searcher, Shard, Silent,
};
use crate::units::{GivenEnergy, GivenRate};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

impl From<SearchError> for Error {
    fn from(e: SearchError) -> Self {
        match e {
            SearchError::Solve(s) => Error::Solve(s),
            SearchError::Interrupted {
                finished,
                total,
                what,
            } => Error::Interrupted(format!(
                "interrupted: {finished} of {total} {what} finished; nothing was written"
            )),
            other => Error::Usage(other.to_string()),
        }
    }
}

/// What a checkpoint file holds: the identity of the search and its finished branches.
#[derive(Debug, Serialize, Deserialize)]
struct CheckpointFile {
    /// [`CHECKPOINT_FORMAT`]: files of another version are refused.
    format: String,
    fingerprint: String,
    settings: SearchSettings,
    candidates: Vec<Vec<(usize, usize)>>,
    finished: Vec<search::BranchResult>,
}

/// Keeps finished branches in a file (rewritten atomically after each branch) and stops the
/// search on Ctrl-C, on a failed write of the file or, for tests, after a given number of new
/// branches.
struct FileKeeper {
    path: PathBuf,
    file: std::sync::Mutex<CheckpointFile>,
    stop_after: Option<usize>,
    new_branches: std::sync::atomic::AtomicUsize,
    /// The first failed write of the checkpoint: the search stops and the command fails.
    failure: std::sync::Mutex<Option<crate::report::output::OutputError>>,
    /// Finished branches in the file as last written.
    on_disk: std::sync::atomic::AtomicUsize,
}

/// Set by the Ctrl-C handler.
static INTERRUPTED: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Makes the first Ctrl-C ask a run with a checkpoint to stop after the work in flight; a
/// handler can be set only once per process, which is all a command needs.
pub(super) fn stop_on_ctrl_c() {
    let _ = ctrlc::set_handler(|| INTERRUPTED.store(true, std::sync::atomic::Ordering::SeqCst));
}

/// Whether Ctrl-C was pressed since [`stop_on_ctrl_c`].
pub(super) fn ctrl_c_pressed() -> bool {
    INTERRUPTED.load(std::sync::atomic::Ordering::SeqCst)
}

/// The guarded value even if a thread panicked while holding the lock.
pub(super) fn locked<T>(mutex: &std::sync::Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    mutex
        .lock()
        .unwrap_or_else(std::sync::PoisonError::into_inner)
}

impl FileKeeper {
    /// A keeper for `searcher`'s search at `path`; with `resume`, the file must exist and
    /// belong to the same search. The file is written once at once, so that a checkpoint that
    /// cannot be written fails the command before any work is done.
    fn open(
        path: &Path,
        network: &crate::model::Network,
        searcher: &Searcher,
        resume: bool,
        stop_after: Option<usize>,
    ) -> Result<Self, Error> {
        let (fingerprint, settings, candidates) = searcher.identity();
        let mut file = CheckpointFile {
            format: CHECKPOINT_FORMAT.into(),
            fingerprint,
            settings,
            candidates,
            finished: Vec::new(),
        };
        if resume {
            let kept: CheckpointFile = read_checkpoint(path, "design")?;
            if kept.format != file.format
                || kept.fingerprint != file.fingerprint
                || kept.settings != file.settings
                || kept.candidates != file.candidates
            {
                return Err(foreign_checkpoint(path));
            }
            files::check_branches(&kept.finished, network, &file.candidates, &file.settings)
                .map_err(|why| damaged_checkpoint(path, &why))?;
            file.finished = kept.finished;
        }
        write_atomic(path, files::sealed_json(&file)?.as_bytes())?;
        let on_disk = std::sync::atomic::AtomicUsize::new(file.finished.len());
        stop_on_ctrl_c();
        Ok(Self {
            path: path.to_path_buf(),
            file: std::sync::Mutex::new(file),
            stop_after,
            new_branches: std::sync::atomic::AtomicUsize::new(0),
            failure: std::sync::Mutex::new(None),
            on_disk,
        })
    }

    /// Finished branches in the file as last written.
    fn on_disk(&self) -> usize {
        self.on_disk.load(std::sync::atomic::Ordering::SeqCst)
    }

    /// The first failed write, if any.
    fn take_failure(&self) -> Option<crate::report::output::OutputError> {
        locked(&self.failure).take()
    }
}

impl search::Keeper for FileKeeper {
    fn finished(&self) -> Vec<search::BranchResult> {
        locked(&self.file).finished.clone()
    }

    fn record(&self, result: &search::BranchResult) {
        use std::sync::atomic::Ordering;
        self.new_branches.fetch_add(1, Ordering::SeqCst);
        let mut file = locked(&self.file);
        file.finished.push(result.clone());
        // A failed write stops the search (see `should_stop`) and fails the command: the file
        // keeps what it held before, which is what the message then reports.
        match files::sealed_json(&*file).and_then(|json| write_atomic(&self.path, json.as_bytes()))
        {
            Ok(()) => self.on_disk.store(file.finished.len(), Ordering::SeqCst),
            Err(e) => {
                locked(&self.failure).get_or_insert(e);
            }
        }
    }

    fn should_stop(&self) -> bool {
        use std::sync::atomic::Ordering;
        ctrl_c_pressed()
            || locked(&self.failure).is_some()
            || self
                .stop_after
                .is_some_and(|n| self.new_branches.load(Ordering::SeqCst) >= n)
    }
}

/// [`check_checkpoint_path`] for an optional `--checkpoint` of a run that may `--save` the
/// model's report under `save_root`.
pub(super) fn check_checkpoint_for(
    checkpoint: Option<&Path>,
    model_path: &Path,
    model: &Model,
    save_root: Option<&Path>,
) -> Result<(), Error> {
    let Some(file) = checkpoint else {
        return Ok(());
    };
    let saved_in = save_root.map(|root| root.join(folder_name(model)));
    check_checkpoint_path(file, model_path, saved_in.as_deref())
}

/// Refuses a `--checkpoint` path that is a folder or not a regular file, that is the model
/// file itself (also through a link), or that lies in the results folder `saved_in` that
/// `--save` writes.
fn check_checkpoint_path(
    checkpoint: &Path,
    model: &Path,
    saved_in: Option<&Path>,
) -> Result<(), Error> {
    let shown = checkpoint.display();
    if let Ok(meta) = std::fs::metadata(checkpoint) {
        if meta.is_dir() {
            return Err(Error::Usage(format!(
                "--checkpoint {shown} is a folder: give a file name, e.g. {}",
                checkpoint.join("checkpoint.json").display()
            )));
        }
        if !meta.is_file() {
            return Err(Error::Usage(format!(
                "--checkpoint {shown} is not a regular file (a FIFO or a device?): give the path of a file to write"
            )));
        }
    }
    let resolved = resolve(checkpoint);
    if resolved.is_some() && resolved == resolve(model) || same_file(checkpoint, model) {
        return Err(Error::Usage(format!(
            "--checkpoint {shown} is the model file {}: the checkpoint would overwrite the model; give another file, e.g. checkpoint.json",
            model.display()
        )));
    }
    if let (Some(folder), Some(parent)) = (
        saved_in.and_then(resolve),
        checkpoint
            .parent()
            .map(|p| {
                if p.as_os_str().is_empty() {
                    Path::new(".")
                } else {
                    p
                }
            })
            .and_then(resolve),
    ) {
        if folder == parent {
            return Err(Error::Usage(format!(
                "--checkpoint {shown} lies in the results folder {} that --save writes: give a file outside it",
                folder.display()
            )));
        }
    }
    Ok(())
}

/// The canonical form of `path`, or of its folder joined with its name when the file does not
/// exist yet; `None` when neither resolves.
fn resolve(path: &Path) -> Option<PathBuf> {
    if let Ok(p) = std::fs::canonicalize(path) {
        return Some(p);
    }
    let name = path.file_name()?;
    let parent = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    Some(std::fs::canonicalize(parent).ok()?.join(name))
}

/// Whether two existing paths are the same file (also through hard links).
fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(x), Ok(y)) = (std::fs::metadata(a), std::fs::metadata(b)) {
            return x.dev() == y.dev() && x.ino() == y.ino();
        }
    }
    let _ = (a, b);
    false
}

/// Budget flags; `None` falls back to the model's `[pathways]` table. A bare number is in the
/// model's own unit; a value with a unit is converted to it.
#[derive(Debug, Clone, Copy, Default)]
pub struct BudgetFlags {
    pub max_pathways: Option<usize>,
    pub rate_cap: Option<GivenRate>,
    pub total_rate: Option<GivenRate>,
    pub work_limit: Option<GivenEnergy>,
}

impl BudgetFlags {
    /// The flags given as bare numbers, which mean different things in models whose units
    /// differ: `(flag, value, whether it is a rate)`.
    fn bare(&self) -> Vec<(&'static str, f64, bool)> {
        let rates = [
            ("--rate-cap", self.rate_cap),
            ("--total-rate", self.total_rate),
        ]
        .into_iter()
        .filter_map(|(name, r)| r.filter(|r| r.per.is_none()).map(|r| (name, r.value, true)));
        let work = self
            .work_limit
            .filter(|w| w.unit.is_none())
            .map(|w| ("--work-limit", w.value, false));
        rates.chain(work).collect()
    }
}

/// Default number of added pathways when neither a flag nor the model gives one.
pub const DEFAULT_MAX_PATHWAYS: usize = 2;

/// The budget from flags, then model defaults, checked for sense.
fn resolve_budget(model: &Model, flags: &BudgetFlags) -> Result<Budget, Error> {
    let d = &model.pathways;
    let time = model.units.time.name();
    let budget = Budget {
        max_pathways: flags
            .max_pathways
            .or(d.max_pathways)
            .unwrap_or(DEFAULT_MAX_PATHWAYS),
        rate_cap: flags
            .rate_cap
            .map(|r| r.in_units(&model.units))
            .or(d.rate_cap),
        total_rate: flags
            .total_rate
            .map(|r| r.in_units(&model.units))
            .or(d.total_rate),
        work_limit: flags
            .work_limit
            .map(|w| w.to_kt(&model.units))
            .or(d.work_limit),
    };
    if budget.max_pathways == 0 {
        return Err(Error::Usage(
            "--max-pathways 0 allows no added pathway: give 1 or more".into(),
        ));
    }
    for (name, value) in [
        ("--rate-cap", budget.rate_cap),
        ("--total-rate", budget.total_rate),
    ] {
        if let Some(v) = value.filter(|v| !(v.is_finite() && *v > 0.0)) {
            return Err(Error::Usage(format!(
                "{name} {v}: give a positive rate per {time}"
            )));
        }
    }
    if let Some(w) = budget.work_limit.filter(|w| !(w.is_finite() && *w > 0.0)) {
        return Err(Error::Usage(format!(
            "--work-limit {}: give a positive energy in {} (the largest |work per jump| of a pathway)",
            model.units.from_kt(w),
            model.units.energy.name()
        )));
    }
    Ok(budget.within_ceiling(crate::search::rate_ceiling(&model.network)))
}

/// The candidate pathways of a selection: one per allowed pair or, environment-blind, one per
/// pair of system states acting on its copies in every environment state with shared rates.
fn candidate_pairs(
    model: &Model,
    pairs: &PairSelection,
    blind: bool,
) -> Result<Vec<Vec<(usize, usize)>>, Error> {
    let each: Vec<(usize, usize)> = design::candidates(model.network.len(), pairs)
        .into_iter()
        .map(|c| (c.a, c.b))
        .collect();
    if !blind {
        return Ok(each.into_iter().map(|p| vec![p]).collect());
    }
    let Some(envs) = &model.environments else {
        return Err(Error::Usage(
            "--blind asks for pathways that act the same in every environment state, but this model has no [[environment]]: drop --blind".into(),
        ));
    };
    let mut system: Vec<(usize, usize)> = each
        .iter()
        .map(|&(a, b)| {
            let (sa, sb) = (envs.split(a).0, envs.split(b).0);
            (sa.min(sb), sa.max(sb))
        })
        .collect();
    system.sort_unstable();
    system.dedup();
    Ok(system.into_iter().map(|p| envs.copies(p)).collect())
}

/// `all pairs` or `A/B, C/D`.
fn describe(model: &Model, pairs: &PairSelection) -> String {
    crate::report::bound::describe_pairs(model, pairs)
}

/// Search knobs shared by `design`, `sweep` and `compare`.
#[derive(Debug, Clone)]
pub struct SearchKnobs {
    pub top: usize,
    pub starts: usize,
    pub seed: u64,
    pub exhaustive_limit: u64,
    pub beam_width: usize,
    /// Worker threads (0: one per core).
    pub threads: usize,
    pub quiet: bool,
    /// Environment-blind pathways: the same rates in every environment state.
    pub blind: bool,
    /// A caller's stop flag and progress observer (the terminal bar when it has none).
    pub control: search::Control,
}

impl Default for SearchKnobs {
    fn default() -> Self {
        let s = SearchSettings::new(Budget {
            max_pathways: 1,
            rate_cap: None,
            total_rate: None,
            work_limit: None,
        });
        Self {
            top: s.top,
            starts: s.starts,
            seed: s.seed,
            exhaustive_limit: s.exhaustive_limit,
            beam_width: s.beam_width,
            threads: 0,
            quiet: false,
            blind: false,
            control: search::Control::default(),
        }
    }
}

impl SearchKnobs {
    fn settings(&self, budget: Budget) -> Result<SearchSettings, Error> {
        if self.top == 0 {
            return Err(Error::Usage("--top 0 shows nothing: give 1 or more".into()));
        }
        if self.beam_width == 0 {
            return Err(Error::Usage(
                "--beam-width 0 keeps nothing: give 1 or more".into(),
            ));
        }
        Ok(SearchSettings {
            budget,
            top: self.top,
            starts: self.starts,
            seed: self.seed,
            exhaustive_limit: self.exhaustive_limit,
            beam_width: self.beam_width,
        })
    }

    /// Runs `work` on a pool of the requested size.
    pub(super) fn in_pool<T: Send>(&self, work: impl FnOnce() -> T + Send) -> Result<T, Error> {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(self.threads)
            .build()
            .map_err(|e| Error::Usage(format!("--threads {}: {e}", self.threads)))?;
        Ok(pool.install(work))
    }

    /// The caller's observer, else the terminal progress bar.
    pub(super) fn observer(&self, model: &Model) -> std::sync::Arc<dyn Observer + Send> {
        self.control.observer.clone().unwrap_or_else(|| {
            std::sync::Arc::new(Bar::new(
                self.quiet,
                model.units.power_label(),
                model.units.from_kt(1.0),
            ))
        })
    }

    /// The refusal of a run the caller stopped.
    fn stopped(&self, done: usize, total: usize, what: &str) -> Option<Error> {
        self.control.stop_requested().then(|| {
            Error::Interrupted(format!(
                "interrupted on request: {done} of {total} {what} finished; nothing was kept"
            ))
        })
    }
}

/// The bound for the selection (its headroom scales the search and the shares).
fn solve_bound(model: &Model, pairs: &PairSelection) -> Result<Bound, Error> {
    Ok(bound::solve(
        &model.network,
        pairs,
        &BoundSettings::default(),
    )?)
}

/// Runs one whole search on a loaded model.
fn search_model(
    searcher: &Searcher,
    knobs: &SearchKnobs,
    observer: &dyn Observer,
) -> Result<Outcome, Error> {
    let part = knobs.in_pool(|| searcher.run(Shard::WHOLE, observer, &knobs.control))??;
    Ok(search::merge(vec![part])?)
}

/// The searcher of a model's candidates (environment-blind when asked) under `settings`.
fn searcher_for<'a>(
    model: &'a Model,
    pairs: &PairSelection,
    bound: &Bound,
    settings: SearchSettings,
    blind: bool,
) -> Result<Searcher<'a>, Error> {
    Ok(Searcher::new(
        &model.network,
        candidate_pairs(model, pairs, blind)?,
        settings,
        (bound.baseline_power, bound.headroom()),
    )?)
}

/// Reads a checkpoint written by `command --checkpoint`, for `--resume`.
pub(super) fn read_checkpoint<T: serde::de::DeserializeOwned>(
    path: &Path,
    command: &str,
) -> Result<T, Error> {
    let text = files::read_untrusted(path).map_err(|e| {
        Error::Usage(format!(
            "--resume: cannot read the checkpoint {} ({e}); run without --resume to start afresh",
            path.display()
        ))
    })?;
    let not_ours = |e: String| {
        Error::Usage(format!(
            "--resume: {} is not a checkpoint written by `ergopath {command} --checkpoint` ({e}); start afresh without --resume",
            path.display()
        ))
    };
    let content = files::unsealed(&text).map_err(not_ours)?;
    serde_json::from_value(content).map_err(|e| not_ours(e.to_string()))
}

/// The refusal of a checkpoint whose content does not hold up.
pub(super) fn damaged_checkpoint(path: &Path, why: &str) -> Error {
    Error::Usage(format!(
        "--resume: {} is damaged or was edited: {why}; start afresh without --resume",
        path.display()
    ))
}

/// The refusal of a checkpoint that belongs to another search.
pub(super) fn foreign_checkpoint(path: &Path) -> Error {
    Error::Usage(format!(
        "--resume: {} belongs to another model or other search settings; give the same model and flags, or start afresh without --resume",
        path.display()
    ))
}

/// Settings of `ergopath design`.
#[derive(Debug, Clone, Default)]
pub struct DesignRequest {
    pub pairs: Option<String>,
    pub budget: BudgetFlags,
    pub knobs: SearchKnobs,
    /// `Some((i, N))`: score only shard i of N and write a part file.
    pub shard: Option<(usize, usize)>,
    /// Keep finished branches in this file (and stop cleanly on Ctrl-C).
    pub checkpoint: Option<PathBuf>,
    /// Continue from the checkpoint file.
    pub resume: bool,
    /// Testing aid: behave as if interrupted after this many new branches.
    pub stop_after: Option<usize>,
    /// Keep only ranked designs whose Fano factor `|2D/J|` is at most this (energy unit).
    pub max_fano: Option<f64>,
    /// `Some((N, q))`: also rank the designs by the q-quantile of their power over N networks
    /// sampled from the model's uncertainty (stream `knobs.seed`).
    pub samples: Option<(usize, f64)>,
    pub format: Format,
    pub save_root: Option<PathBuf>,
}

/// A shard's result on disk: the search part and what `merge` needs to rebuild the report.
#[derive(Debug, Serialize, Deserialize)]
struct PartFile {
    /// [`PART_FORMAT`]: files of another version are refused.
    format: String,
    /// Model file as given to `design`.
    model: PathBuf,
    /// Allowed pairs (`None`: all).
    pairs: Option<Vec<(usize, usize)>>,
    part: Part,
}

fn selection_of(pairs: &PairSelection) -> Option<Vec<(usize, usize)>> {
    match pairs {
        PairSelection::All => None,
        PairSelection::Only(list) => Some(list.clone()),
    }
}

/// `ergopath design`: ranked designs within the budget; with a shard, writes its part file.
pub fn design(path: &Path, request: &DesignRequest) -> Result<String, Error> {
    design_on(&Model::load(path)?, Some(path), request)
}

/// The refusal of a file-bound option (`what`) for a model that came from no file.
fn needs_model_file(file: Option<&Path>, what: &str) -> Result<(), Error> {
    match file {
        Some(_) => Ok(()),
        None => Err(Error::Usage(format!(
            "{what} needs a model loaded from a file (the file records which model it belongs to): load the model from its TOML file"
        ))),
    }
}

/// [`design`] on a model in memory; `file` is the model's file, which shards and checkpoints
/// record (`None` refuses them).
pub fn design_on(
    model: &Model,
    file: Option<&Path>,
    request: &DesignRequest,
) -> Result<String, Error> {
    if request.shard.is_some() {
        needs_model_file(file, "a shard")?;
    }
    if request.checkpoint.is_some() {
        needs_model_file(file, "a checkpoint")?;
    }
    let path = file.unwrap_or(&model.source);
    let pairs = resolve_pairs(model, request.pairs.as_deref())?;
    // With a precision limit the search keeps a wider pool by power, so that the limit picks
    // the best designs that meet it among more than the top few.
    let pool = SearchKnobs {
        top: match request.max_fano.map(|_| ()).or(request.samples.map(|_| ())) {
            Some(()) => request
                .knobs
                .top
                .saturating_mul(super::precision::FANO_POOL),
            None => request.knobs.top,
        },
        ..request.knobs.clone()
    };
    let settings = pool.settings(resolve_budget(model, &request.budget)?)?;
    if let Some((samples, q)) = request.samples {
        super::uncertainty::check_samples(samples)?;
        if !(q > 0.0 && q < 1.0) {
            return Err(Error::Usage(format!(
                "--quantile {q}: give a share between 0 and 1, e.g. --quantile 0.05 for the power that 95% of the samples exceed"
            )));
        }
        if request.shard.is_some() {
            return Err(Error::Usage("--samples and --shard do not combine: rank the merged designs with a run without --shard".into()));
        }
    }
    if request.max_fano.is_some() && request.shard.is_some() {
        return Err(Error::Usage("--max-fano and --shard do not combine: a shard writes all its designs to its part file; give --max-fano to a run without --shard".into()));
    }
    if request.checkpoint.is_some() && request.shard.is_some() {
        return Err(Error::Usage("--checkpoint and --shard do not combine: shards are already resumable (rerun the missing ones)".into()));
    }
    if request.resume && request.checkpoint.is_none() {
        return Err(Error::Usage(
            "--resume needs --checkpoint FILE: the file that the interrupted run wrote".into(),
        ));
    }
    check_checkpoint_for(
        request.checkpoint.as_deref(),
        path,
        model,
        request.save_root.as_deref(),
    )?;
    let bound = solve_bound(model, &pairs)?;
    let bar = request.knobs.observer(model);
    let bar = &*bar;
    let searcher = searcher_for(model, &pairs, &bound, settings, request.knobs.blind)?;
    let shard = request
        .shard
        .map_or(Shard::WHOLE, |(index, count)| Shard { index, count });
    let part = match &request.checkpoint {
        None => request
            .knobs
            .in_pool(|| searcher.run(shard, bar, &request.knobs.control))??,
        Some(file) => {
            let keeper = FileKeeper::open(
                file,
                &model.network,
                &searcher,
                request.resume,
                request.stop_after,
            )?;
            let run = request
                .knobs
                .in_pool(|| searcher.run(shard, bar, &keeper))?;
            if let Some(failure) = keeper.take_failure() {
                return Err(Error::Checkpoint {
                    source: failure,
                    kept: counted(keeper.on_disk(), "finished branch", "finished branches"),
                });
            }
            let part = run.map_err(|e| match e {
                // Only what the file really holds is reported as kept.
                SearchError::Interrupted { total, what, .. } => {
                    let of = if what == "branches" {
                        format!(" of {total}")
                    } else {
                        String::new()
                    };
                    Error::Interrupted(format!(
                        "interrupted: {}{of} branches finished and kept in {}; `--resume` continues from there",
                        keeper.on_disk(),
                        file.display()
                    ))
                }
                other => Error::from(other),
            })?;
            // Designs taken from the checkpoint rank by the power it states: each ranked one
            // has just been verified by the search, and the two must agree.
            if request.resume {
                let edited = part.designs.iter().find(|d| {
                    d.verified.is_some_and(|(power, roundoff)| {
                        !files::power_agrees(d.power, &design::Verified { power, roundoff })
                    })
                });
                if let Some(d) = edited {
                    return Err(damaged_checkpoint(
                        file,
                        &format!(
                            "its design on pathway set {:?} claims the power {:e} kT, but its steady-state solve gives {:e} kT",
                            d.set,
                            d.power,
                            d.verified.map_or(f64::NAN, |v| v.0)
                        ),
                    ));
                }
            }
            part
        }
    };
    if shard == Shard::WHOLE {
        let outcome = search::merge(vec![part])?;
        return design_output(
            model,
            &pairs,
            &bound,
            &outcome,
            request.format,
            request.save_root.as_deref(),
            Screens {
                max_fano: request.max_fano.map(|x| (x, request.knobs.top)),
                robust: request.samples.map(|s| (s, &request.knobs)),
            },
        );
    }
    write_part(path, model, &pairs, part, request.save_root.as_deref())
}

/// Writes one shard's part file under `<root>/<model stem>/` and says how to merge the parts.
fn write_part(
    path: &Path,
    model: &Model,
    pairs: &PairSelection,
    part: Part,
    save_root: Option<&Path>,
) -> Result<String, Error> {
    let Shard { index, count } = part.shard;
    let file = PartFile {
        format: PART_FORMAT.into(),
        model: path.to_path_buf(),
        pairs: selection_of(pairs),
        part,
    };
    let root = save_root.map_or_else(|| PathBuf::from("results"), Path::to_path_buf);
    let folder = crate::report::output::results_folder(&root, &folder_name(model))?;
    let out = folder.join(format!("design-part-{index}-of-{count}.json"));
    write_atomic(&out, files::sealed_json(&file)?.as_bytes())?;
    let scored: u64 = file.part.branches.iter().map(|b| b.scored).sum();
    Ok(format!(
        "shard {index}/{count}: {} branches, {scored} sets scored beyond the {} single pathways\n  written: {}\n  combine all {count} parts with: ergopath merge {}\n",
        file.part.branches.len(),
        file.part.singles,
        out.display(),
        folder.join(format!("design-part-*-of-{count}.json")).display()
    ))
}

/// What is applied to a search's designs after the search: the `--max-fano` screen (limit,
/// designs kept) and the ranking under uncertainty (`--samples N --quantile q`, its knobs).
#[derive(Default)]
struct Screens<'a> {
    max_fano: Option<(f64, usize)>,
    robust: Option<((usize, f64), &'a SearchKnobs)>,
}

fn design_output(
    model: &Model,
    pairs: &PairSelection,
    bound: &Bound,
    outcome: &Outcome,
    format: Format,
    save_root: Option<&Path>,
    screens: Screens,
) -> Result<String, Error> {
    let Screens { max_fano, robust } = screens;
    // The ranking under uncertainty covers the whole pool the search kept, by nominal power;
    // the nominal list still shows `--top` designs.
    let shown = robust.map(|(_, knobs)| knobs.top);
    let robust = match robust {
        None => None,
        Some((samples, knobs)) => {
            let network = &model.network;
            let pool: Vec<Vec<design::Pathway>> = outcome
                .designs
                .iter()
                .map(|d| d.pathways(network))
                .collect();
            Some(super::uncertainty::robust_ranking(
                model, &pool, samples, knobs,
            )?)
        }
    };
    let (mut outcome, mut precisions, left_out) =
        super::precision::screen(model, outcome, max_fano)?;
    if let (Some(top), None) = (shown, max_fano) {
        outcome.designs.truncate(top);
        precisions.truncate(top);
    }
    let max_fano = max_fano.map(|(x, _)| x);
    let network = &model.network;
    let oriented = outcome
        .designs
        .iter()
        .map(|d| design::oriented(network, d.pathways(network)))
        .collect::<Result<Vec<_>, _>>()?;
    let mut report = DesignReport::new(model, bound, describe(model, pairs), &outcome, &oriented);
    report.uncertainty = robust;
    report.attach_precision(
        &precisions,
        &model.units,
        max_fano,
        left_out,
        super::precision::FANO_POOL,
    );
    let mut text = report.text();
    if let Some(ranking) = &report.uncertainty {
        text.push_str(&ranking.text(&report.units.power));
    }
    let rendered = Rendered {
        text,
        json: to_json(&report)?,
        tables: report.tables(),
        svg: report.svg(),
    };
    emit(model, "design", format, save_root, rendered)
}

/// `ergopath merge`: combines shard part files into the ranking one run would give.
pub fn merge(
    parts: &[PathBuf],
    model_override: Option<&Path>,
    format: Format,
    save_root: Option<&Path>,
) -> Result<String, Error> {
    let mut read = Vec::with_capacity(parts.len());
    for path in parts {
        let text = files::read_untrusted(path).map_err(|e| {
            Error::Usage(format!(
                "{}: cannot read the part file ({e})",
                path.display()
            ))
        })?;
        let not_ours = |e: String| {
            Error::Usage(format!(
                "{}: not a part file written by `ergopath design --shard` ({e}); give the design-part-*-of-N.json files, or rerun that shard",
                path.display()
            ))
        };
        let content = files::unsealed(&text).map_err(not_ours)?;
        let file: PartFile =
            serde_json::from_value(content).map_err(|e| not_ours(e.to_string()))?;
        if file.format != PART_FORMAT {
            return Err(Error::Usage(format!(
                "{}: a part file of format '{}', not '{PART_FORMAT}': rerun its shard with this version of ergopath",
                path.display(),
                file.format
            )));
        }
        read.push((path, file));
    }
    let Some((_, first)) = read.first() else {
        return Err(Error::Usage("give the part files to merge".into()));
    };
    let model_path = model_override.map_or_else(|| first.model.clone(), Path::to_path_buf);
    let model = Model::load(&model_path)?;
    if search::fingerprint(&model.network) != first.part.fingerprint {
        return Err(Error::Usage(format!(
            "{} is not the model the parts were computed for (it has changed or is another file): give the original with --model PATH",
            model_path.display()
        )));
    }
    let network = &model.network;
    for (path, file) in &read {
        let pairs_ok = file
            .pairs
            .as_ref()
            .is_none_or(|list| list.iter().all(|&(a, b)| a < b && b < network.len()));
        let checked = if pairs_ok {
            files::check_part(&file.part, network)
        } else {
            Err("its pair selection names states the model does not have".into())
        };
        checked.map_err(|why| {
            Error::Usage(format!(
                "{}: the part file is damaged or was edited: {why}; rerun its shard",
                path.display()
            ))
        })?;
    }
    let pairs = match &first.pairs {
        None => PairSelection::All,
        Some(list) => PairSelection::Only(list.clone()),
    };
    if read.iter().any(|(_, f)| f.pairs != first.pairs) {
        return Err(Error::Usage(
            "the part files come from searches over different pairs: give the parts of one search"
                .into(),
        ));
    }
    let parts: Vec<Part> = read.into_iter().map(|(_, f)| f.part).collect();
    if let Some(part) = parts.iter().find(|p| p.shard.count > parts.len()) {
        let count = part.shard.count;
        return Err(Error::Usage(format!(
            "shard {}/{count} is one of {count} parts, but {} part files are given: give all {count} parts",
            part.shard.index,
            parts.len()
        )));
    }
    files::check_totals(&parts).map_err(|why| {
        Error::Usage(format!(
            "the part files are damaged or were edited: {why}; rerun the shards"
        ))
    })?;
    // Every power in the files is verified afresh (one steady-state solve per distinct design)
    // before it may rank or be reported.
    let mut fresh: std::collections::HashMap<&[usize], design::Verified> = Default::default();
    for d in parts.iter().flat_map(|p| &p.designs) {
        let v = match fresh.get(d.set.as_slice()) {
            Some(v) => *v,
            None => {
                let v = design::verify(network, &d.pathways(network))?;
                fresh.insert(&d.set, v);
                v
            }
        };
        if !files::agrees(d, &v) {
            return Err(Error::Usage(format!(
                "a part file's design on pathway set {:?} claims the power {:e} (verified: {:?}) kT per {}, but a fresh steady-state solve gives {:e} kT: the part files were edited or damaged; rerun the shards",
                d.set,
                d.power,
                d.verified.map(|v| v.0),
                model.units.time.name(),
                v.power
            )));
        }
    }
    let outcome = search::merge(parts)?;
    let bound = solve_bound(&model, &pairs)?;
    design_output(
        &model,
        &pairs,
        &bound,
        &outcome,
        format,
        save_root,
        Screens::default(),
    )
}

/// A budget quantity a sweep can vary.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SweepOver {
    RateCap,
    TotalRate,
    MaxPathways,
    WorkLimit,
}

impl SweepOver {
    pub fn name(self) -> &'static str {
        match self {
            SweepOver::RateCap => "rate-cap",
            SweepOver::TotalRate => "total-rate",
            SweepOver::MaxPathways => "max-pathways",
            SweepOver::WorkLimit => "work-limit",
        }
    }

    fn parse(name: &str) -> Option<Self> {
        [
            Self::RateCap,
            Self::TotalRate,
            Self::MaxPathways,
            Self::WorkLimit,
        ]
        .into_iter()
        .find(|o| o.name() == name)
    }
}

/// Settings of `ergopath sweep`.
#[derive(Debug, Clone, Default)]
pub struct SweepRequest {
    pub pairs: Option<String>,
    pub budget: BudgetFlags,
    pub knobs: SearchKnobs,
    /// `rate-cap=1..1e6` and the like.
    pub over: String,
    pub points: usize,
    pub format: Format,
    pub save_root: Option<PathBuf>,
    /// Keep finished budget points in this file (and stop cleanly on Ctrl-C).
    pub checkpoint: Option<PathBuf>,
    /// Continue from the checkpoint file.
    pub resume: bool,
    /// Testing aid: behave as if interrupted after this many new points.
    pub stop_after: Option<usize>,
}

/// One finished budget point of a sweep (kT, internal units).
#[derive(Debug, Clone, Serialize, Deserialize)]
struct SweepDone {
    value: f64,
    best: Option<search::Found>,
    carried: bool,
    evaluated: u64,
    /// The capped relaxation when it was solved to full accuracy.
    relaxation: Option<f64>,
    /// Why `relaxation` is missing.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    relaxation_gap: Option<search::RelaxationGap>,
}

/// A sweep's checkpoint: what identifies the sweep, and its finished points in order.
#[derive(Debug, Serialize, Deserialize)]
struct SweepCheckpoint {
    /// [`SWEEP_CHECKPOINT_FORMAT`]: files of another version are refused.
    format: String,
    identity: String,
    done: Vec<SweepDone>,
}

/// Finished points of the sweep `identity` from `path` (empty unless resuming).
fn sweep_progress(
    path: Option<&Path>,
    identity: &str,
    resume: bool,
) -> Result<Vec<SweepDone>, Error> {
    let Some(path) = path.filter(|_| resume) else {
        return Ok(Vec::new());
    };
    let kept: SweepCheckpoint = read_checkpoint(path, "sweep")?;
    if kept.format != SWEEP_CHECKPOINT_FORMAT || kept.identity != identity {
        return Err(foreign_checkpoint(path));
    }
    Ok(kept.done)
}

/// `1 thing` or `n things`.
fn counted(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// Writes the sweep checkpoint; on failure, says that `kept` points are in the file as before.
fn write_sweep_checkpoint(
    file: &Path,
    identity: &str,
    done: &[SweepDone],
    kept: usize,
) -> Result<(), Error> {
    let checkpoint = SweepCheckpoint {
        format: SWEEP_CHECKPOINT_FORMAT.into(),
        identity: identity.to_string(),
        done: done.to_vec(),
    };
    files::sealed_json(&checkpoint)
        .and_then(|json| write_atomic(file, json.as_bytes()))
        .map_err(|source| Error::Checkpoint {
            source,
            kept: counted(kept, "finished budget point", "finished budget points"),
        })
}

/// Checks the finished points of a sweep checkpoint (whose identity already matched): one per
/// budget value in order, each best design valid for its budget and its power verified afresh.
fn check_sweep_points(
    model: &Model,
    pairs: &PairSelection,
    knobs: &SearchKnobs,
    request: &SweepRequest,
    over: SweepOver,
    values: &[f64],
    done: &[SweepDone],
) -> Result<(), String> {
    if done.len() > values.len() {
        return Err(format!(
            "it holds {} points of a sweep of {}",
            done.len(),
            values.len()
        ));
    }
    files::total(done.iter().map(|d| d.evaluated))?;
    let candidates = candidate_pairs(model, pairs, knobs.blind).map_err(|e| e.to_string())?;
    files::check_candidates(&candidates, model.network.len())?;
    for (i, (d, &value)) in done.iter().zip(values).enumerate() {
        if d.value.to_bits() != value.to_bits() {
            return Err(format!(
                "its point {i} is at {}, not at the sweep's value {value}",
                d.value
            ));
        }
        if d.relaxation.is_some_and(|r| !r.is_finite()) {
            return Err(format!("its point {i} has a relaxation that is not finite"));
        }
        let budget = resolve_budget(model, &with_value(request.budget, over, value))
            .map_err(|e| e.to_string())?;
        let settings = knobs.settings(budget).map_err(|e| e.to_string())?;
        let count = candidates.len();
        let space = search::space_size(count, settings.budget.max_pathways.min(count));
        if d.evaluated > space {
            return Err(format!(
                "its point {i} counts {} sets scored, more than the {space} sets of its search",
                d.evaluated
            ));
        }
        let Some(best) = &d.best else { continue };
        files::check_found(best, &model.network, &candidates, &settings, true)
            .map_err(|why| format!("point {i}: {why}"))?;
        let fresh = design::verify(&model.network, &best.pathways(&model.network))
            .map_err(|e| format!("point {i}: its design cannot be verified ({e})"))?;
        if !files::agrees(best, &fresh) {
            return Err(format!(
                "point {i} claims the power {:e} kT, but a fresh steady-state solve of its design gives {:e} kT",
                best.power, fresh.power
            ));
        }
    }
    Ok(())
}

/// Parses `NAME=A..B` into the quantity and its values (log-spaced for rates and wide ranges,
/// every integer for `max-pathways`).
fn sweep_values(over: &str, points: usize) -> Result<(SweepOver, Vec<f64>), Error> {
    let usage = |why: &str| {
        Error::Usage(format!(
            "--over {over}: {why}; give NAME=FROM..TO with NAME one of rate-cap, total-rate, max-pathways, work-limit (e.g. rate-cap=1..1e6)"
        ))
    };
    let (name, range) = over.split_once('=').ok_or_else(|| usage("no '='"))?;
    let quantity = SweepOver::parse(name.trim()).ok_or_else(|| usage("unknown budget name"))?;
    let (a, b) = range
        .split_once("..")
        .ok_or_else(|| usage("no '..' in the range"))?;
    let parse = |s: &str| {
        s.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_normal() && *v > 0.0)
    };
    let (Some(lo), Some(hi)) = (parse(a), parse(b)) else {
        return Err(usage("the range ends must be positive numbers"));
    };
    if hi <= lo {
        return Err(usage("the range must run from a smaller to a larger value"));
    }
    if quantity == SweepOver::MaxPathways {
        let (lo, hi) = (lo.ceil() as usize, hi.floor() as usize);
        if lo > hi || hi > 16 {
            return Err(usage("max-pathways takes whole numbers between 1 and 16"));
        }
        return Ok((quantity, (lo..=hi).map(|k| k as f64).collect()));
    }
    if points < 2 {
        return Err(Error::Usage(format!(
            "--points {points}: a sweep needs at least 2 points"
        )));
    }
    let log = quantity != SweepOver::WorkLimit || hi / lo >= 100.0;
    let values = if log {
        crate::numeric::log_spaced(lo, hi, points)
    } else {
        crate::numeric::linear_spaced(lo, hi, points)
    };
    Ok((quantity, values))
}

fn with_value(mut flags: BudgetFlags, over: SweepOver, value: f64) -> BudgetFlags {
    match over {
        SweepOver::RateCap => flags.rate_cap = Some(GivenRate::bare(value)),
        SweepOver::TotalRate => flags.total_rate = Some(GivenRate::bare(value)),
        SweepOver::MaxPathways => flags.max_pathways = Some(value as usize),
        SweepOver::WorkLimit => flags.work_limit = Some(GivenEnergy::bare(value)),
    }
    flags
}

/// `ergopath sweep`: the best design at each budget value beside the universal bound.
pub fn sweep(path: &Path, request: &SweepRequest) -> Result<String, Error> {
    sweep_on(&Model::load(path)?, Some(path), request)
}

/// [`sweep`] on a model in memory; `file` is the model's file, which a checkpoint records
/// (`None` refuses one).
pub fn sweep_on(
    model: &Model,
    file: Option<&Path>,
    request: &SweepRequest,
) -> Result<String, Error> {
    if request.checkpoint.is_some() {
        needs_model_file(file, "a checkpoint")?;
    }
    let path = file.unwrap_or(&model.source);
    let pairs = resolve_pairs(model, request.pairs.as_deref())?;
    let (over, values) = sweep_values(&request.over, request.points)?;
    let bound = solve_bound(model, &pairs)?;
    let knobs = SearchKnobs {
        top: 1,
        ..request.knobs.clone()
    };
    if request.resume && request.checkpoint.is_none() {
        return Err(Error::Usage(
            "--resume needs --checkpoint FILE: the file that the interrupted sweep wrote".into(),
        ));
    }
    let identity = format!(
        "{} {:?} {:?} {:?} {:?} {:?}",
        search::fingerprint(&model.network),
        values,
        request.over,
        request.budget,
        (
            knobs.starts,
            knobs.seed,
            knobs.exhaustive_limit,
            knobs.beam_width,
            knobs.blind
        ),
        pairs
    );
    check_checkpoint_for(
        request.checkpoint.as_deref(),
        path,
        model,
        request.save_root.as_deref(),
    )?;
    let mut done = sweep_progress(request.checkpoint.as_deref(), &identity, request.resume)?;
    if let Some(file) = &request.checkpoint {
        check_sweep_points(model, &pairs, &knobs, request, over, &values, &done)
            .map_err(|why| damaged_checkpoint(file, &why))?;
        // Written at once, so that a checkpoint that cannot be written fails before any work.
        write_sweep_checkpoint(file, &identity, &done, done.len())?;
        stop_on_ctrl_c();
    }
    let bar = knobs.observer(model);
    bar.start(values.len() as u64, "budget points");
    let mut best_so_far: Option<search::Found> = None;
    let mut new_points = 0;
    for (i, &value) in values.iter().enumerate() {
        if let Some(kept) = done.get(i) {
            best_so_far = kept.best.clone().or(best_so_far);
            bar.advance(
                kept.evaluated,
                kept.best.as_ref().map_or(f64::NAN, |b| b.power),
            );
            continue;
        }
        if let Some(file) = &request.checkpoint {
            let stop = ctrl_c_pressed() || request.stop_after.is_some_and(|n| new_points >= n);
            if stop {
                bar.finish();
                return Err(Error::Interrupted(format!(
                    "interrupted: {i} of {} budget points finished; they are kept in {} and `--resume` continues from there",
                    values.len(),
                    file.display()
                )));
            }
        }
        if let Some(stopped) = knobs.stopped(i, values.len(), "budget points") {
            bar.finish();
            return Err(stopped);
        }
        let budget = resolve_budget(model, &with_value(request.budget, over, value))?;
        let settings = knobs.settings(budget)?;
        // One searcher per budget value: its search and the relaxation at that budget.
        let searcher = searcher_for(model, &pairs, &bound, settings, knobs.blind)?;
        let outcome = search_model(&searcher, &knobs, &Silent)?;
        // A design that met a tighter budget meets this one too, so the best never falls.
        let mut best = outcome.designs.first().cloned();
        let carried = match (&best, &best_so_far) {
            (Some(now), Some(before)) if before.power > now.power => {
                best = Some(before.clone());
                true
            }
            _ => false,
        };
        if let Some(b) = &best {
            best_so_far = Some(b.clone());
        }
        let (relaxation, relaxation_gap) = match searcher.relaxation_all() {
            Ok(r) => (Some(r), None),
            Err(gap) => (None, Some(gap)),
        };
        bar.advance(
            outcome.evaluated,
            best.as_ref().map_or(f64::NAN, |b| b.power),
        );
        done.push(SweepDone {
            value,
            best,
            carried,
            evaluated: outcome.evaluated,
            relaxation,
            relaxation_gap,
        });
        new_points += 1;
        if let Some(file) = &request.checkpoint {
            write_sweep_checkpoint(file, &identity, &done, done.len() - 1)?;
        }
    }
    bar.finish();
    let mut points: Vec<SweepPoint> = done
        .iter()
        .map(|d| {
            SweepPoint::new(
                model,
                &bound,
                d.value,
                d.best.as_ref(),
                d.carried,
                d.evaluated,
                d.relaxation.ok_or_else(|| {
                    d.relaxation_gap.as_ref().map_or_else(
                        || "not recorded".to_string(),
                        search::RelaxationGap::to_string,
                    )
                }),
            )
        })
        .collect();
    let bests: Vec<Option<&search::Found>> = done.iter().map(|d| d.best.as_ref()).collect();
    let baseline = super::precision::sweep_precision(model, &bests, &mut points)?;
    let first = resolve_budget(model, &with_value(request.budget, over, values[0]))?;
    let report = SweepReport::new(
        model,
        &bound,
        describe(model, &pairs),
        over.name(),
        BudgetJson::of(&first, model),
        points,
    );
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: vec![("budgets", report.csv())],
        svg: Some(report.svg()),
    };
    let out = emit(
        model,
        &format!("sweep-{}", over.name()),
        request.format,
        request.save_root.as_deref(),
        rendered,
    )?;
    super::precision::emit_frontier(model, &report, &baseline, request, out)
}

/// A bare budget number means a different physical budget in models with different units (1000
/// per ms is not 1000 per s), so `compare` asks for the unit instead of guessing.
fn refuse_bare_budget_across_units(models: &[Model], flags: &BudgetFlags) -> Result<(), Error> {
    // What a bare number means in a model: the time unit for rates; the energy unit for work,
    // with the temperature when that unit is kT.
    let meaning = |m: &Model, rate: bool| -> String {
        let u = &m.units;
        match (rate, u.energy) {
            (true, _) => format!("per {}", u.time.name()),
            (false, crate::units::EnergyUnit::KT) => format!("kT at {} K", u.temperature),
            (false, energy) => energy.name().to_string(),
        }
    };
    for (flag, value, rate) in flags.bare() {
        let meanings: std::collections::BTreeSet<String> =
            models.iter().map(|m| meaning(m, rate)).collect();
        if meanings.len() < 2 {
            continue;
        }
        let each: Vec<String> = models
            .iter()
            .map(|m| format!("{}: {}", m.source.display(), meaning(m, rate)))
            .collect();
        let u = &models[0].units;
        let example = if rate {
            format!("{value}/{}", u.time.name())
        } else {
            match u.energy.name() {
                spaced if spaced.contains(' ') => format!("'{value} {spaced}'"),
                name => format!("{value}{name}"),
            }
        };
        return Err(Error::Usage(format!(
            "{flag} {value} is a bare number, but the models use different units ({}): write the unit, e.g. {flag} {example}",
            each.join("; ")
        )));
    }
    Ok(())
}

/// Settings of `ergopath compare`.
#[derive(Debug, Clone, Default)]
pub struct CompareRequest {
    pub budget: BudgetFlags,
    pub knobs: SearchKnobs,
    pub format: Format,
    pub save_root: Option<PathBuf>,
}

/// `ergopath compare`: ranks alternative architectures by bound and best power at a budget.
pub fn compare(paths: &[PathBuf], request: &CompareRequest) -> Result<String, Error> {
    if paths.len() < 2 {
        return Err(Error::Usage(
            "compare needs two or more model files: ergopath compare A.toml B.toml".into(),
        ));
    }
    let models = paths
        .iter()
        .map(|p| Model::load(p))
        .collect::<Result<Vec<_>, _>>()?;
    compare_models(&models, request)
}

/// [`compare`] on models in memory.
pub fn compare_models(models: &[Model], request: &CompareRequest) -> Result<String, Error> {
    if models.len() < 2 {
        return Err(Error::Usage("compare needs two or more models".into()));
    }
    refuse_bare_budget_across_units(models, &request.budget)?;
    let knobs = SearchKnobs {
        top: 1,
        ..request.knobs.clone()
    };
    let mut rows = Vec::with_capacity(models.len());
    for (i, model) in models.iter().enumerate() {
        if let Some(stopped) = knobs.stopped(i, models.len(), "models") {
            return Err(stopped);
        }
        let pairs = model.default_pairs();
        let bound = solve_bound(model, &pairs)?;
        let budget = resolve_budget(model, &request.budget)?;
        let best = if budget.relaxed_cap().is_some() {
            let settings = knobs.settings(budget)?;
            let searcher = searcher_for(model, &pairs, &bound, settings, knobs.blind)?;
            let outcome = search_model(&searcher, &knobs, &*knobs.observer(model))?;
            outcome.designs.first().map(|d| (d.clone(), budget))
        } else {
            None
        };
        rows.push(CompareRow::new(model, &bound, best.as_ref()));
    }
    let report = CompareReport::new(rows);
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: vec![("ranking", report.csv())],
        svg: Some(report.svg()),
    };
    // Results of a comparison belong to no single model: they go to results/compare/ (a model
    // file named compare.toml saves to results/compare-model/).
    emit_in(
        "compare",
        &models[0].title,
        "compare",
        request.format,
        request.save_root.as_deref(),
        rendered,
    )
}
