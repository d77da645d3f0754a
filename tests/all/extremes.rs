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

/// What the binary made of one extreme model.
#[derive(Debug)]
enum Outcome {
    /// Bound certified: its relative gap, the smallest baseline and optimal probabilities.
    Certified {
        gap: f64,
        smallest: f64,
        smallest_optimal: f64,
    },
    /// Steady state or bound refused (exit status 1) with this reason.
    Refused(String),
}

/// Runs steady and bound on `text`: steady must succeed with positive probabilities summing to
/// one (or be refused with a reason); bound must either succeed with a finite result and
/// `certified_upper >= power`, or fail with exit 1 and a reason. The callers assert which.
fn outcome(name: &str, text: &str) -> Outcome {
    let dir = scratch(&format!("extreme-{name}"));
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, text).unwrap();
    let file = path.to_str().unwrap();
    let steady = run(&["steady", file, "--json"]);
    if !steady.status.success() {
        assert_eq!(steady.status.code(), Some(1), "{name}");
        let err = String::from_utf8_lossy(&steady.stderr);
        assert!(err.contains("could not be resolved"), "{name}: {err}");
        return Outcome::Refused(err.trim().to_string());
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
    let result = if bound.status.success() {
        let b: serde_json::Value = serde_json::from_slice(&bound.stdout).unwrap();
        let (power, upper) = (
            b["bound"]["power"].as_f64().unwrap(),
            b["bound"]["certified_upper"].as_f64().unwrap(),
        );
        let gap = b["bound"]["relative_gap"].as_f64().unwrap();
        assert!(
            power.is_finite() && upper >= power,
            "{name}: {power} {upper} {gap}"
        );
        let smallest_optimal = b["optimal_distribution"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x["probability"].as_f64().unwrap())
            .fold(1.0, f64::min);
        Outcome::Certified {
            gap,
            smallest,
            smallest_optimal,
        }
    } else {
        assert_eq!(bound.status.code(), Some(1), "{name}");
        let err = String::from_utf8_lossy(&bound.stderr);
        assert!(
            err.contains("could not be certified")
                || err.contains("not determined by double precision")
                || err.contains("conic solver"),
            "{name}: {err}"
        );
        Outcome::Refused(err.trim().to_string())
    };
    std::fs::remove_dir_all(dir).unwrap();
    result
}

#[test]
fn rates_spanning_eighteen_decades() {
    let rates = [1e-9, 1e9, 1e-3, 1e3, 1.0, 1e6];
    let result = outcome(
        "rates",
        &ring(&[0.0, 1.0, -1.0, 2.0, 0.5, -0.5], &rates, 2.0, 1.0),
    );
    eprintln!("{result:?}");
    // Measured: certified to a relative gap of 2.3e-14 (GAP_RATES); a refusal or a gap 100 times larger is a regression.
    assert!(
        matches!(result, Outcome::Certified { gap, .. } if gap <= 100.0 * GAP_RATES),
        "{result:?}"
    );
}

#[test]
fn energies_of_five_hundred_kt() {
    // Steps of 250 kT between neighbours (a jump of 1000 kT would need a backward rate of
    // e^-1000, which the model check refuses as unrepresentable). Spanning 500 kT the
    // probabilities reach e^-500 = 7e-218 and stay representable; spanning 1000 kT they would
    // be e^-1000, below the smallest double, and the tool must say so.
    let within = [0.0, 250.0, 500.0, 250.0, 0.0, 100.0, 200.0, 100.0];
    let result = outcome("energies_500", &ring(&within, &[1.0; 8], 3.0, 1.0));
    eprintln!("{result:?}");
    // Representable, but the steps of 250 kT need rates of 1e108 beside rates of 1: the
    // bound's round-off (8.7e93 beside a bound of 1.3) swamps it, and the tool says so.
    assert!(
        matches!(&result, Outcome::Refused(r) if r.contains("not determined by double precision")),
        "{result:?}"
    );
    let beyond = [0.0, 250.0, 500.0, 250.0, 0.0, -250.0, -500.0, -250.0];
    let result = outcome("energies_pm500", &ring(&beyond, &[1.0; 8], 3.0, 1.0));
    eprintln!("{result:?}");
    // e^-1000 underflows: GTH (subtraction-free) returns an exact zero, reported as such.
    assert!(
        matches!(&result, Outcome::Refused(r) if r.contains("below the smallest double")),
        "{result:?}"
    );
}

#[test]
fn near_reducible_network() {
    // One link a trillion times slower than the rest: nearly two separate rings.
    let rates = [1.0, 1.0, 1e-12, 1.0, 1.0, 1.0];
    let result = outcome(
        "near_reducible",
        &ring(&[0.0, 0.3, 0.1, -0.2, 0.4, 0.0], &rates, 1.0, 0.5),
    );
    eprintln!("{result:?}");
    assert!(
        matches!(result, Outcome::Certified { gap, .. } if gap <= 100.0 * GAP_NEAR_REDUCIBLE),
        "{result:?}"
    );
}

/// The 4-state ring of [`ring`] with a side chain of `links` states hanging from `s0`, each
/// `step` kT above the last (rates 1 uphill, e^step downhill): the tail holds probabilities
/// near e^-(links * step) without any single rate beyond e^step.
fn ring_with_tail(links: usize, step: f64) -> String {
    let mut text = ring(&[0.0, 1.0, 2.0, 1.0], &[1.0; 4], 3.0, 1.0);
    for i in 1..=links {
        let from = if i == 1 {
            "s0".to_string()
        } else {
            format!("c{}", i - 1)
        };
        text += &format!(
            "[[state]]\nname = \"c{i}\"\nenergy = {}\n[[transition]]\nfrom = \"{from}\"\nto = \"c{i}\"\nforward = 1\ndrive = 0\n",
            step * i as f64
        );
    }
    text
}

#[test]
fn optimal_distribution_below_1e_minus_200() {
    // Sixty links of 8.5 kT: the tail reaches e^-510 (1e-222) in the baseline and in the
    // optimum, with every rate between 1 and e^8.5. Measured: certified to a relative
    // gap of 2.4e-10 (GAP_TAIL), smallest optimal probability 1.7e-222.
    let result = outcome("tiny_probabilities", &ring_with_tail(60, 8.5));
    eprintln!("{result:?}");
    let Outcome::Certified {
        gap,
        smallest,
        smallest_optimal,
    } = result
    else {
        panic!("{result:?}");
    };
    assert!(gap <= 100.0 * GAP_TAIL, "gap {gap}");
    assert!(
        smallest < 1e-200 && smallest_optimal < 1e-200,
        "{smallest} {smallest_optimal}"
    );
}

#[test]
fn single_steps_of_hundreds_of_kt_are_refused_with_a_fix() {
    // The same depth from single steps of 470 to 500 kT needs rates of e^480 = 1e208 beside
    // rates of 1: the steady state is exact (GTH), but the bound's round-off (6e202 kT/s
    // beside a bound of 0.2) swamps it, and the tool says so instead of printing a number.
    let result = outcome(
        "huge_steps",
        &ring(&[0.0, 480.0, 500.0, 470.0], &[1.0, 1.0, 1.0, 1.0], 1.0, 0.5),
    );
    let Outcome::Refused(reason) = &result else {
        panic!("{result:?}");
    };
    assert!(
        reason.contains("not determined by double precision")
            && reason.contains("fix: merge states"),
        "{reason}"
    );
}
/// Relative gaps measured on 2026-12-03 (the tests allow 100 times these).
const GAP_RATES: f64 = 2.4e-14;
const GAP_NEAR_REDUCIBLE: f64 = 7.4e-13;
const GAP_TAIL: f64 = 2.4e-10;
