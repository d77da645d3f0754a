//! Checks against published formulas and exact constants. Each test names its source.

use crate::common::{close, parse};
use ergopath::model::Network;
use ergopath::steady::{self, SteadySettings};
use ergopath::units::{photon_energy_joules, EnergyUnit, TimeUnit, Units, ELEMENTARY_CHARGE};

fn steady_p(net: &Network) -> Vec<f64> {
    steady::solve(net, &SteadySettings::default())
        .unwrap()
        .probabilities
}

/// Reversible Michaelis-Menten rate law with the Haldane relation (Cornish-Bowden,
/// Fundamentals of Enzyme Kinetics, 4th ed., 2012, ch. 2 and 5): for E + S <-> ES -> E + P with
/// rate constants k1, k-1, k2, k-2 and enzyme total 1,
/// v = (Vf S/Ks - Vr P/Kp) / (1 + S/Ks + P/Kp), Vf = k2, Vr = k-1, Ks = (k-1 + k2)/k1,
/// Kp = (k-1 + k2)/k-2, and Keq = Vf Kp / (Vr Ks) = k1 k2 / (k-1 k-2).
#[test]
fn two_state_enzyme_cycle_follows_reversible_michaelis_menten() {
    let (k1, km1, k2, km2, s, p) = (2.0e6, 150.0, 40.0, 3.0e4, 2e-4, 5e-5);
    let model = parse(&format!(
        r#"
        [[state]]
        name = "E"
        [[state]]
        name = "ES"
        [[transition]]
        from = "E"
        to = "ES"
        forward = {}
        backward = {km1}
        [[transition]]
        from = "ES"
        to = "E"
        forward = {k2}
        backward = {}
        "#,
        k1 * s,
        km2 * p
    ));
    let prob = steady_p(&model.network);
    let obs = steady::observe(&model.network, &prob);
    let (vf, vr, ks, kp) = (k2, km1, (km1 + k2) / k1, (km1 + k2) / km2);
    let v = (vf * s / ks - vr * p / kp) / (1.0 + s / ks + p / kp);
    assert!(
        close(obs.fluxes[0], v, 1e-12, 0.0),
        "{} vs {v}",
        obs.fluxes[0]
    );
    assert!(close(obs.fluxes[1], v, 1e-12, 0.0));
    // Haldane: the drives LDB implies add up to the cycle affinity ln(Keq S / P).
    let keq = vf * kp / (vr * ks);
    assert!(close(keq, k1 * k2 / (km1 * km2), 1e-12, 0.0));
    let affinity: f64 = model.network.channels.iter().map(|c| c.drive).sum();
    assert!(close(affinity, (keq * s / p).ln(), 1e-12, 0.0));
}

/// King & Altman (1956, J. Phys. Chem. 60, 1375) / Hill (1966, J. Theor. Biol. 10, 442)
/// (citations from memory):
/// for a three-state cycle, p_i is proportional to the sum over spanning trees directed into i
/// of the product of their rates, and the cycle flux is (prod k+ - prod k-) / sum of all trees.
#[test]
fn three_state_cycle_matches_king_altman_diagrams() {
    let (a12, a21, a23, a32, a31, a13) = (3.0, 0.7, 11.0, 0.2, 5.0, 0.05);
    let model = parse(&format!(
        r#"
        [[state]]
        name = "one"
        [[state]]
        name = "two"
        [[state]]
        name = "three"
        [[transition]]
        from = "one"
        to = "two"
        forward = {a12}
        backward = {a21}
        [[transition]]
        from = "two"
        to = "three"
        forward = {a23}
        backward = {a32}
        [[transition]]
        from = "three"
        to = "one"
        forward = {a31}
        backward = {a13}
        "#
    ));
    let trees = [
        a21 * a31 + a23 * a31 + a32 * a21,
        a12 * a32 + a13 * a32 + a31 * a12,
        a13 * a23 + a12 * a23 + a21 * a13,
    ];
    let total: f64 = trees.iter().sum();
    let p = steady_p(&model.network);
    for i in 0..3 {
        assert!(close(p[i], trees[i] / total, 1e-13, 0.0), "p[{i}]");
    }
    let flux = (a12 * a23 * a31 - a21 * a32 * a13) / total;
    let obs = steady::observe(&model.network, &p);
    for j in &obs.fluxes {
        assert!(close(*j, flux, 1e-12, 0.0));
    }
    // Schnakenberg (1976, Rev. Mod. Phys. 48, 571): a single cycle produces entropy at
    // J * ln(prod k+ / prod k-).
    let affinity = ((a12 * a23 * a31) / (a21 * a32 * a13)).ln();
    assert!(close(obs.entropy_production, flux * affinity, 1e-12, 0.0));
}

/// Markov chain tree theorem (Hill 1966; Kirchhoff's matrix-tree theorem): p_i is proportional
/// to the principal minor i of the Laplacian L = diag(exit rates) - (rates i -> j). Computed here
/// with nalgebra determinants, independently of the solver, on a seeded random 6-state network.
#[test]
fn random_six_state_network_matches_matrix_tree_theorem() {
    let mut seed: u64 = 0x9e3779b97f4a7c15;
    let mut uniform = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    let n = 6;
    let mut text = String::new();
    for i in 0..n {
        text += &format!(
            "[[state]]\nname = \"s{i}\"\nenergy = {}\n",
            6.0 * uniform() - 3.0
        );
    }
    let mut pairs = vec![];
    for i in 1..n {
        pairs.push(((uniform() * i as f64) as usize, i));
    }
    pairs.extend([(0, 3), (1, 4), (2, 5), (5, 0)]);
    for (a, b) in &pairs {
        text += &format!(
            "[[transition]]\nfrom = \"s{a}\"\nto = \"s{b}\"\nforward = {}\nbackward = {}\n",
            10f64.powf(4.0 * uniform() - 2.0),
            10f64.powf(4.0 * uniform() - 2.0)
        );
    }
    let model = parse(&text);
    let mut laplacian = nalgebra::DMatrix::<f64>::zeros(n, n);
    for c in &model.network.channels {
        laplacian[(c.from, c.to)] -= c.forward;
        laplacian[(c.from, c.from)] += c.forward;
        laplacian[(c.to, c.from)] -= c.backward;
        laplacian[(c.to, c.to)] += c.backward;
    }
    let minors: Vec<f64> = (0..n)
        .map(|i| {
            laplacian
                .clone()
                .remove_row(i)
                .remove_column(i)
                .determinant()
        })
        .collect();
    let total: f64 = minors.iter().sum();
    let p = steady_p(&model.network);
    for i in 0..n {
        assert!(
            close(p[i], minors[i] / total, 1e-10, 0.0),
            "p[{i}] {} vs {}",
            p[i],
            minors[i] / total
        );
    }
}

/// Exact SI constants (2019 SI, CODATA 2018) and the values derived from them (methods, section 8):
/// RT = 2.47896 kJ/mol, kT = 4.1164 pN nm, 1 eV = 38.92 kT at 298.15 K, and a 500 nm photon
/// carries hc/lambda = 2.4797 eV (hc = 1239.84198 eV nm).
#[test]
fn unit_conversions_match_exact_si_values() {
    let at = |energy| Units {
        temperature: 298.15,
        energy,
        time: TimeUnit::Second,
    };
    let kj = at(EnergyUnit::KiloJoulePerMole);
    assert!(
        close(1.0 / kj.kt_per_unit(), 2.47896, 2e-6, 0.0),
        "RT = {}",
        1.0 / kj.kt_per_unit()
    );
    let pn = at(EnergyUnit::PiconewtonNanometre);
    assert!(close(1.0 / pn.kt_per_unit(), 4.1164, 1e-5, 0.0));
    let ev = at(EnergyUnit::ElectronVolt);
    assert!(close(ev.kt_per_unit(), 38.92, 1e-4, 0.0));
    let kcal = at(EnergyUnit::KiloCaloriePerMole);
    assert!(close(1.0 / kcal.kt_per_unit(), 0.59248, 1e-5, 0.0));
    // Every unit against its definition, computed here from the exact 2019 SI values typed
    // below (not the crate's constants), to 1e-15: k_B = 1.380649e-23 J/K, N_A =
    // 6.02214076e23 /mol, e = 1.602176634e-19 C, 1 cal = 4.184 J (thermochemical), 1 zJ =
    // 1 pN nm = 1e-21 J. The 4-6 digit values above are the handbook figures.
    for temperature in [273.15, 298.15, 310.0] {
        let kt = 1.380649e-23 * temperature;
        for (unit, joules) in [
            (EnergyUnit::KT, kt),
            (EnergyUnit::KiloJoulePerMole, 1e3 / 6.02214076e23),
            (EnergyUnit::KiloCaloriePerMole, 4.184e3 / 6.02214076e23),
            (EnergyUnit::ElectronVolt, 1.602176634e-19),
            (EnergyUnit::ZeptoJoule, 1e-21),
            (EnergyUnit::PiconewtonNanometre, 1e-21),
        ] {
            let units = Units {
                temperature,
                energy: unit,
                time: TimeUnit::Second,
            };
            let per_unit = joules / kt;
            assert!(
                close(units.kt_per_unit(), per_unit, 1e-15, 0.0),
                "{unit:?} at {temperature} K: {} vs {per_unit}",
                units.kt_per_unit()
            );
            // A wrong factor anywhere in the pair shows here, unlike a bare round trip.
            assert!(close(units.to_kt(2.5), 2.5 * per_unit, 1e-15, 0.0));
            assert!(close(units.from_kt(2.5 * per_unit), 2.5, 1e-15, 0.0));
        }
    }
    for (unit, seconds) in [
        (TimeUnit::Second, 1.0),
        (TimeUnit::Millisecond, 1e-3),
        (TimeUnit::Microsecond, 1e-6),
        (TimeUnit::Nanosecond, 1e-9),
        (TimeUnit::Minute, 60.0),
    ] {
        assert_eq!(unit.seconds(), seconds);
    }
    assert!(close(
        photon_energy_joules(500.0) / ELEMENTARY_CHARGE,
        1239.84198 / 500.0,
        1e-8,
        0.0
    ));
    // Through a model file: a drive of RT in kJ/mol implies backward = forward / e.
    let model = parse(
        r#"
        energy_unit = "kJ/mol"
        [[state]]
        name = "a"
        [[state]]
        name = "b"
        [[transition]]
        from = "a"
        to = "b"
        forward = 1.0
        drive = 2.47896
        "#,
    );
    assert!(close(
        model.network.channels[0].backward,
        (-1.0f64).exp(),
        2e-6,
        0.0
    ));
    // Time units only relabel rates; watts per molecule use seconds.
    let per_ms = Units {
        time: TimeUnit::Millisecond,
        ..Units::default()
    };
    assert!(close(
        per_ms.watts(1.0),
        1.380649e-23 * 298.15 * 1e3,
        1e-15,
        0.0
    ));
}

/// Cycle decomposition (J. Schnakenberg, Rev. Mod. Phys. 48, 571 (1976), section 5; T. L. Hill,
/// J. Theor. Biol. 10, 442 (1966)): for a fundamental cycle basis every net flux is the sum of
/// the fluxes of the cycles through it, and the entropy production is `sum J_cycle A_cycle`,
/// the harvesting power `sum J_cycle w_cycle`. Checked on every shipped and fixture model from
/// the `steady --json` figures (the identities tie the cycle table to the per-transition table,
/// computed apart); the walker's two cycles against the labels of its file by hand: bind (60)
/// plus slip (20) draw 80 pN nm per turn of the slip cycle, and the step cycle stores 16 pN nm
/// and draws 20 - 20 = 0.
#[test]
fn cycle_fluxes_and_affinities_decompose_the_steady_state() {
    for path in crate::common::all_models() {
        let v = crate::common::run_json(&["steady", &path, "--json"]);
        let f = |x: &serde_json::Value| x.as_f64().unwrap();
        let cycles = v["cycles"].as_array().unwrap();
        let transitions = v["transitions"].as_array().unwrap();
        let states = v["states"].as_array().unwrap().len();
        assert_eq!(cycles.len(), transitions.len() + 1 - states, "{path}");
        // sum J A over cycles (kT) against entropy production; sum J w against the power.
        let sigma: f64 = cycles
            .iter()
            .map(|c| f(&c["flux"]) * f(&c["affinity_kt"]))
            .sum();
        let scale: f64 = cycles
            .iter()
            .map(|c| (f(&c["flux"]) * f(&c["affinity_kt"])).abs())
            .sum::<f64>()
            .max(1e-300);
        assert!(
            (sigma - f(&v["entropy_production"])).abs() <= 1e-9 * scale,
            "{path}: {sigma} vs {}",
            v["entropy_production"]
        );
        let power: f64 = cycles
            .iter()
            .map(|c| f(&c["flux"]) * f(&c["work_per_turn"]))
            .sum();
        let power_scale: f64 = cycles
            .iter()
            .map(|c| (f(&c["flux"]) * f(&c["work_per_turn"])).abs())
            .sum::<f64>();
        assert!(
            (power - f(&v["power"])).abs() <= 1e-9 * power_scale + f(&v["power_roundoff"]),
            "{path}: {power} vs {}",
            v["power"]
        );
    }
    let v = crate::common::run_json(&["steady", "problems/walker.toml", "--json"]);
    let mut per_turn: Vec<(f64, f64)> = v["cycles"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            (
                c["drive_per_turn"].as_f64().unwrap(),
                c["work_per_turn"].as_f64().unwrap(),
            )
        })
        .collect();
    per_turn.sort_by(|a, b| a.0.total_cmp(&b.0));
    assert!(per_turn[0].0.abs() < 1e-12 && (per_turn[0].1 - 16.0).abs() < 1e-12);
    assert!((per_turn[1].0 - 80.0).abs() < 1e-12 && per_turn[1].1.abs() < 1e-12);
}

/// `check --json` reports the backward rate that local detailed balance implies, against the
/// value computed here from the exact 2019 SI Boltzmann constant (k_B = 1.380649e-23 J/K, exact
/// by definition) and 1 pN nm = 1e-21 J: the walker's binding step (energies 0 and -10 pN nm,
/// drive 60 pN nm, no work, forward 1000 /s) at 298.15 K.
#[test]
fn check_reports_the_backward_rate_local_detailed_balance_implies() {
    let v = crate::common::run_json(&["check", "problems/walker.toml", "--json"]);
    let bind = v["transitions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["label"] == "bind")
        .unwrap();
    let kt_pn_nm: f64 = 1.380649e-23 * 298.15 / 1e-21;
    let expected = 1000.0 * (-(0.0 - (-10.0) + 60.0) / kt_pn_nm).exp();
    let reported = bind["backward"].as_f64().unwrap();
    assert!(
        (reported - expected).abs() <= 1e-14 * expected,
        "{reported} vs {expected}"
    );
    assert_eq!(bind["implied"], "backward");
    assert_eq!(v["cycles"].as_array().unwrap().len(), 2);
}
