//! The design search (`design`, `merge`, `sweep`) against independent brute force: every
//! scored design is re-scored here by a steady-state solve written with nalgebra (not the
//! tool's solver), and the best rates of each pathway set are searched by a grid plus a compass
//! (pattern) search, a derivative-free method (Kolda, Lewis & Torczon, SIAM Review 45, 2003)
//! that shares no code with the tool's L-BFGS and adjoint gradients.

use crate::common::{close, load, root, run, scratch};
use ergopath::model::{Channel, Model, Network};
use serde_json::Value;

/// Total harvesting power of `net` plus added pathways `(a, b, q+, q-)`, each storing
/// `E_a - E_b - ln(q+/q-)` kT per forward jump (methods, section 2), from a dense LU solve
/// of `L p = 0` with the last equation replaced by `sum p = 1`.
fn power(net: &Network, added: &[(usize, usize, f64, f64)]) -> f64 {
    let mut joint = net.clone();
    for &(a, b, f, g) in added {
        joint.channels.push(Channel {
            from: a,
            to: b,
            forward: f,
            backward: g,
            work: net.energies[a] - net.energies[b] - (f / g).ln(),
            drive: 0.0,
        });
    }
    let p = crate::common::dense_stationary(&joint);
    joint
        .channels
        .iter()
        .map(|c| c.work * (c.forward * p[c.from] - c.backward * p[c.to]))
        .sum()
}

/// Limits of the brute force: per-direction cap, total rate, |work| (kT).
#[derive(Clone, Copy)]
struct Limits {
    cap: f64,
    total: Option<f64>,
    work: Option<f64>,
}

impl Limits {
    fn allows(&self, net: &Network, added: &[(usize, usize, f64, f64)]) -> bool {
        let total: f64 = added.iter().map(|p| p.2 + p.3).sum();
        added.iter().all(|&(a, b, f, g)| {
            let w = net.energies[a] - net.energies[b] - (f / g).ln();
            f <= self.cap && g <= self.cap && self.work.is_none_or(|lim| w.abs() <= lim)
        }) && self.total.is_none_or(|t| total <= t)
    }
}

/// Rates of pathways on `pairs` from a point of the unit cube, two coordinates per pathway.
/// With only a cap: log10(rate / cap) in [-6, 0] for each direction. With a work limit `W` and
/// a total rate `T`: the work per jump in [-W, W] and the pathway's traffic `q+ + q-` in
/// [0, T], so that the limits are box constraints (the total is still checked).
fn rates_at(
    net: &Network,
    pairs: &[(usize, usize)],
    limits: Limits,
    x: &[f64],
) -> Vec<(usize, usize, f64, f64)> {
    pairs
        .iter()
        .enumerate()
        .map(|(e, &(a, b))| match (limits.work, limits.total) {
            (Some(w), Some(t)) => {
                let work = w * (2.0 * x[2 * e] - 1.0);
                let ratio = (net.energies[a] - net.energies[b] - work).exp(); // q+/q-
                let traffic = t * x[2 * e + 1];
                (
                    a,
                    b,
                    traffic * ratio / (1.0 + ratio),
                    traffic / (1.0 + ratio),
                )
            }
            _ => {
                let rate = |u: f64| limits.cap * 10f64.powf(-6.0 * (1.0 - u));
                (a, b, rate(x[2 * e]), rate(x[2 * e + 1]))
            }
        })
        .collect()
}

/// Best power over the rates of pathways on `pairs`: a grid over the unit cube of
/// [`rates_at`], then a compass search (step halving to 1e-7) from the best few grid points.
/// Infeasible points score -inf.
fn brute_force(net: &Network, pairs: &[(usize, usize)], limits: Limits, grid: usize) -> f64 {
    let dims = 2 * pairs.len();
    let score = |x: &[f64]| -> f64 {
        if x.iter().any(|v| *v > 1.0 || *v < 0.0) {
            return f64::NEG_INFINITY;
        }
        let added = rates_at(net, pairs, limits, x);
        if added.iter().all(|p| p.2 > 0.0 && p.3 > 0.0) && limits.allows(net, &added) {
            power(net, &added)
        } else {
            f64::NEG_INFINITY
        }
    };
    let mut seeds: Vec<(f64, Vec<f64>)> = Vec::new();
    let points = (grid + 1).pow(dims as u32);
    for k in 0..points {
        let mut rest = k;
        let x: Vec<f64> = (0..dims)
            .map(|_| {
                let i = rest % (grid + 1);
                rest /= grid + 1;
                i as f64 / grid as f64
            })
            .collect();
        seeds.push((score(&x), x));
    }
    seeds.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut best = f64::NEG_INFINITY;
    for (mut value, mut x) in seeds.into_iter().take(6) {
        let mut step = 1.0 / grid as f64;
        while step > 1e-7 {
            let mut moved = false;
            for d in 0..dims {
                for sign in [1.0, -1.0] {
                    let mut y = x.clone();
                    y[d] += sign * step;
                    let v = score(&y);
                    if v > value {
                        (value, x, moved) = (v, y, true);
                    }
                }
            }
            if !moved {
                step /= 2.0;
            }
        }
        best = best.max(value);
    }
    best
}

fn json(args: &[&str]) -> Value {
    let out = run(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// `(pairs, q+, q- per pathway, achieved power in kT)` of each ranked design.
type Ranked = Vec<(Vec<(usize, usize)>, Vec<(f64, f64)>, f64)>;

fn ranked(model: &Model, report: &Value) -> Ranked {
    let kt = |x: f64| model.units.to_kt(x);
    report["designs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| {
            let pathways = d["pathways"].as_array().unwrap();
            let pairs = pathways
                .iter()
                .map(|p| {
                    let a = model.state_index(p["from"].as_str().unwrap()).unwrap();
                    let b = model.state_index(p["to"].as_str().unwrap()).unwrap();
                    (a, b)
                })
                .collect();
            let rates = pathways
                .iter()
                .map(|p| {
                    (
                        p["forward"].as_f64().unwrap(),
                        p["backward"].as_f64().unwrap(),
                    )
                })
                .collect();
            (pairs, rates, kt(d["achieved_power"].as_f64().unwrap()))
        })
        .collect()
}

/// `(a, b, q+, q-)` of each pathway of a ranked design.
fn added_pathways(pairs: &[(usize, usize)], rates: &[(f64, f64)]) -> Vec<(usize, usize, f64, f64)> {
    pairs
        .iter()
        .zip(rates)
        .map(|(&(a, b), &(f, g))| (a, b, f, g))
        .collect()
}

/// Every ranked design is re-scored independently, respects the budget, and its stated power
/// is the power of its rates; then each set's power equals the brute-force best for that set.
fn check_against_brute_force(args: &[&str], limits: Limits, grid: usize, headroom_share: f64) {
    let model = load("problems/walker.toml");
    let net = &model.network;
    let report = json(args);
    let baseline = model
        .units
        .to_kt(report["baseline_power"].as_f64().unwrap());
    let headroom = model
        .units
        .to_kt(report["bound"]["headroom"].as_f64().unwrap());
    let designs = ranked(&model, &report);
    assert!(!designs.is_empty());
    // The keys of model-format.md ("design search"), with their documented meanings.
    assert!(report["budget"]["max_pathways"].as_u64().is_some());
    assert!(report["evaluated"].as_u64().unwrap() >= designs.len() as u64);
    for (i, d) in report["designs"].as_array().unwrap().iter().enumerate() {
        assert_eq!(d["rank"].as_u64(), Some(i as u64 + 1));
        let share = d["fraction_of_headroom"].as_f64().unwrap();
        let gain = model.units.to_kt(d["achieved_power"].as_f64().unwrap()) - baseline;
        assert!(close(share, gain / headroom, 1e-9, 1e-12));
    }
    for (pairs, rates, achieved) in &designs {
        let added = added_pathways(pairs, rates);
        let limits_with_roundoff = Limits {
            cap: limits.cap * (1.0 + 1e-9),
            total: limits.total.map(|t| t * (1.0 + 1e-9)),
            work: limits.work.map(|w| w * (1.0 + 1e-9)),
        };
        assert!(
            limits_with_roundoff.allows(net, &added),
            "{args:?}: {pairs:?} {rates:?} breaks the budget"
        );
        let independent = power(net, &added);
        assert!(
            close(*achieved, independent, 1e-9, 1e-12 * headroom),
            "{pairs:?}: reported {achieved}, independent solve {independent}"
        );
        let brute = brute_force(net, pairs, limits, grid);
        let gain = brute - baseline;
        assert!(
            *achieved >= brute - headroom_share * headroom,
            "{pairs:?}: search {achieved} below brute force {brute} (gain {gain})"
        );
        assert!(
            *achieved <= brute + headroom_share * headroom,
            "{pairs:?}: search {achieved} above brute force {brute}"
        );
    }
    // The ranking is in order of power.
    for w in designs.windows(2) {
        assert!(w[0].2 >= w[1].2);
    }
}

#[test]
fn one_pathway_search_equals_brute_force_under_a_cap() {
    // k = 1 on the 4-state walker: all 6 single pathways ranked, each equal to a 2-D brute force.
    check_against_brute_force(
        &[
            "design",
            "problems/walker.toml",
            "--max-pathways",
            "1",
            "--rate-cap",
            "200",
            "--top",
            "6",
            "--json",
            "-q",
        ],
        Limits {
            cap: 200.0,
            total: None,
            work: None,
        },
        300,
        1e-5,
    );
}

#[test]
fn two_pathway_search_equals_brute_force_under_a_cap() {
    // k = 2: all sets of one or two pathways that the search ranks (sets whose optimum idles a
    // pathway are left out as copies of smaller ones), each against a 4-D brute force.
    check_against_brute_force(
        &[
            "design",
            "problems/walker.toml",
            "--max-pathways",
            "2",
            "--rate-cap",
            "200",
            "--top",
            "21",
            "--json",
            "-q",
        ],
        Limits {
            cap: 200.0,
            total: None,
            work: None,
        },
        12,
        1e-4,
    );
}

#[test]
fn search_under_total_rate_and_work_limits_equals_brute_force() {
    // Non-convex budget (local optimisation from several starts), k = 1 and k = 2. Work limit
    // 12 pN nm (2.915 kT at 298.15 K); the model's own cap of 1000 /s cannot bind under a total
    // of 300 /s, so the brute force's box coordinates hold every limit.
    let work_kt = load("problems/walker.toml").units.to_kt(12.0);
    for (k, top, grid, share) in [("1", "6", 300, 1e-5), ("2", "8", 20, 1e-4)] {
        check_against_brute_force(
            &[
                "design",
                "problems/walker.toml",
                "--max-pathways",
                k,
                "--total-rate",
                "300",
                "--work-limit",
                "12",
                "--top",
                top,
                "--json",
                "-q",
            ],
            Limits {
                cap: 1000.0,
                total: Some(300.0),
                work: Some(work_kt),
            },
            grid,
            share,
        );
    }
}

#[test]
fn shards_merged_equal_one_run_byte_for_byte() {
    let dir = scratch("shards");
    let model = root().join("problems/ring6.toml");
    let model = model.to_str().unwrap();
    let common = [
        "--max-pathways",
        "3",
        "--rate-cap",
        "10",
        "--top",
        "8",
        "-q",
    ];
    let single = run(&[&["design", model, "--json"][..], &common].concat());
    assert!(single.status.success());
    let mut parts = Vec::new();
    for i in 0..3 {
        let shard = format!("{i}/3");
        let out = crate::common::run_in(
            &dir,
            &[&["design", model, "--shard", &shard, "--save"][..], &common].concat(),
        );
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        parts.push(dir.join(format!("results/ring6/design-part-{i}-of-3.json")));
    }
    let part_args: Vec<&str> = parts.iter().map(|p| p.to_str().unwrap()).collect();
    let merged = run(&[&["merge"][..], &part_args, &["--json"]].concat());
    assert!(
        merged.status.success(),
        "{}",
        String::from_utf8_lossy(&merged.stderr)
    );
    assert_eq!(
        String::from_utf8_lossy(&single.stdout),
        String::from_utf8_lossy(&merged.stdout)
    );
    // Beyond agreeing with one run: the merged ranking is the demo's saved one (the model's own
    // budget), each design at its 50-digit power (`scripts/reference.py`).
    let merged: serde_json::Value = serde_json::from_slice(&merged.stdout).unwrap();
    let references = crate::common::design_references("ring6");
    let designs = merged["designs"].as_array().unwrap();
    assert_eq!(designs.len(), 8);
    for d in designs {
        let source = format!("design.json rank {}", d["rank"]);
        let power = d["achieved_power"].as_f64().unwrap();
        crate::common::assert_reference_design(&references, &source, d, power);
    }
    // Missing or repeated shards are refused with a clear message and exit status 2.
    for bad in [
        &part_args[..2],
        &[part_args[0], part_args[0], part_args[1]][..],
    ] {
        let out = run(&[&["merge"][..], bad].concat());
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("shard"), "{err}");
    }
}

#[test]
fn sweep_never_falls_stays_under_its_bounds_and_tends_to_the_universal_bound() {
    // Three pathways are enough for the fast tree design on 4 states, so at a large cap the
    // best design must come within 1% of the universal bound (methods, sections 4 and 5).
    let report = json(&[
        "sweep",
        "problems/walker.toml",
        "--over",
        "rate-cap=1..1e6",
        "--points",
        "7",
        "--max-pathways",
        "3",
        "--json",
        "-q",
    ]);
    let bound = report["bound"]["power"].as_f64().unwrap();
    let points = report["points"].as_array().unwrap();
    assert_eq!(points.len(), 7);
    let mut last = f64::NEG_INFINITY;
    let mut relaxed = 0;
    for p in points {
        let best = p["best_power"].as_f64().unwrap();
        assert!(best >= last, "best power fell: {last} -> {best}");
        assert!(
            best <= bound,
            "best {best} above the universal bound {bound}"
        );
        // The relaxation is reported only when the conic solver reached full accuracy.
        if let Some(relaxation) = p["relaxation"].as_f64() {
            assert!(
                best <= relaxation,
                "best {best} above its relaxation {relaxation}"
            );
            assert!(
                relaxation <= bound * (1.0 + 1e-4),
                "relaxation {relaxation} above the bound {bound}"
            );
            relaxed += 1;
        }
        last = best;
    }
    assert!(
        relaxed >= 4,
        "only {relaxed} relaxations were solved to full accuracy"
    );
    let share = points[6]["fraction_of_headroom"].as_f64().unwrap();
    assert!(
        share > 0.99,
        "at cap 1e6 the best design reaches only {share} of the headroom"
    );
}

#[test]
fn no_ranked_design_keeps_a_pathway_that_adds_nothing() {
    // Methods, section 5 ("negligible pathways"): removing any pathway of a ranked design, the
    // other rates unchanged, must lower its power by more than 1e-6 of the headroom. Checked
    // with the independent nalgebra solve above on random rings whose 3- and 4-pathway optima
    // under a total-rate budget park spare rate on pathways of little use. The slack (1e-9 of
    // the headroom) covers the round-off of both solves, measured below 1e-14 of it.
    for file in [
        "tests/fixtures/idle/ring4.toml",
        "tests/fixtures/idle/ring5.toml",
    ] {
        let model = load(file);
        let report = json(&[
            "design",
            file,
            "--max-pathways",
            "4",
            "--total-rate",
            "50",
            "--top",
            "10",
            "--json",
            "-q",
        ]);
        let headroom = model
            .units
            .to_kt(report["bound"]["headroom"].as_f64().unwrap());
        let designs = ranked(&model, &report);
        assert!(
            designs.iter().any(|d| d.0.len() >= 3),
            "{file}: no large set ranked"
        );
        for (pairs, rates, achieved) in &designs {
            let added = added_pathways(pairs, rates);
            if added.len() < 2 {
                continue; // a single pathway is compared with the baseline by the ranking itself
            }
            for dropped in 0..added.len() {
                let mut fewer = added.clone();
                fewer.remove(dropped);
                let gain = achieved - power(&model.network, &fewer);
                assert!(
                    gain > (1e-6 - 1e-9) * headroom,
                    "{file}: pathway {dropped} of {pairs:?} adds {:.2e} of the headroom",
                    gain / headroom
                );
            }
        }
    }
}

#[test]
fn design_flags_are_checked() {
    let cases: [(&[&str], &str); 7] = [
        (
            &["design", "tests/fixtures/models/random1.toml"],
            "rate budget",
        ),
        (
            &["design", "problems/walker.toml", "--max-pathways", "0"],
            "max-pathways",
        ),
        (
            &["design", "problems/walker.toml", "--work-limit", "-1"],
            "work-limit",
        ),
        (
            &["design", "problems/walker.toml", "--total-rate", "0"],
            "total-rate",
        ),
        (
            &["design", "problems/walker.toml", "--pairs", "empty/nowhere"],
            "nowhere",
        ),
        (
            &["sweep", "problems/walker.toml", "--over", "speed=1..10"],
            "rate-cap",
        ),
        (
            &["design", "problems/walker.toml", "--shard", "3/3"],
            "shard",
        ),
    ];
    for (args, phrase) in cases {
        let out = run(args);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(phrase), "{args:?}: {err}");
        assert!(out.stdout.is_empty());
    }
}

#[test]
fn huge_caps_never_rank_a_design_above_the_bound() {
    // At caps of 1e12..1e20 per second the added rates dwarf the walker's own (<= 1e3), so the
    // verifying steady state can only resolve part of the power: every ranked design must lie
    // below the certified bound within its own round-off bound, and its gain over the baseline
    // must exceed that bound (otherwise it is reported as undetermined, not ranked).
    for cap in ["1e12", "1e16", "1e20", "1e100", "1e300", "1e308"] {
        let v = crate::common::run_json(&[
            "design",
            "problems/walker.toml",
            "--rate-cap",
            cap,
            "--max-pathways",
            "1",
            "--json",
        ]);
        let upper = v["bound"]["certified_upper"].as_f64().unwrap();
        let baseline = v["baseline_power"].as_f64().unwrap();
        let ranked = v["designs"].as_array().unwrap();
        let left_out = v["undetermined_designs"].as_u64().unwrap();
        // Caps beyond 1e12 times the fastest baseline rate (walker: 2270 /s) are lowered to it.
        let (searched, ceiling) = (
            v["budget"]["rate_cap"].as_f64().unwrap(),
            v["budget"]["rate_ceiling"].as_f64().unwrap(),
        );
        assert!(
            searched <= ceiling && close(ceiling, 2.2702e15, 1e-4, 0.0),
            "cap {cap}: searched at {searched}, ceiling {ceiling}"
        );
        let powers: Vec<f64> = ranked
            .iter()
            .map(|d| d["achieved_power"].as_f64().unwrap())
            .collect();
        assert!(
            powers.windows(2).all(|w| w[0] >= w[1]),
            "cap {cap}: ranks out of order of verified power: {powers:?}"
        );
        assert_eq!(
            ranked.len() as u64 + left_out,
            6,
            "cap {cap}: the walker has 6 pairs"
        );
        for d in ranked {
            let (power, roundoff) = (
                d["achieved_power"].as_f64().unwrap(),
                d["achieved_power_roundoff"].as_f64().unwrap(),
            );
            assert!(
                power - roundoff <= upper,
                "cap {cap}: {power} +- {roundoff} above {upper}"
            );
            assert!(
                power - baseline > roundoff,
                "cap {cap}: gain within round-off ranked"
            );
            assert!(
                d["fraction_of_headroom"].as_f64().unwrap() <= 1.0 + roundoff / (upper - baseline)
            );
        }
    }
}

#[test]
fn extreme_budgets_end_promptly_and_say_what_they_did() {
    // A 3-state ring (invented numbers): a cap of 1e308 once kept the line search busy for
    // minutes; it is now searched at the ceiling and reaches the universal bound, and a total
    // rate of 1e-310 per second adds nothing that double precision can resolve.
    let dir = crate::common::scratch("extreme-budgets");
    let file = dir.join("ring3.toml");
    std::fs::write(
        &file,
        "title = \"three-state ring\"\nenergy_unit = \"kT\"\ntime_unit = \"s\"\n[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n[[state]]\nname = \"c\"\n[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 10\ndrive = 3\nwork = 1\n[[transition]]\nfrom = \"b\"\nto = \"c\"\nforward = 5\nbackward = 2\n[[transition]]\nfrom = \"c\"\nto = \"a\"\nforward = 1\nbackward = 1\n",
    )
    .unwrap();
    let path = file.to_str().unwrap();
    let v = crate::common::run_json(&["design", path, "--rate-cap", "1e308", "--json"]);
    let upper = v["bound"]["certified_upper"].as_f64().unwrap();
    let best = &v["designs"][0];
    let (power, roundoff) = (
        best["achieved_power"].as_f64().unwrap(),
        best["achieved_power_roundoff"].as_f64().unwrap(),
    );
    assert!(
        power - roundoff <= upper,
        "{power} +- {roundoff} above {upper}"
    );
    // At the ceiling (1e13 /s) the best pair of pathways reaches the bound to 1e-3.
    assert!(
        best["fraction_of_headroom"].as_f64().unwrap() > 0.999,
        "{best}"
    );
    let v = crate::common::run_json(&["design", path, "--total-rate", "1e-310", "--json"]);
    assert_eq!(v["designs"].as_array().unwrap().len(), 0, "{v}");
    // The three single pathways are undetermined; the three pairs of them are not ranked at
    // all, since neither pathway of a pair adds anything (methods, section 5).
    assert_eq!(v["undetermined_designs"].as_u64(), Some(3));
}

#[test]
fn a_missing_upper_bound_in_a_sweep_says_why_and_is_not_drawn() {
    // At caps of 1e200 to 1e300 per second the capped relaxation overflows double precision
    // (its Newton blocks hold squared one-way fluxes) and Clarabel stops with
    // InsufficientProgress: the upper bound is missing. At 10 to 1000 both the walker's and the
    // photoswitch's are solved (the photoswitch's only by the barrier path: Clarabel refuses
    // it). Each '-' carries its reason in the text, the JSON and the CSV, and the chart's
    // legend names only lines it draws.
    for (model, range, relaxed) in [
        ("problems/photoswitch.toml", "rate-cap=1e200..1e300", false),
        ("problems/photoswitch.toml", "rate-cap=10..1000", true),
        ("problems/walker.toml", "rate-cap=10..1000", true),
    ] {
        let dir = scratch("sweep-missing");
        let args = ["sweep", model, "--over", range, "--points", "2", "-q"];
        let v = crate::common::run_json(&[&args[..], &["--json"]].concat());
        for p in v["points"].as_array().unwrap() {
            assert_eq!(p["relaxation"].is_number(), relaxed, "{model}: {p}");
            assert_eq!(
                p["relaxation_missing"].is_string(),
                !relaxed,
                "{model}: {p}"
            );
        }
        let absolute = root().join(model);
        let mut saving = args.to_vec();
        saving[1] = absolute.to_str().unwrap();
        saving.push("--save");
        let out = crate::common::run_in(&dir, &saving);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let name = std::path::Path::new(model)
            .file_stem()
            .unwrap()
            .to_str()
            .unwrap();
        let folder = dir.join("results").join(name);
        let text = std::fs::read_to_string(folder.join("sweep-rate-cap.txt")).unwrap();
        assert_eq!(
            text.contains("'-' (no upper bound) at "),
            !relaxed,
            "{text}"
        );
        if !relaxed {
            assert!(text.contains("barrier path stopped"), "{text}");
            assert!(text.contains("InsufficientProgress"), "{text}");
        }
        let csv = std::fs::read_to_string(folder.join("sweep-rate-cap.csv")).unwrap();
        let last_column: Vec<&str> = csv
            .lines()
            .skip(1)
            .map(|l| l.rsplit(',').next().unwrap())
            .collect();
        assert!(last_column.iter().all(|c| c.is_empty() == relaxed), "{csv}");
        let svg = std::fs::read_to_string(folder.join("sweep-rate-cap.svg")).unwrap();
        assert_eq!(svg.contains(">upper bound at budget<"), relaxed, "{model}");
    }
}
