//! Agreement with the reference fixtures written by `scripts/reference.py`.
//!
//! Source of the reference values: mpmath 1.3.0 at 50 significant digits (cross-checked in the
//! script against scipy 1.17.1's sparse LU), reading the same model files with Python's own TOML
//! parser and its own unit and LDB code. CI re-runs the script and fails if a fixture changes.

use crate::common::{all_models, close, load, root};
use ergopath::steady::{self, SteadySettings};
use serde_json::Value;

fn fixture(model: &str) -> Value {
    let stem = std::path::Path::new(model)
        .file_stem()
        .unwrap()
        .to_string_lossy()
        .into_owned();
    let path = root()
        .join("tests/fixtures/reference")
        .join(format!("{stem}.json"));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|_| panic!("missing fixture {}", path.display()));
    serde_json::from_str(&text).unwrap()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn steady_states_match_reference_to_1e10_relative_on_every_model() {
    let models = all_models();
    assert!(
        models.len() >= 9,
        "expected the example and random models, found {models:?}"
    );
    for model_path in models {
        let model = load(&model_path);
        let reference = &fixture(&model_path)["steady"];
        for settings in [
            SteadySettings::default(),
            SteadySettings {
                dense_limit: 0,
                ..Default::default()
            },
        ] {
            let state = steady::solve(&model.network, &settings).unwrap();
            let p = &state.probabilities;
            for (i, (ours, theirs)) in p
                .iter()
                .zip(numbers(&reference["probabilities"]))
                .enumerate()
            {
                // Dense GTH keeps full relative accuracy; the sparse path is held to the same
                // standard except for components far below the largest one.
                let floor = if settings.dense_limit == 0 {
                    1e-13
                } else {
                    0.0
                };
                assert!(
                    close(*ours, theirs, 1e-10, floor),
                    "{model_path} p[{i}] = {ours} vs {theirs} ({:?})",
                    state.method
                );
            }
            let obs = steady::observe(&model.network, p);
            for (c, (ours, theirs)) in obs
                .fluxes
                .iter()
                .zip(numbers(&reference["fluxes"]))
                .enumerate()
            {
                let ch = &model.network.channels[c];
                let traffic = ch.forward * p[ch.from] + ch.backward * p[ch.to];
                assert!(
                    close(*ours, theirs, 1e-10, 1e-12 * traffic),
                    "{model_path} flux[{c}] = {ours} vs {theirs}"
                );
            }
            let u = &model.units;
            // Scale for quantities that vanish at equilibrium: gross traffic times energy labels.
            let gross: f64 = model
                .network
                .channels
                .iter()
                .map(|c| {
                    (c.forward * p[c.from] + c.backward * p[c.to])
                        * (c.work.abs() + c.drive.abs() + 1.0)
                })
                .sum();
            let check = |name: &str, ours: f64, scale: f64| {
                let theirs = reference[name].as_f64().unwrap();
                assert!(
                    close(ours, theirs, 1e-9, 1e-12 * scale),
                    "{model_path} {name} = {ours} vs {theirs}"
                );
            };
            check("power", u.from_kt(obs.power), u.from_kt(gross));
            check("drive_power", u.from_kt(obs.drive_power), u.from_kt(gross));
            check("entropy_production", obs.entropy_production, gross);
        }
    }
}

/// The bound against cvxpy 1.9.3 with its Clarabel back-end (natural `rel_entr` formulation,
/// values to 7 significant digits): ours agrees to 1e-6 relative wherever that route returns a
/// finite value, and stays finite and certified (relative gap <= 1e-8) where it fails.
#[test]
fn bound_matches_cvxpy_and_survives_where_it_fails() {
    use ergopath::bound::{self, BoundSettings};
    use ergopath::model::PairSelection;
    let (mut compared, mut survived) = (0, 0);
    for model_path in all_models() {
        let model = load(&model_path);
        let ours = bound::solve(
            &model.network,
            &PairSelection::All,
            &BoundSettings::default(),
        )
        .unwrap();
        let reference = &fixture(&model_path)["bound_cvxpy"];
        assert!(
            ours.power.is_finite() && ours.relative_gap() <= 1e-8,
            "{model_path}: gap {}",
            ours.relative_gap()
        );
        if reference["finite"].as_bool().unwrap() {
            let theirs = reference["value_kT"].as_f64().unwrap();
            assert!(
                close(ours.power, theirs, 1e-6, 0.0),
                "{model_path}: ours {} vs cvxpy {theirs}",
                ours.power
            );
            compared += 1;
        } else {
            survived += 1;
        }
    }
    assert!(compared >= 8, "only {compared} models compared");
    assert!(
        survived >= 1,
        "no model where the general-purpose route fails"
    );
}
