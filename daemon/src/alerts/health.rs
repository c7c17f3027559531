//! Sensor health: which channels can be trusted, and the alert that says when one cannot.
//!
//! A margin computed from a stale or garbled speed is worse than none: it reads as a fact. So a
//! problem on the tach suspends the margin and drift rules of the machine (their open alerts stay
//! as they are, neither raised nor cleared from bad data), and a problem on a vibration channel
//! suspends the 1X level and critical-shift rules fed by that channel. The health alert is raised at
//! once, without the delay, since it is a fact about the data, not a trend, and it says which
//! alerts are suspended.
//!
//! Severity: any problem of the tach but a gap is an `alarm`, since it blinds every margin and drift
//! rule of the machine; a problem of one vibration channel, or a stream gap, is a `warning`. A gap
//! is momentary (the data after it are good), so it suspends nothing and clears after `delay_s`
//! of data without another gap; other problems clear after `delay_s` of healthy reports.

use super::severity_name;
use super::HealthProblem;
use crate::config::model::Severity;
use serde_json::{json, Value};

/// What a channel is to the machine.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Role {
    /// The tach: speed, and so every margin.
    Tach,
    /// A vibration sensor.
    Sensor,
}

/// A channel's current health.
#[derive(Clone, Debug, Default, PartialEq)]
pub(super) struct ChannelHealth {
    /// The problem in force (`None`: healthy or a past gap).
    pub problem: Option<HealthProblem>,
    /// The last problem reported, for the clear's message.
    pub last_problem: Option<HealthProblem>,
    /// Since when the channel has been healthy again (data time), while an alert is open.
    pub healthy_since: Option<f64>,
}

impl ChannelHealth {
    /// Whether rules fed by the channel are suspended.
    pub fn suspended(&self) -> bool {
        self.problem.is_some()
    }

    /// Records a report at `t`.
    pub fn report(&mut self, t: f64, problem: Option<HealthProblem>) {
        match problem {
            Some(p @ HealthProblem::Gap { .. }) => {
                // Momentary: healthy again from the gap on.
                self.last_problem = Some(p);
                self.problem = None;
                self.healthy_since = Some(t);
            }
            Some(p) => {
                self.last_problem = Some(p);
                self.problem = Some(p);
                self.healthy_since = None;
            }
            None => {
                if self.problem.take().is_some() || self.healthy_since.is_none() {
                    self.healthy_since = Some(t);
                }
            }
        }
    }
}

/// The severity of a problem on a channel of this role.
pub(super) fn severity(role: Role, problem: HealthProblem) -> Severity {
    match (role, problem) {
        (_, HealthProblem::Gap { .. }) | (Role::Sensor, _) => Severity::Warning,
        (Role::Tach, _) => Severity::Alarm,
    }
}

/// What a problem suspends, in words.
fn suspends(role: Role, channel: &str, problem: HealthProblem) -> String {
    match (role, problem) {
        (_, HealthProblem::Gap { .. }) => "alerts resume with the data after it".to_string(),
        (Role::Tach, _) => "margin alerts suspended (no margin or drift computed until the tach \
                            is healthy)"
            .to_string(),
        (Role::Sensor, _) => {
            format!("1X level and critical-shift alerts from {channel} suspended")
        }
    }
}

fn problem_text(problem: HealthProblem) -> String {
    match problem {
        HealthProblem::TachLost => "tach pulses lost".to_string(),
        HealthProblem::FlatLine => "flat line".to_string(),
        HealthProblem::Clipping => "clipping".to_string(),
        HealthProblem::NotFinite => "non-finite samples".to_string(),
        HealthProblem::Gap { frames: 0 } => "stream gap".to_string(),
        HealthProblem::Gap { frames } => format!("stream gap of {frames} frames"),
    }
}

/// The alert's message.
pub(super) fn message(role: Role, channel: &str, problem: HealthProblem) -> String {
    format!(
        "{}: {} on {channel}; {}",
        severity_name(severity(role, problem)),
        problem_text(problem),
        suspends(role, channel, problem),
    )
}

/// The clear's message.
pub(super) fn cleared(channel: &str, healthy_for_s: f64) -> String {
    format!("cleared: channel {channel} healthy for {healthy_for_s:.0} s; its alerts are computed again")
}

/// The figures.
pub(super) fn evidence(role: Role, channel: &str, problem: Option<HealthProblem>) -> Value {
    let frames = match problem {
        Some(HealthProblem::Gap { frames }) => Some(frames),
        _ => None,
    };
    let suspended: &[&str] = match (role, problem) {
        (_, None | Some(HealthProblem::Gap { .. })) => &[],
        (Role::Tach, _) => &["margin", "drift"],
        (Role::Sensor, _) => &["level-1x", "critical-shift"],
    };
    json!({
        "channel": channel,
        "role": match role { Role::Tach => "tach", Role::Sensor => "sensor" },
        "problem": problem.map(HealthProblem::name),
        "gap_frames": frames,
        "suspended": suspended,
    })
}
