//! Fuzz target for the model boundary: any bytes must either parse into a model that keeps the
//! `Network` invariants or be refused with a located error; the steady state of a model that
//! parses must be positive and normalised, or a reported solver error. Never a panic.
#![no_main]

use ergopath::model::Model;
use ergopath::steady::{self, SteadySettings};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(model) = Model::parse(text, Path::new("fuzz.toml")) else {
        return;
    };
    let net = &model.network;
    assert!(net.len() >= 2);
    assert_eq!(model.state_names.len(), net.len());
    assert_eq!(model.transitions.len(), net.channels.len());
    for c in &net.channels {
        assert!(c.from != c.to && c.from < net.len() && c.to < net.len());
        assert!(c.forward.is_finite() && c.forward > 0.0);
        assert!(c.backward.is_finite() && c.backward > 0.0);
    }
    if net.len() <= 64 {
        if let Ok(state) = steady::solve(net, &SteadySettings::default()) {
            let total: f64 = state.probabilities.iter().sum();
            assert!((total - 1.0).abs() < 1e-9);
            assert!(state.probabilities.iter().all(|p| *p > 0.0));
        }
    }
});
