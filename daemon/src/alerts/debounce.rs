//! Time delay and hysteresis for one alert condition, in data time.
//!
//! A running speed with a few r/min of jitter sitting near a threshold would otherwise raise and
//! clear an alert every few revolutions. Two guards stop that (common practice in alarm handling):
//! a condition must hold without interruption for `delay_s` before it is raised, and an open alert
//! clears only after the figure has recovered past the threshold by the hysteresis, again for
//! `delay_s`. The caller decides what "recovered" means (it knows the thresholds); this type only
//! keeps the timers.

use crate::config::model::Severity;

/// What the debouncer decided at one update.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Step {
    /// Raise a new alert with this severity.
    Raise(Severity),
    /// The open warning has become an alarm.
    Escalate,
    /// The open alert's condition has gone.
    Clear,
}

/// Timers of one condition.
#[derive(Clone, Debug, Default, PartialEq)]
pub(super) struct Debounce {
    /// Severity of the open alert, if one is open.
    open: Option<Severity>,
    /// While closed: when the condition started holding.
    pending_since: Option<f64>,
    /// While an open warning sees alarm conditions: since when.
    escalate_since: Option<f64>,
    /// While open and recovered: since when.
    recover_since: Option<f64>,
    /// When the open alert's condition started (for evidence).
    opened_onset: Option<f64>,
}

impl Debounce {
    /// Feeds one observation at data time `t`.
    ///
    /// `raw` is the severity the figure deserves on its own (no delay, no hysteresis); `recovered`
    /// says whether it has recovered past the threshold by the hysteresis, and must imply
    /// `raw == None`. An open alert keeps its highest severity until it clears.
    pub fn update(
        &mut self,
        t: f64,
        raw: Option<Severity>,
        recovered: bool,
        delay_s: f64,
    ) -> Option<Step> {
        let held = |since: &mut Option<f64>| t - *since.get_or_insert(t) >= delay_s;
        match self.open {
            None => match raw {
                Some(severity) => {
                    if held(&mut self.pending_since) {
                        self.open = Some(severity);
                        self.opened_onset = self.pending_since.take();
                        Some(Step::Raise(severity))
                    } else {
                        None
                    }
                }
                None => {
                    self.pending_since = None;
                    None
                }
            },
            Some(open) => {
                if recovered {
                    self.escalate_since = None;
                    if held(&mut self.recover_since) {
                        *self = Self::default();
                        return Some(Step::Clear);
                    }
                    return None;
                }
                self.recover_since = None;
                if open == Severity::Warning && raw == Some(Severity::Alarm) {
                    if held(&mut self.escalate_since) {
                        self.open = Some(Severity::Alarm);
                        self.escalate_since = None;
                        return Some(Step::Escalate);
                    }
                } else {
                    self.escalate_since = None;
                }
                None
            }
        }
    }

    /// Opens the alert at once (for conditions that are facts, not trends: a found critical, a
    /// health problem), or escalates it. Returns what changed.
    pub fn force(&mut self, t: f64, severity: Severity) -> Option<Step> {
        self.pending_since = None;
        self.escalate_since = None;
        self.recover_since = None;
        match self.open {
            None => {
                self.open = Some(severity);
                self.opened_onset = Some(t);
                Some(Step::Raise(severity))
            }
            Some(Severity::Warning) if severity == Severity::Alarm => {
                self.open = Some(Severity::Alarm);
                Some(Step::Escalate)
            }
            Some(_) => None,
        }
    }

    /// Closes the alert at once, if open.
    pub fn force_clear(&mut self) -> Option<Step> {
        let was_open = self.open.is_some();
        *self = Self::default();
        was_open.then_some(Step::Clear)
    }

    /// Forgets running timers but keeps an open alert as it is: the condition's history was
    /// interrupted (the machine left steady running, the tach was lost), so a delay must start
    /// again from fresh data.
    pub fn interrupt(&mut self) {
        self.pending_since = None;
        self.escalate_since = None;
        self.recover_since = None;
    }

    /// Severity of the open alert.
    pub fn open(&self) -> Option<Severity> {
        self.open
    }

    /// When the open alert's condition began (data time), if open.
    pub fn onset(&self) -> Option<f64> {
        self.opened_onset
    }
}
