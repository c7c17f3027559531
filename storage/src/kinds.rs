//! The closed sets of words stored in text columns, as Rust enums.
//!
//! Each is stored as the lower-case word shown on its variant, the same word the schema's CHECK
//! constraint allows, so that users querying with SQL read `'run-up'` rather than a number.

use std::fmt;

use rusqlite::types::{FromSql, FromSqlError, FromSqlResult, ToSql, ToSqlOutput, ValueRef};

/// Implements the text form (`as_str`, `parse`, `Display`) and the SQLite conversions of an enum.
macro_rules! text_enum {
    ($name:ident { $($variant:ident => $text:literal),+ $(,)? }) => {
        impl $name {
            /// The word stored in the database and shown to users.
            pub fn as_str(self) -> &'static str {
                match self {
                    $($name::$variant => $text,)+
                }
            }

            /// The variant for a stored word; `None` for a word this code does not know.
            pub fn parse(text: &str) -> Option<Self> {
                match text {
                    $($text => Some($name::$variant),)+
                    _ => None,
                }
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(self.as_str())
            }
        }

        impl ToSql for $name {
            fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
                Ok(ToSqlOutput::from(self.as_str()))
            }
        }

        impl FromSql for $name {
            fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
                let text = value.as_str()?;
                $name::parse(text).ok_or_else(|| {
                    FromSqlError::Other(
                        format!(concat!("unknown ", stringify!($name), " `{}`"), text).into(),
                    )
                })
            }
        }
    };
}

/// The direction of a speed sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum EventKind {
    /// Speed rising: `run-up`.
    RunUp,
    /// Speed falling: `coast-down`.
    CoastDown,
}
text_enum!(EventKind { RunUp => "run-up", CoastDown => "coast-down" });

/// Where ingested data came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum IngestKind {
    /// A capture file dropped into a watched folder: `file`.
    File,
    /// A segment of a live stream (serial line): `stream`.
    Stream,
}
text_enum!(IngestKind { File => "file", Stream => "stream" });

/// How far the processing of an ingested file or segment got.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum IngestStatus {
    /// Started and not finished: `pending`. After a crash, a pending record means its results
    /// were never committed, so the input is processed again.
    Pending,
    /// Processed and its results committed: `done`.
    Done,
    /// Refused or failed, with the error text kept: `failed`.
    Failed,
}
text_enum!(IngestStatus { Pending => "pending", Done => "done", Failed => "failed" });

/// Which form of an nX response a series of vectors holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Series {
    /// As measured: `measured`.
    Measured,
    /// With the slow-roll (runout) vector subtracted: `compensated`.
    Compensated,
}
text_enum!(Series { Measured => "measured", Compensated => "compensated" });

/// Alert severity. veer advises; it never trips anything.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Severity {
    /// `warning`: the margin is getting close.
    Warning,
    /// `alarm`: the margin is breached.
    Alarm,
}
text_enum!(Severity { Warning => "warning", Alarm => "alarm" });

/// Whether an alert still stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum AlertState {
    /// `open`: raised and not yet cleared.
    Open,
    /// `closed`: cleared.
    Closed,
}
text_enum!(AlertState { Open => "open", Closed => "closed" });

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_round_trip() {
        for k in [EventKind::RunUp, EventKind::CoastDown] {
            assert_eq!(EventKind::parse(k.as_str()), Some(k));
        }
        for s in [
            IngestStatus::Pending,
            IngestStatus::Done,
            IngestStatus::Failed,
        ] {
            assert_eq!(IngestStatus::parse(&s.to_string()), Some(s));
        }
        assert_eq!(Severity::parse("alarm"), Some(Severity::Alarm));
        assert_eq!(Severity::parse("Alarm"), None);
        assert!(Severity::Warning < Severity::Alarm);
    }
}
