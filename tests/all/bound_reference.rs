//! The bound against an independent 50-digit reference (methods, sections 3, 5 and 7).
//!
//! `scripts/reference.py` (`bound_mp`) solves the same concave program in mpmath at 50 digits
//! by its own damped Newton method, keeping every iterate exactly routable, and brackets the
//! optimum between `Phi` at its final feasible point and the Lagrangian (Frank-Wolfe) upper
//! value there; every bracket is below 1e-30 relative. It reads the model files with Python's
//! TOML parser and applies units, local detailed balance and the environment joint chain
//! independently of the Rust code. Cases: every shipped model, the seeded random models, the
//! deep model, a pair-restricted walker, and the stiff corpus of `tests/fixtures/stiff/`
//! (photon drives of 85 and 120 kT, rates over 30 decades, energies over 300 kT, environments
//! switching at 1e-5 per time unit).

use crate::common::{root, run};

/// Largest relative difference accepted between the tool's bound and the reference value.
/// Measured: at most 5.3e-15 (walker), most cases 1e-16 to 6e-16; 1e-13 leaves a margin of
/// about 20.
const AGREEMENT: f64 = 1e-13;

fn number(text: &serde_json::Value) -> f64 {
    text.as_str().unwrap().parse().unwrap()
}

#[test]
fn bounds_match_the_fifty_digit_reference() {
    let cases = crate::common::files_in("tests/fixtures/bound_mp");
    assert!(cases.len() >= 17, "{} reference cases", cases.len());
    for case in cases {
        let reference: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&case).unwrap()).unwrap();
        assert!(reference["bracket_relative"].as_f64().unwrap() <= 1e-30);
        let model = root().join(reference["model"].as_str().unwrap());
        let mut args = vec!["bound", model.to_str().unwrap(), "--json"];
        if let Some(pairs) = reference["cli_pairs"].as_str() {
            args.extend(["--pairs", pairs]);
        }
        let out = run(&args);
        let name = case.file_stem().unwrap().to_string_lossy().to_string();
        assert!(
            out.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let bound = &json["bound"];
        let power = bound["power"].as_f64().unwrap();
        let value = number(&reference["value_model_unit"]);
        let lower = value; // the bracket is far below a double's resolution
        assert!(
            (power - value).abs() <= AGREEMENT * value.abs(),
            "{name}: bound {power} vs reference {value}"
        );
        // The certificate must hold: the proven upper value is never below the true optimum.
        let upper = bound["certified_upper"].as_f64().unwrap();
        assert!(
            upper >= lower * (1.0 - 2.0 * f64::EPSILON),
            "{name}: certified upper {upper} below the reference optimum {lower}"
        );
        // The stated round-off covers the actual error.
        let roundoff = bound["power_roundoff"].as_f64().unwrap();
        assert!(
            (power - value).abs() <= roundoff + 2.0 * f64::EPSILON * value.abs(),
            "{name}: error {} beyond the stated round-off {roundoff}",
            (power - value).abs()
        );
        let baseline = json["baseline_power"].as_f64().unwrap();
        let expected = number(&reference["baseline_power_model_unit"]);
        assert!(
            (baseline - expected).abs() <= AGREEMENT * expected.abs().max(value.abs()),
            "{name}: baseline {baseline} vs reference {expected}"
        );
    }
}

/// Every design the demo saved for a shipped model (attaining, rate-capped, ranked), its power
/// from the tool's verification (a double-precision steady-state solve of baseline plus added
/// rates) against `scripts/reference.py`'s `design_power_mp`: the same network's steady state
/// at 50 digits, the added pathways' work from local detailed balance there.
#[test]
fn design_powers_match_the_fifty_digit_reference() {
    use ergopath::bound::design::{self, Pathway};
    let dir = root().join("tests/fixtures/designs");
    let mut checked = 0;
    let mut worst: f64 = 0.0;
    for entry in std::fs::read_dir(&dir).unwrap() {
        let fixture: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(entry.unwrap().path()).unwrap()).unwrap();
        let model = crate::common::load(fixture["model"].as_str().unwrap());
        let net = &model.network;
        for case in fixture["designs"].as_array().unwrap() {
            let pathways: Vec<Pathway> = case["pathways"]
                .as_array()
                .unwrap()
                .iter()
                .map(|w| {
                    let at = |key: &str| model.state_index(w[key].as_str().unwrap()).unwrap();
                    let rate = |key: &str| w[key].as_f64().unwrap();
                    Pathway::with_rates(
                        net,
                        at("from"),
                        at("to"),
                        rate("forward"),
                        rate("backward"),
                    )
                })
                .collect();
            let verified = design::verify(net, &pathways).unwrap();
            let ours = model.units.from_kt(verified.power);
            let roundoff = model.units.from_kt(verified.roundoff);
            let reference = number(&case["power_model_unit"]);
            let error = (ours - reference).abs();
            // The tool's own round-off bound must cover its error, and the error must be small:
            // measured below 1e-14 relative; 1e-12 leaves a margin of 100.
            assert!(
                error <= roundoff.max(1e-12 * reference.abs()),
                "{} {}: {ours} vs {reference} (round-off bound {roundoff})",
                fixture["model"],
                case["source"]
            );
            assert!(
                error <= 1e-12 * reference.abs(),
                "{}: {error}",
                case["source"]
            );
            worst = worst.max(error / reference.abs());
            checked += 1;
        }
    }
    assert!(checked >= 30, "{checked} designs checked");
    eprintln!("designs: {checked}, worst relative error {worst:.1e}");
}
