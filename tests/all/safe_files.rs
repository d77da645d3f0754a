//! The file layer as untrusted ground (issue 15): names derived from model files, planted links
//! and FIFOs in the results folder, guessable temporary names, failed checkpoint writes, edited
//! part files and checkpoints, oversized and non-regular model files, a full standard error,
//! terminal escapes in titles and concurrent saves. Every case runs the real binary.

use crate::common::{root, scratch};
use std::os::unix::fs::symlink;
use std::path::{Path, PathBuf};
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

fn names_in(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

#[test]
fn names_from_model_files_are_made_safe() {
    let dir = scratch("safe-names");
    let model = std::fs::read_to_string(walker()).unwrap();
    // `...toml` has the stem `..`: its results must not land in the working folder.
    std::fs::write(dir.join("...toml"), &model).unwrap();
    std::fs::write(dir.join("planted.txt"), "not a report").unwrap();
    let out = run_in(&dir, &["steady", "...toml", "--save"]);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(dir.join("results/model/steady.txt").is_file());
    assert_eq!(names_in(&dir), ["...toml", "planted.txt", "results"]);
    assert_eq!(names_in(&dir.join("results")), ["model"]);
    let report = std::fs::read_to_string(dir.join("results/model/report.md")).unwrap();
    assert!(!report.contains("planted"), "{report}");
    // A model named like a shared folder gets a folder of its own.
    std::fs::write(dir.join("compare.toml"), &model).unwrap();
    let out = run_in(&dir, &["steady", "compare.toml", "--save"]);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(dir.join("results/compare-model/steady.txt").is_file());
    assert!(!dir.join("results/compare").exists());
}

#[test]
fn results_folders_are_never_followed_through_a_link() {
    let dir = scratch("safe-links");
    let elsewhere = dir.join("elsewhere");
    std::fs::create_dir_all(&elsewhere).unwrap();
    std::fs::create_dir(dir.join("results")).unwrap();
    symlink(&elsewhere, dir.join("results/walker")).unwrap();
    let out = run_in(&dir, &["steady", &walker(), "--save"]);
    refused(&out, "symbolic link");
    assert!(stderr(&out).contains("results/walker"));
    assert!(names_in(&elsewhere).is_empty());
    // The same for the results folder itself.
    std::fs::remove_file(dir.join("results/walker")).unwrap();
    std::fs::remove_dir(dir.join("results")).unwrap();
    symlink(&elsewhere, dir.join("results")).unwrap();
    for args in [
        vec!["bound", &walker(), "--save"],
        vec!["design", &walker(), "--shard", "0/2", "--save", "-q"],
    ] {
        let out = run_in(&dir, &args);
        refused(&out, "symbolic link");
        assert!(names_in(&elsewhere).is_empty());
    }
}

#[test]
fn planted_links_at_temporary_names_are_never_followed() {
    let dir = scratch("safe-temporary");
    let folder = dir.join("results/walker");
    std::fs::create_dir_all(&folder).unwrap();
    let victim = dir.join("victim.txt");
    std::fs::write(&victim, "precious").unwrap();
    // The names `.NAME.<pid>.tmp` of the next few hundred process ids, each a link to the
    // victim: a writer that opens a guessable name through a link overwrites it.
    let last: u32 = std::fs::read_to_string("/proc/sys/kernel/ns_last_pid")
        .ok()
        .and_then(|t| t.trim().parse().ok())
        .unwrap_or(std::process::id());
    for pid in last + 1..last + 400 {
        for name in ["steady.txt", "steady.json", "steady.csv", "report.md"] {
            let _ = symlink(&victim, folder.join(format!(".{name}.{pid}.tmp")));
        }
    }
    // A temporary file of a result set that a killed run left behind is cleaned up.
    std::fs::write(folder.join(".ergopath-set-AbC123.tmp"), "stale").unwrap();
    let planted = names_in(&folder).len() - 1;
    let out = run_in(&dir, &["steady", &walker(), "--save"]);
    assert!(out.status.success(), "{}", stderr(&out));
    assert_eq!(std::fs::read_to_string(&victim).unwrap(), "precious");
    // Exactly the report's files (text, JSON, the transitions CSV and the network diagram),
    // its two further tables (steady-states.csv, steady-cycles.csv), report.md, report.html and
    // the manifest were added, no temporary file.
    assert_eq!(names_in(&folder).len(), planted + 9);
    assert!(!folder.join(".ergopath-set-AbC123.tmp").exists());
    assert!(folder.join("manifest.json").is_file());
}

#[test]
fn report_is_built_from_the_manifest_only() {
    let dir = scratch("safe-report");
    let folder = dir.join("results/walker");
    std::fs::create_dir_all(&folder).unwrap();
    let secret = dir.join("secret");
    std::fs::write(&secret, "SECRET CONTENT").unwrap();
    symlink(&secret, folder.join("stolen.txt")).unwrap();
    let made = Command::new("mkfifo")
        .arg(folder.join("blocking.txt"))
        .status()
        .unwrap();
    assert!(made.success());
    std::fs::write(folder.join("planted.txt"), "PLANTED").unwrap();
    let out = run_in(&dir, &["steady", &walker(), "--save"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let out = run_in(&dir, &["bound", &walker(), "--save"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let report = std::fs::read_to_string(folder.join("report.md")).unwrap();
    assert!(report.contains("## steady") && report.contains("## bound"));
    for foreign in ["SECRET", "PLANTED", "stolen", "blocking", "planted"] {
        assert!(!report.contains(foreign), "{foreign} in:\n{report}");
    }
    // A listed report replaced by a link or a FIFO is left out, never read.
    std::fs::remove_file(folder.join("steady.txt")).unwrap();
    symlink(&secret, folder.join("steady.txt")).unwrap();
    std::fs::remove_file(folder.join("bound.txt")).unwrap();
    let made = Command::new("mkfifo")
        .arg(folder.join("bound.txt"))
        .status()
        .unwrap();
    assert!(made.success());
    let out = run_in(
        &dir,
        &[
            "sweep",
            &walker(),
            "--over",
            "rate-cap=1..10",
            "--points",
            "2",
            "--save",
            "-q",
        ],
    );
    assert!(out.status.success(), "{}", stderr(&out));
    let report = std::fs::read_to_string(folder.join("report.md")).unwrap();
    assert!(report.contains("## sweep-rate-cap"), "{report}");
    assert!(
        !report.contains("SECRET") && !report.contains("## bound"),
        "{report}"
    );
    // A manifest that is not this tool's is refused, with the fix.
    std::fs::write(
        folder.join("manifest.json"),
        r#"{"format":"ergopath-results/1","reports":{"../x":["../x.txt"]}}"#,
    )
    .unwrap();
    let out = run_in(&dir, &["steady", &walker(), "--save"]);
    refused(&out, "manifest.json");
    assert!(stderr(&out).contains("fix: remove it"));
}

#[test]
fn committed_reports_are_rebuilt_exactly_from_their_manifests() {
    use ergopath::report::output::{read_back, Manifest};
    let mut checked = 0;
    for entry in std::fs::read_dir(root().join("results")).unwrap() {
        let dir = entry.unwrap().path();
        let Ok(committed) = std::fs::read_to_string(dir.join("report.md")) else {
            continue;
        };
        let manifest = Manifest::read(&dir).unwrap();
        let title = committed
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# Results: "))
            .unwrap();
        let rebuilt = ergopath::report::summary::report_markdown(title, &manifest, &mut |stem| {
            read_back(&dir.join(format!("{stem}.txt")))
        })
        .unwrap();
        assert_eq!(rebuilt, committed, "{}", dir.display());
        for files in manifest.reports.values() {
            for file in files {
                assert!(dir.join(file).is_file(), "{}: {file}", dir.display());
            }
        }
        checked += 1;
    }
    assert!(checked >= 5);
}

#[test]
fn concurrent_saves_never_interleave_their_files() {
    let dir = scratch("safe-concurrent");
    let targets = ["0.5", "0.6", "0.7", "0.8", "0.9", "0.95"];
    // What each run prints as JSON is what it must save as JSON.
    let expected: Vec<String> = targets
        .iter()
        .map(|t| {
            let out = run_in(&dir, &["bound", &walker(), "--target", t, "--json"]);
            String::from_utf8(out.stdout).unwrap()
        })
        .collect();
    for _ in 0..20 {
        let children: Vec<_> = targets
            .iter()
            .map(|t| {
                Command::new(env!("CARGO_BIN_EXE_ergopath"))
                    .args(["bound", &walker(), "--target", t, "--save"])
                    .current_dir(&dir)
                    .stdout(Stdio::piped())
                    .stderr(Stdio::piped())
                    .spawn()
                    .unwrap()
            })
            .collect();
        let texts: Vec<String> = children
            .into_iter()
            .map(|c| {
                let out = c.wait_with_output().unwrap();
                assert!(out.status.success(), "{}", stderr(&out));
                let text = String::from_utf8(out.stdout).unwrap();
                text[..text.find("\n  saved: ").unwrap()].to_string()
            })
            .collect();
        let folder = dir.join("results/walker");
        let json = std::fs::read_to_string(folder.join("bound.json")).unwrap();
        let text = std::fs::read_to_string(folder.join("bound.txt")).unwrap();
        let which = expected.iter().position(|e| *e == json).unwrap();
        assert_eq!(
            text, texts[which],
            "bound.txt and bound.json of different runs"
        );
        let report = std::fs::read_to_string(folder.join("report.md")).unwrap();
        assert!(report.contains(text.trim_end()));
        let stray: Vec<String> = names_in(&folder)
            .into_iter()
            .filter(|n| n.ends_with(".tmp"))
            .collect();
        assert!(stray.is_empty(), "{stray:?}");
    }
}

/// Runs the binary under a file-size limit of `kib` KiB (writes beyond it fail with EFBIG, the
/// signal that would kill the process ignored): a disk that fills up.
fn run_limited(dir: &Path, kib: u32, args: &[&str]) -> Output {
    let script = format!("trap '' XFSZ; ulimit -f {kib}; exec \"$0\" \"$@\"");
    Command::new("bash")
        .arg("-c")
        .arg(script)
        .arg(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

fn ring6() -> String {
    root().join("problems/ring6.toml").display().to_string()
}

const RING6_SEARCH: [&str; 7] = [
    "--max-pathways",
    "3",
    "--rate-cap",
    "10",
    "--top",
    "8",
    "-q",
];

#[test]
fn a_checkpoint_that_cannot_be_written_fails_the_run() {
    let dir = scratch("safe-checkpoint-full");
    let ring6 = ring6();
    let args = [
        &["design", ring6.as_str()][..],
        &RING6_SEARCH,
        &["--checkpoint", "ck.json"],
    ]
    .concat();
    let out = run_limited(&dir, 8, &args);
    let err = stderr(&out);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("cannot write") && err.contains("ck.json"),
        "{err}"
    );
    assert!(out.stdout.is_empty());
    // The message says what the file really holds.
    let kept: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("ck.json")).unwrap()).unwrap();
    let on_disk = kept["finished"].as_array().unwrap().len();
    assert!(
        err.contains(&format!("holds {on_disk} finished branch")),
        "{on_disk} on disk:\n{err}"
    );
    let stray: Vec<String> = names_in(&dir)
        .into_iter()
        .filter(|n| n != "ck.json")
        .collect();
    assert!(stray.is_empty(), "{stray:?}");
    // Stopped on purpose, the message counts the branches in the file.
    let out = run_in(&dir, &[&args[..], &["--stop-after-branches=3"]].concat());
    assert_eq!(out.status.code(), Some(130));
    let kept: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("ck.json")).unwrap()).unwrap();
    let on_disk = kept["finished"].as_array().unwrap().len();
    assert!(
        stderr(&out).contains(&format!("interrupted: {on_disk} of ")),
        "{}",
        stderr(&out)
    );
    // A sweep's checkpoint the same.
    let out = run_limited(
        &dir,
        1,
        &[
            "sweep",
            &walker(),
            "--over",
            "rate-cap=1..1e4",
            "--points",
            "5",
            "-q",
            "--checkpoint",
            "sweep.json",
        ],
    );
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let err = stderr(&out);
    let kept: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("sweep.json")).unwrap()).unwrap();
    let on_disk = kept["done"].as_array().unwrap().len();
    assert!(on_disk < 5);
    assert!(
        err.contains(&format!("holds {on_disk} finished budget point")),
        "{err}"
    );
    assert!(!err.contains(".tmp"), "{err}");
}

#[test]
fn a_checkpoint_may_not_be_the_model_a_folder_or_in_the_saved_folder() {
    let dir = scratch("safe-checkpoint-path");
    let model = dir.join("w.toml");
    let text = std::fs::read_to_string(walker()).unwrap();
    std::fs::write(&model, &text).unwrap();
    symlink(&model, dir.join("alias.json")).unwrap();
    for (command, extra) in [
        ("design", vec!["-q"]),
        (
            "sweep",
            vec!["--over", "rate-cap=1..10", "--points", "2", "-q"],
        ),
    ] {
        for checkpoint in ["w.toml", "./w.toml", "alias.json"] {
            let out = run_in(
                &dir,
                &[&[command, "w.toml", "--checkpoint", checkpoint][..], &extra].concat(),
            );
            refused(&out, "is the model file");
            assert_eq!(std::fs::read_to_string(&model).unwrap(), text);
        }
        let out = run_in(
            &dir,
            &[&[command, "w.toml", "--checkpoint", "."][..], &extra].concat(),
        );
        refused(&out, "is a folder");
        std::fs::create_dir_all(dir.join("results/w")).unwrap();
        let out = run_in(
            &dir,
            &[
                &[
                    command,
                    "w.toml",
                    "--checkpoint",
                    "results/w/design.json",
                    "--save",
                ][..],
                &extra,
            ]
            .concat(),
        );
        refused(&out, "results folder");
    }
}

/// Writes two shards of a walker search into `dir` and returns their part files.
fn two_parts(dir: &Path) -> Vec<PathBuf> {
    (0..2)
        .map(|i| {
            let shard = format!("{i}/2");
            let out = run_in(
                dir,
                &[
                    "design",
                    &walker(),
                    "--shard",
                    &shard,
                    "--max-pathways",
                    "2",
                    "--top",
                    "5",
                    "--save",
                    "-q",
                ],
            );
            assert!(out.status.success(), "{}", stderr(&out));
            dir.join(format!("results/walker/design-part-{i}-of-2.json"))
        })
        .collect()
}

/// Writes `value` with `edit` applied to `path`, sealed again with a matching integrity digest
/// (as a careful editor could), so that the checks behind the digest are what is tested.
fn edited(value: &serde_json::Value, path: &Path, edit: impl Fn(&mut serde_json::Value)) {
    let mut v = value.clone();
    edit(&mut v);
    ergopath::commands::files::seal(&mut v).unwrap();
    std::fs::write(path, serde_json::to_string_pretty(&v).unwrap()).unwrap();
}

#[test]
fn edited_part_files_are_refused_never_panic() {
    let dir = scratch("safe-parts");
    let parts = two_parts(&dir);
    let names: Vec<&str> = parts.iter().map(|p| p.to_str().unwrap()).collect();
    let merged = run_in(&dir, &[&["merge"][..], &names].concat());
    assert!(merged.status.success(), "{}", stderr(&merged));
    let original: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&parts[0]).unwrap()).unwrap();
    assert!(original["part"]["designs"].as_array().unwrap().len() >= 2);
    let cap = original["part"]["settings"]["budget"]["rate_cap"]
        .as_f64()
        .unwrap();
    type Edit = Box<dyn Fn(&mut serde_json::Value)>;
    let cases: Vec<(&str, Edit, &str)> = vec![
        (
            "shard index beyond the count",
            Box::new(|v| v["part"]["shard"]["index"] = 5.into()),
            "does not exist",
        ),
        (
            "shard count 0",
            Box::new(|v| v["part"]["shard"]["count"] = 0.into()),
            "does not exist",
        ),
        (
            "pair index beyond the states",
            Box::new(|v| v["part"]["candidates"][0][0][1] = 99.into()),
            "the model has states",
        ),
        (
            "design pair beyond the states",
            Box::new(|v| v["part"]["designs"][0]["pairs"][0][1] = 99.into()),
            "are not those of its set",
        ),
        (
            "set index beyond the candidates",
            Box::new(|v| v["part"]["designs"][0]["set"][0] = 999.into()),
            "candidate indices",
        ),
        (
            "a shortened rate list",
            Box::new(|v| {
                v["part"]["designs"][0]["log_rates"]
                    .as_array_mut()
                    .unwrap()
                    .pop();
            }),
            "log-rates",
        ),
        (
            "a rate above the cap",
            Box::new(move |v| v["part"]["designs"][0]["log_rates"][0] = (cap.ln() + 3.0).into()),
            "above the rate cap",
        ),
        (
            "a verified power of 1e9",
            Box::new(|v| v["part"]["designs"][0]["verified"][0] = 1e9.into()),
            "fresh steady-state solve",
        ),
        (
            "a raised power that reorders the ranking",
            Box::new(|v| {
                let last = v["part"]["designs"].as_array().unwrap().len() - 1;
                let top = v["part"]["designs"][0]["power"].as_f64().unwrap();
                v["part"]["designs"][last]["power"] = (top * 1.5 + 1.0).into();
            }),
            "fresh steady-state solve",
        ),
        (
            "counts that overflow",
            Box::new(|v| v["part"]["branches"][0]["scorings"] = u64::MAX.into()),
            "2^64",
        ),
        (
            "no version",
            Box::new(|v| {
                v.as_object_mut().unwrap().remove("format");
            }),
            "not a part file",
        ),
        (
            "another version",
            Box::new(|v| v["format"] = "ergopath-design-part/0".into()),
            "rerun its shard",
        ),
        (
            "pairs beyond the states",
            Box::new(|v| v["pairs"] = serde_json::json!([[0, 9]])),
            "pair selection",
        ),
    ];
    let tampered = dir.join("tampered.json");
    for (what, edit, phrase) in cases {
        edited(&original, &tampered, edit);
        let out = run_in(&dir, &["merge", tampered.to_str().unwrap(), names[1]]);
        let err = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{what}: {err}");
        assert!(
            err.contains(phrase),
            "{what}: expected '{phrase}' in:\n{err}"
        );
        assert!(out.stdout.is_empty(), "{what}");
    }
    // A FIFO or a folder given as a part file is refused without blocking.
    let fifo = dir.join("part.fifo");
    assert!(Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap()
        .success());
    for bad in [fifo.to_str().unwrap(), dir.to_str().unwrap()] {
        let out = run_in(&dir, &["merge", bad, names[1]]);
        refused(&out, "not a regular file");
    }
}

#[test]
fn edited_checkpoints_are_refused_never_panic() {
    let dir = scratch("safe-checkpoints");
    let ring6 = ring6();
    let args = [
        &["design", ring6.as_str()][..],
        &RING6_SEARCH,
        &["--checkpoint", "ck.json"],
    ]
    .concat();
    let out = run_in(&dir, &[&args[..], &["--stop-after-branches=3"]].concat());
    assert_eq!(out.status.code(), Some(130), "{}", stderr(&out));
    let path = dir.join("ck.json");
    let original: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    assert!(!original["finished"].as_array().unwrap().is_empty());
    let with_design = original["finished"]
        .as_array()
        .unwrap()
        .iter()
        .position(|b| !b["designs"].as_array().unwrap().is_empty())
        .unwrap();
    type Edit = Box<dyn Fn(&mut serde_json::Value)>;
    let cases: Vec<(&str, Edit, &str)> = vec![
        (
            "a branch beyond the candidates",
            Box::new(|v| v["finished"][0]["tally"]["branch"] = 999.into()),
            "beyond its",
        ),
        (
            "a branch twice",
            Box::new(|v| {
                let first = v["finished"][0].clone();
                v["finished"].as_array_mut().unwrap().push(first);
            }),
            "twice",
        ),
        (
            "a set beyond the candidates",
            Box::new(move |v| v["finished"][with_design]["designs"][0]["set"][0] = 999.into()),
            "candidate indices",
        ),
        (
            "a shortened rate list",
            Box::new(move |v| {
                v["finished"][with_design]["designs"][0]["log_rates"]
                    .as_array_mut()
                    .unwrap()
                    .pop();
            }),
            "log-rates",
        ),
        (
            "a huge rate",
            Box::new(move |v| {
                v["finished"][with_design]["designs"][0]["log_rates"][0] = 1e300.into()
            }),
            "above the rate cap",
        ),
        (
            "a raised power",
            Box::new(move |v| {
                let p = v["finished"][with_design]["designs"][0]["power"]
                    .as_f64()
                    .unwrap();
                v["finished"][with_design]["designs"][0]["power"] = (p * 1.5 + 1.0).into();
            }),
            "its steady-state solve gives",
        ),
        (
            "another version",
            Box::new(|v| v["format"] = "x".into()),
            "another model or other search settings",
        ),
    ];
    let resume = [&args[..], &["--resume"]].concat();
    for (what, edit, phrase) in cases {
        edited(&original, &path, edit);
        let out = run_in(&dir, &resume);
        let err = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{what}: {err}");
        assert!(
            err.contains(phrase),
            "{what}: expected '{phrase}' in:\n{err}"
        );
    }
    // The sweep's checkpoint: a point never computed, a raised power.
    let sweep = sweep_args();
    let path = interrupted_sweep(&dir);
    let original: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    let cases: Vec<(&str, Edit, &str)> = vec![
        (
            "a point never computed",
            Box::new(|v| {
                let mut extra = v["done"][1].clone();
                extra["value"] = 123.0.into();
                v["done"].as_array_mut().unwrap().push(extra);
            }),
            "not at the sweep's value",
        ),
        (
            "a raised power",
            Box::new(|v| {
                let p = v["done"][1]["best"]["power"].as_f64().unwrap();
                v["done"][1]["best"]["power"] = (p * 2.0 + 1.0).into();
            }),
            "fresh steady-state solve",
        ),
        (
            "a raised verified power",
            Box::new(|v| v["done"][1]["best"]["verified"][0] = 1e9.into()),
            "fresh steady-state solve",
        ),
        (
            "too many points",
            Box::new(|v| {
                let first = v["done"][0].clone();
                for _ in 0..5 {
                    v["done"].as_array_mut().unwrap().push(first.clone());
                }
            }),
            "points of a sweep of 5",
        ),
    ];
    let resume: Vec<&str> = sweep
        .iter()
        .map(String::as_str)
        .chain(["--resume"])
        .collect();
    for (what, edit, phrase) in cases {
        edited(&original, &path, edit);
        let out = run_in(&dir, &resume);
        let err = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{what}: {err}");
        assert!(
            err.contains(phrase),
            "{what}: expected '{phrase}' in:\n{err}"
        );
    }
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

/// JSON pointers to every number in `value`.
fn number_paths(value: &serde_json::Value, at: String, out: &mut Vec<String>) {
    match value {
        serde_json::Value::Number(_) => out.push(at),
        serde_json::Value::Array(items) => {
            for (i, v) in items.iter().enumerate() {
                number_paths(v, format!("{at}/{i}"), out);
            }
        }
        serde_json::Value::Object(map) => {
            for (k, v) in map {
                number_paths(v, format!("{at}/{k}"), out);
            }
        }
        _ => {}
    }
}

/// Every number of a file replaced by each of a few hostile values, `run` on the result:
/// it may refuse or accept, never panic.
fn mutate_every_number(original: &Path, run: &dyn Fn(&Path) -> bool) {
    let value: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(original).unwrap()).unwrap();
    let mut paths = Vec::new();
    number_paths(&value, String::new(), &mut paths);
    assert!(paths.len() > 20);
    let tampered = original.with_extension("tampered.json");
    let hostile: [serde_json::Value; 4] = [
        0.into(),
        (-1).into(),
        u64::MAX.into(),
        serde_json::json!(1e300),
    ];
    let mut refused = 0;
    for path in &paths {
        for replacement in &hostile {
            let mut v = value.clone();
            *v.pointer_mut(path).unwrap() = replacement.clone();
            ergopath::commands::files::seal(&mut v).unwrap();
            std::fs::write(&tampered, serde_json::to_string(&v).unwrap()).unwrap();
            let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| run(&tampered)));
            match outcome {
                Ok(accepted) => refused += usize::from(!accepted),
                Err(_) => panic!("{path} = {replacement} panics"),
            }
        }
    }
    assert!(refused > paths.len(), "only {refused} refusals");
}

#[test]
fn every_number_of_a_part_file_mutated_never_panics() {
    use ergopath::commands::{merge, Format};
    let dir = scratch("safe-mutated-parts");
    let parts = two_parts(&dir);
    let model = PathBuf::from(walker());
    mutate_every_number(&parts[0], &|tampered| {
        let given = [tampered.to_path_buf(), parts[1].clone()];
        merge(&given, Some(&model), Format::Json, None).is_ok()
    });
}

#[test]
fn every_number_of_a_checkpoint_mutated_never_panics() {
    use ergopath::commands::{design, DesignRequest, Format, SearchKnobs};
    let dir = scratch("safe-mutated-checkpoint");
    let checkpoint = dir.join("ck.json");
    let out = run_in(
        &dir,
        &[
            "design",
            &walker(),
            "--max-pathways",
            "2",
            "--top",
            "4",
            "-q",
            "--checkpoint",
            "ck.json",
            "--stop-after-branches=2",
        ],
    );
    assert_eq!(out.status.code(), Some(130), "{}", stderr(&out));
    let original = dir.join("original.json");
    std::fs::copy(&checkpoint, &original).unwrap();
    let model = PathBuf::from(walker());
    mutate_every_number(&original, &|tampered| {
        let request = DesignRequest {
            budget: ergopath::commands::BudgetFlags {
                max_pathways: Some(2),
                ..Default::default()
            },
            knobs: SearchKnobs {
                top: 4,
                quiet: true,
                threads: 1,
                ..Default::default()
            },
            checkpoint: Some(tampered.to_path_buf()),
            resume: true,
            // Stops at once once the file is taken: only reading it is under test.
            stop_after: Some(0),
            format: Format::Json,
            ..Default::default()
        };
        let refused = matches!(design(&model, &request), Err(ergopath::Error::Usage(_)));
        !refused
    });
}

#[test]
fn every_number_of_a_sweep_checkpoint_mutated_never_panics() {
    use ergopath::commands::{sweep, SearchKnobs, SweepRequest};
    let dir = scratch("safe-mutated-sweep");
    let original = dir.join("original.json");
    std::fs::copy(interrupted_sweep(&dir), &original).unwrap();
    let model = PathBuf::from(walker());
    mutate_every_number(&original, &|tampered| {
        let request = SweepRequest {
            knobs: SearchKnobs {
                quiet: true,
                threads: 1,
                ..Default::default()
            },
            over: "rate-cap=1..1e4".into(),
            points: 5,
            checkpoint: Some(tampered.to_path_buf()),
            resume: true,
            stop_after: Some(0),
            ..Default::default()
        };
        !matches!(sweep(&model, &request), Err(ergopath::Error::Usage(_)))
    });
}

#[test]
fn fuzz_seeds_are_valid_files_of_this_version() {
    let dir = scratch("safe-fuzz-seeds");
    let fuzz = root().join("fuzz");
    let part0 = fuzz.join("seeds-files/part-0-of-2.json");
    let part1 = fuzz.join("part-1-of-2.json");
    let out = run_in(
        &dir,
        &[
            "merge",
            part0.to_str().unwrap(),
            part1.to_str().unwrap(),
            "--model",
            &walker(),
        ],
    );
    assert!(out.status.success(), "{}", stderr(&out));
    for (name, args) in [
        (
            "design-checkpoint.json",
            vec!["design", "--max-pathways", "2", "--top", "4"],
        ),
        (
            "sweep-checkpoint.json",
            vec!["sweep", "--over", "rate-cap=1..1e4", "--points", "5"],
        ),
        (
            "uncertainty-checkpoint.json",
            vec!["uncertainty", "--samples", "20", "--seed", "2"],
        ),
    ] {
        std::fs::copy(fuzz.join("seeds-files").join(name), dir.join(name)).unwrap();
        let model = walker();
        let command = [
            &args[..1],
            &[model.as_str()],
            &args[1..],
            &["-q", "--checkpoint", name, "--resume"],
        ]
        .concat();
        let out = run_in(&dir, &command);
        assert!(out.status.success(), "{name}: {}", stderr(&out));
    }
}

#[test]
fn a_failed_save_leaves_the_previous_set_whole() {
    let dir = scratch("safe-full-save");
    let first = run_in(&dir, &["bound", &walker(), "--target", "0.5", "--save"]);
    assert!(first.status.success(), "{}", stderr(&first));
    let folder = dir.join("results/walker");
    let before: Vec<(String, Vec<u8>)> = names_in(&folder)
        .into_iter()
        .map(|n| {
            let bytes = std::fs::read(folder.join(&n)).unwrap();
            (n, bytes)
        })
        .collect();
    // Room for the text report but not for the JSON: a disk that fills up half-way.
    let txt = std::fs::metadata(folder.join("bound.txt")).unwrap().len();
    let json = std::fs::metadata(folder.join("bound.json")).unwrap().len();
    assert!(json > txt + 2048, "{txt} {json}");
    let kib = (txt / 1024 + 1).to_string();
    let out = run_limited(
        &dir,
        kib.parse().unwrap(),
        &["bound", &walker(), "--target", "0.9", "--save"],
    );
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(stderr(&out).contains("cannot write"), "{}", stderr(&out));
    let after: Vec<(String, Vec<u8>)> = names_in(&folder)
        .into_iter()
        .map(|n| {
            let bytes = std::fs::read(folder.join(&n)).unwrap();
            (n, bytes)
        })
        .collect();
    assert!(before == after, "the folder changed");
}

#[test]
fn a_checkpoint_with_the_longest_name_is_written() {
    let dir = scratch("safe-long-name");
    let name = format!("{}.json", "c".repeat(250));
    let out = run_in(
        &dir,
        &[
            "design",
            &walker(),
            "--max-pathways",
            "2",
            "-q",
            "--checkpoint",
            &name,
        ],
    );
    assert!(out.status.success(), "{}", stderr(&out));
    let kept: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join(&name)).unwrap()).unwrap();
    assert!(!kept["finished"].as_array().unwrap().is_empty());
}

#[test]
fn an_edit_without_a_matching_digest_is_refused_as_such() {
    // The part file's integrity digest (FNV-1a over its content) catches any edit that does not
    // also recompute it: here one ranked power raised by a tenth.
    let dir = scratch("safe-digest");
    let part = root().join("fuzz/seeds-files/part-0-of-2.json");
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&part).unwrap()).unwrap();
    let power = v
        .pointer_mut("/part/designs/0/power")
        .expect("a ranked design");
    *power = serde_json::json!(power.as_f64().unwrap() * 1.1);
    let edited = dir.join("part-0-of-2.json");
    std::fs::write(&edited, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let other = root().join("fuzz/part-1-of-2.json");
    let out = run_in(
        &dir,
        &[
            "merge",
            edited.to_str().unwrap(),
            other.to_str().unwrap(),
            "--model",
            &walker(),
        ],
    );
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("integrity digest") && stderr(&out).contains("edited or damaged"),
        "{}",
        stderr(&out)
    );
}

/// The walker's rate-cap sweep with its checkpoint in `sweep.json`.
fn sweep_args() -> Vec<String> {
    [
        "sweep",
        &walker(),
        "--over",
        "rate-cap=1..1e4",
        "--points",
        "5",
        "-q",
        "--checkpoint",
        "sweep.json",
    ]
    .iter()
    .map(|a| a.to_string())
    .collect()
}

/// Runs that sweep in `dir` until it stops after two points; returns its checkpoint.
fn interrupted_sweep(dir: &Path) -> PathBuf {
    let mut args = sweep_args();
    args.push("--stop-after-points=2".into());
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = run_in(dir, &args);
    assert_eq!(out.status.code(), Some(130), "{}", stderr(&out));
    dir.join("sweep.json")
}

#[test]
fn every_number_of_an_uncertainty_checkpoint_mutated_never_panics() {
    use ergopath::commands::{uncertainty, SearchKnobs, UncertaintyRequest};
    let dir = scratch("safe-mutated-uncertainty");
    let original = dir.join("original.json");
    std::fs::copy(
        root().join("fuzz/seeds-files/uncertainty-checkpoint.json"),
        &original,
    )
    .unwrap();
    let model = PathBuf::from(walker());
    mutate_every_number(&original, &|tampered| {
        let request = UncertaintyRequest {
            samples: 20,
            seed: 2,
            knobs: SearchKnobs {
                quiet: true,
                threads: 1,
                ..Default::default()
            },
            checkpoint: Some(tampered.to_path_buf()),
            resume: true,
            stop_after: Some(0),
            ..Default::default()
        };
        !matches!(
            uncertainty(&model, &request),
            Err(ergopath::Error::Usage(_))
        )
    });
}
