//! The per-channel order tracker: filtered sample buffer, angle resampling and block FFT.

use std::collections::VecDeque;
use std::sync::Arc;

use rustfft::{Fft, FftPlanner};

use super::decimate::{self, MIN_RATE_OF_CUTOFF};
use super::resample::cubic;
use super::stream::FilteredStream;
use super::{OrderMapConfig, SpectrumError};
use crate::types::{Complex64, Revolution};

/// Fraction of the angle-domain Nyquist at which the anti-alias cutoff sits: 0.8, which leaves the
/// top fifth of the band for the roll-off and matches the 0.4 × samples_per_rev limit on max_order.
const CUTOFF_OF_NYQUIST: f64 = 0.8;

/// Margin on the highest speed expected within a row when its decimation factor is chosen: the
/// speed predicted from the revolution's acceleration is raised by this factor to cover the angle
/// model's scatter, so that the factor rarely has to be lowered within a row.
const SPEED_MARGIN: f64 = 1.05;

/// Largest sample buffer accepted, samples (about 1 GiB of `f32`): guards against absurd
/// `max_rev_s × sample_rate` products.
const MAX_BUFFER: f64 = (1u64 << 28) as f64;

/// One row of the order map: peak amplitudes per order over a block of whole revolutions.
#[derive(Clone, Debug, PartialEq)]
pub struct OrderSpectrum {
    /// Mid-time of the block, s.
    pub time_s: f64,
    /// Mean speed over the block, r/min.
    pub speed_rpm: f64,
    /// Order spacing of the bins, `1 / revs_per_block`.
    pub order_step: f64,
    /// Peak amplitude of each order bin `0, order_step, …, max_order`, in the channel's units,
    /// corrected for the window's coherent gain: a pure nX sinusoid of amplitude A reads A at bin
    /// `n / order_step`. Bin 0 is the block mean. Orders near the anti-alias cutoff read slightly
    /// low (about −0.1 dB at 0.78 × the cutoff, i.e. 20X with the defaults; −3 dB at the cutoff).
    pub amplitudes: Vec<f32>,
}

/// Order tracking of one vibration channel.
///
/// Feed it the channel's raw samples with [`push_samples`](Self::push_samples) and the shaft's
/// revolutions with [`push_revolution`](Self::push_revolution); every `revs_per_block` consecutive
/// revolutions it returns an [`OrderSpectrum`]. Filtering is done lazily, revolution by revolution,
/// when the revolution (and so the speed that sets the cutoff) is known: the spectra therefore do
/// not depend on how the samples were split into pushes.
pub struct OrderTracker {
    cfg: OrderMapConfig,
    sample_rate: f64,
    t0: f64,
    /// Samples kept before the last push, on top of that push itself.
    base_cap: usize,
    /// Raw samples from `first_index` on.
    samples: VecDeque<f32>,
    first_index: u64,
    /// Decimation, low-pass and the filtered outputs the resampler reads.
    stream: FilteredStream,
    /// Raw index a little before the start of the last revolution used (filtered or resampled):
    /// where a stream re-primed with a smaller decimation factor can start so that the revolution
    /// before the current one lets it settle.
    last_rev_start: Option<u64>,
    /// Off only in tests, to show what the filter prevents.
    pub(super) anti_alias: bool,
    /// Angle-domain block being filled, and the last complete one.
    filling: Vec<f32>,
    done: Vec<f32>,
    have_done: bool,
    revs_in_block: usize,
    /// Revolutions still to be filtered, but not used, while the filter settles after a skip.
    settling: usize,
    /// The last revolution pushed only let the filter settle: the next one starts a block.
    settled: bool,
    block_t_start: f64,
    prev: Option<(u64, f64)>,
    window: Vec<f64>,
    window_sum: f64,
    fft: Arc<dyn Fft<f64>>,
    /// FFT buffer: the windowed block, then its DFT (kept for tests).
    pub(super) fft_buf: Vec<Complex64>,
    scratch: Vec<Complex64>,
    bins: usize,
}

impl std::fmt::Debug for OrderTracker {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("OrderTracker")
            .field("cfg", &self.cfg)
            .field("sample_rate", &self.sample_rate)
            .field("buffered", &self.samples.len())
            .field("revs_in_block", &self.revs_in_block)
            .field("cutoff_hz", &self.stream.cutoff_hz())
            .field("decimation", &self.stream.factor())
            .finish_non_exhaustive()
    }
}

fn invalid_arg(name: &'static str, value: f64, reason: &'static str) -> SpectrumError {
    SpectrumError::InvalidArgument {
        name,
        value: value.to_string(),
        reason,
    }
}

impl OrderTracker {
    /// A tracker for one channel sampled at `sample_rate` Hz whose first pushed sample is at time
    /// `t0` s. `max_rev_s` is the longest plausible revolution (the slowest speed of interest): it
    /// bounds the sample buffer. Plans the FFT and computes the window once.
    pub fn new(
        cfg: &OrderMapConfig,
        sample_rate: f64,
        t0: f64,
        max_rev_s: f64,
    ) -> Result<Self, SpectrumError> {
        cfg.validate()?;
        if !(sample_rate.is_finite() && sample_rate > 0.0) {
            return Err(invalid_arg(
                "sample_rate",
                sample_rate,
                "must be a positive number of Hz",
            ));
        }
        if !t0.is_finite() {
            return Err(invalid_arg("t0", t0, "must be finite"));
        }
        if !(max_rev_s.is_finite() && max_rev_s > 0.0) {
            return Err(invalid_arg(
                "max_rev_s",
                max_rev_s,
                "must be a positive number of seconds",
            ));
        }
        let cap = (2.0 * max_rev_s * sample_rate).ceil();
        if cap > MAX_BUFFER {
            return Err(invalid_arg(
                "max_rev_s",
                max_rev_s,
                "2 × max_rev_s × sample_rate must not exceed 2^28 samples",
            ));
        }
        let n = cfg.samples_per_rev * cfg.revs_per_block;
        let fft = FftPlanner::<f64>::new().plan_fft_forward(n);
        let scratch = vec![Complex64::new(0.0, 0.0); fft.get_inplace_scratch_len()];
        let window = cfg.window.table(n);
        let window_sum = window.iter().sum();
        Ok(Self {
            cfg: cfg.clone(),
            sample_rate,
            t0,
            base_cap: cap as usize + 8,
            samples: VecDeque::new(),
            first_index: 0,
            stream: FilteredStream::new(sample_rate),
            last_rev_start: None,
            anti_alias: true,
            filling: vec![0.0; n],
            done: vec![0.0; n],
            have_done: false,
            revs_in_block: 0,
            settling: 0,
            settled: false,
            block_t_start: 0.0,
            prev: None,
            window,
            window_sum,
            fft,
            fft_buf: vec![Complex64::new(0.0, 0.0); n],
            scratch,
            bins: cfg.bin_count(),
        })
    }

    /// Appends consecutive raw samples; sample `i` overall has time `t0 + i / fs`.
    ///
    /// Samples older than about `2 × max_rev_s` before this push are dropped, so memory stays
    /// bounded even when no revolution comes (tach lost).
    pub fn push_samples(&mut self, x: &[f32]) {
        self.samples.extend(x.iter().copied());
        let limit = self.base_cap + x.len();
        if self.samples.len() > limit {
            self.drop_front(self.samples.len() - limit);
        }
    }

    /// Appends samples whose first has overall index `start_index` (time `t0 + start_index / fs`),
    /// so a caller can hand over only the stretches the order map needs. A stretch that leaves a
    /// hole after the buffered samples starts the buffer afresh (the filter re-primes on it); one
    /// that overlaps them adds only its new part.
    pub fn push_samples_at(&mut self, start_index: u64, x: &[f32]) {
        let end = self.first_index + self.samples.len() as u64;
        if start_index > end {
            self.samples.clear();
            self.first_index = start_index;
            self.stream.invalidate();
            self.reset_block();
        }
        let end = self.first_index + self.samples.len() as u64;
        let held = end.saturating_sub(start_index) as usize;
        if held < x.len() {
            self.push_samples(&x[held..]);
        }
    }

    /// Resamples one revolution into the current block; returns the block's spectrum once it holds
    /// `revs_per_block` consecutive revolutions.
    ///
    /// Call it once the samples up to at least `rev.t_end + 2/fs` were pushed. A revolution that
    /// does not follow the previous one (index or time gap) starts a new block; one whose samples are
    /// not (or no longer) buffered, or with a non-physical angle model, discards the partial block
    /// and returns `None`. The first revolution after the start, or after samples were lost, may
    /// carry the filter's settling, a few hundredths of a revolution long.
    pub fn push_revolution(&mut self, rev: &Revolution) -> Option<OrderSpectrum> {
        self.settled = false;
        if !self.plausible(rev) {
            self.reset_block();
            return None;
        }
        let joined = self.prev.is_some_and(|(index, t_end)| {
            rev.index == index.wrapping_add(1)
                && (rev.t_start - t_end).abs() <= 0.5 / self.sample_rate
        });
        if !joined {
            self.revs_in_block = 0;
        }
        let spr = self.cfg.samples_per_rev;
        let pos_first = (rev.t_start - self.t0) * self.sample_rate;
        let last_frac = (spr - 1) as f64 / spr as f64;
        let pos_last = (rev.time_at(last_frac) - self.t0) * self.sample_rate;
        let lo = pos_first.floor() - 1.0;
        let hi = pos_last.floor() + 2.0;
        let first = self.first_index as f64;
        let end = first + self.samples.len() as f64;
        // A running stream has consumed the raw samples before its next output's inputs; the check
        // that it still covers this revolution comes after it has been brought up to date.
        if hi >= end || (lo < first && !self.stream.is_primed()) {
            self.reset_block();
            return None;
        }
        let hi = hi as u64;

        // Tracking filter: cutoff from this revolution's mean speed, applied to the samples it needs
        // that are not filtered yet.
        let cutoff = CUTOFF_OF_NYQUIST * 0.5 * spr as f64 / rev.period();
        self.tune_stream(rev, cutoff, joined);
        // Filter through the end of the revolution (and the two samples after it that the contract
        // guarantees), so that the outputs kept for the next revolution are there.
        let pos_end = (rev.t_end - self.t0) * self.sample_rate;
        let last_avail = self.first_index + self.samples.len() as u64 - 1;
        let limit = ((pos_end.floor() + 2.0).min(last_avail as f64) as u64).max(hi);
        let raw = self.samples.make_contiguous();
        self.stream.produce(raw, self.first_index, limit);
        self.last_rev_start = Some((lo.max(0.0) as u64).saturating_sub(2));
        // The interpolation reads outputs floor(q) − 1 … floor(q) + 2 at each angle point.
        let q_first = self.stream.index_of(pos_first).floor() - 1.0;
        let q_last = self.stream.index_of(pos_last).floor() + 2.0;
        let held = self.stream.outputs().len() as f64;
        if !(self.stream.is_primed() && q_first >= 0.0 && q_last < held) {
            self.reset_block();
            return None;
        }

        if self.settling > 0 {
            // The filter was re-primed after a skip: this revolution only lets it settle.
            self.settling -= 1;
            self.settled = self.settling == 0;
            self.prev = Some((rev.index, rev.t_end));
            self.drop_used(pos_end);
            return None;
        }
        self.resample_into_block(rev);
        if self.revs_in_block == 0 {
            self.block_t_start = rev.t_start;
        }
        self.revs_in_block += 1;
        self.prev = Some((rev.index, rev.t_end));

        self.drop_used(pos_end);

        if self.revs_in_block < self.cfg.revs_per_block {
            return None;
        }
        self.revs_in_block = 0;
        Some(self.finish_block(rev.t_end))
    }

    /// Sets the filtered stream up for a revolution whose anti-alias cutoff is `cutoff` Hz.
    ///
    /// A stream that is not running is primed at the first buffered sample, with the decimation
    /// factor for the row ahead ([`Self::row_factor`]). One running with a factor that the speed has
    /// since outgrown (the decimated rate would fall below [`MIN_RATE_OF_CUTOFF`] × the cutoff) is
    /// restarted with a smaller factor at the start of the previous revolution, whose raw samples
    /// are kept for this while decimating: that revolution lets the new stream settle, and the
    /// block goes on. Without them the block is given up and this revolution only settles.
    fn tune_stream(&mut self, rev: &Revolution, cutoff: f64, joined: bool) {
        if !self.anti_alias {
            if !self.stream.is_primed() || self.stream.factor() != 1 {
                self.stream.prime(1, self.first_index);
            }
            self.stream.set_cutoff(f64::INFINITY);
            return;
        }
        if !self.stream.is_primed() {
            self.stream.prime(self.row_factor(rev), self.first_index);
        } else {
            let d = self.stream.factor();
            if d > 1 && MIN_RATE_OF_CUTOFF * cutoff * d as f64 > self.sample_rate {
                let new_d = self.row_factor(rev);
                match self.last_rev_start {
                    Some(start) if joined && start >= self.first_index => {
                        self.stream.prime(new_d, start);
                    }
                    _ => {
                        self.stream.prime(new_d, self.first_index);
                        self.reset_block();
                        self.settling = self.settling.max(1);
                    }
                }
            }
        }
        self.stream.set_cutoff(cutoff);
    }

    /// Decimation factor for a row starting at `rev`: the largest that keeps the decimated rate at
    /// least [`MIN_RATE_OF_CUTOFF`] × the cutoff at the highest speed expected in the row, which is
    /// the speed `revs_per_block + 1` revolutions on at the revolution's acceleration (none if
    /// decelerating), times [`SPEED_MARGIN`].
    fn row_factor(&self, rev: &Revolution) -> usize {
        let speed = 1.0 / rev.period();
        let accel = (2.0 * rev.c2).max(0.0);
        let row_s = (self.cfg.revs_per_block + 1) as f64 / speed;
        let peak = (speed + accel * row_s) * SPEED_MARGIN;
        let cutoff = CUTOFF_OF_NYQUIST * 0.5 * self.cfg.samples_per_rev as f64 * peak;
        decimate::factor_for(self.sample_rate, cutoff)
    }

    /// Passes over one revolution without filtering or resampling it, for when no order-map row is
    /// wanted (the order map is sampled by speed step, not kept for every revolution, and the
    /// anti-alias filter is the costliest per-sample work of the engine). Its samples are dropped, the
    /// partial block is discarded, and the next revolution pushed only re-primes and settles the
    /// filter (its impulse response dies out within a small fraction of a turn at a cutoff of ~25X),
    /// so the block after it starts clean. That re-prime also chooses the decimation factor for the
    /// row ([`decimation`](Self::decimation)), from that revolution's speed and acceleration.
    pub fn skip_revolution(&mut self, rev: &Revolution) {
        self.reset_block();
        let pos_end = (rev.t_end - self.t0) * self.sample_rate;
        let keep_from = pos_end.floor() - 1.0;
        let first = self.first_index as f64;
        if keep_from > first {
            let k = ((keep_from - first) as usize).min(self.samples.len());
            self.drop_front(k);
        }
        self.stream.invalidate();
        self.last_rev_start = None;
        self.settling = 1;
        self.settled = false;
    }

    /// Whether the tracker is in the middle of something a skip would spoil: a block in progress,
    /// or a filter that has just settled for one (its settling revolution was pushed).
    ///
    /// A tracker that was skipped is not busy: the filter settles on whichever revolution is pushed
    /// next, so skipping it once more spoils nothing. (Reporting the pending settling as busy would
    /// make a caller that samples rows push every other revolution between rows, only to settle
    /// and drop it.)
    pub fn busy(&self) -> bool {
        self.revs_in_block > 0 || self.settled
    }

    /// Drops what the revolutions after the one ending at raw position `pos_end` do not need: the
    /// filtered outputs before the one just ahead of `pos_end` (the next revolution's first
    /// interpolation needs one output before its start), and the raw samples the stream has
    /// consumed, except, while decimating, those of the last revolution (see
    /// [`tune_stream`](Self::tune_stream)).
    fn drop_used(&mut self, pos_end: f64) {
        let keep_out = self.stream.index_of(pos_end).floor() - 1.0;
        if keep_out > 0.0 {
            self.stream.drop_outputs(keep_out as usize);
        }
        let mut keep_raw = self.stream.needs_raw_from();
        if self.stream.factor() > 1 {
            if let Some(start) = self.last_rev_start {
                keep_raw = keep_raw.min(start);
            }
        }
        if keep_raw > self.first_index {
            let k = ((keep_raw - self.first_index) as usize).min(self.samples.len());
            self.drop_front(k);
        }
    }

    /// Discards a partial block (tach lost, gap): the next block starts at the next revolution.
    pub fn reset_block(&mut self) {
        self.revs_in_block = 0;
        self.settled = false;
        self.prev = None;
    }

    /// The last complete resampled block (angle domain, `samples_per_rev × revs_per_block` values,
    /// before windowing), for checks against an independent FFT.
    pub fn last_block(&self) -> Option<&[f32]> {
        self.have_done.then_some(&self.done[..])
    }

    /// The configuration the tracker was built with.
    pub fn config(&self) -> &OrderMapConfig {
        &self.cfg
    }

    /// Samples currently buffered (raw and filtered), for memory checks.
    pub fn buffered_samples(&self) -> usize {
        self.samples.len() + self.stream.outputs().len()
    }

    /// Anti-alias cutoff applied to the last revolution, Hz, or `None` when bypassed.
    pub fn cutoff_hz(&self) -> Option<f64> {
        self.stream.cutoff_hz()
    }

    /// Decimation factor ahead of the anti-alias low-pass for the current row (1: none), chosen
    /// when the filter is primed; for monitoring the filter's cost and for tests.
    pub fn decimation(&self) -> usize {
        self.stream.factor()
    }

    fn plausible(&self, rev: &Revolution) -> bool {
        let period = rev.t_end - rev.t_start;
        rev.t_start.is_finite()
            && rev.t_end.is_finite()
            && rev.c1.is_finite()
            && rev.c2.is_finite()
            && period > 0.0
            && rev.c1 > 0.0
            && rev.c1 + 2.0 * rev.c2 * period > 0.0
    }

    fn drop_front(&mut self, k: usize) {
        self.samples.drain(..k);
        self.first_index += k as u64;
        if self.stream.is_primed() && self.stream.needs_raw_from() < self.first_index {
            // Raw samples were lost: the filter's state no longer follows the signal.
            self.stream.invalidate();
        }
    }

    fn resample_into_block(&mut self, rev: &Revolution) {
        let spr = self.cfg.samples_per_rev;
        let out = &mut self.filling[self.revs_in_block * spr..(self.revs_in_block + 1) * spr];
        let held = self.stream.outputs();
        let (base, scale) = self.stream.mapping();
        for (j, o) in out.iter_mut().enumerate() {
            let t = rev.time_at(j as f64 / spr as f64);
            let q = ((t - self.t0) * self.sample_rate - base) * scale;
            let i = q.floor();
            let mu = q - i;
            // In range: the caller checked floor(q) − 1 ≥ 0 and floor(q) + 2 < len for the first
            // and last angle, and times increase with the angle.
            let k = i as usize;
            let p = [
                f64::from(held[k - 1]),
                f64::from(held[k]),
                f64::from(held[k + 1]),
                f64::from(held[k + 2]),
            ];
            *o = cubic(p, mu) as f32;
        }
    }

    fn finish_block(&mut self, t_end: f64) -> OrderSpectrum {
        for ((c, &x), &w) in self.fft_buf.iter_mut().zip(&self.filling).zip(&self.window) {
            *c = Complex64::new(w * f64::from(x), 0.0);
        }
        self.fft
            .process_with_scratch(&mut self.fft_buf, &mut self.scratch);
        // Peak amplitude of a real sinusoid: 2|X_k| / Σw (the Σw is N × coherent gain); the mean
        // (bin 0) is |X_0| / Σw. Harris 1978 on coherent gain.
        let amplitudes = self.fft_buf[..self.bins]
            .iter()
            .enumerate()
            .map(|(k, c)| {
                let scale = if k == 0 { 1.0 } else { 2.0 };
                (scale * c.norm() / self.window_sum) as f32
            })
            .collect();
        std::mem::swap(&mut self.filling, &mut self.done);
        self.have_done = true;
        let span = t_end - self.block_t_start;
        OrderSpectrum {
            time_s: 0.5 * (self.block_t_start + t_end),
            speed_rpm: 60.0 * self.cfg.revs_per_block as f64 / span,
            order_step: self.cfg.order_step(),
            amplitudes,
        }
    }
}
