//! The configuration string: one machine's section of the daemon's TOML file, read into the
//! engine's settings.
//!
//! A host program that already has a machine described for the daemon can pass that section as it
//! is (its keys at the top level, or wrapped in a single `[[machine]]`), so a site keeps one
//! description of each machine. Only what the engine needs is used: `min_operating_rpm`,
//! `max_continuous_rpm`, `trip_rpm`, `tach`, `sensors`, `tracking`, and `alerts.margin` and
//! `alerts.warn_band_pct`. The daemon's other keys (`id`, `name`, `source`, `criticals`, the alert
//! delays and outputs, the sensors' alert levels) are accepted and ignored; any other key is an error
//! that names it, as in the daemon.
//!
//! The rules (defaults, ranges) are the daemon's, repeated here because the daemon's reader lives in
//! its binary crate; both must change together until they move into a shared crate.

use serde::de::IgnoredAny;
use serde::Deserialize;
use thiserror::Error;
use veer_tracker::config::{ChannelConfig, EngineConfig, MarginSettings, SlowRoll};
use veer_tracker::margin::{MarginRule, OperatingRange};
use veer_tracker::spectrum::OrderMapConfig;
use veer_tracker::states::StateConfig;
use veer_tracker::tach::{Edge, TachConfig, TachLevels};
use veer_tracker::units::{Amplitude, Detection, SensorKind, Unit};
use veer_tracker::vectors::VectorConfig;

/// Share of the minimum operating speed below which steady running counts as slow roll, when that
/// is lower than the engine's default limit (the daemon's rule: slow roll is well below any
/// operating speed, common practice).
const SLOW_ROLL_SHARE: f64 = 0.5;

/// Default top of the plausible tach speed, as a multiple of the highest specified speed (trip,
/// else MCS): the daemon's rule.
const TACH_MAX_FACTOR: f64 = 1.5;

/// A configuration string that cannot be used, naming the key.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ConfigError {
    /// Not TOML, a key of the wrong type, a key missing or unknown.
    #[error("configuration, line {line}, column {column}: {message}")]
    Syntax {
        /// 1-based line of the mistake.
        line: usize,
        /// 1-based column of the mistake.
        column: usize,
        /// What the TOML reader said, on one line.
        message: String,
    },
    /// A value that has the right type but cannot work.
    #[error("configuration key `{key}`: {reason}")]
    Invalid {
        /// The key, as a path such as `sensors[1].units`.
        key: String,
        /// Why it was refused.
        reason: String,
    },
}

fn bad(key: impl Into<String>, reason: impl Into<String>) -> ConfigError {
    ConfigError::Invalid {
        key: key.into(),
        reason: reason.into(),
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Wrapped {
    machine: Vec<RawMachine>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMachine {
    #[serde(default, rename = "id")]
    _id: Option<IgnoredAny>,
    #[serde(default, rename = "name")]
    _name: Option<IgnoredAny>,
    min_operating_rpm: f64,
    max_continuous_rpm: f64,
    #[serde(default)]
    trip_rpm: Option<f64>,
    #[serde(default, rename = "source")]
    _source: Option<IgnoredAny>,
    tach: RawTach,
    sensors: Vec<RawSensor>,
    #[serde(default, rename = "criticals")]
    _criticals: Option<IgnoredAny>,
    #[serde(default)]
    tracking: RawTracking,
    #[serde(default)]
    alerts: RawAlerts,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTach {
    channel: String,
    #[serde(default = "one")]
    ppr: u32,
    #[serde(default)]
    gap_teeth: u32,
    #[serde(default)]
    edge: RawEdge,
    #[serde(default)]
    trigger: Option<f32>,
    #[serde(default)]
    rearm: Option<f32>,
    #[serde(default)]
    hysteresis: Option<f32>,
    #[serde(default)]
    min_rpm: Option<f64>,
    #[serde(default)]
    max_rpm: Option<f64>,
}

fn one() -> u32 {
    1
}

fn unit_scale() -> f64 {
    1.0
}

#[derive(Clone, Copy, Debug, Default, Deserialize)]
#[serde(rename_all = "lowercase")]
enum RawEdge {
    #[default]
    Rising,
    Falling,
}

#[derive(Clone, Copy, Debug, Deserialize)]
#[serde(rename_all = "lowercase")]
enum RawKind {
    Displacement,
    Velocity,
    Acceleration,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSensor {
    channel: String,
    #[serde(default)]
    kind: Option<RawKind>,
    units: String,
    #[serde(default)]
    detection: Option<String>,
    #[serde(default = "unit_scale")]
    scale: f64,
    #[serde(default)]
    angle_deg: f64,
    #[serde(default, rename = "warning_1x")]
    _warning_1x: Option<IgnoredAny>,
    #[serde(default, rename = "alarm_1x")]
    _alarm_1x: Option<IgnoredAny>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
struct RawTracking {
    orders: Vec<u32>,
    revs_per_vector: u32,
    slow_roll: toml::Value,
    order_map: bool,
    bin_pct: f64,
}

impl Default for RawTracking {
    fn default() -> Self {
        Self {
            orders: vec![1, 2],
            revs_per_vector: 1,
            slow_roll: toml::Value::String("auto".to_string()),
            order_map: true,
            bin_pct: 0.2,
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
struct RawAlerts {
    margin: toml::Value,
    warn_band_pct: f64,
    drift_horizon_min: IgnoredAny,
    drift_window_min: IgnoredAny,
    delay_s: IgnoredAny,
    hysteresis_pct: IgnoredAny,
    critical_shift_pct: IgnoredAny,
    startup_multiplier: IgnoredAny,
    outputs: IgnoredAny,
}

impl Default for RawAlerts {
    fn default() -> Self {
        Self {
            margin: toml::Value::String("api".to_string()),
            warn_band_pct: 5.0,
            drift_horizon_min: IgnoredAny,
            drift_window_min: IgnoredAny,
            delay_s: IgnoredAny,
            hysteresis_pct: IgnoredAny,
            critical_shift_pct: IgnoredAny,
            startup_multiplier: IgnoredAny,
            outputs: IgnoredAny,
        }
    }
}

/// 1-based line and column of a byte offset.
fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before
        .rfind('\n')
        .map_or(before.len(), |i| before.len() - i - 1)
        + 1;
    (line, column)
}

fn syntax(text: &str, e: &toml::de::Error) -> ConfigError {
    let (line, column) = e.span().map_or((1, 1), |s| line_col(text, s.start));
    ConfigError::Syntax {
        line,
        column,
        message: e.message().split_whitespace().collect::<Vec<_>>().join(" "),
    }
}

/// Reads a configuration string into the engine's settings, checked by the engine too.
pub fn parse(text: &str) -> Result<EngineConfig, ConfigError> {
    let table: toml::Table = toml::from_str(text).map_err(|e| syntax(text, &e))?;
    let (raw, prefix) = if table.contains_key("machine") {
        let w: Wrapped = toml::from_str(text).map_err(|e| syntax(text, &e))?;
        let n = w.machine.len();
        let mut it = w.machine.into_iter();
        match (it.next(), n) {
            (Some(m), 1) => (m, "machine[0]."),
            _ => {
                return Err(bad(
                    "machine",
                    format!("{n} machines given; pass one machine's section"),
                ))
            }
        }
    } else {
        (
            toml::from_str::<RawMachine>(text).map_err(|e| syntax(text, &e))?,
            "",
        )
    };
    machine(&raw).map_err(|e| match e {
        ConfigError::Invalid { key, reason } => ConfigError::Invalid {
            key: format!("{prefix}{key}"),
            reason,
        },
        other => other,
    })
}

fn machine(m: &RawMachine) -> Result<EngineConfig, ConfigError> {
    let range = OperatingRange::new(m.min_operating_rpm, m.max_continuous_rpm)
        .map_err(|e| bad("min_operating_rpm", e.to_string()))?;
    let top = match m.trip_rpm {
        Some(t) if !(t.is_finite() && t >= m.max_continuous_rpm) => {
            return Err(bad(
                "trip_rpm",
                format!(
                    "must be at least max_continuous_rpm ({} r/min; got {t})",
                    m.max_continuous_rpm
                ),
            ))
        }
        Some(t) => t,
        None => m.max_continuous_rpm,
    };
    let tach = tach(&m.tach, m.min_operating_rpm, top)?;
    if m.sensors.is_empty() {
        return Err(bad("sensors", "list at least one vibration sensor"));
    }
    let mut channels: Vec<ChannelConfig> = Vec::with_capacity(m.sensors.len());
    for (i, s) in m.sensors.iter().enumerate() {
        let c = sensor(s, i)?;
        if c.name == m.tach.channel.trim() {
            return Err(bad(
                format!("sensors[{i}].channel"),
                format!("`{}` is the tach channel", c.name),
            ));
        }
        if channels.iter().any(|o| o.name == c.name) {
            return Err(bad(
                format!("sensors[{i}].channel"),
                format!("`{}` is listed twice", c.name),
            ));
        }
        channels.push(c);
    }
    let t = &m.tracking;
    let slow_roll = slow_roll(&t.slow_roll)?;
    let rule = margin_rule(&m.alerts.margin)?;
    if !(m.alerts.warn_band_pct >= 0.0 && m.alerts.warn_band_pct < 50.0) {
        return Err(bad(
            "alerts.warn_band_pct",
            "must be between 0 and 50 points",
        ));
    }
    let states = StateConfig::default();
    let cfg = EngineConfig {
        tach,
        channels,
        vectors: VectorConfig {
            orders: t.orders.clone(),
            revs_per_vector: t.revs_per_vector,
        },
        order_map: t.order_map.then(OrderMapConfig::default),
        states: StateConfig {
            slow_roll_max_rpm: states
                .slow_roll_max_rpm
                .min(SLOW_ROLL_SHARE * m.min_operating_rpm),
            ..states
        },
        slow_roll,
        bin_pct: t.bin_pct,
        margins: Some(MarginSettings {
            rule,
            range,
            warn_band_pct: m.alerts.warn_band_pct,
        }),
        ..EngineConfig::default()
    };
    cfg.validate().map_err(|e| {
        use veer_tracker::config::ConfigError as E;
        let key = match &e {
            E::Tach(_) => "tach",
            E::Margin(_) => "alerts",
            E::Invalid { field, .. } if field.starts_with("channels") => "sensors",
            E::Invalid { field, .. } if field == "warn_band_pct" => "alerts.warn_band_pct",
            _ => "tracking",
        };
        bad(key, e.to_string())
    })?;
    Ok(cfg)
}

fn tach(t: &RawTach, min_operating: f64, top_rpm: f64) -> Result<TachConfig, ConfigError> {
    if t.channel.trim().is_empty() {
        return Err(bad("tach.channel", "must not be empty"));
    }
    if !(1..=4096).contains(&t.ppr) {
        return Err(bad(
            "tach.ppr",
            format!("must be between 1 and 4096 (got {})", t.ppr),
        ));
    }
    if t.gap_teeth > 0 && (t.ppr < 4 || t.gap_teeth > t.ppr - 3) {
        return Err(bad(
            "tach.gap_teeth",
            "must leave at least 3 teeth on the wheel (ppr counts the missing teeth too)",
        ));
    }
    let edge = match t.edge {
        RawEdge::Rising => Edge::Rising,
        RawEdge::Falling => Edge::Falling,
    };
    let levels = match (t.trigger, t.rearm) {
        (None, None) => None,
        (Some(_), None) => return Err(bad("tach.rearm", "give rearm with trigger")),
        (None, Some(_)) => return Err(bad("tach.trigger", "give trigger with rearm")),
        (Some(trigger), Some(rearm)) => {
            let ok = trigger.is_finite()
                && rearm.is_finite()
                && match edge {
                    Edge::Rising => rearm < trigger,
                    Edge::Falling => rearm > trigger,
                };
            if !ok {
                return Err(bad(
                    "tach.rearm",
                    "must be finite and on the far side of trigger from the edge (below it for a rising edge)",
                ));
            }
            Some(TachLevels { trigger, rearm })
        }
    };
    let defaults = TachConfig::default();
    let hysteresis = t.hysteresis.unwrap_or(defaults.hysteresis);
    if !(hysteresis > 0.0 && hysteresis < 0.5) {
        return Err(bad(
            "tach.hysteresis",
            format!("must be between 0 and 0.5 of the signal span (got {hysteresis})"),
        ));
    }
    let min_rpm = t
        .min_rpm
        .unwrap_or(defaults.min_rpm.min(0.5 * min_operating));
    if !(min_rpm > 0.0 && min_rpm < min_operating) {
        return Err(bad(
            "tach.min_rpm",
            format!("must be a positive speed below min_operating_rpm ({min_operating} r/min; got {min_rpm})"),
        ));
    }
    let max_rpm = t.max_rpm.unwrap_or(TACH_MAX_FACTOR * top_rpm);
    if !(max_rpm > top_rpm && max_rpm.is_finite()) {
        return Err(bad(
            "tach.max_rpm",
            format!("must be above the highest speed the machine reaches ({top_rpm} r/min; got {max_rpm})"),
        ));
    }
    Ok(TachConfig {
        ppr: t.ppr,
        gap_teeth: t.gap_teeth,
        edge,
        levels,
        hysteresis,
        min_rpm,
        max_rpm,
        ..defaults
    })
}

fn sensor(s: &RawSensor, i: usize) -> Result<ChannelConfig, ConfigError> {
    let key = |k: &str| format!("sensors[{i}].{k}");
    let name = s.channel.trim();
    if name.is_empty() {
        return Err(bad(key("channel"), "must not be empty"));
    }
    let unit = Unit::parse(&s.units).map_err(|e| bad(key("units"), e.to_string()))?;
    if let Some(raw) = s.kind {
        let kind = match raw {
            RawKind::Displacement => SensorKind::Displacement,
            RawKind::Velocity => SensorKind::Velocity,
            RawKind::Acceleration => SensorKind::Acceleration,
        };
        if kind != unit.kind() {
            return Err(bad(
                key("units"),
                format!(
                    "`{}` is a {:?} unit, but kind is {kind:?}",
                    s.units,
                    unit.kind()
                )
                .to_lowercase(),
            ));
        }
    }
    let detection = match &s.detection {
        None => unit.usual_detection(),
        Some(d) => Detection::parse(d).map_err(|e| bad(key("detection"), e.to_string()))?,
    };
    if !(s.scale.is_finite() && s.scale != 0.0) {
        return Err(bad(
            key("scale"),
            format!("must be a finite, non-zero factor (got {})", s.scale),
        ));
    }
    if !(s.angle_deg >= -360.0 && s.angle_deg <= 360.0) {
        return Err(bad(
            key("angle_deg"),
            "must be between -360 and 360 degrees",
        ));
    }
    Ok(ChannelConfig {
        name: name.to_string(),
        amplitude: Amplitude { unit, detection },
        scale: s.scale,
        angle_deg: s.angle_deg,
    })
}

fn slow_roll(v: &toml::Value) -> Result<SlowRoll, ConfigError> {
    const KEY: &str = "tracking.slow_roll";
    match v {
        toml::Value::String(s) if s == "auto" => Ok(SlowRoll::Auto),
        toml::Value::String(s) if s == "off" => Ok(SlowRoll::Off),
        toml::Value::Table(t) => {
            let get = |k: &str| -> Result<f64, ConfigError> {
                match t.get(k) {
                    Some(toml::Value::Float(x)) => Ok(*x),
                    Some(toml::Value::Integer(n)) => Ok(*n as f64),
                    _ => Err(bad(format!("{KEY}.{k}"), "needs a speed in r/min")),
                }
            };
            if let Some(k) = t.keys().find(|k| *k != "min_rpm" && *k != "max_rpm") {
                return Err(bad(format!("{KEY}.{k}"), "unknown key"));
            }
            let (min_rpm, max_rpm) = (get("min_rpm")?, get("max_rpm")?);
            if !(min_rpm >= 0.0 && max_rpm > min_rpm && max_rpm.is_finite()) {
                return Err(bad(KEY, "window needs 0 <= min_rpm < max_rpm"));
            }
            Ok(SlowRoll::Window { min_rpm, max_rpm })
        }
        _ => Err(bad(
            KEY,
            "\"auto\", \"off\" or a speed window { min_rpm = .., max_rpm = .. }",
        )),
    }
}

fn margin_rule(v: &toml::Value) -> Result<MarginRule, ConfigError> {
    const KEY: &str = "alerts.margin";
    let text = match v {
        toml::Value::String(s) => s.clone(),
        toml::Value::Integer(n) => n.to_string(),
        toml::Value::Float(x) => x.to_string(),
        _ => {
            return Err(bad(
                KEY,
                "a rule name (\"api\", \"api-1996\") or a percentage such as 15",
            ))
        }
    };
    MarginRule::parse(&text).map_err(|e| bad(KEY, e.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    const FAN: &str = r#"
min_operating_rpm = 600
max_continuous_rpm = 1000
tach = { channel = "tach", ppr = 1, max_rpm = 2000 }
sensors = [ { channel = "v", kind = "velocity", units = "mm/s", warning_1x = 2.8 } ]
[alerts]
margin = 15
"#;

    #[test]
    fn a_daemon_section_gives_the_daemons_engine_settings() {
        let cfg = parse(FAN).expect("valid");
        assert_eq!(cfg.channels.len(), 1);
        assert_eq!(cfg.channels[0].name, "v");
        assert_eq!(cfg.channels[0].amplitude.detection, Detection::Rms);
        assert_eq!(cfg.tach.max_rpm, 2000.0);
        // min(30, 0.5 × 600) and min(400, 0.5 × 600): the daemon's defaults.
        assert_eq!(cfg.tach.min_rpm, 30.0);
        assert_eq!(cfg.states.slow_roll_max_rpm, 300.0);
        let m = cfg.margins.expect("margins");
        assert_eq!(m.rule, MarginRule::Fixed { percent: 15.0 });
        assert_eq!(m.range.min_rpm, 600.0);
    }

    #[test]
    fn a_wrapped_machine_is_read_and_errors_carry_its_prefix() {
        let text = format!(
            "[[machine]]\nid = \"fan-2\"\n{}",
            FAN.replace("[alerts]", "[machine.alerts]")
        );
        assert!(parse(&text).is_ok(), "{:?}", parse(&text));
        let wrong = text.replace("mm/s", "furlongs");
        match parse(&wrong) {
            Err(ConfigError::Invalid { key, .. }) => assert_eq!(key, "machine[0].sensors[0].units"),
            other => panic!("expected a units error, got {other:?}"),
        }
    }

    #[test]
    fn mistakes_name_their_key() {
        let cases = [
            (FAN.replace("ppr = 1", "ppr = 0"), "tach.ppr"),
            (
                FAN.replace("margin = 15", "margin = \"loose\""),
                "alerts.margin",
            ),
            (
                FAN.replace("max_rpm = 2000", "max_rpm = 900"),
                "tach.max_rpm",
            ),
            (
                FAN.replace("kind = \"velocity\"", "kind = \"displacement\""),
                "sensors[0].units",
            ),
            (format!("{FAN}warn_band_pct = 80\n"), "alerts.warn_band_pct"),
        ];
        for (text, want) in cases {
            match parse(&text) {
                Err(ConfigError::Invalid { key, .. }) => assert_eq!(key, want),
                other => panic!("{want}: expected an error naming it, got {other:?}"),
            }
        }
    }

    #[test]
    fn unknown_and_missing_keys_are_refused_with_their_line() {
        let e = parse(&FAN.replace("ppr = 1", "pulses = 1")).expect_err("unknown key");
        let text = e.to_string();
        assert!(text.contains("pulses") && text.contains("line 4"), "{text}");
        let e = parse("min_operating_rpm = 600\n").expect_err("missing keys");
        assert!(e.to_string().contains("max_continuous_rpm"), "{e}");
        assert!(parse("this is not toml").is_err());
    }
}
