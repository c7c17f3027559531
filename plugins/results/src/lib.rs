//! veer-results: how veer prints the engine's results, in one place.
//!
//! `veer analyze --json`, `veer filter` and the plugin interface's JSON results must agree to the
//! last printed digit, so the keys, the rounding and the plain names of sides and verdicts live
//! here, and every output uses them.

use serde_json::{json, Value};
use veer_tracker::engine::{Critical, Event, EventChannel};
use veer_tracker::lag_deg;
use veer_tracker::margin::{Side, Verdict};

/// Rounds for print: figures to a sensible precision, not float noise; `null` when not finite.
pub fn round(x: f64, digits: i32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let f = 10f64.powi(digits);
    json!((x * f).round() / f)
}

/// [`round`] of an optional figure; `null` when absent.
pub fn round_opt(x: Option<f64>, digits: i32) -> Value {
    x.map_or(Value::Null, |v| round(v, digits))
}

/// The plain name of a side, as printed and in JSON.
pub fn side_name(s: Side) -> &'static str {
    match s {
        Side::Below => "below-range",
        Side::Inside => "inside-range",
        Side::Above => "above-range",
    }
}

/// The plain name of a verdict, as printed and in JSON.
pub fn verdict_name(v: Verdict) -> &'static str {
    match v {
        Verdict::NotRequired => "no-margin-needed",
        Verdict::Clear => "clear",
        Verdict::Warning => "warning",
        Verdict::Breach => "alarm",
    }
}

/// One critical speed with its margin, as in an event's `resonances` list.
pub fn critical(c: &Critical) -> Value {
    let res = &c.resonance;
    let mut v = json!({
        "speed_rpm": round(res.speed_rpm, 1),
        "peak_amplitude": round(res.peak_amplitude, 3),
        "phase_deg": round(res.phase_deg, 1),
        "amplification_factor": round_opt(res.amplification_factor, 2),
        "damping_ratio": round_opt(res.damping_ratio, 4),
        "phase_change_deg": round(res.phase_change_deg, 1),
        "n1_rpm": round_opt(res.n1_rpm, 1),
        "n2_rpm": round_opt(res.n2_rpm, 1),
        "heavily_damped": res.heavily_damped,
        "fit": res.fit.as_ref().map_or(Value::Null, |f| json!({
            "natural_rpm": round(f.natural_rpm, 1),
            "damping_ratio": round(f.damping_ratio, 4),
            "rms_residual": round(f.rms_residual, 4),
            "points": f.points,
        })),
    });
    if let Some(m) = &c.margin {
        v["margin"] = json!({
            "side": side_name(m.side),
            "required_pct": round(m.required_pct, 2),
            "actual_pct": round(m.actual_pct, 2),
            "verdict": verdict_name(m.verdict),
        });
    }
    v
}

/// One channel of an event.
pub fn channel(c: &EventChannel) -> Value {
    json!({
        "channel": c.name,
        "units": c.amplitude.to_string(),
        "slow_roll": c.slow_roll.map_or(Value::Null, |s| json!({
            "amplitude": round(s.vector.norm(), 3),
            "phase_deg": round(lag_deg(s.vector), 1),
            "speed_min_rpm": round(s.speed_min_rpm, 1),
            "speed_max_rpm": round(s.speed_max_rpm, 1),
            "points": s.points,
        })),
        "response_points": c.response.len(),
        "order_map_rows": c.order_map.len(),
        "resonances": c.criticals.iter().map(critical).collect::<Vec<_>>(),
    })
}

/// A finished run-up or coast-down, with the keys of the `veer analyze --json` contract.
pub fn event(e: &Event) -> Value {
    json!({
        "kind": e.kind.name(),
        "start_s": round(e.start_s, 3),
        "end_s": round(e.end_s, 3),
        "speed_start_rpm": round(e.speed_start_rpm, 1),
        "speed_end_rpm": round(e.speed_end_rpm, 1),
        "sweep_rate_rpm_s": round(e.sweep_rate_rpm_s, 2),
        "channels": e.channels.iter().map(channel).collect::<Vec<_>>(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounding_and_names() {
        assert_eq!(round(1.23456, 2), json!(1.23));
        assert_eq!(round(f64::NAN, 2), Value::Null);
        assert_eq!(round_opt(None, 1), Value::Null);
        assert_eq!(side_name(Side::Above), "above-range");
        assert_eq!(verdict_name(Verdict::Breach), "alarm");
    }
}
