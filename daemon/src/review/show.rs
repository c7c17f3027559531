//! `veer show EVENT`: per channel, each critical the engine found with its AF, damping, phase,
//! half-power speeds, fit, margins and verdict; whether the sweep was slow enough to trust the
//! peak, the bias-corrected speed where the machine also has a sweep the other way; and the 1X
//! vector at the operating speeds.

use super::bias;
use super::{fmt_opt, load, mean_vector, r, ro, se, EventData};
use crate::config::Config;
use crate::report::{side_name, CAUTION};
use crate::timefmt::rfc3339;
use anyhow::Result;
use serde_json::{json, Value};
use std::fmt::Write;
use veer_storage::{EventKind, ResonanceRow, Series, Store};
use veer_tracker::margin::actual_margin_pct;

/// A critical matched in another event: same channel, nearest speed within this fraction.
pub(crate) const MATCH_FRACTION: f64 = 0.10;

/// The resonance of `list` on `channel` nearest to `rpm`, if within [`MATCH_FRACTION`].
pub(crate) fn matching<'a>(
    list: &'a [ResonanceRow],
    channel: &str,
    rpm: f64,
) -> Option<&'a ResonanceRow> {
    list.iter()
        .filter(|x| x.channel == channel && (x.speed_rpm - rpm).abs() <= MATCH_FRACTION * rpm)
        .min_by(|a, b| {
            (a.speed_rpm - rpm)
                .abs()
                .total_cmp(&(b.speed_rpm - rpm).abs())
        })
}

/// How well the fitted mode agrees with the peak: for an unbalance response the peak lies at
/// ωn/√(1 − 2ζ²) (S. S. Rao, Mechanical Vibrations, 5th ed., §3.7), so the grade is the distance of
/// the fitted natural speed from that, in percent: good within 1 %, fair within 3 %.
fn fit_value(c: &ResonanceRow) -> Value {
    let Some(nat) = c.natural_rpm else {
        return json!({"natural_rpm": null, "quality": "no fit"});
    };
    let zeta = c.damping_ratio.unwrap_or(0.0).clamp(0.0, 0.5);
    let expected_peak = nat / (1.0 - 2.0 * zeta * zeta).sqrt();
    let off = (c.speed_rpm - expected_peak) / expected_peak * 100.0;
    let quality = if off.abs() <= 1.0 {
        "good"
    } else if off.abs() <= 3.0 {
        "fair"
    } else {
        "poor"
    };
    json!({"natural_rpm": r(nat, 1), "peak_vs_fit_pct": r(off, 2),
           "phase_change_deg": r(c.phase_change_deg, 1), "quality": quality})
}

fn critical_value(
    ev: &EventData,
    c: &ResonanceRow,
    opposite: &[(i64, f64, Vec<ResonanceRow>)],
) -> Value {
    let side = ev
        .range
        .map(|rg| side_name(actual_margin_pct(c.speed_rpm, &rg).0));
    let zeta = c
        .damping_ratio
        .or_else(|| c.amplification_factor.map(|af| 0.5 / af));
    let sweep = zeta
        .and_then(|z| bias::check(c.speed_rpm, z, ev.event.sweep_rate_rpm_s, ev.is_run_up()))
        .map_or(Value::Null, |s| {
            json!({"eta": r(s.eta, 7), "predicted_shift_pct": r(s.shift_pct, 3),
                   "predicted_peak_loss_pct": r(s.loss_pct, 2),
                   "model_corrected_rpm": r(s.corrected_rpm, 1), "trusted": s.trusted})
        });
    let mut pair = Value::Null;
    for (other_id, other_rate, list) in opposite {
        if let Some(o) = matching(list, &c.channel, c.speed_rpm) {
            let (up, ur, dn, dr) = if ev.is_run_up() {
                (
                    c.speed_rpm,
                    ev.event.sweep_rate_rpm_s,
                    o.speed_rpm,
                    *other_rate,
                )
            } else {
                (
                    o.speed_rpm,
                    *other_rate,
                    c.speed_rpm,
                    ev.event.sweep_rate_rpm_s,
                )
            };
            pair = json!({"rpm": r(bias::pair_corrected(up, ur, dn, dr), 1),
                          "other_event": other_id, "other_rpm": r(o.speed_rpm, 1)});
            break;
        }
    }
    json!({
        "order": c.order,
        "speed_rpm": r(c.speed_rpm, 1),
        "amplification_factor": ro(c.amplification_factor, 2),
        "damping_ratio": ro(c.damping_ratio, 4),
        "phase_deg": r(c.phase_deg, 1),
        "peak_amplitude": r(c.peak_amplitude, 3),
        "n1_rpm": ro(c.n1_rpm, 1),
        "n2_rpm": ro(c.n2_rpm, 1),
        "heavily_damped": c.heavily_damped,
        "fit": fit_value(c),
        "margin": {
            "side": side,
            "required_pct": ro(c.required_margin_pct, 2),
            "actual_pct": ro(c.actual_margin_pct, 2),
            "verdict": c.margin_verdict,
        },
        "sweep": sweep,
        "bias_corrected": pair,
    })
}

/// The 1X vector (measured and compensated) averaged over the points inside the operating range.
pub(crate) fn at_operating_speed(ev: &EventData, channel: &str) -> Value {
    let Some(rg) = ev.range else {
        return Value::Null;
    };
    let one = |series| {
        ev.trace(channel, 1, series)
            .and_then(|t| mean_vector(&t.points, rg.min_rpm, rg.max_rpm))
            .map_or(Value::Null, |(v, n, lo, hi)| {
                json!({"amplitude": r(v.amplitude, 3), "phase_deg": r(v.phase_deg, 1), "points": n,
                       "speed_min_rpm": r(lo, 1), "speed_max_rpm": r(hi, 1)})
            })
    };
    json!({"measured": one(Series::Measured), "compensated": one(Series::Compensated)})
}

/// The events of the same machine swept the other way, nearest in time first, with their rate and
/// resonances.
fn opposite_events(store: &Store, ev: &EventData) -> Result<Vec<(i64, f64, Vec<ResonanceRow>)>> {
    let want = if ev.is_run_up() {
        EventKind::CoastDown
    } else {
        EventKind::RunUp
    };
    let mut list: Vec<_> = store
        .events(Some(&ev.machine.id), None)
        .map_err(se)?
        .into_iter()
        .filter(|e| e.kind == want)
        .collect();
    list.sort_by(|a, b| {
        (a.start_time - ev.event.start_time)
            .abs()
            .total_cmp(&(b.start_time - ev.event.start_time).abs())
    });
    let mut out = Vec::new();
    for e in list {
        let res = store
            .resonances(e.id)
            .map_err(se)?
            .into_iter()
            .map(|x| x.row)
            .collect();
        out.push((e.id, e.sweep_rate_rpm_s, res));
    }
    Ok(out)
}

/// The document of one loaded event.
pub(crate) fn document_of(store: &Store, ev: &EventData) -> Result<Value> {
    let opposite = opposite_events(store, ev)?;
    let mut chans = Vec::new();
    for c in &ev.event.channels {
        let crits: Vec<Value> = ev
            .resonances_of(&c.channel)
            .map(|x| critical_value(ev, x, &opposite))
            .collect();
        chans.push(json!({
            "channel": c.channel,
            "units": c.units,
            "slow_roll": c.slow_roll.map_or(Value::Null, |s| json!({
                "amplitude": r(s.vector.amplitude, 3), "phase_deg": r(s.vector.phase_deg, 1),
                "speed_min_rpm": r(s.min_rpm, 1), "speed_max_rpm": r(s.max_rpm, 1), "points": s.points})),
            "criticals": crits,
            "vector_at_operating_speed": at_operating_speed(ev, &c.channel),
        }));
    }
    let e = &ev.event;
    Ok(json!({
        "event": {
            "id": ev.id, "machine": ev.machine.id, "machine_name": ev.machine.name,
            "kind": e.kind.as_str(), "start": rfc3339(e.start_time), "end": rfc3339(e.end_time),
            "speed_start_rpm": r(e.speed_start_rpm, 1), "speed_end_rpm": r(e.speed_end_rpm, 1),
            "sweep_rate_rpm_s": r(e.sweep_rate_rpm_s, 2), "vectors": e.vector_count,
        },
        "operating_range_rpm": ev.range.map(|g| json!([g.min_rpm, g.max_rpm])),
        "margin_rule": ev.rule.name(),
        "warn_band_pct": ev.band,
        "sweep_trust_limits": {"shift_pct": bias::TRUST_SHIFT_PCT, "peak_loss_pct": bias::TRUST_LOSS_PCT},
        "channels": chans,
        "caution": CAUTION,
    }))
}

/// Loads an event and builds its document.
pub(crate) fn document(store: &Store, cfg: Option<&Config>, id: i64) -> Result<Value> {
    let ev = load(store, cfg, id)?;
    document_of(store, &ev)
}

fn f(v: &Value, prec: usize) -> String {
    fmt_opt(v.as_f64(), prec)
}

/// The document as text.
pub(crate) fn text(doc: &Value) -> String {
    let mut s = String::new();
    let e = &doc["event"];
    let empty = Vec::new();
    let _ = writeln!(
        s,
        "event {}: {} ({}), {} from {}, {} -> {} r/min at {} r/min/s",
        e["id"],
        e["machine"].as_str().unwrap_or("?"),
        e["machine_name"].as_str().unwrap_or(""),
        e["kind"].as_str().unwrap_or("?"),
        e["start"].as_str().unwrap_or("?"),
        f(&e["speed_start_rpm"], 0),
        f(&e["speed_end_rpm"], 0),
        f(&e["sweep_rate_rpm_s"], 1)
    );
    if let Some(rg) = doc["operating_range_rpm"].as_array() {
        let _ = writeln!(
            s,
            "operating range {}-{} r/min, margin rule {}, warning band {} points",
            f(&rg[0], 0),
            f(&rg[1], 0),
            doc["margin_rule"].as_str().unwrap_or("?"),
            f(&doc["warn_band_pct"], 1)
        );
    }
    for c in doc["channels"].as_array().unwrap_or(&empty) {
        let units = c["units"].as_str().unwrap_or("");
        let sr = &c["slow_roll"];
        let _ = writeln!(
            s,
            "\nchannel {} [{units}]: {}",
            c["channel"].as_str().unwrap_or("?"),
            if sr.is_null() {
                "no slow-roll compensation".to_string()
            } else {
                format!(
                    "slow roll {} at {}° lag ({}-{} r/min)",
                    f(&sr["amplitude"], 2),
                    f(&sr["phase_deg"], 0),
                    f(&sr["speed_min_rpm"], 0),
                    f(&sr["speed_max_rpm"], 0)
                )
            }
        );
        let crits = c["criticals"].as_array().unwrap_or(&empty);
        if crits.is_empty() {
            let _ = writeln!(s, "  no critical speed found in this event");
        } else {
            let _ = writeln!(
                s,
                "  {:>8} {:>6} {:>6} {:>6} {:>9} {:>7} {:>7} {:>10} {:>15} {:>7} {:>7}  verdict",
                "Nc r/min",
                "AF",
                "zeta",
                "lag °",
                "peak",
                "N1",
                "N2",
                "fit",
                "side",
                "req %",
                "act %"
            );
        }
        for x in crits {
            let m = &x["margin"];
            let _ = writeln!(
                s,
                "  {:>8} {:>6} {:>6} {:>6} {:>9} {:>7} {:>7} {:>10} {:>15} {:>7} {:>7}  {}",
                f(&x["speed_rpm"], 0),
                f(&x["amplification_factor"], 1),
                f(&x["damping_ratio"], 3),
                f(&x["phase_deg"], 0),
                f(&x["peak_amplitude"], 2),
                f(&x["n1_rpm"], 0),
                f(&x["n2_rpm"], 0),
                x["fit"]["quality"].as_str().unwrap_or("-"),
                m["side"].as_str().unwrap_or("-"),
                f(&m["required_pct"], 1),
                f(&m["actual_pct"], 1),
                m["verdict"].as_str().unwrap_or("-")
            );
            let sw = &x["sweep"];
            if !sw.is_null() {
                let trusted = sw["trusted"].as_bool().unwrap_or(false);
                let _ = writeln!(
                    s,
                    "           sweep: eta {:.1e}, peak predicted {:+.2} % off and {:.1} % low{}",
                    sw["eta"].as_f64().unwrap_or(f64::NAN),
                    sw["predicted_shift_pct"].as_f64().unwrap_or(f64::NAN),
                    sw["predicted_peak_loss_pct"].as_f64().unwrap_or(f64::NAN),
                    if trusted {
                        String::new()
                    } else {
                        format!(
                            ": SWEEP TOO FAST, peak not to be trusted (corrected about {} r/min)",
                            f(&sw["model_corrected_rpm"], 0)
                        )
                    }
                );
            }
            let b = &x["bias_corrected"];
            if !b.is_null() {
                let _ = writeln!(
                    s,
                    "           bias-corrected with event {} ({} r/min): {} r/min",
                    b["other_event"],
                    f(&b["other_rpm"], 0),
                    f(&b["rpm"], 0)
                );
            }
        }
        let v = &c["vector_at_operating_speed"];
        for (name, key) in [("measured", "measured"), ("compensated", "compensated")] {
            let p = &v[key];
            if p.is_null() {
                continue;
            }
            let _ = writeln!(
                s,
                "  1X at operating speed ({name}): {} {units} at {}° lag, mean of {} points {}-{} r/min",
                f(&p["amplitude"], 2),
                f(&p["phase_deg"], 0),
                p["points"],
                f(&p["speed_min_rpm"], 0),
                f(&p["speed_max_rpm"], 0)
            );
        }
        if v.is_null() || (v["measured"].is_null() && v["compensated"].is_null()) {
            let _ = writeln!(s, "  1X at operating speed: not reached in this event");
        }
    }
    let _ = writeln!(s, "\n{CAUTION}");
    s
}
