//! One writer and concurrent readers under WAL.

use std::sync::mpsc;
use std::thread;

use veer_storage::{Polar, Series, StorageError, Store, VectorPoint};

use super::{event, machine, Db};

#[test]
fn a_reader_reads_while_the_writer_holds_a_write_transaction() {
    let db = Db::new();
    let mut w = db.writer();
    let first = w
        .insert_event(&event("fan-2", 0.0))
        .expect("committed event");
    let path = db.path();
    w.transaction(|tx| -> Result<(), StorageError> {
        let id = tx.insert_event(&event("fan-2", 100.0))?;
        tx.insert_vectors(
            id,
            "x",
            1,
            Series::Measured,
            &[VectorPoint {
                time: 100.0,
                speed_rpm: 500.0,
                vector: Polar {
                    amplitude: 1.0,
                    phase_deg: 2.0,
                },
            }],
        )?;
        // A separate connection, opened and queried while the write lock is held.
        let r = Store::open_read_only(&path)?;
        let seen = r.events(None, None)?;
        assert_eq!(
            seen.iter().map(|e| e.id).collect::<Vec<_>>(),
            [first],
            "only committed data"
        );
        assert!(r.vectors(id)?.is_empty());
        assert_eq!(r.machines()?.len(), 1);
        Ok(())
    })
    .expect("write transaction");
    let r = Store::open_read_only(&path).expect("reader");
    assert_eq!(
        r.events(None, None).expect("events").len(),
        2,
        "visible once committed"
    );
}

#[test]
fn a_reader_opens_when_no_writer_is_running() {
    let db = Db::new();
    drop(db.writer());
    let r = Store::open_read_only(db.path()).expect("reader alone");
    assert_eq!(r.machines().expect("machines"), [machine("fan-2")]);
    assert!(r.is_read_only());
}

#[test]
fn a_read_only_store_refuses_writes() {
    let db = Db::new();
    drop(db.writer());
    let mut r = Store::open_read_only(db.path()).expect("reader");
    let err = r.upsert_machine(&machine("pump-1")).expect_err("read-only");
    assert!(matches!(err, StorageError::ReadOnly { .. }), "{err:?}");
}

#[test]
fn readers_in_threads_see_a_growing_consistent_database() {
    let db = Db::new();
    let mut w = db.writer();
    let path = db.path();
    let (done_tx, done_rx) = mpsc::channel::<()>();
    let reader = thread::spawn(move || -> Result<usize, StorageError> {
        let r = Store::open_read_only(&path)?;
        let mut last = 0;
        let mut polls = 0;
        loop {
            let finished = done_rx.try_recv().is_ok();
            // Each event is committed with its 100 vectors: a snapshot never sees one without them.
            let (events, vectors) = r.snapshot(|tx| -> Result<_, StorageError> {
                let events = tx.events(None, None)?;
                let mut n = 0;
                for e in &events {
                    n += tx
                        .vectors(e.id)?
                        .iter()
                        .map(|t| t.points.len())
                        .sum::<usize>();
                }
                Ok((events.len(), n))
            })?;
            assert_eq!(vectors, events * 100);
            assert!(events >= last, "never goes back");
            last = events;
            polls += 1;
            if finished {
                return Ok(polls);
            }
        }
    });
    let pts: Vec<VectorPoint> = (0..100)
        .map(|i| VectorPoint {
            time: f64::from(i),
            speed_rpm: 300.0 + f64::from(i),
            vector: Polar {
                amplitude: 1.0,
                phase_deg: 0.0,
            },
        })
        .collect();
    for k in 0..30 {
        w.transaction(|tx| -> Result<(), StorageError> {
            let id = tx.insert_event(&event("fan-2", f64::from(k)))?;
            tx.insert_vectors(id, "x", 1, Series::Measured, &pts)
        })
        .expect("write");
    }
    done_tx.send(()).expect("signal");
    let polls = reader.join().expect("reader thread").expect("reads");
    assert!(polls >= 1);
    assert_eq!(w.integrity_check().expect("check"), ["ok"]);
}
