//! Every validation error of the model format, through the real binary: exit status 2, the
//! file and line (and column) of the problem, the problem in plain words, a fix, and nothing on
//! standard output.

use crate::common::{run, scratch};

const STATES: &str = "[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n";
const GOOD_TRANSITION: &str =
    "[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\nbackward = 2\n";

/// Writes `text` to a file, runs `check` and `steady` on it, and asserts the diagnosis.
fn rejects(name: &str, text: &str, location: &str, phrases: &[&str]) {
    let dir = scratch(name);
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, text).unwrap();
    for command in ["check", "steady"] {
        let out = run(&[command, path.to_str().unwrap()]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: {stderr}");
        assert!(out.stdout.is_empty(), "{name}: printed to stdout");
        let expected = format!("{}{location}", path.display());
        assert!(
            stderr.contains(&expected),
            "{name}: expected '{expected}' in:\n{stderr}"
        );
        assert!(stderr.contains("fix: "), "{name}: no fix in:\n{stderr}");
        for phrase in phrases {
            assert!(
                stderr.contains(phrase),
                "{name}: expected '{phrase}' in:\n{stderr}"
            );
        }
    }
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn unknown_keys_are_errors() {
    rejects(
        "typo_top",
        &format!("temprature = 300\n{STATES}{GOOD_TRANSITION}"),
        ":1:1",
        &["unknown field `temprature`"],
    );
    rejects(
        "typo_transition",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nfoward = 1\n"),
        ":8:1",
        &["unknown field `foward`"],
    );
}

#[test]
fn malformed_toml_is_located() {
    rejects(
        "syntax",
        &format!("{STATES}[[transition]\nfrom = \"a\"\n"),
        ":5:",
        &["not a valid model file"],
    );
    rejects(
        "wrong_type",
        &format!(
            "{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = \"fast\"\nbackward = 1\n"
        ),
        ":8:",
        &["invalid type"],
    );
}

#[test]
fn state_names_must_be_unique_and_well_formed() {
    rejects(
        "duplicate",
        "[[state]]\nname = \"a\"\n[[state]]\nname = \"a\"\n",
        ":4:8",
        &["'a' is used twice", "first on line 2"],
    );
    rejects(
        "empty_name",
        &format!("[[state]]\nname = \"\"\n{STATES}{GOOD_TRANSITION}"),
        ":2:8",
        &["state name '' is not allowed"],
    );
    rejects(
        "too_few",
        "[[state]]\nname = \"a\"\n",
        ":1:1",
        &["needs at least two"],
    );
}

#[test]
fn transitions_must_join_two_declared_states() {
    rejects(
        "unknown_state",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"c\"\nforward = 1\nbackward = 1\n"),
        ":7:6",
        &["'c', which is not declared", "a, b"],
    );
    rejects(
        "self_loop",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"a\"\nforward = 1\nbackward = 1\n"),
        ":7:6",
        &["from 'a' to itself"],
    );
    rejects("no_transitions", STATES, "", &["no [[transition]]"]);
}

#[test]
fn rates_must_be_positive_and_finite() {
    for (name, value, phrase) in [
        ("zero_rate", "0", "got 0"),
        ("negative_rate", "-3", "got -3"),
        ("nan_rate", "nan", "not a number"),
        ("infinite_rate", "inf", "got inf"),
        ("subnormal_rate", "1e-320", "below the smallest normal"),
    ] {
        rejects(name, &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = {value}\nbackward = 1\n"), ":8:11", &[phrase, "forward rate must be positive"]);
    }
    rejects(
        "zero_backward",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\nbackward = 0\n"),
        ":9:12",
        &["backward rate must be positive"],
    );
}

#[test]
fn ldb_needs_backward_or_drive_and_they_must_agree() {
    rejects(
        "neither",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\n"),
        ":5:1",
        &["neither `backward` nor `drive`"],
    );
    // ln(2/1) = 0.693 kT but the drive says 0.5 kT: mismatch 0.193 kT.
    rejects(
        "ldb_mismatch",
        &format!("{STATES}[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 2\nbackward = 1\ndrive = 0.5\n"),
        ":5:1",
        &["disagree with local detailed balance by 1.931472e-1 kT"],
    );
}

#[test]
fn disconnected_networks_name_their_groups() {
    let text = "[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n[[state]]\nname = \"c\"\n[[state]]\nname = \"d\"\n\
                [[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 1\nbackward = 1\n\
                [[transition]]\nfrom = \"c\"\nto = \"d\"\nforward = 1\nbackward = 1\n";
    rejects(
        "disconnected",
        text,
        ":5:1",
        &["not strongly connected", "{a, b} {c, d}"],
    );
}

#[test]
fn units_and_top_level_values_are_checked() {
    rejects(
        "energy_unit",
        &format!("energy_unit = \"kcal\"\n{STATES}{GOOD_TRANSITION}"),
        ":1:15",
        &["unknown energy unit 'kcal'", "kcal/mol"],
    );
    rejects(
        "time_unit",
        &format!("time_unit = \"hours\"\n{STATES}{GOOD_TRANSITION}"),
        ":1:13",
        &["unknown time unit 'hours'", "min"],
    );
    rejects(
        "temperature",
        &format!("temperature = -5\n{STATES}{GOOD_TRANSITION}"),
        ":1:15",
        &["temperature must be a positive number"],
    );
    rejects(
        "huge_energy",
        &format!(
            "[[state]]\nname = \"a\"\nenergy = 1e300\n[[state]]\nname = \"b\"\n{GOOD_TRANSITION}"
        ),
        ":3:10",
        &["outside the representable range"],
    );
}

#[test]
fn pathway_defaults_are_checked() {
    rejects(
        "pair_missing_state",
        &format!("{STATES}{GOOD_TRANSITION}[pathways]\npairs = [[\"a\", \"z\"]]\n"),
        ":11:9",
        &["names state 'z'"],
    );
    rejects(
        "bad_cap",
        &format!("{STATES}{GOOD_TRANSITION}[pathways]\nrate_cap = -1\n"),
        ":11:12",
        &["rate_cap must be a positive"],
    );
}

#[test]
fn unreadable_and_non_utf8_files_are_bad_input() {
    let out = run(&["check", "no/such/model.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr)
        .contains("no/such/model.toml: cannot read the model file"));
    let dir = scratch("binary");
    let path = dir.join("garbage.toml");
    std::fs::write(&path, [0xff, 0xfe, 0x00, 0x41]).unwrap();
    let out = run(&["steady", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not UTF-8"));
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn an_ldb_tolerance_above_one_kt_is_refused() {
    // A tolerance of 1e9 kT once let a 48 kT mismatch between `backward` and `drive` through.
    rejects(
        "ldb_tolerance_huge",
        &format!("ldb_tolerance = 1e9\n{STATES}{GOOD_TRANSITION}"),
        ":1:",
        &["ldb_tolerance", "up to 1", "correct the rates or the drive"],
    );
}

#[test]
fn pathways_across_environment_states_are_refused() {
    let out = run(&[
        "bound",
        "problems/flicker.toml",
        "--pairs",
        "A@light/B@dark",
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(out.stdout.is_empty());
    assert!(
        stderr.contains("A@light/B@dark")
            && stderr.contains("can never change it")
            && stderr.contains("A@light/B@light"),
        "{stderr}"
    );
}
