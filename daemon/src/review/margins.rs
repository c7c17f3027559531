//! `veer margins MACHINE`: each critical of the machine (design and measured, with its history
//! across events), its AF, the margin the rule requires and the margin it has to the operating
//! range, the trend of its speed, a verdict; and alarm settings recommended from the machine's own
//! history, printed as a TOML snippet for the configuration.
//!
//! The 1X levels follow the ISO practice of setting alarms relative to the machine's baseline
//! (ISO 10816-3 / ISO 20816-3; from memory, unconfirmed, see the design notes' references §2.4):
//! warning = baseline + 0.25 × the zone B/C boundary, at most 1.25 × B/C; alarm at the C/D
//! boundary (zone D: vibration severe enough to cause damage), kept above the warning. The zone
//! boundaries are those of ISO 7919-3 Annex A for shaft displacement (B/C = 9000/√n, C/D =
//! 13 200/√n µm pk-pk; from memory, high confidence) and of ISO 10816-3:2009 Annex A for casing
//! velocity (by machine group and support; partly confirmed from secondary sources).

use super::bias::pair_corrected;
use super::plot::estimates::{self, counts, EstimateSeries, UNBALANCE};
use super::{r, range_of, ro, rule_for, se};
use crate::config::Config;
use crate::report::{side_name, verdict_name, CAUTION};
use crate::timefmt::rfc3339;
use anyhow::{anyhow, Result};
use serde_json::{json, Value};
use std::collections::BTreeMap;
use std::fmt::Write;
use veer_storage::{CriticalOrigin, EstimateRow, EventKind, Store};
use veer_tracker::margin::{assess, MarginRule, OperatingRange};

/// Zone boundaries (A/B, B/C, C/D) of casing velocity, mm/s r.m.s., ISO 10816-3:2009 Tables
/// A.1/A.2 (carried into ISO 20816-3:2022 Annex A): group 1 rigid confirmed (secondary), group 2
/// rigid A/B and B/C confirmed (secondary), the rest from memory, unconfirmed.
fn velocity_zones(table: &str) -> Option<[f64; 3]> {
    match table {
        "g1-rigid" => Some([2.3, 4.5, 7.1]),
        "g1-flexible" => Some([3.5, 7.1, 11.0]),
        "g2-rigid" => Some([1.4, 2.8, 4.5]),
        "g2-flexible" => Some([2.3, 4.5, 7.1]),
        _ => None,
    }
}

/// Zone boundaries of shaft relative displacement, µm pk-pk, at `n` r/min: ISO 7919-3 Annex A,
/// 4800/√n, 9000/√n, 13 200/√n (from memory, unconfirmed; constants high confidence).
fn displacement_zones(n: f64) -> [f64; 3] {
    let s = n.sqrt();
    [4800.0 / s, 9000.0 / s, 13_200.0 / s]
}

/// How many of the standard's units one channel unit is: (factor, standard's unit text, table
/// name), for channel units written as `µm pk-pk`, `mil pk-pk`, `mm/s RMS`, `in/s pk`, ...
fn standard_units(units: &str, n: f64, zones: &str) -> Option<(f64, [f64; 3], String)> {
    let u = units.to_ascii_lowercase();
    let mut parts = u.split_whitespace();
    let unit = parts.next()?;
    let det = parts.next().unwrap_or("");
    // Amplitude detection: p-p = 2 × peak, r.m.s. = peak/√2 for a sinusoid (common practice).
    let (to_pkpk, to_rms) = match det {
        "pk-pk" | "p-p" => (1.0, 1.0 / (2.0 * std::f64::consts::SQRT_2)),
        "pk" | "peak" => (2.0, std::f64::consts::FRAC_1_SQRT_2),
        "rms" => (2.0 * std::f64::consts::SQRT_2, 1.0),
        _ => return None,
    };
    match unit {
        "µm" | "um" => Some((to_pkpk, displacement_zones(n), "ISO 7919-3 Annex A".into())),
        "mil" | "mils" => Some((
            25.4 * to_pkpk,
            displacement_zones(n),
            "ISO 7919-3 Annex A".into(),
        )),
        "mm/s" => Some((
            to_rms,
            velocity_zones(zones)?,
            format!("ISO 10816-3 Annex A, {zones}"),
        )),
        "in/s" => Some((
            25.4 * to_rms,
            velocity_zones(zones)?,
            format!("ISO 10816-3 Annex A, {zones}"),
        )),
        _ => None,
    }
}

/// The configuration's spelling of a stored unit text (`µm pk-pk` → `um`).
fn config_unit(units: &str) -> String {
    let u = units.split_whitespace().next().unwrap_or("");
    if u == "µm" {
        "um".to_string()
    } else {
        u.to_string()
    }
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

/// Shortest span of measurements over which a trend rate is given, seconds (a day).
const MIN_TREND_SPAN_S: f64 = 86_400.0;

/// Least-squares slope of (time, speed), r/min per day; `None` with fewer than two times.
fn slope_per_day(points: &[(f64, f64)]) -> Option<f64> {
    let n = points.len() as f64;
    if points.len() < 2 {
        return None;
    }
    let mt = points.iter().map(|p| p.0).sum::<f64>() / n;
    let ms = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = points.iter().map(|p| (p.0 - mt).powi(2)).sum();
    let (t0, t1) = points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.0), b.max(p.0))
        });
    // Over less than a day a rate per day says more about the sweep bias than about the machine.
    if !(sxx > 0.0) || t1 - t0 < MIN_TREND_SPAN_S {
        return None;
    }
    let sxy: f64 = points.iter().map(|p| (p.0 - mt) * (p.1 - ms)).sum();
    Some(sxy / sxx * 86_400.0)
}

/// The whole document for one machine.
pub(crate) fn document(
    store: &Store,
    cfg: Option<&Config>,
    machine: &str,
    zones: &str,
) -> Result<Value> {
    let m = store
        .machines()
        .map_err(se)?
        .into_iter()
        .find(|x| x.id == machine)
        .ok_or_else(|| anyhow!("no machine {machine:?} in the database"))?;
    let (rule, band) = rule_for(cfg, machine);
    let range = range_of(&m);
    let events: BTreeMap<i64, _> = store
        .events(Some(machine), None)
        .map_err(se)?
        .into_iter()
        .map(|e| (e.id, e.row))
        .collect();
    let history = store.criticals(machine).map_err(se)?;
    let current = store.current_criticals(machine).map_err(se)?;
    let mut modes = Vec::new();
    let mut widest_spread = 0.0f64;
    for cur in &current {
        let rows: Vec<_> = history.iter().filter(|h| h.mode == cur.mode).collect();
        let design = rows
            .iter()
            .rev()
            .find(|h| h.origin == CriticalOrigin::Design);
        let mut hist = Vec::new();
        let mut measured: Vec<(f64, f64)> = Vec::new();
        let mut last_up: Option<(f64, f64)> = None;
        let mut last_down: Option<(f64, f64)> = None;
        for h in &rows {
            let (origin, event_id, kind) = match h.origin {
                CriticalOrigin::Design => ("design", None, None),
                CriticalOrigin::Measured { event_id } => {
                    let ev = events.get(&event_id);
                    if let Some(e) = ev {
                        measured.push((h.valid_from, h.speed_rpm));
                        match e.kind {
                            EventKind::RunUp => last_up = Some((h.speed_rpm, e.sweep_rate_rpm_s)),
                            EventKind::CoastDown => {
                                last_down = Some((h.speed_rpm, e.sweep_rate_rpm_s))
                            }
                        }
                    }
                    ("measured", Some(event_id), ev.map(|e| e.kind.as_str()))
                }
            };
            hist.push(json!({
                "valid_from": if origin == "design" && h.valid_from <= 0.0 { "configuration".to_string() } else { rfc3339(h.valid_from) }, "origin": origin, "event": event_id,
                "event_kind": kind, "channel": h.channel, "speed_rpm": r(h.speed_rpm, 1),
                "amplification_factor": ro(h.amplification_factor, 2),
                "damping_ratio": ro(h.damping_ratio, 4),
            }));
        }
        let margin = range.map(|rg| {
            let a = assess(cur.speed_rpm, cur.amplification_factor, &rg, rule, band);
            json!({"side": side_name(a.side), "required_pct": r(a.required_pct, 2),
                   "actual_pct": r(a.actual_pct, 2), "verdict": verdict_name(a.verdict)})
        });
        let speeds: Vec<f64> = measured.iter().map(|p| p.1).collect();
        let spread_pct = if speeds.len() >= 2 {
            let (lo, hi) = speeds
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &s| {
                    (a.min(s), b.max(s))
                });
            let mean = speeds.iter().sum::<f64>() / speeds.len() as f64;
            Some((hi - lo) / mean * 100.0)
        } else {
            None
        };
        widest_spread = widest_spread.max(spread_pct.unwrap_or(0.0));
        let first = measured.first().map(|p| p.1);
        let last = measured.last().map(|p| p.1);
        modes.push(json!({
            "mode": cur.mode,
            "current": {
                "origin": match cur.origin { CriticalOrigin::Design => "design", CriticalOrigin::Measured { .. } => "measured" },
                "event": match cur.origin { CriticalOrigin::Measured { event_id } => Some(event_id), CriticalOrigin::Design => None },
                "channel": cur.channel, "speed_rpm": r(cur.speed_rpm, 1),
                "amplification_factor": ro(cur.amplification_factor, 2),
            },
            "design": design.map(|d| json!({"speed_rpm": r(d.speed_rpm, 1), "amplification_factor": ro(d.amplification_factor, 2)})),
            "margin": margin,
            "history": hist,
            "trend": {
                "measured_points": measured.len(),
                "rpm_per_day": slope_per_day(&measured).map_or(Value::Null, |s| r(s, 2)),
                "change_since_first_rpm": first.zip(last).map(|(a, b)| r(b - a, 1)),
                "change_vs_design_pct": design.zip(last).map(|(d, b)| r((b - d.speed_rpm) / d.speed_rpm * 100.0, 2)),
                "spread_pct": ro(spread_pct, 2),
            },
            "bias_corrected_rpm": last_up.zip(last_down).map(|((u, ur), (d, dr))| r(pair_corrected(u, ur, d, dr), 1)),
        }));
    }
    let series = estimates::load(store, machine, |_| true)?;
    let live = live_blocks(store, &series, range, rule, band)?;
    let rec = recommend(store, machine, &m, &events, zones)?;
    let rec_band = band.max((2.0 * widest_spread).ceil());
    let toml = snippet(&m.id, &m.name, &rec, &rule.name(), rec_band);
    Ok(json!({
        "machine": {"id": m.id, "name": m.name, "operating_range_rpm": range.map(|g| json!([g.min_rpm, g.max_rpm])),
                    "trip_rpm": m.trip_rpm},
        "margin_rule": rule.name(),
        "warn_band_pct": band,
        "criticals": modes,
        "live_estimates": live,
        "recommended": {
            "channels": rec,
            "warn_band_pct": rec_band,
            "warn_band_basis": "the configured band, widened to twice the widest scatter of a measured critical speed across events",
        },
        "toml": toml,
        "caution": format!("{CAUTION} Recommended settings are a starting point from the machine's own history; settings follow the builder's data, the standards and local codes."),
    }))
}

/// The window of the live trend: the last day of data of a critical's estimates, seconds.
const LIVE_WINDOW_S: f64 = 86_400.0;
/// Shortest span of informative estimates a live trend is given over, seconds: over less, a
/// rate per day extrapolates the noise of a few windows (and the thermal settling after a start)
/// by more than the day itself holds.
const MIN_LIVE_SPAN_S: f64 = 4.0 * 3600.0;
/// Fewest informative estimates a live trend is given from.
const MIN_LIVE_POINTS: usize = 3;

/// A straight line through (days, r/min), its slope in r/min per day with one standard deviation.
///
/// Weighted least squares with weights 1/σ² when every point has a σ (the weighting the drift
/// alert uses, docs/critical-estimate.md §5), the slope's σ then 1/√(Σw(t − t̄)²) scaled up by the
/// reduced χ² when the points scatter more than their σ says; ordinary least squares otherwise,
/// the slope's σ from the residuals. Closed forms of any regression text (e.g. Bevington and
/// Robinson, Data Reduction and Error Analysis, 3rd ed., ch. 6; from memory).
fn line_fit(points: &[(f64, f64, Option<f64>)]) -> Option<(f64, f64, bool)> {
    if points.len() < 2 {
        return None;
    }
    let weighted = points
        .iter()
        .all(|p| p.2.is_some_and(|s| s.is_finite() && s > 0.0));
    let w = |p: &(f64, f64, Option<f64>)| {
        if weighted {
            p.2.map_or(1.0, |s| 1.0 / (s * s))
        } else {
            1.0
        }
    };
    let sw: f64 = points.iter().map(w).sum();
    let mt = points.iter().map(|p| w(p) * p.0).sum::<f64>() / sw;
    let my = points.iter().map(|p| w(p) * p.1).sum::<f64>() / sw;
    let stt: f64 = points.iter().map(|p| w(p) * (p.0 - mt).powi(2)).sum();
    if !(stt > 0.0) {
        return None;
    }
    let sty: f64 = points.iter().map(|p| w(p) * (p.0 - mt) * (p.1 - my)).sum();
    let b = sty / stt;
    let dof = points.len().saturating_sub(2).max(1) as f64;
    let chi2: f64 = points
        .iter()
        .map(|p| w(p) * (p.1 - my - b * (p.0 - mt)).powi(2))
        .sum::<f64>()
        / dof;
    let scale = if weighted { chi2.max(1.0) } else { chi2 };
    Some((b, (scale / stt).sqrt(), weighted))
}

/// The trend of one critical's informative estimates over the last day of its data.
fn live_trend(rows: &[&EstimateRow]) -> Value {
    let end = rows
        .iter()
        .map(|x| x.time)
        .fold(f64::NEG_INFINITY, f64::max);
    let from = end - LIVE_WINDOW_S;
    let pts: Vec<(f64, f64, Option<f64>)> = rows
        .iter()
        .filter(|x| counts(x) && x.time >= from && x.estimate_rpm.is_finite())
        .map(|x| ((x.time - end) / 86_400.0, x.estimate_rpm, x.uncertainty_rpm))
        .collect();
    let (t0, t1) = pts
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.0), b.max(p.0))
        });
    let span_s = if pts.is_empty() {
        0.0
    } else {
        (t1 - t0) * 86_400.0
    };
    let fit = if pts.len() >= MIN_LIVE_POINTS && span_s >= MIN_LIVE_SPAN_S {
        line_fit(&pts)
    } else {
        None
    };
    json!({
        "rpm_per_day": fit.map_or(Value::Null, |f| r(f.0, 2)),
        "sigma_rpm_per_day": fit.map_or(Value::Null, |f| r(f.1, 2)),
        "weighting": fit.map(|f| if f.2 { "1/sigma^2" } else { "equal" }),
        "points": pts.len(),
        "span_h": r(span_s / 3600.0, 2),
        "from": rfc3339(from),
        "to": rfc3339(end),
    })
}

/// One block per measured critical with live estimates: how many, how many said something, the
/// latest informative one judged against the range, its trend over the last day of data, and how
/// many windows saw an unbalance change instead of a critical shift.
pub(crate) fn live_blocks(
    store: &Store,
    series: &[EstimateSeries],
    range: Option<OperatingRange>,
    rule: MarginRule,
    band: f64,
) -> Result<Vec<Value>> {
    let mut out = Vec::new();
    for s in series {
        for a in &s.anchors {
            let rows: Vec<&EstimateRow> = s.of(a.critical_id).collect();
            if rows.is_empty() {
                continue;
            }
            let model = store.model(a.critical_id).map_err(se)?;
            let af = a.row.amplification_factor;
            let latest = rows.iter().rev().find(|x| counts(x)).map(|x| {
                let margin = range.map(|rg| {
                    let m = assess(x.estimate_rpm, af, &rg, rule, band);
                    json!({"side": side_name(m.side), "required_pct": r(m.required_pct, 2),
                           "actual_pct": r(m.actual_pct, 2), "verdict": verdict_name(m.verdict)})
                });
                json!({
                    "time": rfc3339(x.time), "unix_time": x.time,
                    "speed_rpm": ro(x.speed_rpm, 1),
                    "estimate_rpm": r(x.estimate_rpm, 1),
                    "uncertainty_rpm": ro(x.uncertainty_rpm, 1),
                    "method": x.method,
                    "margin": margin,
                })
            });
            out.push(json!({
                "critical_id": a.critical_id,
                "mode": s.mode,
                "channel": s.channel,
                "event": a.event_id,
                "origin": if a.event_id.is_some() { "measured" } else { "design" },
                "measured_rpm": r(a.row.speed_rpm, 1),
                "amplification_factor": ro(af, 2),
                "model": model.map(|m| json!({"natural_rpm": r(m.natural_rpm, 1), "damping_ratio": r(m.damping_ratio, 4)})),
                "estimates": rows.len(),
                "informative": rows.iter().filter(|x| counts(x)).count(),
                "unbalance": rows.iter().filter(|x| x.change.as_deref() == Some(UNBALANCE)).count(),
                "first": rows.first().map(|x| rfc3339(x.time)),
                "last": rows.last().map(|x| rfc3339(x.time)),
                "latest": latest,
                "trend_24h": live_trend(&rows),
            }));
        }
    }
    Ok(out)
}

/// The SVG of a machine's live critical-speed estimates; an error naming the machine when it has
/// none.
pub(crate) fn plot(store: &Store, cfg: Option<&Config>, machine: &str) -> Result<String> {
    let m = store
        .machines()
        .map_err(se)?
        .into_iter()
        .find(|x| x.id == machine)
        .ok_or_else(|| anyhow!("no machine {machine:?} in the database"))?;
    let (rule, _) = rule_for(cfg, machine);
    let series = estimates::load(store, machine, |_| true)?;
    estimates::render(&m, range_of(&m), rule, &series)
}

/// Per sensor channel: the 1X baseline at operating speed and the levels recommended from it.
fn recommend(
    store: &Store,
    machine: &str,
    m: &veer_storage::MachineRow,
    events: &BTreeMap<i64, veer_storage::EventRow>,
    zones: &str,
) -> Result<Vec<Value>> {
    let range = range_of(m);
    let trend = store.trend(machine, f64::MIN, f64::MAX).map_err(se)?;
    let mut out = Vec::new();
    for s in store.sensors(machine).map_err(se)? {
        if s.kind == "tach" {
            continue;
        }
        let in_range =
            |n: f64| range.is_none_or(|g| n >= g.min_rpm * 0.98 && n <= g.max_rpm * 1.02);
        let rows: Vec<_> = trend
            .iter()
            .filter(|t| t.channel == s.channel && in_range(t.speed_rpm))
            .collect();
        let mut amps: Vec<f64> = rows.iter().map(|t| t.x1.amplitude).collect();
        let mut speeds: Vec<f64> = rows.iter().map(|t| t.speed_rpm).collect();
        let mut source = "steady-state trend at operating speed";
        if amps.is_empty() {
            // No steady running stored: the measured 1X of the events inside the range.
            source = "event vectors inside the operating range";
            for id in events.keys() {
                for t in store.vectors(*id).map_err(se)? {
                    if t.channel == s.channel
                        && t.order == 1
                        && t.series == veer_storage::Series::Measured
                    {
                        for p in t.points.iter().filter(|p| in_range(p.speed_rpm)) {
                            amps.push(p.vector.amplitude);
                            speeds.push(p.speed_rpm);
                        }
                    }
                }
            }
        }
        let points = amps.len();
        let base = median(&mut amps);
        let n = median(&mut speeds).or(m.max_continuous_rpm);
        let std = n.and_then(|n| standard_units(&s.units, n, zones));
        let mut v = json!({
            "channel": s.channel, "kind": s.kind, "units": s.units, "angle_deg": s.angle_deg,
            "baseline_1x": ro(base, 3), "baseline_speed_rpm": ro(n, 1), "baseline_points": points,
            "baseline_source": source,
        });
        if let (Some(b), Some((f, z, table))) = (base, std) {
            let bs = b * f;
            let warn = (bs + 0.25 * z[1]).min(1.25 * z[1]);
            let alarm = z[2].max(1.25 * warn);
            v["zones"] = json!({"table": table, "a_b": r(z[0] / f, 2), "b_c": r(z[1] / f, 2), "c_d": r(z[2] / f, 2)});
            v["warning_1x"] = r(warn / f, 1);
            v["alarm_1x"] = r(alarm / f, 1);
        } else {
            v["zones"] = Value::Null;
            v["warning_1x"] = Value::Null;
            v["alarm_1x"] = Value::Null;
            v["note"] = json!("no baseline at operating speed, or no zone table for these units");
        }
        out.push(v);
    }
    Ok(out)
}

/// The TOML lines to paste into the machine's entry of the configuration.
fn snippet(id: &str, name: &str, rec: &[Value], rule: &str, band: f64) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "# Recommended by `veer margins {id}` ({name}) from its own history."
    );
    let _ = writeln!(
        s,
        "# In the [[machine]] entry with id = \"{id}\": replace `sensors` and the margin keys of"
    );
    let _ = writeln!(
        s,
        "# [machine.alerts]. Settings follow the builder's data, the standards and local codes."
    );
    let _ = writeln!(s, "sensors = [");
    for c in rec {
        let mut line = format!(
            "  {{ channel = \"{}\", kind = \"{}\", units = \"{}\"",
            c["channel"].as_str().unwrap_or("?"),
            c["kind"].as_str().unwrap_or("displacement"),
            config_unit(c["units"].as_str().unwrap_or(""))
        );
        if let Some(a) = c["angle_deg"].as_f64() {
            let _ = write!(line, ", angle_deg = {a}");
        }
        if let (Some(w), Some(a)) = (c["warning_1x"].as_f64(), c["alarm_1x"].as_f64()) {
            let _ = write!(line, ", warning_1x = {w}, alarm_1x = {a}");
        }
        line.push_str(" },");
        if let Some(b) = c["baseline_1x"].as_f64() {
            let _ = write!(line, "  # baseline 1X {b}");
        }
        let _ = writeln!(s, "{line}");
    }
    let _ = writeln!(s, "]");
    let _ = writeln!(s, "[machine.alerts]");
    let _ = writeln!(s, "margin = \"{rule}\"");
    let _ = writeln!(s, "warn_band_pct = {band}");
    s
}

fn fv(v: &Value, p: usize) -> String {
    super::fmt_opt(v.as_f64(), p)
}

/// The document as text.
pub(crate) fn text(doc: &Value) -> String {
    let mut s = String::new();
    let empty = Vec::new();
    let m = &doc["machine"];
    let rg = &m["operating_range_rpm"];
    let _ = writeln!(
        s,
        "{} ({}): operating range {}-{} r/min, margin rule {}, warning band {} points",
        m["id"].as_str().unwrap_or("?"),
        m["name"].as_str().unwrap_or(""),
        fv(&rg[0], 0),
        fv(&rg[1], 0),
        doc["margin_rule"].as_str().unwrap_or("?"),
        fv(&doc["warn_band_pct"], 1)
    );
    for c in doc["criticals"].as_array().unwrap_or(&empty) {
        let cur = &c["current"];
        let mg = &c["margin"];
        let _ = writeln!(
            s,
            "\ncritical {}: {} r/min AF {} ({}{}), {} {} % vs {} % required: {}",
            c["mode"],
            fv(&cur["speed_rpm"], 0),
            fv(&cur["amplification_factor"], 1),
            cur["origin"].as_str().unwrap_or("?"),
            cur["event"]
                .as_i64()
                .map_or(String::new(), |e| format!(", event {e}")),
            mg["side"].as_str().unwrap_or("-"),
            fv(&mg["actual_pct"], 1),
            fv(&mg["required_pct"], 1),
            mg["verdict"].as_str().unwrap_or("-")
        );
        let t = &c["trend"];
        let _ = writeln!(
            s,
            "  trend: {} measured, {} r/min per day (given over a day or more), change since first {} r/min, {} % vs design; bias-corrected (run-up with coast-down) {} r/min",
            t["measured_points"],
            fv(&t["rpm_per_day"], 1),
            fv(&t["change_since_first_rpm"], 0),
            fv(&t["change_vs_design_pct"], 1),
            fv(&c["bias_corrected_rpm"], 0)
        );
        for h in c["history"].as_array().unwrap_or(&empty) {
            let _ = writeln!(
                s,
                "    {:<20} {:<8} {:>9} {:<10} {:<3} {:>7} r/min AF {}",
                h["valid_from"].as_str().unwrap_or("?"),
                h["origin"].as_str().unwrap_or("?"),
                h["event"]
                    .as_i64()
                    .map_or("-".to_string(), |e| format!("event {e}")),
                h["event_kind"].as_str().unwrap_or(""),
                h["channel"].as_str().unwrap_or(""),
                fv(&h["speed_rpm"], 0),
                fv(&h["amplification_factor"], 1)
            );
        }
    }
    live_text(&mut s, doc["live_estimates"].as_array().unwrap_or(&empty));
    let _ = writeln!(s, "\nrecommended alarm settings:");
    for c in doc["recommended"]["channels"].as_array().unwrap_or(&empty) {
        let z = &c["zones"];
        let _ = writeln!(
            s,
            "  {}: baseline 1X {} {} at {} r/min ({} points, {}); {}",
            c["channel"].as_str().unwrap_or("?"),
            fv(&c["baseline_1x"], 2),
            c["units"].as_str().unwrap_or(""),
            fv(&c["baseline_speed_rpm"], 0),
            c["baseline_points"],
            c["baseline_source"].as_str().unwrap_or(""),
            if z.is_null() {
                "no recommendation".to_string()
            } else {
                format!(
                    "{} B/C {} C/D {} -> warning {} alarm {}",
                    z["table"].as_str().unwrap_or(""),
                    fv(&z["b_c"], 1),
                    fv(&z["c_d"], 1),
                    fv(&c["warning_1x"], 1),
                    fv(&c["alarm_1x"], 1)
                )
            }
        );
    }
    let _ = writeln!(s, "\n{}", doc["toml"].as_str().unwrap_or(""));
    let _ = writeln!(s, "{}", doc["caution"].as_str().unwrap_or(CAUTION));
    s
}

/// The live-estimate blocks as text.
fn live_text(s: &mut String, blocks: &[Value]) {
    if blocks.is_empty() {
        let _ = writeln!(s, "\nlive critical-speed estimates: none stored");
        return;
    }
    let _ = writeln!(
        s,
        "\nlive critical-speed estimates (at steady speed: measured criticals from the 1X phase and amplitude with their event's single-mode model, configured ones from the slope of the phase against the speed's wander):"
    );
    for b in blocks {
        let known = match b["event"].as_i64() {
            Some(ev) => format!("measured {} r/min in event {ev}", fv(&b["measured_rpm"], 0)),
            None => format!("configured {} r/min", fv(&b["measured_rpm"], 0)),
        };
        let _ = writeln!(
            s,
            "  mode {} channel {} ({known}): {} estimates, {} informative, {} unbalance (1X vector change, not a critical shift)",
            b["mode"],
            b["channel"].as_str().unwrap_or("?"),
            b["estimates"],
            b["informative"],
            b["unbalance"]
        );
        let l = &b["latest"];
        if l.is_null() {
            let _ = writeln!(s, "    no informative estimate yet");
        } else {
            let m = &l["margin"];
            let _ = writeln!(
                s,
                "    latest informative {}: running {} r/min, critical {} ± {} r/min, {} {} % vs {} % required: {}",
                l["time"].as_str().unwrap_or("?"),
                fv(&l["speed_rpm"], 0),
                fv(&l["estimate_rpm"], 0),
                fv(&l["uncertainty_rpm"], 0),
                m["side"].as_str().unwrap_or("-"),
                fv(&m["actual_pct"], 1),
                fv(&m["required_pct"], 1),
                m["verdict"].as_str().unwrap_or("-")
            );
        }
        let t = &b["trend_24h"];
        let _ = writeln!(
            s,
            "    trend over the last 24 h of data: {} ± {} r/min per day ({} informative over {} h; weights {})",
            fv(&t["rpm_per_day"], 1),
            fv(&t["sigma_rpm_per_day"], 1),
            t["points"],
            fv(&t["span_h"], 1),
            t["weighting"].as_str().unwrap_or("-")
        );
    }
}
