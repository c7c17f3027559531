//! Sensor health from the raw samples: flat lines, clipping and non-finite values.
//!
//! A channel whose samples stop changing (a broken cable on a proximity probe driver reads a constant
//! rail voltage), sit at their extreme for runs of samples (the logger's input range was exceeded),
//! or carry NaN or infinite values is not to be believed; margin alerts are not computed from it.
//! Each condition is judged over windows of about a second so that one odd sample does not flip it.

/// A condition found on a channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub(crate) enum Condition {
    /// No tach pulses while the machine was running.
    TachLost,
    /// The signal did not change over a whole window.
    FlatLine,
    /// Runs of samples stuck at the window's extreme value.
    Clipping,
    /// NaN or infinite samples.
    NotFinite,
}

impl Condition {
    /// The name stored and printed.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Condition::TachLost => "tach-lost",
            Condition::FlatLine => "flat-line",
            Condition::Clipping => "clipping",
            Condition::NotFinite => "not-finite",
        }
    }
}

/// A window is clipped when this share of its samples sits exactly at its extremes (common
/// practice for flat-topped waveforms; a clean or lightly quantised sine spends well under it at
/// its peak values)...
const CLIP_SHARE: f64 = 0.05;
/// ...in runs at least this long.
const CLIP_RUN: usize = 8;

/// Per-channel state of the health checks.
#[derive(Clone, Debug)]
pub(crate) struct ChannelHealth {
    window: usize,
    n: usize,
    min: f32,
    max: f32,
    not_finite: u64,
    at_max: usize,
    at_min: usize,
    longest_run: usize,
    run_value: f32,
    run_len: usize,
    /// The condition currently reported (None = healthy).
    pub current: Option<Condition>,
}

impl ChannelHealth {
    /// Checks over windows of `window` samples (about a second).
    pub(crate) fn new(window: usize) -> Self {
        Self {
            window: window.max(16),
            n: 0,
            min: f32::INFINITY,
            max: f32::NEG_INFINITY,
            not_finite: 0,
            at_max: 0,
            at_min: 0,
            longest_run: 0,
            run_value: f32::NAN,
            run_len: 0,
            current: None,
        }
    }

    /// Feeds samples; returns `Some(new condition or None)` each time the judgement changes.
    pub(crate) fn push(&mut self, x: &[f32]) -> Vec<Option<Condition>> {
        let mut changes = Vec::new();
        for &v in x {
            if !v.is_finite() {
                self.not_finite += 1;
            } else {
                if v > self.max {
                    self.max = v;
                    self.at_max = 0;
                }
                if v < self.min {
                    self.min = v;
                    self.at_min = 0;
                }
                if v == self.max {
                    self.at_max += 1;
                }
                if v == self.min {
                    self.at_min += 1;
                }
                if v == self.run_value {
                    self.run_len += 1;
                } else {
                    self.run_value = v;
                    self.run_len = 1;
                }
                if (v == self.max || v == self.min) && self.run_len > self.longest_run {
                    self.longest_run = self.run_len;
                }
            }
            self.n += 1;
            if self.n >= self.window {
                let judged = self.judge();
                if judged != self.current {
                    self.current = judged;
                    changes.push(judged);
                }
                self.reset_window();
            }
        }
        changes
    }

    fn judge(&self) -> Option<Condition> {
        if self.not_finite > 0 {
            return Some(Condition::NotFinite);
        }
        if !(self.max > self.min) {
            return Some(Condition::FlatLine);
        }
        let at_extremes = (self.at_max + self.at_min) as f64;
        if at_extremes >= CLIP_SHARE * self.n as f64 && self.longest_run >= CLIP_RUN {
            return Some(Condition::Clipping);
        }
        None
    }

    fn reset_window(&mut self) {
        self.n = 0;
        self.min = f32::INFINITY;
        self.max = f32::NEG_INFINITY;
        self.not_finite = 0;
        self.at_max = 0;
        self.at_min = 0;
        self.longest_run = 0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flat_nan_and_clipped_windows_are_reported_once() {
        let mut h = ChannelHealth::new(1000);
        let sine: Vec<f32> = (0..3000).map(|i| (i as f32 * 0.05).sin()).collect();
        assert!(h.push(&sine).is_empty());
        assert_eq!(h.push(&[1.5; 2000]), vec![Some(Condition::FlatLine)]);
        let mut nan = sine.clone();
        nan[1500] = f32::NAN;
        // Healthy again in the first window, NaN in the second, healthy in the third.
        let changes = h.push(&nan);
        assert_eq!(changes, vec![None, Some(Condition::NotFinite), None]);
        let clipped: Vec<f32> = sine.iter().map(|v| v.clamp(-0.8, 0.8)).collect();
        assert_eq!(h.push(&clipped), vec![Some(Condition::Clipping)]);
        assert_eq!(h.push(&sine), vec![None]);
    }
}
