//! One entry point per command: load the model, run the stages, build the report.
//!
//! This is the seam between the binary and the library: the binary turns flags into the plain
//! settings below and prints the returned text. Nothing here parses flags, prints or exits.

use crate::model::{Model, ModelError, PairSelection};
use crate::report::output::{to_json, OutputError};
use crate::report::{check::check_text, steady::SteadyReport};
use crate::steady::{SolveError, SteadySettings};
use crate::units::GivenRate;
use std::path::Path;

/// The complete model-file and JSON reference, printed by `ergopath reference` (the same text
/// as `docs/model-format.md`, compiled in so that it matches this build).
pub const MODEL_FORMAT: &str = include_str!("../../docs/model-format.md");

mod draw;
pub mod files;
mod precision;
mod search;
mod uncertainty;
pub use draw::{draw, draw_on, DrawOf, DrawRequest};
pub use precision::{simulate, simulate_on, SimulateRequest};
pub use search::{
    compare, compare_models, design, design_on, merge, sweep, sweep_on, BudgetFlags,
    CompareRequest, DesignRequest, SearchKnobs, SweepRequest,
};
pub use uncertainty::{uncertainty, uncertainty_on, UncertaintyRequest};

/// Errors of a command run, by boundary.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error(transparent)]
    Model(#[from] ModelError),
    /// A flag value that is wrong for this model (e.g. a pair naming a missing state).
    #[error("{0}")]
    Usage(String),
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Stopped on request (Ctrl-C) with the progress kept.
    #[error("{0}")]
    Interrupted(String),
    /// The checkpoint file could not be written: the run stopped, the file holds `kept`.
    #[error("{source}\n  the run stopped: the checkpoint holds {kept} (as last written)\n  fix: free space or give another --checkpoint FILE, then rerun with --resume")]
    Checkpoint {
        #[source]
        source: OutputError,
        kept: String,
    },
}

impl Error {
    /// Exit status: 2 for bad input (model or flags), 1 for a failure of the computation.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Model(_) | Error::Usage(_) => 2,
            Error::Output(e) if e.is_bad_input() => 2,
            Error::Solve(_) | Error::Output(_) | Error::Checkpoint { .. } => 1,
            // The conventional status of a process stopped by SIGINT.
            Error::Interrupted(_) => 130,
        }
    }
}

/// Output format of a report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Format {
    #[default]
    Text,
    Json,
    /// The report's first table as CSV (the text where a report has none).
    Csv,
    /// The report's table of this name as CSV ([`CSV_TABLES`]); an error names the tables a
    /// report has when it has no such table.
    CsvTable(&'static str),
    /// Every form at once, for library callers: one JSON object with `text`, `json` (the
    /// report's JSON as a string), `csv` (the first table), `tables` (every table by name) and
    /// `svg` (null where the report has none).
    Forms,
}

/// Every table name a report may have, for `--csv=TABLE` ([`Format::CsvTable`]): `steady`:
/// transitions, states, cycles; `bound`: summary, states, pathways, speed; `design` and `merge`:
/// pathways, ranking, precision; `sweep`: budgets (its `--save` also writes the frontier
/// table as `frontier-<over>.csv`); `regimes`: scales; `sensitivity`: parameters; `compare`: ranking; `uncertainty`: samples,
/// quantiles. The first of each command is what `--csv` alone prints.
pub const CSV_TABLES: [&str; 14] = [
    "transitions",
    "states",
    "cycles",
    "summary",
    "pathways",
    "speed",
    "ranking",
    "precision",
    "budgets",
    "scales",
    "parameters",
    "samples",
    "quantiles",
    "estimates",
];

/// `ergopath check`: validate and summarise.
pub fn check(path: &Path, format: Format) -> Result<String, Error> {
    let model = Model::load(path)?;
    let report = crate::report::check::CheckReport::new(&model);
    let rendered = Rendered {
        text: check_text(&model),
        json: to_json(&report)?,
        tables: report.csv(&model),
        svg: None,
    };
    emit(&model, "check", format, None, rendered)
}

/// The results folder name of a model: its file stem made safe ([`output::safe_name`]).
pub fn folder_name(model: &Model) -> String {
    crate::report::output::safe_name(&model.stem())
}

/// Writes the forms of report `report` (each `(file name, contents)`) into `root/<folder>/` as
/// one set, with the folder's `report.md`, `report.html` and `manifest.json`, and returns a
/// line naming what was written. The folder is locked meanwhile; every file is staged before
/// any is renamed into place, so an error leaves the previous set whole, and the manifest is
/// renamed last.
fn save(
    root: &Path,
    folder: &str,
    title: &str,
    report: &str,
    files: &[(&str, &str)],
) -> Result<String, Error> {
    save_with_tables(root, folder, title, report, files, &[])
}

/// [`save`] with the report's further tables: each `(table, csv)` is saved as the companion
/// report `<report>-<table>` holding only `<report>-<table>.csv`. Companions of `report` from an
/// earlier save that this one no longer has leave the manifest.
fn save_with_tables(
    root: &Path,
    folder: &str,
    title: &str,
    report: &str,
    files: &[(&str, &str)],
    tables: &[(&str, &str)],
) -> Result<String, Error> {
    use crate::report::output::{self, Manifest, MANIFEST};
    if output::safe_report_name(report).is_none() {
        return Err(Error::Usage(format!(
            "'{report}' cannot name saved files: give names without separators or control characters"
        )));
    }
    let dir = output::results_folder(root, folder)?;
    let lock = output::lock_folder(&dir)?;
    output::remove_stale_set_files(&lock, &dir);
    let mut manifest = Manifest::read(&dir)?;
    manifest.reports.insert(
        report.to_string(),
        files.iter().map(|(name, _)| name.to_string()).collect(),
    );
    let prefix = format!("{report}-");
    manifest.reports.retain(|name, listed| {
        !(name.starts_with(&prefix) && listed.len() == 1 && listed[0] == format!("{name}.csv"))
    });
    let table_files: Vec<(String, &str)> = tables
        .iter()
        .map(|(table, csv)| (format!("{report}-{table}.csv"), *csv))
        .collect();
    for ((table, _), (name, _)) in tables.iter().zip(&table_files) {
        manifest
            .reports
            .insert(format!("{report}-{table}"), vec![name.clone()]);
    }
    let files: Vec<(&str, &str)> = files
        .iter()
        .copied()
        .chain(table_files.iter().map(|(n, c)| (n.as_str(), *c)))
        .collect();
    let files = files.as_slice();
    let mut staged = Vec::with_capacity(files.len() + 2);
    let mut written = Vec::with_capacity(files.len() + 1);
    for (name, contents) in files {
        let path = dir.join(name);
        staged.push(output::stage_in_set(&lock, &path, contents.as_bytes())?);
        written.push(path.display().to_string());
    }
    let text_name = format!("{report}.txt");
    let current = files
        .iter()
        .find(|(name, _)| *name == text_name)
        .map(|(_, text)| text.to_string());
    let summary = crate::report::summary::report_markdown(title, &manifest, &mut |stem| {
        if stem == report {
            Ok(current.clone())
        } else {
            output::read_back(&dir.join(format!("{stem}.txt")))
        }
    })
    .map_err(|source| OutputError::Write {
        path: dir.clone(),
        source,
    })?;
    let summary = output::printable(&summary).into_owned();
    let summary_path = dir.join("report.md");
    staged.push(output::stage_in_set(
        &lock,
        &summary_path,
        summary.as_bytes(),
    )?);
    written.push(summary_path.display().to_string());
    // report.html from the same list: this save's files as given, the others read back.
    let mut listed = |name: &str| match files.iter().find(|(n, _)| *n == name) {
        Some((_, contents)) => Ok(Some(contents.to_string())),
        None => output::read_back(&dir.join(name)),
    };
    let html =
        crate::report::html::report_html(title, &manifest, &mut listed).map_err(|source| {
            OutputError::Write {
                path: dir.clone(),
                source,
            }
        })?;
    let html_path = dir.join("report.html");
    let html = output::printable(&html);
    staged.push(output::stage_in_set(&lock, &html_path, html.as_bytes())?);
    written.push(html_path.display().to_string());
    staged.push(output::stage_in_set(
        &lock,
        &dir.join(MANIFEST),
        to_json(&manifest)?.as_bytes(),
    )?);
    for file in staged {
        file.commit()?;
    }
    Ok(format!("\n  saved: {}\n", written.join(", ")))
}

/// A report in every form a command can print or save.
struct Rendered {
    text: String,
    json: String,
    /// The report's tables as CSV, `(table name, csv)`: the first is `<name>.csv` and what
    /// `--csv` prints; the others are saved as `<name>-<table>.csv` and printed by
    /// `--csv=<table>`.
    tables: Vec<(&'static str, String)>,
    svg: Option<String>,
}

/// The printed output in `format`; with `save_root`, every form is also written under
/// `save_root/<stem>/` as `<name>.txt`, `<name>.json` (and `.csv`, `.svg` when there are some).
fn emit(
    model: &Model,
    name: &str,
    format: Format,
    save_root: Option<&Path>,
    r: Rendered,
) -> Result<String, Error> {
    let folder = folder_name(model);
    emit_in(&folder, &model.title, name, format, save_root, r)
}

/// [`emit`] into the results folder `folder` (a safe name), `report.md` titled `title`.
fn emit_in(
    folder: &str,
    title: &str,
    name: &str,
    format: Format,
    save_root: Option<&Path>,
    r: Rendered,
) -> Result<String, Error> {
    // Titles and names from the model reach these forms; JSON escapes control characters
    // itself, the others lose them here.
    let clean = |text: String| crate::report::output::printable(&text).into_owned();
    let r = Rendered {
        text: clean(r.text),
        json: r.json,
        tables: r.tables.into_iter().map(|(t, c)| (t, clean(c))).collect(),
        svg: r.svg.map(clean),
    };
    let main_csv = r.tables.first().map(|(_, c)| c.clone());
    let printed = match format {
        Format::Text => r.text.clone(),
        Format::Json => r.json.clone(),
        Format::Csv => main_csv.clone().unwrap_or_else(|| r.text.clone()),
        Format::CsvTable(wanted) => match r.tables.iter().find(|(t, _)| *t == wanted) {
            Some((_, csv)) => csv.clone(),
            None => {
                let names: Vec<&str> = r.tables.iter().map(|(t, _)| *t).collect();
                return Err(Error::Usage(if names.is_empty() {
                    format!("--csv={wanted}: `{name}` writes no table")
                } else {
                    format!(
                        "--csv={wanted}: `{name}` has no such table; its tables are {} (--csv alone prints {})",
                        names.join(", "),
                        names[0]
                    )
                }));
            }
        },
        Format::Forms => {
            let tables: serde_json::Map<String, serde_json::Value> = r
                .tables
                .iter()
                .map(|(t, c)| (t.to_string(), serde_json::Value::String(c.clone())))
                .collect();
            to_json(&serde_json::json!({
                "text": r.text,
                "json": r.json,
                "csv": main_csv,
                "tables": tables,
                "svg": r.svg,
            }))?
        }
    };
    let Some(root) = save_root else {
        return Ok(printed);
    };
    let names = ["txt", "json", "csv", "svg"].map(|ext| format!("{name}.{ext}"));
    let forms = [
        Some(&r.text),
        Some(&r.json),
        main_csv.as_ref(),
        r.svg.as_ref(),
    ];
    let files: Vec<(&str, &str)> = names
        .iter()
        .zip(forms)
        .filter_map(|(n, form)| form.map(|f| (n.as_str(), f.as_str())))
        .collect();
    let more: Vec<(&str, &str)> = r
        .tables
        .iter()
        .skip(1)
        .map(|(t, c)| (*t, c.as_str()))
        .collect();
    let note = save_with_tables(root, folder, title, name, &files, &more)?;
    // Machine-readable output stays clean; the note only follows the readable report.
    Ok(if format == Format::Text {
        printed + &note
    } else {
        printed
    })
}

/// `ergopath steady`: stationary distribution and power budget.
pub fn steady(path: &Path, format: Format, save_root: Option<&Path>) -> Result<String, Error> {
    steady_on(&Model::load(path)?, format, save_root)
}

/// [`steady`] on a model in memory.
pub fn steady_on(model: &Model, format: Format, save_root: Option<&Path>) -> Result<String, Error> {
    let (state, obs, precision) =
        crate::fluctuation::of_network(&model.network, &SteadySettings::default())?;
    let cycles = crate::model::cycles::listed_cycles(&model.network).unwrap_or_default();
    let report = SteadyReport::new(model, &state, &obs, &precision, &cycles);
    let rendered = Rendered {
        text: report.text(model),
        json: to_json(&report)?,
        tables: report.tables(model),
        svg: save_root.map(|_| draw::baseline_svg(model, &state.probabilities, &obs)),
    };
    emit(model, "steady", format, save_root, rendered)
}

/// `ergopath sensitivity`: derivatives of the baseline power and of the universal bound with
/// respect to every parameter, ranked by their effect on the headroom.
pub fn sensitivity(
    path: &Path,
    design: Option<(&Path, usize)>,
    format: Format,
    save_root: Option<&Path>,
) -> Result<String, Error> {
    let model = Model::load(path)?;
    let design = match design {
        Some((file, rank)) => Some((
            format!("{} rank {rank}", file.display()),
            precision::read_ranked_design(file, &model, rank)?,
        )),
        None => None,
    };
    sensitivity_on(
        &model,
        design.as_ref().map(|(n, p)| (n.as_str(), p.as_slice())),
        format,
        save_root,
    )
}

/// [`sensitivity`] on a model in memory, with a design (a name for the report and its
/// pathways) whose power's derivatives join the table.
pub fn sensitivity_on(
    model: &Model,
    design: Option<(&str, &[crate::bound::design::Pathway])>,
    format: Format,
    save_root: Option<&Path>,
) -> Result<String, Error> {
    let pairs = model.default_pairs();
    let bound = crate::bound::solve(
        &model.network,
        &pairs,
        &crate::bound::BoundSettings::default(),
    )?;
    let sensitivities = crate::sensitivity::analyse(model, &bound, &pairs)?;
    let designed = match design {
        Some((name, pathways)) => Some((
            name.to_string(),
            crate::bound::design::verify(&model.network, pathways)?.power,
            crate::sensitivity::design_power(model, pathways)?,
        )),
        None => None,
    };
    let report = crate::report::sensitivity::SensitivityReport::new(
        model,
        &bound,
        &sensitivities,
        designed
            .as_ref()
            .map(|(n, power, d)| (n.clone(), *power, d.as_slice())),
    );
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: vec![("parameters", report.csv())],
        svg: Some(report.svg()),
    };
    emit(model, "sensitivity", format, save_root, rendered)
}

/// What `ergopath bench` times.
#[derive(Debug, Clone)]
pub struct BenchRequest {
    /// Sizes for the steady-state timings.
    pub steady_sizes: Vec<usize>,
    /// Sizes for the bound timings.
    pub bound_sizes: Vec<usize>,
    /// Largest network given to the conic route.
    pub conic_limit: usize,
    pub runs: usize,
    /// Folder for `steady.csv`, `bound.csv` and `design.csv`.
    pub out_dir: std::path::PathBuf,
    /// `(states, max pathways)` of the design-search timing; `None` skips it.
    pub design: Option<(usize, usize)>,
}

/// `ergopath bench`: timings on the seeded synthetic families, printed and written as CSV.
pub fn bench(request: &BenchRequest) -> Result<String, Error> {
    use crate::bench::{time_bound, time_steady, Family};
    use crate::report::bench::{bound_tables, refusals, steady_tables};
    use crate::report::output::write_atomic;
    let sizes = request.steady_sizes.iter().chain(&request.bound_sizes);
    if let Some(&bad) = sizes.into_iter().find(|&&n| n < 4) {
        return Err(Error::Usage(format!(
            "benchmark size {bad} is too small: give sizes of at least 4 states"
        )));
    }
    let families = Family::ALL;
    let runs = request.runs.max(1);
    let (table, csv) = steady_tables(&time_steady(&request.steady_sizes, &families, runs)?);
    let steady_path = request.out_dir.join("steady.csv");
    write_atomic(&steady_path, csv.as_bytes())?;
    let bound_rows = time_bound(&request.bound_sizes, &families, runs, request.conic_limit)?;
    let (mut bound_table, bound_csv) = bound_tables(&bound_rows);
    bound_table.push_str(&refusals(&bound_rows));
    let bound_path = request.out_dir.join("bound.csv");
    write_atomic(&bound_path, bound_csv.as_bytes())?;
    let mut out = format!(
        "Steady-state solve, median of {runs} runs (2n channels each; random chords only up to {} states)\n\n{}\nCertified bound, all pairs (conic route up to {} states)\n\n{}",
        crate::bench::RANDOM_CHORDS_LIMIT,
        table,
        request.conic_limit,
        bound_table,
    );
    let mut written = vec![steady_path, bound_path];
    if let Some((states, k)) = request.design {
        if !(3..=crate::search::evaluate::DENSE_LIMIT).contains(&states) || k == 0 {
            return Err(Error::Usage(format!(
                "design benchmark of {states} states and {k} pathways: give 3..{} states and at least one pathway",
                crate::search::evaluate::DENSE_LIMIT
            )));
        }
        let timing = crate::bench::time_design(states, k, runs)?;
        let (design_table, design_csv) = crate::report::bench::design_tables(&timing);
        let design_path = request.out_dir.join("design.csv");
        write_atomic(&design_path, design_csv.as_bytes())?;
        out.push_str(&format!(
            "\nDesign search, random-chord network, all pairs, rate cap {}, top 10 (a scoring is one steady-state solve with its adjoint gradient)\n\n{}",
            crate::bench::DESIGN_RATE_CAP,
            design_table
        ));
        written.push(design_path);
    }
    let names: Vec<String> = written.iter().map(|p| p.display().to_string()).collect();
    out.push_str(&format!("\n  written: {}\n", names.join(", ")));
    Ok(out)
}

/// Settings of `ergopath bound` as given on the command line (model defaults fill the gaps).
#[derive(Debug, Clone, Default)]
pub struct BoundRequest {
    /// `all` or `A/B,C/D`; `None` uses `[pathways] pairs` or all pairs.
    pub pairs: Option<String>,
    /// Per-direction rate cap for the exact capped design; `None` uses `[pathways] rate_cap`.
    pub rate_cap: Option<GivenRate>,
    /// Share of the headroom the printed design must reach (0 < target < 1).
    pub target: f64,
    pub format: Format,
    /// Also write the report under `<save_root>/<model stem>/`.
    pub save_root: Option<std::path::PathBuf>,
}

/// The pair selection from `--pairs` text, else the model's `[pathways] pairs`, else all.
fn resolve_pairs(model: &Model, text: Option<&str>) -> Result<PairSelection, Error> {
    match text {
        Some(text) => model
            .parse_pairs(text)
            .map_err(|e| Error::Usage(format!("--pairs: {e}"))),
        None => Ok(model.default_pairs()),
    }
}

pub use crate::bound::design::{CAPPED_ALL_PAIRS_LIMIT, SPEED_TABLE_FRACTIONS};

/// `ergopath bound`: certified bound, attaining design, speed table, capped design.
pub fn bound(path: &Path, request: &BoundRequest) -> Result<String, Error> {
    bound_on(&Model::load(path)?, request)
}

/// [`bound`] on a model in memory.
pub fn bound_on(model: &Model, request: &BoundRequest) -> Result<String, Error> {
    use crate::bound::{self, design, BoundSettings};
    use crate::report::bound::BoundReport;
    if !(request.target > 0.0 && request.target < 1.0) {
        return Err(Error::Usage(format!(
            "--target {} is not a share of the headroom: give a number between 0 and 1, e.g. 0.99",
            request.target
        )));
    }
    let pairs = resolve_pairs(model, request.pairs.as_deref())?;
    let rate_cap = request
        .rate_cap
        .map(|cap| cap.in_units(&model.units))
        .or(model.pathways.rate_cap);
    if let Some(cap) = rate_cap.filter(|c| !(c.is_finite() && *c > 0.0)) {
        return Err(Error::Usage(format!(
            "--rate-cap {cap}: give a positive rate per {}",
            model.units.time.name()
        )));
    }
    let net = &model.network;
    if rate_cap.is_some() && pairs == PairSelection::All && net.len() > CAPPED_ALL_PAIRS_LIMIT {
        return Err(Error::Usage(format!(
            "--rate-cap over all pairs of {} states means {} candidate pathways; the exact capped design is limited to {CAPPED_ALL_PAIRS_LIMIT} states: give --pairs A/B,C/D",
            net.len(),
            net.len() * (net.len() - 1) / 2
        )));
    }
    let solved = bound::solve(net, &pairs, &BoundSettings::default())?;
    let attaining =
        design::attaining(net, &solved, &pairs, request.target, &SPEED_TABLE_FRACTIONS)?;
    // A conic failure on the capped program loses only that section: the bound and the
    // attaining design stand on their own, and the report says what failed.
    let (capped, capped_failure) =
        match rate_cap.map(|cap| (cap, design::capped_design(net, &pairs, cap))) {
            Some((cap, Ok(d))) => (Some((cap, d)), None),
            Some((cap, Err(e))) => (None, Some((cap, e.to_string()))),
            None => (None, None),
        };
    let mut report = BoundReport::new(
        model,
        &solved,
        &pairs,
        &attaining,
        request.target,
        capped.as_ref().map(|(c, d)| (*c, d)),
        &closed_forms_of(net, &pairs, &solved),
    );
    report.rate_capped_failure = capped_failure
        .map(|(rate_cap, reason)| crate::report::bound::CappedFailure { rate_cap, reason });
    attach_precision(
        model,
        &mut report,
        attaining.design.as_ref(),
        capped.as_ref(),
    )?;
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: report.tables(),
        svg: report.svg(),
    };
    emit(
        model,
        "bound",
        request.format,
        request.save_root.as_deref(),
        rendered,
    )
}

/// The fluctuations of the work current of the baseline and of every design a bound report
/// shows, each from its own steady state (methods, section 12).
fn attach_precision(
    model: &Model,
    report: &mut crate::report::bound::BoundReport,
    design: Option<&crate::bound::design::VerifiedDesign>,
    capped: Option<&(f64, crate::bound::design::VerifiedDesign)>,
) -> Result<(), Error> {
    use crate::report::precision::PrecisionJson;
    let u = &model.units;
    use precision::design_precision;
    let baseline = design_precision(&model.network, &[])?;
    report.precision = Some(PrecisionJson::of(&baseline, u));
    if let (Some(json), Some(d)) = (report.design.as_mut(), design) {
        json.precision = Some(PrecisionJson::of(
            &design_precision(&model.network, &d.pathways)?,
            u,
        ));
    }
    if let (Some(json), Some((_, d))) = (report.rate_capped.as_mut(), capped) {
        json.design.precision = Some(PrecisionJson::of(
            &design_precision(&model.network, &d.pathways)?,
            u,
        ));
    }
    Ok(())
}

/// Settings of `ergopath regimes`.
#[derive(Debug, Clone, Default)]
pub struct RegimesRequest {
    /// `work`, `drive`, `energies` (comma-separated for several) or `stored`.
    pub scale: String,
    pub from: f64,
    pub to: f64,
    pub points: usize,
    pub format: Format,
    pub save_root: Option<std::path::PathBuf>,
}

/// Multipliers `(work, drive, energies)` for `scale`, or `None` for the stored-energy scaling.
fn scaling_of(text: &str) -> Result<Option<[bool; 3]>, Error> {
    if text.trim() == "stored" {
        return Ok(None);
    }
    let mut which = [false; 3];
    for part in text.split(',').map(str::trim) {
        match part {
            "work" => which[0] = true,
            "drive" => which[1] = true,
            "energies" => which[2] = true,
            other => {
                return Err(Error::Usage(format!(
                    "--scale: '{other}' is not a label to scale; give work, drive, energies (or a comma list of them), or stored"
                )))
            }
        }
    }
    Ok(Some(which))
}

/// The closed forms of the universal bound, their verdict checked against it; a bound over
/// restricted pairs is not what they estimate, so there the verdict stays the prediction.
fn closed_forms_of(
    net: &crate::model::Network,
    pairs: &PairSelection,
    solved: &crate::bound::Bound,
) -> crate::bound::closed_form::ClosedForms {
    let forms = crate::bound::closed_form::assess(net, &solved.baseline, solved.baseline_power);
    match pairs {
        PairSelection::All => forms.checked(solved.headroom()),
        _ => forms,
    }
}

/// `ergopath regimes`: exact headroom beside the closed forms along a scaling of the labels.
pub fn regimes(path: &Path, request: &RegimesRequest) -> Result<String, Error> {
    regimes_on(&Model::load(path)?, request)
}

/// [`regimes`] on a model in memory.
pub fn regimes_on(model: &Model, request: &RegimesRequest) -> Result<String, Error> {
    use crate::bound::{self, BoundSettings};
    use crate::report::regimes::{RegimePoint, RegimesReport};
    let which = scaling_of(&request.scale)?;
    let (from, to, points) = (request.from, request.to, request.points);
    if !(from.is_normal() && from > 0.0 && to > from && to.is_finite()) || points < 2 {
        return Err(Error::Usage(format!(
            "--from {from:e} --to {to:e} --points {points}: give 2.2e-308 <= FROM < TO (normal doubles) and at least 2 points (the scales are log-spaced)"
        )));
    }
    let u = &model.units;
    // The model's own pairs, as `bound` uses them: with a fluctuating environment, pathways
    // act within each environment state (they may not use its drive).
    let pairs = model.default_pairs();
    let mut rows = Vec::with_capacity(points);
    for scale in crate::numeric::log_spaced(from, to, points) {
        let net = match which {
            None => Some(model.network.with_stored_energy_scaled(scale)),
            Some([w, d, e]) => {
                let f = |on: bool| if on { scale } else { 1.0 };
                model.network.scaled(f(w), f(d), f(e))
            }
        };
        let mut row = RegimePoint {
            scale,
            headroom: None,
            failure: None,
            indicator: None,
            shift: None,
            regime: None,
            predicted: None,
            near_equilibrium: None,
            strong_drive: None,
        };
        let Some(net) = net else {
            row.failure = Some("a backward rate leaves the floating-point range".into());
            rows.push(row);
            continue;
        };
        match bound::solve(&net, &pairs, &BoundSettings::default()) {
            Err(e) => row.failure = Some(e.to_string()),
            Ok(b) => {
                let forms = closed_forms_of(&net, &pairs, &b);
                row.headroom = Some(u.from_kt(b.headroom()));
                row.indicator = Some(forms.indicator);
                row.shift = forms.shift;
                row.regime = Some(forms.regime.name());
                row.predicted = Some(forms.prediction.name());
                row.near_equilibrium = forms.near_equilibrium.map(|e| u.from_kt(e.headroom));
                row.strong_drive = forms.strong_drive.map(|s| u.from_kt(s.headroom));
            }
        }
        rows.push(row);
    }
    let report = RegimesReport {
        title: model.title.clone(),
        units: crate::report::UnitsJson::of(model),
        scaled: request.scale.trim().to_string(),
        pairs: crate::report::bound::describe_pairs(model, &pairs),
        closed_forms_compared: pairs == PairSelection::All,
        points: rows,
    };
    let rendered = Rendered {
        text: report.text(),
        json: to_json(&report)?,
        tables: vec![("scales", report.csv())],
        svg: Some(report.svg()),
    };
    let name = format!("regimes-{}", report.scaled.replace(',', "-"));
    emit(
        model,
        &name,
        request.format,
        request.save_root.as_deref(),
        rendered,
    )
}

/// The commented model template written by `ergopath new`.
pub const TEMPLATE: &str = include_str!("../template.toml");

/// `ergopath new`: writes the commented template to `NAME.toml`, never over an existing file.
pub fn new_model(name: &str) -> Result<String, Error> {
    let path = if name.ends_with(".toml") {
        std::path::PathBuf::from(name)
    } else {
        std::path::PathBuf::from(format!("{name}.toml"))
    };
    let exists = || {
        Error::Usage(format!(
            "{} already exists: give another name, or remove the file first",
            path.display()
        ))
    };
    if std::fs::symlink_metadata(&path).is_ok() {
        return Err(exists());
    }
    // Never over a file that appeared meanwhile either.
    crate::report::output::write_new(&path, TEMPLATE.as_bytes()).map_err(|e| match e {
        OutputError::Write { source, .. } if source.kind() == std::io::ErrorKind::AlreadyExists => {
            exists()
        }
        other => Error::Output(other),
    })?;
    Ok(format!(
        "wrote {p}, a commented three-state example to edit\n  next: ergopath check {p}\n",
        p = path.display()
    ))
}
