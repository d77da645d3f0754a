//! Serde types mirroring the TOML model format, exactly as written in the file.
//!
//! These types exist only at the edge: [`super::parse`] turns them into the validated
//! [`super::Model`]. Every table denies unknown keys so a typo is an error, and every value
//! that validation may complain about keeps its span so the message can name line and column.
//! Nothing here checks meaning (ranges, names, LDB).

use serde::Deserialize;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelFile {
    pub title: Option<String>,
    pub temperature: Option<Spanned<f64>>,
    pub energy_unit: Option<Spanned<String>>,
    pub time_unit: Option<Spanned<String>>,
    pub ldb_tolerance: Option<Spanned<f64>>,
    /// Default multiplicative uncertainty (95%) of every forward rate.
    pub rate_uncertainty: Option<Spanned<f64>>,
    /// Default uncertainty (95% half-width, energy unit) of every state energy and nonzero drive.
    pub energy_uncertainty: Option<Spanned<f64>>,
    #[serde(default)]
    pub state: Vec<Spanned<StateEntry>>,
    #[serde(default)]
    pub transition: Vec<Spanned<TransitionEntry>>,
    pub pathways: Option<Spanned<PathwaysEntry>>,
    #[serde(default)]
    pub environment: Vec<Spanned<EnvironmentEntry>>,
    #[serde(default)]
    pub switch: Vec<Spanned<SwitchEntry>>,
}

/// A state of a fluctuating environment (light, dark; fuel present, absent).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnvironmentEntry {
    pub name: Spanned<String>,
}

/// Switching of the environment between two of its states, in both directions.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SwitchEntry {
    pub from: Spanned<String>,
    pub to: Spanned<String>,
    pub forward: Spanned<f64>,
    pub backward: Spanned<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StateEntry {
    pub name: Spanned<String>,
    pub energy: Option<Spanned<f64>>,
    pub energy_uncertainty: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransitionEntry {
    pub from: Spanned<String>,
    pub to: Spanned<String>,
    pub forward: Spanned<f64>,
    pub backward: Option<Spanned<f64>>,
    pub drive: Option<Spanned<f64>>,
    pub work: Option<Spanned<f64>>,
    pub label: Option<String>,
    /// Environment states in which the transition exists (default: all).
    pub environments: Option<Spanned<Vec<String>>>,
    /// Multiplicative uncertainty (95%) of the forward rate.
    pub rate_uncertainty: Option<Spanned<f64>>,
    /// Uncertainty (95% half-width, energy unit) of the drive.
    pub energy_uncertainty: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PathwaysEntry {
    pub pairs: Option<Spanned<PairsEntry>>,
    pub max_pathways: Option<Spanned<i64>>,
    pub rate_cap: Option<Spanned<f64>>,
    pub total_rate: Option<Spanned<f64>>,
    pub work_limit: Option<Spanned<f64>>,
}

/// `pairs = "all"` or `pairs = [["a", "b"], ...]`.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum PairsEntry {
    Keyword(String),
    List(Vec<[String; 2]>),
}

/// Largest model file read, in bytes (64 MB: a million states fit in a few tens of MB).
pub const MODEL_SIZE_LIMIT: u64 = 64 << 20;

/// Why an input file was not read.
#[derive(Debug)]
pub enum ReadProblem {
    /// The operating system refused (missing, no permission...).
    Io(std::io::Error),
    /// A folder, a FIFO, a device or a socket: never read, so nothing blocks or runs forever.
    NotRegular(&'static str),
    /// Larger than the limit, refused before reading.
    TooLarge { size: u64, limit: u64 },
    /// Not UTF-8; the offset of the first invalid byte.
    NotUtf8(usize),
}

impl std::fmt::Display for ReadProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ReadProblem::Io(e) => write!(f, "{e}"),
            ReadProblem::NotRegular(kind) => write!(f, "it is {kind}, not a regular file"),
            ReadProblem::TooLarge { size, limit } => write!(
                f,
                "it has {size} bytes, more than the limit of {} MB",
                limit >> 20
            ),
            ReadProblem::NotUtf8(offset) => {
                write!(f, "it is not UTF-8 text (invalid byte at offset {offset})")
            }
        }
    }
}

/// What kind of non-regular file `t` is, in words.
fn kind_of(t: std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a FIFO (named pipe)";
        }
        if t.is_char_device() || t.is_block_device() {
            return "a device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if t.is_dir() {
        "a folder"
    } else {
        "not a regular file"
    }
}

/// Reads the UTF-8 text of the regular file `path` (links are followed) of at most `limit`
/// bytes. Folders, FIFOs and devices are refused before anything is read (the file is opened
/// without blocking), and so is a file larger than `limit`; the read itself stops at `limit`
/// bytes even if the file grows meanwhile.
pub fn read_text_file(path: &std::path::Path, limit: u64) -> Result<String, ReadProblem> {
    use std::io::Read;
    let before = std::fs::metadata(path).map_err(ReadProblem::Io)?;
    if !before.is_file() {
        return Err(ReadProblem::NotRegular(kind_of(before.file_type())));
    }
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(rustix::fs::OFlags::NONBLOCK.bits() as i32);
    }
    let file = options.open(path).map_err(ReadProblem::Io)?;
    // What was opened may differ from what was looked at: look again.
    let opened = file.metadata().map_err(ReadProblem::Io)?;
    if !opened.is_file() {
        return Err(ReadProblem::NotRegular(kind_of(opened.file_type())));
    }
    if opened.len() > limit {
        return Err(ReadProblem::TooLarge {
            size: opened.len(),
            limit,
        });
    }
    let mut bytes = Vec::with_capacity(opened.len() as usize);
    file.take(limit + 1)
        .read_to_end(&mut bytes)
        .map_err(ReadProblem::Io)?;
    if bytes.len() as u64 > limit {
        return Err(ReadProblem::TooLarge {
            size: bytes.len() as u64,
            limit,
        });
    }
    String::from_utf8(bytes).map_err(|e| ReadProblem::NotUtf8(e.utf8_error().valid_up_to()))
}
