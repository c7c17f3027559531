//! `veer status`: what the database says now, readable while the daemon writes (WAL readers do not
//! block the writer).

use crate::cli::{DbArgs, StatusArgs};
use crate::report::{side_name, verdict_name, CAUTION};
use crate::timefmt::{now, rfc3339};
use anyhow::{anyhow, bail, Result};
use serde_json::{json, Value};
use std::path::PathBuf;
use veer_storage::{CriticalOrigin, Store};
use veer_tracker::margin::{
    assess, required_margin_pct, MarginRule, OperatingRange, Side, Verdict,
};

/// The database to read and, with a configuration, each machine's margin rule and warning band.
pub(crate) fn open(src: &DbArgs) -> Result<(Store, Option<crate::config::Config>)> {
    let (path, cfg): (PathBuf, _) = match (&src.config, &src.db) {
        (Some(c), _) => {
            let cfg = crate::config::load(c).map_err(|e| anyhow!("{e}"))?;
            (cfg.database.clone(), Some(cfg))
        }
        (None, Some(db)) => (db.clone(), None),
        (None, None) => bail!("give --config FILE or --db FILE"),
    };
    if !path.exists() {
        bail!(
            "{}: no database yet (has `veer watch` run?)",
            path.display()
        );
    }
    let store = Store::open_read_only(&path).map_err(|e| anyhow!("{e}"))?;
    Ok((store, cfg))
}

/// The margin from a running speed to a critical, judged as at the edge of the operating range:
/// below the running speed the "below" requirement applies, above it the "above" one.
pub(crate) fn margin_at_speed(
    rpm: f64,
    critical: f64,
    af: Option<f64>,
    rule: MarginRule,
    band: f64,
) -> (Side, f64, f64, Verdict) {
    let side = if critical < rpm {
        Side::Below
    } else {
        Side::Above
    };
    let actual = (rpm - critical).abs() / rpm * 100.0;
    let required = required_margin_pct(rule, af, side);
    let verdict = if required == 0.0 {
        Verdict::NotRequired
    } else if actual < required {
        Verdict::Breach
    } else if actual < required + band {
        Verdict::Warning
    } else {
        Verdict::Clear
    };
    (side, required, actual, verdict)
}

pub(crate) fn document(store: &Store, cfg: Option<&crate::config::Config>) -> Result<Value> {
    let mut machines = Vec::new();
    let e = |e: veer_storage::StorageError| anyhow!("{e}");
    for m in store.machines().map_err(e)? {
        let (rule, band) = cfg
            .and_then(|c| c.machine(&m.id))
            .map_or((MarginRule::Api2005, 5.0), |mc| {
                (mc.alerts.margin, mc.alerts.warn_band_pct)
            });
        let trend = store.last_trend(&m.id).map_err(e)?;
        let running = if trend.is_empty() {
            None
        } else {
            Some(trend.iter().map(|t| t.speed_rpm).sum::<f64>() / trend.len() as f64)
        };
        let trend_time = trend.iter().map(|t| t.time).fold(f64::NAN, f64::max);
        let last = store.last_data_time(&m.id).map_err(e)?;
        let range = match (m.min_operating_rpm, m.max_continuous_rpm) {
            (Some(a), Some(b)) => OperatingRange::new(a, b).ok(),
            _ => None,
        };
        let mut crits = Vec::new();
        for c in store.current_criticals(&m.id).map_err(e)? {
            let origin = match c.origin {
                CriticalOrigin::Design => "design".to_string(),
                CriticalOrigin::Measured { event_id } => format!("measured (event {event_id})"),
            };
            let at_speed = running.map(|n| {
                let (side, req, act, v) = margin_at_speed(n, c.speed_rpm, c.amplification_factor, rule, band);
                json!({"side": if side == Side::Below { "below-running" } else { "above-running" },
                       "required_pct": round2(req), "actual_pct": round2(act), "verdict": verdict_name(v)})
            });
            let to_range = range.map(|r| {
                let a = assess(c.speed_rpm, c.amplification_factor, &r, rule, band);
                json!({"side": side_name(a.side), "required_pct": round2(a.required_pct),
                       "actual_pct": round2(a.actual_pct), "verdict": verdict_name(a.verdict)})
            });
            crits.push(json!({
                "mode": c.mode, "channel": c.channel, "speed_rpm": round2(c.speed_rpm),
                "amplification_factor": c.amplification_factor.map(round2), "origin": origin,
                "margin_at_running_speed": at_speed, "margin_to_operating_range": to_range,
            }));
        }
        let live = live_estimates(store, &m.id, last, range, rule, band)?;
        let alerts: Vec<Value> = store
            .open_alerts(Some(&m.id))
            .map_err(e)?
            .iter()
            .map(|a| json!({"kind": a.kind, "severity": a.severity.as_str(), "opened_at": rfc3339(a.opened_at),
                             "message": a.message}))
            .collect();
        machines.push(json!({
            "id": m.id, "name": m.name,
            "operating_range_rpm": [m.min_operating_rpm, m.max_continuous_rpm],
            "margin_rule": rule.name(),
            "running_rpm": running.map(round2),
            "running_at": trend_time.is_finite().then(|| rfc3339(trend_time)),
            "last_data": last.map(rfc3339),
            "last_data_age_s": last.map(|t| (now() - t).round()),
            "criticals": crits,
            "live_estimates": live,
            "open_alerts": alerts,
        }));
    }
    Ok(json!({"machines": machines, "caution": CAUTION}))
}

/// How far back from the machine's last data the latest live estimates are looked for, s.
const LIVE_LOOKBACK_S: f64 = 86_400.0;

/// The latest informative live estimate of each critical and channel from the day before the
/// machine's last data, with its margin to the operating range.
fn live_estimates(
    store: &Store,
    machine: &str,
    last: Option<f64>,
    range: Option<OperatingRange>,
    rule: MarginRule,
    band: f64,
) -> Result<Vec<Value>> {
    let Some(last) = last else {
        return Ok(Vec::new());
    };
    let e = |e: veer_storage::StorageError| anyhow!("{e}");
    let rows = store
        .machine_estimates(machine, last - LIVE_LOOKBACK_S, f64::INFINITY)
        .map_err(e)?;
    let mut latest: std::collections::BTreeMap<(i64, Option<String>), &veer_storage::EstimateRow> =
        std::collections::BTreeMap::new();
    for r in rows.iter().filter(|r| r.informative) {
        latest.insert((r.critical_id, r.channel.clone()), &r.row);
    }
    let criticals = store.criticals(machine).map_err(e)?;
    let mut out = Vec::new();
    for ((id, channel), r) in latest {
        let Some(c) = criticals.iter().find(|c| c.id == id) else {
            continue;
        };
        let origin = match c.origin {
            CriticalOrigin::Design => "design".to_string(),
            CriticalOrigin::Measured { event_id } => format!("measured (event {event_id})"),
        };
        let to_range = range.map(|rg| {
            let a = assess(r.estimate_rpm, c.amplification_factor, &rg, rule, band);
            json!({"side": side_name(a.side), "required_pct": round2(a.required_pct),
                   "actual_pct": round2(a.actual_pct), "verdict": verdict_name(a.verdict)})
        });
        out.push(json!({
            "mode": c.mode, "origin": origin, "channel": channel,
            "critical_rpm": round2(c.speed_rpm),
            "estimate_rpm": round2(r.estimate_rpm),
            "uncertainty_rpm": r.uncertainty_rpm.map(round2),
            "method": r.method, "at": rfc3339(r.time),
            "margin_to_operating_range": to_range,
        }));
    }
    Ok(out)
}

fn round2(x: f64) -> f64 {
    (x * 100.0).round() / 100.0
}

pub(crate) fn text(doc: &Value) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let empty = Vec::new();
    for m in doc["machines"].as_array().unwrap_or(&empty) {
        let _ = writeln!(
            s,
            "{} ({}): running {} r/min, last data {} (rule {})",
            m["id"].as_str().unwrap_or("?"),
            m["name"].as_str().unwrap_or(""),
            m["running_rpm"]
                .as_f64()
                .map_or("-".into(), |v| format!("{v:.0}")),
            m["last_data"].as_str().unwrap_or("never"),
            m["margin_rule"].as_str().unwrap_or("")
        );
        for c in m["criticals"].as_array().unwrap_or(&empty) {
            let at = &c["margin_at_running_speed"];
            let rg = &c["margin_to_operating_range"];
            let _ = writeln!(
                s,
                "  critical {:>7.0} r/min AF {:>5} {:<20} at speed: {} | to range: {}",
                c["speed_rpm"].as_f64().unwrap_or(f64::NAN),
                c["amplification_factor"]
                    .as_f64()
                    .map_or("-".into(), |v| format!("{v:.1}")),
                c["origin"].as_str().unwrap_or(""),
                describe(at),
                describe(rg)
            );
        }
        for l in m["live_estimates"].as_array().unwrap_or(&empty) {
            let _ = writeln!(
                s,
                "  estimate {:>7.0} ± {} r/min of the {} critical {:.0} r/min on {} by {} at {}: to range: {}",
                l["estimate_rpm"].as_f64().unwrap_or(f64::NAN),
                l["uncertainty_rpm"]
                    .as_f64()
                    .map_or("-".into(), |v| format!("{v:.0}")),
                l["origin"].as_str().unwrap_or(""),
                l["critical_rpm"].as_f64().unwrap_or(f64::NAN),
                l["channel"].as_str().unwrap_or("-"),
                l["method"].as_str().unwrap_or("-"),
                l["at"].as_str().unwrap_or(""),
                describe(&l["margin_to_operating_range"])
            );
        }
        let alerts = m["open_alerts"].as_array().unwrap_or(&empty);
        if alerts.is_empty() {
            let _ = writeln!(s, "  no open alerts");
        }
        for a in alerts {
            let _ = writeln!(
                s,
                "  {} {} since {}: {}",
                a["severity"].as_str().unwrap_or(""),
                a["kind"].as_str().unwrap_or(""),
                a["opened_at"].as_str().unwrap_or(""),
                a["message"].as_str().unwrap_or("")
            );
        }
    }
    let _ = writeln!(s, "\n{CAUTION}");
    s
}

fn describe(v: &Value) -> String {
    if v.is_null() {
        return "-".to_string();
    }
    format!(
        "{:.1} % vs {:.1} % {}",
        v["actual_pct"].as_f64().unwrap_or(f64::NAN),
        v["required_pct"].as_f64().unwrap_or(f64::NAN),
        v["verdict"].as_str().unwrap_or("")
    )
}

pub(crate) fn run(a: StatusArgs) -> Result<()> {
    let (store, cfg) = open(&a.source)?;
    let doc = document(&store, cfg.as_ref())?;
    if a.json {
        let mut t = serde_json::to_string_pretty(&doc)?;
        t.push('\n');
        super::print_out(&t)
    } else {
        super::print_out(&text(&doc))
    }
}
