//! Charts keep every text inside the picture and list only what they draw: every SVG the demo
//! committed under `results/`, and fresh ones from the commands (including a comparison of
//! long titles and a sweep whose upper bounds are all missing).
//!
//! Text extents are estimated from font metrics: 0.6 em a character wide (a common-practice
//! estimate of an average sans-serif advance, generous for lower case), from one em above the
//! baseline to 0.3 em below. A rotated text (`rotate(-90)`) spans its width vertically.

use crate::common::{root, run_in, scratch};
use std::path::{Path, PathBuf};

/// The value of attribute `name` in the element head `head` (`<tag a="b" ...`).
fn attr<'a>(head: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let at = head.find(&key)? + key.len();
    let end = head[at..].find('"')?;
    Some(&head[at..at + end])
}

fn unescape(text: &str) -> String {
    text.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&#39;", "'")
        .replace("&apos;", "'")
        .replace("&amp;", "&")
}

/// `(width, height)` of the view box (which must start at the origin).
fn view_box(svg: &str, label: &str) -> (f64, f64) {
    let start = svg
        .find("<svg")
        .unwrap_or_else(|| panic!("{label}: no <svg>"));
    let head = &svg[start..start + svg[start..].find('>').unwrap()];
    let v: Vec<f64> = attr(head, "viewBox")
        .unwrap_or_else(|| panic!("{label}: no viewBox"))
        .split(' ')
        .map(|s| s.parse().unwrap())
        .collect();
    assert_eq!((v[0], v[1]), (0.0, 0.0), "{label}: view box origin");
    (v[2], v[3])
}

/// The font size in effect at byte `at` of `svg`: the text's own, else the nearest enclosing
/// `font-size` (a group's or the document's), else 12.
fn font_size(svg: &str, head: &str, at: usize) -> f64 {
    if let Some(s) = attr(head, "font-size") {
        return s.parse().unwrap();
    }
    // The innermost open <g ... font-size> before `at`, else the <svg> element's.
    let before = &svg[..at];
    let mut depth = 0i32;
    let mut i = before.len();
    while let Some(pos) = before[..i].rfind('<') {
        let tag = &before[pos..];
        if tag.starts_with("</g") {
            depth += 1;
        } else if tag.starts_with("<g") && !tag[..tag.find('>').unwrap_or(tag.len())].ends_with('/')
        {
            if depth == 0 {
                let h = &tag[..tag.find('>').unwrap_or(tag.len())];
                if let Some(s) = attr(h, "font-size") {
                    return s.parse().unwrap();
                }
            } else {
                depth -= 1;
            }
        } else if tag.starts_with("<svg") {
            let h = &tag[..tag.find('>').unwrap_or(tag.len())];
            return attr(h, "font-size").map_or(12.0, |s| s.parse().unwrap());
        }
        i = pos;
    }
    12.0
}

/// Asserts that every `<text>` of `svg` lies inside its view box by the estimate above.
fn assert_texts_inside(svg: &str, label: &str) -> usize {
    let (w, h) = view_box(svg, label);
    let mut count = 0;
    let mut from = 0;
    while let Some(found) = svg[from..].find("<text") {
        let at = from + found;
        let head_end = at + svg[at..].find('>').unwrap();
        let head = &svg[at..head_end];
        let body_end = head_end + svg[head_end..].find("</text>").unwrap();
        // Inner <tspan>s count as text too: strip tags.
        let mut content = String::new();
        let mut inside = false;
        for c in svg[head_end + 1..body_end].chars() {
            match c {
                '<' => inside = true,
                '>' => inside = false,
                c if !inside => content.push(c),
                _ => {}
            }
        }
        let content = unescape(&content);
        from = body_end;
        if content.trim().is_empty() {
            continue;
        }
        count += 1;
        let size = font_size(svg, head, at);
        let width = 0.6 * size * content.chars().count() as f64;
        let anchor = attr(head, "text-anchor").unwrap_or("start");
        let offset = match anchor {
            "middle" => width / 2.0,
            "end" => width,
            _ => 0.0,
        };
        let (left, right, top, bottom) = match attr(head, "transform") {
            Some(t) => {
                assert!(t.contains("rotate(-90)"), "{label}: transform {t}");
                let inner = &t[t.find("translate(").unwrap() + 10..];
                let xy: Vec<f64> = inner[..inner.find(')').unwrap()]
                    .split([' ', ','])
                    .filter(|s| !s.is_empty())
                    .map(|s| s.parse().unwrap())
                    .collect();
                // Rotated a quarter turn anticlockwise: the text runs upwards from its anchor.
                let (x, y) = (xy[0], xy[1]);
                (x - size, x + 0.3 * size, y - (width - offset), y + offset)
            }
            None => {
                let x: f64 = attr(head, "x").map_or(0.0, |v| v.parse().unwrap());
                let y: f64 = attr(head, "y").map_or(0.0, |v| v.parse().unwrap());
                (x - offset, x - offset + width, y - size, y + 0.3 * size)
            }
        };
        assert!(
            left >= 0.0 && right <= w && top >= 0.0 && bottom <= h,
            "{label}: text '{content}' spans x {left:.1}..{right:.1}, y {top:.1}..{bottom:.1}, outside the view box {w} x {h}"
        );
    }
    count
}

/// Asserts that every legend entry (`<g class="legend-entry" data-series="k">`) names a series
/// that is drawn: a polyline of at least two points, a dot or a bar with the same
/// `data-series` outside the legend. Returns the number of entries.
fn assert_legend_drawn(svg: &str, label: &str) -> usize {
    let mut entries = Vec::new();
    let mut drawn = Vec::new();
    let mut legend_spans = Vec::new();
    let mut from = 0;
    while let Some(found) = svg[from..].find("<g class=\"legend-entry\"") {
        let at = from + found;
        let end = at + svg[at..].find("</g>").unwrap();
        let head = &svg[at..at + svg[at..].find('>').unwrap()];
        entries.push(attr(head, "data-series").unwrap().to_string());
        legend_spans.push((at, end));
        from = end;
    }
    for tag in ["<polyline", "<circle", "<rect"] {
        let mut from = 0;
        while let Some(found) = svg[from..].find(tag) {
            let at = from + found;
            from = at + tag.len();
            if legend_spans.iter().any(|&(a, b)| a <= at && at < b) {
                continue;
            }
            let head = &svg[at..at + svg[at..].find('>').unwrap()];
            let Some(series) = attr(head, "data-series") else {
                continue;
            };
            if tag == "<polyline" {
                let points = attr(head, "points").unwrap_or("");
                assert!(
                    points.split_whitespace().count() >= 2,
                    "{label}: series {series} is a line through fewer than two points"
                );
            }
            drawn.push(series.to_string());
        }
    }
    for e in &entries {
        assert!(
            drawn.contains(e),
            "{label}: the legend lists series {e}, which is not drawn"
        );
    }
    entries.len()
}

fn svgs_under(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(listing) = std::fs::read_dir(dir) else {
        return;
    };
    let mut paths: Vec<PathBuf> = listing.map(|e| e.unwrap().path()).collect();
    paths.sort();
    for path in paths {
        if path.is_dir() {
            svgs_under(&path, out);
        } else if path.extension().is_some_and(|x| x == "svg") {
            out.push(path);
        }
    }
}

fn check_all(dir: &Path) -> (usize, usize, usize) {
    let mut files = Vec::new();
    svgs_under(dir, &mut files);
    let (mut texts, mut entries) = (0, 0);
    for path in &files {
        let svg = std::fs::read_to_string(path).unwrap();
        let label = path.display().to_string();
        texts += assert_texts_inside(&svg, &label);
        entries += assert_legend_drawn(&svg, &label);
    }
    (files.len(), texts, entries)
}

#[test]
fn committed_demo_pictures_keep_their_text_inside_and_list_only_drawn_lines() {
    let (files, texts, entries) = check_all(&root().join("results"));
    assert!(files >= 40, "{files} SVG files under results/");
    assert!(
        texts > 500 && entries > 40,
        "{texts} texts, {entries} legend entries"
    );
}

fn ok(dir: &Path, args: &[&str]) {
    let out = run_in(dir, args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn fresh_pictures_keep_their_text_inside_with_long_titles_and_missing_values() {
    let dir = scratch("plots");
    let problems = root().join("problems");
    // Two models with one long title (the comparison's bar labels) and long state names.
    let walker = std::fs::read_to_string(problems.join("walker.toml")).unwrap();
    let long = "an architecture whose title is far longer than any bar label column (walker copy)";
    let first = walker.replacen(
        &walker
            .lines()
            .find(|l| l.starts_with("title"))
            .unwrap()
            .to_string(),
        &format!("title = \"{long}\""),
        1,
    );
    std::fs::write(dir.join("long_a.toml"), &first).unwrap();
    std::fs::write(dir.join("long_b.toml"), &first).unwrap();
    let ring = problems.join("ring6.toml");
    let photo = problems.join("photoswitch.toml");
    let (ring, photo) = (ring.to_str().unwrap(), photo.to_str().unwrap());
    for model in [ring, photo, "long_a.toml"] {
        ok(&dir, &["steady", model, "--save"]);
        ok(&dir, &["bound", model, "--save"]);
        ok(&dir, &["sensitivity", model, "--save"]);
        ok(
            &dir,
            &[
                "regimes", model, "--scale", "stored", "--from", "0.01", "--to", "1000",
                "--points", "4", "--save",
            ],
        );
    }
    // The photoswitch's rate-capped relaxation is missing at caps this large (double precision
    // overflows in it): its line is not drawn, so the legend must not list it.
    ok(
        &dir,
        &[
            "sweep",
            photo,
            "--over",
            "rate-cap=1e200..1e300",
            "--points",
            "3",
            "--max-pathways",
            "1",
            "--quiet",
            "--save",
        ],
    );
    ok(
        &dir,
        &[
            "compare",
            "long_a.toml",
            "long_b.toml",
            ring,
            "--rate-cap",
            "10",
            "--max-pathways",
            "1",
            "--quiet",
            "--save",
        ],
    );
    let (files, texts, entries) = check_all(&dir.join("results"));
    assert!(files >= 14, "{files} SVG files");
    assert!(
        texts > 100 && entries > 10,
        "{texts} texts, {entries} entries"
    );
    let sweep =
        std::fs::read_to_string(dir.join("results/photoswitch/sweep-rate-cap.svg")).unwrap();
    assert!(
        !sweep.contains(">upper bound at budget<"),
        "the sweep's legend names the upper bound, which no budget has"
    );
    let _ = std::fs::remove_dir_all(&dir);
}
