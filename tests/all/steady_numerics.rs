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
    assert!(text.starts_with(
        "index,from,to,label,flux [1/s],flux_roundoff [1/s],work_rate [pN nm/s],drive_rate [pN nm/s]\n"
    ));
    assert_eq!(text.lines().count(), 6);
    // The states' probabilities are the `states` table, as in the JSON.
    let csv = run(&["steady", "problems/walker.toml", "--csv=states"]);
    let text = String::from_utf8(csv.stdout).unwrap();
    let rows: Vec<&str> = text.lines().collect();
    assert_eq!(rows[0], "state,probability");
    for (row, state) in rows[1..].iter().zip(v["states"].as_array().unwrap()) {
        let (name, p) = row.split_once(',').unwrap();
        assert_eq!(name, state["name"].as_str().unwrap());
        assert_eq!(
            p.parse::<f64>().unwrap(),
            state["probability"].as_f64().unwrap()
        );
    }
    assert_eq!(rows.len(), 5);
}

/// Log-uniform draws in 10^lo..10^hi from a seeded LCG (Knuth's MMIX constants).
fn log_uniform(seed: u64, lo: f64, hi: f64) -> impl FnMut() -> f64 {
    let mut s = seed;
    move || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        10f64.powf(lo + (hi - lo) * ((s >> 11) as f64 / (1u64 << 53) as f64))
    }
}

#[test]
fn tree_networks_carry_no_current_whatever_the_rates() {
    // A network without cycles is in detailed balance in its steady state, whatever its
    // labels: every net flux and the power are exactly zero (Kolmogorov's criterion; Schnakenberg,
    // Rev. Mod. Phys. 48, 571 (1976), section on trees). Channel speeds over 24 decades make the
    // one-way fluxes differ by up to 10^24, so a net flux computed as their difference is round-off.
    for seed in 0..200u64 {
        let n = 3 + (seed % 28) as usize;
        let (mut rate, mut ratio) = (
            log_uniform(seed + 1, -12.0, 12.0),
            log_uniform(seed + 1000, -4.0, 4.0),
        );
        let channels = (1..n)
            .map(|i| {
                // Each channel's speed anywhere in 24 decades; its own ratio within 8, so that
                // no probability leaves the double range along a 30-state chain.
                let f = rate();
                let b = f * ratio();
                let work = (i as f64).sin() * 3.0;
                Channel {
                    from: ((i as u64 * 2654435761 + seed) % i as u64) as usize,
                    to: i,
                    forward: f,
                    backward: b,
                    work,
                    drive: (f / b).ln() + work,
                }
            })
            .collect();
        let net = Network {
            energies: vec![0.0; n],
            channels,
        };
        for (settings, dense) in [(SteadySettings::default(), true), (sparse(), false)] {
            // GTH (dense) must solve every one; the sparse LU may still refuse such stiff
            // chains (a stated error, never a wrong number), and is checked when it answers.
            let s = match steady::solve(&net, &settings) {
                Ok(s) => s,
                Err(e) if !dense => {
                    assert!(matches!(e, steady::SolveError::Unresolved(_)), "{e}");
                    continue;
                }
                Err(e) => panic!("seed {seed}: {e}"),
            };
            let obs = steady::observe(&net, &s.probabilities);
            assert!(
                obs.fluxes.iter().all(|j| *j == 0.0),
                "seed {seed}: {:?}",
                obs.fluxes
            );
            assert_eq!(obs.power, 0.0, "seed {seed}");
            assert_eq!(obs.drive_power, 0.0, "seed {seed}");
        }
    }
}

#[test]
fn fast_pendant_state_leaves_the_ring_current_exact() {
    // A uniform ring of n states (forward a, backward b, work w per step) with one pendant
    // state hung on state 0 by a channel of rates 1e200 / 1e185. The pendant is in detailed
    // balance with state 0 (p_pendant = 1e15 p_0), so each ring state holds q = 1/(n + 1e15),
    // the ring current is (a - b) q and the power n w (a - b) q (derived: the ring alone is
    // rotation invariant, and a dangling state carries no net flux). Its one-way fluxes are
    // 1e185 times the ring current, so the pendant's net flux by subtraction is noise.
    let (n, a, b, w) = (5usize, 2.0, 0.5, 0.3);
    let mut channels: Vec<Channel> = (0..n)
        .map(|i| Channel {
            from: i,
            to: (i + 1) % n,
            forward: a,
            backward: b,
            work: w,
            drive: (a / b).ln() + w,
        })
        .collect();
    channels.push(Channel {
        from: 0,
        to: n,
        forward: 1e200,
        backward: 1e185,
        work: 1.0,
        drive: (1e15f64).ln() + 1.0,
    });
    let net = Network {
        energies: vec![0.0; n + 1],
        channels,
    };
    let q = 1.0 / (n as f64 + 1e15);
    let exact_power = n as f64 * w * (a - b) * q;
    for settings in [SteadySettings::default(), sparse()] {
        let s = steady::solve(&net, &settings).unwrap();
        let obs = steady::observe(&net, &s.probabilities);
        assert_eq!(obs.fluxes[n], 0.0, "the pendant's channel carries nothing");
        for j in &obs.fluxes[..n] {
            assert!(close(*j, (a - b) * q, 1e-12, 0.0), "ring flux {j}");
        }
        assert!(
            close(obs.power, exact_power, 1e-12, 0.0),
            "power {}",
            obs.power
        );
        assert!((obs.power - exact_power).abs() <= obs.power_roundoff.max(1e-300));
        assert!(obs.power_roundoff < 1e-8 * exact_power);
    }
}

#[test]
fn ratios_beyond_the_double_range_are_read_from_logarithms() {
    // forward 1e300 with backward 1e-300: the drive is ln(1e600) = 600 ln 10 = 1381.55 kT
    // (ln 10 from std::f64::consts), not an overflowed ratio.
    let model = parse(
        r#"
        title = "overflowing rate ratio (invented numbers)"
        energy_unit = "kT"
        time_unit = "s"
        [[state]]
        name = "a"
        energy = 0
        [[state]]
        name = "b"
        energy = 0
        [[state]]
        name = "c"
        energy = 0
        [[transition]]
        from = "a"
        to = "b"
        forward = 1e300
        backward = 1e-300
        [[transition]]
        from = "b"
        to = "c"
        forward = 1
        backward = 1
        [[transition]]
        from = "c"
        to = "a"
        forward = 1
        backward = 1
        "#,
    );
    let drive = model.network.channels[0].drive;
    assert!(
        close(drive, 600.0 * std::f64::consts::LN_10, 1e-14, 0.0),
        "{drive}"
    );
    let s = steady::solve(&model.network, &SteadySettings::default()).unwrap();
    let obs = steady::observe(&model.network, &s.probabilities);
    // The first channel never goes back: every state holds 1/3 and the ring current is 1/3.
    assert!(close(obs.drive_power, drive / 3.0, 1e-12, 0.0));
    assert!(obs.drive_power.is_finite() && obs.balance_error.is_finite());
}

#[test]
fn steady_json_carries_round_off_bounds_and_marks_undetermined_figures() {
    let out = run(&["steady", "problems/ring6.toml", "--json"]);
    assert!(out.status.success());
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let (power, roundoff) = (
        json["power"].as_f64().unwrap(),
        json["power_roundoff"].as_f64().unwrap(),
    );
    assert!(
        roundoff >= power.abs(),
        "ring6 is at equilibrium: its power is round-off"
    );
    assert!(json["transitions"][0]["flux_roundoff"].as_f64().is_some());
    let text = String::from_utf8(run(&["steady", "problems/ring6.toml"]).stdout).unwrap();
    assert!(text.contains("harvesting power     |x| <"), "{text}");
}
