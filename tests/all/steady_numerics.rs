//! Accuracy of the steady-state solvers on hard cases, and the `--json` contract.

use crate::common::{close, load, parse, run};
use ergopath::model::{Channel, Network};
use ergopath::steady::{self, Method, SteadySettings};

fn sparse() -> SteadySettings {
    SteadySettings {
        dense_limit: 0,
        ..Default::default()
    }
}

/// A ring of `n` states plus chords, with rates drawn log-uniformly from 10^lo..10^hi.
fn ring_with_chords(n: usize, lo: f64, hi: f64, seed: u64) -> Network {
    let mut s = seed;
    let mut next = move || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut rate = move || 10f64.powf(lo + (hi - lo) * next());
    let mut channels = Vec::new();
    for i in 0..n {
        let (f, b) = (rate(), rate());
        channels.push(Channel {
            from: i,
            to: (i + 1) % n,
            forward: f,
            backward: b,
            work: 0.1,
            drive: (f / b).ln() + 0.1,
        });
        let j = (i + 7) % n;
        let (f, b) = (rate(), rate());
        channels.push(Channel {
            from: i,
            to: j,
            forward: f,
            backward: b,
            work: 0.0,
            drive: (f / b).ln(),
        });
    }
    Network {
        energies: vec![0.0; n],
        channels,
    }
}

#[test]
fn stiff_rates_from_1e_minus9_to_1e9_meet_the_residual_target() {
    let net = ring_with_chords(60, -9.0, 9.0, 7);
    let dense = steady::solve(&net, &SteadySettings::default()).unwrap();
    let sparse = steady::solve(&net, &sparse()).unwrap();
    assert_eq!(dense.method, Method::DenseGth);
    assert_eq!(sparse.method, Method::SparseLu);
    for s in [&dense, &sparse] {
        assert!(
            s.relative_residual <= 1e-12,
            "{:?} residual {}",
            s.method,
            s.relative_residual
        );
        assert!(s.probabilities.iter().all(|&p| p > 0.0));
    }
    for (a, b) in dense.probabilities.iter().zip(&sparse.probabilities) {
        assert!(close(*a, *b, 1e-8, 1e-14), "{a} vs {b}");
    }
}

#[test]
fn tiny_probabilities_keep_their_relative_accuracy_on_both_paths() {
    // Boltzmann chain with free energies rising 90 kT per state: p spans 1e-235. The exact
    // answer is exp(-E)/Z (equilibrium of a network without drive).
    let n = 7;
    let energies: Vec<f64> = (0..n).map(|i| 90.0 * i as f64).collect();
    let channels = (0..n - 1)
        .map(|i| Channel {
            from: i,
            to: i + 1,
            forward: 3.0 * (-90.0f64).exp(),
            backward: 3.0,
            work: 0.0,
            drive: 0.0,
        })
        .collect();
    let net = Network { energies, channels };
    let exact = net.log_equilibrium();
    for settings in [SteadySettings::default(), sparse()] {
        let s = steady::solve(&net, &settings).unwrap();
        // Dense GTH is exact in relative terms; the sparse path is held to 1e-9 in ln p.
        let tolerance = if s.method == Method::DenseGth {
            1e-12
        } else {
            1e-9
        };
        for (p, l) in s.probabilities.iter().zip(&exact) {
            assert!(*p > 0.0);
            assert!(
                (p.ln() - l).abs() < tolerance,
                "{:?}: {p:e} vs {:e}",
                s.method,
                l.exp()
            );
        }
    }
}

#[test]
fn free_energy_balance_holds_on_every_example() {
    for path in crate::common::all_models() {
        let model = load(&path);
        let s = steady::solve(&model.network, &SteadySettings::default()).unwrap();
        let obs = steady::observe(&model.network, &s.probabilities);
        assert!(
            obs.balance_error <= 1e-9,
            "{path}: balance error {}",
            obs.balance_error
        );
    }
}

#[test]
fn efficiency_is_undefined_without_drive_power() {
    let model = parse("[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\nbackward = 3\n");
    let s = steady::solve(&model.network, &SteadySettings::default()).unwrap();
    assert!(steady::observe(&model.network, &s.probabilities)
        .efficiency
        .is_none());
}

#[test]
fn steady_json_has_the_documented_keys() {
    let out = run(&["steady", "problems/walker.toml", "--json"]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "states",
        "transitions",
        "power",
        "drive_power",
        "entropy_production",
        "efficiency",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}");
    }
    let states = v["states"].as_array().unwrap();
    assert_eq!(states.len(), 4);
    assert!(states
        .iter()
        .all(|s| s["name"].is_string() && s["probability"].as_f64().unwrap() > 0.0));
    let total: f64 = states
        .iter()
        .map(|s| s["probability"].as_f64().unwrap())
        .sum();
    assert!(close(total, 1.0, 1e-14, 0.0));
    let transitions = v["transitions"].as_array().unwrap();
    assert_eq!(transitions.len(), 5);
    for key in ["from", "to", "flux", "work_rate", "drive_rate"] {
        assert!(
            transitions.iter().all(|t| t.get(key).is_some()),
            "transition key {key}"
        );
    }
    // Powers are in the model's unit (pN nm per s): the step stores 16 pN nm per jump.
    let step_flux = transitions[2]["flux"].as_f64().unwrap();
    assert!(close(
        v["power"].as_f64().unwrap(),
        16.0 * step_flux,
        1e-12,
        0.0
    ));
    let csv = run(&["steady", "problems/walker.toml", "--csv"]);
    let text = String::from_utf8(csv.stdout).unwrap();
    assert!(text.starts_with("index,from,to,label,flux,work_rate,drive_rate\n"));
    assert_eq!(text.lines().count(), 6);
}
