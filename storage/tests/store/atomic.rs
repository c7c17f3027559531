//! An event and everything that belongs to it commit together or not at all.

use std::panic::{catch_unwind, AssertUnwindSafe};

use veer_storage::{
    IngestKind, IngestStatus, NewIngest, Polar, Series, StorageError, Store, VectorPoint,
};

use super::{event, Db};

fn new_ingest(hash: &str) -> NewIngest {
    NewIngest {
        machine: Some("fan-2".into()),
        kind: IngestKind::File,
        source: format!("incoming/fan-2/{hash}.wav"),
        content_hash: hash.into(),
        bytes: Some(1 << 20),
        started_at: 1.7e9,
    }
}

fn sweep(n: usize) -> Vec<VectorPoint> {
    (0..n)
        .map(|i| VectorPoint {
            time: 1.7e9 + i as f64,
            speed_rpm: 300.0 + i as f64,
            vector: Polar {
                amplitude: 1.0,
                phase_deg: 10.0,
            },
        })
        .collect()
}

/// The daemon's way of storing one file's results: ingest record, event, vectors, `done`.
fn store_file(s: &mut Store, hash: &str, fail_after_vectors: bool) -> Result<i64, StorageError> {
    s.transaction(|tx| {
        let ingest = tx.begin_ingest(&new_ingest(hash))?;
        let mut ev = event("fan-2", 1.7e9);
        ev.ingest_id = Some(ingest);
        let id = tx.insert_event(&ev)?;
        tx.insert_vectors(id, "x", 1, Series::Measured, &sweep(500))?;
        if fail_after_vectors {
            // As when the decoder hits a corrupt block half-way through storing.
            return Err(StorageError::InvalidArgument {
                path: "veer.db".into(),
                op: "test",
                reason: "simulated failure".into(),
            });
        }
        tx.finish_ingest(ingest, IngestStatus::Done, None, 1.7e9 + 2.0)?;
        Ok(id)
    })
}

fn vector_rows(s: &Store) -> usize {
    s.events(None, None)
        .expect("events")
        .iter()
        .map(|e| {
            s.vectors(e.id)
                .expect("vectors")
                .iter()
                .map(|t| t.points.len())
                .sum::<usize>()
        })
        .sum()
}

#[test]
fn a_failed_transaction_stores_nothing() {
    let db = Db::new();
    let mut s = db.writer();
    let err = store_file(&mut s, "h1", true).expect_err("simulated failure");
    assert!(err.to_string().contains("simulated failure"));
    assert!(
        s.ingest_seen("h1").expect("lookup").is_none(),
        "no ingest record"
    );
    assert!(s.events(None, None).expect("events").is_empty(), "no event");
    assert_eq!(vector_rows(&s), 0, "no vectors");

    // Retried after the failure, the same input is stored exactly once.
    let id = store_file(&mut s, "h1", false).expect("second try");
    let seen = s.ingest_seen("h1").expect("lookup").expect("recorded");
    assert_eq!(seen.status, IngestStatus::Done);
    let events = s.events(None, None).expect("events");
    assert_eq!(events.len(), 1);
    assert_eq!((events[0].id, events[0].ingest_id), (id, Some(seen.id)));
    assert_eq!(vector_rows(&s), 500);
}

#[test]
fn a_panic_inside_the_transaction_rolls_it_back() {
    let db = Db::new();
    let mut s = db.writer();
    let result = catch_unwind(AssertUnwindSafe(|| {
        let _ = s.transaction(|tx| -> Result<(), StorageError> {
            let id = tx.insert_event(&event("fan-2", 0.0))?;
            tx.insert_vectors(id, "x", 1, Series::Measured, &sweep(10))?;
            panic!("engine bug");
        });
    }));
    assert!(result.is_err());
    assert!(s.events(None, None).expect("events").is_empty());
    // The connection is still usable.
    store_file(&mut s, "h2", false).expect("store after the panic");
    assert_eq!(s.events(None, None).expect("events").len(), 1);
}

#[test]
fn a_failed_transaction_then_restart_leaves_a_sound_file() {
    let db = Db::new();
    {
        let mut s = db.writer();
        store_file(&mut s, "kept", false).expect("first file");
    }
    {
        let mut s = Store::open(db.path()).expect("reopen");
        let tx_result: Result<(), StorageError> = s.transaction(|tx| {
            let id = tx.insert_event(&event("fan-2", 5.0))?;
            tx.insert_vectors(id, "x", 1, Series::Measured, &sweep(100))?;
            Err(StorageError::ReadOnly {
                path: "veer.db".into(),
                op: "killed",
            })
        });
        assert!(tx_result.is_err());
    }
    let s = Store::open(db.path()).expect("restart");
    assert_eq!(s.events(None, None).expect("events").len(), 1);
    assert_eq!(vector_rows(&s), 500);
    assert_eq!(s.integrity_check().expect("check"), ["ok"]);
}

/// Set in the child process of [`kill_9_mid_transaction_stores_nothing`]: the database to write.
const CHILD_ENV: &str = "VEER_STORAGE_TEST_KILL_CHILD";

#[test]
fn kill_9_mid_transaction_stores_nothing() {
    use std::io::{BufRead, BufReader};
    use std::process::{Command, Stdio};

    if let Ok(path) = std::env::var(CHILD_ENV) {
        // The child: store one file completely, then die inside the second one's transaction.
        let mut s = Store::open(&path).expect("child open");
        store_file(&mut s, "complete", false).expect("first file");
        let _ = s.transaction(|tx| -> Result<(), StorageError> {
            let ingest = tx.begin_ingest(&new_ingest("torn"))?;
            let mut ev = event("fan-2", 2.0e9);
            ev.ingest_id = Some(ingest);
            let id = tx.insert_event(&ev)?;
            tx.insert_vectors(id, "x", 1, Series::Measured, &sweep(5000))?;
            println!("in-transaction");
            std::thread::sleep(std::time::Duration::from_secs(60));
            Ok(())
        });
        return;
    }
    let db = Db::new();
    drop(db.writer());
    let exe = std::env::current_exe().expect("test binary");
    let mut child = Command::new(exe)
        .args([
            "--exact",
            "store::atomic::kill_9_mid_transaction_stores_nothing",
            "--nocapture",
        ])
        .env(CHILD_ENV, db.path())
        .stdout(Stdio::piped())
        .spawn()
        .expect("spawn child");
    let stdout = child.stdout.take().expect("child stdout");
    let ready = BufReader::new(stdout)
        .lines()
        .map_while(Result::ok)
        .any(|l| l.contains("in-transaction"));
    assert!(ready, "child reached the transaction");
    child.kill().expect("SIGKILL");
    let status = child.wait().expect("wait");
    assert!(!status.success());

    let s = Store::open(db.path()).expect("restart after kill");
    assert_eq!(
        s.ingest_seen("complete").expect("lookup").map(|r| r.status),
        Some(IngestStatus::Done)
    );
    assert!(
        s.ingest_seen("torn").expect("lookup").is_none(),
        "the torn file is unknown: redo it"
    );
    assert_eq!(s.events(None, None).expect("events").len(), 1);
    assert_eq!(vector_rows(&s), 500);
    assert_eq!(s.integrity_check().expect("check"), ["ok"]);
}
