//! Closed forms and the regime verdict (methods, section 6) against the exact bound along
//! sweeps: the strong-drive form's convergence, and the verdict's promise that the form it
//! names is accurate.

use crate::common::{load, run, stored_scale_regimes};
use ergopath::bound::{self, closed_form, BoundSettings};
use ergopath::model::{Network, PairSelection};

/// `(scale, exact headroom, closed forms)` along log-spaced scales; uncertified points skipped.
fn sweep(
    net: &Network,
    scales: &[f64],
    scaled: impl Fn(&Network, f64) -> Option<Network>,
) -> Vec<(f64, f64, closed_form::ClosedForms)> {
    scales
        .iter()
        .filter_map(|&s| {
            let n = scaled(net, s)?;
            let b = bound::solve(&n, &PairSelection::All, &BoundSettings::default()).ok()?;
            let forms = closed_form::assess(&n, &b.baseline, b.baseline_power);
            Some((s, b.headroom(), forms))
        })
        .collect()
}

fn log_scales(from: f64, to: f64, points: usize) -> Vec<f64> {
    (0..points)
        .map(|i| from * (to / from).powf(i as f64 / (points - 1) as f64))
        .collect()
}

const MODELS: [&str; 9] = [
    "problems/walker.toml",
    "problems/photoswitch.toml",
    "problems/ring6.toml",
    "tests/fixtures/models/random1.toml",
    "tests/fixtures/models/random2.toml",
    "tests/fixtures/models/random3.toml",
    "tests/fixtures/models/random4.toml",
    "tests/fixtures/models/random5.toml",
    "tests/fixtures/models/random6.toml",
];

/// The corner limit's first correction (derived in `bound::closed_form`) makes the error fall
/// like ln(lambda)/lambda^2 when the stored energy per jump grows with lambda at fixed rates:
/// on the ring of methods section 6 and on every model, the error falls at each step from 30x to
/// 1000x and is under 1% at 1000x (a few hundred kT per jump on the ring: ring6 stores 1 kT).
#[test]
fn strong_drive_form_converges_as_the_stored_energy_grows() {
    let scales = [30.0, 100.0, 300.0, 1000.0];
    for path in MODELS {
        let model = load(path);
        let points = sweep(&model.network, &scales, |n, s| {
            Some(n.with_stored_energy_scaled(s))
        });
        assert_eq!(
            points.len(),
            scales.len(),
            "{path}: a point was not certified"
        );
        let errors: Vec<f64> = points
            .iter()
            .map(|(_, exact, f)| {
                ((f.strong_drive.as_ref().unwrap().headroom - exact) / exact).abs()
            })
            .collect();
        for w in errors.windows(2) {
            assert!(w[1] < w[0], "{path}: error rose {errors:?}");
        }
        assert!(errors[3] < 0.01, "{path}: {errors:?}");
    }
}

/// The verdict's promise, on 9 models x 2 scalings x 11 scales: where it says strong drive the
/// strong-drive form is within 10% of the exact headroom, where it says near equilibrium the
/// quadratic form is.
#[test]
fn regime_verdict_names_an_accurate_closed_form() {
    let scales = log_scales(0.01, 1000.0, 11);
    let (mut strong, mut near) = (0, 0);
    for path in MODELS {
        let model = load(path);
        let stored = sweep(&model.network, &scales, |n, s| {
            Some(n.with_stored_energy_scaled(s))
        });
        let drive = sweep(&model.network, &scales, |n, s| n.scaled(1.0, s, 1.0));
        for (s, exact, f) in stored.iter().chain(&drive) {
            let error = |estimate: f64| ((estimate - exact) / exact).abs();
            match f.regime {
                closed_form::Regime::StrongDrive => {
                    let e = error(f.strong_drive.as_ref().unwrap().headroom);
                    assert!(
                        e < 0.1,
                        "{path} at {s}: strong drive (chi {}) but the form is {e} off",
                        f.indicator
                    );
                    strong += 1;
                }
                closed_form::Regime::NearEquilibrium => {
                    let e = error(f.near_equilibrium.as_ref().unwrap().headroom);
                    assert!(
                        e < 0.1,
                        "{path} at {s}: near equilibrium (shift {:?}) but the form is {e} off",
                        f.shift
                    );
                    near += 1;
                }
                closed_form::Regime::Crossover => {}
            }
        }
    }
    assert!(
        strong >= 30 && near >= 15,
        "strong {strong}, near {near}: the sweeps must exercise both"
    );
}

#[test]
fn bound_json_carries_the_regime_and_both_closed_forms() {
    let out = run(&["bound", "problems/photoswitch.toml", "--json"]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["regime"]["name"], "strong drive");
    assert!(v["regime"]["indicator"].as_f64().unwrap() > closed_form::STRONG_DRIVE_ABOVE);
    let exact = v["bound"]["headroom"].as_f64().unwrap();
    let strong = v["closed_forms"]["strong_drive"]["headroom"]
        .as_f64()
        .unwrap();
    assert!(
        ((strong - exact) / exact).abs() < 0.01,
        "{strong} vs {exact}"
    );
    assert!(v["closed_forms"]["near_equilibrium"]["headroom"]
        .as_f64()
        .is_some());
}

#[test]
fn regimes_command_tabulates_the_sweep() {
    let out = run(&stored_scale_regimes("problems/ring6.toml", "6"));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let points = v["points"].as_array().unwrap();
    assert_eq!(points.len(), 6);
    assert_eq!(points[0]["regime"], "near equilibrium");
    assert_eq!(points[5]["regime"], "strong drive");
    // Methods, section 6: the ring's headroom theta^2 k (n-1) / (4 n^2) at small theta
    // (ring6: n = 6, k = 10, theta = 0.01 kT at the first scale).
    let exact = points[0]["headroom"].as_f64().unwrap();
    let formula = 0.01f64.powi(2) * 10.0 * 5.0 / (4.0 * 36.0);
    assert!(
        ((exact - formula) / formula).abs() < 1e-3,
        "{exact} vs {formula}"
    );
    for (bad, expected) in [
        (
            &["--scale", "speed"][..],
            [
                "'speed' is not a label to scale",
                "give work, drive, energies",
            ],
        ),
        (
            &["--scale", "work", "--from", "0"][..],
            ["--from 0e0", "give 2.2e-308 <= FROM < TO"],
        ),
    ] {
        let out = run(&[&["regimes", "problems/ring6.toml"][..], bad].concat());
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        for part in expected {
            assert!(err.contains(part), "{bad:?}: {err}");
        }
    }
}

/// A closed form is printed only in its own regime (or at the crossover): on the walker (near
/// equilibrium) the strong-drive form was 31316% off, on the photoswitch (strong drive) the
/// quadratic form is far off; both are marked not applicable instead of printed.
#[test]
fn closed_forms_are_printed_only_where_their_regime_applies() {
    for (model, shown, hidden) in [
        ("problems/walker.toml", "near equilibrium", "strong drive"),
        (
            "problems/photoswitch.toml",
            "strong drive",
            "near equilibrium",
        ),
    ] {
        let out = crate::common::run(&["bound", model]);
        let text = String::from_utf8(out.stdout).unwrap();
        assert!(
            text.contains(&format!(
                "{hidden:<20} not applicable (the regime is {shown})"
            )),
            "{model}: {text}"
        );
        assert!(
            text.contains(&format!("  {shown:<20} ")) && text.contains("% off)"),
            "{model}"
        );
    }
}

/// One way of scaling a network's labels by a factor (`None` when rates leave the range).
type Scaling = dyn Fn(&Network, f64) -> Option<Network>;

/// A generated model of one of three kinds, as model-file text (invented numbers):
/// `mild` (rates within two decades, labels of a few kT), `stiff` (rates over eight decades,
/// energies and drives up to 8 kT) and `environment` (a 3-state cycle whose drive acts only in
/// one of two environment states, switching slowly or fast).
fn generated_model(kind: &str, seed: u64) -> String {
    let mut rng = ergopath::rng::SplitMix::new(seed);
    let mut u = |lo: f64, hi: f64| lo + (hi - lo) * rng.uniform();
    let (n, decades, label) = match kind {
        "mild" => (4 + (seed % 4) as usize, 1.0, 3.0),
        "stiff" => (4 + (seed % 4) as usize, 4.0, 8.0),
        _ => (3, 1.0, 4.0),
    };
    let mut text = format!(
        "title = \"{kind} {seed}\"\ntemperature = 298.15\nenergy_unit = \"kT\"\ntime_unit = \"s\"\n"
    );
    for i in 0..n {
        text += &format!(
            "[[state]]\nname = \"s{i}\"\nenergy = {}\n",
            u(-label, label)
        );
    }
    let mut edges: Vec<(usize, usize)> = (0..n).map(|i| (i, (i + 1) % n)).collect();
    if n > 3 {
        edges.push((0, n / 2));
    }
    if kind == "environment" {
        let switch = 10f64.powf(u(-2.0, 1.0));
        text += &format!(
            "[[environment]]\nname = \"light\"\n[[environment]]\nname = \"dark\"\n[[switch]]\nfrom = \"light\"\nto = \"dark\"\nforward = {switch}\nbackward = {}\n",
            switch * u(0.5, 2.0)
        );
    }
    for (e, &(a, b)) in edges.iter().enumerate() {
        let only_light = kind == "environment" && e == 0;
        text += &format!(
            "[[transition]]\nfrom = \"s{a}\"\nto = \"s{b}\"\nforward = {}\ndrive = {}\nwork = {}\n{}",
            10f64.powf(u(-decades, decades)),
            u(-label, label),
            u(-label / 2.0, label / 2.0),
            if only_light { "environments = [\"light\"]\n" } else { "" }
        );
    }
    text
}

/// The regime verdict on a generated set wider than the sweeps it was tuned on (methods,
/// section 6): 8 mild, 6 stiff and 6 environment models, each under the three scalings
/// (stored energy, drives, energies) at 9 scales from 0.01 to 100. Every checked verdict that
/// names a regime has its form within 10% of the certified headroom (the error is computed here
/// from the two numbers, not taken from the tool), a crossover is flagged when no form is within
/// 10%, and the indicators' own predictions are measured: the README quotes these counts.
#[test]
fn checked_verdicts_hold_on_a_generated_set() {
    use closed_form::Regime;
    let scales = log_scales(0.01, 100.0, 9);
    let kinds = [("mild", 8), ("stiff", 6), ("environment", 6)];
    let (mut named, mut predicted, mut confirmed, mut points) = (0, 0, 0, 0);
    let mut by_kind = std::collections::BTreeMap::new();
    for (kind, count) in kinds {
        for seed in 0..count {
            let model = crate::common::parse(&generated_model(kind, seed));
            let scalings: [&Scaling; 3] = [
                &|n, s| Some(n.with_stored_energy_scaled(s)),
                &|n, s| n.scaled(1.0, s, 1.0),
                &|n, s| n.scaled(1.0, 1.0, s),
            ];
            for scaled in scalings {
                for (s, exact, forms) in sweep(&model.network, &scales, scaled) {
                    let forms = forms.checked(exact);
                    points += 1;
                    let error = |r: Regime| {
                        let estimate = match r {
                            Regime::StrongDrive => forms.strong_drive.as_ref().map(|f| f.headroom),
                            Regime::NearEquilibrium => {
                                forms.near_equilibrium.as_ref().map(|f| f.headroom)
                            }
                            Regime::Crossover => None,
                        };
                        estimate.map(|e| ((e - exact) / exact).abs())
                    };
                    if forms.prediction != Regime::Crossover {
                        predicted += 1;
                        confirmed += usize::from(error(forms.prediction).is_some_and(|e| e <= 0.1));
                    }
                    if forms.regime != Regime::Crossover {
                        named += 1;
                        let e = error(forms.regime).unwrap();
                        assert!(
                            e <= 0.1,
                            "{kind} {seed} at {s}: {:?} named, {e} off",
                            forms.regime
                        );
                    }
                    let any = [Regime::StrongDrive, Regime::NearEquilibrium]
                        .into_iter()
                        .any(|r| error(r).is_some_and(|e| e <= 0.1));
                    assert_eq!(forms.some_form_holds(), any, "{kind} {seed} at {s}");
                    // Crossover only where no form holds: a form within 10% is always named.
                    assert_eq!(
                        forms.regime == Regime::Crossover,
                        !any,
                        "{kind} {seed} at {s}"
                    );
                    let held = |r: Regime| error(r).is_some_and(|e| e <= 0.1);
                    if held(forms.prediction) {
                        assert_eq!(forms.regime, forms.prediction, "{kind} {seed} at {s}");
                    }
                    by_kind.entry(kind).or_insert([0usize; 2])[usize::from(any)] += 1;
                }
            }
        }
    }
    eprintln!(
        "generated set: {points} certified points, {predicted} predicted regimes, {confirmed} confirmed within 10%, {named} named; per kind [no form within 10%, some form]: {by_kind:?}"
    );
    // Counts measured on this set (quoted in the README); a change of the forms or thresholds
    // that loses accuracy shows here.
    assert!(points >= 470, "only {points} points certified");
    assert!(
        confirmed * 100 >= 90 * predicted,
        "only {confirmed} of {predicted} predictions hold"
    );
    // Measured: 147 of 482 named (the rest: no closed form within 10%, mostly where drives of a
    // few kT stay while only the stored energies or the state energies are scaled).
    assert!(
        named * 4 >= points,
        "{named} of {points} named: the verdict says too little"
    );
}

/// `regimes` on an environment model solves over the model's own pairs (within each
/// environment state, as `bound` does): at scale 1 its exact headroom is the headroom of the
/// 50-digit bound of `scripts/reference.py` (`tests/fixtures/bound_mp/flicker.json`, within
/// each environment state). The closed forms estimate the all-pairs bound, so no error is
/// given there; on the walker (all pairs) they are.
#[test]
fn regimes_of_an_environment_model_use_its_own_pairs() {
    let fixture: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            crate::common::root().join("tests/fixtures/bound_mp/flicker.json"),
        )
        .unwrap(),
    )
    .unwrap();
    assert_eq!(fixture["pairs_scope"], "within each environment state");
    let exact = |k: &str| fixture[k].as_str().unwrap().parse::<f64>().unwrap();
    let expected = exact("value_model_unit") - exact("baseline_power_model_unit");
    let args = [
        "--scale", "work", "--from", "1", "--to", "2", "--points", "2", "--json",
    ];
    let flicker =
        crate::common::run_json(&[&["regimes", "problems/flicker.toml"][..], &args].concat());
    assert_eq!(flicker["closed_forms_compared"], false);
    let at_one = &flicker["points"][0];
    assert_eq!(at_one["scale"].as_f64(), Some(1.0));
    let headroom = at_one["headroom"].as_f64().unwrap();
    // The bound certifies to 1e-8 relative; measured agreement 1e-15.
    assert!(
        (headroom - expected).abs() <= 1e-9 * expected.abs(),
        "{headroom} vs {expected}"
    );
    let out = run(&[
        "regimes",
        "problems/flicker.toml",
        "--scale",
        "work",
        "--from",
        "1",
        "--to",
        "2",
        "--points",
        "2",
        "--csv",
    ]);
    let csv = String::from_utf8(out.stdout).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let column = |name: &str| header.iter().position(|h| *h == name).unwrap();
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells[column("near_equilibrium_error")], "", "{line}");
        assert_eq!(cells[column("strong_drive_error")], "", "{line}");
    }
    let walker =
        crate::common::run_json(&[&["regimes", "problems/walker.toml"][..], &args].concat());
    assert_eq!(walker["closed_forms_compared"], true);
}
