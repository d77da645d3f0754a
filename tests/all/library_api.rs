//! The library API on models in memory (what the Python package is built on): the in-memory
//! twins of the commands give the file-taking commands' output, every form at once, and a
//! caller's stop flag stops a search, a sweep and a comparison.

use crate::common::{load, root};
use ergopath::commands::{self, DesignRequest, Error, Format, SearchKnobs, SweepRequest};
use ergopath::search::{Control, Observer};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;

fn forms(json: &str) -> serde_json::Value {
    serde_json::from_str(json).expect("forms are JSON")
}

#[test]
fn a_model_in_memory_gives_the_commands_json_and_every_form() {
    let path = root().join("problems/walker.toml");
    let model = load("problems/walker.toml");
    let from_file = commands::steady(&path, Format::Json, None).unwrap();
    let all = forms(&commands::steady_on(&model, Format::Forms, None).unwrap());
    assert_eq!(all["json"].as_str().unwrap(), from_file);
    assert_eq!(
        all["text"].as_str().unwrap(),
        commands::steady(&path, Format::Text, None).unwrap()
    );
    assert_eq!(
        all["csv"].as_str().unwrap(),
        commands::steady(&path, Format::Csv, None).unwrap()
    );
    assert!(all["svg"].is_null(), "steady draws no chart");
    let request = commands::BoundRequest {
        target: 0.99,
        format: Format::Json,
        ..Default::default()
    };
    assert_eq!(
        commands::bound(&path, &request).unwrap(),
        commands::bound_on(&model, &request).unwrap()
    );
}

/// Counts what the search reports, and asks it to stop after the first step.
struct StopAfterFirst {
    stop: Arc<AtomicBool>,
    steps: AtomicU64,
    started: AtomicU64,
}

impl Observer for StopAfterFirst {
    fn start(&self, steps: u64, _what: &str) {
        self.started.store(steps, Ordering::SeqCst);
    }
    fn advance(&self, _scored: u64, _best: f64) {
        self.steps.fetch_add(1, Ordering::SeqCst);
        self.stop.store(true, Ordering::SeqCst);
    }
}

fn stopping_knobs() -> (SearchKnobs, Arc<StopAfterFirst>) {
    let stop = Arc::new(AtomicBool::new(false));
    let observer = Arc::new(StopAfterFirst {
        stop: stop.clone(),
        steps: AtomicU64::new(0),
        started: AtomicU64::new(0),
    });
    let knobs = SearchKnobs {
        threads: 1,
        quiet: true,
        control: Control {
            stop: Some(stop),
            observer: Some(observer.clone()),
        },
        ..Default::default()
    };
    (knobs, observer)
}

#[test]
fn a_callers_stop_flag_stops_searches_and_sweeps_with_nothing_written() {
    let model = load("problems/ring6.toml");
    let out = tempfile::tempdir().unwrap();
    // Exhaustive search (branches) and beam search (levels): both stop after the first step.
    for exhaustive_limit in [ergopath::search::EXHAUSTIVE_LIMIT, 1] {
        let (knobs, observer) = stopping_knobs();
        let request = DesignRequest {
            budget: commands::BudgetFlags {
                max_pathways: Some(3),
                ..Default::default()
            },
            knobs: SearchKnobs {
                exhaustive_limit,
                ..knobs
            },
            format: Format::Json,
            save_root: Some(out.path().to_path_buf()),
            ..Default::default()
        };
        let stopped = commands::design_on(&model, None, &request).unwrap_err();
        assert!(matches!(stopped, Error::Interrupted(_)), "{stopped}");
        assert_eq!(stopped.exit_code(), 130);
        let total = observer.started.load(Ordering::SeqCst);
        assert!(
            total >= 2,
            "the search has {total} steps: too few to see a stop"
        );
        assert!(
            observer.steps.load(Ordering::SeqCst) < total,
            "every step ran although the flag was set after the first"
        );
    }
    let (knobs, _) = stopping_knobs();
    let sweep = SweepRequest {
        over: "rate-cap=1..100".into(),
        points: 4,
        knobs,
        format: Format::Json,
        save_root: Some(out.path().to_path_buf()),
        ..Default::default()
    };
    let stopped = commands::sweep_on(&model, None, &sweep).unwrap_err();
    assert!(
        stopped.to_string().contains("of 4 budget points"),
        "{stopped}"
    );
    assert_eq!(
        std::fs::read_dir(out.path()).unwrap().count(),
        0,
        "a stopped run wrote files"
    );
}

#[test]
fn checkpoints_and_shards_need_a_model_file() {
    let model = load("problems/ring6.toml");
    let request = DesignRequest {
        shard: Some((0, 2)),
        format: Format::Json,
        ..Default::default()
    };
    let refused = commands::design_on(&model, None, &request).unwrap_err();
    assert_eq!(refused.exit_code(), 2);
    assert!(refused
        .to_string()
        .contains("needs a model loaded from a file"));
}
