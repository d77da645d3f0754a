//! `report.html`, the self-contained page of a results folder: rebuilt from the manifest on
//! every `--save` (planted files never reach it), staged and committed with the saved set (a
//! save that cannot write the page changes nothing), hostile titles escaped, one page per
//! folder, nothing outside the page referenced. The page in a browser (its script, sorting and
//! the numbers it shows against the JSON) is `tests/python/test_report_html.py`.

use crate::common::{root, run_in, scratch};
use ergopath::report::html::report_html;
use ergopath::report::output::{read_back, Manifest};
use std::os::unix::fs::symlink;
use std::path::Path;
use std::process::{Command, Output};

fn ok(out: &Output) {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn walker() -> String {
    root().join("problems/walker.toml").display().to_string()
}

/// The page `dir` would get from its manifest as it stands.
fn rebuilt(dir: &Path, title: &str) -> String {
    let manifest = Manifest::read(dir).unwrap();
    let page = report_html(title, &manifest, &mut |name| read_back(&dir.join(name))).unwrap();
    ergopath::report::output::printable(&page).into_owned()
}

/// What a page must never hold: anything that loads from outside it.
fn assert_self_contained(page: &str, what: &str) {
    let lower = page.to_ascii_lowercase();
    for external in [
        "http://", "https://", "src=", "<link", "@import", "<iframe", "<object", "<embed",
    ] {
        assert!(
            !lower.contains(external),
            "{what}: '{external}' in the page"
        );
    }
    // url(...) only to a fragment of the page itself.
    for (at, _) in lower.match_indices("url(") {
        assert!(lower[at + 4..].starts_with('#'), "{what}: url( at {at}");
    }
    // One script, the page's own, inline.
    assert_eq!(lower.matches("<script").count(), 1, "{what}");
    assert!(lower.contains("<script>\n(function () {"), "{what}");
}

fn html_files(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".html") || n.ends_with(".htm"))
        .collect();
    names.sort();
    names
}

#[test]
fn the_page_is_rebuilt_from_the_manifest_on_every_save() {
    let dir = scratch("html-manifest");
    let folder = dir.join("results/walker");
    std::fs::create_dir_all(&folder).unwrap();
    let secret = dir.join("secret.svg");
    std::fs::write(&secret, "<svg><text>SECRET</text></svg>").unwrap();
    symlink(&secret, folder.join("stolen.svg")).unwrap();
    std::fs::write(folder.join("planted.csv"), "PLANTED,1\n").unwrap();
    std::fs::write(folder.join("planted.html"), "<p>PLANTED</p>").unwrap();
    let out = run_in(&dir, &["steady", &walker(), "--save"]);
    ok(&out);
    let note = String::from_utf8(out.stdout).unwrap();
    assert!(note.contains("results/walker/report.html"), "{note}");
    let first = std::fs::read_to_string(folder.join("report.html")).unwrap();
    assert!(first.contains("id=\"r-steady\"") && !first.contains("id=\"r-bound\""));
    ok(&run_in(&dir, &["bound", &walker(), "--save"]));
    let page = std::fs::read_to_string(folder.join("report.html")).unwrap();
    let title = "fuel-driven walker under a 2 pN load";
    assert_eq!(page, rebuilt(&folder, title));
    for section in ["model", "r-steady", "r-bound"] {
        assert!(
            page.contains(&format!("<section id=\"{section}\">")),
            "{section}"
        );
    }
    for foreign in ["SECRET", "PLANTED", "stolen", "planted"] {
        assert!(!page.contains(foreign), "{foreign}");
    }
    // Every saved picture inline, every table sortable with its units line.
    assert_eq!(page.matches("<svg").count(), 2);
    assert!(!page.contains("<?xml"));
    let tables = page.matches("<table class=\"sortable\"").count();
    assert_eq!(tables, page.matches("<p class=\"units\">Units: ").count());
    assert!(tables >= 5, "{tables}");
    assert_self_contained(&page, "saved page");
    // The steady table holds the CSV's numbers as written.
    let csv = std::fs::read_to_string(folder.join("steady.csv")).unwrap();
    for value in csv.lines().nth(1).unwrap().split(',').skip(4) {
        assert!(page.contains(&format!("data-v=\"{value}\"")), "{value}");
    }
    // A report that lost its listed file is left out on the next save; one page per folder.
    std::fs::remove_file(folder.join("bound.svg")).unwrap();
    ok(&run_in(&dir, &["steady", &walker(), "--save"]));
    let page = std::fs::read_to_string(folder.join("report.html")).unwrap();
    assert_eq!(page.matches("<svg").count(), 1);
    assert!(page.contains("id=\"r-bound\""));
    assert_eq!(html_files(&folder), ["planted.html", "report.html"]);
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn hostile_titles_are_text_on_the_page() {
    let dir = scratch("html-hostile");
    let hostile =
        r#"<script>alert(1)</script> & "quoted" 'single' </title><img src=x onerror=alert(2)>"#;
    let escaped_title = hostile.replace('\\', "\\\\").replace('"', "\\\"");
    let text = std::fs::read_to_string(walker()).unwrap().replace(
        "title = \"fuel-driven walker under a 2 pN load\"",
        &format!("title = \"{escaped_title}\\u001b[2J\""),
    );
    std::fs::write(dir.join("hostile.toml"), text).unwrap();
    for command in ["steady", "bound", "sensitivity"] {
        ok(&run_in(&dir, &[command, "hostile.toml", "--save"]));
    }
    let page = std::fs::read_to_string(dir.join("results/hostile/report.html")).unwrap();
    assert!(!page.contains("<script>alert"), "raw script in the page");
    assert!(!page.contains("<img") && !page.contains("</title><img"));
    assert!(!page.contains('\u{1b}'));
    let escaped = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;quoted&quot; &#39;single&#39; &lt;/title&gt;&lt;img src=x onerror=alert(2)&gt;";
    assert!(page.contains(&format!("<h1>Results: {escaped}")));
    assert!(page.contains(&format!("<title>Results: {escaped}")));
    // The pictures hold the title too (XML-escaped by their writer) and are inlined.
    assert_eq!(page.matches("<svg").count(), 3);
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_save_that_cannot_write_the_page_changes_nothing() {
    let dir = scratch("html-atomic");
    ok(&run_in(&dir, &["steady", &walker(), "--save"]));
    ok(&run_in(
        &dir,
        &["bound", &walker(), "--target", "0.5", "--save"],
    ));
    let folder = dir.join("results/walker");
    let snapshot = || -> Vec<(String, Vec<u8>)> {
        let mut files: Vec<(String, Vec<u8>)> = std::fs::read_dir(&folder)
            .unwrap()
            .map(|e| {
                let e = e.unwrap();
                (
                    e.file_name().to_string_lossy().into_owned(),
                    std::fs::read(e.path()).unwrap(),
                )
            })
            .collect();
        files.sort();
        files
    };
    let before = snapshot();
    // Room for every file of the set but the page, the largest: only its staging fails.
    let page = before
        .iter()
        .find(|(n, _)| n == "report.html")
        .unwrap()
        .1
        .len();
    let others = before
        .iter()
        .filter(|(n, _)| n != "report.html")
        .map(|(_, b)| b.len())
        .max()
        .unwrap();
    let kib = others / 1024 + 2;
    assert!(
        kib * 1024 < page,
        "page {page} bytes, others up to {others}"
    );
    let script = format!("trap '' XFSZ; ulimit -f {kib}; exec \"$0\" \"$@\"");
    let out = Command::new("bash")
        .arg("-c")
        .arg(script)
        .arg(env!("CARGO_BIN_EXE_ergopath"))
        .args(["bound", &walker(), "--target", "0.9", "--save"])
        .current_dir(&dir)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("cannot write") && err.contains("report.html"),
        "{err}"
    );
    assert!(before == snapshot(), "the folder changed");
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn committed_pages_are_rebuilt_exactly_from_their_manifests() {
    let mut checked = 0;
    for entry in std::fs::read_dir(root().join("results")).unwrap() {
        let dir = entry.unwrap().path();
        let Ok(summary) = std::fs::read_to_string(dir.join("report.md")) else {
            continue;
        };
        let title = summary
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# Results: "))
            .unwrap();
        let what = dir.display().to_string();
        let committed = std::fs::read_to_string(dir.join("report.html"))
            .unwrap_or_else(|e| panic!("{what}/report.html: {e}"));
        assert_eq!(rebuilt(&dir, title), committed, "{what}");
        assert_self_contained(&committed, &what);
        assert_eq!(html_files(&dir), ["report.html"], "{what}");
        checked += 1;
    }
    assert!(checked >= 5);
}
