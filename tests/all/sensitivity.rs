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
    ] {
        let model = load(path);
        let net = &model.network;
        let t = model.units.temperature;
        let b = bound::solve(net, &PairSelection::All, &BoundSettings::default()).unwrap();
        let sensitivities = analyse(&model, &b).unwrap();
        let scale = b.power.abs().max(b.headroom().abs());
        let (mut checked_bound, mut checked_power) = (0, 0);
        for s in &sensitivities {
            let p = s.parameter;
            // Envelope against re-optimisation, every parameter. Measured agreement: below
            // 1e-7 of the bound's scale per unit step; 1e-5 allows the re-solves' gaps.
            let resolved = central(
                |x| {
                    let moved = perturbed(net, p, x, t);
                    bound::solve(&moved, &PairSelection::All, &BoundSettings::default())
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
                _ => None,
            };
            if let Some(expected) = by_hand {
                // Relative 1e-6, with a floor of 1e-9 of the bound's scale for a power that is
                // zero (ring6's baseline stores nothing; round-off there is 7e-14).
                let tolerance = 1e-6 * b.baseline_power.abs().max(expected.abs()) + 1e-9 * scale;
                assert!(
                    (s.d_power.value - expected).abs() <= tolerance,
                    "{path} {p:?}: {} vs {expected}",
                    s.d_power.value
                );
                checked_power += 1;
            }
        }
        assert_eq!(checked_bound, sensitivities.len());
        assert_eq!(checked_power, net.channels.len() + net.len());
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
