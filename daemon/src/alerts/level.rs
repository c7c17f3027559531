//! 1X level: the once-per-turn amplitude of a sensor against its warning and alarm levels.
//!
//! While a run-up or coast-down passes its criticals the 1X amplitude rises by design, by about
//! the amplification factor. Protection practice raises the setpoints by a fixed multiplier for
//! that passage instead of silencing the channel: API 670 (5th ed., 2014) Annex I "Setpoint
//! Multiplier Considerations" (annex title confirmed from the table of contents; its use while
//! passing criticals and the usual factors of 2 or 3 from trade sources; clause numbers from
//! memory, unconfirmed). Here the levels are multiplied by `startup_multiplier` while the machine
//! speeds up or slows down below its minimum operating speed; at or above that speed, and at steady
//! speed, the plain levels apply. The levels stay active throughout: a multiplier, never an inhibit.

use super::severity_name;
use crate::config::model::Severity;
use serde_json::{json, Value};
use veer_tracker::states::MachineState;

/// A sensor's configured levels, in its own unit and detection.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Levels {
    /// Warning level.
    pub warning: Option<f64>,
    /// Alarm level.
    pub alarm: Option<f64>,
}

/// Whether the start-up multiplier applies: a sweep below the minimum operating speed.
pub(super) fn multiplier_applies(state: MachineState, rpm: f64, min_operating_rpm: f64) -> bool {
    state.is_sweep() && rpm < min_operating_rpm
}

/// One evaluation of a sensor's levels.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct LevelFinding<'a> {
    /// Channel.
    pub channel: &'a str,
    /// 1X amplitude.
    pub amplitude: f64,
    /// Speed, r/min.
    pub rpm: f64,
    /// Machine state.
    pub state: MachineState,
    /// Multiplier in force (1 when not applied).
    pub multiplier: f64,
    /// Configured levels.
    pub levels: Levels,
    /// Percent of the lowest effective level the amplitude must fall below to clear.
    pub hysteresis_pct: f64,
}

impl LevelFinding<'_> {
    /// Effective warning level (configured × multiplier).
    pub fn warning(&self) -> Option<f64> {
        self.levels.warning.map(|l| l * self.multiplier)
    }

    /// Effective alarm level.
    pub fn alarm(&self) -> Option<f64> {
        self.levels.alarm.map(|l| l * self.multiplier)
    }

    /// Severity on the figures alone.
    pub fn raw(&self) -> Option<Severity> {
        if self.alarm().is_some_and(|l| self.amplitude > l) {
            Some(Severity::Alarm)
        } else if self.warning().is_some_and(|l| self.amplitude > l) {
            Some(Severity::Warning)
        } else {
            None
        }
    }

    /// Whether the amplitude is below the lowest effective level by the hysteresis (a percent of
    /// that level, since levels are amplitudes, not margins).
    pub fn recovered(&self) -> bool {
        let lowest = match (self.warning(), self.alarm()) {
            (Some(w), Some(a)) => w.min(a),
            (Some(l), None) | (None, Some(l)) => l,
            (None, None) => return true,
        };
        self.amplitude <= lowest * (1.0 - self.hysteresis_pct.max(0.0) / 100.0)
    }

    fn multiplier_text(&self) -> String {
        if self.multiplier == 1.0 {
            String::new()
        } else {
            format!(
                " (levels × {} while {} below minimum operating speed)",
                self.multiplier,
                self.state.name()
            )
        }
    }

    /// One line for a person.
    pub fn message(&self, severity: Severity) -> String {
        let level = match severity {
            Severity::Alarm => self.alarm(),
            Severity::Warning => self.warning(),
        };
        format!(
            "{}: 1X amplitude {:.3} on {} at {:.0} r/min is above the {} level {:.3}{}",
            severity_name(severity),
            self.amplitude,
            self.channel,
            self.rpm,
            severity_name(severity),
            level.unwrap_or(f64::NAN),
            self.multiplier_text(),
        )
    }

    /// The line of a clear.
    pub fn cleared(&self) -> String {
        format!(
            "cleared: 1X amplitude {:.3} on {} at {:.0} r/min is back below its levels{}",
            self.amplitude,
            self.channel,
            self.rpm,
            self.multiplier_text(),
        )
    }

    /// The figures.
    pub fn evidence(&self) -> Value {
        json!({
            "channel": self.channel,
            "amplitude_1x": self.amplitude,
            "speed_rpm": self.rpm,
            "state": self.state.name(),
            "warning_level": self.levels.warning,
            "alarm_level": self.levels.alarm,
            "multiplier": self.multiplier,
            "effective_warning_level": self.warning(),
            "effective_alarm_level": self.alarm(),
            "hysteresis_pct": self.hysteresis_pct,
        })
    }
}
