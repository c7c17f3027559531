//! Opening, migrating and refusing databases.

use rusqlite::Connection;
use veer_storage::{StorageError, Store, APPLICATION_ID, SCHEMA_VERSION};

use super::{machine, Db};

const TABLES: &[&str] = &[
    "alert",
    "critical",
    "critical_estimate",
    "critical_model",
    "event",
    "event_channel",
    "gap",
    "ingest",
    "machine",
    "order_map",
    "resonance",
    "sensor",
    "sensor_health",
    "trend",
    "vector",
];

fn tables(path: &std::path::Path) -> Vec<String> {
    let c = Connection::open(path).expect("raw open");
    let mut st = c
        .prepare("SELECT name FROM sqlite_schema WHERE type = 'table' ORDER BY name")
        .expect("prepare");
    let names = st.query_map([], |r| r.get(0)).expect("query");
    names.collect::<Result<_, _>>().expect("names")
}

fn pragma_i64(path: &std::path::Path, name: &str) -> i64 {
    let c = Connection::open(path).expect("raw open");
    c.pragma_query_value(None, name, |r| r.get(0))
        .expect("pragma")
}

#[test]
fn migrates_an_empty_file_to_the_current_schema() {
    let db = Db::new();
    let store = Store::open(db.path()).expect("open");
    assert_eq!(pragma_i64(&db.path(), "user_version"), SCHEMA_VERSION);
    assert_eq!(pragma_i64(&db.path(), "application_id"), APPLICATION_ID);
    assert_eq!(tables(&db.path()), TABLES);
    let c = Connection::open(db.path()).expect("raw open");
    let mode: String = c
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .expect("mode");
    assert_eq!(mode, "wal");
    assert!(!store.is_read_only());
    assert_eq!(store.integrity_check().expect("check"), ["ok"]);
}

#[test]
fn a_version_1_file_is_migrated_and_keeps_its_estimates() {
    let db = Db::new();
    {
        let c = Connection::open(db.path()).expect("raw open");
        c.execute_batch(include_str!("../../src/migrations/0001_initial.sql"))
            .expect("version 1 schema");
        c.pragma_update(None, "application_id", APPLICATION_ID)
            .expect("marker");
        c.pragma_update(None, "user_version", 1).expect("version");
        c.execute_batch(
            "INSERT INTO machine (id, name) VALUES ('fan-2', 'Fan 2');
             INSERT INTO critical (machine, mode, origin, speed_rpm, valid_from)
               VALUES ('fan-2', 1, 'design', 1210, 0);
             INSERT INTO critical_estimate (critical_id, time, estimate_rpm, informative)
               VALUES (1, 60, 1200, 1);",
        )
        .expect("version 1 rows");
    }
    let s = Store::open(db.path()).expect("migrate");
    assert_eq!(pragma_i64(&db.path(), "user_version"), SCHEMA_VERSION);
    assert_eq!(tables(&db.path()), TABLES);
    let got = s.estimates(1).expect("estimates");
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].row.estimate_rpm, 1200.0);
    assert_eq!(got[0].row.method, None, "columns added later are empty");
    assert_eq!(s.integrity_check().expect("check"), ["ok"]);
}

#[test]
fn reopening_is_idempotent_and_keeps_data() {
    let db = Db::new();
    {
        let mut s = Store::open(db.path()).expect("open");
        s.upsert_machine(&machine("pump-1")).expect("machine");
    }
    for _ in 0..3 {
        let s = Store::open(db.path()).expect("reopen");
        assert_eq!(s.machines().expect("machines").len(), 1);
    }
    assert_eq!(pragma_i64(&db.path(), "user_version"), SCHEMA_VERSION);
    assert_eq!(tables(&db.path()), TABLES);
}

#[test]
fn a_newer_database_is_refused_by_writers_and_readers() {
    let db = Db::new();
    drop(Store::open(db.path()).expect("open"));
    let c = Connection::open(db.path()).expect("raw open");
    c.pragma_update(None, "user_version", SCHEMA_VERSION + 1)
        .expect("bump");
    drop(c);
    let err = Store::open(db.path()).expect_err("newer schema must be refused");
    assert!(
        matches!(err, StorageError::TooNew { found, supported, .. }
            if found == SCHEMA_VERSION + 1 && supported == SCHEMA_VERSION),
        "{err:?}"
    );
    let msg = err.to_string();
    assert!(msg.contains("veer.db") && msg.contains("newer"), "{msg}");
    let err = Store::open_read_only(db.path()).expect_err("reader too");
    assert!(matches!(err, StorageError::TooNew { .. }), "{err:?}");
    // Refusing changed nothing.
    assert_eq!(pragma_i64(&db.path(), "user_version"), SCHEMA_VERSION + 1);
}

#[test]
fn a_reader_refuses_a_database_that_is_not_migrated() {
    let db = Db::new();
    let err = Store::open_read_only(db.path()).expect_err("missing file");
    assert!(matches!(err, StorageError::Open { .. }), "{err:?}");
    assert!(!db.path().exists(), "a reader must not create the file");
    drop(Connection::open(db.path()).expect("create empty"));
    let err = Store::open_read_only(db.path()).expect_err("empty file");
    assert!(
        matches!(err, StorageError::NotMigrated { found: 0, expected, .. } if expected == SCHEMA_VERSION),
        "{err:?}"
    );
}

#[test]
fn other_files_are_not_taken_for_veer_databases() {
    let db = Db::new();
    let c = Connection::open(db.path()).expect("raw open");
    c.execute_batch("CREATE TABLE something (a INTEGER)")
        .expect("other schema");
    drop(c);
    let err = Store::open(db.path()).expect_err("foreign database");
    assert!(matches!(err, StorageError::NotVeer { .. }), "{err:?}");
    assert_eq!(tables(&db.path()), ["something"], "nothing was added to it");
    let c = Connection::open(db.path()).expect("raw open");
    let mode: String = c
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .expect("mode");
    assert_eq!(mode, "delete", "its journal mode was left alone");
    drop(c);

    let text = db.path().with_file_name("notes.txt");
    std::fs::write(
        &text,
        "this is not a database, just some words long enough to fill a header",
    )
    .expect("write");
    let err = Store::open(&text).expect_err("text file");
    assert!(matches!(err, StorageError::NotVeer { .. }), "{err:?}");
    assert!(err.to_string().contains("notes.txt"), "{err}");
}
