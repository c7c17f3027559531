//! The one error type of the recording readers and writers.
//!
//! Every message is a single line that names the file, and for CSV the line and column, so the
//! command line can print it as is and the user knows where to look without a debugger.

use std::fmt;
use std::path::{Path, PathBuf};

/// Why a recording could not be opened, read or written.
///
/// Each variant carries the path as the user gave it; `Display` is one line meant for a person.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DecodeError {
    /// The operating system refused a read, write or seek. The OS error is part of the message
    /// and deliberately not a `source`, so a printed error chain says it once.
    #[error("{}: {error}", path.display())]
    Io {
        /// The file being read or written.
        path: PathBuf,
        /// What the operating system said.
        error: std::io::Error,
    },
    /// The file holds no bytes at all (or only blank lines).
    #[error("{}: the file is empty", path.display())]
    Empty {
        /// The file.
        path: PathBuf,
    },
    /// A CSV file has a header row but no data rows.
    #[error("{}: the file has a header row but no data rows", path.display())]
    NoData {
        /// The file.
        path: PathBuf,
    },
    /// A field of a CSV data row is empty, not a number, or not finite.
    #[error("{} line {line}: column '{column}': {problem}", path.display())]
    BadValue {
        /// The file.
        path: PathBuf,
        /// 1-based line number in the file (the header is line 1).
        line: u64,
        /// The column's header name, or its index when it has none.
        column: String,
        /// What is wrong with the field.
        problem: ValueProblem,
    },
    /// A CSV data row has more or fewer fields than the header.
    #[error("{} line {line}: expected {expected} fields like the header, found {found}", path.display())]
    FieldCount {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: u64,
        /// Fields in the header.
        expected: usize,
        /// Fields on this line.
        found: usize,
    },
    /// The time column is not evenly spaced, so it cannot stand for one sample rate.
    #[error(
        "{} line {line}: time step is {} s but the file's step is {} s \
         (more than 1 % apart): samples must be evenly spaced, or give --rate HZ",
        path.display(), short(*step_s), short(*expected_s)
    )]
    UnevenTime {
        /// The file.
        path: PathBuf,
        /// 1-based line number of the later of the two rows.
        line: u64,
        /// Time between this row and the one before.
        step_s: f64,
        /// The step the file started with.
        expected_s: f64,
    },
    /// The time column stands still or runs backwards between the first two rows.
    #[error(
        "{} line {line}: time does not increase ({prev_s} s, then {next_s} s)",
        path.display()
    )]
    TimeNotIncreasing {
        /// The file.
        path: PathBuf,
        /// 1-based line number of the second row.
        line: u64,
        /// Time on the row before.
        prev_s: f64,
        /// Time on this row.
        next_s: f64,
    },
    /// No way to know the sample rate: no time column and no `--rate`.
    #[error("{}: {reason}; give the sample rate with --rate HZ", path.display())]
    NoRate {
        /// The file.
        path: PathBuf,
        /// Why the file itself does not give the rate.
        reason: String,
    },
    /// A sample rate was given or found but is not a positive finite number.
    #[error("{}: sample rate {rate} Hz is not usable: it must be positive and finite", path.display())]
    BadRate {
        /// The file.
        path: PathBuf,
        /// The rejected rate.
        rate: f64,
    },
    /// A column asked for by name or index does not exist, is ambiguous, or is the time column.
    #[error("{}: {problem}; available columns: {available}", path.display())]
    NoColumn {
        /// The file.
        path: PathBuf,
        /// What the user asked for.
        column: String,
        /// Why it cannot be used, naming it.
        problem: String,
        /// The columns that can be asked for, with their indices.
        available: String,
    },
    /// The CSV header or a WAV header is malformed.
    #[error("{}: {what}", path.display())]
    Malformed {
        /// The file.
        path: PathBuf,
        /// What is malformed, for a person.
        what: String,
    },
    /// A well-formed WAV file in an encoding this reader does not decode.
    #[error("{}: unsupported WAV encoding: {what}", path.display())]
    Unsupported {
        /// The file.
        path: PathBuf,
        /// The encoding found.
        what: String,
    },
    /// The WAV data chunk ends before the length its header gives; everything present was
    /// delivered before this error.
    #[error("{}: truncated: header says {expected} frames, file holds {found}", path.display())]
    Truncated {
        /// The file.
        path: PathBuf,
        /// Frames the data chunk header announces.
        expected: u64,
        /// Whole frames actually in the file.
        found: u64,
    },
    /// A float WAV sample (or a value given to a writer) is NaN or infinite.
    #[error("{}: frame {frame}, channel {channel}: sample is {value}, not a finite number", path.display())]
    NotFinite {
        /// The file.
        path: PathBuf,
        /// 0-based frame index.
        frame: u64,
        /// The channel's name (WAV: its index).
        channel: String,
        /// The value, printed.
        value: f32,
    },
    /// The caller asked for something impossible (a column index out of range, buffers that do
    /// not match the columns, a writer fed ragged columns).
    #[error("{}: {what}", path.display())]
    Usage {
        /// The file.
        path: PathBuf,
        /// What was wrong with the request.
        what: String,
    },
}

/// What is wrong with one CSV field; kept apart from the message so tests and callers can match.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ValueProblem {
    /// Nothing between two separators.
    Empty,
    /// Text that is not a decimal number (shown, shortened, escaped).
    NotANumber(String),
    /// NaN, infinity, or a value beyond the range of the sample type.
    NotFinite(String),
}

impl fmt::Display for ValueProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ValueProblem::Empty => f.write_str("empty field"),
            ValueProblem::NotANumber(s) => write!(f, "not a number: {s:?}"),
            ValueProblem::NotFinite(s) => write!(f, "not a finite number: {s:?}"),
        }
    }
}

impl ValueProblem {
    /// Keeps the shown field text short and on one line whatever the file holds.
    pub(crate) fn shown(bytes: &[u8]) -> String {
        const MAX: usize = 40;
        let text = String::from_utf8_lossy(bytes);
        if text.chars().count() > MAX {
            let mut s: String = text.chars().take(MAX).collect();
            s.push('…');
            s
        } else {
            text.into_owned()
        }
    }
}

/// A time in seconds to six significant digits, for messages (`0.002`, not `2.0000000001e-3`).
fn short(x: f64) -> String {
    let rounded: f64 = format!("{x:.5e}").parse().unwrap_or(x);
    rounded.to_string()
}

/// Wraps an I/O error with the file's path; used with `map_err`.
pub(crate) fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> DecodeError + '_ {
    move |error| DecodeError::Io {
        path: path.to_path_buf(),
        error,
    }
}
