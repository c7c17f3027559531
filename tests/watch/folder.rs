//! The folder source: files written slowly, corrupt, duplicated and renamed into the folder.

use super::daemon::Daemon;
use super::db::{self, assert_each_hash_done_once};
use super::recordings::{self, publish_file};
use super::{fan_machine, write_config, FAN_CRITICAL_RPM, FAN_ZETA};
use crate::support::{rel, Dir};
use std::io::Write;
use std::time::Duration;
use veer_storage::{CriticalOrigin, EventKind, IngestKind, IngestStatus, Store};

/// A run-up of the fan through its critical: slow roll at 150 r/min, then 32.5 r/min/s to
/// 1450 r/min and a short hold, 50 s.
const RUN_UP: &str = "0:150,5:150,45:1450,50:1450";

/// Fails unless file `name` has exactly one ingest record, done, with a run-up whose critical is
/// the simulated mode, stored as a resonance and as a measured critical of the event.
fn assert_ingested_with_critical(
    store: &Store,
    all: &[veer_storage::Stored<veer_storage::IngestRow>],
    name: &str,
    bytes: u64,
) {
    let recs = db::of_file(all, name);
    assert_eq!(recs.len(), 1, "{name}: ingest records {recs:#?}");
    let r = recs[0];
    assert_eq!(r.status, IngestStatus::Done, "{name}: {r:#?}");
    assert_eq!(r.kind, IngestKind::File);
    assert_eq!(r.machine.as_deref(), Some("fan-f"));
    assert_eq!(
        r.bytes,
        Some(bytes),
        "{name}: the whole file, not part of it"
    );
    let (start, end) = (
        r.data_start.expect("data span start"),
        r.data_end.expect("data span end"),
    );
    // 50 s of data: the whole recording was read.
    assert!(
        (end - start - 50.0).abs() < 0.5,
        "{name}: data span {start}..{end}"
    );
    let events: Vec<_> = store
        .events(Some("fan-f"), None)
        .expect("events")
        .into_iter()
        .filter(|e| e.row.ingest_id == Some(r.id))
        .collect();
    let ups: Vec<_> = events
        .iter()
        .filter(|e| e.row.kind == EventKind::RunUp)
        .collect();
    assert_eq!(ups.len(), 1, "{name}: events {events:#?}");
    let ev = ups[0];
    let res = store.resonances(ev.id).expect("resonances");
    // The response peak of a mode with ζ = 0.077 lies 0.6 % above its natural speed
    // (ω_peak = ω_n / √(1 − 2ζ²), Thomson & Dahleh, "Theory of Vibration with Applications",
    // 5th ed., rotating unbalance); 2 % leaves room for the speed binning.
    let found = res
        .iter()
        .find(|x| rel(x.row.speed_rpm, FAN_CRITICAL_RPM) < 0.02)
        .unwrap_or_else(|| panic!("{name}: no resonance near {FAN_CRITICAL_RPM} r/min: {res:#?}"));
    // AF ≈ Q = 1/(2ζ) for light damping (REFERENCES §1.1).
    let af = found.row.amplification_factor.expect("AF measured");
    assert!(rel(af, 1.0 / (2.0 * FAN_ZETA)) < 0.15, "{name}: AF {af}");
    let crits = store.criticals("fan-f").expect("criticals");
    let measured: Vec<_> = crits
        .iter()
        .filter(|c| c.row.origin == CriticalOrigin::Measured { event_id: ev.id })
        .collect();
    assert!(
        measured
            .iter()
            .any(|c| rel(c.row.speed_rpm, FAN_CRITICAL_RPM) < 0.02),
        "{name}: no measured critical of event {}: {crits:#?}",
        ev.id
    );
}

#[test]
fn folder_takes_complete_files_once_and_sets_bad_ones_aside() {
    let d = Dir::new();
    recordings::fan(&d, "src-slow.csv", RUN_UP, 2560, 1, &[]);
    recordings::fan(&d, "src-after.csv", RUN_UP, 2560, 2, &[]);
    recordings::fan(&d, "src-rn.wav", RUN_UP, 2560, 3, &[]);
    let config = write_config(
        &d,
        &[fan_machine(
            "fan-f",
            r#"{ kind = "folder", path = "incoming", settle_s = 2 }"#,
            "",
        )],
    );
    let incoming = d.join("incoming");
    let db = d.join("veer.db");
    let mut daemon = Daemon::start(&d, &config, "watch");
    daemon.wait_for("the database", 20.0, || {
        db::open(&db)
            .and_then(|s| s.machines().ok())
            .filter(|m| !m.is_empty())
    });

    // 1. Written slowly in pieces (cut mid-line), the file closed only at the end; the writing
    //    takes longer than the settle time, so a reader that took what it saw would take half.
    let slow = std::fs::read(d.join("src-slow.csv")).expect("read the recording");
    {
        let mut f = std::fs::File::create(incoming.join("slow.csv")).expect("create slow.csv");
        for piece in slow.chunks(slow.len() / 12 + 1) {
            f.write_all(piece).expect("write a piece");
            f.flush().expect("flush");
            std::thread::sleep(Duration::from_millis(250));
        }
        let early = db::open(&db).map(|s| db::ingests(&s)).unwrap_or_default();
        assert!(
            db::of_file(&early, "slow.csv").is_empty(),
            "slow.csv was taken while still being written: {early:#?}"
        );
    }
    daemon.wait_for("slow.csv ingested", 30.0, || db::finished(&db, "slow.csv"));

    // 2. Corrupt: a number that is not one, on line 1000.
    let good = std::fs::read_to_string(d.join("src-after.csv")).expect("read the recording");
    let bad = recordings::with_bad_field(&good, 1000, 2, "1.2.3");
    std::fs::write(incoming.join("corrupt.csv"), bad).expect("write corrupt.csv");
    let failed = daemon.wait_for("corrupt.csv recorded", 30.0, || {
        db::finished(&db, "corrupt.csv")
    });
    assert_eq!(failed.status, IngestStatus::Failed, "{failed:#?}");
    let error = failed.error.clone().unwrap_or_default();
    assert!(
        error.contains("corrupt.csv") && error.contains("line 1000"),
        "the error does not name the file and line: {error}"
    );
    let aside = incoming.join("failed").join("corrupt.csv");
    daemon.wait_for("corrupt.csv moved aside", 10.0, || {
        aside.is_file().then_some(())
    });
    assert!(!incoming.join("corrupt.csv").exists());

    // 3. A good file after the corrupt one: the daemon carries on.
    std::fs::copy(d.join("src-after.csv"), incoming.join("after.csv")).expect("copy after.csv");
    daemon.wait_for("after.csv ingested", 30.0, || {
        db::finished(&db, "after.csv")
    });

    // 4. The slow file's content again under another name, then 5. a file renamed into place
    //    from a hidden temporary name. The worker takes them in that order.
    std::fs::copy(d.join("src-slow.csv"), incoming.join("dup.csv")).expect("copy dup.csv");
    publish_file(&d.join("src-rn.wav"), &incoming, "rn.wav");
    daemon.wait_for("rn.wav ingested", 30.0, || db::finished(&db, "rn.wav"));
    daemon.wait_for_log("already ingested (same content); skipped", 1, 10.0);
    daemon.assert_running();
    daemon.terminate(20.0);

    let store = Store::open_read_only(&db).expect("open the database");
    let all = db::ingests(&store);
    assert_ingested_with_critical(&store, &all, "slow.csv", slow.len() as u64);
    assert_ingested_with_critical(&store, &all, "after.csv", good.len() as u64);
    let rn_bytes = std::fs::metadata(incoming.join("rn.wav"))
        .expect("rn.wav")
        .len();
    assert_ingested_with_critical(&store, &all, "rn.wav", rn_bytes);
    assert!(
        db::of_file(&all, "dup.csv").is_empty(),
        "the duplicate was ingested: {all:#?}"
    );
    assert!(
        all.iter().all(|r| !r.source.contains(".part")),
        "a temporary file was taken: {all:#?}"
    );
    assert_each_hash_done_once(&all);
    assert_eq!(
        all.len(),
        4,
        "slow, corrupt, after and rn, one record each: {all:#?}"
    );
    assert_eq!(store.integrity_check().expect("integrity check"), ["ok"]);
}
