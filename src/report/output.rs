//! Writing result files atomically and turning serialisable reports into JSON.
//!
//! Owns the only file writes of the library: each file is written to a temporary sibling and
//! renamed into place, so a reader never sees a half-written result and an interrupted run
//! leaves nothing partial behind.

use std::io::Write;
use std::path::{Path, PathBuf};

/// Errors of the output boundary.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("cannot write {}: {source}", path.display())]
    Write {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("cannot encode the report as JSON: {0}")]
    Json(#[from] serde_json::Error),
}

/// Writes `contents` to `path` via a temporary file in the same folder and a rename.
pub fn write_atomic(path: &Path, contents: &[u8]) -> Result<(), OutputError> {
    let wrap = |source| OutputError::Write {
        path: path.to_path_buf(),
        source,
    };
    if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
        std::fs::create_dir_all(parent).map_err(wrap)?;
    }
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let temporary = path.with_file_name(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut file = std::fs::File::create(&temporary)?;
        file.write_all(contents)?;
        file.sync_all()?;
        std::fs::rename(&temporary, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&temporary);
    }
    result.map_err(wrap)
}

/// `text` with every control character other than newline and tab (terminal escape
/// sequences, carriage returns, bells; C0, DEL and C1) replaced by U+FFFD, so that a title or a
/// name from a model file cannot drive the terminal that shows a report.
pub fn printable(text: &str) -> std::borrow::Cow<'_, str> {
    let unsafe_char = |c: char| c.is_control() && c != '\n' && c != '\t';
    if text.chars().any(unsafe_char) {
        std::borrow::Cow::Owned(
            text.chars()
                .map(|c| if unsafe_char(c) { '\u{fffd}' } else { c })
                .collect(),
        )
    } else {
        std::borrow::Cow::Borrowed(text)
    }
}

/// Pretty JSON with a trailing newline.
pub fn to_json<T: serde::Serialize>(value: &T) -> Result<String, OutputError> {
    let mut text = serde_json::to_string_pretty(value)?;
    text.push('\n');
    Ok(text)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_characters_are_not_printed() {
        assert_eq!(printable("a\tb\nc"), "a\tb\nc");
        assert_eq!(
            printable("x\u{1b}[2Jy\r\u{7}\u{9b}"),
            "x\u{fffd}[2Jy\u{fffd}\u{fffd}\u{fffd}"
        );
    }

    #[test]
    fn atomic_write_replaces_and_leaves_no_temporary() {
        let dir = std::env::temp_dir().join(format!("ergopath-out-{}", std::process::id()));
        let path = dir.join("sub/a.txt");
        write_atomic(&path, b"one").unwrap();
        write_atomic(&path, b"two").unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "two");
        let leftovers = std::fs::read_dir(path.parent().unwrap()).unwrap().count();
        assert_eq!(leftovers, 1);
        std::fs::remove_dir_all(dir).unwrap();
    }
}
