//! Tachometer decoding: from a sampled tach signal to the times of its pulses.
//!
//! A threshold with hysteresis finds each pulse edge; its time is interpolated between the two samples
//! that straddle the trigger level, because the accuracy of computed order tracking is set by the timing
//! accuracy of the reference pulses (Fyfe & Munck, MSSP 11(2), 1997). The levels are learnt from the
//! signal's own envelope unless configured, so the same settings serve a 24 V proximity probe
//! watching a once-per-turn notch and a 5 V optical sensor. Pulses are handed to [`crate::angle`],
//! which groups teeth into revolutions and repairs missing or extra pulses.

use thiserror::Error;

/// Which edge of the tach pulse marks the event.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Edge {
    /// The signal rising through the trigger level (an optical sensor seeing reflective tape).
    Rising,
    /// The signal falling through the trigger level (a proximity probe over a notch reads more negative).
    Falling,
}

/// Fixed trigger levels, for signals whose envelope should not be learnt.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TachLevels {
    /// Level whose crossing (in the direction of the edge) is the pulse; its time is interpolated.
    pub trigger: f32,
    /// Level the signal must return past before the next pulse can fire: the hysteresis.
    pub rearm: f32,
}

/// Settings of the tach decoder.
#[derive(Clone, Debug, PartialEq)]
pub struct TachConfig {
    /// Pulses per revolution: 1 for a once-per-turn mark, N for a toothed wheel (tooth positions,
    /// counting any teeth left out of the wheel on purpose).
    pub ppr: u32,
    /// Teeth left out of the wheel on purpose to mark the reference (0 when there is no gap; 1 or 2 for
    /// the common 60-1 and 60-2 wheels). The first tooth after the gap is the reference.
    pub gap_teeth: u32,
    /// The edge that counts.
    pub edge: Edge,
    /// Fixed levels, or `None` to learn them from the signal's envelope.
    pub levels: Option<TachLevels>,
    /// Hysteresis as a share of the learnt envelope span (trigger at mid-span, rearm this far back).
    pub hysteresis: f32,
    /// Smallest envelope span taken for a signal; below it the tach is considered flat (dead).
    pub min_span: f32,
    /// Lowest plausible shaft speed, r/min; slower pulse spacing is treated as a loss of the tach.
    pub min_rpm: f64,
    /// Highest plausible shaft speed, r/min; closer pulses are treated as extra (noise) pulses.
    pub max_rpm: f64,
}

impl Default for TachConfig {
    fn default() -> Self {
        Self {
            ppr: 1,
            gap_teeth: 0,
            edge: Edge::Rising,
            levels: None,
            hysteresis: 0.2,
            min_span: 1e-6,
            min_rpm: 30.0,
            max_rpm: 60_000.0,
        }
    }
}

/// A tach setting that cannot work.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum TachError {
    /// The named field has a value outside its allowed range.
    #[error("tach setting `{field}`: {reason}")]
    Invalid {
        /// Name of the setting.
        field: &'static str,
        /// Why it was refused.
        reason: String,
    },
}

impl TachConfig {
    /// Checks the settings, naming the first bad one.
    pub fn validate(&self) -> Result<(), TachError> {
        let bad = |field, reason: &str| {
            Err(TachError::Invalid {
                field,
                reason: reason.to_string(),
            })
        };
        if self.ppr == 0 || self.ppr > 4096 {
            return bad("ppr", "must be between 1 and 4096");
        }
        if self.gap_teeth >= self.ppr.max(1) || (self.gap_teeth > 0 && self.ppr < 4) {
            return bad("gap_teeth", "must leave at least 3 teeth on the wheel");
        }
        if !(self.hysteresis > 0.0 && self.hysteresis < 0.5) {
            return bad("hysteresis", "must be between 0 and 0.5 of the span");
        }
        if !(self.min_rpm > 0.0 && self.min_rpm.is_finite()) {
            return bad("min_rpm", "must be a positive speed");
        }
        if !(self.max_rpm > self.min_rpm && self.max_rpm.is_finite()) {
            return bad("max_rpm", "must be above min_rpm");
        }
        if let Some(l) = self.levels {
            if !(l.trigger.is_finite() && l.rearm.is_finite()) || l.trigger == l.rearm {
                return bad("levels", "trigger and rearm must be finite and differ");
            }
        }
        Ok(())
    }
}

/// Learns the signal envelope: a fast attack to new extremes, a slow release so that stretches without
/// a pulse (slow roll with one mark per turn) do not collapse the span.
#[derive(Clone, Debug)]
struct Envelope {
    lo: f32,
    hi: f32,
    primed: bool,
}

impl Envelope {
    /// Share of the way the envelope moves toward a chunk's extremes when they lie inside it.
    const RELEASE: f32 = 0.002;

    fn update(&mut self, chunk_lo: f32, chunk_hi: f32) {
        if !self.primed {
            self.lo = chunk_lo;
            self.hi = chunk_hi;
            self.primed = true;
            return;
        }
        self.hi = if chunk_hi > self.hi {
            chunk_hi
        } else {
            self.hi + (chunk_hi - self.hi) * Self::RELEASE
        };
        self.lo = if chunk_lo < self.lo {
            chunk_lo
        } else {
            self.lo + (chunk_lo - self.lo) * Self::RELEASE
        };
    }
}

/// Streaming tach edge detector. Feed consecutive samples; it returns edge times in seconds.
#[derive(Clone, Debug)]
pub struct TachDecoder {
    edge: Edge,
    fixed: Option<TachLevels>,
    hysteresis: f32,
    min_span: f32,
    env: Envelope,
    sample_rate: f64,
    t0: f64,
    /// Index of the next sample to arrive.
    next_index: u64,
    armed: bool,
    prev: f32,
    have_prev: bool,
    flat_samples: u64,
}

/// Samples per envelope chunk: short enough to follow a changing gap voltage, long enough to be cheap.
const CHUNK: usize = 1024;
/// Samples per group of the edge scan, checked for a possible edge by their extremes first.
const GROUP: usize = 32;

impl TachDecoder {
    /// A decoder for a signal sampled at `sample_rate` Hz whose first sample is at time `t0` s.
    pub fn new(cfg: &TachConfig, sample_rate: f64, t0: f64) -> Result<Self, TachError> {
        cfg.validate()?;
        if !(sample_rate > 0.0 && sample_rate.is_finite()) {
            return Err(TachError::Invalid {
                field: "sample_rate",
                reason: format!("{sample_rate} Hz is not a positive rate"),
            });
        }
        Ok(Self {
            edge: cfg.edge,
            fixed: cfg.levels,
            hysteresis: cfg.hysteresis,
            min_span: cfg.min_span,
            env: Envelope {
                lo: 0.0,
                hi: 0.0,
                primed: false,
            },
            sample_rate,
            t0,
            next_index: 0,
            armed: false,
            prev: 0.0,
            have_prev: false,
            flat_samples: 0,
        })
    }

    /// Time of the sample with overall index `i`, s.
    pub fn time_of(&self, i: u64) -> f64 {
        self.t0 + i as f64 / self.sample_rate
    }

    /// Samples seen so far.
    pub fn samples_seen(&self) -> u64 {
        self.next_index
    }

    /// Consecutive samples, up to now, in which the envelope span stayed below `min_span`.
    pub fn flat_samples(&self) -> u64 {
        self.flat_samples
    }

    /// The current trigger and rearm levels, or `None` while the signal is flat.
    pub fn levels(&self) -> Option<TachLevels> {
        if let Some(l) = self.fixed {
            return Some(l);
        }
        let span = self.env.hi - self.env.lo;
        if !self.env.primed || !(span >= self.min_span) {
            return None;
        }
        let mid = self.env.lo + 0.5 * span;
        let h = self.hysteresis * span;
        Some(match self.edge {
            Edge::Rising => TachLevels {
                trigger: mid,
                rearm: mid - h,
            },
            Edge::Falling => TachLevels {
                trigger: mid,
                rearm: mid + h,
            },
        })
    }

    /// Feeds consecutive samples and appends the times of the edges found among them to `edges`.
    /// Non-finite samples never fire an edge and disarm the detector until the signal returns.
    pub fn push(&mut self, x: &[f32], edges: &mut Vec<f64>) {
        let mut extremes = [(0.0f32, 0.0f32); CHUNK / GROUP];
        for chunk in x.chunks(CHUNK) {
            // One pass for the extremes of every group; the chunk's come from them.
            let groups = chunk.len().div_ceil(GROUP);
            let (mut lo, mut hi) = (f32::INFINITY, f32::NEG_INFINITY);
            for (g, e) in chunk.chunks(GROUP).zip(extremes.iter_mut()) {
                *e = chunk_extremes(g);
                // NaN extremes (a group of NaN only) compare false and are skipped.
                if e.0 < lo {
                    lo = e.0;
                }
                if e.1 > hi {
                    hi = e.1;
                }
            }
            if self.fixed.is_none() && lo.is_finite() && hi.is_finite() {
                self.env.update(lo, hi);
            }
            match self.levels() {
                Some(levels) => {
                    self.flat_samples = 0;
                    self.scan(chunk, &extremes[..groups], levels, edges);
                }
                None => {
                    self.flat_samples += chunk.len() as u64;
                    self.armed = false;
                    if let Some(&last) = chunk.last() {
                        self.prev = last;
                        self.have_prev = true;
                    }
                }
            }
            self.next_index += chunk.len() as u64;
        }
    }

    fn scan(
        &mut self,
        chunk: &[f32],
        extremes: &[(f32, f32)],
        levels: TachLevels,
        edges: &mut Vec<f64>,
    ) {
        // Work in a frame where the edge always rises: negate for falling edges.
        let sign = match self.edge {
            Edge::Rising => 1.0f32,
            Edge::Falling => -1.0f32,
        };
        let trig = sign * levels.trigger;
        let rearm = sign * levels.rearm;
        let base = self.next_index;
        let mut prev = sign * self.prev;
        let mut have_prev = self.have_prev;
        let mut armed = self.armed;
        for (gi, group) in chunk.chunks(GROUP).enumerate() {
            let k0 = gi * GROUP;
            // Most groups lie wholly on one side of both levels; those need no per-sample look once
            // their extremes say nothing can happen: disarmed and never below the rearm level, or
            // armed and never reaching the trigger level.
            let (lo, hi) = extremes[gi];
            let (lo, hi) = if sign > 0.0 { (lo, hi) } else { (-hi, -lo) };
            let quiet = lo.is_finite() && hi.is_finite() && have_prev && {
                if armed {
                    hi < trig
                } else {
                    lo >= rearm
                }
            };
            if quiet {
                prev = sign * group[group.len() - 1];
                continue;
            }
            self.scan_group(
                group,
                base + k0 as u64,
                trig,
                rearm,
                sign,
                &mut prev,
                &mut have_prev,
                &mut armed,
                edges,
            );
        }
        self.prev = sign * prev;
        self.have_prev = have_prev;
        self.armed = armed;
    }

    /// The per-sample hysteresis over one group whose first sample has overall index `base`.
    #[allow(clippy::too_many_arguments)]
    fn scan_group(
        &self,
        group: &[f32],
        base: u64,
        trig: f32,
        rearm: f32,
        sign: f32,
        prev: &mut f32,
        have_prev: &mut bool,
        armed: &mut bool,
        edges: &mut Vec<f64>,
    ) {
        let (mut p, mut hp, mut a) = (*prev, *have_prev, *armed);
        for (k, &raw) in group.iter().enumerate() {
            let v = sign * raw;
            if !v.is_finite() {
                a = false;
                hp = false;
                continue;
            }
            if v < rearm {
                a = true;
            } else if a && v >= trig && hp && p < trig {
                // Linear interpolation of the crossing between the previous sample and this one.
                let frac = f64::from(trig - p) / f64::from(v - p);
                let idx = (base + k as u64) as f64 - 1.0 + frac;
                edges.push(self.t0 + idx / self.sample_rate);
                a = false;
            }
            p = v;
            hp = true;
        }
        (*prev, *have_prev, *armed) = (p, hp, a);
    }
}

/// Minimum and maximum of the finite samples of a chunk (NaN when it has none).
fn chunk_extremes(chunk: &[f32]) -> (f32, f32) {
    // Eight independent lanes, written as compare-and-select so the compiler can use vector min/max;
    // a NaN sample compares false and never replaces an extreme.
    let mut lo = [f32::INFINITY; 8];
    let mut hi = [f32::NEG_INFINITY; 8];
    let mut it = chunk.chunks_exact(8);
    for c in &mut it {
        for l in 0..8 {
            lo[l] = if c[l] < lo[l] { c[l] } else { lo[l] };
            hi[l] = if c[l] > hi[l] { c[l] } else { hi[l] };
        }
    }
    let (mut a, mut b) = (f32::INFINITY, f32::NEG_INFINITY);
    for &v in it.remainder() {
        a = if v < a { v } else { a };
        b = if v > b { v } else { b };
    }
    for l in 0..8 {
        a = if lo[l] < a { lo[l] } else { a };
        b = if hi[l] > b { hi[l] } else { b };
    }
    if a > b {
        (f32::NAN, f32::NAN)
    } else {
        (a, b)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A pulse train high for `duty` of each period, each edge a linear ramp two samples wide centred
    /// on the edge time, so that linear interpolation of the mid-level crossing recovers it exactly.
    fn pulses(fs: f64, period: f64, duty: f64, n: usize, lo: f32, hi: f32) -> Vec<f32> {
        let ramp = |d: f64| (d * fs / 2.0 + 0.5).clamp(0.0, 1.0);
        (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                let tp = t - (t / period).floor() * period;
                let v = ramp(tp) - ramp(tp - duty * period) + ramp(tp - period);
                lo + (hi - lo) * v as f32
            })
            .collect()
    }

    #[test]
    fn learnt_levels_find_every_rising_edge() {
        let fs = 10_000.0;
        let period = 0.0123;
        let x = pulses(fs, period, 0.3, 20_000, 0.5, 4.5);
        let mut dec = TachDecoder::new(&TachConfig::default(), fs, 0.0).expect("valid");
        let mut edges = Vec::new();
        for block in x.chunks(777) {
            dec.push(block, &mut edges);
        }
        // The edge at t = 0 has no sample before it; every later one is found.
        let expected = (20_000.0 / fs / period).floor() as usize;
        assert_eq!(edges.len(), expected);
        for (k, t) in edges.iter().enumerate() {
            let truth = (k + 1) as f64 * period;
            assert!((t - truth).abs() < 1e-9, "edge {k}: {t} vs {truth}");
        }
    }

    #[test]
    fn falling_edge_and_fixed_levels() {
        let fs = 8_000.0;
        let period = 0.02;
        let x: Vec<f32> = pulses(fs, period, 0.5, 8_000, 0.0, 1.0)
            .into_iter()
            .map(|v| -v)
            .collect();
        let cfg = TachConfig {
            edge: Edge::Falling,
            levels: Some(TachLevels {
                trigger: -0.5,
                rearm: -0.2,
            }),
            ..TachConfig::default()
        };
        let mut dec = TachDecoder::new(&cfg, fs, 1.0).expect("valid");
        let mut edges = Vec::new();
        dec.push(&x, &mut edges);
        assert_eq!(edges.len(), 49);
        assert!((edges[0] - (1.0 + period)).abs() < 1e-9);
    }

    #[test]
    fn flat_and_nan_signals_give_no_edges() {
        let mut dec = TachDecoder::new(&TachConfig::default(), 1000.0, 0.0).expect("valid");
        let mut edges = Vec::new();
        dec.push(&vec![2.5; 5000], &mut edges);
        dec.push(&vec![f32::NAN; 5000], &mut edges);
        assert!(edges.is_empty());
        assert_eq!(dec.flat_samples(), 10_000);
    }

    #[test]
    fn hysteresis_rejects_noise_on_the_edge() {
        // A slow edge with ripple around the trigger level fires once per pulse.
        let fs = 1000.0;
        let mut x = Vec::new();
        for _ in 0..10 {
            x.extend(std::iter::repeat_n(0.0f32, 50));
            for k in 0..20 {
                let ramp = k as f32 / 20.0;
                let ripple = if k % 2 == 0 { 0.08 } else { -0.08 };
                x.push(ramp + ripple);
            }
            x.extend(std::iter::repeat_n(1.0f32, 30));
        }
        let mut dec = TachDecoder::new(&TachConfig::default(), fs, 0.0).expect("valid");
        let mut edges = Vec::new();
        dec.push(&x, &mut edges);
        assert_eq!(edges.len(), 10);
    }

    #[test]
    fn bad_settings_name_the_field() {
        let cfg = TachConfig {
            ppr: 0,
            ..TachConfig::default()
        };
        let err = cfg.validate().expect_err("ppr 0 is invalid");
        assert!(err.to_string().contains("ppr"));
        let cfg = TachConfig {
            max_rpm: 10.0,
            ..TachConfig::default()
        };
        assert!(cfg
            .validate()
            .expect_err("max below min")
            .to_string()
            .contains("max_rpm"));
    }
}
