//! `report.md`: a short results report for one model's folder (each text report in a code
//! block, its chart beside it), so that a reader sees every result and plot on one page. Built
//! only from the reports the folder's [`Manifest`] lists (the files this tool wrote there),
//! never from whatever else lies in the folder.

use super::output::Manifest;

/// Order in which reports appear (others follow alphabetically).
const ORDER: [&str; 4] = ["steady", "bound", "design", "sweep"];

/// The reports `manifest` lists that `keep` accepts, in the order of the results pages
/// ([`ORDER`], then alphabetical).
pub(crate) fn ordered_stems(manifest: &Manifest, keep: impl Fn(&str) -> bool) -> Vec<&str> {
    let mut stems: Vec<&str> = manifest
        .reports
        .keys()
        .map(String::as_str)
        .filter(|name| keep(name))
        .collect();
    let rank = |s: &str| {
        ORDER
            .iter()
            .position(|o| s.starts_with(o))
            .unwrap_or(ORDER.len())
    };
    stems.sort_by(|a, b| rank(a).cmp(&rank(b)).then_with(|| a.cmp(b)));
    stems
}

/// The markdown report of the reports `manifest` lists, titled with the model's title.
/// `text_of(name)` gives the text report `<name>.txt` (`None`: the report is left out).
pub fn report_markdown(
    title: &str,
    manifest: &Manifest,
    text_of: &mut dyn FnMut(&str) -> std::io::Result<Option<String>>,
) -> std::io::Result<String> {
    let stems = ordered_stems(manifest, |name| manifest.has(name, "txt"));
    let mut out = format!(
        "# Results: {title}\n\nWritten by ergopath beside the JSON and CSV files of this folder; each section is one saved report.\n"
    );
    for stem in stems {
        let Some(text) = text_of(stem)? else {
            continue;
        };
        out.push_str(&format!("\n## {stem}\n\n```\n{}\n```\n", text.trim_end()));
        if manifest.has(stem, "svg") {
            out.push_str(&format!("\n![{stem}]({stem}.svg)\n"));
        }
        let mut data: Vec<String> = ["json", "csv", "dot"]
            .iter()
            .filter(|x| manifest.has(stem, x))
            .map(|x| format!("[{stem}.{x}]({stem}.{x})"))
            .collect();
        // The report's further tables: companion reports `<stem>-<table>` holding only a CSV.
        let prefix = format!("{stem}-");
        for (name, files) in &manifest.reports {
            if name.starts_with(&prefix) && files.len() == 1 && files[0] == format!("{name}.csv") {
                data.push(format!("[{name}.csv]({name}.csv)"));
            }
        }
        if !data.is_empty() {
            out.push_str(&format!("\nData: {}\n", data.join(", ")));
        }
    }
    Ok(out)
}
