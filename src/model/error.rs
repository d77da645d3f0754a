//! The error type of the model boundary: everything that can be wrong with a model file.
//!
//! A [`ModelError`] names the file, the line and column where the problem sits (when the TOML
//! parser or a span locates it), what is wrong in plain words, and how to fix it. It never
//! prints and never exits; the binary decides how to show it (exit status 2).

use std::fmt;
use std::path::{Path, PathBuf};

/// A place in a model file, 1-based.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Position {
    pub line: usize,
    pub column: usize,
}

impl Position {
    /// Line and column of byte `offset` in `source`.
    pub fn of_offset(source: &str, offset: usize) -> Self {
        let offset = offset.min(source.len());
        let before = &source.as_bytes()[..offset];
        let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
        let line_start = before
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |i| i + 1);
        let column = String::from_utf8_lossy(&before[line_start..])
            .chars()
            .count()
            + 1;
        Self { line, column }
    }
}

/// Why a model file was rejected.
#[derive(Debug, thiserror::Error)]
pub enum ModelError {
    /// The file could not be read at all.
    #[error("{}: cannot read the model file: {source}\n  fix: check the path and its permissions", path.display())]
    Unreadable {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The file was read but its content is not a valid model.
    #[error("{0}")]
    Invalid(Diagnostic),
}

/// One located problem in a model file.
#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostic {
    pub path: PathBuf,
    pub position: Option<Position>,
    /// What is wrong, in plain words.
    pub problem: String,
    /// What to change to make the file valid.
    pub fix: String,
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.path.display())?;
        if let Some(p) = self.position {
            write!(f, ":{}:{}", p.line, p.column)?;
        }
        write!(f, ": {}\n  fix: {}", self.problem, self.fix)
    }
}

impl ModelError {
    /// A located problem; `offset` is a byte offset into `source` when the place is known.
    pub fn at(
        path: &Path,
        source: &str,
        offset: Option<usize>,
        problem: impl Into<String>,
        fix: impl Into<String>,
    ) -> Self {
        Self::Invalid(Diagnostic {
            path: path.to_path_buf(),
            position: offset.map(|o| Position::of_offset(source, o)),
            problem: problem.into(),
            fix: fix.into(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn position_counts_lines_and_characters() {
        let src = "a = 1\nbé = 2\n";
        assert_eq!(Position::of_offset(src, 0), Position { line: 1, column: 1 });
        let off = src.find('=').unwrap();
        assert_eq!(
            Position::of_offset(src, off),
            Position { line: 1, column: 3 }
        );
        let off = src.rfind('=').unwrap();
        assert_eq!(
            Position::of_offset(src, off),
            Position { line: 2, column: 4 }
        );
    }
}
