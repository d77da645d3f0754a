//! Fuzz target for part files and checkpoints: any bytes given to `merge` as a part file (beside
//! `fuzz/part-1-of-2.json`, the other shard of the seed `seeds-files/part-0-of-2.json`), or to
//! `design --resume`, `sweep --resume` and `uncertainty --resume` as a checkpoint (on the
//! shipped walker model), are
//! refused with a message or accepted, never a panic. The body is
//! `ergopath::fuzzing::file_bytes`, which `tests/all/fuzzing.rs` also runs on stable.
//!
//! The seeds are valid files of the walker (a test in `tests/all/safe_files.rs` keeps them so);
//! after a change of the formats, regenerate them from the repository root with
//! `ergopath design problems/walker.toml --shard I/2 --max-pathways 2 --top 4 --save -q` for
//! I = 0, 1 (part 0 to `seeds-files/part-0-of-2.json`, part 1 to `part-1-of-2.json`),
//! `ergopath design problems/walker.toml --max-pathways 2 --top 4 -q --checkpoint
//! fuzz/seeds-files/design-checkpoint.json --stop-after-branches=2` and `ergopath sweep
//! problems/walker.toml --over rate-cap=1..1e4 --points 5 -q --checkpoint
//! fuzz/seeds-files/sweep-checkpoint.json --stop-after-points=2` and `ergopath uncertainty
//! problems/walker.toml --samples 20 --seed 2 -q --checkpoint
//! fuzz/seeds-files/uncertainty-checkpoint.json --stop-after-samples=8`.
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let here = Path::new(env!("CARGO_MANIFEST_DIR"));
    ergopath::fuzzing::file_bytes(
        data,
        &here.join("../problems/walker.toml"),
        &here.join("part-1-of-2.json"),
        &std::env::temp_dir(),
    );
});
