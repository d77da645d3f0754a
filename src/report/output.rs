//! Writing result files atomically and turning serialisable reports into JSON.
//!
//! Owns the only file writes of the library. Each file is first written to a temporary file
//! created exclusively (`O_EXCL`, an unguessable name, never through a link) in the target's
//! own folder, then renamed into place, so a reader never sees a half-written result, a planted
//! link is never followed and an error leaves nothing partial behind (the temporary file is
//! removed on every error path). The results folder and its per-model folders are created here
//! and refused when they are symbolic links; a saved result set (the forms of one report, the
//! folder's `report.md`, `report.html` and its `manifest.json`) is staged whole and renamed
//! into place while the folder is locked, so concurrent saves never interleave.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::io::{Read, Write};
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
    /// A path the tool would write through is not what it must be (a link, not a folder, the
    /// model itself): nothing is written.
    #[error("{}: {problem}\n  fix: {fix}", path.display())]
    Refused {
        path: PathBuf,
        problem: String,
        fix: String,
    },
}

impl OutputError {
    /// Whether the error is the user's input (exit status 2) rather than a failed write.
    pub fn is_bad_input(&self) -> bool {
        matches!(self, OutputError::Refused { .. })
    }
}

fn write_error(path: &Path) -> impl Fn(std::io::Error) -> OutputError + '_ {
    move |source| OutputError::Write {
        path: path.to_path_buf(),
        source,
    }
}

/// An error of `tempfile` that it wrapped with the temporary file's random name, as its kind
/// alone (the message names the target instead).
fn plain(error: std::io::Error) -> std::io::Error {
    if error.get_ref().is_some() {
        std::io::Error::from(error.kind())
    } else {
        error
    }
}

/// Prefix of the temporary files of this tool (`.ergopath-XXXXXX.tmp`, random, exclusive).
const TEMPORARY_PREFIX: &str = ".ergopath-";

/// Prefix of the temporary files of a result set, written only under the folder's lock: any
/// such file that the lock holder finds was left by a run that was killed.
const SET_PREFIX: &str = ".ergopath-set-";

/// A file written to an exclusive temporary sibling, waiting to be renamed into place. Dropping
/// it without [`Staged::commit`] removes the temporary file.
pub struct Staged {
    temporary: tempfile::NamedTempFile,
    target: PathBuf,
}

impl Staged {
    /// Renames the temporary file onto its target (replacing a file or a link there, never
    /// writing through it).
    pub fn commit(self) -> Result<(), OutputError> {
        let target = self.target;
        self.temporary
            .persist(&target)
            .map(|_| ())
            .map_err(|e| OutputError::Write {
                path: target.clone(),
                source: plain(e.error),
            })
    }

    /// Like [`Staged::commit`], but fails if the target exists.
    fn commit_new(self) -> Result<(), OutputError> {
        let target = self.target;
        self.temporary
            .persist_noclobber(&target)
            .map(|_| ())
            .map_err(|e| OutputError::Write {
                path: target.clone(),
                source: plain(e.error),
            })
    }
}

/// The folder a file at `path` goes into (`.` for a bare name).
fn folder_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Writes `contents` to an exclusive temporary file beside `path` and syncs it.
pub fn stage(path: &Path, contents: &[u8]) -> Result<Staged, OutputError> {
    stage_with(TEMPORARY_PREFIX, path, contents)
}

/// [`stage`] for a file of a result set, while holding the folder's [`FolderLock`].
pub fn stage_in_set(
    _lock: &FolderLock,
    path: &Path,
    contents: &[u8],
) -> Result<Staged, OutputError> {
    stage_with(SET_PREFIX, path, contents)
}

fn stage_with(prefix: &str, path: &Path, contents: &[u8]) -> Result<Staged, OutputError> {
    let wrap = write_error(path);
    let folder = folder_of(path);
    std::fs::create_dir_all(folder).map_err(&wrap)?;
    if path.file_name().is_none() {
        return Err(OutputError::Refused {
            path: path.to_path_buf(),
            problem: "this names a folder, not a file".into(),
            fix: "give a file name".into(),
        });
    }
    let mut temporary = temporary_builder(prefix)
        .tempfile_in(folder)
        .map_err(|e| wrap(plain(e)))?;
    // Through the plain file, so that errors are the operating system's own.
    temporary.as_file_mut().write_all(contents).map_err(&wrap)?;
    temporary.as_file().sync_all().map_err(&wrap)?;
    Ok(Staged {
        temporary,
        target: path.to_path_buf(),
    })
}

/// The builder of this tool's temporary files: `.ergopath-XXXXXX.tmp`, created exclusively,
/// with the permissions of `File::create` (read-write for all, less the umask) on Unix.
fn temporary_builder(prefix: &str) -> tempfile::Builder<'_, 'static> {
    let mut builder = tempfile::Builder::new();
    builder.prefix(prefix).suffix(".tmp");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    builder
}

/// Writes `contents` to `path` via an exclusive temporary file in the same folder and a rename.
pub fn write_atomic(path: &Path, contents: &[u8]) -> Result<(), OutputError> {
    stage(path, contents)?.commit()
}

/// Writes `contents` to `path` only if nothing is there yet (no race between check and write).
pub fn write_new(path: &Path, contents: &[u8]) -> Result<(), OutputError> {
    stage(path, contents)?.commit_new()
}

/// Largest length of a results folder name, in bytes.
const NAME_LIMIT: usize = 100;

/// Folder names that hold results of no single model.
pub const RESERVED_FOLDERS: [&str; 2] = ["compare", "bench"];

/// A folder name derived from a model file's stem that is safe to join to the results folder:
/// separators and control characters become `_`, leading dots are dropped (no `.`, `..` or
/// hidden folder), the name is at most 100 bytes, an empty result is `model`, and the names of
/// the shared folders (`compare`, `bench`) get `-model` appended.
pub fn safe_name(stem: &str) -> String {
    let replaced: String = stem
        .chars()
        .map(|c| {
            if c.is_control() || matches!(c, '/' | '\\' | ':') {
                '_'
            } else {
                c
            }
        })
        .collect();
    let mut name = replaced.trim_start_matches('.').trim().to_string();
    if name.len() > NAME_LIMIT {
        let mut end = NAME_LIMIT;
        while !name.is_char_boundary(end) {
            end -= 1;
        }
        name.truncate(end);
    }
    if name.is_empty() {
        return "model".into();
    }
    if RESERVED_FOLDERS.contains(&name.as_str()) {
        name.push_str("-model");
    }
    name
}

/// How to mend a results folder that is a link or a file.
const FOLDER_FIX: &str = "remove it (or move it away) so that ergopath can create the folder itself, or run from another folder";

/// Creates `path` as a folder unless it is one; a symbolic link or a file there is refused.
fn ensure_folder(path: &Path) -> Result<(), OutputError> {
    let refused = |problem: &str| OutputError::Refused {
        path: path.to_path_buf(),
        problem: problem.into(),
        fix: FOLDER_FIX.into(),
    };
    for _ in 0..2 {
        match std::fs::symlink_metadata(path) {
            Ok(m) if m.file_type().is_symlink() => {
                return Err(refused(
                    "is a symbolic link; results are never written through a link",
                ))
            }
            Ok(m) if m.is_dir() => return Ok(()),
            Ok(_) => return Err(refused("is not a folder")),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                match std::fs::create_dir(path) {
                    Ok(()) => return Ok(()),
                    // Created meanwhile by someone else: look again at what it is.
                    Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
                    Err(e) => return Err(write_error(path)(e)),
                }
            }
            Err(e) => return Err(write_error(path)(e)),
        }
    }
    Err(refused("changes while it is being created"))
}

/// `root/name`, both created as real folders (never followed through a link); the parents of
/// `root` are created as needed. `name` must come from [`safe_name`] or be a reserved name.
pub fn results_folder(root: &Path, name: &str) -> Result<PathBuf, OutputError> {
    if let Some(parent) = root.parent().filter(|p| !p.as_os_str().is_empty()) {
        std::fs::create_dir_all(parent).map_err(write_error(parent))?;
    }
    ensure_folder(root)?;
    let dir = root.join(name);
    ensure_folder(&dir)?;
    Ok(dir)
}

/// Largest file read back from a results folder (a saved report) or a manifest.
const READ_BACK_LIMIT: u64 = 64 << 20;

/// Opens `path` for reading without following a link and without blocking on a FIFO or a
/// device; `Ok(None)` when it is missing or not a regular file.
fn open_regular(path: &Path) -> std::io::Result<Option<std::fs::File>> {
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        let flags = rustix::fs::OFlags::NOFOLLOW | rustix::fs::OFlags::NONBLOCK;
        options.custom_flags(flags.bits() as i32);
    }
    let file = match options.open(path) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        // A link opened with O_NOFOLLOW fails with ELOOP: not a file this tool wrote.
        #[cfg(unix)]
        Err(e) if e.raw_os_error() == Some(rustix::io::Errno::LOOP.raw_os_error()) => {
            return Ok(None)
        }
        Err(e) => return Err(e),
    };
    Ok(file.metadata()?.is_file().then_some(file))
}

/// The text of a regular file of at most [`READ_BACK_LIMIT`] bytes; `Ok(None)` when it is
/// missing, not a regular file, too large or not UTF-8.
pub fn read_back(path: &Path) -> std::io::Result<Option<String>> {
    let Some(file) = open_regular(path)? else {
        return Ok(None);
    };
    let mut bytes = Vec::new();
    file.take(READ_BACK_LIMIT + 1).read_to_end(&mut bytes)?;
    if bytes.len() as u64 > READ_BACK_LIMIT {
        return Ok(None);
    }
    Ok(String::from_utf8(bytes).ok())
}

/// Name of the manifest of a results folder.
pub const MANIFEST: &str = "manifest.json";

/// How to mend a manifest that ergopath did not write.
const MANIFEST_FIX: &str = "remove it: the next --save writes a new one (and report.md then lists only what is saved from then on)";

/// Version tag of [`Manifest`].
pub const MANIFEST_FORMAT: &str = "ergopath-results/1";

/// What a results folder holds, as written by this tool: each saved report's name and its
/// files (`<name>.txt`, `.json`, `.csv`, `.svg`, `.dot`). `report.md` and `report.html` are
/// built from this list only, never from what else lies in the folder; the manifest is renamed
/// in last, after every file it lists and both reports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    pub format: String,
    pub reports: BTreeMap<String, Vec<String>>,
}

/// Extensions a report's files may have (`dot`: the graph of a network diagram).
pub const REPORT_FORMS: [&str; 5] = ["txt", "json", "csv", "svg", "dot"];

impl Default for Manifest {
    fn default() -> Self {
        Self::new()
    }
}

impl Manifest {
    /// An empty manifest of the current version.
    pub fn new() -> Self {
        Self {
            format: MANIFEST_FORMAT.into(),
            reports: BTreeMap::new(),
        }
    }

    /// The manifest of `dir`: empty when there is none; an error when it is not one this tool
    /// wrote (unknown version, a name that is not `<report>.<form>`).
    pub fn read(dir: &Path) -> Result<Self, OutputError> {
        let path = dir.join(MANIFEST);
        let refused = |problem: String| OutputError::Refused {
            path: path.clone(),
            problem,
            fix: MANIFEST_FIX.into(),
        };
        let exists = std::fs::symlink_metadata(&path).is_ok();
        let text = match read_back(&path).map_err(write_error(&path))? {
            Some(text) => text,
            None if !exists => return Ok(Self::new()),
            None => {
                return Err(refused(
                    "is not a regular UTF-8 file of at most 64 MB (a link, a FIFO, a folder?)"
                        .into(),
                ))
            }
        };
        let manifest: Manifest = serde_json::from_str(&text)
            .map_err(|e| refused(format!("is not a results manifest ({e})")))?;
        if manifest.format != MANIFEST_FORMAT {
            return Err(refused(format!(
                "has format '{}', not '{MANIFEST_FORMAT}'",
                manifest.format
            )));
        }
        for (name, files) in &manifest.reports {
            if safe_report_name(name).is_none() {
                return Err(refused(format!(
                    "lists the report name '{name}', which is not a plain file name"
                )));
            }
            for file in files {
                let ok = REPORT_FORMS
                    .iter()
                    .any(|form| *file == format!("{name}.{form}"));
                if !ok {
                    return Err(refused(format!(
                        "lists '{file}' for report '{name}'; a report's files are {name}.txt, .json, .csv, .svg or .dot"
                    )));
                }
            }
        }
        Ok(manifest)
    }

    /// Whether report `name` has its file of extension `form`.
    pub fn has(&self, name: &str, form: &str) -> bool {
        self.reports
            .get(name)
            .is_some_and(|files| files.iter().any(|f| *f == format!("{name}.{form}")))
    }
}

/// `name` if it is a plain, safe report name (what [`safe_name`] would leave unchanged, apart
/// from the reserved folder names).
pub fn safe_report_name(name: &str) -> Option<&str> {
    let plain = !name.is_empty()
        && !name.starts_with('.')
        && name.len() <= NAME_LIMIT
        && !name
            .chars()
            .any(|c| c.is_control() || matches!(c, '/' | '\\' | ':'));
    plain.then_some(name)
}

/// An exclusive lock on a folder, held until dropped (blocks while another save holds it).
pub struct FolderLock {
    _folder: std::fs::File,
}

/// Locks `dir` against concurrent saves of other runs of this tool.
pub fn lock_folder(dir: &Path) -> Result<FolderLock, OutputError> {
    let folder = std::fs::File::open(dir).map_err(write_error(dir))?;
    #[cfg(unix)]
    loop {
        use rustix::io::Errno;
        match rustix::fs::flock(&folder, rustix::fs::FlockOperation::LockExclusive) {
            Ok(()) => break,
            Err(Errno::INTR) => continue,
            // A file system without locks (some network mounts): the save goes on unlocked;
            // its files are still staged whole and renamed in, manifest last.
            Err(Errno::NOLCK | Errno::OPNOTSUPP | Errno::NOSYS) => break,
            Err(e) => return Err(write_error(dir)(std::io::Error::from(e))),
        }
    }
    Ok(FolderLock { _folder: folder })
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

/// Removes the temporary files of result sets that killed runs left in `dir` (only names of
/// the form `.ergopath-set-*.tmp`, which only the holder of the lock writes; a link of that
/// name is removed, never followed).
pub fn remove_stale_set_files(_lock: &FolderLock, dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name();
        let name = name.to_string_lossy();
        if name.starts_with(SET_PREFIX) && name.ends_with(".tmp") {
            let _ = std::fs::remove_file(entry.path());
        }
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
    fn atomic_write_replaces_and_leaves_no_temporary() {
        let dir = std::env::temp_dir().join(format!("ergopath-out-{}", std::process::id()));
        let path = dir.join("sub/a.txt");
        write_atomic(&path, b"one").unwrap();
        write_atomic(&path, b"two").unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "two");
        let leftovers = std::fs::read_dir(path.parent().unwrap()).unwrap().count();
        assert_eq!(leftovers, 1);
        assert!(write_new(&path, b"three").is_err());
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "two");
        let leftovers = std::fs::read_dir(path.parent().unwrap()).unwrap().count();
        assert_eq!(leftovers, 1);
        std::fs::remove_dir_all(dir).unwrap();
    }

    #[test]
    fn control_characters_are_not_printed() {
        assert_eq!(printable("a\tb\nc"), "a\tb\nc");
        assert_eq!(
            printable("x\u{1b}[2Jy\r\u{7}\u{9b}"),
            "x\u{fffd}[2Jy\u{fffd}\u{fffd}\u{fffd}"
        );
    }

    #[test]
    fn names_are_made_safe() {
        for (stem, safe) in [
            ("..", "model"),
            (".", "model"),
            ("", "model"),
            ("walker", "walker"),
            ("a/b", "a_b"),
            ("..\\x", "_x"),
            (".hidden", "hidden"),
            ("bell\u{7}\u{1b}[31m", "bell__[31m"),
            ("compare", "compare-model"),
            ("bench", "bench-model"),
            ("ü", "ü"),
        ] {
            assert_eq!(safe_name(stem), safe, "{stem:?}");
            assert!(safe_report_name(&safe_name(stem)).is_some());
        }
        let long = "é".repeat(80);
        assert!(safe_name(&long).len() <= NAME_LIMIT);
        assert!(safe_report_name("../x").is_none());
        assert!(safe_report_name(".x").is_none());
    }
}
