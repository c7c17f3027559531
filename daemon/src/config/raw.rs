//! The configuration file as written: serde structs that mirror the TOML keys one to one.
//!
//! Every struct denies unknown fields, so a misspelt key is an error that names it instead of a
//! setting silently left at its default. Defaults live here, next to the keys they belong to; the
//! checks that need more than a type live in [`super::validate`], which turns these structs into the
//! model of [`super::model`].

use super::model::{CriticalOrigin, LogFormat, SerialFormat, Severity};
use serde::de::{self, Deserializer, MapAccess, Unexpected, Visitor};
use serde::Deserialize;
use std::fmt;

/// The whole file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawConfig {
    /// The SQLite database, relative to the configuration file.
    #[serde(default = "default_database")]
    pub database: String,
    /// Settings of the daemon itself.
    #[serde(default)]
    pub daemon: RawDaemon,
    /// The machines, one `[[machine]]` table each.
    #[serde(default, rename = "machine")]
    pub machines: Vec<RawMachine>,
}

fn default_database() -> String {
    "veer.db".to_string()
}

/// `[daemon]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct RawDaemon {
    pub log_format: LogFormat,
    pub trend_interval_s: f64,
    pub trend_downsample_after_days: f64,
    pub trend_bucket_min: f64,
    pub queues: RawQueues,
}

impl Default for RawDaemon {
    fn default() -> Self {
        Self {
            log_format: LogFormat::Human,
            // One trend point per machine and channel every 10 s: 8640 rows a day, small in SQLite,
            // and fine enough to see a speed or 1X drift over minutes.
            trend_interval_s: 10.0,
            trend_downsample_after_days: 30.0,
            trend_bucket_min: 10.0,
            queues: RawQueues::default(),
        }
    }
}

/// `[daemon.queues]`: capacities of the bounded channels between the daemon's tasks.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct RawQueues {
    pub blocks: usize,
    pub records: usize,
    pub alerts: usize,
}

impl Default for RawQueues {
    fn default() -> Self {
        Self {
            blocks: 64,
            records: 4096,
            alerts: 256,
        }
    }
}

/// One `[[machine]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMachine {
    pub id: String,
    #[serde(default)]
    pub name: Option<String>,
    pub min_operating_rpm: f64,
    pub max_continuous_rpm: f64,
    #[serde(default)]
    pub trip_rpm: Option<f64>,
    pub source: RawSource,
    pub tach: RawTach,
    pub sensors: Vec<RawSensor>,
    #[serde(default)]
    pub criticals: Vec<RawCritical>,
    #[serde(default)]
    pub tracking: RawTracking,
    #[serde(default)]
    pub alerts: RawAlerts,
}

/// The kinds of source.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum RawSourceKind {
    /// Capture files dropped into a folder.
    Folder,
    /// A data logger streaming on a serial line.
    Serial,
}

/// `source = { kind = ..., ... }`. One flat struct for both kinds rather than a tagged enum, so
/// that a wrong type is reported at its own key (a tagged enum buffers the table and loses the
/// key's position); which keys belong to which kind is checked in validation.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSource {
    pub kind: RawSourceKind,
    #[serde(default)]
    pub path: Option<String>,
    #[serde(default)]
    pub pattern: Option<String>,
    #[serde(default)]
    pub settle_s: Option<f64>,
    #[serde(default)]
    pub failed_dir: Option<String>,
    #[serde(default)]
    pub sample_rate: Option<f64>,
    #[serde(default)]
    pub port: Option<String>,
    #[serde(default)]
    pub baud: Option<u32>,
    #[serde(default)]
    pub format: Option<SerialFormat>,
    #[serde(default)]
    pub channels: Option<Vec<String>>,
    #[serde(default)]
    pub reconnect_max_s: Option<f64>,
}

/// File names a folder source reads unless told otherwise.
pub(super) const DEFAULT_PATTERN: &str = "*.csv,*.wav";

/// Seconds a file must stay unchanged before it is read, unless told otherwise.
pub(super) const DEFAULT_SETTLE_S: f64 = 2.0;

/// Longest wait between reconnection attempts to a serial port, s, unless told otherwise.
pub(super) const DEFAULT_RECONNECT_MAX_S: f64 = 30.0;

/// The edge of the tach pulse, as written.
#[derive(Clone, Copy, Debug, Default, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum RawEdge {
    #[default]
    Rising,
    Falling,
}

/// `tach = { ... }`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawTach {
    pub channel: String,
    #[serde(default = "default_ppr")]
    pub ppr: u32,
    #[serde(default)]
    pub gap_teeth: u32,
    #[serde(default)]
    pub edge: RawEdge,
    #[serde(default)]
    pub trigger: Option<f32>,
    #[serde(default)]
    pub rearm: Option<f32>,
    #[serde(default)]
    pub hysteresis: Option<f32>,
    #[serde(default)]
    pub min_rpm: Option<f64>,
    #[serde(default)]
    pub max_rpm: Option<f64>,
}

fn default_ppr() -> u32 {
    1
}

/// A sensor kind, as written.
#[derive(Clone, Copy, Debug, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum RawKind {
    Displacement,
    Velocity,
    Acceleration,
}

/// One entry of `sensors = [ ... ]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSensor {
    pub channel: String,
    #[serde(default)]
    pub kind: Option<RawKind>,
    pub units: String,
    #[serde(default)]
    pub detection: Option<String>,
    #[serde(default = "default_scale")]
    pub scale: f64,
    #[serde(default)]
    pub angle_deg: f64,
    #[serde(default)]
    pub warning_1x: Option<f64>,
    #[serde(default)]
    pub alarm_1x: Option<f64>,
}

fn default_scale() -> f64 {
    1.0
}

/// One entry of `criticals = [ ... ]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCritical {
    pub rpm: f64,
    #[serde(default)]
    pub af: Option<f64>,
    #[serde(default)]
    pub origin: CriticalOrigin,
    #[serde(default)]
    pub note: Option<String>,
}

/// `[machine.tracking]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct RawTracking {
    pub orders: Vec<u32>,
    pub revs_per_vector: u32,
    pub slow_roll: RawSlowRoll,
    pub order_map: bool,
    pub bin_pct: f64,
}

impl Default for RawTracking {
    fn default() -> Self {
        Self {
            orders: vec![1, 2],
            revs_per_vector: 1,
            slow_roll: RawSlowRoll::Auto,
            order_map: true,
            bin_pct: 0.2,
        }
    }
}

/// `slow_roll = "auto" | "off" | { min_rpm = .., max_rpm = .. }`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum RawSlowRoll {
    Auto,
    Off,
    Window { min_rpm: f64, max_rpm: f64 },
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawWindow {
    min_rpm: f64,
    max_rpm: f64,
}

struct SlowRollVisitor;

impl<'de> Visitor<'de> for SlowRollVisitor {
    type Value = RawSlowRoll;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("\"auto\", \"off\" or a speed window { min_rpm = .., max_rpm = .. }")
    }

    fn visit_str<E: de::Error>(self, s: &str) -> Result<RawSlowRoll, E> {
        match s {
            "auto" => Ok(RawSlowRoll::Auto),
            "off" => Ok(RawSlowRoll::Off),
            _ => Err(E::invalid_value(Unexpected::Str(s), &self)),
        }
    }

    fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<RawSlowRoll, A::Error> {
        let w = RawWindow::deserialize(de::value::MapAccessDeserializer::new(map))?;
        Ok(RawSlowRoll::Window {
            min_rpm: w.min_rpm,
            max_rpm: w.max_rpm,
        })
    }
}

impl<'de> Deserialize<'de> for RawSlowRoll {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(SlowRollVisitor)
    }
}

/// `margin = "api"` or `margin = 15`: kept as text and read by the engine's own rule parser, so the
/// file and the command line accept exactly the same rules.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct RawMargin(pub String);

struct MarginVisitor;

impl<'de> Visitor<'de> for MarginVisitor {
    type Value = RawMargin;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("a rule name (\"api\", \"api-2005\", \"api-1996\") or a percentage such as 15")
    }

    fn visit_str<E: de::Error>(self, s: &str) -> Result<RawMargin, E> {
        Ok(RawMargin(s.to_string()))
    }

    fn visit_i64<E: de::Error>(self, n: i64) -> Result<RawMargin, E> {
        Ok(RawMargin(n.to_string()))
    }

    fn visit_u64<E: de::Error>(self, n: u64) -> Result<RawMargin, E> {
        Ok(RawMargin(n.to_string()))
    }

    fn visit_f64<E: de::Error>(self, n: f64) -> Result<RawMargin, E> {
        Ok(RawMargin(n.to_string()))
    }
}

impl<'de> Deserialize<'de> for RawMargin {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(MarginVisitor)
    }
}

/// `[machine.alerts]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct RawAlerts {
    pub margin: RawMargin,
    pub warn_band_pct: f64,
    pub drift_horizon_min: f64,
    pub drift_window_min: f64,
    pub delay_s: f64,
    pub hysteresis_pct: f64,
    pub critical_shift_pct: f64,
    pub startup_multiplier: f64,
    pub estimate_critical: bool,
    pub estimate_window_s: f64,
    pub estimate_trend_min: f64,
    pub estimate_sigmas: f64,
    pub outputs: Vec<RawOutput>,
}

impl Default for RawAlerts {
    fn default() -> Self {
        Self {
            margin: RawMargin("api".to_string()),
            warn_band_pct: 5.0,
            drift_horizon_min: 30.0,
            drift_window_min: 60.0,
            delay_s: 10.0,
            hysteresis_pct: 1.0,
            critical_shift_pct: 5.0,
            // API 670 Annex I: setpoints raised, usually 2× or 3×, while criticals are passed
            // (REFERENCES §1.4, confirmed from trade sources); the lower of the two.
            startup_multiplier: 2.0,
            estimate_critical: true,
            // Some 700 revolutions at 1450 r/min: the phase noise of one window is averaged down
            // by √700 while a drift over hours moves the critical by a few r/min at most.
            estimate_window_s: 30.0,
            estimate_trend_min: 60.0,
            // Two standard deviations towards the range: about 2.3 % of windows would read the
            // critical closer than it is by noise alone (normal distribution, one-sided).
            estimate_sigmas: 2.0,
            outputs: vec![RawOutput {
                kind: RawOutputKind::Log,
                path: None,
                argv: None,
                timeout_s: None,
                min_severity: Severity::Warning,
            }],
        }
    }
}

/// The kinds of alert output.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum RawOutputKind {
    /// The daemon's log.
    Log,
    /// One JSON document per line, appended to a file.
    Jsonl,
    /// A program run for each alert.
    Command,
}

/// One entry of `outputs = [ ... ]`, flat for the same reason as [`RawSource`].
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOutput {
    pub kind: RawOutputKind,
    #[serde(default)]
    pub path: Option<String>,
    #[serde(default)]
    pub argv: Option<Vec<String>>,
    #[serde(default)]
    pub timeout_s: Option<f64>,
    #[serde(default)]
    pub min_severity: Severity,
}

/// Seconds after which an alert command is stopped, unless told otherwise.
pub(super) const DEFAULT_TIMEOUT_S: f64 = 10.0;
