//! Critical shift: a critical found by a run-up or coast-down, against the known critical it is
//! taken to be.
//!
//! Criticals move with bearing wear, foundation changes, temperature and process: a stiffness
//! change of a few percent moves a critical by about half as much (ωn = √(k/m)), so a shift is an
//! early sign of a mechanical change, and a critical that moves toward the operating range eats the
//! separation margin the machine was built with. A found critical is matched to the nearest known
//! one within ±[`MATCH_PCT`]; the shift is measured from that critical's baseline. Warning when the
//! shift exceeds `critical_shift_pct`, alarm when the found critical's margin to the operating range
//! is breached ([`veer_tracker::margin::assess`]). A found critical that matches none is checked
//! against the range only, so a new critical inside the margin is not missed.

use super::margin::{af_text, side_name};
use super::severity_name;
use super::KnownCritical;
use crate::config::model::Severity;
use serde_json::{json, Value};
use veer_tracker::margin::{assess, MarginAssessment, MarginRule, OperatingRange, Verdict};

/// How far a found critical may be from a known one and still be taken for it, percent (a
/// critical moving further than this is more likely a different mode).
pub(super) const MATCH_PCT: f64 = 25.0;

/// The known critical nearest to `rpm` within ±[`MATCH_PCT`] of its speed.
pub(super) fn nearest(rpm: f64, known: &[KnownCritical]) -> Option<&KnownCritical> {
    known
        .iter()
        .filter(|k| k.rpm > 0.0 && ((rpm - k.rpm) / k.rpm * 100.0).abs() <= MATCH_PCT)
        .min_by(|a, b| (rpm - a.rpm).abs().total_cmp(&(rpm - b.rpm).abs()))
}

/// One found critical judged against its known critical and the operating range.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct ShiftFinding {
    /// Channel it was found on.
    pub channel: String,
    /// Speed found, r/min.
    pub found_rpm: f64,
    /// AF found.
    pub found_af: Option<f64>,
    /// The known critical it matches, if any.
    pub known: Option<KnownCritical>,
    /// Shift from the baseline, percent (`None` when unmatched).
    pub shift_pct: Option<f64>,
    /// Configured shift limit, percent (≤ 0: shift not checked).
    pub limit_pct: f64,
    /// Margin of the found critical to the operating range.
    pub assessment: MarginAssessment,
    /// Rule name.
    pub rule: String,
    /// The range.
    pub range: OperatingRange,
    /// Points of recovery needed to clear.
    pub hysteresis_pct: f64,
}

/// The settings the shift rule judges by.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct ShiftRules {
    /// The machine's operating range.
    pub range: OperatingRange,
    /// Its separation-margin rule.
    pub rule: MarginRule,
    /// Shift that raises a warning, percent (≤ 0: shift not checked).
    pub limit_pct: f64,
    /// Warning band of the range margin, points.
    pub warn_band_pct: f64,
    /// Points of recovery needed to clear.
    pub hysteresis_pct: f64,
}

impl ShiftFinding {
    /// Judges one found critical.
    pub fn new(
        channel: &str,
        found_rpm: f64,
        found_af: Option<f64>,
        known: &[KnownCritical],
        rules: &ShiftRules,
    ) -> Self {
        let ShiftRules {
            range,
            rule,
            limit_pct,
            warn_band_pct,
            hysteresis_pct,
        } = *rules;
        let known = nearest(found_rpm, known).cloned();
        let shift_pct = known.as_ref().and_then(|k| {
            let base = k.baseline_rpm.unwrap_or(k.rpm);
            (base > 0.0).then(|| (found_rpm - base) / base * 100.0)
        });
        Self {
            channel: channel.to_string(),
            found_rpm,
            found_af,
            known,
            shift_pct,
            limit_pct,
            assessment: assess(found_rpm, found_af, &range, rule, warn_band_pct),
            rule: rule.name(),
            range,
            hysteresis_pct: hysteresis_pct.max(0.0),
        }
    }

    /// The alert's key: the known critical's, or one per channel for unmatched finds.
    pub fn key(&self) -> String {
        match &self.known {
            Some(k) => k.key.clone(),
            None => format!("unmatched:{}", self.channel),
        }
    }

    fn shift_over(&self, limit: f64) -> bool {
        self.limit_pct > 0.0 && self.shift_pct.is_some_and(|s| s.abs() > limit)
    }

    /// Severity on the figures alone.
    pub fn raw(&self) -> Option<Severity> {
        if self.assessment.verdict == Verdict::Breach {
            Some(Severity::Alarm)
        } else if self.shift_over(self.limit_pct) {
            Some(Severity::Warning)
        } else {
            None
        }
    }

    /// Whether an open alert may clear: the shift back within the limit less the hysteresis, and
    /// the range margin met with the hysteresis to spare.
    pub fn recovered(&self) -> bool {
        let a = &self.assessment;
        let margin_ok = match a.verdict {
            Verdict::NotRequired => true,
            Verdict::Breach => false,
            Verdict::Clear | Verdict::Warning => {
                a.actual_pct >= a.required_pct + self.hysteresis_pct
            }
        };
        let shift_ok = !self.shift_over((self.limit_pct - self.hysteresis_pct).max(0.0));
        margin_ok && shift_ok
    }

    fn found_text(&self) -> String {
        format!(
            "critical found at {:.0} r/min (AF {}) on {}",
            self.found_rpm,
            af_text(self.found_af),
            self.channel
        )
    }

    /// One line for a person.
    pub fn message(&self, severity: Severity) -> String {
        let a = &self.assessment;
        let mut parts = Vec::new();
        if let (Some(k), Some(s)) = (&self.known, self.shift_pct) {
            parts.push(format!(
                "{:+.1} % from the {:.0} r/min baseline of {} (limit {:.1} %)",
                s,
                k.baseline_rpm.unwrap_or(k.rpm),
                k.key,
                self.limit_pct
            ));
        } else {
            parts.push("matches no known critical".to_string());
        }
        if a.verdict == Verdict::Breach {
            parts.push(format!(
                "its margin to the operating range {:.0}-{:.0} r/min is {:.1} %, {} rule requires \
                 {:.1} %",
                self.range.min_rpm, self.range.max_rpm, a.actual_pct, self.rule, a.required_pct
            ));
        }
        format!(
            "{}: {}: {}",
            severity_name(severity),
            self.found_text(),
            parts.join("; ")
        )
    }

    /// The line of a clear.
    pub fn cleared(&self) -> String {
        format!(
            "cleared: {}, within the shift limit and clear of the range margin",
            self.found_text()
        )
    }

    /// The figures.
    pub fn evidence(&self) -> Value {
        let a = &self.assessment;
        json!({
            "channel": self.channel,
            "found_rpm": self.found_rpm,
            "found_af": self.found_af,
            "critical_key": self.known.as_ref().map(|k| k.key.clone()),
            "critical_rpm": self.known.as_ref().map(|k| k.rpm),
            "critical_origin": self.known.as_ref().map(|k| k.origin.clone()),
            "baseline_rpm": self.known.as_ref().map(|k| k.baseline_rpm.unwrap_or(k.rpm)),
            "shift_pct": self.shift_pct,
            "shift_limit_pct": self.limit_pct,
            "min_operating_rpm": self.range.min_rpm,
            "max_continuous_rpm": self.range.max_rpm,
            "side": side_name(a.side),
            "rule": self.rule,
            "required_pct": a.required_pct,
            "actual_pct": a.actual_pct,
            "verdict": format!("{:?}", a.verdict).to_lowercase(),
            "hysteresis_pct": self.hysteresis_pct,
        })
    }
}
