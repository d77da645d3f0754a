//! Python bindings (`ergopath._core`), built only with the `python` feature (maturin).
//!
//! Owns the translation between Python and the library API: models in memory, job settings as
//! one JSON object, results as the commands' own forms (so `to_dict()` equals `--json`), the
//! GIL released during every job, Ctrl-C (KeyboardInterrupt) turned into the search's stop
//! flag, and progress handed to a Python callable. It computes nothing itself and writes no file
//! unless the caller gave `save`. The Pythonic layer (`src/python/ergopath/__init__.py`) sits
//! on top.

use crate::commands::{self, BudgetFlags, Error, Format, SearchKnobs};
use crate::model::Model;
use crate::search::{Control, Observer};
use crate::units::{GivenEnergy, GivenRate};
use pyo3::exceptions::{PyKeyboardInterrupt, PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use serde::Deserialize;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Duration;

pyo3::create_exception!(
    _core,
    ModelError,
    PyValueError,
    "A model that cannot be read: the message names the place and the fix."
);
pyo3::create_exception!(
    _core,
    UsageError,
    PyValueError,
    "Settings that do not fit the model: the message says what to give instead."
);
pyo3::create_exception!(
    _core,
    SolveError,
    PyRuntimeError,
    "A computation that could not be completed or certified."
);

/// The command-line flags that messages name, and the keyword arguments they are in Python.
const FLAG_NAMES: [(&str, &str); 23] = [
    ("--rate-cap", "rate_cap"),
    ("--total-rate", "total_rate"),
    ("--work-limit", "work_limit"),
    ("--max-pathways", "max_pathways"),
    ("--beam-width", "beam_width"),
    ("--exhaustive-limit", "exhaustive_limit"),
    ("--max-fano", "max_fano"),
    ("--pairs", "pairs"),
    ("--top", "top"),
    ("--target", "target"),
    ("--threads", "threads"),
    ("--points", "points"),
    ("--from", "start"),
    ("--to", "stop"),
    ("--scale", "scale"),
    ("--over", "over"),
    ("--time", "time"),
    ("--runs", "runs"),
    ("--blind", "blind"),
    ("--samples", "samples"),
    ("--quantile", "quantile"),
    ("--rank", "rank"),
    ("--of", "of"),
];

/// A message of the library with each flag it names written as the keyword argument.
fn in_python_terms(message: &str) -> String {
    FLAG_NAMES
        .iter()
        .fold(message.to_string(), |text, (flag, keyword)| {
            text.replace(flag, keyword)
        })
}

/// The Python exception of a library error, with the CLI's message (flags named as keyword
/// arguments).
fn to_py(error: Error) -> PyErr {
    let message = match &error {
        Error::Model(_) => error.to_string(),
        _ => in_python_terms(&error.to_string()),
    };
    match error {
        Error::Model(_) => ModelError::new_err(message),
        Error::Usage(_) => UsageError::new_err(message),
        Error::Output(e) if e.is_bad_input() => UsageError::new_err(message),
        Error::Interrupted(_) => PyKeyboardInterrupt::new_err(message),
        Error::Solve(_) | Error::Output(_) | Error::Checkpoint { .. } => {
            SolveError::new_err(message)
        }
    }
}

/// A validated model held in memory.
#[pyclass(name = "CoreModel", module = "ergopath._core", frozen)]
pub struct PyModel {
    model: Arc<Model>,
    /// The TOML text it was read from (edits start from it).
    toml: String,
}

#[pymethods]
impl PyModel {
    /// Reads and validates a model file.
    #[staticmethod]
    fn load(py: Python<'_>, path: PathBuf) -> PyResult<Self> {
        let text = py.detach(|| Model::read_text(&path));
        let text = text.map_err(|e| to_py(Error::Model(e)))?;
        Self::parse(&text, path)
    }

    /// Validates TOML text; `name` stands for the file in messages and names the results
    /// folder.
    #[staticmethod]
    fn from_toml(text: String, name: String) -> PyResult<Self> {
        Self::parse(&text, PathBuf::from(name))
    }

    #[getter]
    fn toml(&self) -> &str {
        &self.toml
    }

    #[getter]
    fn title(&self) -> &str {
        &self.model.title
    }

    #[getter]
    fn source(&self) -> String {
        self.model.source.display().to_string()
    }

    /// State names of the network solved (`state@environment` in a joint chain).
    #[getter]
    fn states(&self) -> Vec<String> {
        self.model.state_names.clone()
    }

    /// One kT in the model's energy unit.
    #[getter]
    fn kt(&self) -> f64 {
        self.model.units.from_kt(1.0)
    }

    /// `(energy, time, power, temperature in K)`.
    #[getter]
    fn units(&self) -> (String, String, String, f64) {
        let u = &self.model.units;
        (
            u.energy.name().to_string(),
            u.time.name().to_string(),
            u.power_label(),
            u.temperature,
        )
    }

    /// The steady state alone, without the report: `(probabilities, power, power_roundoff,
    /// drive_power, entropy_production, relative_residual, method)`, power in the model's
    /// units. The fast path of parameter scans.
    fn steady_state(&self, py: Python<'_>) -> PyResult<SteadyTuple> {
        let model = &self.model;
        py.detach(|| {
            let state =
                crate::steady::solve(&model.network, &crate::steady::SteadySettings::default())?;
            let obs = crate::steady::observe(&model.network, &state.probabilities);
            let u = &model.units;
            Ok((
                state.probabilities,
                u.from_kt(obs.power),
                u.from_kt(obs.power_roundoff),
                u.from_kt(obs.drive_power),
                obs.entropy_production,
                state.relative_residual,
                state.method.name(),
            ))
        })
        .map_err(|e: crate::steady::SolveError| to_py(Error::Solve(e)))
    }

    /// The certified universal bound alone (no design, tables or report), over `pairs` (`all`
    /// or `A/B,C/D`; `None`: the model's default). The fast path of parameter scans.
    #[pyo3(signature = (pairs=None))]
    fn certified_bound(&self, py: Python<'_>, pairs: Option<String>) -> PyResult<BoundTuple> {
        let model = &self.model;
        let selection = match pairs {
            Some(text) => model
                .parse_pairs(&text)
                .map_err(|e| UsageError::new_err(format!("pairs: {e}")))?,
            None => model.default_pairs(),
        };
        let solved = py.detach(|| {
            crate::bound::solve(
                &model.network,
                &selection,
                &crate::bound::BoundSettings::default(),
            )
        });
        let b = solved.map_err(|e| to_py(Error::Solve(e)))?;
        let u = &model.units;
        let gap = b.relative_gap();
        Ok((
            u.from_kt(b.power),
            u.from_kt(b.certified_upper),
            u.from_kt(b.roundoff),
            u.from_kt(b.baseline_power),
            u.from_kt(b.baseline_roundoff),
            gap,
            b.route,
            b.log_p,
        ))
    }
}

/// `(power, certified_upper, roundoff, baseline_power, baseline_roundoff, relative_gap,
/// route, ln p*)` in the model's units.
type BoundTuple = (f64, f64, f64, f64, f64, f64, &'static str, Vec<f64>);

type SteadyTuple = (Vec<f64>, f64, f64, f64, f64, f64, &'static str);

impl PyModel {
    fn parse(text: &str, source: PathBuf) -> PyResult<Self> {
        let model = Model::parse(text, &source).map_err(|e| to_py(Error::Model(e)))?;
        Ok(Self {
            model: Arc::new(model),
            toml: text.to_string(),
        })
    }
}

/// A budget value as Python gives it: a number in the model's unit, or text with a unit.
#[derive(Deserialize, Clone)]
#[serde(untagged)]
enum Given {
    Number(f64),
    Text(String),
}

impl Given {
    fn rate(&self, name: &str) -> Result<GivenRate, Error> {
        match self {
            Given::Number(v) => Ok(GivenRate::bare(*v)),
            Given::Text(t) => t.parse().map_err(|e| Error::Usage(format!("{name}: {e}"))),
        }
    }

    fn energy(&self, name: &str) -> Result<GivenEnergy, Error> {
        match self {
            Given::Number(v) => Ok(GivenEnergy::bare(*v)),
            Given::Text(t) => t.parse().map_err(|e| Error::Usage(format!("{name}: {e}"))),
        }
    }
}

/// Where added pathways may act: `"all"` or a list of state-name pairs.
#[derive(Deserialize)]
#[serde(untagged)]
enum Pairs {
    Named(String),
    List(Vec<(String, String)>),
}

/// Every setting a job may take, as the Python layer sends them (absent: the CLI default).
#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct Settings {
    pairs: Option<Pairs>,
    rate_cap: Option<Given>,
    total_rate: Option<Given>,
    work_limit: Option<Given>,
    max_pathways: Option<usize>,
    target: Option<f64>,
    top: Option<usize>,
    starts: Option<usize>,
    seed: Option<u64>,
    exhaustive_limit: Option<u64>,
    beam_width: Option<usize>,
    threads: Option<usize>,
    blind: Option<bool>,
    max_fano: Option<f64>,
    over: Option<String>,
    points: Option<usize>,
    scale: Option<String>,
    from: Option<f64>,
    to: Option<f64>,
    design: Option<PathBuf>,
    time: Option<f64>,
    runs: Option<usize>,
    samples: Option<usize>,
    quantile: Option<f64>,
    of: Option<String>,
    rank: Option<usize>,
    dot: Option<bool>,
}

impl Settings {
    /// `all` or `A/B,C/D` (names hold no `/` or `,`), or `None` for the model's default.
    fn pairs_text(&self) -> Option<String> {
        self.pairs.as_ref().map(|pairs| match pairs {
            Pairs::Named(text) => text.clone(),
            Pairs::List(list) => list
                .iter()
                .map(|(a, b)| format!("{a}/{b}"))
                .collect::<Vec<_>>()
                .join(","),
        })
    }

    fn budget(&self) -> Result<BudgetFlags, Error> {
        Ok(BudgetFlags {
            max_pathways: self.max_pathways,
            rate_cap: self
                .rate_cap
                .as_ref()
                .map(|g| g.rate("rate_cap"))
                .transpose()?,
            total_rate: self
                .total_rate
                .as_ref()
                .map(|g| g.rate("total_rate"))
                .transpose()?,
            work_limit: self
                .work_limit
                .as_ref()
                .map(|g| g.energy("work_limit"))
                .transpose()?,
        })
    }

    fn knobs(&self, control: &Control) -> SearchKnobs {
        let d = SearchKnobs::default();
        SearchKnobs {
            top: self.top.unwrap_or(d.top),
            starts: self.starts.unwrap_or(d.starts),
            seed: self.seed.unwrap_or(d.seed),
            exhaustive_limit: self.exhaustive_limit.unwrap_or(d.exhaustive_limit),
            beam_width: self.beam_width.unwrap_or(d.beam_width),
            threads: self.threads.unwrap_or(0),
            quiet: true,
            blind: self.blind.unwrap_or(false),
            control: control.clone(),
        }
    }
}

/// Progress of a run as counters the polling thread reads.
#[derive(Default)]
struct Counters {
    steps: AtomicU64,
    done: AtomicU64,
    what: Mutex<String>,
}

impl Observer for Counters {
    fn start(&self, steps: u64, what: &str) {
        self.steps.store(steps, Ordering::SeqCst);
        self.done.store(0, Ordering::SeqCst);
        if let Ok(mut w) = self.what.lock() {
            *w = what.to_string();
        }
    }

    fn advance(&self, _scored: u64, _best_power: f64) {
        self.done.fetch_add(1, Ordering::SeqCst);
    }
}

/// Runs `job` on another thread with the GIL released; every 20 ms the calling thread checks
/// for Ctrl-C (which sets the stop flag: the job ends after the work in flight and the
/// KeyboardInterrupt is raised) and calls `progress(done, total, what)`.
fn interruptible<T: Send>(
    py: Python<'_>,
    stop: &AtomicBool,
    counters: &Counters,
    progress: Option<&Py<PyAny>>,
    job: impl FnOnce() -> T + Send,
) -> PyResult<T> {
    py.detach(|| {
        std::thread::scope(|scope| {
            let handle = scope.spawn(job);
            let mut raised: Option<PyErr> = None;
            while !handle.is_finished() {
                std::thread::sleep(Duration::from_millis(20));
                let checked = Python::attach(|py| -> PyResult<()> {
                    py.check_signals()?;
                    if let Some(callback) = progress {
                        let what = counters.what.lock().map(|w| w.clone()).unwrap_or_default();
                        callback.call1(
                            py,
                            (
                                counters.done.load(Ordering::SeqCst),
                                counters.steps.load(Ordering::SeqCst),
                                what,
                            ),
                        )?;
                    }
                    Ok(())
                });
                if let Err(e) = checked {
                    stop.store(true, Ordering::SeqCst);
                    raised.get_or_insert(e);
                }
            }
            let outcome = handle.join();
            match (raised, outcome) {
                (Some(e), _) => Err(e),
                (None, Ok(value)) => Ok(value),
                (None, Err(_)) => Err(PyRuntimeError::new_err(
                    "the computation stopped unexpectedly (a bug: please report the model)",
                )),
            }
        })
    })
}

/// Runs one job (`steady`, `bound`, `design`, `sweep`, `compare`, `regimes`, `sensitivity`,
/// `uncertainty`, `simulate`, `draw`) on `models` (two or more for `compare`, else one) with
/// `settings` (a JSON object) and returns every form of its report as JSON: `{text, json, csv,
/// svg}` (`draw` returns its SVG or DOT text itself). With
/// `save`, the report is also written under `save/<model name>/` as the CLI's `--save` does.
#[pyfunction]
#[pyo3(signature = (job, models, settings, save=None, progress=None))]
fn run(
    py: Python<'_>,
    job: &str,
    models: Vec<Py<PyModel>>,
    settings: &str,
    save: Option<PathBuf>,
    progress: Option<Py<PyAny>>,
) -> PyResult<String> {
    let settings: Settings = serde_json::from_str(settings)
        .map_err(|e| UsageError::new_err(format!("settings: {e}")))?;
    let models: Vec<Arc<Model>> = models.iter().map(|m| m.get().model.clone()).collect();
    let stop = Arc::new(AtomicBool::new(false));
    let counters = Arc::new(Counters::default());
    let control = Control {
        stop: Some(stop.clone()),
        observer: Some(counters.clone()),
    };
    let job = job.to_string();
    let result = interruptible(py, &stop, &counters, progress.as_ref(), || {
        dispatch(&job, &models, &settings, save, &control)
    })?;
    result.map_err(to_py)
}

/// The one model of a single-model job.
fn single<'a>(models: &'a [Arc<Model>], job: &str) -> Result<&'a Model, Error> {
    match models {
        [one] => Ok(one),
        _ => Err(Error::Usage(format!("{job} takes exactly one model"))),
    }
}

fn dispatch(
    job: &str,
    models: &[Arc<Model>],
    s: &Settings,
    save: Option<PathBuf>,
    control: &Control,
) -> Result<String, Error> {
    let format = Format::Forms;
    let knobs = s.knobs(control);
    let in_threads = |work: &(dyn Fn() -> Result<String, Error> + Sync)| -> Result<String, Error> {
        rayon::ThreadPoolBuilder::new()
            .num_threads(knobs.threads)
            .build()
            .map_err(|e| Error::Usage(format!("threads={}: {e}", knobs.threads)))?
            .install(work)
    };
    match job {
        "compare" => {
            let models: Vec<Model> = models.iter().map(|m| (**m).clone()).collect();
            commands::compare_models(
                &models,
                &commands::CompareRequest {
                    budget: s.budget()?,
                    knobs: knobs.clone(),
                    format,
                    save_root: save,
                },
            )
        }
        "steady" => commands::steady_on(single(models, job)?, format, save.as_deref()),
        "sensitivity" => in_threads(&|| {
            commands::sensitivity_on(single(models, job)?, None, format, save.as_deref())
        }),
        "bound" => commands::bound_on(
            single(models, job)?,
            &commands::BoundRequest {
                pairs: s.pairs_text(),
                rate_cap: s.rate_cap.as_ref().map(|g| g.rate("rate_cap")).transpose()?,
                target: s.target.unwrap_or(0.99),
                format,
                save_root: save,
            },
        ),
        "regimes" => commands::regimes_on(
            single(models, job)?,
            &commands::RegimesRequest {
                scale: s.scale.clone().unwrap_or_else(|| "stored".into()),
                from: s.from.unwrap_or(0.01),
                to: s.to.unwrap_or(1000.0),
                points: s.points.unwrap_or(11),
                format,
                save_root: save,
            },
        ),
        "design" => commands::design_on(
            single(models, job)?,
            None,
            &commands::DesignRequest {
                pairs: s.pairs_text(),
                budget: s.budget()?,
                knobs,
                max_fano: s.max_fano,
                samples: s.samples.map(|n| (n, s.quantile.unwrap_or(0.05))),
                format,
                save_root: save,
                ..Default::default()
            },
        ),
        "sweep" => commands::sweep_on(
            single(models, job)?,
            None,
            &commands::SweepRequest {
                pairs: s.pairs_text(),
                budget: s.budget()?,
                knobs,
                over: s.over.clone().unwrap_or_default(),
                points: s.points.unwrap_or(13),
                format,
                save_root: save,
                ..Default::default()
            },
        ),
        "draw" => {
            let of = match s.of.as_deref() {
                None => None,
                Some("baseline") => Some(commands::DrawOf::Baseline),
                Some("bound") => Some(commands::DrawOf::Bound),
                Some("design") => Some(commands::DrawOf::Design),
                Some(other) => {
                    return Err(Error::Usage(format!(
                        "of='{other}': give 'baseline', 'bound' or 'design'"
                    )))
                }
            };
            commands::draw_on(
                single(models, job)?,
                &commands::DrawRequest {
                    of,
                    design: s.design.clone(),
                    rank: s.rank.unwrap_or(1),
                    dot: s.dot.unwrap_or(false),
                    save_root: save,
                },
            )
        }
        "uncertainty" => commands::uncertainty_on(
            single(models, job)?,
            &commands::UncertaintyRequest {
                pairs: s.pairs_text(),
                samples: s.samples.unwrap_or(1000),
                seed: s.seed.unwrap_or(1),
                knobs,
                format,
                save_root: save,
                ..Default::default()
            },
        ),
        "simulate" => in_threads(&|| {
            commands::simulate_on(
                single(models, job)?,
                &commands::SimulateRequest {
                    design: s.design.clone(),
                    time: s.time.unwrap_or(f64::NAN),
                    runs: s.runs.unwrap_or(1000),
                    seed: s.seed.unwrap_or(1),
                    quiet: true,
                    format,
                    save_root: save.clone(),
                    control: control.clone(),
                },
            )
        }),
        other => Err(Error::Usage(format!(
            "'{other}' is not a job: give steady, bound, design, sweep, compare, regimes, sensitivity, uncertainty or simulate"
        ))),
    }
}

/// The data of a TOML document as JSON (for editing a model as a Python dict).
#[pyfunction]
fn toml_to_json(text: &str) -> PyResult<String> {
    let table: toml::Table =
        toml::from_str(text).map_err(|e| ModelError::new_err(e.to_string()))?;
    serde_json::to_string(&table).map_err(|e| ModelError::new_err(e.to_string()))
}

/// A TOML document from JSON data (a model built or edited as a Python dict).
#[pyfunction]
fn json_to_toml(json: &str) -> PyResult<String> {
    let table: toml::Table = serde_json::from_str(json).map_err(|e| {
        ModelError::new_err(format!(
            "the model data cannot be written as a model file ({e}): give tables, lists, strings, finite numbers and booleans only"
        ))
    })?;
    toml::to_string(&table).map_err(|e| ModelError::new_err(e.to_string()))
}

/// The complete model-file and JSON reference.
#[pyfunction]
fn reference() -> &'static str {
    commands::MODEL_FORMAT
}

#[pymodule]
#[pyo3(name = "_core")]
fn core_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyModel>()?;
    m.add_function(wrap_pyfunction!(run, m)?)?;
    m.add_function(wrap_pyfunction!(toml_to_json, m)?)?;
    m.add_function(wrap_pyfunction!(json_to_toml, m)?)?;
    m.add_function(wrap_pyfunction!(reference, m)?)?;
    let py = m.py();
    m.add("ModelError", py.get_type::<ModelError>())?;
    m.add("UsageError", py.get_type::<UsageError>())?;
    m.add("SolveError", py.get_type::<SolveError>())?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
