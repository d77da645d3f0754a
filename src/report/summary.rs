//! `report.md`: a short results report for one model's folder, rebuilt from whatever reports
//! the folder holds (each text report in a code block, its chart beside it), so that a reader
//! sees every result and plot on one page. Reads only the folder it summarises.

use std::path::Path;

/// Order in which reports appear (others follow alphabetically).
const ORDER: [&str; 4] = ["steady", "bound", "design", "sweep"];

/// The markdown report of `dir` (file names relative to it), titled with the model's title.
pub fn report_markdown(dir: &Path, title: &str) -> std::io::Result<String> {
    let mut stems: Vec<String> = std::fs::read_dir(dir)?
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "txt"))
        .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().into_owned()))
        .collect();
    let rank = |s: &str| {
        ORDER
            .iter()
            .position(|o| s.starts_with(o))
            .unwrap_or(ORDER.len())
    };
    stems.sort_by(|a, b| rank(a).cmp(&rank(b)).then_with(|| a.cmp(b)));
    let mut out = format!(
        "# Results: {title}\n\nWritten by ergopath beside the JSON and CSV files of this folder; each section is one saved report.\n"
    );
    for stem in stems {
        let text = std::fs::read_to_string(dir.join(format!("{stem}.txt")))?;
        out.push_str(&format!("\n## {stem}\n\n```\n{}\n```\n", text.trim_end()));
        if dir.join(format!("{stem}.svg")).exists() {
            out.push_str(&format!("\n![{stem}]({stem}.svg)\n"));
        }
        let data: Vec<String> = ["json", "csv"]
            .iter()
            .filter(|x| dir.join(format!("{stem}.{x}")).exists())
            .map(|x| format!("[{stem}.{x}]({stem}.{x})"))
            .collect();
        if !data.is_empty() {
            out.push_str(&format!("\nData: {}\n", data.join(", ")));
        }
    }
    Ok(out)
}
