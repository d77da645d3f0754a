//! The file layer as untrusted ground (issue 15): oversized and non-regular model files, a full
//! standard error, thread counts and terminal escapes in titles. Every case runs the real
//! binary.

use crate::common::{root, scratch};
use std::path::Path;
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

/// Runs the binary in `dir` with `args`; a run that does not end within a minute is killed and
/// fails the test (it hung).
fn run_in(dir: &Path, args: &[&str]) -> Output {
    run_with(dir, args, Stdio::piped())
}

fn run_with(dir: &Path, args: &[&str], stderr: Stdio) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(stderr)
        .spawn()
        .unwrap();
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > Duration::from_secs(60) {
            let _ = child.kill();
            let _ = child.wait();
            panic!("ergopath {args:?} hung");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn walker() -> String {
    root().join("problems/walker.toml").display().to_string()
}

/// Asserts exit status 2, `phrase` in the message, nothing on standard output.
fn refused(out: &Output, phrase: &str) {
    let err = stderr(out);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains(phrase), "expected '{phrase}' in:\n{err}");
    assert!(out.stdout.is_empty());
}

#[test]
fn oversized_and_non_regular_model_files_are_refused_unread() {
    let dir = scratch("safe-models");
    let fifo = dir.join("fifo.toml");
    assert!(Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap()
        .success());
    let huge = dir.join("huge.toml");
    // Sparse: 65 MB of nothing, refused by its size before a byte is read.
    std::fs::File::create(&huge)
        .unwrap()
        .set_len(65 << 20)
        .unwrap();
    for (path, phrase) in [
        (fifo.to_str().unwrap(), "FIFO"),
        ("/dev/zero", "device"),
        (dir.to_str().unwrap(), "folder"),
        (huge.to_str().unwrap(), "64 MB"),
    ] {
        let started = Instant::now();
        let out = run_in(&dir, &["check", path]);
        refused(&out, phrase);
        assert!(stderr(&out).contains("fix: "));
        assert!(
            started.elapsed() < Duration::from_secs(20),
            "{path} took long"
        );
    }
}

#[test]
fn a_full_or_closed_standard_error_never_panics() {
    let dir = scratch("safe-stderr");
    let full = std::fs::OpenOptions::new()
        .write(true)
        .open("/dev/full")
        .unwrap();
    let out = run_with(&dir, &["check", "missing.toml"], Stdio::from(full));
    assert_eq!(out.status.code(), Some(2));
    // Standard error closed altogether.
    let out = Command::new("bash")
        .arg("-c")
        .arg("exec 2>&-; exec \"$0\" check missing.toml")
        .arg(env!("CARGO_BIN_EXE_ergopath"))
        .current_dir(&dir)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn thread_counts_are_capped_at_the_machine() {
    let dir = scratch("safe-threads");
    let started = Instant::now();
    let out = run_in(&dir, &["design", &walker(), "--threads", "20000", "-q"]);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("note: --threads 20000 is more than"),
        "{}",
        stderr(&out)
    );
    assert!(started.elapsed() < Duration::from_secs(30));
}

#[test]
fn control_characters_never_reach_the_terminal_or_the_report() {
    let dir = scratch("safe-escapes");
    let text = std::fs::read_to_string(walker()).unwrap().replace(
        "title = \"fuel-driven walker under a 2 pN load\"",
        "title = \"walker\\u001b[2J\\u001b]0;owned\\u0007 \\u009b31m\"",
    );
    assert!(text.contains("\\u001b"));
    std::fs::write(dir.join("escapes.toml"), text).unwrap();
    for args in [
        vec!["check", "escapes.toml"],
        vec!["steady", "escapes.toml", "--save"],
        vec!["bound", "escapes.toml"],
    ] {
        let out = run_in(&dir, &args);
        assert!(out.status.success(), "{}", stderr(&out));
        let printed = String::from_utf8(out.stdout).unwrap();
        assert!(printed.contains("walker"), "{printed}");
        assert!(
            !printed.contains(['\u{1b}', '\u{7}', '\u{9b}']),
            "{printed:?}"
        );
    }
    for file in ["report.md", "steady.txt", "steady.csv"] {
        let saved = std::fs::read_to_string(dir.join("results/escapes").join(file)).unwrap();
        assert!(!saved.contains(['\u{1b}', '\u{7}', '\u{9b}']), "{file}");
    }
    // An error naming a file with an escape in its name prints it harmlessly.
    let out = run_in(&dir, &["check", "bad\u{1b}[2J.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(!stderr(&out).contains('\u{1b}'));
}
