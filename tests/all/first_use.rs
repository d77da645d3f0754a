//! A newcomer's path: the model template, help with examples, completions and the manual, and
//! the results report written beside saved outputs.

use crate::common::{root, run_in, scratch};

#[test]
fn template_is_a_valid_model_and_is_never_overwritten() {
    let dir = scratch("new");
    let out = run_in(&dir, &["new", "motor"]);
    assert!(out.status.success());
    let check = run_in(&dir, &["check", "motor.toml"]);
    assert!(
        check.status.success(),
        "{}",
        String::from_utf8_lossy(&check.stderr)
    );
    let again = run_in(&dir, &["new", "motor"]);
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("already exists"));
    // The template's own [pathways] budget is enough for a design search.
    assert!(run_in(&dir, &["design", "motor.toml", "-q"])
        .status
        .success());
}

#[test]
fn every_command_shows_an_example_and_completions_and_manual_render() {
    for command in [
        "new",
        "check",
        "steady",
        "bound",
        "regimes",
        "design",
        "merge",
        "sweep",
        "compare",
        "bench",
        "completions",
        "man",
        "reference",
        "simulate",
        "sensitivity",
    ] {
        let out = run_in(&root(), &[command, "--help"]);
        let help = String::from_utf8_lossy(&out.stdout);
        assert!(
            help.contains("Example"),
            "{command} --help has no example:\n{help}"
        );
    }
    let bash = run_in(&root(), &["completions", "bash"]);
    assert!(String::from_utf8_lossy(&bash.stdout).contains("ergopath"));
    let man = run_in(&root(), &["man"]);
    let man = String::from_utf8_lossy(&man.stdout);
    assert!(man.contains(".TH ergopath 1"));
    // One page per subcommand.
    for page in [
        "check",
        "steady",
        "bound",
        "design",
        "sweep",
        "compare",
        "regimes",
        "reference",
    ] {
        assert!(
            man.contains(&format!(".TH ergopath-{page} 1")),
            "no page for {page}"
        );
    }
    // `reference` prints the repository's model-format page, every key of it.
    let reference = run_in(&root(), &["reference"]);
    assert!(reference.status.success());
    let page = std::fs::read_to_string(root().join("docs/model-format.md")).unwrap();
    assert_eq!(
        String::from_utf8_lossy(&reference.stdout).trim_end(),
        page.trim_end()
    );
}

#[test]
fn saving_writes_a_report_with_the_plots() {
    let dir = scratch("report");
    let model = root().join("problems/walker.toml");
    let model = model.to_str().unwrap();
    assert!(run_in(&dir, &["steady", model, "--save"]).status.success());
    assert!(run_in(&dir, &["bound", model, "--save"]).status.success());
    let report = std::fs::read_to_string(dir.join("results/walker/report.md")).unwrap();
    assert!(report.contains("## steady") && report.contains("## bound"));
    assert!(report.contains("![bound](bound.svg)"));
    assert!(report.contains("baseline power"));
}
