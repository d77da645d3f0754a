//! Fluctuations of the work current (methods, section 12) and the simulation that checks them
//! (methods, section 13): exact references, the uncertainty relation, simulated confidence
//! intervals, and the messages for bad `simulate` input.

use crate::common::{load, network_strategy, root, run_json};
use ergopath::fluctuation::{self, Figure, Precision, Randomness, Ratio};
use ergopath::model::{Channel, Network};
use ergopath::rng::SplitMix;
use ergopath::steady::SteadySettings;
use proptest::prelude::*;
use serde_json::Value;

fn precision(net: &Network, dense_limit: usize) -> Precision {
    let settings = SteadySettings {
        dense_limit,
        ..Default::default()
    };
    fluctuation::of_network(net, &settings).unwrap().2
}

/// A ring with forward rates `u[i]` (i -> i+1), backward rates `w[i]` (i -> i-1), flat energies
/// and one kT of work stored per forward step (drives from LDB).
fn ring(u: &[f64], w: &[f64]) -> Network {
    let n = u.len();
    let channels = (0..n)
        .map(|i| {
            let backward = w[(i + 1) % n];
            Channel {
                from: i,
                to: (i + 1) % n,
                forward: u[i],
                backward,
                work: 1.0,
                drive: (u[i] / backward).ln() + 1.0,
            }
        })
        .collect();
    Network {
        energies: vec![0.0; n],
        channels,
    }
}

/// Drift and diffusion of a periodic one-dimensional hopping chain with period N (in steps),
/// B. Derrida, J. Stat. Phys. 31, 433 (1983), in the form with r_j, s_j, R_N, S_N, U_N:
/// V = N (1 - prod w_j/u_j) / R_N and D = (V S_N + N U_N) / R_N^2 - (N + 2) V / 2, where
/// r_j = (1/u_j)(1 + sum_{k=1}^{N-1} prod_{i=j+1}^{j+k} w_i/u_i),
/// s_j = (1/u_j)(1 + sum_{k=1}^{N-1} prod_{i=j-1}^{j-k} w_{i+1}/u_i),
/// R_N = sum r_j, S_N = sum_j s_j sum_{k=1}^N k r_{j+k}, U_N = sum_j u_j r_j s_j (indices mod N).
/// Implemented here from the formula alone, independently of the library.
fn derrida(u: &[f64], w: &[f64]) -> (f64, f64) {
    let n = u.len();
    let m = |i: isize| i.rem_euclid(n as isize) as usize;
    let r: Vec<f64> = (0..n as isize)
        .map(|j| {
            let (mut sum, mut prod) = (1.0, 1.0);
            for k in 1..n as isize {
                prod *= w[m(j + k)] / u[m(j + k)];
                sum += prod;
            }
            sum / u[m(j)]
        })
        .collect();
    let s: Vec<f64> = (0..n as isize)
        .map(|j| {
            let (mut sum, mut prod) = (1.0, 1.0);
            for k in 1..n as isize {
                let i = j - k;
                prod *= w[m(i + 1)] / u[m(i)];
                sum += prod;
            }
            sum / u[m(j)]
        })
        .collect();
    let big_r: f64 = r.iter().sum();
    let product: f64 = (0..n).map(|j| w[j] / u[j]).product();
    let v = n as f64 * (1.0 - product) / big_r;
    let big_s: f64 = (0..n)
        .map(|j| s[j] * (1..=n).map(|k| k as f64 * r[(j + k) % n]).sum::<f64>())
        .sum();
    let big_u: f64 = (0..n).map(|j| u[j] * r[j] * s[j]).sum();
    let d = (v * big_s + n as f64 * big_u) / (big_r * big_r) - (n as f64 + 2.0) * v / 2.0;
    (v, d)
}

/// Largest relative difference from Derrida's formula measured over these rings (both solver
/// paths): 4.9e-9, on stiff rings whose D is a millionth of the work-weighted traffic it is the
/// difference of (most rings agree to 1e-14). The tolerance is 20 times that; the stated
/// round-off bound is checked as well (measured: the error reaches at most 1.4% of it).
const DERRIDA_TOLERANCE: f64 = 1e-7;

#[test]
fn diffusion_matches_derrida_on_random_rings() {
    // Source: B. Derrida, J. Stat. Phys. 31, 433 (1983): exact V and D of a periodic chain.
    let mut rng = SplitMix::new(18);
    let (mut worst, mut share): (f64, f64) = (0.0, 0.0);
    for case in 0..200 {
        let n = 3 + case % 10;
        let mut rate = || 10f64.powf(4.0 * rng.uniform() - 2.0);
        let u: Vec<f64> = (0..n).map(|_| rate()).collect();
        let w: Vec<f64> = (0..n).map(|_| rate()).collect();
        let (v, d) = derrida(&u, &w);
        for limit in [400, 0] {
            let pr = precision(&ring(&u, &w), limit);
            let (ej, ed) = (
                (pr.current.value - v).abs() / v.abs().max(d),
                (pr.diffusion.value - d).abs() / d,
            );
            worst = worst.max(ej).max(ed);
            assert!(
                ej < DERRIDA_TOLERANCE && ed < DERRIDA_TOLERANCE,
                "ring {case} (dense limit {limit}): J {} vs {v}, D {} vs {d}",
                pr.current.value,
                pr.diffusion.value
            );
            // The stated round-off bound covers the actual error.
            assert!((pr.diffusion.value - d).abs() <= pr.diffusion.roundoff + 1e-15 * d);
            share = share.max((pr.diffusion.value - d).abs() / pr.diffusion.roundoff);
            // A ring is unicyclic with one kT per step: r = 2D / (J N).
            let Randomness::Unicyclic {
                work_per_turn,
                value,
            } = pr.randomness
            else {
                panic!("a ring is unicyclic");
            };
            assert_eq!(work_per_turn, n as f64);
            if let Ratio::Determined(r) = value {
                let exact = 2.0 * d / (v * n as f64);
                assert!((r.value - exact).abs() <= r.roundoff + 1e-12 * exact.abs());
            }
        }
    }
    eprintln!("Derrida rings: worst relative difference {worst:.2e}, worst share of the bound {share:.2e}");
}

fn reference() -> Vec<Value> {
    let path = root().join("tests/fixtures/precision/reference.json");
    let text = std::fs::read_to_string(&path).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    v["entries"].as_array().unwrap().clone()
}

/// Largest relative difference of D (and of J, relative to max(|J|, D)) from the mpmath finite
/// differences and the two-state formula, measured on both solver paths: 2.5e-13. The
/// tolerance is 20 times that; the error reaches at most 0.5% of the stated round-off bound.
const FIXTURE_TOLERANCE: f64 = 5e-12;

#[test]
fn derivatives_match_finite_differences_of_the_leading_eigenvalue() {
    // Source: scripts/reference.py, central differences of the leading eigenvalue of the
    // tilted generator at h = 1e-12 with mpmath (50 digits), cross-checked there by numpy.
    let entries = reference();
    assert!(entries.len() >= 14, "{} entries", entries.len());
    let (mut worst, mut share): (f64, f64) = (0.0, 0.0);
    for e in &entries {
        let model = e["model"].as_str().unwrap();
        let (j, d) = (
            e["power"].as_f64().unwrap(),
            e["diffusion"].as_f64().unwrap(),
        );
        let out = run_json(&["steady", model, "--json"]);
        let ours_j = out["power"].as_f64().unwrap();
        let ours_d = out["precision"]["diffusion"].as_f64().unwrap();
        let roundoff = out["precision"]["diffusion_roundoff"].as_f64().unwrap();
        let scale = j.abs().max(d);
        let (ej, ed) = ((ours_j - j).abs() / scale, (ours_d - d).abs() / d);
        worst = worst.max(ej).max(ed);
        assert!(
            ej < FIXTURE_TOLERANCE && ed < FIXTURE_TOLERANCE,
            "{model}: J {ours_j} vs {j}, D {ours_d} vs {d}"
        );
        assert!((ours_d - d).abs() <= roundoff + 1e-15 * d, "{model}");
        share = share.max((ours_d - d).abs() / roundoff);
        // The same through the sparse LU path (library).
        let m = load(model);
        let sparse = precision(&m.network, 0);
        let to_unit = m.units.from_kt(1.0);
        let sd = sparse.diffusion.value * to_unit * to_unit;
        worst = worst.max((sd - d).abs() / d);
        assert!(
            (sd - d).abs() < FIXTURE_TOLERANCE * d,
            "{model} sparse: {sd} vs {d}"
        );
    }
    eprintln!("finite-difference fixtures: worst relative difference {worst:.2e}, worst share of the bound {share:.2e}");
}

#[test]
fn two_state_machines_match_the_closed_formula() {
    // Source: the closed formula for two states joined by two channels, derived and evaluated
    // with mpmath in scripts/reference.py (`two_state_closed_form`).
    let mut seen = 0;
    for e in reference() {
        let Some(closed_d) = e["closed_form_diffusion"].as_f64() else {
            continue;
        };
        seen += 1;
        let closed_j = e["closed_form_power"].as_f64().unwrap();
        let m = load(e["model"].as_str().unwrap());
        for limit in [400, 0] {
            let pr = precision(&m.network, limit);
            assert!(
                (pr.diffusion.value - closed_d).abs() < FIXTURE_TOLERANCE * closed_d,
                "{}: {} vs {closed_d}",
                e["model"],
                pr.diffusion.value
            );
            assert!(
                (pr.current.value - closed_j).abs()
                    < FIXTURE_TOLERANCE * closed_j.abs().max(closed_d)
            );
        }
    }
    assert_eq!(seen, 4);
}

fn determined(r: Ratio) -> Option<Figure> {
    r.figure().filter(|f| f.roundoff <= 1e-6 * f.value.abs())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, rng_seed: crate::common::PROPTEST_SEED, ..ProptestConfig::default() })]

    /// The thermodynamic uncertainty relation, Barato and Seifert, Phys. Rev. Lett. 114, 158101
    /// (2015): Q = 2 D sigma / J^2 >= 2 for any current of a Markov jump process in steady
    /// state; here for the work current of random networks, on both solver paths.
    #[test]
    fn uncertainty_product_is_at_least_two(net in network_strategy(8)) {
        for limit in [400, 0] {
            let pr = precision(&net, limit);
            prop_assert!(pr.diffusion.value >= -pr.diffusion.roundoff, "{pr:?}");
            if let Some(q) = determined(pr.uncertainty_product) {
                prop_assert!(q.value >= 2.0 - q.roundoff, "Q = {q:?}");
            }
        }
    }
}

#[test]
fn uncertainty_product_tends_to_two_near_equilibrium() {
    // Source: Barato and Seifert, Phys. Rev. Lett. 114, 158101 (2015): the bound Q >= 2 is
    // saturated in linear response. A ring with random rates and labels, its work and drive
    // scaled by eps: Q - 2 must fall like eps^2 (measured ratio 0.0100 per decade of eps).
    let mut rng = SplitMix::new(7);
    let n = 6;
    let energies: Vec<f64> = (0..n).map(|_| 2.0 * rng.uniform() - 1.0).collect();
    let channels: Vec<Channel> = (0..n)
        .map(|i| {
            let forward = 10f64.powf(2.0 * rng.uniform() - 1.0);
            let (work, drive) = (1.0 + rng.uniform(), 3.0 + 2.0 * rng.uniform());
            Channel::balanced(&energies, i, (i + 1) % n, forward, work, drive)
        })
        .collect();
    let net = Network { energies, channels };
    let mut excess = Vec::new();
    for eps in [1e-1, 1e-2, 1e-3] {
        let scaled = net.scaled(eps, eps, 1.0).unwrap();
        let q = determined(precision(&scaled, 400).uncertainty_product).unwrap();
        excess.push(q.value - 2.0);
    }
    assert!(excess.iter().all(|&e| e > 0.0), "{excess:?}");
    for pair in excess.windows(2) {
        let ratio = pair[1] / pair[0];
        assert!((0.005..0.02).contains(&ratio), "{excess:?}");
    }
    assert!(excess[2] < 1e-5, "{excess:?}");
}
