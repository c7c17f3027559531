//! Slow changes a mode undergoes during a recording: a drifting natural speed and a heavy-spot step.
//!
//! Both are scheduled by absolute frame index only (never by where a block of output starts), so
//! the samples stay the same however the caller cuts the stream into blocks.
//!
//! # Drifting natural speed
//!
//! The modal equation with a time-varying `ω_n(t)` is replaced by one whose `ω_n` is constant over
//! intervals of `interval` frames and takes, on each, the exact value at the interval's midpoint;
//! at each interval boundary the exact integrator is rebuilt and the state (displacement,
//! velocity, forcing) is carried over. The stepped `ω_n` then departs from the true one by at most
//! half an interval's change, with zero mean over each interval, so the 1X response is off only to
//! second order in that departure; its first-order effect is a ripple at the interval rate, away
//! from 1X. Intervals are chosen so that `ω_n` moves by at most [`REBUILD_REL`] relative between
//! rebuilds, but never shorter than [`MIN_INTERVAL`] frames (one rebuild, a 4×4 matrix
//! exponential, costs about as much as a few hundred samples of stepping) nor longer than
//! [`MAX_INTERVAL_S`].

use std::f64::consts::TAU;

use super::config::SimMode;
use super::sdof::Sdof;

/// Largest relative move of the natural speed between two rebuilds of a mode's integrator, when
/// [`MIN_INTERVAL`] allows.
const REBUILD_REL: f64 = 1e-4;
/// Fewest frames between rebuilds, so their cost is amortised over many samples.
const MIN_INTERVAL: u64 = 256;
/// Longest time between rebuilds, s.
const MAX_INTERVAL_S: f64 = 0.25;

/// A natural speed moving linearly in time, and the rebuild interval that follows it.
#[derive(Clone, Debug)]
struct Drift {
    mode: SimMode,
    duration_s: f64,
    dt: f64,
    /// Frames per interval of constant natural speed.
    interval: u64,
}

impl Drift {
    /// The drift of `mode` over a recording of `total` frames lasting `duration_s`, or `None` if
    /// its natural speed does not move.
    fn new(mode: &SimMode, duration_s: f64, dt: f64, total: u64) -> Option<Self> {
        let end = mode.natural_rpm_end?;
        let start = mode.natural_rpm;
        if end == start || total == 0 {
            return None;
        }
        let rel = (end - start).abs() / start.min(end);
        let pieces = (rel / REBUILD_REL).ceil().max(1.0);
        let wanted = (total as f64 / pieces).ceil();
        let longest = (MAX_INTERVAL_S / dt).floor().max(1.0);
        let interval = wanted.min(longest).max(MIN_INTERVAL as f64) as u64;
        Some(Self {
            mode: mode.clone(),
            duration_s,
            dt,
            interval,
        })
    }

    /// The integrator for interval `k` (frames `k·interval .. (k+1)·interval`), at rest: natural
    /// speed taken at the interval's midpoint. `None` only for settings `SimConfig::validate`
    /// rejects (a natural speed that is not positive).
    fn sdof(&self, k: u64) -> Option<Sdof> {
        let t_mid = (k as f64 + 0.5) * self.interval as f64 * self.dt;
        let rpm = self.mode.natural_rpm_at(t_mid, self.duration_s);
        Sdof::new(rpm * TAU / 60.0, self.mode.damping_ratio, self.dt).ok()
    }
}

/// What has to happen to one mode, and at which frame.
#[derive(Clone, Debug)]
pub(super) struct Changes {
    drift: Option<Drift>,
    /// Frames in the recording; no change is scheduled at or after it.
    total: u64,
    /// Frame at which the next step starts with a rebuilt integrator; `u64::MAX` if none.
    next_rebuild: u64,
    /// Frame at which the step starts whose end sample first sees the turned heavy spot;
    /// `u64::MAX` if none is to come.
    turn_at: u64,
    /// Turned heavy spot plus probe angle, radians.
    turned_rad: f64,
    /// The earliest of the above.
    next: u64,
}

/// What [`Changes::due`] asks the caller to do before the step starting at the frame it was given.
#[derive(Clone, Debug)]
pub(super) struct Due {
    /// Replace the integrator by this one, carrying the state over.
    pub rebuild: Option<Sdof>,
    /// Switch the unbalance angle (heavy spot plus probe angle) to this many radians, after the
    /// rebuild (whose carried forcing is that of the current frame, still at the old angle).
    pub turn_rad: Option<f64>,
}

impl Changes {
    /// The changes of `mode` seen by a probe at `probe_angle_deg`, over a recording of `total`
    /// frames at `sample_rate` lasting `duration_s`. Returns them with the integrator to start
    /// with if the natural speed drifts (the first interval's) and the unbalance angle (heavy spot
    /// plus probe angle) in force at frame 0, radians.
    pub(super) fn new(
        mode: &SimMode,
        probe_angle_deg: f64,
        duration_s: f64,
        sample_rate: f64,
        total: u64,
    ) -> (Self, Option<Sdof>, f64) {
        let dt = 1.0 / sample_rate;
        let drift = Drift::new(mode, duration_s, dt, total);
        let first = drift.as_ref().and_then(|d| d.sdof(0));
        let next_rebuild = match &drift {
            Some(d) if d.interval < total => d.interval,
            _ => u64::MAX,
        };
        let base_rad = (mode.heavy_spot_deg + probe_angle_deg).to_radians();
        let (mut start_rad, mut turn_at, mut turned_rad) = (base_rad, u64::MAX, base_rad);
        if let Some((at_s, turn_deg)) = mode.heavy_spot_step {
            turned_rad = (mode.heavy_spot_deg + turn_deg + probe_angle_deg).to_radians();
            // The first sample at or after the step's time sees the turned heavy spot; the
            // first-order hold spreads the change over the interval before it.
            let first_turned = (at_s * sample_rate).ceil();
            if first_turned <= 0.0 {
                start_rad = turned_rad;
            } else if first_turned <= total as f64 {
                turn_at = first_turned as u64 - 1;
            }
        }
        let mut c = Self {
            drift,
            total,
            next_rebuild,
            turn_at,
            turned_rad,
            next: 0,
        };
        c.next = c.next_rebuild.min(c.turn_at);
        (c, first, start_rad)
    }

    /// First frame at which [`Self::due`] has something to do; `u64::MAX` if nothing is to come.
    #[inline]
    pub(super) fn next(&self) -> u64 {
        self.next
    }

    /// The changes due before the step that starts at frame `n`, which must be [`Self::next`].
    pub(super) fn due(&mut self, n: u64) -> Due {
        let mut due = Due {
            rebuild: None,
            turn_rad: None,
        };
        if n == self.next_rebuild {
            if let Some(d) = &self.drift {
                due.rebuild = d.sdof(n / d.interval);
                let after = n.saturating_add(d.interval);
                self.next_rebuild = if after < self.total { after } else { u64::MAX };
            } else {
                self.next_rebuild = u64::MAX;
            }
        }
        if n == self.turn_at {
            due.turn_rad = Some(self.turned_rad);
            self.turn_at = u64::MAX;
        }
        self.next = self.next_rebuild.min(self.turn_at);
        due
    }
}
