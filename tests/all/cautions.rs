//! Plausibility cautions: each case once, read from `--json` and the text report.
//!
//! kT/h is computed here from the exact 2019 SI constants (k_B = 1.380649e-23 J/K,
//! h = 6.62607015e-34 J s): the transition-state-theory prefactor of Eyring, J. Chem. Phys. 3,
//! 107 (1935). The 200-400 K plausibility range is common practice.

use crate::common::{run, run_json, scratch};

fn model(dir: &std::path::Path, name: &str, head: &str, forward: &str) -> String {
    let path = dir.join(name);
    std::fs::write(
        &path,
        format!(
            "# Invented numbers for a test.\ntitle = \"caution test\"\n{head}\n[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\nenergy = 2\n[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = {forward}\ndrive = 4\nwork = 1\n[[transition]]\nfrom = \"b\"\nto = \"a\"\nforward = 1\nbackward = 1\n"
        ),
    )
    .unwrap();
    path.to_string_lossy().into_owned()
}

fn kinds(args: &[&str]) -> Vec<String> {
    run_json(args)["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["kind"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_missing_or_celsius_temperature_is_named() {
    let dir = scratch("cautions-temperature");
    let missing = model(&dir, "missing.toml", "energy_unit = \"kJ/mol\"", "10");
    assert_eq!(
        kinds(&["steady", &missing, "--json"]),
        ["default_temperature"]
    );
    let celsius = model(
        &dir,
        "celsius.toml",
        "temperature = 37\nenergy_unit = \"kJ/mol\"",
        "10",
    );
    assert_eq!(
        kinds(&["steady", &celsius, "--json"]),
        ["unusual_temperature"]
    );
    let fine = model(
        &dir,
        "fine.toml",
        "temperature = 310.15\nenergy_unit = \"kJ/mol\"",
        "10",
    );
    assert!(kinds(&["steady", &fine, "--json"]).is_empty());
    let text = String::from_utf8(run(&["bound", &celsius]).stdout).unwrap();
    assert!(
        text.contains("Cautions") && text.contains("310.15 K"),
        "{text}"
    );
}

#[test]
fn rates_beyond_the_activation_limit_are_named() {
    let dir = scratch("cautions-rates");
    // kT/h at 300 K per millisecond: 1.380649e-23 * 300 / 6.62607015e-34 * 1e-3.
    let limit_per_ms = 1.380649e-23 * 300.0 / 6.62607015e-34 * 1e-3;
    let just_below = format!("{:e}", 0.9 * limit_per_ms);
    let just_above = format!("{:e}", 1.1 * limit_per_ms);
    let head = "temperature = 300\nenergy_unit = \"kT\"\ntime_unit = \"ms\"";
    let slow = model(&dir, "slow.toml", head, &just_below);
    let fast = model(&dir, "fast.toml", head, &just_above);
    assert!(kinds(&["steady", &slow, "--json"]).is_empty());
    assert_eq!(
        kinds(&["steady", &fast, "--json"]),
        ["faster_than_activation"]
    );
    // A design allowed rates far beyond the model's own (fastest 9e8 /ms) is cautioned.
    let design = kinds(&["design", &slow, "--rate-cap", "1e15", "--json", "--quiet"]);
    assert!(
        design.contains(&"far_faster_than_model".to_string())
            && design.contains(&"faster_than_activation".to_string()),
        "{design:?}"
    );
}
