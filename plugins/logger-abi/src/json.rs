//! Results as JSON lines: one object per result, with a `type` key.
//!
//! An event object carries exactly the keys and rounding of an event in `veer analyze --json` (both
//! come from the `veer-results` crate), so a host program's output can be compared with (or fed
//! to) what the command line prints.

use crate::tracker::Output;
use serde_json::{json, Value};
use veer_tracker::engine::{Event, RevolutionUpdate, Update};
use veer_tracker::lag_deg;
use veer_tracker::states::StateChange;

use veer_results::round as r;

/// An event as in `veer analyze --json`, plus `"type": "event"`.
pub fn event(e: &Event) -> Value {
    let mut v = veer_results::event(e);
    if let Some(obj) = v.as_object_mut() {
        obj.insert("type".to_string(), json!("event"));
    }
    v
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
