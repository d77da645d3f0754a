//! Helpers shared by the integration tests: paths, model loading, running the binary.

use ergopath::model::{Channel, Model, Network};
use proptest::prelude::*;
use std::path::{Path, PathBuf};
use std::process::Output;

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub fn load(relative: &str) -> Model {
    Model::load(&root().join(relative)).unwrap_or_else(|e| panic!("{relative}: {e}"))
}

pub fn parse(text: &str) -> Model {
    Model::parse(text, Path::new("inline.toml")).unwrap_or_else(|e| panic!("{e}"))
}

/// Runs the `ergopath` binary with `args` from `dir` (where `--save` writes `results/`).
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

/// Stationary distribution of `net` by a dense nalgebra LU solve of the generator with its last
/// row replaced by the normalisation `sum p = 1`: an independent reference that shares no code
/// with the tool's GTH and sparse solvers.
pub fn dense_stationary(net: &Network) -> Vec<f64> {
    let n = net.len();
    let mut m = nalgebra::DMatrix::<f64>::zeros(n, n);
    for c in &net.channels {
        m[(c.to, c.from)] += c.forward;
        m[(c.from, c.from)] -= c.forward;
        m[(c.from, c.to)] += c.backward;
        m[(c.to, c.to)] -= c.backward;
    }
    for j in 0..n {
        m[(n - 1, j)] = 1.0;
    }
    let mut rhs = nalgebra::DVector::<f64>::zeros(n);
    rhs[n - 1] = 1.0;
    m.lu()
        .solve(&rhs)
        .expect("irreducible")
        .iter()
        .copied()
        .collect()
}

/// Runs the `ergopath` binary with `args` from the repository root.
pub fn run(args: &[&str]) -> Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(root())
        .output()
        .expect("the ergopath binary runs")
}

/// Runs the binary with `args`, asserts that it succeeded, and parses its `--json` output.
/// Arguments of `regimes` over the stored parameter scale from 0.01 to 1000, as JSON.
pub fn stored_scale_regimes<'a>(model: &'a str, points: &'a str) -> [&'a str; 11] {
    [
        "regimes", model, "--scale", "stored", "--from", "0.01", "--to", "1000", "--points",
        points, "--json",
    ]
}

pub fn run_json(args: &[&str]) -> serde_json::Value {
    let out = run(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| panic!("{args:?}: {e}"))
}

/// A fresh scratch folder under the system temporary folder.
pub fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("ergopath-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// `|a - b| <= rel * max(|a|, |b|) + abs`.
pub fn close(a: f64, b: f64, rel: f64, abs: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()) + abs
}

/// The files of a repository directory (not its subdirectories), sorted by path.
pub fn files_in(dir: &str) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(root().join(dir))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_file())
        .collect();
    files.sort();
    files
}

/// Every example model and every random fixture model, as repository-relative paths.
pub fn all_models() -> Vec<String> {
    let mut out = Vec::new();
    for dir in ["problems", "tests/fixtures/models"] {
        let mut here: Vec<String> = std::fs::read_dir(root().join(dir))
            .unwrap()
            .filter_map(|e| {
                let p = e.unwrap().path();
                (p.extension()? == "toml")
                    .then(|| format!("{dir}/{}", p.file_name().unwrap().to_string_lossy()))
            })
            .collect();
        here.sort();
        out.extend(here);
    }
    out
}

/// A random irreducible network of 3 to `max` states: ring plus chords, energies within +-10 kT,
/// rates 1e-3..1e3, drives and work labels of a few kT.
pub fn network_strategy(max: usize) -> impl Strategy<Value = Network> {
    (3usize..=max).prop_flat_map(|n| {
        let energies = prop::collection::vec(-10.0f64..10.0, n);
        let edges = prop::collection::vec(
            (0..n, 0..n, -3.0f64..3.0, -3.0f64..3.0, -3.0f64..3.0),
            n..2 * n + 1,
        );
        (energies, edges).prop_map(move |(energies, edges)| {
            let mut channels = Vec::new();
            let mut push = |from: usize, to: usize, log_rate: f64, drive: f64, work: f64| {
                channels.push(Channel::balanced(
                    &energies,
                    from,
                    to,
                    10f64.powf(log_rate),
                    work,
                    drive,
                ));
            };
            for (i, &(_, _, lr, d, w)) in edges.iter().enumerate().take(n) {
                push(i, (i + 1) % n, lr, d, w); // the ring keeps it irreducible
            }
            for &(a, b, lr, d, w) in edges.iter().skip(n) {
                if a != b {
                    push(a, b, lr, d, w);
                }
            }
            Network {
                energies: energies.clone(),
                channels,
            }
        })
    })
}

/// The certified bound of `net`, or `None` when the solver reports that round-off, not the
/// optimisation, decides it (an honest refusal: property tests reject such cases, and
/// proptest fails a test that rejects too many).
pub fn certified_bound(
    net: &Network,
    settings: &ergopath::bound::BoundSettings,
) -> Option<ergopath::bound::Bound> {
    match ergopath::bound::solve(net, &ergopath::model::PairSelection::All, settings) {
        Ok(b) => Some(b),
        Err(ergopath::steady::SolveError::NotDetermined(_)) => None,
        Err(e) => panic!("{e}"),
    }
}

/// Seed of every property test: CI replays the same cases on every run, so a red CI is a real
/// regression, never an unlucky draw. To explore other cases, change it locally (or run with
/// a different value) and keep any failure proptest records in `tests/proptest-regressions/`.
pub const PROPTEST_SEED: proptest::test_runner::RngSeed =
    proptest::test_runner::RngSeed::Fixed(20_261_203);

/// One design of `tests/fixtures/designs/<model>.json`: where the demo saved it, its pathways
/// (from, to, forward, backward) and its power at 50 digits (model unit) from
/// `scripts/reference.py`'s `design_power_mp`.
pub struct ReferenceDesign {
    pub source: String,
    pub pathways: Vec<(String, String, f64, f64)>,
    pub power: f64,
}

/// The 50-digit design references of a shipped model (`stem`: `walker`, `ring6`, ...).
pub fn design_references(stem: &str) -> Vec<ReferenceDesign> {
    let path = root().join(format!("tests/fixtures/designs/{stem}.json"));
    let fixture: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    fixture["designs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|case| ReferenceDesign {
            source: case["source"].as_str().unwrap().to_string(),
            pathways: pathways_of(case),
            power: case["power_model_unit"].as_str().unwrap().parse().unwrap(),
        })
        .collect()
}

/// The pathways of a design as the tool's JSON (or a fixture) writes them.
pub fn pathways_of(design: &serde_json::Value) -> Vec<(String, String, f64, f64)> {
    design["pathways"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| {
            (
                w["from"].as_str().unwrap().to_string(),
                w["to"].as_str().unwrap().to_string(),
                w["forward"].as_f64().unwrap(),
                w["backward"].as_f64().unwrap(),
            )
        })
        .collect()
}

/// Asserts that `design` (the tool's JSON: pathways, and its power `power`) is the reference
/// design saved as `source`, and that its power matches the 50-digit value. The design
/// powers are measured within 4.1e-16 relative of the reference
/// (`tests/all/bound_reference.rs`); 1e-12 is the margin kept there. A different design
/// means the committed results are stale: `bash scripts/demo.sh`, then
/// `python scripts/reference.py`.
pub fn assert_reference_design(
    references: &[ReferenceDesign],
    source: &str,
    design: &serde_json::Value,
    power: f64,
) {
    let reference = references
        .iter()
        .find(|r| r.source == source)
        .unwrap_or_else(|| panic!("no reference design {source}"));
    let ours = pathways_of(design);
    assert_eq!(ours.len(), reference.pathways.len(), "{source}");
    for (a, b) in ours.iter().zip(&reference.pathways) {
        assert!(
            a.0 == b.0 && a.1 == b.1 && close(a.2, b.2, 1e-12, 0.0) && close(a.3, b.3, 1e-12, 0.0),
            "{source}: pathway {a:?} is not the reference's {b:?} (results stale? run \
             scripts/demo.sh, then scripts/reference.py)"
        );
    }
    assert!(
        close(power, reference.power, 1e-12, 0.0),
        "{source}: power {power} vs the 50-digit {}",
        reference.power
    );
}
