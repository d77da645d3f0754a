//! The bad-input corpus (`tests/corpus/`): every file must be refused by every command that
//! reads a model, with exit status 2, a message naming the file and the fix, nothing on
//! standard output, nothing written, within a time limit. Two hostile inputs are generated
//! here rather than committed: a 50 MB file and a million states without transitions.

use crate::common::scratch;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Runs the binary in `dir` with a time limit; returns (status, stdout, stderr).
fn run_limited(dir: &Path, args: &[&str], limit: Duration) -> (Option<i32>, String, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > limit {
            child.kill().unwrap();
            panic!("{args:?} ran over {limit:?}: a hang");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
    let out = child.wait_with_output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Every command that reads a model refuses `path` as bad input, naming it and the fix.
fn refused(path: &Path, phrase: &str, limit: Duration) {
    let dir = scratch(&format!(
        "corpus-{}",
        path.file_stem().unwrap().to_string_lossy()
    ));
    let file = path.to_str().unwrap();
    let commands: [&[&str]; 6] = [
        &["check", file],
        &["draw", file, "--of", "design", "--save"],
        &["steady", file, "--save"],
        &["bound", file, "--save"],
        &["design", file, "--rate-cap", "10", "--save", "-q"],
        &["regimes", file, "--scale", "stored", "--save"],
    ];
    for args in commands {
        let (status, stdout, stderr) = run_limited(&dir, args, limit);
        let name = path.file_name().unwrap().to_string_lossy();
        assert_eq!(status, Some(2), "{args:?}: {stderr}");
        assert!(stdout.is_empty(), "{args:?} printed: {stdout}");
        assert!(
            stderr.contains(&*name),
            "{args:?}: the message does not name the file:\n{stderr}"
        );
        assert!(stderr.contains("fix: "), "{args:?}: no fix in:\n{stderr}");
        assert!(
            stderr.contains(phrase),
            "{args:?}: expected '{phrase}' in:\n{stderr}"
        );
        assert!(!stderr.contains("panicked"), "{args:?}: {stderr}");
    }
    let written: Vec<_> = std::fs::read_dir(&dir).unwrap().collect();
    assert!(written.is_empty(), "{}: files were written", path.display());
    std::fs::remove_dir_all(dir).unwrap();
}

/// The expected phrase from the file's first line `# expect: ...` (binary files: UTF-8; the
/// empty file: "empty").
fn expectation(path: &Path) -> String {
    let bytes = std::fs::read(path).unwrap();
    match String::from_utf8(bytes) {
        Ok(text) if text.is_empty() => "the file is empty".to_string(),
        Ok(text) => text
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# expect: "))
            .unwrap_or_else(|| {
                panic!(
                    "{}: first line must be '# expect: <phrase>'",
                    path.display()
                )
            })
            .to_string(),
        Err(_) => "UTF-8".to_string(),
    }
}

#[test]
fn every_corpus_file_is_refused_cleanly() {
    let files = crate::common::files_in("tests/corpus");
    assert!(
        files.len() >= 40,
        "the corpus has only {} files",
        files.len()
    );
    for path in files {
        refused(&path, &expectation(&path), Duration::from_secs(20));
    }
}

#[test]
fn a_50_megabyte_file_is_refused_at_its_last_line() {
    let dir = scratch("corpus-big");
    let path = dir.join("fifty_megabytes.toml");
    let mut text = String::from("[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n");
    let filler = "# ".to_string() + &"x".repeat(98) + "\n";
    while text.len() < 50_000_000 {
        text.push_str(&filler);
    }
    text.push_str("[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\nbackward = oops\n");
    std::fs::write(&path, &text).unwrap();
    let lines = text.lines().count();
    let (status, stdout, stderr) = run_limited(
        &dir,
        &["check", path.to_str().unwrap()],
        Duration::from_secs(60),
    );
    assert_eq!(status, Some(2), "{stderr}");
    assert!(stdout.is_empty());
    assert!(
        stderr.contains(&format!(":{lines}:")) && stderr.contains("fix: "),
        "{stderr}"
    );
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn a_million_states_without_transitions_are_refused() {
    let dir = scratch("corpus-million");
    let path = dir.join("million.toml");
    let mut text = String::with_capacity(30_000_000);
    for i in 0..1_000_000 {
        text.push_str(&format!("[[state]]\nname = \"s{i}\"\n"));
    }
    std::fs::write(&path, &text).unwrap();
    let (status, stdout, stderr) = run_limited(
        &dir,
        &["check", path.to_str().unwrap()],
        Duration::from_secs(120),
    );
    assert_eq!(status, Some(2), "{stderr}");
    assert!(stdout.is_empty());
    assert!(
        stderr.contains("no [[transition]]") && stderr.contains("fix: "),
        "{stderr}"
    );
    std::fs::remove_dir_all(dir).unwrap();
}
