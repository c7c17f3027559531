//! `veer status` reading the database while the daemon writes it.

use super::daemon::Daemon;
use super::db;
use super::recordings::{self, publish_file};
use super::{fan_machine, write_config, FAN_CRITICAL_RPM};
use crate::support::{arr, num, num_or_null, success, text, Dir};
use serde_json::Value;
use veer_storage::IngestStatus;

/// API separation margin above the operating range for AF 6.5 (API 617 7th ed. / API RP 684
/// 2nd ed.: 10 + 17 (1 − 1/(AF − 1.5)); from memory, REFERENCES §1.3 table).
const REQUIRED_PCT: f64 = 23.6;

/// Run-up to 950 r/min and 85 s there: 27.4 % from the critical, inside the warning band.
const PROFILE: &str = "0:150,5:150,35:950,120:950";

fn status(d: &Dir) -> Value {
    d.json(&["status", "--json", "--config", "plant.toml"])
}

/// The one machine of the status document.
fn machine(doc: &Value) -> &Value {
    let machines = arr(doc, "machines");
    assert_eq!(machines.len(), 1, "{doc:#}");
    assert_eq!(text(&machines[0], "id"), "fan-st");
    &machines[0]
}

#[test]
fn status_reads_machines_speed_margins_and_alerts_while_the_daemon_runs() {
    let d = Dir::new();
    recordings::fan(&d, "src.wav", PROFILE, 2560, 21, &[]);
    let config = write_config(
        &d,
        &[fan_machine(
            "fan-st",
            r#"{ kind = "folder", path = "incoming", settle_s = 1 }"#,
            "margin = \"api\"\ndelay_s = 10",
        )],
    );
    let db = d.join("veer.db");
    let mut daemon = Daemon::start(&d, &config, "watch");
    daemon.wait_for("the database", 20.0, || {
        db::open(&db)
            .and_then(|s| s.machines().ok())
            .filter(|m| !m.is_empty())
    });

    // Before any data: the machine, its design critical, no speed and no alerts.
    let doc = status(&d);
    let m = machine(&doc);
    assert_eq!(num_or_null(m, "running_rpm"), None, "{m:#}");
    assert!(arr(m, "open_alerts").is_empty(), "{m:#}");
    let crits = arr(m, "criticals");
    assert_eq!(crits.len(), 1, "{m:#}");
    assert_eq!(num(&crits[0], "speed_rpm"), FAN_CRITICAL_RPM);
    assert!(crits[0]["margin_at_running_speed"].is_null(), "{m:#}");
    // MCS 1000 r/min is 21 % from 1210 r/min, short of the 23.6 % required.
    let range = &crits[0]["margin_to_operating_range"];
    assert_eq!(text(range, "verdict"), "alarm", "{m:#}");
    assert!((num(range, "actual_pct") - 21.0).abs() < 0.01, "{m:#}");

    publish_file(&d.join("src.wav"), &d.join("incoming"), "run.wav");
    let r = daemon.wait_for("run.wav ingested", 60.0, || db::finished(&db, "run.wav"));
    assert_eq!(r.status, IngestStatus::Done, "{r:#?}");

    // While the daemon still runs: the speed it holds, the margin at it, the open warning.
    daemon.assert_running();
    let doc = status(&d);
    let m = machine(&doc);
    let running = num_or_null(m, "running_rpm").unwrap_or_else(|| panic!("no speed: {m:#}"));
    assert!((running - 950.0).abs() < 0.01 * 950.0, "{m:#}");
    assert!(!m["last_data"].is_null(), "{m:#}");
    let at = &arr(m, "criticals")[0]["margin_at_running_speed"];
    assert_eq!(text(at, "side"), "above-running", "{at}");
    assert!(
        (num(at, "required_pct") - REQUIRED_PCT).abs() < 0.01,
        "{at}"
    );
    let expect = (FAN_CRITICAL_RPM - running) / running * 100.0;
    assert!(
        (num(at, "actual_pct") - expect).abs() < 0.02,
        "{at} vs {expect}"
    );
    assert_eq!(text(at, "verdict"), "warning", "{at}");
    let open = arr(m, "open_alerts");
    assert_eq!(open.len(), 1, "{m:#}");
    assert_eq!(text(&open[0], "kind"), "margin");
    assert_eq!(text(&open[0], "severity"), "warning");
    // The table says the same.
    let o = d.veer(&["status", "--config", "plant.toml"]);
    let table = success(&o, &["status", "--config", "plant.toml"]);
    assert!(
        table.contains("fan-st") && table.contains("warning margin"),
        "{table}"
    );
    daemon.terminate(20.0);
}
