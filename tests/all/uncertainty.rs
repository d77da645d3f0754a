//! Uncertain parameters: every sample keeps local detailed balance and has the stated spread;
//! quantiles of a two-state model agree with its closed form within the Monte Carlo error; the
//! result does not depend on threads; the ranking by quantile equals a brute-force evaluation.

use crate::common::{dense_stationary, parse, run, scratch};
use ergopath::commands::{self, Format, SearchKnobs, UncertaintyRequest};
use ergopath::model::uncertainty::Z_95;
use ergopath::model::{Model, Network};

/// A two-state machine: the coupled step a->b (drive 4 kT, stores 1.5 kT per jump, its rates
/// uncertain by a factor 4 at 95%) and an exact uncoupled leak a->b without drive.
const TWO_STATE: &str = r#"
title = "two-state coupled step and leak"
[[state]]
name = "a"
[[state]]
name = "b"
energy = 1.0
[[transition]]
from = "a"
to = "b"
forward = 3.0
drive = 4.0
work = 1.5
rate_uncertainty = 4
[[transition]]
from = "a"
to = "b"
forward = 0.7
drive = 0.0
"#;

/// Power of the two-state model with the coupled step's rates times `s`: with the stationary
/// law of a two-state chain, `p_a = (b1 + b2) / (f1 + b1 + f2 + b2)` (e.g. N. G. van Kampen,
/// Stochastic Processes in Physics and Chemistry, 3rd ed., section V.3), the coupled flux is
/// `J1 = s (f1 b2 - b1 f2) / (s (f1 + b1) + f2 + b2)` and the power `w1 J1`.
fn two_state_power(s: f64) -> (f64, f64) {
    let (f1, f2) = (3.0_f64, 0.7_f64);
    let b1 = f1 * (-(0.0 - 1.0 + 4.0 - 1.5_f64)).exp();
    let b2 = f2 * (-(0.0 - 1.0_f64)).exp();
    let num = f1 * b2 - b1 * f2;
    let den = |s: f64| s * (f1 + b1) + f2 + b2;
    let power = 1.5 * s * num / den(s);
    // d power / d s, for the density of the power at a quantile.
    let slope = 1.5 * num * (f2 + b2) / den(s).powi(2);
    (power, slope)
}

/// The standard normal quantile by bisection on erfc-free series (enough for 5%..95%).
fn normal_quantile(q: f64) -> f64 {
    let cdf = |x: f64| 0.5 * (1.0 + erf(x / std::f64::consts::SQRT_2));
    let (mut lo, mut hi) = (-10.0, 10.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if cdf(mid) < q {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// erf by its Taylor series (converges for |x| < 3, all that is used here; Abramowitz and
/// Stegun 7.1.5).
fn erf(x: f64) -> f64 {
    let (mut term, mut sum, mut n) = (x, x, 0.0);
    while term.abs() > 1e-17 * sum.abs().max(1e-300) {
        n += 1.0;
        term *= -x * x / n;
        sum += term / (2.0 * n + 1.0);
    }
    sum * 2.0 / std::f64::consts::PI.sqrt()
}

#[test]
fn quantiles_of_a_two_state_model_match_its_closed_form() {
    assert!(
        (normal_quantile(0.975) - Z_95).abs() < 1e-12,
        "the normal quantile helper"
    );
    let model = parse(TWO_STATE);
    let n = 4000;
    let request = UncertaintyRequest {
        samples: n,
        seed: 11,
        knobs: SearchKnobs {
            quiet: true,
            ..Default::default()
        },
        format: Format::Json,
        ..Default::default()
    };
    let report: serde_json::Value =
        serde_json::from_str(&commands::uncertainty_on(&model, &request).unwrap()).unwrap();
    assert_eq!(report["sampled_parameters"], 1);
    let sigma = 4.0_f64.ln() / Z_95;
    for entry in report["baseline_power"].as_array().unwrap() {
        let q = entry["level"].as_f64().unwrap();
        let z = normal_quantile(q);
        let s_q = (sigma * z).exp();
        let (exact, slope) = two_state_power(s_q);
        // Asymptotic standard error of a sample quantile: sqrt(q (1 - q) / N) / density, the
        // power's density at its quantile being phi(z) / (sigma s g'(s)).
        let phi = (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt();
        let error = (q * (1.0 - q) / n as f64).sqrt() * sigma * s_q * slope / phi;
        let value = entry["value"].as_f64().unwrap();
        assert!(
            (value - exact).abs() < 4.0 * error,
            "quantile {q}: {value} vs closed form {exact} (Monte Carlo error {error:.2e})"
        );
        let (low, high) = (
            entry["low"].as_f64().unwrap(),
            entry["high"].as_f64().unwrap(),
        );
        assert!(low <= value && value <= high);
        assert!(
            high - low < 10.0 * error,
            "interval {low}..{high} far wider than the Monte Carlo error {error}"
        );
    }
}

fn walker_with_uncertainty() -> Model {
    crate::common::load("problems/walker.toml")
}

/// `ln(f/b) = E_from - E_to + drive - work` (methods, section 1), to round-off.
fn assert_balanced(net: &Network) {
    for c in &net.channels {
        let lhs = (c.forward / c.backward).ln();
        let rhs = net.energies[c.from] - net.energies[c.to] + c.drive - c.work;
        assert!(
            (lhs - rhs).abs() <= 1e-9 * (1.0 + rhs.abs()),
            "LDB broken: {lhs} vs {rhs}"
        );
    }
}

#[test]
fn samples_keep_detailed_balance_and_have_the_stated_spread() {
    let model = walker_with_uncertainty();
    let spread = model.uncertainty.as_ref().unwrap();
    let n = 4000;
    let (mut ln_rate, mut energy) = (Vec::new(), Vec::new());
    for i in 0..n {
        let net = spread.sample(&model.network, 3, i).unwrap();
        assert_balanced(&net);
        ln_rate.push((net.channels[0].forward / model.network.channels[0].forward).ln());
        energy.push(net.energies[1] - model.network.energies[1]);
    }
    let sd = |xs: &[f64]| {
        let m = xs.iter().sum::<f64>() / xs.len() as f64;
        (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt()
    };
    // Stated in problems/walker.toml: a factor 3 at 95% is sd ln 3 / 1.96 of ln k; 2 pN nm at
    // 95% is 2 / 1.96 pN nm, in kT by the exact SI values (k_B = 1.380649e-23 J/K, 298.15 K;
    // 1 pN nm = 1e-21 J). The relative standard
    // error of a sample sd is 1 / sqrt(2 N) = 1.1%; the bound is 4 of them.
    let want_rate = 3.0_f64.ln() / Z_95;
    let want_energy = 2.0e-21 / (1.380649e-23 * 298.15) / Z_95;
    assert!(
        (sd(&ln_rate) / want_rate - 1.0).abs() < 0.045,
        "{}",
        sd(&ln_rate)
    );
    assert!(
        (sd(&energy) / want_energy - 1.0).abs() < 0.045,
        "{}",
        sd(&energy)
    );
}

#[test]
fn copies_in_a_joint_chain_share_one_draw() {
    let text = std::fs::read_to_string(crate::common::root().join("problems/flicker.toml"))
        .unwrap()
        .replacen("time_unit", "rate_uncertainty = 2\ntime_unit", 1);
    let model = parse(&text);
    let spread = model.uncertainty.as_ref().unwrap();
    let net = spread.sample(&model.network, 5, 0).unwrap();
    assert_balanced(&net);
    // Channels copying one file transition change by one factor in every environment state.
    for (c, t) in spread.channel_transition.iter().enumerate() {
        let Some(t) = t else {
            assert_eq!(
                net.channels[c], model.network.channels[c],
                "switches are exact"
            );
            continue;
        };
        let ratio = net.channels[c].forward / model.network.channels[c].forward;
        let first = spread
            .channel_transition
            .iter()
            .position(|x| *x == Some(*t))
            .unwrap();
        let first_ratio = net.channels[first].forward / model.network.channels[first].forward;
        assert!((ratio / first_ratio - 1.0).abs() < 1e-12);
    }
}

#[test]
fn the_same_seed_gives_the_same_result_on_one_and_two_threads() {
    let model = walker_with_uncertainty();
    let json = |threads| {
        let request = UncertaintyRequest {
            samples: 300,
            seed: 9,
            knobs: SearchKnobs {
                threads,
                quiet: true,
                ..Default::default()
            },
            format: Format::Json,
            ..Default::default()
        };
        commands::uncertainty_on(&model, &request).unwrap()
    };
    assert_eq!(json(1), json(2));
}

/// Numpy's default quantile (Hyndman and Fan definition 7), written again for the check.
fn quantile_7(mut xs: Vec<f64>, q: f64) -> f64 {
    xs.sort_by(f64::total_cmp);
    let h = (xs.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(xs.len() - 1);
    xs[lo] + (h - h.floor()) * (xs[hi] - xs[lo])
}

#[test]
fn the_ranking_by_quantile_equals_a_brute_force_evaluation() {
    let model = walker_with_uncertainty();
    let network = &model.network;
    let design = crate::common::run_json(&[
        "design",
        "problems/walker.toml",
        "--top",
        "6",
        "-q",
        "--json",
    ]);
    let index = |name: &str| model.state_index(name).unwrap();
    let designs: Vec<Vec<ergopath::bound::design::Pathway>> = design["designs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| {
            d["pathways"]
                .as_array()
                .unwrap()
                .iter()
                .map(|p| ergopath::bound::design::Pathway {
                    from: index(p["from"].as_str().unwrap()),
                    to: index(p["to"].as_str().unwrap()),
                    forward: p["forward"].as_f64().unwrap(),
                    backward: p["backward"].as_f64().unwrap(),
                    work: model.units.to_kt(p["work"].as_f64().unwrap()),
                })
                .collect()
        })
        .collect();
    assert!(designs.len() >= 3);
    let (samples, q, seed) = (200, 0.1, 4);
    let (scores, used) = ergopath::uncertainty::rank_designs(
        &model,
        &designs,
        q,
        seed,
        samples,
        &Default::default(),
    )
    .unwrap();
    assert_eq!(used, samples);
    // Brute force: every design on every sample, by a dense nalgebra steady state.
    let spread = model.uncertainty.as_ref().unwrap();
    let mut powers = vec![Vec::new(); designs.len()];
    let mut firsts = vec![0usize; designs.len()];
    for i in 0..samples as u64 {
        let net = spread.sample(network, seed, i).unwrap();
        let per: Vec<f64> = designs
            .iter()
            .map(|d| {
                let extra: Vec<_> = d.iter().map(|p| p.channel()).collect();
                let full = net.with_channels(&extra);
                let p = dense_stationary(&full);
                full.channels.iter().map(|c| c.work * c.flux(&p)).sum()
            })
            .collect();
        let best = (0..per.len())
            .max_by(|&a, &b| per[a].total_cmp(&per[b]))
            .unwrap();
        firsts[best] += 1;
        for (d, w) in per.into_iter().enumerate() {
            powers[d].push(w);
        }
    }
    let mut expected: Vec<(usize, f64)> = powers
        .into_iter()
        .enumerate()
        .map(|(d, w)| (d, quantile_7(w, q)))
        .collect();
    expected.sort_by(|a, b| b.1.total_cmp(&a.1));
    for (score, (d, value)) in scores.iter().zip(&expected) {
        assert_eq!(
            score.design, *d,
            "order differs: {scores:?} vs {expected:?}"
        );
        assert!(
            (score.quantile_power - value).abs() <= 1e-9 * value.abs(),
            "{} vs {value}",
            score.quantile_power
        );
        assert_eq!(score.first_share, firsts[*d] as f64 / samples as f64);
    }
}

#[test]
fn uncertainty_keys_are_checked_and_required() {
    let dir = scratch("uncertainty-keys");
    let bad = dir.join("bad.toml");
    let text = TWO_STATE.replace("rate_uncertainty = 4", "rate_uncertainty = 0.5");
    let line = 1 + text
        .lines()
        .position(|l| l.starts_with("rate_uncertainty"))
        .unwrap();
    std::fs::write(&bad, &text).unwrap();
    let out = run(&["uncertainty", bad.to_str().unwrap()]);
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{message}");
    assert!(
        message.contains(&format!("bad.toml:{line}:")) && message.contains("factor from 1"),
        "{message}"
    );
    let out = run(&["uncertainty", "problems/ring6.toml"]);
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(message.contains("gives no uncertainty") && message.contains("rate_uncertainty"));
    let out = run(&["design", "problems/ring6.toml", "--samples", "10", "-q"]);
    assert_eq!(out.status.code(), Some(2));
}
