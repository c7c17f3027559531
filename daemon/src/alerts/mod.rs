#![allow(dead_code)]
//! Alert rules of one machine and the outputs alerts are sent to.
//!
//! The rules watch what the order-tracking engine reports and say when a person should look:
//!
//! - [`margin`]: at steady speed, the separation margin between the running speed and each known
//!   critical against the margin its rule requires (API rule from its AF, or fixed);
//! - [`drift`]: the running speed's trend, projected to reach a critical's warning band within the
//!   configured horizon, so the engineer hears of it before the margin is breached;
//! - [`shift`]: a run-up or coast-down that finds a critical moved from its baseline, or into the
//!   margin required around the operating range;
//! - [`level`]: 1X amplitude above a sensor's warning or alarm level, with the start-up multiplier
//!   while a run-up or coast-down passes its criticals (API 670 Annex I);
//! - [`estimate`]: the live estimate of a measured critical, from the 1X vector at steady speed,
//!   held (with its uncertainty, and projected over the drift horizon) to the required margin
//!   (critical approach); a 1X vector that leaves the critical's model is a vector change, never
//!   a critical shift;
//! - [`health`]: lost tach, flat line, clipping, non-finite samples, stream gaps. A rule does not
//!   compute from a channel while it is unhealthy: an alert from bad data is worse than none.
//!
//! Every rule is pure and driven by data time (unix seconds carried by each input): nothing reads
//! a clock, so a recording replayed a year later raises the same alerts at the same data times, and
//! tests run hours of data in milliseconds. Conditions are debounced ([`debounce`]): raised after
//! holding for `delay_s`, cleared only after recovering by `hysteresis_pct` beyond the threshold
//! for `delay_s`, and a warning that becomes an alarm is escalated, not raised again. An alert keeps
//! its highest severity until it clears, so a margin hovering at the alarm threshold cannot turn
//! an open alarm into a stream of warnings and alarms.
//!
//! [`AlertEngine`] ties the rules together, one per machine; [`deliver`] sends each change to the
//! machine's outputs (the log, a JSON-lines file, a command). veer advises; it never trips anything.

mod debounce;
mod describe;
mod drift;
mod engine;
mod estimate;
mod health;
mod level;
mod margin;
mod outputs;
mod shift;
mod speed;
mod time;

#[cfg(test)]
mod tests;

pub(crate) use engine::AlertEngine;
pub(crate) use estimate::EstimateInput;
pub(crate) use outputs::deliver;

use crate::config::model::Severity;

/// A critical speed the rules compare the running speed with: from design data, a shop test, or
/// measured by an earlier run-up or coast-down.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct KnownCritical {
    /// Stable id ("design-1", "measured:x:1"): alerts are keyed by it, so it must not change when
    /// the critical's speed is updated, or an open alert would be orphaned.
    pub key: String,
    /// Speed, r/min.
    pub rpm: f64,
    /// Amplification factor, if known; without it an API rule asks its largest margin.
    pub af: Option<f64>,
    /// Where the figure comes from ("design", "shop-test", "measured"), for the evidence.
    pub origin: String,
    /// Speed a shift is measured from, r/min (`rpm` when `None`): the commissioning value, so a
    /// slow drift over years is seen against where the critical started, not its last reading.
    pub baseline_rpm: Option<f64>,
}

/// What an alert is about.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub(crate) enum AlertKind {
    /// Running speed inside a critical's required margin (or its warning band).
    Margin,
    /// Running speed trending toward a critical's warning band.
    Drift,
    /// A critical found in an event moved from its baseline or into the range's margin.
    CriticalShift,
    /// 1X amplitude above a sensor's level.
    Level1x,
    /// A channel's data cannot be trusted.
    SensorHealth,
    /// A critical's live estimate is, or is projected to be, inside its required margin.
    CriticalApproach,
    /// The 1X vector left a critical's model: an unbalance change.
    VectorChange,
}

impl AlertKind {
    /// The name as stored, printed and passed to outputs.
    pub fn name(self) -> &'static str {
        match self {
            AlertKind::Margin => "margin",
            AlertKind::Drift => "drift",
            AlertKind::CriticalShift => "critical-shift",
            AlertKind::Level1x => "level-1x",
            AlertKind::SensorHealth => "sensor-health",
            AlertKind::CriticalApproach => "critical-approach",
            AlertKind::VectorChange => "vector-change",
        }
    }
}

/// The name of a severity as users see it (`warning`, `alarm`).
pub(crate) fn severity_name(s: Severity) -> &'static str {
    match s {
        Severity::Warning => "warning",
        Severity::Alarm => "alarm",
    }
}

/// One alert with the numbers behind it.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Alert {
    /// Machine id.
    pub machine: String,
    /// What rule raised it.
    pub kind: AlertKind,
    /// What it is about within the machine: a critical's key, or a channel.
    pub key: String,
    /// Current severity (for a clear: the severity it had).
    pub severity: Severity,
    /// Data time of the change, unix seconds.
    pub time_s: f64,
    /// One line for a person.
    pub message: String,
    /// The figures the rule used (speeds, AF, required and actual margins, rule, thresholds), so
    /// an alert can be checked by hand later without the data it came from.
    pub evidence: serde_json::Value,
}

/// A change in the set of open alerts, as sent to storage and the outputs.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum AlertChange {
    /// A new alert.
    Raised(Alert),
    /// An open warning became an alarm (the same alert, not a new one).
    Escalated(Alert),
    /// An open alert's condition has gone (with the figures that show it).
    Cleared(Alert),
}

impl AlertChange {
    /// The alert the change is about.
    pub fn alert(&self) -> &Alert {
        match self {
            AlertChange::Raised(a) | AlertChange::Escalated(a) | AlertChange::Cleared(a) => a,
        }
    }

    /// The event's name in outputs: `raised`, `escalated` or `cleared`.
    pub fn event_name(&self) -> &'static str {
        match self {
            AlertChange::Raised(_) => "raised",
            AlertChange::Escalated(_) => "escalated",
            AlertChange::Cleared(_) => "cleared",
        }
    }
}

/// Why a channel's data cannot be trusted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum HealthProblem {
    /// No plausible reference pulses while the machine is thought to run.
    TachLost,
    /// The signal does not move: a dead sensor, cable or input.
    FlatLine,
    /// The signal sits at the input's limits.
    Clipping,
    /// NaN or infinite samples.
    NotFinite,
    /// Frames missing from the stream (0 when the count is unknown).
    Gap {
        /// Frames missing.
        frames: u64,
    },
}

impl HealthProblem {
    /// The problem's name in messages and evidence.
    pub fn name(self) -> &'static str {
        match self {
            HealthProblem::TachLost => "tach-lost",
            HealthProblem::FlatLine => "flat-line",
            HealthProblem::Clipping => "clipping",
            HealthProblem::NotFinite => "not-finite",
            HealthProblem::Gap { .. } => "gap",
        }
    }
}
