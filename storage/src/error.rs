//! The one error type of the crate.

use std::path::PathBuf;

use thiserror::Error;

/// A failure of the database: what was being done, to which file, and why.
///
/// Every variant names the database file, because a daemon and its command-line readers may have
/// several databases open over their life and "database is locked" alone does not say which.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum StorageError {
    /// The file could not be opened or created as an SQLite database.
    #[error("cannot open database {}: {source}", path.display())]
    Open {
        /// The database file.
        path: PathBuf,
        /// What SQLite said.
        #[source]
        source: rusqlite::Error,
    },
    /// The file is an SQLite database of something else, or not an SQLite database at all.
    #[error("{} is not a veer database ({reason})", path.display())]
    NotVeer {
        /// The database file.
        path: PathBuf,
        /// What gave it away.
        reason: String,
    },
    /// The database was written by a newer veer: its schema is unknown to this code, so it is
    /// refused rather than misread or damaged.
    #[error(
        "database {} has schema version {found}, newer than this veer knows ({supported}); \
         use a newer veer",
        path.display()
    )]
    TooNew {
        /// The database file.
        path: PathBuf,
        /// The schema version found in the file.
        found: i64,
        /// The newest schema version this code knows.
        supported: i64,
    },
    /// A read-only open found a database whose schema is not (yet) at this code's version; only a
    /// writer migrates, so the reader cannot go on.
    #[error(
        "database {} has schema version {found}, this veer reads version {expected}; \
         open it once with a writer (for example `veer watch`) to migrate it",
        path.display()
    )]
    NotMigrated {
        /// The database file.
        path: PathBuf,
        /// The schema version found in the file (0: never migrated).
        found: i64,
        /// The version this code needs.
        expected: i64,
    },
    /// Applying a migration failed; the database stays at the previous version.
    #[error("database {}: migration to schema version {version} failed: {source}", path.display())]
    Migration {
        /// The database file.
        path: PathBuf,
        /// The version that was being applied.
        version: i64,
        /// What SQLite said.
        #[source]
        source: rusqlite::Error,
    },
    /// A statement failed (constraint, I/O, lock timeout, ...).
    #[error("database {}: {op}: {source}", path.display())]
    Sqlite {
        /// The database file.
        path: PathBuf,
        /// The operation, in words.
        op: &'static str,
        /// What SQLite said.
        #[source]
        source: rusqlite::Error,
    },
    /// A row the operation refers to does not exist.
    #[error("database {}: {op}: no {what} with id {id}", path.display())]
    NotFound {
        /// The database file.
        path: PathBuf,
        /// The operation, in words.
        op: &'static str,
        /// The kind of row looked for.
        what: &'static str,
        /// The id that was not found.
        id: i64,
    },
    /// A write was asked of a store opened with [`Store::open_read_only`](crate::Store::open_read_only).
    #[error("database {}: {op}: opened read-only", path.display())]
    ReadOnly {
        /// The database file.
        path: PathBuf,
        /// The operation, in words.
        op: &'static str,
    },
    /// An argument was out of its range (a non-positive bucket width, a count too large for SQLite).
    #[error("database {}: {op}: {reason}", path.display())]
    InvalidArgument {
        /// The database file.
        path: PathBuf,
        /// The operation, in words.
        op: &'static str,
        /// What was wrong.
        reason: String,
    },
}
