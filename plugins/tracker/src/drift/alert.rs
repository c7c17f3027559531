//! The alert rule: a critical closing in on the operating range, or a 1X vector change.
//!
//! The informative estimates of the last [`DriftAlertConfig::trend_window_s`] are fitted with a
//! straight line in time (weights `1/σ²`), projected [`DriftAlertConfig::horizon_s`] ahead, and the
//! pessimistic bound — the estimate moved `sigmas` standard deviations towards the range — is turned
//! into the critical speed (the amplitude peak, `Nn/√(1 − 2ζ²)`, which is what API RP 684 margins are
//! measured on) and held to the required separation margin ([`crate::margin`]). The present estimate
//! is held to the margin too, so a critical that is already too close alerts even without a trend.
//! Windows classified as an unbalance change never feed the trend; they raise a vector-change alert.

use super::classify::Change;
use super::estimate::Estimate;
use super::model::CriticalModel;
use super::DriftError;
use crate::margin::{actual_margin_pct, required_margin_pct, MarginRule, OperatingRange, Side};
use std::collections::VecDeque;

/// Settings of the alert rule.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DriftAlertConfig {
    /// The speeds the machine runs at.
    pub range: OperatingRange,
    /// The separation-margin rule it is held to.
    pub rule: MarginRule,
    /// The critical's AF (from the run-up), `None` if unknown (the rule's cap applies).
    pub af: Option<f64>,
    /// How far ahead the trend is projected, s.
    pub horizon_s: f64,
    /// How much history the trend is fitted over, s.
    pub trend_window_s: f64,
    /// How many standard deviations the bound lies towards the range.
    pub sigmas: f64,
    /// Consecutive windows that must agree before an alert is raised (and before it re-arms).
    pub persistence: usize,
}

/// Most estimates the trend keeps, whatever `trend_window_s` says: memory stays bounded.
const MAX_HISTORY: usize = 4096;

impl DriftAlertConfig {
    /// Checks every setting, so that a configuration file cannot silently switch the alert off.
    pub fn validate(&self) -> Result<(), DriftError> {
        let bad = |field, value, reason| {
            Err(DriftError::InvalidConfig {
                field,
                value,
                reason,
            })
        };
        if self.range.validate().is_err() {
            return bad(
                "range",
                self.range.min_rpm,
                "both ends must be positive and finite, min ≤ max",
            );
        }
        if !(self.horizon_s.is_finite() && self.horizon_s >= 0.0) {
            return bad(
                "horizon_s",
                self.horizon_s,
                "must be finite and not negative",
            );
        }
        if !(self.trend_window_s.is_finite() && self.trend_window_s > 0.0) {
            return bad("trend_window_s", self.trend_window_s, "must be positive");
        }
        if !(self.sigmas.is_finite() && self.sigmas >= 0.0) {
            return bad("sigmas", self.sigmas, "must be finite and not negative");
        }
        Ok(())
    }
}

/// An alert.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum DriftAlertEvent {
    /// The critical is, or within the horizon is projected to be, closer than the required margin.
    CriticalApproach {
        /// Time of the window that raised it, s.
        time_s: f64,
        /// The pessimistic critical speed held to the margin, r/min.
        critical_rpm: f64,
        /// Its margin, percent.
        actual_pct: f64,
        /// The margin required, percent.
        required_pct: f64,
        /// Side of the range the critical lies on.
        side: Side,
    },
    /// The 1X vector moved off the model's locus: an unbalance change, not a critical shift.
    VectorChange {
        /// Time of the window that raised it, s.
        time_s: f64,
        /// Its locus residual.
        locus_residual: f64,
    },
}

/// A critical speed held to the required margin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bound {
    /// The pessimistic critical speed judged, r/min.
    pub critical_rpm: f64,
    /// Side of the range it lies on.
    pub side: Side,
    /// Its margin to the range, percent.
    pub actual_pct: f64,
    /// The margin required, percent.
    pub required_pct: f64,
    /// Whether it is inside the range or closer than the required margin.
    pub breach: bool,
}

/// One informative window judged against the margin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Assessment {
    /// The window's estimate of the critical speed, r/min.
    pub critical_rpm: f64,
    /// Its standard deviation, r/min.
    pub sigma_rpm: f64,
    /// The present estimate moved `sigmas` of its σ towards the range.
    pub present: Bound,
    /// The trend projected `horizon_s` ahead and moved `sigmas` of its σ towards the range (never
    /// further from it than the present bound); `None` until three windows span half the horizon.
    pub projected: Option<Bound>,
    /// The trend's slope of the critical speed, r/min per s.
    pub slope_rpm_per_s: Option<f64>,
    /// How far ahead the projection looks, s.
    pub horizon_s: f64,
    /// How many standard deviations the bounds lie towards the range.
    pub sigmas: f64,
}

impl Assessment {
    /// The projection when there is one (it is never further from the range than the present
    /// bound), else the present bound.
    pub fn worst(&self) -> Bound {
        self.projected.unwrap_or(self.present)
    }
}

/// What one window says, for the alert.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Judgement {
    /// The window left the model's locus: an unbalance change.
    VectorChange {
        /// Its locus residual.
        locus_residual: f64,
    },
    /// The window says nothing about the critical.
    NotInformative,
    /// The window's estimate held to the margin.
    Assessed(Assessment),
}

/// The alert rule for one critical.
#[derive(Clone, Debug)]
pub struct DriftAlert {
    cfg: DriftAlertConfig,
    peak_factor: f64,
    history: VecDeque<(f64, f64, f64)>,
    approach_run: usize,
    clear_run: usize,
    approach_raised: bool,
    vector_run: usize,
    vector_raised: bool,
}

impl DriftAlert {
    /// The rule for the critical of `model`; refuses an invalid configuration.
    pub fn new(cfg: DriftAlertConfig, model: &CriticalModel) -> Result<Self, DriftError> {
        Self::with_critical_factor(cfg, model.critical_rpm(1.0))
    }

    /// The rule with the critical speed taken as `factor` times the natural speed: the ratio of
    /// the critical as its event measured it (the amplitude peak) to the fitted natural speed, so
    /// that an estimate with no drift reads the event's own figure.
    pub fn with_critical_factor(cfg: DriftAlertConfig, factor: f64) -> Result<Self, DriftError> {
        cfg.validate()?;
        if !(factor.is_finite() && factor > 0.0) {
            return Err(DriftError::InvalidConfig {
                field: "critical_factor",
                value: factor,
                reason: "must be positive and finite",
            });
        }
        Ok(Self {
            cfg,
            peak_factor: factor,
            history: VecDeque::new(),
            approach_run: 0,
            clear_run: 0,
            approach_raised: false,
            vector_run: 0,
            vector_raised: false,
        })
    }

    /// The natural speed to hold to the margin now (the latest estimate moved `sigmas` of its σ
    /// towards the range) and, once the history is long enough, the trend's projection to the horizon moved
    /// `sigmas` of the projection's σ, with the trend's slope (r/min per s); `None` with no history.
    fn bounds(&self, toward_lower: bool) -> Option<(f64, Option<(f64, f64)>)> {
        let &(t_now, nn_now, s_now) = self.history.back()?;
        let k = self.cfg.sigmas;
        let sign = if toward_lower { -1.0 } else { 1.0 };
        let present = nn_now + sign * k * s_now;
        // A trend is projected only from three windows on and over a history at least half as
        // long as the horizon (or the trend window, if shorter): a line through a minute and a
        // half of estimates, extrapolated half an hour, says nothing but its own noise.
        let span = t_now - self.history.front().map_or(t_now, |h| h.0);
        let needed = 0.5 * self.cfg.horizon_s.min(self.cfg.trend_window_s);
        if self.history.len() < 3 || span < needed {
            return Some((present, None));
        }
        let (mut sw, mut st, mut sn) = (0.0, 0.0, 0.0);
        for &(t, nn, s) in &self.history {
            let w = 1.0 / (s * s).max(1e-12);
            sw += w;
            st += w * t;
            sn += w * nn;
        }
        let (tm, nm) = (st / sw, sn / sw);
        let (mut stt, mut stn) = (0.0, 0.0);
        for &(t, nn, s) in &self.history {
            let w = 1.0 / (s * s).max(1e-12);
            stt += w * (t - tm) * (t - tm);
            stn += w * (t - tm) * (nn - nm);
        }
        if !(stt > 0.0) {
            return Some((present, None));
        }
        let slope = stn / stt;
        let mut chi2 = 0.0;
        for &(t, nn, s) in &self.history {
            let e = nn - nm - slope * (t - tm);
            chi2 += e * e / (s * s).max(1e-12);
        }
        let scale = (chi2 / (self.history.len() - 2) as f64).max(1.0);
        let tp = t_now + self.cfg.horizon_s;
        let pred = nm + slope * (tp - tm);
        let sigma = ((1.0 / sw + (tp - tm).powi(2) / stt) * scale).sqrt();
        Some((present, Some((pred + sign * k * sigma, slope))))
    }

    /// Takes one window's estimate and judges it, without the persistence of [`Self::update`]:
    /// for callers that debounce alerts themselves.
    pub fn judge(&mut self, e: &Estimate) -> Judgement {
        if e.change == Change::Unbalance {
            return Judgement::VectorChange {
                locus_residual: e.locus_residual,
            };
        }
        if !e.informative {
            return Judgement::NotInformative;
        }
        self.history
            .push_back((e.time_s, e.natural_rpm, e.sigma_rpm));
        while let Some(&(t, _, _)) = self.history.front() {
            if e.time_s - t > self.cfg.trend_window_s || self.history.len() > MAX_HISTORY {
                self.history.pop_front();
            } else {
                break;
            }
        }
        let range = &self.cfg.range;
        let (side_now, _) = actual_margin_pct(e.natural_rpm * self.peak_factor, range);
        let toward_lower = side_now != Side::Below;
        let Some((present, projected)) = self.bounds(toward_lower) else {
            return Judgement::NotInformative;
        };
        let judge = |nn: f64| {
            let critical_rpm = nn * self.peak_factor;
            let (side, actual_pct) = actual_margin_pct(critical_rpm, range);
            let required_pct = required_margin_pct(self.cfg.rule, self.cfg.af, side);
            Bound {
                critical_rpm,
                side,
                actual_pct,
                required_pct,
                breach: side == Side::Inside || actual_pct < required_pct,
            }
        };
        // Only a trend towards the range counts; a trend away leaves the present bound.
        let now = judge(present);
        let projected = projected.map(|(nn, slope)| {
            let closer = if toward_lower {
                nn < present
            } else {
                nn > present
            };
            let mut b = judge(if closer { nn } else { present });
            // A projection that passes right through the range lands on its far side with a
            // margin measured from the far end: it has crossed the range, a breach all the same.
            if b.side != now.side {
                b.breach = true;
            }
            (b, slope)
        });
        Judgement::Assessed(Assessment {
            critical_rpm: e.natural_rpm * self.peak_factor,
            sigma_rpm: e.sigma_rpm * self.peak_factor,
            present: now,
            projected: projected.map(|p| p.0),
            slope_rpm_per_s: projected.map(|p| p.1 * self.peak_factor),
            horizon_s: self.cfg.horizon_s,
            sigmas: self.cfg.sigmas,
        })
    }

    /// Takes one window's estimate; returns an alert when one is raised. Each alert is raised once
    /// and re-armed after `persistence` windows without its condition.
    pub fn update(&mut self, e: &Estimate) -> Option<DriftAlertEvent> {
        let persistence = self.cfg.persistence.max(1);
        let a = match self.judge(e) {
            Judgement::VectorChange { locus_residual } => {
                self.vector_run += 1;
                if self.vector_run >= persistence && !self.vector_raised {
                    self.vector_raised = true;
                    return Some(DriftAlertEvent::VectorChange {
                        time_s: e.time_s,
                        locus_residual,
                    });
                }
                return None;
            }
            Judgement::NotInformative => {
                self.vector_run = 0;
                self.vector_raised = false;
                return None;
            }
            Judgement::Assessed(a) => a,
        };
        self.vector_run = 0;
        self.vector_raised = false;
        let worst = a.worst();
        if worst.breach {
            self.approach_run += 1;
            self.clear_run = 0;
        } else {
            self.clear_run += 1;
            self.approach_run = 0;
            if self.clear_run >= persistence {
                self.approach_raised = false;
            }
        }
        if worst.breach && self.approach_run >= persistence && !self.approach_raised {
            self.approach_raised = true;
            return Some(DriftAlertEvent::CriticalApproach {
                time_s: e.time_s,
                critical_rpm: worst.critical_rpm,
                actual_pct: worst.actual_pct,
                required_pct: worst.required_pct,
                side: worst.side,
            });
        }
        None
    }
}
