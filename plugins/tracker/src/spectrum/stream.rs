//! The filtered stream the resampler reads: raw samples, optionally decimated (CIC and droop
//! compensator, [`super::decimate`]), then low-passed by the tracking Butterworth.
//!
//! The stream starts at a *prime point*, a raw sample index `a`; its output `m` is centred on the
//! raw position `a + m·D − 3(D − 1)/2`, so it lines up with the raw samples exactly (for `D = 1`
//! output `m` is raw sample `a + m` filtered, as before decimation existed). Raw samples before `a`
//! are taken equal to the one at `a`, the same steady-state start the Butterworth uses, so the
//! stream needs nothing before its prime point and depends only on the samples from it on.

use super::decimate::{compensator_beta, Cic};
use super::filter::AntiAliasFilter;

/// The decimator (when `D > 1`), the Butterworth at the decimated rate, and the filtered outputs
/// not yet consumed.
#[derive(Clone, Debug)]
pub(super) struct FilteredStream {
    sample_rate: f64,
    cic: Option<Cic>,
    beta: f64,
    lp: AntiAliasFilter,
    primed: bool,
    /// Raw index of the prime point `a`.
    anchor: u64,
    /// `D = 1`: the next raw offset from `a` to filter. `D > 1`: the next CIC output to compute.
    next: u64,
    /// The last two CIC outputs, `c[next − 2]` and `c[next − 1]`, for the compensator.
    c_prev: f64,
    c_cur: f64,
    /// Raw sample at the prime point, which stands for the samples before it.
    edge_value: f32,
    /// Filtered outputs from index `out_first` on. A plain vector: the resampler reads it at random
    /// positions, and what a revolution leaves in it for the next is a few outputs, so dropping
    /// from the front costs little.
    out: Vec<f32>,
    out_first: u64,
    edge: Vec<f32>,
}

impl FilteredStream {
    pub(super) fn new(sample_rate: f64) -> Self {
        Self {
            sample_rate,
            cic: None,
            beta: 0.0,
            lp: AntiAliasFilter::new(sample_rate),
            primed: false,
            anchor: 0,
            next: 0,
            c_prev: 0.0,
            c_cur: 0.0,
            edge_value: 0.0,
            out: Vec::new(),
            out_first: 0,
            edge: Vec::new(),
        }
    }

    /// Decimation factor of the current stream.
    pub(super) fn factor(&self) -> usize {
        self.cic.as_ref().map_or(1, Cic::factor)
    }

    /// Whether the stream follows the signal (false at the start and after samples were lost).
    pub(super) fn is_primed(&self) -> bool {
        self.primed
    }

    /// Forgets the state: the next [`prime`](Self::prime) starts a new stream.
    pub(super) fn invalidate(&mut self) {
        self.primed = false;
    }

    /// Starts a new stream at raw index `anchor`, decimated by `d`, dropping the old outputs. The
    /// Butterworth is rebuilt for the rate `fs / d` and primes on the first output.
    pub(super) fn prime(&mut self, d: usize, anchor: u64) {
        let cic = (d > 1).then(|| match self.cic.take() {
            Some(c) if c.factor() == d => c,
            _ => Cic::new(d),
        });
        let d = cic.as_ref().map_or(1, Cic::factor);
        self.beta = if d > 1 { compensator_beta(d) } else { 0.0 };
        self.cic = cic;
        self.lp = AntiAliasFilter::new(self.sample_rate / d as f64);
        self.primed = true;
        self.anchor = anchor;
        self.next = 0;
        self.out.clear();
        self.out_first = 0;
    }

    /// Sets the Butterworth's cutoff (Hz) for the outputs produced next; see
    /// [`AntiAliasFilter::set_cutoff`] (a cutoff above its limit bypasses it).
    pub(super) fn set_cutoff(&mut self, cutoff_hz: f64) {
        self.lp.set_cutoff(cutoff_hz);
    }

    /// The Butterworth's cutoff, Hz, or `None` while bypassed.
    pub(super) fn cutoff_hz(&self) -> Option<f64> {
        self.lp.cutoff_hz()
    }

    /// The map from raw positions to output indices relative to the first output held:
    /// `index = (pos − base) · scale`.
    pub(super) fn mapping(&self) -> (f64, f64) {
        let d = self.factor() as f64;
        let base = self.anchor as f64 - 1.5 * (d - 1.0) + self.out_first as f64 * d;
        (base, 1.0 / d)
    }

    /// Output index (fractional) at raw position `pos`, relative to the first output held.
    pub(super) fn index_of(&self, pos: f64) -> f64 {
        let (base, scale) = self.mapping();
        (pos - base) * scale
    }

    /// The outputs held, from the first one [`index_of`](Self::index_of) counts from.
    pub(super) fn outputs(&self) -> &[f32] {
        &self.out
    }

    /// Drops the first `k` outputs held (all of them if fewer).
    pub(super) fn drop_outputs(&mut self, k: usize) {
        let k = k.min(self.out.len());
        self.out.drain(..k);
        self.out_first += k as u64;
    }

    /// Earliest raw index the next outputs depend on; raw samples before it may be dropped.
    pub(super) fn needs_raw_from(&self) -> u64 {
        match &self.cic {
            None => self.anchor + self.next,
            Some(c) => {
                let newest = self.anchor + self.next * c.factor() as u64;
                (newest + 1)
                    .saturating_sub(c.support() as u64)
                    .max(self.anchor)
            }
        }
    }

    /// Produces every output whose inputs lie at or before raw index `limit`, from `raw` (the raw
    /// samples from index `raw_first` on). Does nothing if the stream is not primed; a stream whose
    /// inputs were dropped from `raw` is invalidated instead (the caller then sees no new outputs).
    pub(super) fn produce(&mut self, raw: &[f32], raw_first: u64, limit: u64) {
        let raw_end = raw_first + raw.len() as u64;
        if !self.primed || raw_end == raw_first {
            return;
        }
        let limit = limit.min(raw_end - 1);
        if self.needs_raw_from() < raw_first {
            self.primed = false;
            return;
        }
        let produced = self.out.len();
        match &self.cic {
            None => {
                let from = self.anchor + self.next;
                if from > limit {
                    return;
                }
                let (a, b) = (
                    (from - raw_first) as usize,
                    (limit + 1 - raw_first) as usize,
                );
                self.out.extend_from_slice(&raw[a..b]);
                self.next = limit + 1 - self.anchor;
            }
            Some(cic) => {
                let d = cic.factor() as u64;
                let l = cic.support() as u64;
                if self.next == 0 {
                    // c[−1] = c[0] = x[a]: the left extension is constant.
                    self.edge_value = raw[(self.anchor - raw_first) as usize];
                    self.c_prev = f64::from(self.edge_value);
                    self.c_cur = self.c_prev;
                    self.next = 1;
                }
                let (b0, b1) = (-self.beta, 1.0 + 2.0 * self.beta);
                let mut newest = self.anchor + self.next * d;
                // The first outputs reach before the prime point: extend x[a] to the left.
                while newest <= limit && newest + 1 < self.anchor + l {
                    let first_in = self.anchor + l - 1 - newest;
                    self.edge.clear();
                    self.edge
                        .extend(std::iter::repeat_n(self.edge_value, first_in as usize));
                    let a = (self.anchor - raw_first) as usize;
                    let b = (newest + 1 - raw_first) as usize;
                    self.edge.extend_from_slice(&raw[a..b]);
                    let c = cic.output(&self.edge);
                    let y = b0 * (self.c_prev + c) + b1 * self.c_cur;
                    self.out.push(y as f32);
                    self.c_prev = self.c_cur;
                    self.c_cur = c;
                    self.next += 1;
                    newest += d;
                }
                if newest <= limit {
                    // The rest in one pass over the raw samples they span.
                    let count = (limit - newest) / d + 1;
                    let from = (newest + 1 - l - raw_first) as usize;
                    let to = (newest + (count - 1) * d + 1 - raw_first) as usize;
                    let (mut c_prev, mut c_cur) = (self.c_prev, self.c_cur);
                    let out = &mut self.out;
                    cic.run(&raw[from..to], |c| {
                        out.push((b0 * (c_prev + c) + b1 * c_cur) as f32);
                        c_prev = c_cur;
                        c_cur = c;
                    });
                    self.c_prev = c_prev;
                    self.c_cur = c_cur;
                    self.next += count;
                }
            }
        }
        self.lp.process(&mut self.out[produced..]);
    }
}

#[cfg(test)]
mod tests {
    use super::super::decimate::{cic_magnitude, compensator_gain};
    use super::*;

    const TAU: f64 = std::f64::consts::TAU;

    #[test]
    fn decimated_stream_lines_up_with_the_raw_samples() {
        // Output m must be the Butterworth (at fs/D) of the input at raw position
        // a + m·D − 3(D − 1)/2, the CIC's centre (its group delay; Hogenauer 1981), scaled by the
        // CIC's and the compensator's gains. The reference applies the same Butterworth to the
        // exact cosine at those positions. Without the half-support shift the two would differ by
        // 2π·f·3(D − 1)/(2 fs) of the amplitude, 7 % here.
        let (fs, d, f, cutoff, a) = (25_600.0, 8usize, 37.0, 200.0, 100u64);
        let n = 40_000usize;
        let x: Vec<f32> = (0..n)
            .map(|i| (TAU * f * i as f64 / fs + 0.3).cos() as f32)
            .collect();
        let mut st = FilteredStream::new(fs);
        st.prime(d, a);
        st.set_cutoff(cutoff);
        // In uneven pieces: the stream must not depend on them.
        for limit in [150u64, 151, 1234, 20_000, n as u64 - 1] {
            st.produce(&x, 0, limit);
        }
        let got = st.outputs();
        let gain = cic_magnitude(f, fs, d) * compensator_gain(f, fs / d as f64, d);
        let mut lp = AntiAliasFilter::new(fs / d as f64);
        lp.set_cutoff(cutoff);
        let mut want: Vec<f32> = (0..got.len())
            .map(|m| {
                let p = (a + (m * d) as u64) as f64 - 1.5 * (d as f64 - 1.0);
                (gain * (TAU * f * p / fs + 0.3).cos()) as f32
            })
            .collect();
        lp.process(&mut want);
        // Output m needs the CIC output after it (the compensator), whose newest input is
        // a + (m + 1)·D.
        assert_eq!(got.len(), (n - 1 - a as usize) / d);
        // After the start (constant extension against a cosine) has died out.
        let dev = got[400..]
            .iter()
            .zip(&want[400..])
            .map(|(g, w)| (g - w).abs())
            .fold(0.0f32, f32::max);
        assert!(dev < 2e-6, "deviation {dev:e}");
        assert_eq!(st.index_of(a as f64 - 1.5 * (d as f64 - 1.0)), 0.0);
        let shift = TAU * f * 1.5 * (d as f64 - 1.0) / fs;
        assert!(shift > 0.05, "the check would see a missing shift");
    }

    #[test]
    fn undecimated_stream_is_the_butterworth_of_the_raw_samples() {
        // D = 1: output m is raw sample a + m filtered, exactly the filter run in place.
        let fs = 10_000.0;
        let x: Vec<f32> = (0..5000)
            .map(|i| ((i as f64 * 0.37).sin() + 0.5) as f32)
            .collect();
        let mut st = FilteredStream::new(fs);
        st.prime(1, 10);
        st.set_cutoff(800.0);
        st.produce(&x, 0, 2000);
        st.produce(&x[1000..], 1000, 4999);
        let mut lp = AntiAliasFilter::new(fs);
        lp.set_cutoff(800.0);
        let mut want = x[10..].to_vec();
        lp.process(&mut want);
        assert_eq!(st.outputs(), &want[..]);
        assert_eq!(st.index_of(10.0), 0.0);
        assert_eq!(st.needs_raw_from(), 5000);
    }
}
