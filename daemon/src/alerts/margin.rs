//! Separation margin at steady speed: how far the running speed is from each known critical,
//! against what the critical's rule requires.
//!
//! At a steady speed N the margin to a critical Nc is |N − Nc|/N·100, the API RP 684 definition
//! with the running speed as the end of the range it is measured from. A critical below the
//! running speed is held to the rule's "below" requirement, one above it to the "above"
//! requirement ([`veer_tracker::margin::required_margin_pct`]). Alarm when the margin is below the
//! requirement, warning when it is within `warn_band_pct` points of it.

use super::severity_name;
use super::KnownCritical;
use crate::config::model::Severity;
use serde_json::{json, Value};
use veer_tracker::margin::{required_margin_pct, MarginRule, Side, AF_NO_MARGIN};

/// Whether a rule waives the margin for this AF (API rules: AF < 2.5, critically damped).
pub(super) fn waived(rule: MarginRule, af: Option<f64>) -> bool {
    !matches!(rule, MarginRule::Fixed { .. })
        && af.is_some_and(|a| a.is_finite() && a < AF_NO_MARGIN)
}

/// The side's name as printed.
pub(super) fn side_name(side: Side) -> &'static str {
    match side {
        Side::Below => "below",
        Side::Inside => "inside",
        Side::Above => "above",
    }
}

/// A critical's thresholds relative to the running speed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Thresholds {
    /// Which of the rule's requirements applies: the critical below or above the running speed.
    pub side: Side,
    /// Margin required, percent of the running speed.
    pub required_pct: f64,
    /// Margin below which a warning is given: required plus the warning band, percent.
    pub warning_pct: f64,
    /// The rule waives this critical's margin (API rule, AF below 2.5): nothing is raised for it.
    pub waived: bool,
}

impl Thresholds {
    /// The thresholds of `critical` seen from `speed_rpm`.
    pub fn of(
        critical: &KnownCritical,
        speed_rpm: f64,
        rule: MarginRule,
        warn_band_pct: f64,
    ) -> Self {
        let side = if critical.rpm < speed_rpm {
            Side::Below
        } else {
            Side::Above
        };
        let required_pct = required_margin_pct(rule, critical.af, side);
        Self {
            side,
            required_pct,
            warning_pct: required_pct + warn_band_pct.max(0.0),
            waived: waived(rule, critical.af),
        }
    }

    /// The running speed at which the margin equals `pct` on this side: Nc/(1 + m) with the
    /// critical above, Nc/(1 − m) below (no such speed for m ≥ 100 % below).
    pub fn speed_at(&self, critical_rpm: f64, pct: f64) -> Option<f64> {
        let m = pct / 100.0;
        match self.side {
            Side::Below if m < 1.0 => Some(critical_rpm / (1.0 - m)),
            Side::Below | Side::Inside => None,
            Side::Above => Some(critical_rpm / (1.0 + m)),
        }
    }
}

/// Margin from running speed `speed_rpm` to a critical, percent.
pub(super) fn actual_pct(speed_rpm: f64, critical_rpm: f64) -> f64 {
    (speed_rpm - critical_rpm).abs() / speed_rpm * 100.0
}

/// One evaluation of the margin rule for one critical.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct MarginFinding {
    /// Running speed, r/min (bucket mean).
    pub speed_rpm: f64,
    /// The critical's key, speed, AF and origin.
    pub critical: KnownCritical,
    /// The rule's thresholds.
    pub thresholds: Thresholds,
    /// The margin the critical has, percent.
    pub actual_pct: f64,
    /// Rule name.
    pub rule: String,
    /// Points of recovery needed to clear.
    pub hysteresis_pct: f64,
}

impl MarginFinding {
    /// Evaluates `critical` at `speed_rpm`.
    pub fn new(
        critical: &KnownCritical,
        speed_rpm: f64,
        rule: MarginRule,
        warn_band_pct: f64,
        hysteresis_pct: f64,
    ) -> Self {
        let thresholds = Thresholds::of(critical, speed_rpm, rule, warn_band_pct);
        Self {
            speed_rpm,
            critical: critical.clone(),
            thresholds,
            actual_pct: actual_pct(speed_rpm, critical.rpm),
            rule: rule.name(),
            hysteresis_pct: hysteresis_pct.max(0.0),
        }
    }

    /// Severity on the figures alone.
    pub fn raw(&self) -> Option<Severity> {
        if self.thresholds.waived {
            None
        } else if self.actual_pct < self.thresholds.required_pct {
            Some(Severity::Alarm)
        } else if self.actual_pct < self.thresholds.warning_pct {
            Some(Severity::Warning)
        } else {
            None
        }
    }

    /// Whether the margin has recovered past the warning threshold by the hysteresis.
    pub fn recovered(&self) -> bool {
        self.thresholds.waived
            || self.actual_pct >= self.thresholds.warning_pct + self.hysteresis_pct
    }

    /// One line for a person.
    pub fn message(&self, severity: Severity) -> String {
        let c = &self.critical;
        let verb = if severity == Severity::Alarm {
            "breaches the required"
        } else {
            "is within the warning band of the required"
        };
        format!(
            "{}: running speed {:.0} r/min is {:.1} % from critical {} at {:.0} r/min ({}, AF {}); \
             this {verb} {:.1} % ({} rule, critical {} running speed)",
            severity_name(severity),
            self.speed_rpm,
            self.actual_pct,
            c.key,
            c.rpm,
            c.origin,
            af_text(c.af),
            self.thresholds.required_pct,
            self.rule,
            side_name(self.thresholds.side),
        )
    }

    /// The line of a clear.
    pub fn cleared(&self) -> String {
        format!(
            "cleared: running speed {:.0} r/min is {:.1} % from critical {} at {:.0} r/min, \
             clear of the warning threshold {:.1} % by at least {:.1} points",
            self.speed_rpm,
            self.actual_pct,
            self.critical.key,
            self.critical.rpm,
            self.thresholds.warning_pct,
            self.hysteresis_pct,
        )
    }

    /// The figures.
    pub fn evidence(&self) -> Value {
        let c = &self.critical;
        json!({
            "speed_rpm": self.speed_rpm,
            "critical_key": c.key,
            "critical_rpm": c.rpm,
            "critical_origin": c.origin,
            "af": c.af,
            "side": side_name(self.thresholds.side),
            "rule": self.rule,
            "waived": self.thresholds.waived,
            "required_pct": self.thresholds.required_pct,
            "warning_pct": self.thresholds.warning_pct,
            "actual_pct": self.actual_pct,
            "hysteresis_pct": self.hysteresis_pct,
        })
    }
}

/// AF as printed: one decimal, or "unknown".
pub(super) fn af_text(af: Option<f64>) -> String {
    match af.filter(|a| a.is_finite()) {
        Some(a) => format!("{a:.1}"),
        None => "unknown".to_string(),
    }
}
