//! Drift: where the steady running speed is heading, and when it would enter a critical's
//! warning band.
//!
//! A least-squares line is fitted to the speed over the last `drift_window_min` of steady running
//! and projected forward. If it reaches a critical's warning threshold within `drift_horizon_min`,
//! a warning is raised with the estimated time, so there is time to act before the margin rule
//! itself fires. A slope that cannot be told from noise raises nothing: it must exceed
//! [`SIGNIFICANCE`] times its standard error (ordinary least squares, e.g. Montgomery & Runger,
//! "Applied Statistics and Probability for Engineers", simple linear regression: se(b) =
//! sqrt(σ²/Sxx) with σ² = SSE/(n − 2)). Nor is anything raised once the speed is already inside the
//! band: the margin rule speaks for it then.

use super::margin::{af_text, side_name, Thresholds};
use super::speed::Point;
use super::KnownCritical;
use serde_json::{json, Value};
use std::collections::VecDeque;
use veer_tracker::margin::MarginRule;

/// How many standard errors a slope must exceed to be trusted (common practice: ~3σ).
pub(super) const SIGNIFICANCE: f64 = 3.0;

/// A looser test an open drift alert must fail before it may clear, so a slope near the
/// significance limit does not raise and clear in turn (hysteresis on the statistic).
pub(super) const SIGNIFICANCE_HOLD: f64 = 2.0;

/// How much longer than the horizon a crossing may be and still hold an open alert (the
/// horizon's hysteresis).
pub(super) const HORIZON_HOLD: f64 = 1.5;

/// Fewest points in a fit.
const MIN_POINTS: usize = 10;

/// Share of the window the steady history must cover before a trend is trusted.
const MIN_COVERAGE: f64 = 0.5;

/// A straight line fitted to speed against time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Fit {
    /// Slope, r/min per minute.
    pub slope_rpm_per_min: f64,
    /// Standard error of the slope, r/min per minute.
    pub slope_se_rpm_per_min: f64,
    /// The line's value at the last point, r/min.
    pub speed_now_rpm: f64,
    /// Data time of the last point, unix s.
    pub time_now_s: f64,
    /// Points fitted.
    pub n: usize,
    /// Time from the first to the last point, s.
    pub span_s: f64,
}

/// Fits speed against time over `points`; `None` with too few points or too short a span for
/// the window (a trend over a few seconds of a 10-minute window would be guesswork).
pub(super) fn fit(points: &VecDeque<Point>, window_s: f64) -> Option<Fit> {
    let n = points.len();
    let (first, last) = (points.front()?, points.back()?);
    let span_s = last.t - first.t;
    if n < MIN_POINTS || span_s < MIN_COVERAGE * window_s || !(span_s > 0.0) {
        return None;
    }
    let nf = n as f64;
    // Centred sums: unix times are ~1.7e9 s, and their squares would swamp the variation.
    let t0 = last.t;
    let (mut st, mut sy) = (0.0, 0.0);
    for p in points {
        st += p.t - t0;
        sy += p.rpm;
    }
    let (mt, my) = (st / nf, sy / nf);
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for p in points {
        let (dx, dy) = (p.t - t0 - mt, p.rpm - my);
        sxx += dx * dx;
        sxy += dx * dy;
        syy += dy * dy;
    }
    if !(sxx > 0.0) {
        return None;
    }
    let b = sxy / sxx;
    let sse = (syy - b * sxy).max(0.0);
    let se = (sse / (nf - 2.0) / sxx).sqrt();
    Some(Fit {
        slope_rpm_per_min: b * 60.0,
        slope_se_rpm_per_min: se * 60.0,
        speed_now_rpm: my + b * (0.0 - mt),
        time_now_s: t0,
        n,
        span_s,
    })
}

/// The projection of one fit onto one critical.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct DriftFinding {
    /// The fitted line.
    pub fit: Fit,
    /// The critical.
    pub critical: KnownCritical,
    /// Its thresholds seen from the fitted speed.
    pub thresholds: Thresholds,
    /// Rule name.
    pub rule: String,
    /// Window length, minutes.
    pub window_min: f64,
    /// Horizon, minutes.
    pub horizon_min: f64,
    /// Margin at the fitted speed, percent.
    pub actual_pct: f64,
    /// Speed at which the warning threshold is reached, r/min.
    pub warning_speed_rpm: Option<f64>,
    /// Minutes until the line reaches it (`None`: heading away, or never).
    pub minutes_to_warning: Option<f64>,
    /// Speed at which the required margin is breached, r/min.
    pub required_speed_rpm: Option<f64>,
    /// Minutes until the line reaches it.
    pub minutes_to_required: Option<f64>,
}

impl DriftFinding {
    /// Projects `fit` onto `critical`.
    pub fn new(
        fit: Fit,
        critical: &KnownCritical,
        rule: MarginRule,
        warn_band_pct: f64,
        window_min: f64,
        horizon_min: f64,
    ) -> Self {
        let thresholds = Thresholds::of(critical, fit.speed_now_rpm, rule, warn_band_pct);
        let n0 = fit.speed_now_rpm;
        let minutes_to = |target: Option<f64>| {
            let target = target?;
            let t = (target - n0) / fit.slope_rpm_per_min;
            (t.is_finite() && t >= 0.0).then_some(t)
        };
        let warning_speed_rpm = thresholds.speed_at(critical.rpm, thresholds.warning_pct);
        let required_speed_rpm = thresholds.speed_at(critical.rpm, thresholds.required_pct);
        Self {
            fit,
            critical: critical.clone(),
            thresholds,
            rule: rule.name(),
            window_min,
            horizon_min,
            actual_pct: super::margin::actual_pct(n0, critical.rpm),
            warning_speed_rpm,
            minutes_to_warning: minutes_to(warning_speed_rpm),
            required_speed_rpm,
            minutes_to_required: minutes_to(required_speed_rpm),
        }
    }

    /// Whether the fitted speed is already inside the warning band.
    pub fn in_band(&self) -> bool {
        self.actual_pct < self.thresholds.warning_pct
    }

    /// Whether the slope exceeds `k` standard errors.
    fn significant(&self, k: f64) -> bool {
        self.fit.slope_rpm_per_min.abs() > k * self.fit.slope_se_rpm_per_min
    }

    /// Whether a drift warning is due: a significant trend reaching the band within the horizon,
    /// from outside it.
    pub fn due(&self) -> bool {
        !self.thresholds.waived
            && !self.in_band()
            && self.significant(SIGNIFICANCE)
            && self
                .minutes_to_warning
                .is_some_and(|m| m <= self.horizon_min)
    }

    /// Whether an open drift alert may clear: outside the band by `hysteresis_pct` and no
    /// crossing by the looser tests.
    pub fn recovered(&self, hysteresis_pct: f64) -> bool {
        let heading = self.significant(SIGNIFICANCE_HOLD)
            && self
                .minutes_to_warning
                .is_some_and(|m| m <= HORIZON_HOLD * self.horizon_min);
        self.thresholds.waived
            || (self.actual_pct >= self.thresholds.warning_pct + hysteresis_pct.max(0.0)
                && !heading)
    }

    /// One line for a person.
    pub fn message(&self) -> String {
        let c = &self.critical;
        let when = match self.minutes_to_warning {
            Some(m) => format!("in about {m:.0} min"),
            None => "soon".to_string(),
        };
        format!(
            "warning: running speed {:.0} r/min drifting {:+.1} r/min/min toward critical {} at \
             {:.0} r/min ({}, AF {}); it would enter the {:.1} % warning band at {:.0} r/min {when}",
            self.fit.speed_now_rpm,
            self.fit.slope_rpm_per_min,
            c.key,
            c.rpm,
            c.origin,
            af_text(c.af),
            self.thresholds.warning_pct,
            self.warning_speed_rpm.unwrap_or(f64::NAN),
        )
    }

    /// The line of a clear.
    pub fn cleared(&self) -> String {
        format!(
            "cleared: running speed {:.0} r/min ({:+.1} r/min/min) no longer heading into the \
             warning band of critical {} at {:.0} r/min",
            self.fit.speed_now_rpm,
            self.fit.slope_rpm_per_min,
            self.critical.key,
            self.critical.rpm,
        )
    }

    /// The figures.
    pub fn evidence(&self) -> Value {
        let c = &self.critical;
        let crossing_time_s = self
            .minutes_to_warning
            .map(|m| self.fit.time_now_s + m * 60.0);
        json!({
            "speed_rpm": self.fit.speed_now_rpm,
            "slope_rpm_per_min": self.fit.slope_rpm_per_min,
            "slope_se_rpm_per_min": self.fit.slope_se_rpm_per_min,
            "points": self.fit.n,
            "span_min": self.fit.span_s / 60.0,
            "window_min": self.window_min,
            "horizon_min": self.horizon_min,
            "critical_key": c.key,
            "critical_rpm": c.rpm,
            "critical_origin": c.origin,
            "af": c.af,
            "side": side_name(self.thresholds.side),
            "rule": self.rule,
            "required_pct": self.thresholds.required_pct,
            "warning_pct": self.thresholds.warning_pct,
            "actual_pct": self.actual_pct,
            "crossing_speed_rpm": self.warning_speed_rpm,
            "minutes_to_crossing": self.minutes_to_warning,
            "crossing_time_s": crossing_time_s,
            "breach_speed_rpm": self.required_speed_rpm,
            "minutes_to_breach": self.minutes_to_required,
        })
    }
}
