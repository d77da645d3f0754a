//! Numerical extremes through the real binary: each result is finite and certified, or the tool
//! says plainly what it cannot resolve (exit status 1 and the reason). Never a silent number.

use crate::common::{run, scratch};

/// A ring of states `0..n` with the given energies (kT) and forward rates; each step draws
/// `drive` and stores `work`; one chord closes a second cycle.
fn ring(energies: &[f64], rates: &[f64], drive: f64, work: f64) -> String {
    let n = energies.len();
    let mut text = String::from("energy_unit = \"kT\"\n");
    for (i, e) in energies.iter().enumerate() {
        text += &format!("[[state]]\nname = \"s{i}\"\nenergy = {e}\n");
    }
    for (i, rate) in rates.iter().enumerate().take(n) {
        text += &format!(
            "[[transition]]\nfrom = \"s{i}\"\nto = \"s{}\"\nforward = {rate:e}\ndrive = {drive}\nwork = {work}\n",
            (i + 1) % n
        );
    }
    text += &format!(
        "[[transition]]\nfrom = \"s0\"\nto = \"s{}\"\nforward = 1\ndrive = 0\n",
        n / 2
    );
    text
}

/// Runs steady and bound on `text`: steady must succeed with positive probabilities summing to
/// one; bound must either succeed with a finite, certified result or fail with exit 1 and a
/// reason. Returns a line describing the outcome.
fn outcome(name: &str, text: &str) -> String {
    let dir = scratch(&format!("extreme-{name}"));
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, text).unwrap();
    let file = path.to_str().unwrap();
    let steady = run(&["steady", file, "--json"]);
    if !steady.status.success() {
        assert_eq!(steady.status.code(), Some(1), "{name}");
        let err = String::from_utf8_lossy(&steady.stderr);
        assert!(err.contains("could not be resolved"), "{name}: {err}");
        return format!("{name}: steady state refused with a reason: {}", err.trim());
    }
    let s: serde_json::Value = serde_json::from_slice(&steady.stdout).unwrap();
    let p: Vec<f64> = s["states"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["probability"].as_f64().unwrap())
        .collect();
    assert!(p.iter().all(|x| *x > 0.0 && x.is_finite()), "{name}: {p:?}");
    assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-12, "{name}");
    let smallest = p.iter().copied().fold(1.0, f64::min);
    let bound = run(&["bound", file, "--json"]);
    let line = if bound.status.success() {
        let b: serde_json::Value = serde_json::from_slice(&bound.stdout).unwrap();
        let (power, upper) = (
            b["bound"]["power"].as_f64().unwrap(),
            b["bound"]["certified_upper"].as_f64().unwrap(),
        );
        let gap = b["bound"]["relative_gap"].as_f64().unwrap();
        assert!(
            power.is_finite() && upper >= power && gap <= 1e-3,
            "{name}: {power} {upper} {gap}"
        );
        let smallest_opt = b["optimal_distribution"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x["probability"].as_f64().unwrap())
            .fold(1.0, f64::min);
        format!("{name}: certified, gap {gap:.1e}, smallest p {smallest:.1e}, smallest p* {smallest_opt:.1e}")
    } else {
        assert_eq!(bound.status.code(), Some(1), "{name}");
        let err = String::from_utf8_lossy(&bound.stderr);
        assert!(
            err.contains("could not be certified") || err.contains("conic solver"),
            "{name}: {err}"
        );
        format!("{name}: refused with a reason: {}", err.trim())
    };
    std::fs::remove_dir_all(dir).unwrap();
    line
}

#[test]
fn rates_spanning_eighteen_decades() {
    let rates = [1e-9, 1e9, 1e-3, 1e3, 1.0, 1e6];
    let line = outcome(
        "rates",
        &ring(&[0.0, 1.0, -1.0, 2.0, 0.5, -0.5], &rates, 2.0, 1.0),
    );
    println!("{line}");
    // Measured: certified to 1.5e-15; a refusal here would be a regression.
    assert!(line.contains(": certified"), "{line}");
}

#[test]
fn energies_of_five_hundred_kt() {
    // Steps of 250 kT between neighbours (a jump of 1000 kT would need a backward rate of
    // e^-1000, which the model check refuses as unrepresentable). Spanning 500 kT the
    // probabilities reach e^-500 = 7e-218 and stay representable; spanning 1000 kT they would
    // be e^-1000, below the smallest double, and the tool must say so.
    let within = [0.0, 250.0, 500.0, 250.0, 0.0, 100.0, 200.0, 100.0];
    let line = outcome("energies_500", &ring(&within, &[1.0; 8], 3.0, 1.0));
    println!("{line}");
    let beyond = [0.0, 250.0, 500.0, 250.0, 0.0, -250.0, -500.0, -250.0];
    let line = outcome("energies_pm500", &ring(&beyond, &[1.0; 8], 3.0, 1.0));
    println!("{line}");
    assert!(line.contains("refused"), "{line}");
}

#[test]
fn near_reducible_network() {
    // One link a trillion times slower than the rest: nearly two separate rings.
    let rates = [1.0, 1.0, 1e-12, 1.0, 1.0, 1.0];
    let line = outcome(
        "near_reducible",
        &ring(&[0.0, 0.3, 0.1, -0.2, 0.4, 0.0], &rates, 1.0, 0.5),
    );
    println!("{line}");
    // Measured: certified to 7e-13.
    assert!(line.contains(": certified"), "{line}");
}

#[test]
fn optimal_distribution_below_1e_minus_200() {
    // Energies spanning 1000 kT: the baseline and the optimum both hold states at ~e^-500.
    let line = outcome(
        "tiny_probabilities",
        &ring(&[0.0, 480.0, 500.0, 470.0], &[1.0, 1.0, 1.0, 1.0], 1.0, 0.5),
    );
    println!("{line}");
}
