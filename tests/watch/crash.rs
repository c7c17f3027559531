//! A daemon killed with SIGKILL in the middle of an ingest, then started again.

use super::daemon::{Daemon, LOG_WITH_STATES};
use super::db::{self, assert_each_hash_done_once};
use super::recordings::{self, publish_file};
use super::{fan_machine, write_config};
use crate::support::{text, Dir};
use std::collections::BTreeMap;
use veer_storage::{IngestStatus, Store};

/// The worker's log line for a machine-state change to steady running: in the big recording it
/// comes after the run-up, a third of the way through, when the run-up's event has been found
/// but (as the file is stored in one transaction at its end) not yet committed.
const STATE_LINE: &str = "to=\"steady\"";

#[test]
fn kill_9_mid_ingest_loses_nothing_committed_and_stores_nothing_twice() {
    let d = Dir::new();
    recordings::fan(
        &d,
        "src-small.csv",
        "0:150,5:150,45:1450,50:1450",
        2560,
        4,
        &[],
    );
    // 25.6 kHz for 200 s: about 5 million frames, several seconds of work for a debug build.
    recordings::fan(
        &d,
        "src-big.wav",
        "0:150,10:150,70:1450,200:1450",
        25_600,
        5,
        &[],
    );
    let config = write_config(
        &d,
        &[fan_machine(
            "fan-c",
            r#"{ kind = "folder", path = "incoming", settle_s = 1 }"#,
            r#"outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]"#,
        )],
    );
    let incoming = d.join("incoming");
    let db = d.join("veer.db");

    let mut daemon = Daemon::start_with_log(&d, &config, "first", LOG_WITH_STATES);
    std::fs::create_dir_all(&incoming).expect("create the folder");
    std::fs::copy(d.join("src-small.csv"), incoming.join("small.csv")).expect("copy small.csv");
    let small = daemon.wait_for("small.csv ingested", 30.0, || {
        db::finished(&db, "small.csv")
    });
    assert_eq!(small.status, IngestStatus::Done, "{small:#?}");
    // Its engine is done talking: the next state line is the big file's.
    let before = daemon.log().matches(STATE_LINE).count();
    publish_file(&d.join("src-big.wav"), &incoming, "big.wav");
    daemon.wait_for_log(STATE_LINE, before + 1, 30.0);
    daemon.kill_hard();

    // What was committed before the crash.
    let store = Store::open_read_only(&db).expect("open after the crash");
    let ingests_before = db::ingests(&store);
    assert!(
        db::of_file(&ingests_before, "big.wav").is_empty(),
        "big.wav was finished before the kill, so the test did not crash mid-ingest: {ingests_before:#?}"
    );
    let events_before = events_by_ingest(&store);
    assert!(
        events_before.contains_key(&Some(small.id)),
        "small.csv's events are missing: {events_before:#?}"
    );
    let alerts_before = store.alerts_since(0.0, None).expect("alerts").len();
    drop(store);

    // Started again on the same folder: big.wav is analysed from the start, small.csv is known.
    let mut daemon = Daemon::start(&d, &config, "second");
    let big = daemon.wait_for("big.wav ingested after the restart", 60.0, || {
        db::finished(&db, "big.wav")
    });
    assert_eq!(big.status, IngestStatus::Done, "{big:#?}");
    daemon.wait_for_log("already ingested (same content); skipped", 1, 10.0);
    daemon.terminate(20.0);

    let store = Store::open_read_only(&db).expect("open after the restart");
    assert_eq!(store.integrity_check().expect("integrity check"), ["ok"]);
    let all = db::ingests(&store);
    assert_each_hash_done_once(&all);
    assert_eq!(db::of_file(&all, "small.csv").len(), 1, "{all:#?}");
    assert_eq!(db::of_file(&all, "big.wav").len(), 1, "{all:#?}");
    assert!(
        all.iter().all(|r| r.status == IngestStatus::Done),
        "a record left pending or failed: {all:#?}"
    );
    for r in &ingests_before {
        assert!(all.contains(r), "lost after the restart: {r:#?}");
    }
    let events_after = events_by_ingest(&store);
    for (ingest, ids) in &events_before {
        assert_eq!(
            events_after.get(ingest),
            Some(ids),
            "events of ingest {ingest:?} changed across the restart"
        );
    }
    let big_events = events_after.get(&Some(big.id)).cloned().unwrap_or_default();
    assert!(!big_events.is_empty(), "big.wav stored no event");
    assert_eq!(
        events_after.keys().filter(|k| k.is_none()).count(),
        0,
        "events without an ingest: {events_after:#?}"
    );
    let alerts = store.alerts_since(0.0, None).expect("alerts");
    assert!(alerts.len() >= alerts_before);

    // Alerts across the restart, checked last so that the checks above speak first. An alert
    // cannot close before it opened, and a condition that holds across the restart is the same
    // alert: raised once, not raised again without a clear in between (its outputs would page
    // twice).
    let mut problems = Vec::new();
    for a in &alerts {
        if let Some(closed) = a.row.closed_at.filter(|&c| c < a.row.opened_at) {
            problems.push(format!(
                "alert {} ({} {}) closed at {closed:.1} before it opened at {:.1}",
                a.id, a.row.severity, a.row.kind, a.row.opened_at
            ));
        }
    }
    let mut open: BTreeMap<(String, String), usize> = BTreeMap::new();
    for line in std::fs::read_to_string(d.join("alerts.jsonl"))
        .unwrap_or_default()
        .lines()
    {
        let v: serde_json::Value = serde_json::from_str(line).expect("alerts.jsonl line");
        let id = (text(&v, "kind").to_string(), text(&v, "key").to_string());
        match text(&v, "event") {
            "raised" => {
                let n = open.entry(id.clone()).or_default();
                *n += 1;
                if *n > 1 {
                    problems.push(format!("{id:?} raised again while open: {line}"));
                }
            }
            "cleared" => {
                open.remove(&id);
            }
            _ => {}
        }
    }
    assert!(
        problems.is_empty(),
        "alerts across the restart:\n{}\n{alerts:#?}",
        problems.join("\n")
    );
}

/// Event ids by the ingest they were found in.
fn events_by_ingest(store: &Store) -> BTreeMap<Option<i64>, Vec<i64>> {
    let mut by: BTreeMap<Option<i64>, Vec<i64>> = BTreeMap::new();
    for e in store.events(None, None).expect("events") {
        by.entry(e.row.ingest_id).or_default().push(e.id);
    }
    by
}
