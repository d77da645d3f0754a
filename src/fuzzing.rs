//! The bodies of the fuzz targets, as library functions, so that the stable toolchain runs them
//! too: `tests/all/fuzzing.rs` feeds them every committed seed and a bounded run of mutated
//! inputs on every CI run, and `fuzz/fuzz_targets/*.rs` (cargo-fuzz, nightly) calls the same
//! functions for long runs.
//!
//! Owns the invariants a fuzz run checks (they panic on a violation, which is what a fuzzer
//! reports); it must not be called by the CLI or by any stage.

use crate::commands::{
    self, BudgetFlags, DesignRequest, Format, SearchKnobs, SweepRequest, UncertaintyRequest,
};
use crate::model::Model;
use crate::steady::{self, SteadySettings};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

/// Any bytes as a model file: refused with a located error, or a model that keeps the
/// `Network` invariants (at least two states, positive finite rates, no self-loops) whose
/// steady state, up to 64 states, is positive and normalised or a reported solver error.
pub fn model_bytes(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(model) = Model::parse(text, Path::new("fuzz.toml")) else {
        return;
    };
    let net = &model.network;
    assert!(net.len() >= 2, "a model with {} states", net.len());
    assert_eq!(model.state_names.len(), net.len());
    assert_eq!(model.transitions.len(), net.channels.len());
    for c in &net.channels {
        assert!(c.from != c.to && c.from < net.len() && c.to < net.len());
        assert!(
            c.forward.is_finite() && c.forward > 0.0,
            "forward {}",
            c.forward
        );
        assert!(
            c.backward.is_finite() && c.backward > 0.0,
            "backward {}",
            c.backward
        );
    }
    if net.len() <= 64 {
        if let Ok(state) = steady::solve(net, &SteadySettings::default()) {
            let total: f64 = state.probabilities.iter().sum();
            assert!((total - 1.0).abs() < 1e-9, "probabilities sum to {total}");
            assert!(state.probabilities.iter().all(|p| *p > 0.0));
        }
    }
}

/// The fuzzer's bytes, sealed with a matching integrity digest when they are a JSON object, so
/// that the checks behind the digest are explored, not only the digest itself.
pub fn sealed(data: &[u8]) -> Vec<u8> {
    let Ok(mut value) = serde_json::from_slice::<serde_json::Value>(data) else {
        return data.to_vec();
    };
    if !value.is_object() || commands::files::seal(&mut value).is_err() {
        return data.to_vec();
    }
    serde_json::to_vec(&value).unwrap_or_else(|_| data.to_vec())
}

/// A file name in `dir` that no other call of this process uses at the same time.
fn scratch_file(dir: &Path) -> PathBuf {
    static NEXT: AtomicUsize = AtomicUsize::new(0);
    let n = NEXT.fetch_add(1, Ordering::Relaxed);
    dir.join(format!("ergopath-fuzz-{}-{n}.json", std::process::id()))
}

/// Any bytes as a part file given to `merge` beside `second_part` (the other shard of a valid
/// search of `model`), and as a checkpoint of `design --resume`, `sweep --resume` and
/// `uncertainty --resume` on `model`: refused with a message or accepted, never a panic. The bytes are written to a
/// fresh file in `dir`, removed afterwards.
pub fn file_bytes(data: &[u8], model: &Path, second_part: &Path, dir: &Path) {
    let data = &sealed(data)[..];
    let file = scratch_file(dir);
    if std::fs::write(&file, data).is_err() {
        return;
    }
    let knobs = SearchKnobs {
        top: 4,
        quiet: true,
        threads: 1,
        ..Default::default()
    };
    let parts = [file.clone(), second_part.to_path_buf()];
    let _ = commands::merge(&parts, Some(model), Format::Json, None);
    // A checkpoint that is taken stops the run at once: only reading it is under test. Each run
    // rewrites the file it accepts, so each gets the bytes afresh.
    let design = DesignRequest {
        budget: BudgetFlags {
            max_pathways: Some(2),
            ..Default::default()
        },
        knobs: knobs.clone(),
        checkpoint: Some(file.clone()),
        resume: true,
        stop_after: Some(0),
        format: Format::Json,
        ..Default::default()
    };
    let _ = commands::design(model, &design);
    if std::fs::write(&file, data).is_ok() {
        let sweep = SweepRequest {
            knobs: knobs.clone(),
            over: "rate-cap=1..1e4".into(),
            points: 5,
            checkpoint: Some(file.clone()),
            resume: true,
            stop_after: Some(0),
            ..Default::default()
        };
        let _ = commands::sweep(model, &sweep);
    }
    if std::fs::write(&file, data).is_ok() {
        let uncertainty = UncertaintyRequest {
            samples: 20,
            seed: 2,
            knobs,
            checkpoint: Some(file.clone()),
            resume: true,
            stop_after: Some(0),
            ..Default::default()
        };
        let _ = commands::uncertainty(model, &uncertainty);
    }
    let _ = std::fs::remove_file(&file);
}
