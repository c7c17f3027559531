//! Key paths such as `machine[2] (fan-2).tach.ppr`: how every configuration error says where it is.
//!
//! The same rendering serves errors found by serde (located from a byte span, see
//! [`super::locate`]) and errors found by validation (built while walking the parsed file), so a
//! user sees one notation whichever stage caught the mistake. Indices count from 0, as in the file's
//! arrays; a machine's index is followed by its id, because "the third machine" is easy to miscount
//! in a long file and the id is what the engineer searches for.

use std::fmt;

/// One step of a key path.
#[derive(Clone, Debug, PartialEq, Eq)]
enum Step {
    /// A table key.
    Key(String),
    /// An array element, with the label (a machine id) that helps find it.
    Index(usize, Option<String>),
}

/// A path from the top of the file to one key or array element.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub(crate) struct KeyPath {
    steps: Vec<Step>,
}

impl KeyPath {
    /// The top of the file (renders as the empty string).
    pub(crate) fn root() -> Self {
        Self::default()
    }

    /// This path followed by a table key.
    pub(crate) fn key(&self, name: &str) -> Self {
        let mut p = self.clone();
        p.steps.push(Step::Key(name.to_string()));
        p
    }

    /// This path followed by an array index.
    pub(crate) fn index(&self, i: usize) -> Self {
        let mut p = self.clone();
        p.steps.push(Step::Index(i, None));
        p
    }

    /// This path followed by an array index labelled with the element's id.
    pub(crate) fn labelled(&self, i: usize, label: &str) -> Self {
        let mut p = self.clone();
        p.steps.push(Step::Index(i, Some(label.to_string())));
        p
    }

    /// The path of `machine[i]`, labelled with its id when it has a usable one.
    pub(crate) fn machine(i: usize, id: &str) -> Self {
        if id.trim().is_empty() {
            Self::root().key("machine").index(i)
        } else {
            Self::root().key("machine").labelled(i, id)
        }
    }

    /// Whether the path names the whole file.
    pub(crate) fn is_root(&self) -> bool {
        self.steps.is_empty()
    }

    /// Whether the path is exactly one top-level key named `name`.
    pub(crate) fn is_root_key(&self, name: &str) -> bool {
        matches!(self.steps.as_slice(), [Step::Key(k)] if k == name)
    }

    /// Number of steps, to prefer the deepest of several candidate locations.
    pub(crate) fn depth(&self) -> usize {
        self.steps.len()
    }
}

/// Whether a key can be written bare in TOML (and so printed without quotes).
fn is_bare(key: &str) -> bool {
    !key.is_empty()
        && key
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
}

impl fmt::Display for KeyPath {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (n, step) in self.steps.iter().enumerate() {
            match step {
                Step::Key(k) => {
                    if n > 0 {
                        f.write_str(".")?;
                    }
                    if is_bare(k) {
                        f.write_str(k)?;
                    } else {
                        // Debug quoting escapes newlines, so the message stays on one line.
                        write!(f, "{k:?}")?;
                    }
                }
                Step::Index(i, None) => write!(f, "[{i}]")?,
                Step::Index(i, Some(label)) if is_bare(label) => write!(f, "[{i}] ({label})")?,
                Step::Index(i, Some(label)) => write!(f, "[{i}] ({label:?})")?,
            }
        }
        Ok(())
    }
}
