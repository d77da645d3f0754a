//! Steady-state fluxes and powers, and the bound's certificate, against exact arithmetic.
//!
//! Reference: the Grassmann-Taksar-Heyman elimination (Grassmann, Taksar and Heyman,
//! Oper. Res. 33, 1107 (1985)) carried out in exact rationals (`num-rational`'s `BigRational`,
//! a general-purpose library) on the very doubles of each model. Every double is an exact
//! rational, so the reference steady state, net fluxes and powers carry no round-off at all and
//! every comparison below is an exact rational comparison.
//!
//! The models are random and stiff, of the kind the tool is used on but that nobody tuned it to:
//! 3 to 30 states on a random spanning tree plus chords, state energies up to +-200 kT, forward
//! rates spread over 4 to 24 decades, some channels driven (up to 40 kT per jump) and some
//! storing work (+-10 kT per jump), each backward rate following from local detailed balance.

use ergopath::bound::{self, BoundSettings};
use ergopath::model::{Channel, Network, PairSelection};
use ergopath::steady::{self, SteadySettings};
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{Signed, Zero};

/// A small deterministic generator (64-bit LCG, Knuth's MMIX constants), so every failure
/// names a reproducible model.
struct Draw(u64);

impl Draw {
    fn unit(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    fn between(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }
    fn below(&mut self, n: usize) -> usize {
        ((self.unit() * n as f64) as usize).min(n - 1)
    }
}

/// Random stiff model number `seed` with `states.start..states.end` states.
fn stiff_model(seed: u64, states: std::ops::Range<usize>) -> Network {
    let mut draw = Draw(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ 0x5DEE_CE66);
    let n = states.start + draw.below(states.len());
    let energy_span = [5.0, 50.0, 200.0][draw.below(3)];
    let decades = draw.between(4.0, 24.0);
    let centre = draw.between(-6.0, 6.0);
    let energies: Vec<f64> = (0..n)
        .map(|_| draw.between(-energy_span, energy_span))
        .collect();
    let mut pairs: Vec<(usize, usize)> = (1..n).map(|i| (draw.below(i), i)).collect();
    for _ in 0..draw.below(n + 1) {
        let (a, b) = (draw.below(n), draw.below(n));
        if a != b {
            pairs.push((a, b));
        }
    }
    let channels = pairs
        .into_iter()
        .map(|(from, to)| {
            let forward = 10f64.powf(centre + decades * (draw.unit() - 0.5));
            let drive = if draw.unit() < 0.4 {
                draw.between(0.0, 40.0)
            } else {
                0.0
            };
            let work = if draw.unit() < 0.4 {
                draw.between(-10.0, 10.0)
            } else {
                0.0
            };
            Channel::balanced(&energies, from, to, forward, work, drive)
        })
        .collect();
    Network { energies, channels }
}

fn exact(x: f64) -> BigRational {
    BigRational::from_float(x).expect("finite doubles are rationals")
}

/// The exact steady state of the rates as given (rational GTH), normalised to sum one.
fn exact_steady_state(network: &Network) -> Vec<BigRational> {
    let n = network.len();
    let zero = BigRational::zero();
    let mut a = vec![vec![zero.clone(); n]; n];
    for c in &network.channels {
        a[c.from][c.to] += exact(c.forward);
        a[c.to][c.from] += exact(c.backward);
    }
    let mut exit = vec![zero.clone(); n];
    for k in (1..n).rev() {
        let s: BigRational = a[k][..k].iter().sum();
        for i in 0..k {
            if a[i][k].is_zero() {
                continue;
            }
            let share = &a[i][k] / &s;
            let row_k: Vec<BigRational> = a[k][..k].to_vec();
            for (j, rate) in row_k.iter().enumerate() {
                if j != i && !rate.is_zero() {
                    a[i][j] += &share * rate;
                }
            }
        }
        exit[k] = s;
    }
    let mut p = vec![zero; n];
    p[0] = BigRational::from_integer(BigInt::from(1));
    for k in 1..n {
        let inflow: BigRational = (0..k).map(|i| &p[i] * &a[i][k]).sum();
        p[k] = inflow / &exit[k];
    }
    let total: BigRational = p.iter().sum();
    p.iter().map(|x| x / &total).collect()
}

struct ExactObservables {
    fluxes: Vec<BigRational>,
    power: BigRational,
    drive_power: BigRational,
}

fn exact_observables(network: &Network) -> ExactObservables {
    let p = exact_steady_state(network);
    let fluxes: Vec<BigRational> = network
        .channels
        .iter()
        .map(|c| exact(c.forward) * &p[c.from] - exact(c.backward) * &p[c.to])
        .collect();
    let weighted = |label: fn(&Channel) -> f64| -> BigRational {
        network
            .channels
            .iter()
            .zip(&fluxes)
            .map(|(c, j)| exact(label(c)) * j)
            .sum()
    };
    ExactObservables {
        power: weighted(|c| c.work),
        drive_power: weighted(|c| c.drive),
        fluxes,
    }
}

/// `|computed - reference| <= bound`, exactly.
fn within(computed: f64, reference: &BigRational, bound: f64) -> bool {
    (exact(computed) - reference).abs() <= exact(bound)
}

/// `|computed - reference| <= rel |reference|`, exactly.
fn relatively_close(computed: f64, reference: &BigRational, rel: f64) -> bool {
    (exact(computed) - reference).abs() <= exact(rel) * reference.abs()
}

/// How many models kept every figure within 1e-8 relative of the exact value, after asserting
/// on each that the computed power, drive power and net fluxes lie within their stated
/// round-off bounds of the exact values.
fn check_steady_figures(seeds: std::ops::Range<u64>, states: std::ops::Range<usize>) -> usize {
    let mut accurate = 0;
    for seed in seeds {
        let network = stiff_model(seed, states.clone());
        let solved = steady::solve(&network, &SteadySettings::default())
            .unwrap_or_else(|e| panic!("model {seed}: the dense steady state failed: {e}"));
        let computed = steady::observe(&network, &solved.probabilities);
        let reference = exact_observables(&network);
        assert!(
            within(computed.power, &reference.power, computed.power_roundoff),
            "model {seed}: power {:e} +- {:e}, exact {:e}",
            computed.power,
            computed.power_roundoff,
            num_traits::ToPrimitive::to_f64(&reference.power).unwrap_or(f64::NAN)
        );
        assert!(
            within(
                computed.drive_power,
                &reference.drive_power,
                computed.drive_power_roundoff
            ),
            "model {seed}: drive power outside its bound"
        );
        for (c, exact_flux) in reference.fluxes.iter().enumerate() {
            assert!(
                within(computed.fluxes[c], exact_flux, computed.flux_roundoff[c]),
                "model {seed}, channel {c}: flux {:e} +- {:e}",
                computed.fluxes[c],
                computed.flux_roundoff[c]
            );
        }
        let all_accurate = relatively_close(computed.power, &reference.power, 1e-8)
            && relatively_close(computed.drive_power, &reference.drive_power, 1e-8)
            && reference
                .fluxes
                .iter()
                .zip(&computed.fluxes)
                .all(|(e, &j)| relatively_close(j, e, 1e-8));
        accurate += usize::from(all_accurate);
    }
    accurate
}

const MODELS: u64 = 2000;

#[test]
fn steady_fluxes_and_powers_are_exact_to_their_stated_round_off_on_random_stiff_models() {
    let accurate = check_steady_figures(0..MODELS, 3..9);
    // Accuracy target: power and every net flux within 1e-8 relative. Measured 1923 of 2000
    // (96%); in the others some net flux is below 1e-20 of its channel's one-way fluxes (down
    // to 1e-160), which only arithmetic of more than 50 digits resolves; those figures carry a
    // round-off bound that marks them as not determined, and the exact value lies within it.
    eprintln!("{accurate} of {MODELS} models accurate to 1e-8 in every figure");
    assert!(accurate >= 1900, "only {accurate} of {MODELS} accurate");
}

#[test]
fn larger_stiff_models_up_to_30_states_keep_their_round_off_bounds() {
    let models = 150;
    let accurate = check_steady_figures(MODELS..MODELS + models, 9..31);
    eprintln!("{accurate} of {models} models of 9-30 states accurate to 1e-8 in every figure");
    assert!(accurate >= 120, "only {accurate} of {models} accurate");
}

#[test]
fn the_certified_bound_never_falls_below_the_exact_baseline_power() {
    // Soundness of the certificate: the baseline network is itself a design, so any certified
    // upper value below its exact power would be a false certificate. Refusals are allowed (a
    // refusal is honest) but counted, and a certified bound must dominate its own attained value.
    let (mut certified, mut refused) = (0, 0);
    for seed in (0..MODELS).step_by(8) {
        let network = stiff_model(seed, 3..9);
        let reference = exact_observables(&network);
        match bound::solve(&network, &PairSelection::All, &BoundSettings::default()) {
            Ok(b) => {
                certified += 1;
                assert!(
                    exact(b.certified_upper) >= reference.power,
                    "model {seed}: certified upper {:e} below the exact baseline power",
                    b.certified_upper
                );
                assert!(b.certified_upper >= b.power, "model {seed}");
                assert!(
                    within(b.baseline_power, &reference.power, b.baseline_roundoff),
                    "model {seed}: baseline power {:e} +- {:e}",
                    b.baseline_power,
                    b.baseline_roundoff
                );
            }
            Err(_) => refused += 1,
        }
    }
    // Measured: 98 of 250 certified; each refusal says that round-off decides the bound
    // (implied rates spanning up to 1e-150..1e150 on these models: the round-off of the
    // certificate exceeds the bound itself, e.g. 1.8 +- 1.2e20 at rates from 1e-55 to 5e32).
    // Until 2026-12-03 such bounds were returned as "zero to round-off" (130 of the 250) and
    // printed as not determined, while shares of their headroom were still printed. The floor
    // catches a solver that stops certifying, the assertions above a certificate that lies.
    eprintln!("{certified} certified, {refused} refused");
    assert!(
        certified >= 90,
        "{refused} of {} refused",
        certified + refused
    );
}

/// The shipped regression models (`tests/fixtures/regression/`, each rate the shortest decimal
/// of its double) through the binary: `steady --json` within its stated bounds of the exact
/// values, and `bound --json` either refused with a reason or certified at least the exact
/// baseline power.
#[test]
fn regression_models_through_the_binary_match_exact_arithmetic() {
    let files: Vec<_> = crate::common::files_in("tests/fixtures/regression")
        .into_iter()
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    assert!(files.len() >= 4);
    for file in files {
        let name = file.display().to_string();
        let model = ergopath::model::Model::load(&file).unwrap();
        assert_eq!(
            model.units.energy.name(),
            "kT",
            "{name}: kT units keep JSON exact"
        );
        let reference = exact_observables(&model.network);
        let v = crate::common::run_json(&["steady", &name, "--json"]);
        let get = |key: &str| v[key].as_f64().unwrap();
        assert!(
            within(get("power"), &reference.power, get("power_roundoff")),
            "{name}: power"
        );
        assert!(
            within(
                get("drive_power"),
                &reference.drive_power,
                get("drive_power_roundoff")
            ),
            "{name}: drive power {}",
            get("drive_power")
        );
        for (c, exact_flux) in reference.fluxes.iter().enumerate() {
            let t = &v["transitions"][c];
            let (flux, roundoff) = (
                t["flux"].as_f64().unwrap(),
                t["flux_roundoff"].as_f64().unwrap(),
            );
            assert!(within(flux, exact_flux, roundoff), "{name}: transition {c}");
        }
        let out = crate::common::run(&["bound", &name, "--json"]);
        if out.status.success() {
            let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
            let upper = v["bound"]["certified_upper"].as_f64().unwrap();
            assert!(
                exact(upper) >= reference.power,
                "{name}: certified {upper} below the exact baseline power"
            );
        } else {
            let stderr = String::from_utf8_lossy(&out.stderr);
            assert!(
                stderr.contains("fix:"),
                "{name}: refusal without a fix: {stderr}"
            );
        }
    }
}
