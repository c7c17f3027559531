//! The speed profile of a simulated recording and the exact shaft angle it implies.

use super::SimError;

/// A speed profile: breakpoints `(time_s, rpm)`, speed linear in time between them.
///
/// Piecewise-linear speed is what run-ups and coast-downs at constant acceleration look like, and it
/// keeps the shaft angle a closed form (a quadratic per segment), so the simulator knows the exact
/// angle of every sample and every tach tooth. The first breakpoint is at t = 0; after the last one
/// the speed is held. Speeds are in r/min and never negative (the shaft does not reverse).
#[derive(Clone, Debug, PartialEq)]
pub struct SpeedProfile {
    /// Breakpoints `(time_s, rpm)`, time strictly increasing from 0.
    pub points: Vec<(f64, f64)>,
}

impl Default for SpeedProfile {
    /// A one-minute run-up from slow roll (300 r/min) to 3 600 r/min.
    fn default() -> Self {
        Self::ramp(300.0, 3600.0, 60.0)
    }
}

impl SpeedProfile {
    /// A profile from breakpoints, validated.
    pub fn new(points: Vec<(f64, f64)>) -> Result<Self, SimError> {
        let p = Self { points };
        p.validate()?;
        Ok(p)
    }

    /// Constant speed for `duration_s`.
    pub fn constant(rpm: f64, duration_s: f64) -> Self {
        Self {
            points: vec![(0.0, rpm), (duration_s, rpm)],
        }
    }

    /// A linear ramp (run-up if `end_rpm > start_rpm`, coast-down otherwise) over `duration_s`.
    pub fn ramp(start_rpm: f64, end_rpm: f64, duration_s: f64) -> Self {
        Self {
            points: vec![(0.0, start_rpm), (duration_s, end_rpm)],
        }
    }

    /// A run-up over `ramp_s` followed by `hold_s` at the end speed: the usual start of a machine.
    pub fn run_up_and_hold(start_rpm: f64, end_rpm: f64, ramp_s: f64, hold_s: f64) -> Self {
        Self::ramp(start_rpm, end_rpm, ramp_s).then_hold(hold_s)
    }

    /// Slow roll at `low_rpm`, a run-up to `high_rpm`, a hold, a coast-down back to `low_rpm` and a
    /// final slow roll: one of each event the tracker has to find, in one recording.
    pub fn run_up_hold_coast_down(
        low_rpm: f64,
        high_rpm: f64,
        slow_roll_s: f64,
        ramp_s: f64,
        hold_s: f64,
        coast_s: f64,
    ) -> Self {
        Self::constant(low_rpm, slow_roll_s)
            .then_ramp_to(high_rpm, ramp_s)
            .then_hold(hold_s)
            .then_ramp_to(low_rpm, coast_s)
            .then_hold(slow_roll_s)
    }

    /// This profile followed by `secs` at its last speed.
    pub fn then_hold(self, secs: f64) -> Self {
        let rpm = self.points.last().map_or(0.0, |p| p.1);
        self.then_ramp_to(rpm, secs)
    }

    /// This profile followed by a linear ramp to `rpm` over `secs`.
    pub fn then_ramp_to(mut self, rpm: f64, secs: f64) -> Self {
        let t = self.points.last().map_or(0.0, |p| p.0);
        if self.points.is_empty() {
            self.points.push((0.0, rpm));
        }
        self.points.push((t + secs, rpm));
        self
    }

    /// Checks the breakpoints; the error names the bad one.
    pub fn validate(&self) -> Result<(), SimError> {
        self.validate_as("points")
    }

    pub(crate) fn validate_as(&self, field: &str) -> Result<(), SimError> {
        if self.points.len() < 2 {
            return Err(SimError::invalid(field, "needs at least two breakpoints"));
        }
        for (i, &(t, rpm)) in self.points.iter().enumerate() {
            if !t.is_finite() {
                return Err(SimError::invalid(
                    format!("{field}[{i}].time_s"),
                    "must be finite",
                ));
            }
            if !(rpm.is_finite() && rpm >= 0.0) {
                return Err(SimError::invalid(
                    format!("{field}[{i}].rpm"),
                    "must be finite and not negative",
                ));
            }
            if i == 0 && t != 0.0 {
                return Err(SimError::invalid(format!("{field}[0].time_s"), "must be 0"));
            }
            if i > 0 && t <= self.points[i - 1].0 {
                return Err(SimError::invalid(
                    format!("{field}[{i}].time_s"),
                    "must be greater than the previous breakpoint's",
                ));
            }
        }
        Ok(())
    }

    /// Speed at time `t`, r/min; held at the end values outside the profile.
    pub fn rpm_at(&self, t: f64) -> f64 {
        let pts = &self.points;
        let (Some(first), Some(last)) = (pts.first(), pts.last()) else {
            return 0.0;
        };
        if t <= first.0 {
            return first.1;
        }
        if t >= last.0 {
            return last.1;
        }
        // Clamped so that even unsorted (unvalidated) breakpoints cannot index out of range.
        let i = pts.partition_point(|p| p.0 <= t).clamp(1, pts.len() - 1);
        let (t0, r0) = pts[i - 1];
        let (t1, r1) = pts[i];
        r0 + (r1 - r0) * (t - t0) / (t1 - t0)
    }

    /// Length of the profile, s (time of the last breakpoint).
    pub fn duration_s(&self) -> f64 {
        self.points.last().map_or(0.0, |p| p.0)
    }

    /// Highest speed reached, r/min.
    pub fn max_rpm(&self) -> f64 {
        self.points.iter().map(|p| p.1).fold(0.0, f64::max)
    }

    /// Shaft turns since t = 0, exact (the integral of speed, a quadratic per segment).
    pub fn turns_at(&self, t: f64) -> f64 {
        Segments::new(self).turns_at(t)
    }
}

/// One segment of constant acceleration, in turns and seconds.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Segment {
    /// Start time, s.
    pub t0: f64,
    /// End time, s (infinite for the held tail).
    pub t1: f64,
    /// Speed at `t0`, turns per second.
    pub f0: f64,
    /// Acceleration, turns per second squared.
    pub a: f64,
    /// Turns completed at `t0`.
    pub n0: f64,
}

impl Segment {
    /// Turns completed at `t`.
    #[inline]
    pub fn turns_at(&self, t: f64) -> f64 {
        let tau = t - self.t0;
        self.n0 + tau * (self.f0 + 0.5 * self.a * tau)
    }

    /// Speed at `t`, turns per second.
    #[inline]
    pub fn speed_at(&self, t: f64) -> f64 {
        self.f0 + self.a * (t - self.t0)
    }

    /// Turns completed over the whole segment (infinite for a moving tail).
    fn turns_span(&self) -> f64 {
        if self.t1.is_finite() {
            let tau = self.t1 - self.t0;
            tau * (self.f0 + 0.5 * self.a * tau)
        } else if self.f0 > 0.0 {
            f64::INFINITY
        } else {
            0.0
        }
    }
}

/// The profile as segments with their cumulative turns, for exact angle and its inverse.
#[derive(Clone, Debug)]
pub(crate) struct Segments {
    pub segs: Vec<Segment>,
}

impl Segments {
    /// Segments of a validated profile, plus a held tail after the last breakpoint.
    pub fn new(p: &SpeedProfile) -> Self {
        let mut segs = Vec::with_capacity(p.points.len());
        let mut n0 = 0.0;
        for w in p.points.windows(2) {
            let (t0, r0) = w[0];
            let (t1, r1) = w[1];
            let f0 = r0 / 60.0;
            let a = (r1 - r0) / 60.0 / (t1 - t0);
            let seg = Segment { t0, t1, f0, a, n0 };
            n0 += seg.turns_span();
            segs.push(seg);
        }
        let (t_end, r_end) = p.points.last().copied().unwrap_or((0.0, 0.0));
        segs.push(Segment {
            t0: t_end,
            t1: f64::INFINITY,
            f0: r_end / 60.0,
            a: 0.0,
            n0,
        });
        Self { segs }
    }

    /// Index of the segment holding `t` (the first one for t < 0).
    #[inline]
    pub fn index_at(&self, t: f64) -> usize {
        self.segs
            .partition_point(|s| s.t1 <= t)
            .min(self.segs.len() - 1)
    }

    /// Turns completed at `t`.
    pub fn turns_at(&self, t: f64) -> f64 {
        self.segs[self.index_at(t)].turns_at(t)
    }

    /// The first time the shaft has completed `target` turns, searching forward from segment `*hint`
    /// (updated, so monotone targets cost O(1) each). `None` if the shaft stops before.
    pub fn time_at_turns(&self, target: f64, hint: &mut usize) -> Option<f64> {
        let mut i = (*hint).min(self.segs.len() - 1);
        // Back to the first segment that ends at or after the target (the first time it is reached).
        while i > 0 && self.segs[i - 1].n0 + self.segs[i - 1].turns_span() >= target {
            i -= 1;
        }
        loop {
            let seg = &self.segs[i];
            if target <= seg.n0 + seg.turns_span() {
                *hint = i;
                let d = (target - seg.n0).max(0.0);
                if d == 0.0 {
                    return Some(seg.t0);
                }
                // Solve f0 τ + a τ²/2 = d for the first τ ≥ 0, in the form free of cancellation.
                let disc = (seg.f0 * seg.f0 + 2.0 * seg.a * d).max(0.0);
                let den = seg.f0 + disc.sqrt();
                if den <= 0.0 {
                    return None;
                }
                return Some(seg.t0 + 2.0 * d / den);
            }
            if i + 1 == self.segs.len() {
                return None;
            }
            i += 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rpm_is_piecewise_linear_and_held() {
        let p = SpeedProfile::run_up_and_hold(600.0, 3000.0, 4.0, 2.0);
        assert_eq!(p.points, vec![(0.0, 600.0), (4.0, 3000.0), (6.0, 3000.0)]);
        assert!((p.rpm_at(1.0) - 1200.0).abs() < 1e-9);
        assert_eq!(p.rpm_at(-1.0), 600.0);
        assert_eq!(p.rpm_at(5.0), 3000.0);
        assert_eq!(p.rpm_at(60.0), 3000.0);
        assert_eq!(p.duration_s(), 6.0);
        assert_eq!(p.max_rpm(), 3000.0);
    }

    #[test]
    fn turns_equal_the_integral_of_speed() {
        // Independent check: composite Simpson's rule on rpm_at/60 (exact for a piecewise-linear
        // integrand when every breakpoint is a node; common practice).
        let p = SpeedProfile::run_up_hold_coast_down(300.0, 3600.0, 1.0, 3.0, 1.5, 2.5);
        let segs = Segments::new(&p);
        let mut acc = 0.0;
        let mut t_prev = 0.0;
        for &(t, _) in p.points.iter().skip(1) {
            let n = 64;
            let h = (t - t_prev) / n as f64;
            let mut s = p.rpm_at(t_prev) + p.rpm_at(t);
            for k in 1..n {
                let w = if k % 2 == 1 { 4.0 } else { 2.0 };
                s += w * p.rpm_at(t_prev + k as f64 * h);
            }
            acc += s * h / 3.0 / 60.0;
            assert!(
                (segs.turns_at(t) - acc).abs() < 1e-9 * acc.max(1.0),
                "t = {t}"
            );
            t_prev = t;
        }
        assert!((p.turns_at(9.0) - acc).abs() < 1e-9 * acc);
    }

    #[test]
    fn inverse_angle_round_trips_including_a_stop() {
        // A coast-down to standstill: turns beyond the final angle are never reached.
        let p = SpeedProfile::new(vec![(0.0, 1200.0), (2.0, 0.0), (3.0, 0.0)]).expect("valid");
        let segs = Segments::new(&p);
        let total = segs.turns_at(10.0);
        assert!(
            (total - 20.0).abs() < 1e-12,
            "20 r/s over 2 s, stopping: {total}"
        );
        let mut hint = 0;
        for k in 0..200 {
            let target = k as f64 * 0.1;
            let t = segs.time_at_turns(target, &mut hint).expect("reached");
            assert!((segs.turns_at(t) - target).abs() < 1e-9, "target {target}");
        }
        assert!(segs.time_at_turns(20.0 + 1e-6, &mut hint).is_none());
    }

    #[test]
    fn validation_names_the_bad_breakpoint() {
        let e = SpeedProfile::new(vec![(0.0, 100.0), (1.0, 200.0), (1.0, 300.0)])
            .expect_err("times repeat");
        assert_eq!(e.field(), "points[2].time_s");
        let e = SpeedProfile::new(vec![(0.0, 100.0), (1.0, -5.0)]).expect_err("negative");
        assert_eq!(e.field(), "points[1].rpm");
        let e = SpeedProfile::new(vec![(0.5, 100.0), (1.0, 5.0)]).expect_err("late start");
        assert_eq!(e.field(), "points[0].time_s");
        assert!(SpeedProfile::new(vec![(0.0, 1.0)]).is_err());
    }
}
