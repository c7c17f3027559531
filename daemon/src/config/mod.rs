#![allow(dead_code)]
//! The daemon's configuration: a TOML file describing the plant's machines, read with serde and
//! checked completely before anything starts.
//!
//! Loading happens in three steps, each with errors of its own kind, all on one line naming the
//! file and the key:
//!
//! 1. TOML syntax, reported with line and column ([`ConfigError::Syntax`]);
//! 2. keys and types against the structs of `raw` (unknown keys are refused, so a misspelt key
//!    cannot silently leave a setting at its default), located by the span toml gives
//!    ([`ConfigError::Schema`]);
//! 3. values against each other and against what the engine accepts ([`ConfigError::Invalid`]),
//!    giving the validated [`Config`].
//!
//! Relative paths in the file are resolved against the folder the file is in, so a configuration
//! and its data can be moved together. Nothing is created or opened while loading: the daemon
//! creates folders and opens ports when it starts.
//!
//! The validated types ([`model::Machine`] and its parts) are in [`model`]; key paths as errors
//! print them are in [`key`].

mod alerts;
mod channels;
mod check;
mod engine;
mod error;
pub(crate) mod key;
mod locate;
pub(crate) mod model;
mod raw;
mod source;
mod validate;

#[cfg(test)]
mod tests;

pub(crate) use error::ConfigError;
pub(crate) use model::Config;

use std::path::Path;

/// Reads, parses and validates the configuration file at `path`.
pub(crate) fn load(path: &Path) -> Result<Config, ConfigError> {
    let text = std::fs::read_to_string(path).map_err(|source| ConfigError::Read {
        file: path.to_path_buf(),
        source,
    })?;
    parse(&text, path)
}

/// Parses and validates configuration text as if read from `origin`, which names the file in
/// errors and is the base of relative paths.
pub(crate) fn parse(text: &str, origin: &Path) -> Result<Config, ConfigError> {
    let tree: locate::Node = toml::from_str(text).map_err(|e| {
        let span = e.span().unwrap_or(0..0);
        let (line, column) = locate::line_column(text, span.start);
        let mut message = error::one_line(e.message());
        // Some messages ("duplicate key") do not say which; the text at fault does.
        if let Some(at) = text
            .get(span)
            .filter(|t| !t.trim().is_empty() && t.len() <= 40 && !t.contains('\n'))
        {
            message = format!("{message} (at `{}`)", at.trim().escape_debug());
        }
        ConfigError::Syntax {
            file: origin.to_path_buf(),
            line,
            column,
            message,
        }
    })?;
    let raw: raw::RawConfig = toml::from_str(text).map_err(|e| {
        let pos = e.span().map_or(0, |s| s.start);
        let (line, column) = locate::line_column(text, pos);
        ConfigError::Schema {
            file: origin.to_path_buf(),
            key: locate::path_at(&tree, pos),
            line,
            column,
            message: error::one_line(e.message()),
        }
    })?;
    validate::config(raw, origin)
}
