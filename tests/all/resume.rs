//! Interruption and resumption of long runs: a `design`, `sweep` or `uncertainty` stopped part
//! way (as by Ctrl-C) keeps its finished work in the checkpoint file and exits with status 130;
//! `--resume` then ends with exactly the output of an uninterrupted run (for `uncertainty` also
//! on more samples than the stopped run had), and an edited checkpoint is refused. The resumed
//! designs are also checked against their 50-digit powers (`tests/fixtures/designs/`, from
//! `scripts/reference.py`): a resume that reproduced a wrong run would still fail there.

use crate::common::{assert_reference_design, root, run, scratch};

/// Runs `args` whole, then stopped by the hidden `stop_flag`, then resumed; asserts status 130
/// with `phrase` in the message, byte-identical output of the whole and the resumed run, and
/// that the same checkpoint is refused to the different search `other`. Returns the
/// checkpoint's JSON and the resumed run's JSON output for further checks.
fn stop_and_resume(
    name: &str,
    args: &[&str],
    other: &[&str],
    stop_flag: &str,
    phrase: &str,
) -> (serde_json::Value, serde_json::Value) {
    let dir = scratch(name);
    let checkpoint = dir.join("checkpoint.json");
    let checkpoint = checkpoint.to_str().unwrap();
    let whole = run(args);
    assert!(whole.status.success());
    let stopped = run(&[args, &["--checkpoint", checkpoint, stop_flag]].concat());
    let err = String::from_utf8_lossy(&stopped.stderr);
    assert_eq!(stopped.status.code(), Some(130), "{err}");
    assert!(err.contains("--resume") && err.contains(phrase), "{err}");
    assert!(stopped.stdout.is_empty());
    let kept = serde_json::from_str(&std::fs::read_to_string(checkpoint).unwrap()).unwrap();
    let resumed = run(&[args, &["--checkpoint", checkpoint, "--resume"]].concat());
    assert!(
        resumed.status.success(),
        "{}",
        String::from_utf8_lossy(&resumed.stderr)
    );
    assert_eq!(
        String::from_utf8_lossy(&whole.stdout),
        String::from_utf8_lossy(&resumed.stdout)
    );
    // A checkpoint of another search (the `other` arguments) is refused.
    let other = run(&[other, &["--checkpoint", checkpoint, "--resume", "-q"]].concat());
    assert_eq!(other.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&other.stderr).contains("another model or other search settings")
    );
    (kept, serde_json::from_slice(&resumed.stdout).unwrap())
}

#[test]
fn interrupted_search_resumes_to_the_same_ranking() {
    let model = root().join("problems/ring6.toml");
    let args = [
        "design",
        model.to_str().unwrap(),
        "--max-pathways",
        "3",
        "--rate-cap",
        "10",
        "--top",
        "8",
        "--json",
        "-q",
    ];
    let other = ["design", args[1], "--max-pathways", "2", "--rate-cap", "10"];
    // The model's own [pathways] budget (3 pathways, cap 10, total 100), as the demo's saved
    // ranking has it: its first 8 designs have 50-digit references.
    let (kept, resumed) = stop_and_resume(
        "resume",
        &args,
        &other,
        "--stop-after-branches=4",
        "branches finished",
    );
    let finished = kept["finished"].as_array().unwrap().len();
    assert!((4..14).contains(&finished), "{finished} branches kept");
    let references = crate::common::design_references("ring6");
    let designs = resumed["designs"].as_array().unwrap();
    assert_eq!(designs.len(), 8);
    for d in designs {
        let source = format!("design.json rank {}", d["rank"]);
        assert_reference_design(
            &references,
            &source,
            d,
            d["achieved_power"].as_f64().unwrap(),
        );
    }
}

#[test]
fn interrupted_sweep_resumes_to_the_same_table() {
    let model = root().join("problems/walker.toml");
    let args = [
        "sweep",
        model.to_str().unwrap(),
        "--over",
        "rate-cap=1..1e4",
        "--points",
        "5",
        "--json",
        "-q",
    ];
    let other = [
        "sweep",
        args[1],
        "--over",
        "rate-cap=1..1e3",
        "--points",
        "5",
    ];
    // Caps 1, 10, ..., 1e4: points of the demo's saved sweep (1 to 1e6, 13 points), whose best
    // designs have 50-digit references.
    let (kept, resumed) = stop_and_resume(
        "resume-sweep",
        &args,
        &other,
        "--stop-after-points=2",
        "2 of 5 budget points finished",
    );
    assert_eq!(kept["done"].as_array().unwrap().len(), 2);
    let references = crate::common::design_references("walker");
    for (i, point) in resumed["points"].as_array().unwrap().iter().enumerate() {
        let source = format!("sweep-rate-cap.json point {}", 2 * i);
        assert_reference_design(
            &references,
            &source,
            point,
            point["best_power"].as_f64().unwrap(),
        );
    }
}

#[test]
fn interrupted_uncertainty_resumes_to_the_same_quantiles() {
    let model = root().join("problems/walker.toml");
    let model = model.to_str().unwrap();
    let run_of = |samples: &str| {
        [
            "uncertainty",
            model,
            "--samples",
            samples,
            "--seed",
            "3",
            "--json",
            "-q",
        ]
        .map(String::from)
    };
    let args = run_of("400");
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let other = ["uncertainty", model, "--samples", "400", "--seed", "4"];
    let (kept, _) = stop_and_resume(
        "resume-uncertainty",
        &args,
        &other,
        "--stop-after-samples=50",
        "samples solved and kept",
    );
    // Samples in flight when the stop came are kept too: at most one per thread beyond 50.
    let solved = kept["solved"].as_array().unwrap().len();
    assert!((50..=50 + 64).contains(&solved), "{solved} samples kept");

    // The finished checkpoint holds all 400 samples; a run of 600 continues it and equals a
    // whole run of 600 (sample i depends only on the seed and i).
    let dir = crate::common::scratch("resume-uncertainty-grow");
    let checkpoint = dir.join("checkpoint.json");
    let checkpoint = checkpoint.to_str().unwrap();
    let with_file = |extra: &[&str], samples: &str| {
        let base = run_of(samples);
        let base: Vec<&str> = base.iter().map(String::as_str).collect();
        run(&[&base[..], &["--checkpoint", checkpoint], extra].concat())
    };
    assert!(with_file(&[], "400").status.success());
    let grown = with_file(&["--resume"], "600");
    let whole = run(&run_of("600").each_ref().map(String::as_str));
    assert!(grown.status.success());
    assert_eq!(grown.stdout, whole.stdout);
    let text = std::fs::read_to_string(checkpoint).unwrap();
    let file: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(file["solved"].as_array().unwrap().len(), 600);

    // A kept value edited (and the digest recomputed, as a deliberate edit would) is caught
    // by re-solving: the first solved sample is always among those re-solved.
    let mut edited = file.clone();
    let first = edited["solved"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|s| s["status"] == "solved")
        .unwrap();
    let bound = first["bound"].as_f64().unwrap();
    let headroom = first["headroom"].as_f64().unwrap();
    first["bound"] = serde_json::json!(bound * 1.01);
    first["headroom"] = serde_json::json!(headroom + bound * 0.01);
    let index = first["index"].as_u64().unwrap();
    let mut content = edited;
    content.as_object_mut().unwrap().remove("digest");
    ergopath::commands::files::seal(&mut content).unwrap();
    std::fs::write(checkpoint, content.to_string()).unwrap();
    let refused = with_file(&["--resume"], "600");
    let err = String::from_utf8_lossy(&refused.stderr);
    assert_eq!(refused.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&format!("its sample {index} states")) && err.contains("solving it again"),
        "{err}"
    );
    assert!(refused.stdout.is_empty());

    // A damaged file (digest no longer matching) is refused before any work.
    std::fs::write(checkpoint, text.replacen("\"seed\": 3", "\"seed\": 5", 1)).unwrap();
    let damaged = with_file(&["--resume"], "600");
    let err = String::from_utf8_lossy(&damaged.stderr);
    assert_eq!(damaged.status.code(), Some(2), "{err}");
    assert!(err.contains("integrity digest"), "{err}");
}
