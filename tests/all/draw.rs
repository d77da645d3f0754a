//! Network diagrams (`ergopath draw`, `steady --save`): the stress-majorization layout against
//! an independent stress function and plain geometry, and the SVG and DOT output against an
//! independent dense steady state (nalgebra), the model's channels and the bound's saved design.
//!
//! Stress function: Gansner, Koren and North, "Graph drawing by stress majorization", Graph
//! Drawing 2004, eq. 1, with the weights `d_ij^-2` they recommend, written out here.

use crate::common::{dense_stationary, load, run, run_in, scratch};
use ergopath::model::{Channel, Network};
use ergopath::report::layout::{self, Point};
use std::collections::HashMap;

/// Stress of `x` for graph distances `d` (Gansner, Koren and North 2004, eq. 1, w = d^-2).
fn stress(d: &[Vec<f64>], x: &[Point]) -> f64 {
    let mut s = 0.0;
    for i in 0..x.len() {
        for j in 0..i {
            let e = ((x[i][0] - x[j][0]).powi(2) + (x[i][1] - x[j][1]).powi(2)).sqrt();
            s += (e - d[i][j]).powi(2) / d[i][j].powi(2);
        }
    }
    s
}

/// All-pairs shortest paths by Floyd-Warshall (independent of the tool's breadth-first search).
fn floyd(n: usize, edges: &[(usize, usize)]) -> Vec<Vec<f64>> {
    let mut d = vec![vec![f64::INFINITY; n]; n];
    for (i, row) in d.iter_mut().enumerate() {
        row[i] = 0.0;
    }
    for &(a, b) in edges {
        d[a][b] = 1.0;
        d[b][a] = 1.0;
    }
    for k in 0..n {
        for i in 0..n {
            for j in 0..n {
                if d[i][k] + d[k][j] < d[i][j] {
                    d[i][j] = d[i][k] + d[k][j];
                }
            }
        }
    }
    d
}

fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

/// A connected random graph of `n` vertices: a random spanning tree plus `chords` chords,
/// from a fixed linear congruential stream (Knuth's MMIX constants), so every run is the same.
fn random_graph(n: usize, chords: usize, seed: u64) -> Vec<(usize, usize)> {
    let mut state = seed;
    let mut next = |m: usize| {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((state >> 33) % m as u64) as usize
    };
    let mut edges: Vec<(usize, usize)> = (1..n).map(|v| (next(v), v)).collect();
    for _ in 0..chords {
        let (a, b) = (next(n), next(n));
        if a != b {
            edges.push((a, b));
        }
    }
    edges
}

#[test]
fn ring_layout_is_a_near_regular_polygon() {
    for n in 4..=12 {
        let edges: Vec<(usize, usize)> = (0..n).map(|i| (i, (i + 1) % n)).collect();
        let placed = layout::place(n, &edges);
        let d = floyd(n, &edges);
        let (before, after) = (stress(&d, &placed.initial), stress(&d, &placed.majorized));
        assert!(
            after <= before * (1.0 + 1e-12) + 1e-12,
            "n = {n}: {before} -> {after}"
        );
        let x = layout::separate(&placed.majorized, &vec![0.3; n], 0.15);
        let sides: Vec<f64> = (0..n).map(|i| dist(x[i], x[(i + 1) % n])).collect();
        let (short, long) = sides
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &s| (a.min(s), b.max(s)));
        assert!(long <= 1.1 * short, "n = {n}: sides {sides:?}");
        for i in 0..n {
            for j in i + 2..n {
                if (i, j) != (0, n - 1) {
                    assert!(
                        dist(x[i], x[j]) >= short,
                        "n = {n}: {i} and {j} closer than neighbours"
                    );
                }
            }
        }
        eprintln!(
            "ring {n}: stress {before:.4e} (classical MDS) -> {after:.4e} after {} steps, sides {short:.4}..{long:.4}",
            placed.steps
        );
    }
}

/// The layout of a graph: majorization never raises the independent stress, and separation
/// leaves no two discs overlapping.
fn check_layout(label: &str, n: usize, edges: &[(usize, usize)]) {
    let started = std::time::Instant::now();
    let placed = layout::place(n, edges);
    let radii: Vec<f64> = (0..n)
        .map(|i| 0.05 + 0.31 * ((i * 37 % 11) as f64 / 10.0))
        .collect();
    let x = layout::separate(&placed.majorized, &radii, 0.19);
    let elapsed = started.elapsed();
    let d = floyd(n, edges);
    let (before, after) = (stress(&d, &placed.initial), stress(&d, &placed.majorized));
    assert!(
        after <= before * (1.0 + 1e-12) + 1e-12,
        "{label}: stress {before} -> {after}"
    );
    if n >= 13 {
        // Classical MDS of a graph this size is never a stress minimum: majorization must
        // gain visibly (measured: 20% to 60% lower on these graphs).
        assert!(after <= 0.9 * before, "{label}: stress {before} -> {after}");
    }
    for i in 0..n {
        for j in 0..i {
            assert!(
                dist(x[i], x[j]) >= radii[i] + radii[j],
                "{label}: discs {i} and {j} overlap"
            );
        }
    }
    eprintln!(
        "{label}: {n} states, stress {before:.4e} -> {after:.4e} in {} steps, layout and separation {:.1} ms",
        placed.steps,
        elapsed.as_secs_f64() * 1e3
    );
}

#[test]
fn layouts_of_shipped_and_random_networks_lower_the_stress_and_never_overlap() {
    for name in ["flicker", "photoswitch", "ring6", "walker"] {
        let model = load(&format!("problems/{name}.toml"));
        let edges: Vec<(usize, usize)> = model
            .network
            .channels
            .iter()
            .map(|c| (c.from, c.to))
            .collect();
        check_layout(name, model.network.len(), &edges);
    }
    for (k, n) in [5, 8, 13, 20, 31, 45, 60].into_iter().enumerate() {
        for chords in [0, n / 4, n] {
            let edges = random_graph(n, chords, 1000 + k as u64);
            check_layout(&format!("random {n} + {chords} chords"), n, &edges);
        }
    }
}

/// Value of attribute `name` in one element's text.
fn attr<'a>(element: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let start = element.find(&key)? + key.len();
    let len = element[start..].find('"')?;
    Some(&element[start..start + len])
}

fn number(element: &str, name: &str) -> f64 {
    attr(element, name)
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("no number {name} in {element}"))
}

/// Every element `<tag ...>` of the document, as its text up to the closing `>` of the tag.
fn elements<'a>(svg: &'a str, tag: &str) -> Vec<&'a str> {
    let open = format!("<{tag} ");
    svg.match_indices(&open)
        .map(|(at, _)| {
            let rest = &svg[at..];
            &rest[..rest.find('>').map_or(rest.len(), |e| e + 1)]
        })
        .collect()
}

/// `(content, x, y, font size, anchor)` of every `<text>`.
fn texts(svg: &str) -> Vec<(String, f64, f64, f64, String)> {
    svg.match_indices("<text ")
        .map(|(at, _)| {
            let rest = &svg[at..];
            let head_end = rest.find('>').unwrap();
            let head = &rest[..head_end];
            let body_end = rest.find("</text>").unwrap();
            let content = rest[head_end + 1..body_end]
                .replace("&lt;", "<")
                .replace("&gt;", ">")
                .replace("&quot;", "\"")
                .replace("&apos;", "'")
                .replace("&amp;", "&");
            let size = attr(head, "font-size").map_or(12.0, |s| s.parse().unwrap());
            let anchor = attr(head, "text-anchor").unwrap_or("start").to_string();
            let (x, y) = (number(head, "x"), number(head, "y"));
            (content, x, y, size, anchor)
        })
        .collect()
}

/// `(width, height)` of the view box.
fn view_box(svg: &str) -> (f64, f64) {
    let head = elements(svg, "svg")[0];
    let v: Vec<f64> = attr(head, "viewBox")
        .unwrap()
        .split(' ')
        .map(|s| s.parse().unwrap())
        .collect();
    assert_eq!((v[0], v[1]), (0.0, 0.0));
    (v[2], v[3])
}

/// Every text lies inside the view box by a font-metric estimate: 0.6 em a character, the
/// glyphs from one em above the baseline to 0.3 em below.
fn assert_texts_inside(svg: &str, label: &str) {
    let (w, h) = view_box(svg);
    for (content, x, y, size, anchor) in texts(svg) {
        let width = 0.6 * size * content.chars().count() as f64;
        let left = match anchor.as_str() {
            "middle" => x - width / 2.0,
            "end" => x - width,
            _ => x,
        };
        assert!(
            left >= 0.0 && left + width <= w && y - size >= 0.0 && y + 0.3 * size <= h,
            "{label}: text '{content}' at ({x}, {y}) leaves the view box {w} x {h}"
        );
    }
}

fn output(args: &[&str]) -> String {
    let out = run(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// Checks a diagram of `net` (the drawn network) against its independent steady state: one
/// disc per state with area proportional to the probability (1%), arrows along the sign of the
/// independent net flux (by their attributes and by where the curve starts), widths monotone
/// in |net flux|, every text inside the view box.
fn check_diagram(svg: &str, names: &[String], net: &Network, label: &str) {
    let p = dense_stationary(net);
    let states = elements(svg, "circle")
        .into_iter()
        .filter(|e| attr(e, "class") == Some("state"))
        .collect::<Vec<_>>();
    assert_eq!(states.len(), names.len(), "{label}: one disc per state");
    let mut centre: HashMap<String, Point> = HashMap::new();
    let mut area_per_p = Vec::new();
    for e in &states {
        let name = attr(e, "data-name").unwrap().to_string();
        let i = names.iter().position(|n| *n == name).unwrap();
        let r = number(e, "r");
        area_per_p.push(std::f64::consts::PI * r * r / p[i]);
        centre.insert(name, [number(e, "cx"), number(e, "cy")]);
    }
    let (lo, hi) = area_per_p
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    assert!(
        hi <= 1.01 * lo,
        "{label}: area / probability spans {lo}..{hi}"
    );
    let mut by_flux = Vec::new();
    for e in elements(svg, "path")
        .into_iter()
        .filter(|e| attr(e, "class").is_some_and(|c| c.starts_with("arrow")))
    {
        let c: usize = attr(e, "data-channel").unwrap().parse().unwrap();
        let ch = &net.channels[c];
        let flux = ch.forward * p[ch.from] - ch.backward * p[ch.to];
        let traffic = ch.forward * p[ch.from] + ch.backward * p[ch.to];
        let class = attr(e, "class").unwrap();
        if flux.abs() > 1e-6 * traffic {
            assert!(
                !class.contains("undirected"),
                "{label}: channel {c} has a direction"
            );
            let (tail, head) = if flux > 0.0 {
                (ch.from, ch.to)
            } else {
                (ch.to, ch.from)
            };
            assert_eq!(
                attr(e, "data-from"),
                Some(names[tail].as_str()),
                "{label} {c}"
            );
            assert_eq!(
                attr(e, "data-to"),
                Some(names[head].as_str()),
                "{label} {c}"
            );
            let d: Vec<f64> = attr(e, "d")
                .unwrap()
                .split(' ')
                .filter_map(|t| t.parse().ok())
                .collect();
            // The curve starts at the tail; the arrowhead's tip (first point) is at the head.
            let tip: Vec<f64> = elements(svg, "polygon")
                .into_iter()
                .find(|h| attr(h, "data-channel") == Some(&c.to_string()))
                .and_then(|h| attr(h, "points"))
                .unwrap_or_else(|| panic!("{label}: channel {c} has no arrowhead"))
                .split([' ', ','])
                .map(|t| t.parse().unwrap())
                .collect();
            let (start, end) = ([d[0], d[1]], [tip[0], tip[1]]);
            let (t, h) = (centre[&names[tail]], centre[&names[head]]);
            assert!(
                dist(start, t) < dist(start, h) && dist(end, h) < dist(end, t),
                "{label}: channel {c} is not drawn from {} to {}",
                names[tail],
                names[head]
            );
        } else if class.contains("undirected") {
            assert!(flux.abs() <= 1e-6 * traffic);
        }
        by_flux.push((flux.abs(), number(e, "stroke-width")));
    }
    assert_eq!(
        by_flux.len(),
        net.channels.len(),
        "{label}: one arrow per channel"
    );
    by_flux.sort_by(|a, b| a.0.total_cmp(&b.0));
    for pair in by_flux.windows(2) {
        // Equal fluxes may differ in their last digits.
        if pair[1].0 > pair[0].0 * (1.0 + 1e-9) {
            assert!(
                pair[1].1 >= pair[0].1 - 1e-3,
                "{label}: width not monotone in |flux|: {pair:?}"
            );
        }
    }
    assert_texts_inside(svg, label);
}

#[test]
fn baseline_diagrams_match_an_independent_steady_state() {
    for name in ["flicker", "photoswitch", "ring6", "walker"] {
        let path = format!("problems/{name}.toml");
        let model = load(&path);
        let svg = output(&["draw", &path]);
        check_diagram(&svg, &model.state_names, &model.network, name);
    }
}

/// `(from, to, forward, backward)` of the attaining design in `bound --json`.
fn saved_pathways(json: &serde_json::Value, names: &[String]) -> Vec<(usize, usize, f64, f64)> {
    json["design"]["pathways"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            let index = |key: &str| {
                names
                    .iter()
                    .position(|n| n == p[key].as_str().unwrap())
                    .unwrap()
            };
            (
                index("from"),
                index("to"),
                p["forward"].as_f64().unwrap(),
                p["backward"].as_f64().unwrap(),
            )
        })
        .collect()
}

#[test]
fn design_diagrams_dash_and_label_the_added_pathways() {
    for name in ["walker", "ring6"] {
        let path = format!("problems/{name}.toml");
        let model = load(&path);
        let json = crate::common::run_json(&["bound", &path, "--json"]);
        let pathways = saved_pathways(&json, &model.state_names);
        assert!(!pathways.is_empty());
        let mut joint = model.network.clone();
        for &(from, to, forward, backward) in &pathways {
            joint.channels.push(Channel {
                from,
                to,
                forward,
                backward,
                work: 0.0, // the steady state does not depend on the labels
                drive: 0.0,
            });
        }
        let svg = output(&["draw", &path, "--of", "design"]);
        check_diagram(&svg, &model.state_names, &joint, &format!("{name} design"));
        let added: Vec<&str> = elements(&svg, "path")
            .into_iter()
            .filter(|e| attr(e, "class").is_some_and(|c| c.contains("added")))
            .collect();
        assert_eq!(added.len(), pathways.len());
        for e in &added {
            assert!(attr(e, "stroke-dasharray").is_some(), "{name}: {e}");
            let c: usize = attr(e, "data-channel").unwrap().parse().unwrap();
            assert!(c >= model.network.channels.len());
        }
        // Each label reads "k+ A k- B /unit" with three significant digits of the saved rates.
        let labels: Vec<(f64, f64)> = texts(&svg)
            .into_iter()
            .filter(|t| t.0.starts_with("k+ "))
            .map(|t| {
                let words: Vec<&str> = t.0.split(' ').collect();
                assert_eq!(words[4], format!("/{}", model.units.time.name()));
                (words[1].parse().unwrap(), words[3].parse().unwrap())
            })
            .collect();
        assert_eq!(
            labels.len(),
            pathways.len(),
            "{name}: one rate label per pathway"
        );
        for &(_, _, f, b) in &pathways {
            let near = |x: f64, y: f64| (x - y).abs() <= 0.01 * y;
            assert!(
                labels
                    .iter()
                    .any(|&(a, c)| (near(a, f) && near(c, b)) || (near(a, b) && near(c, f))),
                "{name}: no label with rates {f} and {b}: {labels:?}"
            );
        }
        // The same design read back from the saved bound report draws the same pathways.
        let dir = scratch(&format!("draw-design-{name}"));
        let file = dir.join("bound.json");
        std::fs::write(&file, serde_json::to_string(&json).unwrap()).unwrap();
        let from_file = output(&["draw", &path, "--design", file.to_str().unwrap()]);
        assert_eq!(
            elements(&from_file, "path")
                .iter()
                .filter(|e| attr(e, "class").is_some_and(|c| c.contains("added")))
                .count(),
            pathways.len()
        );
        let _ = std::fs::remove_dir_all(dir);
    }
}

#[test]
fn bound_diagram_sizes_states_by_the_optimal_distribution() {
    let model = load("problems/walker.toml");
    let json = crate::common::run_json(&["bound", "problems/walker.toml", "--json"]);
    let svg = output(&["draw", "problems/walker.toml", "--of", "bound"]);
    // The optimal distribution as the bound report prints it (key `optimal_distribution`: name, probability).
    let optimal: HashMap<String, f64> = json["optimal_distribution"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["name"].as_str().unwrap().to_string(),
                s["probability"].as_f64().unwrap(),
            )
        })
        .collect();
    let ratios: Vec<f64> = elements(&svg, "circle")
        .into_iter()
        .filter(|e| attr(e, "class") == Some("state"))
        .map(|e| number(e, "r").powi(2) / optimal[attr(e, "data-name").unwrap()])
        .collect();
    assert_eq!(ratios.len(), model.network.len());
    let (lo, hi) = ratios
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    assert!(hi <= 1.01 * lo, "r^2 / p* spans {lo}..{hi}");
    assert_texts_inside(&svg, "walker bound");
}

/// A model whose title and transition label need escaping (state names may only hold
/// letters, digits and `_-.:`, see `valid_name` in src/model/parse.rs).
const AWKWARD: &str = r#"
title = 'pump "A" <fast> & \ slow'
energy_unit = "kT"
time_unit = "s"
[[state]]
name = "a.b"
[[state]]
name = "c:d-1"
[[state]]
name = "e_f"
[[transition]]
from = "a.b"
to = "c:d-1"
forward = 5
drive = 2
work = 1
label = 'pull "hard" \ now <&>'
[[transition]]
from = "c:d-1"
to = "e_f"
forward = 3
backward = 1
[[transition]]
from = "e_f"
to = "a.b"
forward = 2
backward = 1
"#;

/// Whether every quoted string of `dot` closes and the braces balance (DOT escapes only `\"`
/// inside quotes; any other backslash pair passes through).
fn dot_well_formed(dot: &str) -> bool {
    let (mut quoted, mut escaped, mut depth) = (false, false, 0i32);
    for line in dot.lines().filter(|l| !l.trim_start().starts_with("//")) {
        for c in line.chars() {
            match (quoted, escaped, c) {
                (true, true, _) => escaped = false,
                (true, false, '\\') => escaped = true,
                (true, false, '"') => quoted = false,
                (false, _, '"') => quoted = true,
                (false, _, '{') => depth += 1,
                (false, _, '}') => depth -= 1,
                _ => {}
            }
        }
        if quoted {
            return false;
        }
    }
    depth == 0
}

#[test]
fn dot_holds_every_state_and_transition_with_names_escaped() {
    let dir = scratch("draw-dot");
    let file = dir.join("awkward.toml");
    std::fs::write(&file, AWKWARD).unwrap();
    let path = file.to_str().unwrap();
    let dot = output(&["draw", path, "--dot"]);
    assert!(dot_well_formed(&dot), "{dot}");
    for name in ["a.b", "c:d-1", "e_f"] {
        assert!(dot.contains(&format!("\n  \"{name}\" [")), "{name}: {dot}");
    }
    assert_eq!(dot.matches(" -> ").count(), 3, "{dot}");
    assert!(dot.contains(r#"label="pull \"hard\" \\ now <&>""#), "{dot}");
    assert!(dot.contains(r#"pump \"A\" <fast> & \\ slow"#), "{dot}");
    let svg = output(&["draw", path]);
    assert!(
        svg.contains("pump &quot;A&quot; &lt;fast&gt; &amp; \\ slow"),
        "{svg}"
    );
    assert!(!svg.contains("<fast>") && !svg.contains("& \\"));
    assert_texts_inside(&svg, "awkward");
    // The design's DOT lists the model's transitions and every added pathway, dashed.
    let model = load("problems/walker.toml");
    let dot = output(&["draw", "problems/walker.toml", "--of", "design", "--dot"]);
    assert!(dot_well_formed(&dot));
    let dashed = dot.matches("style=dashed").count();
    assert!(dashed > 0);
    assert_eq!(
        dot.matches(" -> ").count(),
        model.network.channels.len() + dashed
    );
    let _ = std::fs::remove_dir_all(dir);
}

/// A ring of `n` states with a chord every fifth state and energies that spread the
/// probabilities over several decades.
fn big_model(n: usize) -> String {
    let mut text = String::from("title = \"big ring\"\nenergy_unit = \"kT\"\ntime_unit = \"s\"\n");
    for i in 0..n {
        text.push_str(&format!(
            "[[state]]\nname = \"s{i}\"\nenergy = {}\n",
            (i % 13) as f64 * 0.7
        ));
    }
    let mut add = |a: usize, b: usize, drive: f64| {
        text.push_str(&format!(
            "[[transition]]\nfrom = \"s{a}\"\nto = \"s{b}\"\nforward = 4\ndrive = {drive}\nwork = 0.5\n"
        ));
    };
    for i in 0..n {
        add(i, (i + 1) % n, 1.0);
    }
    for i in (0..n).step_by(5) {
        add(i, (i + 7) % n, 0.0);
    }
    text
}

#[test]
fn beyond_sixty_states_the_picture_is_a_bounded_summary() {
    let dir = scratch("draw-big");
    let file = dir.join("big.toml");
    std::fs::write(&file, big_model(75)).unwrap();
    let path = file.to_str().unwrap();
    let svg = output(&["draw", path]);
    let states = elements(&svg, "circle")
        .into_iter()
        .filter(|e| attr(e, "class") == Some("state"))
        .count();
    assert_eq!(states, ergopath::report::network::SUMMARY_STATES);
    let note: String = texts(&svg)
        .into_iter()
        .filter(|t| t.0.contains("Summary") || t.0.contains("left out"))
        .map(|t| t.0)
        .collect::<Vec<_>>()
        .join(" ");
    assert!(
        note.contains("only the 40 most probable of 75 states are drawn"),
        "{note}"
    );
    assert!(note.contains("35 states"), "{note}");
    let (w, h) = view_box(&svg);
    assert!(w <= 2000.0 && h <= 2000.0, "{w} x {h}");
    assert_texts_inside(&svg, "big");
    let dot = output(&["draw", path, "--dot"]);
    assert_eq!(dot.matches(" -> ").count(), 75 + 15);
    // Sixty states are still drawn in full, without overlaps, inside the same bound.
    std::fs::write(&file, big_model(60)).unwrap();
    let svg = output(&["draw", path]);
    let discs: Vec<(Point, f64)> = elements(&svg, "circle")
        .into_iter()
        .filter(|e| attr(e, "class") == Some("state"))
        .map(|e| {
            let r: f64 = number(e, "r");
            ([number(e, "cx"), number(e, "cy")], r.max(5.0))
        })
        .collect();
    assert_eq!(discs.len(), 60);
    for i in 0..discs.len() {
        for j in 0..i {
            assert!(dist(discs[i].0, discs[j].0) >= discs[i].1 + discs[j].1);
        }
    }
    let (w, h) = view_box(&svg);
    assert!(w <= 2000.0 && h <= 2000.0, "{w} x {h}");
    assert_texts_inside(&svg, "sixty");
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn save_writes_the_diagram_set_and_steady_adds_its_picture() {
    let dir = scratch("draw-save");
    let model = crate::common::root().join("problems/walker.toml");
    let model = model.to_str().unwrap();
    let out = run_in(&dir, &["draw", model, "--save", "--results", "pictures"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let folder = dir.join("pictures/walker");
    for ext in ["txt", "svg", "dot"] {
        assert!(
            folder.join(format!("network-baseline.{ext}")).is_file(),
            "{ext}"
        );
    }
    // A second save reads the manifest back (which must accept the DOT form) and adds its set.
    let out = run_in(
        &dir,
        &[
            "draw",
            model,
            "--of",
            "bound",
            "--save",
            "--results",
            "pictures",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let manifest = std::fs::read_to_string(folder.join("manifest.json")).unwrap();
    assert!(manifest.contains("network-baseline.dot"), "{manifest}");
    assert!(manifest.contains("network-bound.dot"), "{manifest}");
    let report = std::fs::read_to_string(folder.join("report.md")).unwrap();
    assert!(
        report.contains("![network-baseline](network-baseline.svg)"),
        "{report}"
    );
    let out = run_in(&dir, &["steady", model, "--save"]);
    assert!(out.status.success());
    let svg = std::fs::read_to_string(dir.join("results/walker/steady.svg")).unwrap();
    let walker = load("problems/walker.toml");
    check_diagram(&svg, &walker.state_names, &walker.network, "steady.svg");
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn bad_input_exits_2_with_the_file_and_a_fix() {
    let out = run(&["draw", "tests/corpus/bad_energy_unit.toml"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad_energy_unit.toml") && err.contains("fix"),
        "{err}"
    );
    assert!(out.stdout.is_empty());
    let out = run(&[
        "draw",
        "problems/walker.toml",
        "--of",
        "design",
        "--design",
        "missing.json",
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("missing.json") && err.contains("fix"), "{err}");
    let out = run(&[
        "draw",
        "problems/walker.toml",
        "--of",
        "bound",
        "--design",
        "missing.json",
    ]);
    assert_eq!(out.status.code(), Some(2));
    let out = run(&["draw", "problems/walker.toml", "--rank", "2"]);
    assert_eq!(out.status.code(), Some(2));
}
