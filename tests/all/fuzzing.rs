//! The fuzz targets' bodies (`ergopath::fuzzing`) on the stable toolchain: every committed
//! input (fuzz seeds, shipped and fixture models, the hostile corpus, part-file and checkpoint
//! seeds), then a bounded structured fuzz run (proptest, fixed seed) of mutated model files,
//! part files and checkpoints. A panic anywhere fails the test; each mutated input is shown by
//! proptest when it does. Long runs stay with cargo-fuzz (DEVELOPERS.md).

use crate::common::{files_in, root, scratch};
use ergopath::fuzzing::{file_bytes, model_bytes};
use proptest::prelude::*;

/// Every committed model-like input: the fuzz seeds, the shipped models, the fixtures, the
/// regression models and the hostile corpus.
fn model_inputs() -> Vec<Vec<u8>> {
    [
        "fuzz/seeds",
        "problems",
        "tests/fixtures/models",
        "tests/fixtures/regression",
        "tests/fixtures/idle",
        "tests/corpus",
    ]
    .iter()
    .flat_map(|dir| files_in(dir))
    .map(|p| std::fs::read(p).unwrap())
    .collect()
}

fn file_inputs() -> Vec<Vec<u8>> {
    let mut inputs: Vec<Vec<u8>> = files_in("fuzz/seeds-files")
        .into_iter()
        .map(|p| std::fs::read(p).unwrap())
        .collect();
    inputs.push(std::fs::read(root().join("fuzz/part-1-of-2.json")).unwrap());
    inputs
}

fn run_file(data: &[u8]) {
    let dir = scratch("fuzzing");
    file_bytes(
        data,
        &root().join("problems/walker.toml"),
        &root().join("fuzz/part-1-of-2.json"),
        &dir,
    );
}

#[test]
fn every_committed_input_passes_the_fuzz_checks() {
    let models = model_inputs();
    assert!(models.len() >= 60, "only {} model inputs", models.len());
    models.iter().for_each(|m| model_bytes(m));
    file_inputs().iter().for_each(|f| run_file(f));
}

/// Values that have broken parsers and solvers before, or could: range ends, signs, special
/// spellings, TOML structure.
const HOSTILE: [&str; 18] = [
    "0",
    "-0",
    "-1",
    "1e308",
    "1e-308",
    "4.9e-324",
    "1e309",
    "nan",
    "inf",
    "-inf",
    "\"\"",
    "\"a\"",
    "[]",
    "{}",
    "9007199254740993",
    "18446744073709551616",
    "[[transition]]",
    "true",
];

/// One edit of a text: replace the token at a position by a hostile value, delete a span,
/// duplicate a line, or flip a byte. Positions are shares of the length, so any input fits.
#[derive(Debug, Clone)]
enum Edit {
    Replace(f64, usize),
    Delete(f64, f64),
    DuplicateLine(f64),
    Flip(f64, u8),
}

fn edit_strategy() -> impl Strategy<Value = Edit> {
    prop_oneof![
        (0.0..1.0f64, 0..HOSTILE.len()).prop_map(|(at, v)| Edit::Replace(at, v)),
        (0.0..1.0f64, 0.0..0.05f64).prop_map(|(at, len)| Edit::Delete(at, len)),
        (0.0..1.0f64).prop_map(Edit::DuplicateLine),
        (0.0..1.0f64, any::<u8>()).prop_map(|(at, b)| Edit::Flip(at, b)),
    ]
}

fn apply(data: &[u8], edits: &[Edit]) -> Vec<u8> {
    let mut out = data.to_vec();
    for edit in edits {
        let at = |share: f64, len: usize| ((share * len as f64) as usize).min(len);
        match *edit {
            Edit::Replace(share, value) => {
                // The token under the position: a run of bytes that are not separators.
                let start = at(share, out.len());
                let is_token = |b: &u8| !b" =,\n[]{}\":".contains(b);
                let end = start + out[start..].iter().take_while(|b| is_token(b)).count();
                out.splice(start..end, HOSTILE[value].bytes());
            }
            Edit::Delete(share, len) => {
                let start = at(share, out.len());
                let end = (start + at(len, out.len())).min(out.len());
                out.drain(start..end);
            }
            Edit::DuplicateLine(share) => {
                let start = at(share, out.len());
                let line_start = out[..start]
                    .iter()
                    .rposition(|b| *b == b'\n')
                    .map_or(0, |i| i + 1);
                let line_end = start
                    + out[start..]
                        .iter()
                        .position(|b| *b == b'\n')
                        .unwrap_or(out.len() - start);
                let line: Vec<u8> = out[line_start..line_end].to_vec();
                out.splice(line_end..line_end, [b"\n".as_slice(), &line].concat());
            }
            Edit::Flip(share, byte) => {
                if !out.is_empty() {
                    let i = at(share, out.len() - 1);
                    out[i] ^= byte;
                }
            }
        }
    }
    out
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, rng_seed: crate::common::PROPTEST_SEED, ..ProptestConfig::default() })]

    /// Mutated model files: refused with a located error or a model that keeps its invariants.
    #[test]
    fn mutated_models_never_panic(seed in 0usize..1000, edits in prop::collection::vec(edit_strategy(), 1..6)) {
        let inputs = model_inputs();
        model_bytes(&apply(&inputs[seed % inputs.len()], &edits));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, rng_seed: crate::common::PROPTEST_SEED, ..ProptestConfig::default() })]

    /// Mutated part files and checkpoints (resealed, so the checks behind the digest run).
    #[test]
    fn mutated_part_files_and_checkpoints_never_panic(seed in 0usize..100, edits in prop::collection::vec(edit_strategy(), 1..4)) {
        let inputs = file_inputs();
        run_file(&apply(&inputs[seed % inputs.len()], &edits));
    }
}
