//! Interruption and resumption of a long design search: a run stopped part way (as by Ctrl-C)
//! keeps its finished branches in the checkpoint file and exits with status 130; `--resume`
//! then ends with exactly the ranking of an uninterrupted run.

use crate::common::{root, run, scratch};

#[test]
fn interrupted_search_resumes_to_the_same_ranking() {
    let dir = scratch("resume");
    let checkpoint = dir.join("design.checkpoint.json");
    let checkpoint = checkpoint.to_str().unwrap();
    let model = root().join("problems/ring6.toml");
    let model = model.to_str().unwrap();
    let common = [
        "design",
        model,
        "--max-pathways",
        "3",
        "--rate-cap",
        "10",
        "--top",
        "8",
        "--json",
        "-q",
    ];
    let whole = run(&common);
    assert!(whole.status.success());

    let stopped = run(&[
        &common[..],
        &["--checkpoint", checkpoint, "--stop-after-branches", "4"],
    ]
    .concat());
    assert_eq!(
        stopped.status.code(),
        Some(130),
        "{}",
        String::from_utf8_lossy(&stopped.stderr)
    );
    let err = String::from_utf8_lossy(&stopped.stderr);
    assert!(
        err.contains("--resume") && err.contains("branches finished"),
        "{err}"
    );
    assert!(stopped.stdout.is_empty());
    let kept: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(checkpoint).unwrap()).unwrap();
    let finished = kept["finished"].as_array().unwrap().len();
    assert!((4..14).contains(&finished), "{finished} branches kept");

    let resumed = run(&[&common[..], &["--checkpoint", checkpoint, "--resume"]].concat());
    assert!(
        resumed.status.success(),
        "{}",
        String::from_utf8_lossy(&resumed.stderr)
    );
    assert_eq!(
        String::from_utf8_lossy(&whole.stdout),
        String::from_utf8_lossy(&resumed.stdout)
    );

    // A checkpoint of another search is refused.
    let other = run(&[
        "design",
        model,
        "--max-pathways",
        "2",
        "--rate-cap",
        "10",
        "--checkpoint",
        checkpoint,
        "--resume",
        "-q",
    ]);
    assert_eq!(other.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&other.stderr).contains("another model or other search settings")
    );
}

#[test]
fn interrupted_sweep_resumes_to_the_same_table() {
    let dir = scratch("resume-sweep");
    let checkpoint = dir.join("sweep.checkpoint.json");
    let checkpoint = checkpoint.to_str().unwrap();
    let model = root().join("problems/walker.toml");
    let model = model.to_str().unwrap();
    let common = [
        "sweep",
        model,
        "--over",
        "rate-cap=1..1e4",
        "--points",
        "5",
        "--json",
        "-q",
    ];
    let whole = run(&common);
    assert!(whole.status.success());
    let stopped = run(&[
        &common[..],
        &["--checkpoint", checkpoint, "--stop-after-points", "2"],
    ]
    .concat());
    assert_eq!(stopped.status.code(), Some(130));
    assert!(String::from_utf8_lossy(&stopped.stderr).contains("2 of 5 budget points finished"));
    let resumed = run(&[&common[..], &["--checkpoint", checkpoint, "--resume"]].concat());
    assert!(
        resumed.status.success(),
        "{}",
        String::from_utf8_lossy(&resumed.stderr)
    );
    assert_eq!(
        String::from_utf8_lossy(&whole.stdout),
        String::from_utf8_lossy(&resumed.stdout)
    );
}
