//! Fuzz target for part files and checkpoints: any bytes given to `merge` as a part file (beside
//! `fuzz/part-1-of-2.json`, the other shard of the seed `seeds-files/part-0-of-2.json`), or to
//! `design --resume` and `sweep --resume` as a checkpoint (on the shipped walker model), are
//! refused with a message or accepted, never a panic.
//!
//! The seeds are valid files of the walker (a test in `tests/all/safe_files.rs` keeps them so);
//! after a change of the formats, regenerate them from the repository root with
//! `ergopath design problems/walker.toml --shard I/2 --max-pathways 2 --top 4 --save -q` for
//! I = 0, 1 (part 0 to `seeds-files/part-0-of-2.json`, part 1 to `part-1-of-2.json`),
//! `ergopath design problems/walker.toml --max-pathways 2 --top 4 -q --checkpoint
//! fuzz/seeds-files/design-checkpoint.json --stop-after-branches=2` and `ergopath sweep
//! problems/walker.toml --over rate-cap=1..1e4 --points 5 -q --checkpoint
//! fuzz/seeds-files/sweep-checkpoint.json --stop-after-points=2`.
#![no_main]

use ergopath::commands::{self, BudgetFlags, DesignRequest, Format, SearchKnobs, SweepRequest};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

/// The fuzzer's bytes, sealed with a matching integrity digest when they are a JSON object (so
/// that the checks behind the digest are explored, not only the digest itself).
fn sealed(data: &[u8]) -> Vec<u8> {
    let Ok(mut value) = serde_json::from_slice::<serde_json::Value>(data) else {
        return data.to_vec();
    };
    if !value.is_object() || commands::files::seal(&mut value).is_err() {
        return data.to_vec();
    }
    serde_json::to_vec(&value).unwrap_or_else(|_| data.to_vec())
}

fuzz_target!(|data: &[u8]| {
    let data = &sealed(data)[..];
    let model = Path::new(env!("CARGO_MANIFEST_DIR")).join("../problems/walker.toml");
    let file = std::env::temp_dir().join(format!("ergopath-fuzz-{}.json", std::process::id()));
    if std::fs::write(&file, data).is_err() {
        return;
    }
    let knobs = SearchKnobs {
        top: 4,
        quiet: true,
        threads: 1,
        ..Default::default()
    };
    // Beside a valid second shard of the same search, so that a valid first one merges.
    let second = Path::new(env!("CARGO_MANIFEST_DIR")).join("part-1-of-2.json");
    let _ = commands::merge(&[file.clone(), second], Some(&model), Format::Json, None);
    // A checkpoint that is taken stops the run at once: only reading it is under test. Each run
    // rewrites the file it accepts, so each gets the fuzzer's bytes afresh.
    let design = DesignRequest {
        budget: BudgetFlags {
            max_pathways: Some(2),
            ..Default::default()
        },
        knobs,
        checkpoint: Some(file.clone()),
        resume: true,
        stop_after: Some(0),
        format: Format::Json,
        ..Default::default()
    };
    let _ = commands::design(&model, &design);
    if std::fs::write(&file, data).is_err() {
        return;
    }
    let sweep = SweepRequest {
        knobs,
        over: "rate-cap=1..1e4".into(),
        points: 5,
        checkpoint: Some(file.clone()),
        resume: true,
        stop_after: Some(0),
        ..Default::default()
    };
    let _ = commands::sweep(&model, &sweep);
    let _ = std::fs::remove_file(&file);
});
