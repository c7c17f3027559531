//! Shaft angle and speed from tach pulses: teeth grouped into revolutions, missing and extra pulses
//! repaired, and a smooth angle model fitted inside each revolution.
//!
//! Repair works on the ratio of each pulse interval to the expected tooth interval, which is
//! tracked from the last good one (speed changes little from one tooth to the next even on a fast
//! run-up): a ratio near 1 is a normal tooth, near k > 1 means k − 1 pulses were missed (or the
//! wheel's deliberate gap), and well below 1 an extra pulse (noise on the tach line) that is dropped.
//! Intervals outside the plausible speed window mean the tach was lost; the angle is re-synchronised
//! from the next good pulses rather than guessed across the loss.

use crate::tach::TachConfig;
use crate::types::Revolution;

/// Counts of what the pulse repair did, for sensor-health reporting.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct PulseStats {
    /// Pulses accepted as teeth.
    pub pulses: u64,
    /// Missing pulses filled in (not counting a wheel's deliberate gap).
    pub inserted: u64,
    /// Extra pulses dropped.
    pub dropped: u64,
    /// Times the reference gap of a toothed wheel turned up where it was not expected.
    pub resyncs: u64,
    /// Times the tach was lost (no plausible pulse for too long).
    pub losses: u64,
}

/// Interval ratios within this distance of a whole number are taken as that many teeth.
const RATIO_TOLERANCE: f64 = 0.3;
/// At most this many consecutive missing pulses are filled in; a longer silence is a loss.
const MAX_FILL: u64 = 3;
/// Consecutive dropped pulses after which the expected interval is no longer trusted.
const MAX_DROPS: u32 = 4;

/// Turns tach edge times into revolutions.
#[derive(Clone, Debug)]
pub struct AngleTracker {
    ppr: u32,
    gap_teeth: u32,
    dt_min: f64,
    dt_max: f64,
    last: Option<f64>,
    tooth_dt: Option<f64>,
    /// Tooth position (0 = reference) of the last pulse, once synchronised.
    position: Option<u32>,
    /// Time of the last reference (tooth 0), if the angle has been continuous since.
    last_ref: Option<f64>,
    /// Period of the revolution before the current one, for the three-pulse angle model (ppr = 1).
    prev_period: Option<f64>,
    /// Real (not filled-in) teeth of the revolution in progress: position and time.
    teeth: Vec<(u32, f64)>,
    drops_in_row: u32,
    next_index: u64,
    stats: PulseStats,
}

impl AngleTracker {
    /// A tracker for the wheel and speed window described by `cfg` (validated by the caller).
    pub fn new(cfg: &TachConfig) -> Self {
        let ppr = cfg.ppr.max(1);
        Self {
            ppr,
            gap_teeth: cfg.gap_teeth,
            dt_min: 60.0 / (cfg.max_rpm * f64::from(ppr)),
            dt_max: 60.0 / (cfg.min_rpm * f64::from(ppr)),
            last: None,
            tooth_dt: None,
            position: None,
            last_ref: None,
            prev_period: None,
            teeth: Vec::with_capacity(ppr as usize + 1),
            drops_in_row: 0,
            next_index: 0,
            stats: PulseStats::default(),
        }
    }

    /// What the repair has done so far.
    pub fn stats(&self) -> PulseStats {
        self.stats
    }

    /// Instantaneous speed from the last tooth interval, r/min, while the angle is tracked.
    pub fn speed_rpm(&self) -> Option<f64> {
        match (self.position, self.tooth_dt) {
            (Some(_), Some(dt)) => Some(60.0 / (dt * f64::from(self.ppr))),
            _ => None,
        }
    }

    /// Whether the tracker currently follows the shaft (synchronised and not lost).
    pub fn is_tracking(&self) -> bool {
        self.last_ref.is_some()
    }

    /// Longest silence that is still a plausible tooth interval (including a wheel's gap), s.
    pub fn max_silence(&self) -> f64 {
        self.dt_max * f64::from(self.gap_teeth + 1).max(MAX_FILL as f64 + 1.0)
    }

    /// Tells the tracker that no pulse arrived up to time `now`: past the longest plausible silence
    /// the tach is declared lost. Returns true when this call declared the loss.
    pub fn note_time(&mut self, now: f64) -> bool {
        match self.last {
            Some(last) if now - last > self.max_silence() && self.tooth_dt.is_some() => {
                self.lose(None);
                true
            }
            _ => false,
        }
    }

    fn lose(&mut self, restart_at: Option<f64>) {
        if self.last_ref.is_some() || self.position.is_some() {
            self.stats.losses += 1;
        }
        self.last = restart_at;
        self.tooth_dt = None;
        self.position = None;
        self.last_ref = None;
        self.prev_period = None;
        self.teeth.clear();
        self.drops_in_row = 0;
    }

    /// Feeds edge times (increasing) and appends every revolution they complete to `revs`.
    pub fn push_edges(&mut self, edges: &[f64], revs: &mut Vec<Revolution>) {
        for &t in edges {
            self.push_edge(t, revs);
        }
    }

    fn push_edge(&mut self, t: f64, revs: &mut Vec<Revolution>) {
        let Some(last) = self.last else {
            self.last = Some(t);
            return;
        };
        let d = t - last;
        if !(d > 0.5 * self.dt_min) {
            // Faster than any plausible speed: a glitch on the tach line.
            self.drop_pulse(t);
            return;
        }
        let Some(dt) = self.tooth_dt else {
            // Second pulse after a (re)start: the first interval sets the expected spacing, provided
            // it is plausible. A toothed wheel's gap can spoil it; the ratio test below corrects that
            // within a revolution because the next ordinary tooth reads as a ratio near 1/(gap+1).
            if d <= self.dt_max {
                self.tooth_dt = Some(d);
                self.stats.pulses += 1;
                self.start_position(t);
            }
            self.last = Some(t);
            return;
        };
        let ratio = d / dt;
        if ratio < 1.0 - RATIO_TOLERANCE * 1.5 {
            if self.gap_teeth > 0 && self.position.is_none() && ratio > 0.2 {
                // Unsynchronised and the first interval was a gap: adopt the shorter spacing.
                self.tooth_dt = Some(d);
                self.last = Some(t);
                self.stats.pulses += 1;
                return;
            }
            self.drop_pulse(t);
            return;
        }
        self.drops_in_row = 0;
        let k = ratio.round().max(1.0);
        let off = (ratio - k).abs();
        let gap_step = u64::from(self.gap_teeth) + 1;
        let k_int = k as u64;
        if d > self.dt_max * k || k_int > MAX_FILL.max(gap_step) + 1 || off > RATIO_TOLERANCE * k {
            // Too slow, too long a silence, or an interval that fits no whole number of teeth.
            self.lose(Some(t));
            return;
        }
        self.stats.pulses += 1;
        self.tooth_dt = Some(d / k);
        self.last = Some(t);
        if self.gap_teeth > 0 {
            self.advance_gap_wheel(last, t, k_int, revs);
        } else {
            self.advance(last, t, k_int, revs);
        }
    }

    fn drop_pulse(&mut self, _t: f64) {
        self.stats.dropped += 1;
        self.drops_in_row += 1;
        if self.drops_in_row > MAX_DROPS {
            // The expected spacing is no longer believable (e.g. the speed changed during a loss).
            let restart = self.last;
            self.lose(restart);
        }
    }

    fn start_position(&mut self, t: f64) {
        if self.gap_teeth == 0 {
            // No mark on the wheel: the first tooth seen is the reference.
            self.position = Some(0);
            self.last_ref = Some(t);
            self.teeth.clear();
            self.teeth.push((0, t));
        }
    }

    /// Steps `k` teeth from the pulse at `last` to the one at `t` on a wheel without a gap.
    fn advance(&mut self, last: f64, t: f64, k: u64, revs: &mut Vec<Revolution>) {
        if k > 1 {
            self.stats.inserted += k - 1;
        }
        let Some(mut pos) = self.position else {
            self.start_position(t);
            return;
        };
        for j in 1..=k {
            pos = (pos + 1) % self.ppr;
            let tj = last + (t - last) * j as f64 / k as f64;
            if pos == 0 {
                self.complete_revolution(tj, revs);
            }
            if j == k {
                self.teeth.push((pos, tj));
            }
        }
        self.position = Some(pos);
    }

    /// Steps a wheel with a reference gap: the pulse after the gap is tooth 0.
    fn advance_gap_wheel(&mut self, last: f64, t: f64, k: u64, revs: &mut Vec<Revolution>) {
        let gap_step = u64::from(self.gap_teeth) + 1;
        let teeth_on_wheel = self.ppr;
        match self.position {
            None => {
                if k == gap_step {
                    // First sight of the gap: synchronise.
                    self.position = Some(0);
                    self.last_ref = Some(t);
                    self.teeth.clear();
                    self.teeth.push((0, t));
                }
            }
            Some(pos) => {
                let expected_gap = u64::from(pos) + gap_step == u64::from(teeth_on_wheel);
                if k == gap_step && expected_gap {
                    self.complete_revolution(t, revs);
                    self.teeth.push((0, t));
                    self.position = Some(0);
                } else if expected_gap && k == 1 {
                    // No gap where it belongs: the count slipped.
                    self.stats.resyncs += 1;
                    self.position = None;
                    self.last_ref = None;
                    self.prev_period = None;
                    self.teeth.clear();
                } else {
                    // Ordinary teeth, or a silence as long as the gap where none belongs: a broken
                    // tooth reads exactly like the mark, so it is taken as a dropout unless it comes
                    // too late in the turn for one.
                    let new_pos = u64::from(pos) + k;
                    if new_pos + u64::from(self.gap_teeth) > u64::from(teeth_on_wheel) {
                        self.stats.resyncs += 1;
                        if k == gap_step {
                            // A gap where the count cannot place a dropout: the count slipped, and
                            // this gap is taken as the mark.
                            self.position = Some(0);
                            self.last_ref = Some(t);
                            self.prev_period = None;
                            self.teeth.clear();
                            self.teeth.push((0, t));
                        } else {
                            // The dropout would run through the gap: we cannot tell where we are.
                            self.lose(Some(t));
                        }
                        return;
                    }
                    if k > 1 {
                        self.stats.inserted += k - 1;
                    }
                    let p = new_pos as u32;
                    self.teeth.push((p, t));
                    self.position = Some(p);
                }
                let _ = last;
            }
        }
    }

    /// Closes the revolution that ends with the reference at `t_ref`.
    fn complete_revolution(&mut self, t_ref: f64, revs: &mut Vec<Revolution>) {
        if let Some(t0) = self.last_ref {
            let period = t_ref - t0;
            if period > 0.0 {
                let rev = self.angle_model(t0, t_ref);
                self.prev_period = Some(period);
                revs.push(rev);
                self.next_index += 1;
            }
        }
        self.last_ref = Some(t_ref);
        self.teeth.clear();
    }

    /// The quadratic angle model of the revolution from `t0` to `t1`.
    fn angle_model(&self, t0: f64, t1: f64) -> Revolution {
        let period = t1 - t0;
        let mut rev = Revolution::uniform(self.next_index, t0, t1);
        let c2 = if self.ppr == 1 {
            // Quadratic through three consecutive reference pulses (Fyfe & Munck 1997): angles −1, 0, 1
            // turn at t0 − P, t0, t1 give c2 = (P − T)/(T·P·(T + P)). Monotone while T/P < 1 + √2;
            // beyond a ratio of 2 the previous revolution says little, so stay uniform.
            match self.prev_period {
                Some(p) if (0.5..=2.0).contains(&(p / period)) => {
                    (p - period) / (period * p * (period + p))
                }
                _ => 0.0,
            }
        } else {
            // Least squares over the real teeth inside the revolution, the model held through both
            // references: frac(τ) = τ/T + c2·τ(τ − T).
            let n = f64::from(self.ppr);
            let (mut num, mut den) = (0.0, 0.0);
            for &(pos, tj) in &self.teeth {
                if pos == 0 {
                    continue;
                }
                let tau = tj - t0;
                let g = f64::from(pos) / n - tau / period;
                let h = tau * (tau - period);
                num += g * h;
                den += h * h;
            }
            if den > 0.0 {
                let c2 = num / den;
                // Keep the model monotone: |c2|·T² < 1 keeps the slope positive at both ends.
                let lim = 0.9 / (period * period);
                c2.clamp(-lim, lim)
            } else {
                0.0
            }
        };
        rev.c2 = c2;
        rev.c1 = 1.0 / period - c2 * period;
        rev
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Tooth times of a shaft with constant angular acceleration: angle(t) = f0·t + ½·a·t² turns.
    fn teeth(ppr: u32, f0: f64, a: f64, turns: f64, skip: impl Fn(u64) -> bool) -> Vec<f64> {
        let n = (turns * f64::from(ppr)) as u64;
        (0..n)
            .filter(|&k| !skip(k))
            .map(|k| {
                let theta = k as f64 / f64::from(ppr);
                // Solve f0 t + a t²/2 = θ.
                if a == 0.0 {
                    theta / f0
                } else {
                    (-f0 + (f0 * f0 + 2.0 * a * theta).sqrt()) / a
                }
            })
            .collect()
    }

    fn run(cfg: &TachConfig, edges: &[f64]) -> (Vec<Revolution>, PulseStats) {
        let mut tr = AngleTracker::new(cfg);
        let mut revs = Vec::new();
        tr.push_edges(edges, &mut revs);
        (revs, tr.stats())
    }

    #[test]
    fn once_per_turn_constant_speed() {
        let cfg = TachConfig::default();
        let edges = teeth(1, 25.0, 0.0, 100.0, |_| false);
        let (revs, stats) = run(&cfg, &edges);
        assert_eq!(revs.len(), 98);
        for r in &revs {
            assert!((r.mean_rpm() - 1500.0).abs() < 1e-6);
            assert!(r.c2.abs() < 1e-6);
        }
        assert_eq!(stats.inserted + stats.dropped + stats.losses, 0);
    }

    #[test]
    fn quadratic_model_is_exact_for_constant_acceleration() {
        let cfg = TachConfig::default();
        // 10 rev/s accelerating at 2 rev/s²: the three-pulse quadratic is exact.
        let (f0, a) = (10.0, 2.0);
        let edges = teeth(1, f0, a, 60.0, |_| false);
        let (revs, _) = run(&cfg, &edges);
        for r in revs.iter().skip(1) {
            let tm = r.mid_time();
            let truth_rpm = 60.0 * (f0 + a * tm);
            assert!((r.rpm_at(tm) - truth_rpm).abs() < 1e-6 * truth_rpm);
            assert!((r.c2 - a / 2.0).abs() < 1e-6);
        }
    }

    #[test]
    fn missing_and_extra_once_per_turn_pulses_are_repaired() {
        let cfg = TachConfig::default();
        let mut edges = teeth(1, 20.0, 0.0, 50.0, |k| k == 10 || k == 30);
        // An extra glitch pulse between two real ones.
        edges.push(0.8 + 0.013);
        edges.sort_by(f64::total_cmp);
        let (revs, stats) = run(&cfg, &edges);
        assert_eq!(stats.inserted, 2);
        assert_eq!(stats.dropped, 1);
        assert_eq!(revs.len(), 48);
        for r in &revs {
            assert!((r.mean_rpm() - 1200.0).abs() < 1e-6);
        }
    }

    #[test]
    fn sixty_minus_one_wheel_finds_reference_and_speed() {
        let cfg = TachConfig {
            ppr: 60,
            gap_teeth: 1,
            ..TachConfig::default()
        };
        // Tooth 59 of every revolution is missing: the pulse after the gap is tooth 0.
        let (f0, a) = (30.0, 1.5);
        let edges = teeth(60, f0, a, 40.0, |k| k % 60 == 59);
        let (revs, stats) = run(&cfg, &edges);
        assert_eq!(stats.resyncs, 0);
        assert!(revs.len() >= 37, "{} revolutions", revs.len());
        for r in &revs {
            // Every revolution starts on a whole turn of the true angle.
            let turns = f0 * r.t_start + 0.5 * a * r.t_start * r.t_start;
            assert!((turns - turns.round()).abs() < 1e-9);
            let tm = r.mid_time();
            let truth = 60.0 * (f0 + a * tm);
            assert!((r.rpm_at(tm) - truth).abs() < 1e-3 * truth);
        }
    }

    #[test]
    fn long_silence_is_a_loss_then_resync() {
        let cfg = TachConfig::default();
        let mut edges = teeth(1, 20.0, 0.0, 20.0, |_| false);
        let later: Vec<f64> = teeth(1, 20.0, 0.0, 20.0, |_| false)
            .into_iter()
            .map(|t| t + 100.0)
            .collect();
        edges.extend(later);
        let mut tr = AngleTracker::new(&cfg);
        let mut revs = Vec::new();
        tr.push_edges(&edges, &mut revs);
        assert_eq!(tr.stats().losses, 1);
        // No revolution spans the silence.
        assert!(revs.iter().all(|r| r.period() < 0.06));
        assert!(tr.note_time(1000.0));
        assert!(!tr.is_tracking());
    }
}
