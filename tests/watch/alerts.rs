//! Alerts from recordings: a speed drifting toward a critical, a steady speed clear of it, and a
//! tach that goes dead while the machine runs.

use super::daemon::Daemon;
use super::db;
use super::recordings::{self, publish_file};
use super::{fan_machine, write_config, FAN_CRITICAL_RPM};
use crate::support::{num, rel, text, Dir};
use serde_json::Value;
use veer_storage::{AlertRow, IngestStatus, Severity, Store};

/// The alert settings of all three fans: the API rule, a 5-minute drift window looking 30
/// minutes ahead, 10 s of delay, alerts to a JSON-lines file.
const ALERTS: &str = r#"margin = "api"
drift_window_min = 5
drift_horizon_min = 30
delay_s = 10
outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]"#;

/// The demo's cooling tower fan: run-up to 900 r/min, then a creep to 1000 r/min over 7
/// minutes, toward its critical at 1210 r/min, and a coast-down.
const DRIFT: &str = "0:150,20:150,80:900,140:900,560:1000,580:1000,700:100";

/// Run-up to 900 r/min and five minutes there: 34 % from the critical, outside the 28.6 %
/// warning threshold.
const STEADY: &str = "0:150,20:150,60:900,360:900";

/// Run-up to 800 r/min and three minutes there; the tach dies at 180 s.
const DEAD: &str = "0:150,20:150,60:800,240:800";
const TACH_DIES_S: f64 = 180.0;

/// API separation margin above the operating range for AF 6.5: 10 + 17 (1 − 1/(AF − 1.5))
/// = 23.6 % (API 617 7th ed. / API RP 684 2nd ed.; from memory, REFERENCES §1.3 table).
const REQUIRED_PCT: f64 = 23.6;
/// The default warning band, points.
const BAND_PCT: f64 = 5.0;

fn evidence(a: &AlertRow) -> Value {
    let e = a
        .evidence
        .as_deref()
        .expect("an alert carries its evidence");
    serde_json::from_str(e).expect("the evidence is JSON")
}

/// The JSON-lines documents of machine `id`, in file order.
fn jsonl(all: &[Value], id: &str) -> Vec<Value> {
    all.iter()
        .filter(|v| v.get("machine").and_then(Value::as_str) == Some(id))
        .cloned()
        .collect()
}

/// Checks that a margin alert's figures agree with each other: the margin is the distance from
/// the running speed to the critical in percent of the running speed.
fn check_margin_figures(e: &Value) {
    let speed = num(e, "speed_rpm");
    assert_eq!(num(e, "critical_rpm"), FAN_CRITICAL_RPM, "{e}");
    let actual = num(e, "actual_pct");
    let expect = (FAN_CRITICAL_RPM - speed) / speed * 100.0;
    assert!(
        (actual - expect).abs() < 1e-6,
        "actual margin {actual} vs {expect}: {e}"
    );
    assert!(rel(num(e, "required_pct"), REQUIRED_PCT) < 1e-3, "{e}");
    assert!(
        (num(e, "warning_pct") - REQUIRED_PCT - BAND_PCT).abs() < 1e-3,
        "{e}"
    );
    assert_eq!(text(e, "side"), "above", "{e}");
}

#[test]
fn alerts_drift_in_order_none_when_steady_and_health_only_for_a_dead_tach() {
    let d = Dir::new();
    recordings::fan(&d, "src-drift.wav", DRIFT, 2560, 11, &[]);
    recordings::fan(&d, "src-steady.wav", STEADY, 2560, 12, &[]);
    recordings::fan(&d, "src-live.wav", DEAD, 2560, 13, &[]);
    recordings::with_dead_tach(
        &d.join("src-live.wav"),
        &d.join("src-dead.wav"),
        TACH_DIES_S,
    );
    let machines: Vec<String> = ["fan-drift", "fan-steady", "fan-dead"]
        .iter()
        .map(|id| {
            let source = format!(r#"{{ kind = "folder", path = "incoming/{id}", settle_s = 1 }}"#);
            fan_machine(id, &source, ALERTS)
        })
        .collect();
    let config = write_config(&d, &machines);
    let db = d.join("veer.db");
    let mut daemon = Daemon::start(&d, &config, "watch");
    for (id, src) in [
        ("fan-drift", "src-drift.wav"),
        ("fan-steady", "src-steady.wav"),
        ("fan-dead", "src-dead.wav"),
    ] {
        publish_file(
            &d.join(src),
            &d.join(&format!("incoming/{id}")),
            &format!("{id}.wav"),
        );
    }
    for id in ["fan-drift", "fan-steady", "fan-dead"] {
        let name = format!("{id}.wav");
        let r = daemon.wait_for(&format!("{name} ingested"), 60.0, || {
            db::finished(&db, &name)
        });
        assert_eq!(r.status, IngestStatus::Done, "{r:#?}");
    }
    daemon.terminate(20.0);

    let store = Store::open_read_only(&db).expect("open the database");
    let lines: Vec<Value> = std::fs::read_to_string(d.join("alerts.jsonl"))
        .unwrap_or_default()
        .lines()
        .map(|l| serde_json::from_str(l).expect("each alerts.jsonl line is JSON"))
        .collect();

    // The drift: drift warning, then margin warning, then the same margin alert as an alarm.
    let rows: Vec<AlertRow> = store
        .alerts_since(0.0, Some("fan-drift"))
        .expect("alerts")
        .into_iter()
        .map(|a| a.row)
        .collect();
    let seq: Vec<(&str, Severity)> = rows.iter().map(|a| (a.kind.as_str(), a.severity)).collect();
    assert_eq!(
        seq,
        [
            ("drift", Severity::Warning),
            ("margin", Severity::Warning),
            ("margin", Severity::Alarm)
        ],
        "{rows:#?}"
    );
    assert!(
        rows[0].opened_at < rows[1].opened_at && rows[1].opened_at < rows[2].opened_at,
        "{rows:#?}"
    );
    // The escalation closes the warning's row as the alarm's opens.
    assert_eq!(rows[1].closed_at, Some(rows[2].opened_at), "{rows:#?}");
    let drift = evidence(&rows[0]);
    assert!(num(&drift, "slope_rpm_per_min") > 0.0, "{drift}");
    assert!(
        num(&drift, "slope_rpm_per_min") > 3.0 * num(&drift, "slope_se_rpm_per_min"),
        "{drift}"
    );
    let to_crossing = num(&drift, "minutes_to_crossing");
    assert!(to_crossing > 0.0 && to_crossing <= 30.0, "{drift}");
    assert!(
        num(&drift, "actual_pct") > num(&drift, "warning_pct"),
        "{drift}"
    );
    assert_eq!(num(&drift, "critical_rpm"), FAN_CRITICAL_RPM);
    let warning = evidence(&rows[1]);
    check_margin_figures(&warning);
    let actual = num(&warning, "actual_pct");
    assert!(
        (REQUIRED_PCT..REQUIRED_PCT + BAND_PCT).contains(&actual),
        "{warning}"
    );
    let alarm = evidence(&rows[2]);
    check_margin_figures(&alarm);
    assert!(num(&alarm, "actual_pct") < REQUIRED_PCT, "{alarm}");
    assert!(num(&alarm, "speed_rpm") > num(&warning, "speed_rpm"));
    // The same three, in the same order, in alerts.jsonl, with the same figures.
    let docs = jsonl(&lines, "fan-drift");
    let events: Vec<(&str, &str, &str)> = docs
        .iter()
        .map(|v| (text(v, "event"), text(v, "kind"), text(v, "severity")))
        .collect();
    assert_eq!(
        events,
        [
            ("raised", "drift", "warning"),
            ("raised", "margin", "warning"),
            ("escalated", "margin", "alarm")
        ],
        "{docs:#?}"
    );
    for (doc, row) in docs.iter().zip(&rows) {
        assert!(
            (num(doc, "time_s") - row.opened_at).abs() < 1e-3,
            "{doc} vs {row:?}"
        );
        let e = doc.get("evidence").expect("evidence in alerts.jsonl");
        assert_eq!(num(e, "speed_rpm"), num(&evidence(row), "speed_rpm"));
    }

    // A steady speed outside the band: nothing, although it was seen at steady speed.
    let steady = store.alerts_since(0.0, Some("fan-steady")).expect("alerts");
    assert!(steady.is_empty(), "{steady:#?}");
    assert!(jsonl(&lines, "fan-steady").is_empty());
    let trend = store
        .trend("fan-steady", 0.0, f64::MAX)
        .expect("the steady fan's trend");
    assert!(
        trend
            .iter()
            .filter(|t| rel(t.row.speed_rpm, 900.0) < 0.01)
            .count()
            >= 10,
        "the steady fan was not seen running steadily at 900 r/min: {trend:#?}"
    );

    // The dead tach: a sensor-health alarm, and no margin or drift alert from the bad speed.
    let dead: Vec<AlertRow> = store
        .alerts_since(0.0, Some("fan-dead"))
        .expect("alerts")
        .into_iter()
        .map(|a| a.row)
        .collect();
    let health: Vec<&AlertRow> = dead.iter().filter(|a| a.kind == "sensor-health").collect();
    assert_eq!(health.len(), 1, "{dead:#?}");
    assert!(
        dead.iter().all(|a| a.kind != "margin" && a.kind != "drift"),
        "{dead:#?}"
    );
    let h = evidence(health[0]);
    assert_eq!(text(&h, "role"), "tach", "{h}");
    assert_eq!(text(&h, "problem"), "tach-lost", "{h}");
    assert!(
        h["suspended"]
            .as_array()
            .is_some_and(|s| s.iter().any(|k| k == "margin")),
        "{h}"
    );
    let docs = jsonl(&lines, "fan-dead");
    assert_eq!(docs.len(), 1, "{docs:#?}");
    assert_eq!(text(&docs[0], "kind"), "sensor-health");
    assert_eq!(text(&docs[0], "severity"), "alarm");
    let changes = store.health("fan-dead", 0.0).expect("sensor health");
    assert!(
        changes
            .iter()
            .any(|c| c.row.condition == "tach-lost" && !c.row.healthy),
        "{changes:#?}"
    );
    // The alert is dated when the tach went dead, give or take a few hundred revolutions (at
    // 800 r/min, 15 s). Checked last, so that a late date does not hide the checks above.
    let file = db::ingests(&store)
        .into_iter()
        .find(|r| db::file_name(r) == "fan-dead.wav")
        .expect("the dead tach's ingest");
    let since_start = health[0].opened_at - file.data_start.expect("data start");
    assert!(
        (TACH_DIES_S..TACH_DIES_S + 15.0).contains(&since_start),
        "the tach alert came {since_start:.1} s into the recording, the tach died at {TACH_DIES_S} s"
    );
}
