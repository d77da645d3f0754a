//! Fluctuations of the work current (methods, section 12) and the simulation that checks them
//! (methods, section 13): exact references, the uncertainty relation, simulated confidence
//! intervals, and the messages for bad `simulate` input.

use crate::common::{load, network_strategy, root, run, run_json};
use ergopath::fluctuation::{self, Figure, Precision, Randomness, Ratio};
use ergopath::model::{Channel, Network};
use ergopath::rng::SplitMix;
use ergopath::steady::SteadySettings;
use proptest::prop_assert;
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

/// The thermodynamic uncertainty relation, Barato and Seifert, Phys. Rev. Lett. 114, 158101
/// (2015): Q = 2 D sigma / J^2 >= 2 for any current of a Markov jump process in steady state;
/// here for the work current of 3000 random networks (proptest, seeded), on both solver paths.
/// Solves whose Q is not determined to 1e-6 (mostly networks whose work labels cancel around
/// every cycle, so J = 0) are skipped; at least 4000 of the 6000 must be checked (measured:
/// 5010).
#[test]
fn uncertainty_product_is_at_least_two() {
    use proptest::test_runner::{Config, TestRunner};
    let mut runner = TestRunner::new(Config {
        cases: 3000,
        rng_seed: crate::common::PROPTEST_SEED,
        ..Config::default()
    });
    let checked = std::cell::Cell::new(0usize);
    runner
        .run(&network_strategy(8), |net| {
            for limit in [400, 0] {
                let pr = precision(&net, limit);
                prop_assert!(pr.diffusion.value >= -pr.diffusion.roundoff, "{pr:?}");
                if let Some(q) = determined(pr.uncertainty_product) {
                    checked.set(checked.get() + 1);
                    prop_assert!(q.value >= 2.0 - q.roundoff, "Q = {q:?}");
                }
            }
            Ok(())
        })
        .unwrap();
    eprintln!(
        "uncertainty relation: {} of 6000 solves had a determined Q",
        checked.get()
    );
    assert!(
        checked.get() >= 4000,
        "only {} of 6000 checked",
        checked.get()
    );
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

/// `simulate --json` on `model` with the given extra arguments.
fn simulate(model: &str, extra: &[&str]) -> Value {
    let mut args = vec!["simulate", model, "--json", "--quiet"];
    args.extend_from_slice(extra);
    run_json(&args)
}

#[test]
fn simulation_agrees_with_the_exact_figures_within_its_intervals() {
    // Source: Gillespie's direct method (D. T. Gillespie, J. Phys. Chem. 81, 2340 (1977)) is an
    // exact sampler of the jump process, so its estimates must cover the exact J and D (99%
    // intervals, methods, section 13; fixed seeds, so the outcome is deterministic). Runs are
    // thousands of the slowest exit times long, so the 1/T bias of the diffusion is negligible.
    let cases = [
        ("problems/walker.toml", "50"),
        ("problems/flicker.toml", "500"),
        ("tests/fixtures/models/random1.toml", "4000"),
        ("tests/fixtures/models/random2.toml", "2000"),
        ("tests/fixtures/models/random5.toml", "2000"),
        ("tests/fixtures/models/random6.toml", "2000"),
        ("tests/fixtures/precision/twostate2.toml", "500"),
    ];
    for (model, time) in cases {
        let out = simulate(model, &["--time", time, "--runs", "400", "--seed", "11"]);
        for figure in ["power", "diffusion"] {
            let f = &out[figure];
            let (low, high, exact) = (
                f["low"].as_f64().unwrap(),
                f["high"].as_f64().unwrap(),
                f["exact"].as_f64().unwrap(),
            );
            assert!(
                low <= exact && exact <= high && f["inside"] == Value::Bool(true),
                "{model} {figure}: exact {exact} outside [{low}, {high}]"
            );
            // The interval is informative: narrower than the figure's own size (D always,
            // J where the power is not tiny against its fluctuations).
            if figure == "diffusion" {
                assert!(high - low < exact, "{model}: [{low}, {high}] for {exact}");
            }
        }
    }
}

#[test]
fn simulation_does_not_depend_on_the_number_of_threads() {
    // Methods, section 13: every run draws from its own stream derived from (seed, index).
    let args = [
        "simulate",
        "problems/walker.toml",
        "--time",
        "5",
        "--runs",
        "50",
        "--seed",
        "3",
        "--json",
        "--quiet",
    ];
    let one = std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .env("RAYON_NUM_THREADS", "1")
        .current_dir(root())
        .output()
        .unwrap();
    let two = std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .env("RAYON_NUM_THREADS", "2")
        .current_dir(root())
        .output()
        .unwrap();
    assert!(one.status.success() && two.status.success());
    assert_eq!(one.stdout, two.stdout);
    let other = simulate(
        "problems/walker.toml",
        &["--time", "5", "--runs", "50", "--seed", "4"],
    );
    let first: Value = serde_json::from_slice(&one.stdout).unwrap();
    assert_ne!(first["power"]["estimate"], other["power"]["estimate"]);
}

#[test]
fn a_saved_design_is_simulated_with_its_pathways() {
    // The design's exact figures in `simulate` are those `design` reported for it.
    let dir = crate::common::scratch("simulate-design");
    let design = run_json(&[
        "design",
        "problems/walker.toml",
        "--max-pathways",
        "1",
        "--rate-cap",
        "1000",
        "--json",
        "--quiet",
    ]);
    let file = dir.join("design.json");
    std::fs::write(&file, design.to_string()).unwrap();
    let out = simulate(
        "problems/walker.toml",
        &[
            "--design",
            file.to_str().unwrap(),
            "--time",
            "50",
            "--runs",
            "300",
            "--seed",
            "5",
        ],
    );
    let best = &design["designs"][0];
    let (power, diffusion) = (
        best["achieved_power"].as_f64().unwrap(),
        best["precision"]["diffusion"].as_f64().unwrap(),
    );
    assert!((out["power"]["exact"].as_f64().unwrap() - power).abs() < 1e-9 * power);
    assert!((out["diffusion"]["exact"].as_f64().unwrap() - diffusion).abs() < 1e-9 * diffusion);
    assert_eq!(out["diffusion"]["inside"], Value::Bool(true));
    assert_eq!(out["power"]["inside"], Value::Bool(true));
}

#[test]
fn max_fano_keeps_only_regular_enough_designs() {
    let args = |limit: &'static str| {
        let mut a = vec![
            "design",
            "problems/walker.toml",
            "--max-pathways",
            "1",
            "--rate-cap",
            "1000",
            "--json",
            "--quiet",
        ];
        if !limit.is_empty() {
            a.extend_from_slice(&["--max-fano", limit]);
        }
        a
    };
    let all = run_json(&args(""));
    let fanos: Vec<f64> = all["designs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| d["precision"]["fano_factor"].as_f64().unwrap())
        .collect();
    let mut sorted = fanos.clone();
    sorted.sort_by(f64::total_cmp);
    let limit = 0.5 * (sorted[sorted.len() / 2 - 1] + sorted[sorted.len() / 2]);
    let text: &'static str = Box::leak(format!("{limit}").into_boxed_str());
    let kept = run_json(&args(text));
    let kept_fanos: Vec<f64> = kept["designs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| d["precision"]["fano_factor"].as_f64().unwrap())
        .collect();
    assert!(kept_fanos.iter().all(|&f| f <= limit));
    assert_eq!(
        kept_fanos.len() + kept["left_out_by_fano"].as_u64().unwrap() as usize,
        fanos.len()
    );
    assert!(!kept_fanos.is_empty() && kept_fanos.len() < fanos.len());
}

/// Runs `args`, expects exit status 2 and returns standard error.
fn refused(args: &[&str]) -> String {
    let out = run(args);
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
    assert!(out.stdout.is_empty(), "{args:?}");
    stderr
}

#[test]
fn bad_design_files_are_refused_with_file_place_and_fix() {
    let dir = crate::common::scratch("simulate-bad-design");
    let good = run_json(&["bound", "problems/walker.toml", "--json"]);
    let write = |name: &str, text: String| {
        let path = dir.join(name);
        std::fs::write(&path, text).unwrap();
        path.to_string_lossy().into_owned()
    };
    let edited = |edit: &dyn Fn(&mut Value)| {
        let mut v = good.clone();
        edit(&mut v);
        v.to_string()
    };
    let cases: Vec<(String, Vec<&str>)> = vec![
        (
            write("broken.json", "{\"units\": ".into()),
            vec!["line 1, column", "not JSON", "fix:"],
        ),
        (
            write(
                "state.json",
                edited(&|v| v["design"]["pathways"][0]["from"] = Value::from("nowhere")),
            ),
            vec!["design.pathways[0].from", "no state 'nowhere'", "fix:"],
        ),
        (
            write(
                "work.json",
                edited(&|v| v["design"]["pathways"][1]["work"] = Value::from(3.0)),
            ),
            vec!["design.pathways[1].work", "local detailed balance", "fix:"],
        ),
        (
            write(
                "rate.json",
                edited(&|v| v["design"]["pathways"][0]["forward"] = Value::from(-1.0)),
            ),
            vec!["design.pathways[0].forward", "positive normal rate", "fix:"],
        ),
        (
            write(
                "unit.json",
                edited(&|v| v["units"]["energy"] = Value::from("kT")),
            ),
            vec!["units.energy", "'kT'", "fix:"],
        ),
        (
            write("other.json", "{\"units\": {\"energy\": \"pN nm\"}}".into()),
            vec!["top level", "neither", "fix:"],
        ),
        (
            dir.to_string_lossy().into_owned(),
            vec!["cannot read the design file", "fix:"],
        ),
    ];
    for (file, phrases) in &cases {
        let stderr = refused(&[
            "simulate",
            "problems/walker.toml",
            "--design",
            file,
            "--time",
            "1",
            "--runs",
            "10",
        ]);
        assert!(stderr.contains(file.as_str()), "{stderr}");
        for phrase in phrases {
            assert!(
                stderr.contains(phrase),
                "{file}: '{phrase}' not in: {stderr}"
            );
        }
    }
    // The unedited file is accepted.
    let fine = write("fine.json", good.to_string());
    simulate(
        "problems/walker.toml",
        &["--design", &fine, "--time", "1", "--runs", "10"],
    );
}

#[test]
fn bad_simulation_flags_are_refused_with_a_fix() {
    for (flags, phrase) in [
        (["--time", "0", "--runs", "10"], "--time 0"),
        (["--time", "nan", "--runs", "10"], "--time NaN"),
        (["--time", "1", "--runs", "1"], "--runs 1"),
        (["--time", "1e12", "--runs", "1000"], "jumps"),
    ] {
        let mut args = vec!["simulate", "problems/walker.toml"];
        args.extend_from_slice(&flags);
        let stderr = refused(&args);
        assert!(
            stderr.contains(phrase) && stderr.contains("give"),
            "{stderr}"
        );
    }
    let stderr = refused(&[
        "design",
        "problems/walker.toml",
        "--max-pathways",
        "1",
        "--max-fano",
        "0",
    ]);
    assert!(
        stderr.contains("--max-fano 0") && stderr.contains("give a positive"),
        "{stderr}"
    );
    let stderr = refused(&[
        "design",
        "problems/walker.toml",
        "--max-pathways",
        "1",
        "--max-fano",
        "20",
        "--shard",
        "0/2",
    ]);
    assert!(stderr.contains("--max-fano and --shard"), "{stderr}");
}

#[test]
fn sweep_charts_power_against_the_fano_factor() {
    let dir = crate::common::scratch("sweep-frontier");
    let model = dir.join("walker.toml");
    std::fs::copy(root().join("problems/walker.toml"), &model).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args([
            "sweep",
            "walker.toml",
            "--over",
            "rate-cap=10..1e4",
            "--points",
            "4",
            "--max-pathways",
            "1",
            "--quiet",
            "--save",
        ])
        .current_dir(&dir)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("Power against precision"), "{stdout}");
    let folder = dir.join("results/walker");
    let svg = std::fs::read_to_string(folder.join("frontier-rate-cap.svg")).unwrap();
    assert!(svg.contains("Fano factor"));
    let json: Value = serde_json::from_str(
        &std::fs::read_to_string(folder.join("frontier-rate-cap.json")).unwrap(),
    )
    .unwrap();
    // Each point's best design carries its precision, the same as `design` would give it.
    let points = json["points"].as_array().unwrap();
    assert_eq!(points.len(), 4);
    for p in points {
        let fano = p["precision"]["fano_factor"].as_f64().unwrap();
        let power = p["best_power"].as_f64().unwrap();
        let d = p["precision"]["diffusion"].as_f64().unwrap();
        assert!((fano - 2.0 * d / power).abs() < 1e-9 * fano, "{p}");
    }
    let manifest = std::fs::read_to_string(folder.join("manifest.json")).unwrap();
    assert!(manifest.contains("frontier-rate-cap"));
}
