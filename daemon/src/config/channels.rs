//! The tach and the vibration channels of a machine.

use super::check::{channel_name, Checker, Result};
use super::key::KeyPath;
use super::model::{Sensor, Tach};
use super::raw::{RawEdge, RawKind, RawSensor, RawTach};
use std::collections::HashSet;
use veer_tracker::tach::{Edge, TachConfig, TachLevels};
use veer_tracker::units::{Amplitude, Detection, SensorKind, Unit};

/// Default upper end of the plausible tach speed, as a multiple of the highest speed the machine
/// is specified to reach (trip, else MCS): room for an overspeed test, yet tight enough that a
/// doubled pulse cannot pass for a real speed.
const TACH_MAX_FACTOR: f64 = 1.5;

/// Checks the tach settings against the machine's speeds and fills in the plausible speed window
/// from them when it is not given.
pub(super) fn tach(
    c: &Checker,
    key: &KeyPath,
    t: &RawTach,
    min_operating: f64,
    top_rpm: f64,
) -> Result<Tach> {
    let channel = channel_name(c, &key.key("channel"), &t.channel)?;
    if !(1..=4096).contains(&t.ppr) {
        return Err(c.bad(
            &key.key("ppr"),
            format!("must be between 1 and 4096 (got {})", t.ppr),
        ));
    }
    if t.gap_teeth > 0 && (t.ppr < 4 || t.gap_teeth > t.ppr - 3) {
        return Err(c.bad(
            &key.key("gap_teeth"),
            "must leave at least 3 teeth on the wheel (ppr counts the missing teeth too)",
        ));
    }
    let edge = match t.edge {
        RawEdge::Rising => Edge::Rising,
        RawEdge::Falling => Edge::Falling,
    };
    let levels = match (t.trigger, t.rearm) {
        (None, None) => None,
        (Some(_), None) => {
            return Err(c.bad(
                &key.key("rearm"),
                "give rearm with trigger (or neither, to learn the levels)",
            ))
        }
        (None, Some(_)) => {
            return Err(c.bad(
                &key.key("trigger"),
                "give trigger with rearm (or neither, to learn the levels)",
            ))
        }
        (Some(trigger), Some(rearm)) => {
            if !(trigger.is_finite() && rearm.is_finite()) {
                return Err(c.bad(&key.key("trigger"), "trigger and rearm must be finite"));
            }
            let ok = match edge {
                Edge::Rising => rearm < trigger,
                Edge::Falling => rearm > trigger,
            };
            if !ok {
                let side = if edge == Edge::Rising {
                    "below"
                } else {
                    "above"
                };
                return Err(c.bad(&key.key("rearm"), format!("must be {side} trigger for a {edge:?} edge (the signal passes it before the next pulse)").to_lowercase()));
            }
            Some(TachLevels { trigger, rearm })
        }
    };
    let defaults = TachConfig::default();
    let hysteresis = t.hysteresis.unwrap_or(defaults.hysteresis);
    if !(hysteresis > 0.0 && hysteresis < 0.5) {
        return Err(c.bad(
            &key.key("hysteresis"),
            format!("must be between 0 and 0.5 of the signal span (got {hysteresis})"),
        ));
    }
    let min_rpm = t
        .min_rpm
        .unwrap_or(defaults.min_rpm.min(0.5 * min_operating));
    if !(min_rpm > 0.0 && min_rpm < min_operating) {
        return Err(c.bad(&key.key("min_rpm"), format!("must be a positive speed below min_operating_rpm ({min_operating} r/min; got {min_rpm})")));
    }
    let max_rpm = t.max_rpm.unwrap_or(TACH_MAX_FACTOR * top_rpm);
    if !(max_rpm > top_rpm && max_rpm.is_finite()) {
        return Err(c.bad(
            &key.key("max_rpm"),
            format!("must be above the highest speed the machine reaches ({top_rpm} r/min, trip or else max continuous; got {max_rpm})"),
        ));
    }
    Ok(Tach {
        channel,
        decoder: TachConfig {
            ppr: t.ppr,
            gap_teeth: t.gap_teeth,
            edge,
            levels,
            hysteresis,
            min_rpm,
            max_rpm,
            ..defaults
        },
    })
}

/// Checks the vibration channels: at least one, names distinct and not the tach's, units known.
pub(super) fn sensors(
    c: &Checker,
    key: &KeyPath,
    list: &[RawSensor],
    tach_channel: &str,
) -> Result<Vec<Sensor>> {
    if list.is_empty() {
        return Err(c.bad(key, "list at least one vibration sensor"));
    }
    let mut seen = HashSet::new();
    let mut out = Vec::with_capacity(list.len());
    for (i, s) in list.iter().enumerate() {
        let k = key.index(i);
        let channel = channel_name(c, &k.key("channel"), &s.channel)?;
        if channel == tach_channel {
            return Err(c.bad(
                &k.key("channel"),
                format!("`{channel}` is the tach channel"),
            ));
        }
        if !seen.insert(channel.clone()) {
            return Err(c.bad(&k.key("channel"), format!("`{channel}` is listed twice")));
        }
        out.push(sensor(c, &k, s, channel)?);
    }
    Ok(out)
}

fn sensor(c: &Checker, k: &KeyPath, s: &RawSensor, channel: String) -> Result<Sensor> {
    let unit = Unit::parse(&s.units).map_err(|e| c.bad(&k.key("units"), e.to_string()))?;
    let kind = match s.kind {
        None => unit.kind(),
        Some(raw) => {
            let kind = match raw {
                RawKind::Displacement => SensorKind::Displacement,
                RawKind::Velocity => SensorKind::Velocity,
                RawKind::Acceleration => SensorKind::Acceleration,
            };
            if kind != unit.kind() {
                return Err(c.bad(
                    &k.key("units"),
                    format!(
                        "`{}` is a {:?} unit, but kind is {:?}",
                        s.units,
                        unit.kind(),
                        kind
                    )
                    .to_lowercase(),
                ));
            }
            kind
        }
    };
    let detection = match &s.detection {
        None => unit.usual_detection(),
        Some(d) => Detection::parse(d).map_err(|e| c.bad(&k.key("detection"), e.to_string()))?,
    };
    if !(s.scale.is_finite() && s.scale != 0.0) {
        return Err(c.bad(
            &k.key("scale"),
            format!("must be a finite, non-zero factor (got {})", s.scale),
        ));
    }
    c.within(
        &k.key("angle_deg"),
        s.angle_deg,
        -360.0,
        360.0,
        "must be between -360 and 360 degrees",
    )?;
    for (name, level) in [("warning_1x", s.warning_1x), ("alarm_1x", s.alarm_1x)] {
        if let Some(v) = level {
            c.above(
                &k.key(name),
                v,
                0.0,
                f64::MAX,
                "must be a positive amplitude",
            )?;
        }
    }
    if let (Some(w), Some(a)) = (s.warning_1x, s.alarm_1x) {
        if !(a > w) {
            return Err(c.bad(
                &k.key("alarm_1x"),
                format!("must be above warning_1x ({w}; got {a})"),
            ));
        }
    }
    Ok(Sensor {
        channel,
        kind,
        amplitude: Amplitude { unit, detection },
        scale: s.scale,
        angle_deg: s.angle_deg,
        warning_1x: s.warning_1x,
        alarm_1x: s.alarm_1x,
    })
}
