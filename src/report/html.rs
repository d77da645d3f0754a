//! `report.html`: one self-contained page per results folder, rebuilt on every `--save` beside
//! `report.md` and from the same list: the reports the folder's [`Manifest`] names (the files
//! this tool wrote there), never whatever else lies in the folder.
//!
//! Owns the page: the model section (title, units, the states and transitions of the saved
//! steady report), every saved table built from its report's CSV form (parsed here, quoted
//! fields included) with a units line, the key figures of each report's JSON, the text form
//! (in a `<pre>`, open where a report has no CSV), every saved SVG picture inlined (prolog and
//! namespace declarations stripped, ids prefixed per picture so that two pictures cannot
//! collide) and a small inline script that sorts a table on a header click.
//!
//! Must not: compute a physical result (presentation only, like the rest of `report/`), read
//! or write a file itself (the caller hands it the listed files and stages the page in the
//! saved set), or refer to anything outside the page (no network, no external script,
//! stylesheet, font or image; a Content-Security-Policy says so to the browser too). Every
//! piece of text that reaches the page is HTML-escaped here: titles and state names come from
//! user files. An SVG holding active content (a script, an event handler, a foreign object, a
//! style sheet or a link out of the page) is not inlined; the page names its file instead.

use super::output::Manifest;
use serde_json::Value;
use std::collections::{HashMap, HashSet};
use std::fmt::Write as _;

/// Largest number of rows a table shows (the CSV file keeps them all).
pub const ROW_LIMIT: usize = 2000;

/// Largest text form shown, in bytes (the `.txt` file keeps it whole).
pub const TEXT_LIMIT: usize = 200_000;

/// Largest number of key figures listed per report.
const FIGURE_LIMIT: usize = 300;

/// Deepest nesting of JSON objects whose scalars are listed as key figures.
const FIGURE_DEPTH: usize = 3;

/// The page of the reports `manifest` lists, titled with the model's title. `file_of(name)`
/// gives the contents of the listed file `name` (e.g. `steady.csv`); `None` leaves it out.
pub fn report_html(
    title: &str,
    manifest: &Manifest,
    file_of: &mut dyn FnMut(&str) -> std::io::Result<Option<String>>,
) -> std::io::Result<String> {
    let stems = super::summary::ordered_stems(manifest, |_| true);
    let mut ids = Ids::default();
    let mut read = |stem: &str, form: &str| -> std::io::Result<Option<String>> {
        if manifest.has(stem, form) {
            file_of(&format!("{stem}.{form}"))
        } else {
            Ok(None)
        }
    };
    let mut reports = Vec::with_capacity(stems.len());
    for stem in &stems {
        let json = read(stem, "json")?.and_then(|t| serde_json::from_str::<Value>(&t).ok());
        reports.push(Saved {
            stem,
            text: read(stem, "txt")?,
            csv: read(stem, "csv")?,
            svg: read(stem, "svg")?,
            json,
            files: manifest.reports.get(*stem).cloned().unwrap_or_default(),
        });
    }
    let model_units = reports
        .iter()
        .find_map(|r| r.json.as_ref().and_then(units_line));
    let mut body = String::new();
    let _ = write!(
        body,
        "<header>\n<h1>Results: {}</h1>\n<p class=\"note\">Written by ergopath from the reports listed in this folder's manifest.json; each section is one saved report. Click a column header to sort a table.</p>\n",
        escape(title)
    );
    body.push_str("<nav><ul>\n<li><a href=\"#model\">model</a></li>\n");
    for r in &reports {
        let _ = writeln!(
            body,
            "<li><a href=\"#{}\">{}</a></li>",
            ids.section(r.stem),
            escape(r.stem)
        );
    }
    body.push_str("</ul></nav>\n</header>\n");
    body.push_str(&model_section(
        title,
        &reports,
        model_units.as_deref(),
        &mut ids,
    ));
    for r in &reports {
        body.push_str(&report_section(r, model_units.as_deref(), &mut ids));
    }
    Ok(format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data:\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>Results: {}</title>\n<style>\n{STYLE}</style>\n</head>\n<body data-ready=\"0\">\n{body}<script>\n{SCRIPT}</script>\n</body>\n</html>\n",
        escape(title)
    ))
}

/// One listed report and the forms of it that could be read.
struct Saved<'a> {
    stem: &'a str,
    text: Option<String>,
    csv: Option<String>,
    svg: Option<String>,
    json: Option<Value>,
    /// The report's files as the manifest lists them.
    files: Vec<String>,
}

/// Element ids of the page: derived from report names (letters, digits, `-` and `_` kept),
/// each used once; a report's section keeps the id it was first given.
#[derive(Default)]
struct Ids {
    used: HashSet<String>,
    sections: HashMap<String, String>,
}

impl Ids {
    fn unique(&mut self, wanted: &str) -> String {
        let base: String = wanted
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                    c
                } else {
                    '-'
                }
            })
            .collect();
        let mut id = base.clone();
        let mut n = 2;
        while !self.used.insert(id.clone()) {
            id = format!("{base}-{n}");
            n += 1;
        }
        id
    }

    /// The id of report `stem`'s section.
    fn section(&mut self, stem: &str) -> String {
        if let Some(id) = self.sections.get(stem) {
            return id.clone();
        }
        let id = self.unique(&format!("r-{stem}"));
        self.sections.insert(stem.to_string(), id.clone());
        id
    }
}

/// `text` safe in HTML text and in quoted attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// The rows of CSV `text` (RFC 4180: fields separated by commas, a field in double quotes may
/// hold commas, line breaks and doubled quotes; `\r\n` or `\n` ends a record). `None` when a
/// quoted field is never closed or a quote follows text inside a field.
pub fn parse_csv(text: &str) -> Option<Vec<Vec<String>>> {
    let mut rows = Vec::new();
    let mut row = Vec::new();
    let mut field = String::new();
    let mut chars = text.chars().peekable();
    // Whether the current field was quoted, and whether anything of the record was read.
    let (mut quoted, mut started) = (false, false);
    while let Some(c) = chars.next() {
        match c {
            '"' if field.is_empty() && !quoted => {
                quoted = true;
                started = true;
                loop {
                    match chars.next()? {
                        '"' if chars.peek() == Some(&'"') => {
                            chars.next();
                            field.push('"');
                        }
                        '"' => break,
                        other => field.push(other),
                    }
                }
            }
            '"' => return None,
            ',' => {
                row.push(std::mem::take(&mut field));
                quoted = false;
                started = true;
            }
            '\r' if chars.peek() == Some(&'\n') => {}
            '\n' => {
                row.push(std::mem::take(&mut field));
                rows.push(std::mem::take(&mut row));
                quoted = false;
                started = false;
            }
            // Text after a closing quote: not CSV.
            _ if quoted => return None,
            c => {
                field.push(c);
                started = true;
            }
        }
    }
    if started {
        row.push(field);
        rows.push(row);
    }
    Some(rows)
}

/// Whether `cell` is a number as this tool writes them (integer, decimal or scientific).
fn numeric(cell: &str) -> Option<f64> {
    let plain = !cell.is_empty()
        && cell
            .chars()
            .all(|c| c.is_ascii_digit() || matches!(c, '.' | 'e' | 'E' | '-' | '+'));
    plain.then(|| cell.parse::<f64>().ok()).flatten()
}

/// A table cell: numbers shown with five significant digits, the value as written kept in
/// `data-v` (what sorting uses) and in the tooltip.
fn cell(text: &str) -> String {
    match numeric(text) {
        Some(x) if text.contains(['.', 'e', 'E']) => {
            let v = escape(text);
            format!(
                "<td class=\"num\" data-v=\"{v}\" title=\"{v}\">{}</td>",
                escape(&super::table::num(x))
            )
        }
        Some(_) => {
            let v = escape(text);
            format!("<td class=\"num\" data-v=\"{v}\">{v}</td>")
        }
        None => format!("<td>{}</td>", escape(text)),
    }
}

/// A sortable table with its caption and units line; at most [`ROW_LIMIT`] rows are shown.
fn table(id: &str, caption: &str, units: &str, header: &[String], rows: &[Vec<String>]) -> String {
    let mut out = format!(
        "<div class=\"table\">\n<p class=\"units\">{}</p>\n<table class=\"sortable\" id=\"{}\">\n<caption>{}</caption>\n<thead><tr>",
        escape(units),
        escape(id),
        escape(caption)
    );
    for (i, name) in header.iter().enumerate() {
        let _ = write!(
            out,
            "<th data-col=\"{i}\" aria-sort=\"none\" title=\"sort by this column\">{}</th>",
            escape(name)
        );
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in rows.iter().take(ROW_LIMIT) {
        out.push_str("<tr>");
        for i in 0..header.len().max(row.len()) {
            out.push_str(&cell(row.get(i).map(String::as_str).unwrap_or("")));
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n");
    if rows.len() > ROW_LIMIT {
        let _ = writeln!(
            out,
            "<p class=\"note\">The first {ROW_LIMIT} of {} rows; the CSV file holds them all (sorting orders the rows shown).</p>",
            rows.len()
        );
    }
    out.push_str("</div>\n");
    out
}

/// "Units: ..." of a report's JSON `units` object.
fn units_line(json: &Value) -> Option<String> {
    let u = json.get("units")?;
    let text = |key: &str| u.get(key).and_then(Value::as_str).map(str::to_string);
    let temperature = u
        .get("temperature")
        .and_then(Value::as_f64)
        .map(|t| format!("; temperature {t} K"))
        .unwrap_or_default();
    Some(format!(
        "Units: energies in {}, times in {}, rates per {}, powers in {}{temperature}.",
        text("energy")?,
        text("time")?,
        text("time")?,
        text("power")?,
    ))
}

/// The units line of a table of report `json`: its own units, else the model's, else a note.
fn units_of(json: Option<&Value>, model_units: Option<&str>) -> String {
    match (json.and_then(units_line), model_units) {
        (Some(own), _) => own,
        (None, Some(model)) => format!("{model} (the model's units; this report states none)"),
        (None, None) => "Units: as in the column headers (this report states none).".into(),
    }
}

/// The model section: title, units and the states and transitions of the saved steady report.
fn model_section(
    title: &str,
    reports: &[Saved],
    model_units: Option<&str>,
    ids: &mut Ids,
) -> String {
    let mut out = format!(
        "<section id=\"model\">\n<h2>Model: {}</h2>\n",
        escape(title)
    );
    let steady = reports
        .iter()
        .find(|r| r.stem == "steady")
        .and_then(|r| r.json.as_ref());
    let Some(steady) = steady else {
        let _ = writeln!(
            out,
            "<p class=\"units\">{}</p>",
            escape(model_units.unwrap_or("Units: not stated by any saved report."))
        );
        out.push_str("<p class=\"note\">No steady report is saved here: <code>ergopath steady MODEL --save</code> lists the states and transitions in this section.</p>\n</section>\n");
        return out;
    };
    let units = units_of(Some(steady), model_units);
    let listed = |key: &str, columns: &[&str]| -> Option<(Vec<String>, Vec<Vec<String>>)> {
        let items = steady.get(key)?.as_array()?;
        let present: Vec<&str> = columns
            .iter()
            .copied()
            .filter(|c| items.iter().any(|i| i.get(c).is_some()))
            .collect();
        let rows = items
            .iter()
            .map(|item| {
                present
                    .iter()
                    .map(|c| item.get(c).map(scalar).unwrap_or_default())
                    .collect()
            })
            .collect();
        Some((present.iter().map(|c| c.to_string()).collect(), rows))
    };
    if let Some((header, rows)) = listed("states", &["name", "probability", "ln_probability"]) {
        out.push_str(&table(
            &ids.unique("model-states"),
            &format!(
                "States ({}), with their steady-state probability (steady.json)",
                rows.len()
            ),
            &units,
            &header,
            &rows,
        ));
    }
    let columns = ["from", "to", "label", "flux", "work_rate", "drive_rate"];
    if let Some((header, rows)) = listed("transitions", &columns) {
        out.push_str(&table(
            &ids.unique("model-transitions"),
            &format!(
                "Transitions ({}): net flux, work and drive rates in the steady state (steady.json)",
                rows.len()
            ),
            &units,
            &header,
            &rows,
        ));
    }
    out.push_str("</section>\n");
    out
}

/// A JSON scalar as a cell's text (numbers as written, strings bare, `null` empty).
fn scalar(value: &Value) -> String {
    match value {
        Value::String(s) => s.clone(),
        Value::Null => String::new(),
        other => other.to_string(),
    }
}

/// The scalar fields of a report's JSON, objects entered up to [`FIGURE_DEPTH`] levels (keys
/// joined by dots); lists, the title and the units are left out.
fn figures(json: &Value) -> Vec<Vec<String>> {
    fn walk(value: &Value, at: &str, depth: usize, out: &mut Vec<Vec<String>>) {
        let Value::Object(map) = value else {
            return;
        };
        for (key, item) in map {
            if depth == 0 && (key == "title" || key == "units") {
                continue;
            }
            let name = if at.is_empty() {
                key.clone()
            } else {
                format!("{at}.{key}")
            };
            match item {
                Value::Array(_) => {}
                Value::Object(_) if depth + 1 < FIGURE_DEPTH => walk(item, &name, depth + 1, out),
                Value::Object(_) => {}
                scalar_item => out.push(vec![name, scalar(scalar_item)]),
            }
        }
    }
    let mut out = Vec::new();
    walk(json, "", 0, &mut out);
    out.truncate(FIGURE_LIMIT);
    out
}

/// A text form in a `<pre>`, cut at [`TEXT_LIMIT`] bytes.
fn pre(text: &str) -> String {
    let mut end = text.len().min(TEXT_LIMIT);
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let cut = if end < text.len() {
        "\n[... cut here: the .txt file holds the whole report]"
    } else {
        ""
    };
    format!("<pre>{}{cut}</pre>\n", escape(text[..end].trim_end()))
}

/// One report's section: table (CSV) or text, key figures, picture, data files.
fn report_section(r: &Saved, model_units: Option<&str>, ids: &mut Ids) -> String {
    let stem = r.stem;
    let section = ids.section(stem);
    let mut out = format!(
        "<section id=\"{}\">\n<h2>{}</h2>\n",
        escape(&section),
        escape(stem)
    );
    let units = units_of(r.json.as_ref(), model_units);
    let parsed = r.csv.as_deref().map(parse_csv);
    match parsed {
        Some(Some(rows)) if !rows.is_empty() => {
            let (header, body) = rows.split_at(1);
            out.push_str(&table(
                &ids.unique(&format!("{stem}-table")),
                &format!("{stem}.csv ({} rows)", body.len()),
                &units,
                &header[0],
                body,
            ));
        }
        Some(_) => {
            let _ = writeln!(
                out,
                "<p class=\"note\">{}.csv is not a table this page can read; the file itself is unchanged.</p>",
                escape(stem)
            );
        }
        None => {}
    }
    if let Some(text) = &r.text {
        if r.csv.is_some() {
            let _ = write!(
                out,
                "<details><summary>Text report ({}.txt)</summary>\n{}</details>\n",
                escape(stem),
                pre(text)
            );
        } else {
            out.push_str(&pre(text));
        }
    }
    if let Some(json) = &r.json {
        let rows = figures(json);
        if !rows.is_empty() {
            out.push_str(&table(
                &ids.unique(&format!("{stem}-figures")),
                &format!("Key figures of {stem}.json"),
                &units,
                &["key".to_string(), "value".to_string()],
                &rows,
            ));
        }
    }
    if let Some(svg) = &r.svg {
        let prefix = ids.unique(&format!("{stem}-svg"));
        match inline_svg(svg, &prefix) {
            Some(inlined) => {
                let _ = write!(
                    out,
                    "<figure id=\"{}\">\n{inlined}\n<figcaption>{}.svg</figcaption>\n</figure>\n",
                    escape(&prefix),
                    escape(stem)
                );
            }
            None => {
                let _ = writeln!(
                    out,
                    "<p class=\"note\">{}.svg is not shown here: it holds content this page does not inline (a script, a style sheet or a link).</p>",
                    escape(stem)
                );
            }
        }
    }
    let data: Vec<String> = r
        .files
        .iter()
        .map(|name| {
            format!(
                "<a href=\"./{}\">{}</a>",
                escape(&percent_encoded(name)),
                escape(name)
            )
        })
        .collect();
    if !data.is_empty() {
        let _ = writeln!(out, "<p class=\"data\">Files: {}</p>", data.join(", "));
    }
    out.push_str("</section>\n");
    out
}

/// A file name as a relative URL (bytes outside letters, digits and `-._~` percent-encoded).
fn percent_encoded(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for b in name.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'.' | b'_' | b'~') {
            out.push(b as char);
        } else {
            let _ = write!(out, "%{b:02X}");
        }
    }
    out
}

/// `svg` ready to sit inside the page: anything before `<svg` (an XML prolog, a doctype,
/// comments) and after `</svg>` dropped, namespace declarations removed (HTML knows the SVG
/// namespace), every `id` and the references to it (`url(#x)`, `href="#x"`) prefixed with
/// `prefix`. `None` for active content or links out of the picture.
pub fn inline_svg(svg: &str, prefix: &str) -> Option<String> {
    let start = svg.find("<svg")?;
    let end = svg.rfind("</svg>")? + "</svg>".len();
    if end <= start {
        return None;
    }
    let body = &svg[start..end];
    let lower = body.to_ascii_lowercase();
    let active = [
        "<script",
        "<foreignobject",
        "<style",
        "<iframe",
        "javascript:",
        "<!entity",
    ]
    .iter()
    .any(|bad| lower.contains(bad))
        || has_event_handler(&lower);
    if active {
        return None;
    }
    let body = remove_namespaces(body);
    // After the namespaces, a remaining link out of the picture is refused.
    let lower = body.to_ascii_lowercase();
    for attr in ["href=\"", "href='"] {
        let mut rest = lower.as_str();
        while let Some(at) = rest.find(attr) {
            rest = &rest[at + attr.len()..];
            if !rest.starts_with('#') {
                return None;
            }
        }
    }
    Some(prefix_ids(&body, prefix))
}

/// Whether a tag in `lower` (lower case) carries an `on...=` attribute.
fn has_event_handler(lower: &str) -> bool {
    let bytes = lower.as_bytes();
    let mut in_tag = false;
    let mut quote = None;
    for (i, &b) in bytes.iter().enumerate() {
        match (in_tag, quote, b) {
            (_, Some(q), _) if b == q => quote = None,
            (_, Some(_), _) => {}
            (false, None, b'<') => in_tag = true,
            (true, None, b'>') => in_tag = false,
            (true, None, b'"' | b'\'') => quote = Some(b),
            (true, None, c) if c.is_ascii_whitespace() => {
                let rest = &bytes[i + 1..];
                if rest.starts_with(b"on") {
                    let name_end = rest[2..]
                        .iter()
                        .position(|c| !c.is_ascii_alphabetic())
                        .map_or(rest.len(), |p| p + 2);
                    let after = rest[name_end..].iter().find(|c| !c.is_ascii_whitespace());
                    if name_end > 2 && after == Some(&b'=') {
                        return true;
                    }
                }
            }
            _ => {}
        }
    }
    false
}

/// `body` without `xmlns="..."` and `xmlns:name="..."` attributes.
fn remove_namespaces(body: &str) -> String {
    let mut out = String::with_capacity(body.len());
    let mut rest = body;
    while let Some(at) = rest.find(" xmlns") {
        out.push_str(&rest[..at]);
        let after = &rest[at + " xmlns".len()..];
        let value = after.find('=').and_then(|eq| {
            let name = &after[..eq];
            let valid = name.is_empty()
                || (name.starts_with(':') && name[1..].chars().all(|c| c.is_alphanumeric()));
            let quoted = &after[eq + 1..];
            let q = quoted.chars().next().filter(|c| *c == '"' || *c == '\'')?;
            let close = quoted[1..].find(q)?;
            valid.then_some(eq + 1 + close + 2)
        });
        match value {
            Some(len) => rest = &after[len..],
            None => {
                out.push_str(" xmlns");
                rest = after;
            }
        }
    }
    out.push_str(rest);
    out
}

/// `body` with every `id="x"` renamed `prefix-x`, and `url(#x)` and `href="#x"` with it.
fn prefix_ids(body: &str, prefix: &str) -> String {
    let mut out = body.to_string();
    for (from, to) in [
        (" id=\"", format!(" id=\"{prefix}-")),
        ("url(#", format!("url(#{prefix}-")),
        ("href=\"#", format!("href=\"#{prefix}-")),
    ] {
        out = out.replace(from, &to);
    }
    out
}

/// The page's style sheet (system fonts only).
const STYLE: &str = r#"body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; margin: 0 auto; max-width: 1100px; padding: 1em 1.5em 4em; color: #1b1b1b; background: #fff; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; border-bottom: 1px solid #ccc; padding-bottom: 0.2em; margin-top: 2em; }
nav ul { list-style: none; padding: 0; display: flex; flex-wrap: wrap; gap: 0.3em 1em; }
.note, .units, .data { color: #555; font-size: 0.92em; }
.units { margin: 0.8em 0 0.3em; }
.table { overflow-x: auto; margin-bottom: 1em; }
table { border-collapse: collapse; font-size: 0.88em; }
caption { text-align: left; font-weight: 600; padding: 0.3em 0; white-space: nowrap; }
th, td { border: 1px solid #ddd; padding: 0.2em 0.55em; }
th { background: #f2f4f7; cursor: pointer; user-select: none; white-space: nowrap; position: sticky; top: 0; }
th[aria-sort="ascending"]::after { content: " \25B2"; }
th[aria-sort="descending"]::after { content: " \25BC"; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tbody tr:nth-child(even) { background: #fafafa; }
pre { background: #f7f7f7; border: 1px solid #e3e3e3; padding: 0.7em; overflow-x: auto; font-size: 0.82em; line-height: 1.3; }
details { margin: 0.6em 0; }
figure { margin: 1em 0; }
figure svg { max-width: 100%; height: auto; }
figcaption { color: #555; font-size: 0.85em; }
"#;

/// Sorting on a header click (numbers by their written value, empty cells last, ties in the
/// original order), `#sort=TABLE:COLUMN:asc|desc` in the address sorts on load; the body's
/// `data-ready` becomes 1 when the script ran, `data-error` records an error.
const SCRIPT: &str = r#"(function () {
  "use strict";
  var body = document.body;
  window.addEventListener("error", function (e) {
    body.setAttribute("data-error", String(e.message || e));
  });
  function value(td) {
    if (!td) { return null; }
    var v = td.getAttribute("data-v");
    if (v === null) { return null; }
    var x = parseFloat(v);
    return isNaN(x) ? null : x;
  }
  function sortTable(table, col, dir) {
    var tbody = table.tBodies[0];
    var rows = Array.prototype.slice.call(tbody.rows);
    var numeric = rows.every(function (r) {
      var c = r.cells[col];
      return !c || c.textContent === "" || value(c) !== null;
    });
    var order = rows.map(function (r, i) { return { row: r, at: i }; });
    order.sort(function (a, b) {
      var ca = a.row.cells[col], cb = b.row.cells[col];
      var ea = !ca || ca.textContent === "", eb = !cb || cb.textContent === "";
      if (ea || eb) { return ea === eb ? a.at - b.at : (ea ? 1 : -1); }
      var r;
      if (numeric) {
        var x = value(ca), y = value(cb);
        r = x < y ? -1 : (x > y ? 1 : 0);
      } else {
        r = ca.textContent.localeCompare(cb.textContent);
      }
      return r * dir || a.at - b.at;
    });
    order.forEach(function (o) { tbody.appendChild(o.row); });
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, i) {
      th.setAttribute("aria-sort", i === col ? (dir > 0 ? "ascending" : "descending") : "none");
    });
    table.setAttribute("data-sorted", col + ":" + (dir > 0 ? "asc" : "desc"));
  }
  Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), function (table) {
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, i) {
      th.addEventListener("click", function () {
        sortTable(table, i, th.getAttribute("aria-sort") === "ascending" ? -1 : 1);
      });
    });
  });
  var m = /^#sort=([A-Za-z0-9_-]+):([0-9]+):(asc|desc)$/.exec(window.location.hash);
  if (m) {
    var table = document.getElementById(m[1]);
    if (table && table.tHead) {
      sortTable(table, parseInt(m[2], 10), m[3] === "asc" ? 1 : -1);
    } else {
      body.setAttribute("data-error", "no table " + m[1]);
    }
  }
  body.setAttribute("data-ready", "1");
}());
"#;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_fields_may_be_quoted() {
        let rows = parse_csv("a,b,c\n1,\"x, \"\"y\"\"\",\n\"two\nlines\",2,3\r\nlast,,").unwrap();
        assert_eq!(
            rows,
            vec![
                vec!["a", "b", "c"],
                vec!["1", "x, \"y\"", ""],
                vec!["two\nlines", "2", "3"],
                vec!["last", "", ""],
            ]
        );
        assert!(parse_csv("a,\"open\n").is_none());
        assert!(parse_csv("a,\"x\"y\n").is_none());
        assert!(parse_csv("a,b\"c\n").is_none());
        assert_eq!(parse_csv("").unwrap(), Vec::<Vec<String>>::new());
    }

    #[test]
    fn text_is_escaped() {
        assert_eq!(
            escape("<script>alert(1)</script> & \"q\" 'a'"),
            "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;q&quot; &#39;a&#39;"
        );
    }

    #[test]
    fn pictures_lose_their_prolog_and_get_prefixed_ids() {
        let svg = "<?xml version=\"1.0\"?>\n<!-- c -->\n<svg xmlns=\"http://www.w3.org/2000/svg\" xmlns:xlink=\"http://www.w3.org/1999/xlink\" width=\"2\"><defs><marker id=\"a\"/></defs><path marker-end=\"url(#a)\"/><use href=\"#a\"/></svg>\n";
        let inlined = inline_svg(svg, "p1").unwrap();
        assert_eq!(
            inlined,
            "<svg width=\"2\"><defs><marker id=\"p1-a\"/></defs><path marker-end=\"url(#p1-a)\"/><use href=\"#p1-a\"/></svg>"
        );
        for hostile in [
            "<svg><script>alert(1)</script></svg>",
            "<svg><rect onload=\"alert(1)\"/></svg>",
            "<svg><rect ONCLICK = 'x'/></svg>",
            "<svg><style>body{display:none}</style></svg>",
            "<svg><image href=\"https://example.org/x.png\"/></svg>",
            "<svg><a xlink:href=\"javascript:alert(1)\"/></svg>",
            "<svg><foreignObject/></svg>",
        ] {
            assert!(inline_svg(hostile, "p").is_none(), "{hostile}");
        }
        // An attribute value that merely mentions "on" is harmless.
        assert!(inline_svg(
            "<svg><text class=\"x\" data-a=\" onx=1\">on=</text></svg>",
            "p"
        )
        .is_some());
    }

    #[test]
    fn cells_keep_the_written_number() {
        assert_eq!(
            cell("1.370182358979656e1"),
            "<td class=\"num\" data-v=\"1.370182358979656e1\" title=\"1.370182358979656e1\">13.702</td>"
        );
        assert_eq!(cell("7"), "<td class=\"num\" data-v=\"7\">7</td>");
        assert_eq!(cell("a<b"), "<td>a&lt;b</td>");
    }
}
