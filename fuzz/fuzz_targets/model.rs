//! Fuzz target for the model boundary: any bytes must either parse into a model that keeps the
//! `Network` invariants or be refused with a located error; the steady state of a model that
//! parses must be positive and normalised, or a reported solver error. Never a panic. The body
//! is `ergopath::fuzzing::model_bytes`, which `tests/all/fuzzing.rs` also runs on stable.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| ergopath::fuzzing::model_bytes(data));
