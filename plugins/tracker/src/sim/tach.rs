//! Rendering of the tachometer channel with sub-sample-accurate edges.
//!
//! Each edge is a linear ramp two sample intervals wide, centred on the edge time, sampled exactly.
//! The two samples on either side of the edge then both lie on the ramp, so a threshold crossing at
//! the mid level `(low + high)/2` interpolated linearly between them gives the edge time exactly
//! (to rounding of the f32 output). A crossing at another level `L` (as a fraction of the step) is
//! offset from the edge by `(2L − 1)` samples at most. Ramps are summed, so pulses shorter than the
//! ramp degrade gracefully instead of vanishing.

use std::collections::VecDeque;

use super::config::TachSim;
use super::profile::Segments;
use super::rng::Rng;

/// Jitter is Gaussian truncated at this many standard deviations, so edges can be generated ahead
/// of the samples with a bounded look-ahead.
const JITTER_SIGMAS: f64 = 4.0;

#[derive(Clone, Debug)]
pub(crate) struct TachRenderer {
    ppr: f64,
    missing: Vec<bool>,
    duty: f64,
    jitter_s: f64,
    low: f64,
    span: f64,
    dt: f64,
    /// Global index of the next tooth to generate (tooth k of turn m is m·ppr + k).
    next_tooth: u64,
    /// Nominal rise time of `next_tooth`, or `None` once the shaft has stopped short of it.
    next_rise: Option<f64>,
    seg_hint: usize,
    /// Edges not yet fully passed, sorted by time: (time, +1 rising / −1 falling).
    edges: VecDeque<(f64, f64)>,
    /// Sum of the signs of edges fully passed: 1 inside a pulse, 0 outside.
    base: f64,
    rng: Rng,
}

impl TachRenderer {
    pub(crate) fn new(t: &TachSim, dt: f64, segs: &Segments, rng: Rng) -> Self {
        let mut missing = vec![false; t.ppr as usize];
        for &m in &t.missing {
            if let Some(slot) = missing.get_mut(m as usize) {
                *slot = true;
            }
        }
        let mut seg_hint = 0;
        let next_rise = segs.time_at_turns(0.0, &mut seg_hint);
        Self {
            ppr: f64::from(t.ppr),
            missing,
            duty: t.duty,
            jitter_s: t.jitter_s,
            low: f64::from(t.low),
            span: f64::from(t.high) - f64::from(t.low),
            dt,
            next_tooth: 0,
            next_rise,
            seg_hint,
            edges: VecDeque::with_capacity(16),
            base: 0.0,
            rng,
        }
    }

    fn jitter(&mut self) -> f64 {
        if self.jitter_s > 0.0 {
            self.rng.gaussian().clamp(-JITTER_SIGMAS, JITTER_SIGMAS) * self.jitter_s
        } else {
            0.0
        }
    }

    fn insert(&mut self, time: f64, sign: f64) {
        self.edges.push_back((time, sign));
        let mut i = self.edges.len() - 1;
        while i > 0 && self.edges[i - 1].0 > time {
            self.edges.swap(i - 1, i);
            i -= 1;
        }
    }

    /// Generates every edge that can influence the sample at `t`.
    fn generate_until(&mut self, t: f64, segs: &Segments) {
        let horizon = t + self.dt + JITTER_SIGMAS * self.jitter_s;
        while let Some(rise) = self.next_rise {
            if rise > horizon {
                break;
            }
            let g = self.next_tooth;
            let tooth = (g % self.missing.len() as u64) as usize;
            let fall = segs.time_at_turns((g as f64 + self.duty) / self.ppr, &mut self.seg_hint);
            // Draw jitter for every tooth, present or not, so the stream does not depend on `missing`.
            let (jr, jf) = (self.jitter(), self.jitter());
            if !self.missing[tooth] {
                self.insert(rise + jr, 1.0);
                if let Some(fall) = fall {
                    self.insert(fall + jf, -1.0);
                }
            }
            self.next_tooth = g + 1;
            self.next_rise = segs.time_at_turns((g + 1) as f64 / self.ppr, &mut self.seg_hint);
        }
    }

    /// The tach sample at time `t`; calls must come in increasing `t`.
    #[inline]
    pub(crate) fn sample(&mut self, t: f64, segs: &Segments) -> f32 {
        self.generate_until(t, segs);
        while let Some(&(te, sign)) = self.edges.front() {
            if te + self.dt <= t {
                self.base += sign;
                self.edges.pop_front();
            } else {
                break;
            }
        }
        let mut level = self.base;
        let inv_w = 0.5 / self.dt;
        for &(te, sign) in &self.edges {
            if te - self.dt >= t {
                break;
            }
            level += sign * (0.5 + (t - te) * inv_w);
        }
        (self.low + self.span * level.clamp(0.0, 1.0)) as f32
    }
}
