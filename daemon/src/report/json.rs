//! The JSON document of `veer analyze --json` (the contract in the design notes, plus extra keys).

use super::{side_name, verdict_name, CAUTION};
use crate::pipeline::Analysis;
use serde_json::{json, Value};
use veer_tracker::engine::{Critical, Event, EventChannel};
use veer_tracker::lag_deg;

/// Rounds for print: JSON readers get figures to a sensible precision, not float noise.
fn r(x: f64, digits: i32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let f = 10f64.powi(digits);
    json!((x * f).round() / f)
}

fn opt(x: Option<f64>, digits: i32) -> Value {
    x.map_or(Value::Null, |v| r(v, digits))
}

fn critical(c: &Critical) -> Value {
    let res = &c.resonance;
    let mut v = json!({
        "speed_rpm": r(res.speed_rpm, 1),
        "peak_amplitude": r(res.peak_amplitude, 3),
        "phase_deg": r(res.phase_deg, 1),
        "amplification_factor": opt(res.amplification_factor, 2),
        "damping_ratio": opt(res.damping_ratio, 4),
        "phase_change_deg": r(res.phase_change_deg, 1),
        "n1_rpm": opt(res.n1_rpm, 1),
        "n2_rpm": opt(res.n2_rpm, 1),
        "heavily_damped": res.heavily_damped,
        "fit": res.fit.as_ref().map_or(Value::Null, |f| json!({
            "natural_rpm": r(f.natural_rpm, 1),
            "damping_ratio": r(f.damping_ratio, 4),
            "rms_residual": r(f.rms_residual, 4),
            "points": f.points,
        })),
    });
    if let Some(m) = &c.margin {
        v["margin"] = json!({
            "side": side_name(m.side),
            "required_pct": r(m.required_pct, 2),
            "actual_pct": r(m.actual_pct, 2),
            "verdict": verdict_name(m.verdict),
        });
    }
    v
}

fn channel(c: &EventChannel) -> Value {
    json!({
        "channel": c.name,
        "units": c.amplitude.to_string(),
        "slow_roll": c.slow_roll.map_or(Value::Null, |s| json!({
            "amplitude": r(s.vector.norm(), 3),
            "phase_deg": r(lag_deg(s.vector), 1),
            "speed_min_rpm": r(s.speed_min_rpm, 1),
            "speed_max_rpm": r(s.speed_max_rpm, 1),
            "points": s.points,
        })),
        "response_points": c.response.len(),
        "order_map_rows": c.order_map.len(),
        "resonances": c.criticals.iter().map(critical).collect::<Vec<_>>(),
    })
}

/// One event as in the `events` array of the document (also written by `veer filter`).
pub(crate) fn event(e: &Event) -> Value {
    json!({
        "kind": e.kind.name(),
        "start_s": r(e.start_s, 3),
        "end_s": r(e.end_s, 3),
        "speed_start_rpm": r(e.speed_start_rpm, 1),
        "speed_end_rpm": r(e.speed_end_rpm, 1),
        "sweep_rate_rpm_s": r(e.sweep_rate_rpm_s, 2),
        "channels": e.channels.iter().map(channel).collect::<Vec<_>>(),
    })
}

/// The whole document.
pub(crate) fn document(a: &Analysis) -> Value {
    let p = a.stats.pulses;
    let mut doc = json!({
        "source": a.source,
        "sample_rate_hz": a.sample_rate,
        "start_s": r(a.start_s, 6),
        "vibration_channels": a.channels,
        "duration_s": r(a.duration_s, 3),
        "tach": {
            "column": a.tach,
            "revolutions": a.stats.revolutions,
            "pulses": p.pulses,
            "pulses_inserted": p.inserted,
            "pulses_dropped": p.dropped,
            "tach_losses": p.losses,
        },
        "events": a.events.iter().map(event).collect::<Vec<_>>(),
        "caution": CAUTION,
    });
    if let Some(m) = &a.config.margins {
        doc["margin_rule"] = json!(m.rule.name());
        doc["operating_range_rpm"] = json!([m.range.min_rpm, m.range.max_rpm]);
    }
    doc
}
