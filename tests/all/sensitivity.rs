//! `ergopath sensitivity` (methods, section 10) against independent routes: the bound's
//! envelope-theorem derivative against central differences of fully re-solved certified bounds
//! (a second optimisation at each moved parameter, not the optimum held fixed), and the power's
//! derivative against central differences of a dense nalgebra steady state of the network moved
//! here by hand (rates scaled at fixed affinity; an energy raised with the backward rates of its
//! transitions re-derived from local detailed balance).

use crate::common::load;
use ergopath::bound::{self, BoundSettings};
use ergopath::model::{Network, PairSelection};
use ergopath::sensitivity::{analyse, perturbed, ParameterKind};

/// Harvesting power (kT per time unit) of `net` by a dense LU solve.
fn power(net: &Network) -> f64 {
    let p = crate::common::dense_stationary(net);
    net.channels
        .iter()
        .map(|c| c.work * (c.forward * p[c.from] - c.backward * p[c.to]))
        .sum()
}

/// The network with state `s` raised by `h` kT, done here: each transition touching `s` keeps
/// its forward rate, and its backward rate takes the LDB factor exp(-dE) of the change.
fn energy_raised(net: &Network, s: usize, h: f64) -> Network {
    let mut out = net.clone();
    out.energies[s] += h;
    for c in &mut out.channels {
        if c.from == s {
            c.backward *= (-h).exp(); // ln(k+/k-) = E_from - E_to + ...: E_from up by h
        } else if c.to == s {
            c.backward *= h.exp();
        }
    }
    out
}

fn rate_scaled(net: &Network, c: usize, h: f64) -> Network {
    let mut out = net.clone();
    out.channels[c].forward *= h.exp();
    out.channels[c].backward *= h.exp();
    out
}

fn central(f: impl Fn(f64) -> f64, h: f64) -> f64 {
    let d = |h: f64| (f(h) - f(-h)) / (2.0 * h);
    (4.0 * d(h / 2.0) - d(h)) / 3.0
}

#[test]
fn derivatives_match_re_solved_bounds_and_independent_steady_states() {
    for path in [
        "problems/walker.toml",
        "problems/ring6.toml",
        "tests/fixtures/models/random1.toml",
        "tests/fixtures/models/random3.toml",
        // An environment model (joint chain) and a stiff one (rates from 50 to 1e9 /s).
        "problems/flicker.toml",
        "problems/photoswitch.toml",
    ] {
        let model = load(path);
        let net = &model.network;
        let t = model.units.temperature;
        // The model's own pairs: within each environment state for flicker and photoswitch,
        // so their bounds carry routability rows and the envelope their multipliers.
        let pairs = model.default_pairs();
        let b = bound::solve(net, &pairs, &BoundSettings::default()).unwrap();
        let sensitivities = analyse(&model, &b, &pairs).unwrap();
        let scale = b.power.abs().max(b.headroom().abs());
        let (mut checked_bound, mut checked_power) = (0, 0);
        for s in &sensitivities {
            let p = s.parameter;
            // Envelope against re-optimisation, every parameter. Measured agreement: below
            // 1e-7 of the bound's scale per unit step; 1e-5 allows the re-solves' gaps.
            let resolved = central(
                |x| {
                    let moved = perturbed(net, p, x, t);
                    bound::solve(&moved, &pairs, &BoundSettings::default())
                        .unwrap()
                        .power
                },
                if p.kind == ParameterKind::Temperature {
                    0.3
                } else {
                    1e-3
                },
            );
            assert!(
                (s.d_bound.value - resolved).abs() <= 1e-5 * scale.max(resolved.abs()),
                "{path} {p:?}: envelope {} vs re-solved {resolved}",
                s.d_bound.value
            );
            checked_bound += 1;
            let by_hand = match p.kind {
                ParameterKind::Rate => {
                    Some(central(|x| power(&rate_scaled(net, p.index, x)), 1e-3))
                }
                ParameterKind::Energy => {
                    Some(central(|x| power(&energy_raised(net, p.index, x)), 1e-3))
                }
                // Work labels, drives and the temperature: the library's own perturbation
                // (forward rates kept, backward rates by LDB), solved here by a dense LU.
                ParameterKind::Work | ParameterKind::Drive => {
                    Some(central(|x| power(&perturbed(net, p, x, t)), 1e-3))
                }
                ParameterKind::Temperature => {
                    Some(central(|x| power(&perturbed(net, p, x, t)), 0.3))
                }
            };
            if let Some(expected) = by_hand {
                // Relative 1e-6 (1e-5 for the temperature, whose step is coarser), with a floor
                // of 1e-9 of the bound's scale for a power that is zero (ring6's baseline
                // stores nothing; round-off there is 7e-14).
                let relative = if p.kind == ParameterKind::Temperature {
                    1e-5
                } else {
                    1e-6
                };
                let tolerance =
                    relative * b.baseline_power.abs().max(expected.abs()) + 1e-9 * scale;
                assert!(
                    (s.d_power.value - expected).abs() <= tolerance,
                    "{path} {p:?}: {} vs {expected}",
                    s.d_power.value
                );
                checked_power += 1;
            }
        }
        assert_eq!(checked_bound, sensitivities.len());
        assert_eq!(checked_power, sensitivities.len());
    }
}

#[test]
fn sensitivity_command_ranks_by_headroom_and_lists_every_parameter() {
    let v = crate::common::run_json(&["sensitivity", "problems/walker.toml", "--json"]);
    let params = v["parameters"].as_array().unwrap();
    // 5 rates, 4 energies, 5 work labels, 5 drives, and the temperature (energies in pN nm).
    assert_eq!(params.len(), 20);
    let key = |p: &serde_json::Value| p["headroom_per_step"].as_f64().unwrap().abs();
    assert!(params.windows(2).all(|w| key(&w[0]) >= key(&w[1])));
    for p in params {
        let (db, dp, dh) = (
            p["d_bound"].as_f64().unwrap(),
            p["d_power"].as_f64().unwrap(),
            p["d_headroom"].as_f64().unwrap(),
        );
        assert!((dh - (db - dp)).abs() <= 1e-12 * db.abs().max(dp.abs()));
        assert!(["rate", "energy", "work", "drive", "temperature"]
            .contains(&p["kind"].as_str().unwrap()));
    }
}

/// A 600-state ring with chords (beyond the dense limit, so the steady state is a sparse LU
/// and the adjoint reuses its factors transposed), energies and labels from a fixed sequence.
fn big_ring() -> ergopath::model::Model {
    let n = 600;
    let mut text = String::from("title = \"big ring\"\n");
    let wobble = |i: usize, k: f64| ((i as f64) * k).sin();
    for i in 0..n {
        text += &format!(
            "[[state]]\nname = \"s{i}\"\nenergy = {}\n",
            2.0 * wobble(i, 0.7)
        );
    }
    for i in 0..n {
        text += &format!(
            "[[transition]]\nfrom = \"s{i}\"\nto = \"s{}\"\nforward = {}\ndrive = {}\nwork = {}\n",
            (i + 1) % n,
            10f64.powf(1.5 * wobble(i, 1.3)) * 50.0,
            1.0 + wobble(i, 2.1),
            0.4 + 0.3 * wobble(i, 0.4)
        );
    }
    for i in (0..n).step_by(7) {
        text += &format!(
            "[[transition]]\nfrom = \"s{i}\"\nto = \"s{}\"\nforward = 3.0\ndrive = 0\n",
            (i + 37) % n
        );
    }
    crate::common::parse(&text)
}

#[test]
fn the_adjoint_on_the_sparse_path_matches_finite_differences() {
    use ergopath::steady::{self, SteadySettings};
    let model = big_ring();
    let net = &model.network;
    let t = model.units.temperature;
    let b = bound::solve(net, &PairSelection::All, &BoundSettings::default()).unwrap();
    let sensitivities = analyse(&model, &b, &PairSelection::All).unwrap();
    // The library's sparse steady state (checked against exact references elsewhere), moved by
    // the library's own perturbation: a route that shares nothing with the adjoint.
    let power = |moved: &Network| {
        let p = steady::solve(moved, &SteadySettings::default()).unwrap();
        assert_eq!(p.method, steady::Method::SparseLu);
        steady::observe(moved, &p.probabilities).power
    };
    let mut checked = 0;
    for s in sensitivities.iter().step_by(97) {
        let p = s.parameter;
        let expected = central(|x| power(&perturbed(net, p, x, t)), 1e-3);
        let scale = b.baseline_power.abs();
        assert!(
            (s.d_power.value - expected).abs() <= 1e-5 * expected.abs() + 1e-9 * scale,
            "{p:?}: adjoint {} vs finite differences {expected}",
            s.d_power.value
        );
        checked += 1;
    }
    assert!(checked >= 20, "{checked}");
}

/// `sensitivity --design FILE` (methods, section 10): the derivative of a saved design's power,
/// its added rates held fixed, against central differences of that design re-built on the moved
/// network (each pathway's work label re-derived there from local detailed balance at the same
/// rates) and solved by a dense LU here. Walker (pN nm: the temperature is a parameter), flicker
/// (environments) and ring6, each with its best-ranked saved design.
#[test]
fn design_power_derivatives_match_re_solved_designs() {
    use ergopath::bound::design::Pathway;
    use ergopath::sensitivity::{design_power, parameters};
    for name in ["walker", "flicker", "ring6"] {
        let model = load(&format!("problems/{name}.toml"));
        let net = &model.network;
        let t = model.units.temperature;
        let saved: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(
                crate::common::root().join(format!("results/{name}/design.json")),
            )
            .unwrap(),
        )
        .unwrap();
        let rates: Vec<(usize, usize, f64, f64)> = saved["designs"][0]["pathways"]
            .as_array()
            .unwrap()
            .iter()
            .map(|w| {
                let at = |k: &str| model.state_index(w[k].as_str().unwrap()).unwrap();
                (
                    at("from"),
                    at("to"),
                    w["forward"].as_f64().unwrap(),
                    w["backward"].as_f64().unwrap(),
                )
            })
            .collect();
        let designed = |moved: &Network| {
            let mut joint = moved.clone();
            for &(a, b, f, g) in &rates {
                joint
                    .channels
                    .push(Pathway::with_rates(moved, a, b, f, g).channel());
            }
            power(&joint)
        };
        let pathways: Vec<Pathway> = rates
            .iter()
            .map(|&(a, b, f, g)| Pathway::with_rates(net, a, b, f, g))
            .collect();
        let derivatives = design_power(&model, &pathways).unwrap();
        let all = parameters(&model);
        assert_eq!(derivatives.len(), all.len());
        let scale = designed(net).abs();
        for (p, d) in all.iter().zip(&derivatives) {
            let step = if p.kind == ParameterKind::Temperature {
                0.3
            } else {
                1e-3
            };
            let expected = central(|x| designed(&perturbed(net, *p, x, t)), step);
            // Measured: at most 4.4e-11 of the design's power (walker); 4e-9 is a margin of 100.
            assert!(
                (d.value - expected).abs() <= 4e-9 * scale.max(expected.abs()),
                "{name} {p:?}: {} vs {expected}",
                d.value
            );
        }
    }
}

/// Every derivative of `sensitivity --json` (baseline power, bound and, where the fixture names
/// one, a saved design's power) against `scripts/reference.py`: central differences of the full
/// pipeline re-solved at 50 digits in mpmath (the steady state by exact elimination, the bound by
/// its own damped Newton method at each moved parameter), with a step of 1e-12 so that the
/// truncation error (about 1e-24 relative) is far below the tool's round-off. Eight models: the
/// shipped walker (pN nm, so the temperature is a parameter), ring6, flicker and photoswitch
/// (environments), and four stiff ones (a 300 kT energy span, a photon ring, a slowly switching
/// pump, a slow environment).
#[test]
fn derivatives_match_the_fifty_digit_reference() {
    use ergopath::report::sensitivity::parameter_name;
    let files = crate::common::files_in("tests/fixtures/sensitivity");
    assert_eq!(files.len(), 8, "{files:?}");
    // Relative to the derivative (floored at 1e-6 of the bound, for derivatives that vanish).
    // Measured worst: 1.2e-7 for the power (the slowly switching pump, whose smallest rate
    // derivatives are 1e-3 of its power), 1.9e-10 for the bound, 3.8e-12 for a design's power;
    // each tolerance is about 100 times that.
    const TOLERANCE: [f64; 3] = [1e-5, 2e-8, 4e-10];
    let mut worst = [0f64; 3];
    for file in files {
        let fixture: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&file).unwrap()).unwrap();
        let model_path = fixture["model"].as_str().unwrap();
        let model = load(model_path);
        let mut args = vec!["sensitivity", model_path, "--json"];
        let rank = fixture["design_rank"].to_string();
        if let Some(design) = fixture["design"].as_str() {
            args.extend(["--design", design, "--rank", rank.as_str()]);
        }
        let out = crate::common::run_json(&args);
        let mut by_name = std::collections::HashMap::new();
        for p in out["parameters"].as_array().unwrap() {
            let name = p["name"].as_str().unwrap().to_string();
            assert!(by_name.insert(name.clone(), p.clone()).is_none(), "{name}");
        }
        let reference = fixture["parameters"].as_array().unwrap();
        assert_eq!(reference.len(), by_name.len(), "{model_path}");
        let scale = out["bound"].as_f64().unwrap().abs();
        for r in reference {
            let kind: ParameterKind = serde_json::from_value(r["kind"].clone()).unwrap();
            let name = parameter_name(&model, kind, r["index"].as_u64().unwrap() as usize);
            let got = &by_name[&name];
            let pairs = [
                ("d_power", "d_power"),
                ("d_bound", "d_bound"),
                ("d_design", "d_design_power"),
            ];
            for (slot, (ours, theirs)) in pairs.iter().enumerate() {
                let Some(expected) = r[*ours].as_str() else {
                    continue;
                };
                let expected: f64 = expected.parse().unwrap();
                let value = got[*theirs].as_f64().unwrap();
                let stated = got[format!("{theirs}_error")].as_f64().unwrap();
                let diff = (value - expected).abs();
                let relative = diff / expected.abs().max(1e-6 * scale);
                worst[slot] = worst[slot].max(relative);
                assert!(
                    relative <= TOLERANCE[slot],
                    "{model_path} {name} {ours}: {value} vs {expected} (relative {relative:.1e})"
                );
                // And the tool's own stated error, with the reference's, must cover it.
                let reference_error = r[format!("{ours}_error")].as_f64().unwrap();
                assert!(
                    diff <= stated + reference_error + 1e-13 * scale.max(expected.abs()),
                    "{model_path} {name} {ours}: {value} vs {expected} (stated error {stated})"
                );
            }
        }
    }
    eprintln!("worst relative differences (power, bound, design): {worst:?}");
}
