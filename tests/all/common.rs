//! Helpers shared by the integration tests: paths, model loading, running the binary.

use ergopath::model::Model;
use std::path::{Path, PathBuf};
use std::process::Output;

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub fn load(relative: &str) -> Model {
    Model::load(&root().join(relative)).unwrap_or_else(|e| panic!("{relative}: {e}"))
}

pub fn parse(text: &str) -> Model {
    Model::parse(text, Path::new("inline.toml")).unwrap_or_else(|e| panic!("{e}"))
}

/// Runs the `ergopath` binary with `args` from the repository root.
pub fn run(args: &[&str]) -> Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_ergopath"))
        .args(args)
        .current_dir(root())
        .output()
        .expect("the ergopath binary runs")
}

/// A fresh scratch folder under the system temporary folder.
pub fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("ergopath-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// `|a - b| <= rel * max(|a|, |b|) + abs`.
pub fn close(a: f64, b: f64, rel: f64, abs: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()) + abs
}

/// Every example model and every random fixture model, as repository-relative paths.
pub fn all_models() -> Vec<String> {
    let mut out = Vec::new();
    for dir in ["problems", "tests/fixtures/models"] {
        let mut here: Vec<String> = std::fs::read_dir(root().join(dir))
            .unwrap()
            .filter_map(|e| {
                let p = e.unwrap().path();
                (p.extension()? == "toml")
                    .then(|| format!("{dir}/{}", p.file_name().unwrap().to_string_lossy()))
            })
            .collect();
        here.sort();
        out.extend(here);
    }
    out
}
