//! Interruption and resumption of long runs: a `design` or `sweep` stopped part way (as by
//! Ctrl-C) keeps its finished work in the checkpoint file and exits with status 130; `--resume`
//! then ends with exactly the output of an uninterrupted run.

use crate::common::{root, run, scratch};

/// Runs `args` whole, then stopped by the hidden `stop_flag`, then resumed; asserts status 130
/// with `phrase` in the message, byte-identical output of the whole and the resumed run, and
/// that the same checkpoint is refused to the different search `other`. Returns the
/// checkpoint's JSON for further checks.
fn stop_and_resume(
    name: &str,
    args: &[&str],
    other: &[&str],
    stop_flag: &str,
    phrase: &str,
) -> serde_json::Value {
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
    kept
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
    let kept = stop_and_resume(
        "resume",
        &args,
        &other,
        "--stop-after-branches=4",
        "branches finished",
    );
    let finished = kept["finished"].as_array().unwrap().len();
    assert!((4..14).contains(&finished), "{finished} branches kept");
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
    let kept = stop_and_resume(
        "resume-sweep",
        &args,
        &other,
        "--stop-after-points=2",
        "2 of 5 budget points finished",
    );
    assert_eq!(kept["done"].as_array().unwrap().len(), 2);
}
