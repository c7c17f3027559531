//! Versioned migrations: the schema's history as an ordered list of SQL scripts.
//!
//! The schema version is SQLite's `PRAGMA user_version`: 0 for an empty file, `n` after the first
//! `n` scripts. Each script is applied in its own IMMEDIATE transaction together with the version
//! bump, so a crash leaves the database at a whole version, and two writers opening a new file at
//! once do not both apply it (the second re-reads the version once it holds the write lock).

use std::path::Path;

use rusqlite::{Connection, ErrorCode, TransactionBehavior};

use crate::error::StorageError;

/// The migration scripts, oldest first. Script `i` takes the schema from version `i` to `i + 1`.
/// Never edit a released script: add a new one.
const MIGRATIONS: &[&str] = &[
    include_str!("migrations/0001_initial.sql"),
    include_str!("migrations/0002_critical_tracking.sql"),
];

/// The schema version this code reads and writes.
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// `PRAGMA application_id` of a veer database: the ASCII bytes of `veer`.
pub const APPLICATION_ID: i64 = 0x7665_6572;

/// The header fields that say what a file is.
struct Header {
    version: i64,
    application_id: i64,
    has_tables: bool,
}

fn read_header(conn: &Connection, path: &Path) -> Result<Header, StorageError> {
    let classify = |source: rusqlite::Error| match source.sqlite_error_code() {
        Some(ErrorCode::NotADatabase) => StorageError::NotVeer {
            path: path.to_path_buf(),
            reason: "not an SQLite database".into(),
        },
        _ => StorageError::Sqlite {
            path: path.to_path_buf(),
            op: "read the schema version",
            source,
        },
    };
    let version = conn
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .map_err(classify)?;
    let application_id = conn
        .pragma_query_value(None, "application_id", |r| r.get(0))
        .map_err(classify)?;
    let has_tables = conn
        .query_row("SELECT count(*) > 0 FROM sqlite_schema", [], |r| r.get(0))
        .map_err(classify)?;
    Ok(Header {
        version,
        application_id,
        has_tables,
    })
}

/// Refuses files that are not veer databases or are newer than this code.
fn check_header(h: &Header, path: &Path) -> Result<(), StorageError> {
    if h.application_id != APPLICATION_ID && (h.application_id != 0 || h.has_tables) {
        return Err(StorageError::NotVeer {
            path: path.to_path_buf(),
            reason: if h.application_id == 0 {
                "it holds tables but no veer marker".into()
            } else {
                format!("application id {:#x}", h.application_id)
            },
        });
    }
    if h.version > SCHEMA_VERSION {
        return Err(StorageError::TooNew {
            path: path.to_path_buf(),
            found: h.version,
            supported: SCHEMA_VERSION,
        });
    }
    Ok(())
}

/// Refuses a file that is not a veer database (or an empty one) or is newer than this code, before
/// anything is changed in it (not even its journal mode).
pub(crate) fn check_writable(conn: &Connection, path: &Path) -> Result<(), StorageError> {
    check_header(&read_header(conn, path)?, path)
}

/// Brings the schema up to [`SCHEMA_VERSION`]. Returns the version found before migrating.
pub(crate) fn migrate(conn: &mut Connection, path: &Path) -> Result<i64, StorageError> {
    let first = read_header(conn, path)?;
    check_header(&first, path)?;
    loop {
        let sql_err = |op| {
            move |source| StorageError::Sqlite {
                path: path.to_path_buf(),
                op,
                source,
            }
        };
        let tx = conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(sql_err("begin a migration"))?;
        // Re-read under the write lock: another writer may have migrated meanwhile.
        let now = read_header(&tx, path)?;
        check_header(&now, path)?;
        if now.version >= SCHEMA_VERSION {
            tx.commit().map_err(sql_err("finish migrating"))?;
            return Ok(first.version);
        }
        let next = now.version + 1;
        let migration_err = |source| StorageError::Migration {
            path: path.to_path_buf(),
            version: next,
            source,
        };
        let script = usize::try_from(now.version)
            .ok()
            .and_then(|i| MIGRATIONS.get(i))
            .ok_or_else(|| StorageError::InvalidArgument {
                path: path.to_path_buf(),
                op: "migrate",
                reason: format!("no migration from schema version {}", now.version),
            })?;
        tx.execute_batch(script).map_err(migration_err)?;
        tx.pragma_update(None, "user_version", next)
            .map_err(migration_err)?;
        tx.commit().map_err(migration_err)?;
    }
}

/// Checks that a database opened for reading is a veer database at exactly this code's version.
pub(crate) fn check_current(conn: &Connection, path: &Path) -> Result<(), StorageError> {
    let h = read_header(conn, path)?;
    check_header(&h, path)?;
    if h.version != SCHEMA_VERSION || h.application_id != APPLICATION_ID {
        return Err(StorageError::NotMigrated {
            path: path.to_path_buf(),
            found: h.version,
            expected: SCHEMA_VERSION,
        });
    }
    Ok(())
}
