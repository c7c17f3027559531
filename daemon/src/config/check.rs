//! What every check needs: the file being read, the folder relative paths start from, and a few
//! helpers that turn a refused value into an error naming its key.

use super::error::ConfigError;
use super::key::KeyPath;
use std::path::{Path, PathBuf};

/// The context every check needs: which file, and the folder relative paths start from.
pub(super) struct Checker<'a> {
    /// The configuration file, named in every error.
    pub file: &'a Path,
    /// Its folder: the base of relative paths.
    pub base: PathBuf,
}

/// Every check gives a located error or the checked value.
pub(super) type Result<T> = std::result::Result<T, ConfigError>;

impl Checker<'_> {
    /// An error for `key` in this file.
    pub(super) fn bad(&self, key: &KeyPath, reason: impl Into<String>) -> ConfigError {
        ConfigError::Invalid {
            file: self.file.to_path_buf(),
            key: key.clone(),
            reason: reason.into(),
        }
    }

    /// A path from the file, resolved against the configuration file's folder.
    pub(super) fn resolve(&self, key: &KeyPath, text: &str) -> Result<PathBuf> {
        if text.trim().is_empty() {
            return Err(self.bad(key, "must not be empty"));
        }
        let p = Path::new(text);
        Ok(if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.base.join(p)
        })
    }

    /// `lo < v ≤ hi` (also refuses NaN and infinities).
    pub(super) fn above(
        &self,
        key: &KeyPath,
        v: f64,
        lo: f64,
        hi: f64,
        reason: &str,
    ) -> Result<()> {
        if v > lo && v <= hi {
            Ok(())
        } else {
            Err(self.bad(key, format!("{reason} (got {v})")))
        }
    }

    /// `lo ≤ v ≤ hi` (also refuses NaN and infinities).
    pub(super) fn within(
        &self,
        key: &KeyPath,
        v: f64,
        lo: f64,
        hi: f64,
        reason: &str,
    ) -> Result<()> {
        if v >= lo && v <= hi {
            Ok(())
        } else {
            Err(self.bad(key, format!("{reason} (got {v})")))
        }
    }
}

/// Refuses keys that belong to another kind of source or output.
pub(super) fn refuse_others(
    c: &Checker,
    k: &KeyPath,
    what: &str,
    given: &[(&str, bool)],
) -> Result<()> {
    match given.iter().find(|(_, present)| *present) {
        Some((name, _)) => Err(c.bad(&k.key(name), format!("is not a setting of a {what}"))),
        None => Ok(()),
    }
}

/// A key that this kind of source or output needs.
pub(super) fn required<T>(
    c: &Checker,
    k: &KeyPath,
    name: &str,
    value: Option<T>,
    what: &str,
) -> Result<T> {
    value.ok_or_else(|| c.bad(&k.key(name), format!("missing: a {what} needs it")))
}

/// A channel name, trimmed; empty names are refused.
pub(super) fn channel_name(c: &Checker, key: &KeyPath, name: &str) -> Result<String> {
    let n = name.trim();
    if n.is_empty() {
        return Err(c.bad(key, "must name a channel"));
    }
    Ok(n.to_string())
}
