//! `veer events`: the stored run-ups and coast-downs, one line each.

use super::{r, se};
use crate::timefmt::{days_from_civil, rfc3339};
use anyhow::{bail, Result};
use serde_json::{json, Value};
use std::fmt::Write;
use veer_storage::Store;

/// Reads `--since`: `YYYY-MM-DD` (midnight UTC) or `YYYY-MM-DDTHH:MM:SS[Z]` (UTC).
pub(crate) fn parse_since(text: &str) -> Result<f64> {
    let t = text.trim().trim_end_matches('Z');
    let (date, time) = t.split_once(['T', ' ']).unwrap_or((t, "00:00:00"));
    let d: Vec<&str> = date.split('-').collect();
    let tm: Vec<&str> = time.split(':').collect();
    let bad =
        || anyhow::anyhow!("--since {text:?}: expected YYYY-MM-DD or YYYY-MM-DDTHH:MM:SSZ (UTC)");
    if d.len() != 3 || tm.is_empty() || tm.len() > 3 {
        return Err(bad());
    }
    let y: i64 = d[0].parse().map_err(|_| bad())?;
    let m: u32 = d[1].parse().map_err(|_| bad())?;
    let day: u32 = d[2].parse().map_err(|_| bad())?;
    let mut secs = [0u32; 3];
    for (s, v) in secs.iter_mut().zip(&tm) {
        *s = v.parse().map_err(|_| bad())?;
    }
    if !(1..=12).contains(&m)
        || !(1..=31).contains(&day)
        || secs[0] > 23
        || secs[1] > 59
        || secs[2] > 60
    {
        bail!(bad());
    }
    let days = days_from_civil(y, m, day);
    Ok(days as f64 * 86_400.0 + f64::from(secs[0] * 3600 + secs[1] * 60 + secs[2]))
}

/// The listing as one JSON document.
pub(crate) fn document(store: &Store, machine: Option<&str>, since: Option<f64>) -> Result<Value> {
    let mut out = Vec::new();
    for e in store.events(machine, since).map_err(se)? {
        let res = store.resonances(e.id).map_err(se)?;
        let mut crits: Vec<Value> = Vec::new();
        for c in &e.channels {
            let speeds: Vec<Value> = res
                .iter()
                .filter(|x| x.channel == c.channel)
                .map(|x| r(x.speed_rpm, 1))
                .collect();
            crits.push(json!({"channel": c.channel, "speeds_rpm": speeds}));
        }
        out.push(json!({
            "id": e.id,
            "machine": e.machine,
            "kind": e.kind.as_str(),
            "start": rfc3339(e.start_time),
            "start_unix": r(e.start_time, 3),
            "duration_s": r(e.end_time - e.start_time, 1),
            "speed_start_rpm": r(e.speed_start_rpm, 1),
            "speed_end_rpm": r(e.speed_end_rpm, 1),
            "sweep_rate_rpm_s": r(e.sweep_rate_rpm_s, 2),
            "criticals_found": res.len(),
            "criticals": crits,
        }));
    }
    Ok(json!({"events": out}))
}

/// The listing as a table.
pub(crate) fn text(doc: &Value) -> String {
    let mut s = String::new();
    let empty = Vec::new();
    let events = doc["events"].as_array().unwrap_or(&empty);
    if events.is_empty() {
        let _ = writeln!(s, "no events stored");
        return s;
    }
    let _ = writeln!(
        s,
        "{:>5}  {:<10} {:<10} {:<20} {:>17} {:>10}  criticals (r/min)",
        "event", "machine", "kind", "start (UTC)", "speed r/min", "r/min/s"
    );
    for e in events {
        let crits: Vec<String> = e["criticals"]
            .as_array()
            .unwrap_or(&empty)
            .iter()
            .map(|c| {
                let v: Vec<String> = c["speeds_rpm"]
                    .as_array()
                    .unwrap_or(&empty)
                    .iter()
                    .map(|x| format!("{:.0}", x.as_f64().unwrap_or(f64::NAN)))
                    .collect();
                format!(
                    "{}: {}",
                    c["channel"].as_str().unwrap_or("?"),
                    if v.is_empty() {
                        "-".to_string()
                    } else {
                        v.join(" ")
                    }
                )
            })
            .collect();
        let _ = writeln!(
            s,
            "{:>5}  {:<10} {:<10} {:<20} {:>7.0} -> {:<7.0} {:>+10.1}  {} ({})",
            e["id"].as_i64().unwrap_or(0),
            e["machine"].as_str().unwrap_or("?"),
            e["kind"].as_str().unwrap_or("?"),
            e["start"].as_str().unwrap_or("?"),
            e["speed_start_rpm"].as_f64().unwrap_or(f64::NAN),
            e["speed_end_rpm"].as_f64().unwrap_or(f64::NAN),
            e["sweep_rate_rpm_s"].as_f64().unwrap_or(f64::NAN),
            e["criticals_found"].as_u64().unwrap_or(0),
            crits.join("; ")
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn since_reads_dates_and_times() {
        // 2026-12-01T10:15:00Z is 1 796 120 100 s (the clock module's own check value).
        assert_eq!(
            parse_since("2026-12-01T10:15:00Z").expect("ok"),
            1_796_120_100.0
        );
        assert_eq!(
            parse_since("2026-12-01").expect("ok"),
            1_796_120_100.0 - 36_900.0
        );
        assert!(parse_since("yesterday").is_err());
        assert!(parse_since("2026-13-01").is_err());
    }
}
