//! Results as JSON lines: one object per result, with a `type` key.
//!
//! An event object carries exactly the keys and rounding of an event in `veer analyze --json`, so a
//! host program's output can be compared with (or fed to) what the command line prints. The
//! rounding and names are the daemon's report module's, repeated here because that module lives in
//! the binary crate; both must change together until they move into a shared crate.

use crate::tracker::Output;
use serde_json::{json, Value};
use veer_tracker::engine::{Critical, Event, EventChannel, RevolutionUpdate, Update};
use veer_tracker::lag_deg;
use veer_tracker::margin::{Side, Verdict};
use veer_tracker::states::StateChange;

/// Rounds for print: figures to a sensible precision, not float noise; `null` when not finite.
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

/// The plain name of a side, as `veer analyze` prints it.
pub(crate) fn side_name(s: Side) -> &'static str {
    match s {
        Side::Below => "below-range",
        Side::Inside => "inside-range",
        Side::Above => "above-range",
    }
}

/// The plain name of a verdict, as `veer analyze` prints it.
pub(crate) fn verdict_name(v: Verdict) -> &'static str {
    match v {
        Verdict::NotRequired => "no-margin-needed",
        Verdict::Clear => "clear",
        Verdict::Warning => "warning",
        Verdict::Breach => "alarm",
    }
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

/// An event as in `veer analyze --json`, plus `"type": "event"`.
pub fn event(e: &Event) -> Value {
    json!({
        "type": "event",
        "kind": e.kind.name(),
        "start_s": r(e.start_s, 3),
        "end_s": r(e.end_s, 3),
        "speed_start_rpm": r(e.speed_start_rpm, 1),
        "speed_end_rpm": r(e.speed_end_rpm, 1),
        "sweep_rate_rpm_s": r(e.sweep_rate_rpm_s, 2),
        "channels": e.channels.iter().map(channel).collect::<Vec<_>>(),
    })
}

/// A revolution's vectors: amplitude in display units, phase lag in degrees.
pub fn revolution(u: &RevolutionUpdate, channels: &[String], orders: &[u32]) -> Value {
    let n = orders.len().max(1);
    let vectors: Vec<Value> = u
        .vectors
        .iter()
        .enumerate()
        .map(|(i, v)| {
            json!({
                "channel": channels.get(i / n).map_or("?", |s| s.as_str()),
                "order": orders.get(i % n).copied().unwrap_or(0),
                "amplitude": r(v.norm(), 4),
                "phase_deg": r(lag_deg(*v), 2),
            })
        })
        .collect();
    json!({
        "type": "revolution",
        "time_s": r(u.time_s, 6),
        "speed_rpm": r(u.speed_rpm, 3),
        "state": u.state.name(),
        "vectors": vectors,
    })
}

/// A change of machine state.
pub fn state(c: &StateChange) -> Value {
    json!({
        "type": "state",
        "time_s": r(c.time_s, 3),
        "from": c.from.name(),
        "to": c.to.name(),
        "speed_rpm": r(c.speed_rpm, 1),
    })
}

/// One result as a JSON object.
pub fn output(o: &Output, channels: &[String], orders: &[u32]) -> Value {
    match o {
        Output::Update(Update::Revolution(u)) => revolution(u, channels, orders),
        Output::Update(Update::State(c)) => state(c),
        Output::Update(Update::Event(e)) => event(e),
        Output::Update(Update::TachLost(t)) => json!({"type": "tach-lost", "time_s": r(*t, 3)}),
        Output::Update(_) => json!({"type": "other"}),
        Output::Gap { time_s, expected_s } => {
            json!({"type": "gap", "time_s": r(*time_s, 6), "expected_s": r(*expected_s, 6)})
        }
    }
}
