//! Configuration errors: one line each, naming the file and the key (and the line where it is known).

use super::key::KeyPath;
use std::path::PathBuf;
use thiserror::Error;

/// Why a configuration cannot be used. Every message is a single line that starts with the file, so
/// it reads well in a terminal, in the journal and in front of "veer: error: ".
#[derive(Debug, Error)]
#[non_exhaustive]
pub(crate) enum ConfigError {
    /// The file could not be read.
    #[error("{}: cannot read the configuration: {source}", file.display())]
    Read {
        /// The configuration file.
        file: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },
    /// The text is not valid TOML.
    #[error("{} line {line}, column {column}: {message}", file.display())]
    Syntax {
        /// The configuration file.
        file: PathBuf,
        /// Line of the mistake, from 1.
        line: usize,
        /// Column of the mistake, from 1, in characters.
        column: usize,
        /// toml's description, on one line.
        message: String,
    },
    /// Valid TOML whose keys or value types do not match the configuration (a misspelt or missing
    /// key, a string where a number belongs).
    #[error("{} line {line}, column {column}: {}{message}", file.display(), prefix(key))]
    Schema {
        /// The configuration file.
        file: PathBuf,
        /// Where the mistake is.
        key: KeyPath,
        /// Line of the mistake, from 1.
        line: usize,
        /// Column of the mistake, from 1, in characters.
        column: usize,
        /// serde's description, on one line.
        message: String,
    },
    /// A value that has the right type but cannot work (a speed range upside down, an unknown unit).
    #[error("{}: {}{reason}", file.display(), prefix(key))]
    Invalid {
        /// The configuration file.
        file: PathBuf,
        /// The key at fault.
        key: KeyPath,
        /// Why it was refused.
        reason: String,
    },
}

/// `"key: "`, or nothing for the file as a whole.
fn prefix(key: &KeyPath) -> String {
    if key.is_root() {
        String::new()
    } else {
        format!("{key}: ")
    }
}

/// Folds a message from a library onto one line.
pub(super) fn one_line(message: &str) -> String {
    message
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join("; ")
}
