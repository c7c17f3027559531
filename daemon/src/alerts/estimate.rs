//! Critical approach and 1X vector change: the rules fed by the live estimates of a critical.
//!
//! Between run-ups each measured critical is estimated at steady speed from the 1X vector and its
//! single-mode model ([`veer_tracker::drift`]); a configured one, from the slope of the lag
//! against the speed's wander. Its alert rule ([`veer_tracker::drift::DriftAlert::judge`]) fits
//! the informative estimates' trend and holds two pessimistic bounds to the required separation
//! margin: the present estimate moved `estimate_sigmas` standard deviations towards the operating
//! range, and the trend projected `drift_horizon_min` ahead, moved the same way. A present bound
//! in breach is an alarm (the critical is, within its uncertainty, already too close); a
//! projected bound in breach only is a warning (it will be, within the horizon, if the trend
//! holds). A window whose vector left the model's locus is an unbalance change (a thrown piece,
//! a deposit, a bow): a vector-change warning, and it never enters the trend, so it cannot pass
//! for a critical shift.

use super::margin::{af_text, side_name};
use super::severity_name;
use crate::config::model::Severity;
use serde_json::{json, Value};
use veer_tracker::drift::{Assessment, Bound, Estimate};
use veer_tracker::margin::Side;
use veer_tracker::Complex64;

/// One window's estimate of a tracked critical, with what the rules need to know of it.
pub(crate) struct EstimateInput<'a> {
    /// The key of its alerts (`x:1`, `x:design-1`).
    pub key: &'a str,
    /// Channel of the vectors.
    pub channel: &'a str,
    /// The critical's speed as known before the estimates (measured by its event, or
    /// configured), r/min.
    pub known_rpm: f64,
    /// Whether that speed is a configured one (design, shop test) rather than measured.
    pub configured: bool,
    /// Its AF.
    pub af: Option<f64>,
    /// The window's estimate.
    pub estimate: &'a Estimate,
    /// The 1X vector the event's model predicts at the window's speed (zero without a model).
    pub expected: Complex64,
}

/// An estimate of a critical judged against the margin.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct ApproachFinding {
    /// Channel and mode of the critical (`x:1`).
    pub key: String,
    /// The critical as known before the estimates, r/min.
    pub known_rpm: f64,
    /// Whether that is a configured speed rather than a measured one.
    pub configured: bool,
    /// Its AF.
    pub af: Option<f64>,
    /// Running speed over the window, r/min.
    pub speed_rpm: f64,
    /// The window's assessment.
    pub a: Assessment,
    /// Rule name.
    pub rule: String,
    /// Points of recovery needed to clear.
    pub hysteresis_pct: f64,
}

impl ApproachFinding {
    /// Alarm when the present bound breaches, warning when only the projection does.
    pub fn raw(&self) -> Option<Severity> {
        if self.a.present.breach {
            Some(Severity::Alarm)
        } else if self.a.worst().breach {
            Some(Severity::Warning)
        } else {
            None
        }
    }

    /// Clear once the worse bound is outside the range and its required margin plus the
    /// hysteresis.
    pub fn recovered(&self) -> bool {
        let w = self.a.worst();
        w.side != Side::Inside && w.actual_pct >= w.required_pct + self.hysteresis_pct
    }

    fn bound_text(b: &Bound) -> String {
        match b.side {
            Side::Inside => format!("{:.0} r/min, inside the operating range", b.critical_rpm),
            side => format!(
                "{:.0} r/min, {:.1} % {} the range against {:.1} % required",
                b.critical_rpm,
                b.actual_pct,
                side_name(side),
                b.required_pct
            ),
        }
    }

    pub fn message(&self, severity: Severity) -> String {
        let a = &self.a;
        let now = format!(
            "critical {} estimated at {:.0} ± {:.0} r/min at {:.0} r/min running ({} {:.0} r/min, {})",
            self.key,
            a.critical_rpm,
            a.sigma_rpm,
            self.speed_rpm,
            if self.configured { "configured" } else { "measured" },
            self.known_rpm,
            af_text(self.af)
        );
        match severity {
            Severity::Alarm => format!(
                "{}: {now}; with {:.0} σ of uncertainty it lies at {}",
                severity_name(severity),
                a.sigmas,
                Self::bound_text(&a.present)
            ),
            Severity::Warning => format!(
                "{}: {now}; its trend, projected {:.0} min ahead with {:.0} σ of uncertainty, reaches {}",
                severity_name(severity),
                a.horizon_s / 60.0,
                a.sigmas,
                Self::bound_text(&a.worst())
            ),
        }
    }

    pub fn cleared(&self) -> String {
        format!(
            "cleared: critical {} estimated at {:.0} ± {:.0} r/min, clear of its required margin within the horizon",
            self.key, self.a.critical_rpm, self.a.sigma_rpm
        )
    }

    pub fn evidence(&self) -> Value {
        let a = &self.a;
        let bound = |b: &Bound| {
            json!({
                "critical_rpm": b.critical_rpm,
                "side": side_name(b.side),
                "actual_pct": b.actual_pct,
                "required_pct": b.required_pct,
                "breach": b.breach,
            })
        };
        json!({
            "key": self.key,
            "estimate_rpm": a.critical_rpm,
            "uncertainty_rpm": a.sigma_rpm,
            "sigmas": a.sigmas,
            "speed_rpm": self.speed_rpm,
            "known_rpm": self.known_rpm,
            "known_from": if self.configured { "configured" } else { "measured" },
            "af": self.af,
            "rule": self.rule,
            "present": bound(&a.present),
            "projected": a.projected.as_ref().map(bound),
            "trend_rpm_per_h": a.slope_rpm_per_s.map(|s| s * 3600.0),
            "horizon_min": a.horizon_s / 60.0,
        })
    }
}

/// A window whose 1X vector left the model's locus.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct VectorChangeFinding {
    /// Channel and mode of the critical whose model it left.
    pub key: String,
    /// Running speed, r/min.
    pub speed_rpm: f64,
    /// Distance from the locus relative to the vector's size (`None` on a clear by a new model).
    pub locus_residual: Option<f64>,
    /// The 1X vector of the window (amplitude, lag), in the channel's units.
    pub vector: Option<(f64, f64)>,
    /// What the event's model predicts at this speed (amplitude, lag).
    pub expected: Option<(f64, f64)>,
}

impl VectorChangeFinding {
    pub fn message(&self) -> String {
        let detail = match (self.vector, self.expected) {
            (Some((a, p)), Some((ea, ep))) => format!(
                ": 1X {a:.1} at {p:.0}°, where its event's model predicts {ea:.1} at {ep:.0}°"
            ),
            _ => String::new(),
        };
        format!(
            "warning: 1X vector change on {} at {:.0} r/min (off the critical's model by {:.0} % of the vector){detail}; an unbalance, bow or runout change, not a critical shift",
            self.key,
            self.speed_rpm,
            self.locus_residual.unwrap_or(0.0) * 100.0
        )
    }

    pub fn cleared(&self) -> String {
        format!(
            "cleared: the 1X vector on {} is back on its critical's model",
            self.key
        )
    }

    pub fn evidence(&self) -> Value {
        json!({
            "key": self.key,
            "speed_rpm": self.speed_rpm,
            "locus_residual": self.locus_residual,
            "vector": self.vector.map(|(a, p)| json!({"amplitude": a, "phase_deg": p})),
            "model_vector": self.expected.map(|(a, p)| json!({"amplitude": a, "phase_deg": p})),
        })
    }
}
