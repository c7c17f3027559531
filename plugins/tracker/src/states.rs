//! Machine states from the shaft speed: stopped, slow roll, speeding up, steady, slowing down.
//!
//! The slope of speed is a least-squares line over a sliding time window, so a single noisy
//! revolution cannot flip the state; entering a sweep needs the slope above one threshold *and* the
//! speed to have left the settled speed by a few percent, and leaving it needs the slope below a
//! lower threshold for a hold time (hysteresis on both speed and slope). The distance test is what
//! keeps the ordinary wander of a governed machine (a fraction of a percent) from ever looking like
//! a sweep, while the low slope threshold still catches the slow coast-down of a large rotor.
//! Thresholds are relative to speed, because 5 rpm/s is a run-up for a 300 rpm fan and a wobble
//! for a 12 000 rpm compressor. A sweep is dated from the last moment the speed was still near the
//! settled speed, so the event holds the whole transition.

use std::collections::VecDeque;
use thiserror::Error;

/// What the machine is doing.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum MachineState {
    /// No plausible tach pulses.
    Stopped,
    /// Turning steadily at a low speed, below the slow-roll limit.
    SlowRoll,
    /// Accelerating: a run-up in progress.
    SpeedingUp,
    /// Running at a steady speed above slow roll.
    Steady,
    /// Decelerating: a coast-down in progress.
    SlowingDown,
}

impl MachineState {
    /// The state's name as printed and stored.
    pub fn name(self) -> &'static str {
        match self {
            MachineState::Stopped => "stopped",
            MachineState::SlowRoll => "slow-roll",
            MachineState::SpeedingUp => "speeding-up",
            MachineState::Steady => "steady",
            MachineState::SlowingDown => "slowing-down",
        }
    }

    /// Whether the state is a sweep (speeding up or slowing down).
    pub fn is_sweep(self) -> bool {
        matches!(self, MachineState::SpeedingUp | MachineState::SlowingDown)
    }
}

/// Settings of state detection.
#[derive(Clone, Debug, PartialEq)]
pub struct StateConfig {
    /// Steady running below this speed is slow roll, r/min (common practice: a few hundred r/min,
    /// where the dynamic response is negligible).
    pub slow_roll_max_rpm: f64,
    /// Length of the window the speed slope is fitted over, s.
    pub slope_window_s: f64,
    /// Slope that starts a sweep, in percent of the current speed per second.
    pub sweep_enter_pct_s: f64,
    /// Slope below which a sweep may end, percent of speed per second (below `sweep_enter_pct_s`).
    pub sweep_exit_pct_s: f64,
    /// Slope that starts a sweep whatever the speed, r/min per second (guards very low speeds).
    pub sweep_enter_min_rpm_s: f64,
    /// How far the speed must leave the settled speed before a sweep starts, percent.
    pub sweep_enter_delta_pct: f64,
    /// Time constant with which the settled speed follows a slow drift, s.
    pub settle_tau_s: f64,
    /// How long the slope must stay below the exit threshold before the sweep ends, s.
    pub hold_s: f64,
}

impl Default for StateConfig {
    fn default() -> Self {
        Self {
            slow_roll_max_rpm: 400.0,
            slope_window_s: 2.0,
            sweep_enter_pct_s: 0.03,
            sweep_exit_pct_s: 0.01,
            sweep_enter_min_rpm_s: 0.5,
            sweep_enter_delta_pct: 2.0,
            settle_tau_s: 120.0,
            hold_s: 3.0,
        }
    }
}

/// A state setting that cannot work.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum StateError {
    /// The named field has a value outside its allowed range.
    #[error("state setting `{field}`: {reason}")]
    Invalid {
        /// Name of the setting.
        field: &'static str,
        /// Why it was refused.
        reason: &'static str,
    },
}

impl StateConfig {
    /// Checks the settings, naming the first bad one.
    pub fn validate(&self) -> Result<(), StateError> {
        let bad = |field, reason| Err(StateError::Invalid { field, reason });
        if !(self.slow_roll_max_rpm >= 0.0) {
            return bad("slow_roll_max_rpm", "must be zero or a positive speed");
        }
        if !(self.slope_window_s > 0.0 && self.slope_window_s <= 600.0) {
            return bad("slope_window_s", "must be between 0 and 600 s");
        }
        if !(self.sweep_enter_pct_s > 0.0) {
            return bad("sweep_enter_pct_s", "must be positive");
        }
        if !(self.sweep_exit_pct_s > 0.0 && self.sweep_exit_pct_s < self.sweep_enter_pct_s) {
            return bad(
                "sweep_exit_pct_s",
                "must be positive and below sweep_enter_pct_s",
            );
        }
        if !(self.sweep_enter_min_rpm_s >= 0.0) {
            return bad("sweep_enter_min_rpm_s", "must not be negative");
        }
        if !(self.sweep_enter_delta_pct > 0.0 && self.sweep_enter_delta_pct < 50.0) {
            return bad("sweep_enter_delta_pct", "must be between 0 and 50 percent");
        }
        if !(self.settle_tau_s > 0.0) {
            return bad("settle_tau_s", "must be positive");
        }
        if !(self.hold_s >= 0.0) {
            return bad("hold_s", "must not be negative");
        }
        Ok(())
    }
}

/// A change of machine state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StateChange {
    /// When the new state began, s (for a sweep: where the slope window that revealed it starts).
    pub time_s: f64,
    /// The state left.
    pub from: MachineState,
    /// The state entered.
    pub to: MachineState,
    /// Speed at the change, r/min.
    pub speed_rpm: f64,
}

/// Follows the machine state from per-revolution speeds.
#[derive(Clone, Debug)]
pub struct StateTracker {
    cfg: StateConfig,
    state: MachineState,
    window: VecDeque<(f64, f64)>,
    /// Since when the slope has been below the exit threshold during a sweep.
    calm_since: Option<f64>,
    slope: f64,
    /// The settled speed and the time it was last updated (while steady or in slow roll).
    settled: Option<(f64, f64)>,
    /// Last time the speed was within a quarter of the entry distance of the settled speed.
    near_settled: f64,
}

impl StateTracker {
    /// A tracker that starts in the stopped state.
    pub fn new(cfg: &StateConfig) -> Result<Self, StateError> {
        cfg.validate()?;
        Ok(Self {
            cfg: cfg.clone(),
            state: MachineState::Stopped,
            window: VecDeque::new(),
            calm_since: None,
            slope: 0.0,
            settled: None,
            near_settled: 0.0,
        })
    }

    /// The current state.
    pub fn state(&self) -> MachineState {
        self.state
    }

    /// The last fitted speed slope, r/min per second.
    pub fn slope_rpm_s(&self) -> f64 {
        self.slope
    }

    /// The tach was lost or the speed fell below the plausible window.
    pub fn stopped(&mut self, time_s: f64) -> Option<StateChange> {
        self.window.clear();
        self.calm_since = None;
        self.slope = 0.0;
        self.settled = None;
        let speed = 0.0;
        self.change(MachineState::Stopped, time_s, speed)
    }

    fn change(&mut self, to: MachineState, time_s: f64, speed_rpm: f64) -> Option<StateChange> {
        if to == self.state {
            return None;
        }
        let from = self.state;
        self.state = to;
        Some(StateChange {
            time_s,
            from,
            to,
            speed_rpm,
        })
    }

    /// Adds the speed of one revolution, at its mid-time; returns a change of state if there was one.
    pub fn update(&mut self, time_s: f64, rpm: f64) -> Option<StateChange> {
        self.window.push_back((time_s, rpm));
        while let Some(&(t, _)) = self.window.front() {
            if time_s - t > self.cfg.slope_window_s {
                self.window.pop_front();
            } else {
                break;
            }
        }
        let span = time_s - self.window.front().map_or(time_s, |p| p.0);
        // Too little history for a slope: judge by speed alone.
        let have_slope = self.window.len() >= 3 && span >= 0.25 * self.cfg.slope_window_s;
        self.slope = if have_slope {
            fit_slope(&self.window)
        } else {
            0.0
        };
        let enter = (self.cfg.sweep_enter_pct_s * 0.01 * rpm).max(self.cfg.sweep_enter_min_rpm_s);
        let exit = self.cfg.sweep_exit_pct_s * 0.01 * rpm;
        let window_start = self.window.front().map_or(time_s, |p| p.0);
        let settled = if rpm < self.cfg.slow_roll_max_rpm {
            MachineState::SlowRoll
        } else {
            MachineState::Steady
        };
        match self.state {
            MachineState::Stopped => {
                // Coming out of a stop, the first speed in the window stands in for the settled one.
                let first = self.window.front().map_or(rpm, |p| p.1);
                let delta = self.cfg.sweep_enter_delta_pct * 0.01 * first;
                if have_slope && self.slope > enter && rpm - first > delta {
                    return self.change(MachineState::SpeedingUp, window_start, rpm);
                }
                if have_slope && self.slope < -enter && first - rpm > delta {
                    return self.change(MachineState::SlowingDown, window_start, rpm);
                }
                if have_slope {
                    self.settled = Some((rpm, time_s));
                    self.near_settled = time_s;
                    return self.change(settled, window_start, rpm);
                }
                None
            }
            MachineState::SlowRoll | MachineState::Steady => {
                let reference = self.follow_settled(time_s, rpm);
                let delta = self.cfg.sweep_enter_delta_pct * 0.01 * reference;
                if (rpm - reference).abs() < 0.25 * delta {
                    self.near_settled = time_s;
                }
                let since = self
                    .near_settled
                    .max(window_start - self.cfg.slope_window_s);
                if self.slope > enter && rpm - reference > delta {
                    self.settled = None;
                    return self.change(MachineState::SpeedingUp, since, rpm);
                }
                if self.slope < -enter && reference - rpm > delta {
                    self.settled = None;
                    return self.change(MachineState::SlowingDown, since, rpm);
                }
                // Hysteresis on speed between slow roll and steady: 10 % either way of the limit.
                let limit = self.cfg.slow_roll_max_rpm;
                match self.state {
                    MachineState::SlowRoll if rpm > 1.1 * limit => {
                        self.change(MachineState::Steady, time_s, rpm)
                    }
                    MachineState::Steady if rpm < 0.9 * limit => {
                        self.change(MachineState::SlowRoll, time_s, rpm)
                    }
                    _ => None,
                }
            }
            MachineState::SpeedingUp | MachineState::SlowingDown => {
                let up = self.state == MachineState::SpeedingUp;
                let signed = if up { self.slope } else { -self.slope };
                if signed < -enter {
                    // Reversal without a pause: the sweep ends and the opposite one begins.
                    self.calm_since = None;
                    let to = if up {
                        MachineState::SlowingDown
                    } else {
                        MachineState::SpeedingUp
                    };
                    return self.change(to, window_start, rpm);
                }
                if signed < exit {
                    let since = *self.calm_since.get_or_insert(time_s);
                    if time_s - since >= self.cfg.hold_s {
                        self.calm_since = None;
                        self.settled = Some((rpm, time_s));
                        self.near_settled = time_s;
                        return self.change(settled, since, rpm);
                    }
                } else {
                    self.calm_since = None;
                }
                None
            }
        }
    }
}

impl StateTracker {
    /// Moves the settled speed toward `rpm` with the settling time constant and returns it.
    fn follow_settled(&mut self, time_s: f64, rpm: f64) -> f64 {
        let (reference, since) = self.settled.unwrap_or((rpm, time_s));
        let dt = (time_s - since).max(0.0);
        let k = 1.0 - (-dt / self.cfg.settle_tau_s).exp();
        let next = reference + k * (rpm - reference);
        self.settled = Some((next, time_s));
        // The comparison uses the value before this revolution pulled it along.
        reference
    }
}

/// Least-squares slope of speed against time, r/min per second.
fn fit_slope(points: &VecDeque<(f64, f64)>) -> f64 {
    let n = points.len() as f64;
    let (t0, _) = points[0];
    let (mut st, mut sv) = (0.0, 0.0);
    for &(t, v) in points {
        st += t - t0;
        sv += v;
    }
    let (mt, mv) = (st / n, sv / n);
    let (mut num, mut den) = (0.0, 0.0);
    for &(t, v) in points {
        let dt = t - t0 - mt;
        num += dt * (v - mv);
        den += dt * dt;
    }
    if den > 0.0 {
        num / den
    } else {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Feeds a speed profile sampled every revolution and returns the state changes.
    fn run(profile: impl Fn(f64) -> f64, secs: f64) -> Vec<StateChange> {
        let mut st = StateTracker::new(&StateConfig::default()).expect("valid");
        let mut changes = Vec::new();
        let mut t = 0.0;
        while t < secs {
            let rpm = profile(t);
            if rpm <= 0.0 {
                changes.extend(st.stopped(t));
                t += 0.1;
                continue;
            }
            changes.extend(st.update(t, rpm));
            t += 60.0 / rpm;
        }
        changes
    }

    #[test]
    fn run_up_hold_coast_down() {
        // Slow roll 300 rpm for 20 s, up at 50 rpm/s to 3000, hold 60 s, down at 30 rpm/s.
        let profile = |t: f64| {
            if t < 20.0 {
                300.0
            } else if t < 74.0 {
                300.0 + 50.0 * (t - 20.0)
            } else if t < 134.0 {
                3000.0
            } else {
                (3000.0 - 30.0 * (t - 134.0)).max(0.0)
            }
        };
        let ch = run(profile, 250.0);
        let states: Vec<_> = ch.iter().map(|c| c.to).collect();
        assert_eq!(
            states,
            vec![
                MachineState::SlowRoll,
                MachineState::SpeedingUp,
                MachineState::Steady,
                MachineState::SlowingDown,
                MachineState::Stopped
            ],
            "{ch:?}"
        );
        // The sweep is dated from the start of the window that revealed it (within the window).
        assert!((ch[1].time_s - 20.0).abs() < 2.0, "{}", ch[1].time_s);
        assert!((ch[2].time_s - 74.0).abs() < 2.5, "{}", ch[2].time_s);
        assert!((ch[3].time_s - 134.0).abs() < 2.0, "{}", ch[3].time_s);
    }

    #[test]
    fn wander_at_steady_speed_is_not_a_sweep() {
        // ±0.5 % sinusoidal wander over a minute and per-revolution jitter stay steady.
        let profile = |t: f64| {
            1450.0 * (1.0 + 0.005 * (t * std::f64::consts::TAU / 60.0).sin())
                + 0.7 * (t * 37.0).sin()
        };
        let ch = run(profile, 600.0);
        assert_eq!(ch.len(), 1, "{ch:?}");
        assert_eq!(ch[0].to, MachineState::Steady);
    }

    #[test]
    fn slow_coast_down_of_a_large_rotor_is_a_sweep() {
        // 3000 rpm held for a minute, then coasting at 2 rpm/s (about 0.07 %/s at the top).
        let profile = |t: f64| {
            if t < 60.0 {
                3000.0
            } else {
                3000.0 - 2.0 * (t - 60.0)
            }
        };
        let ch = run(profile, 1000.0);
        let down = ch
            .iter()
            .find(|c| c.to == MachineState::SlowingDown)
            .expect("coast-down found");
        assert!(
            down.speed_rpm > 2700.0,
            "found late, at {} rpm",
            down.speed_rpm
        );
        // Dated from the last revolution near the settled speed: within the 30 s it takes to move 2 %.
        assert!(
            down.time_s > 55.0 && down.time_s < 95.0,
            "dated {}",
            down.time_s
        );
    }

    #[test]
    fn bad_settings_name_the_field() {
        let cfg = StateConfig {
            sweep_exit_pct_s: 1.0,
            ..StateConfig::default()
        };
        let err = cfg.validate().expect_err("exit above enter");
        assert!(err.to_string().contains("sweep_exit_pct_s"));
    }
}
