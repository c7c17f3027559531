//! The per-channel order tracker: filtered sample buffer, angle resampling and block FFT.

use std::collections::VecDeque;
use std::sync::Arc;

use rustfft::{Fft, FftPlanner};

use super::filter::AntiAliasFilter;
use super::resample::cubic;
use super::{OrderMapConfig, SpectrumError};
use crate::types::{Complex64, Revolution};

/// Fraction of the angle-domain Nyquist at which the anti-alias cutoff sits: 0.8, which leaves the
/// top fifth of the band for the roll-off and matches the 0.4 × samples_per_rev limit on max_order.
const CUTOFF_OF_NYQUIST: f64 = 0.8;

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
    /// Samples from `first_index` on; those before `filtered_to` are filtered, the rest raw.
    samples: VecDeque<f32>,
    first_index: u64,
    filtered_to: u64,
    filter: AntiAliasFilter,
    /// Off only in tests, to show what the filter prevents.
    pub(super) anti_alias: bool,
    /// Angle-domain block being filled, and the last complete one.
    filling: Vec<f32>,
    done: Vec<f32>,
    have_done: bool,
    revs_in_block: usize,
    /// Revolutions still to be filtered, but not used, while the filter settles after a skip.
    settling: usize,
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
            .field("cutoff_hz", &self.filter.cutoff_hz())
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
            filtered_to: 0,
            filter: AntiAliasFilter::new(sample_rate),
            anti_alias: true,
            filling: vec![0.0; n],
            done: vec![0.0; n],
            have_done: false,
            revs_in_block: 0,
            settling: 0,
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
            self.filtered_to = start_index;
            self.filter.invalidate();
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
        if !self.plausible(rev) {
            self.reset_block();
            return None;
        }
        if let Some((index, t_end)) = self.prev {
            let joined = rev.index == index.wrapping_add(1)
                && (rev.t_start - t_end).abs() <= 0.5 / self.sample_rate;
            if !joined {
                self.revs_in_block = 0;
            }
        }
        let spr = self.cfg.samples_per_rev;
        let pos_first = (rev.t_start - self.t0) * self.sample_rate;
        let last_frac = (spr - 1) as f64 / spr as f64;
        let pos_last = (rev.time_at(last_frac) - self.t0) * self.sample_rate;
        let lo = pos_first.floor() - 1.0;
        let hi = pos_last.floor() + 2.0;
        let first = self.first_index as f64;
        let end = first + self.samples.len() as f64;
        if lo < first || hi >= end {
            self.reset_block();
            return None;
        }
        let hi = hi as u64;

        // Tracking filter: cutoff from this revolution's mean speed, applied to the samples it needs
        // that are not filtered yet.
        let cutoff = CUTOFF_OF_NYQUIST * 0.5 * spr as f64 / rev.period();
        if self.anti_alias {
            self.filter.set_cutoff(cutoff);
        } else {
            self.filter.set_cutoff(f64::INFINITY);
        }
        // Filter through the end of the revolution (and the two samples after it that the contract
        // guarantees), so that the samples kept for the next revolution are filtered ones.
        let pos_end = (rev.t_end - self.t0) * self.sample_rate;
        let last_avail = self.first_index + self.samples.len() as u64 - 1;
        let filter_to = ((pos_end.floor() + 2.0).min(last_avail as f64) as u64).max(hi);
        if self.filtered_to <= filter_to {
            let from = (self.filtered_to - self.first_index) as usize;
            let to = (filter_to + 1 - self.first_index) as usize;
            self.filter_range(from, to);
            self.filtered_to = filter_to + 1;
        }

        if self.settling > 0 {
            // The filter was re-primed after a skip: this revolution only lets it settle.
            self.settling -= 1;
            self.prev = Some((rev.index, rev.t_end));
            self.drop_through(pos_end);
            return None;
        }
        self.resample_into_block(rev);
        if self.revs_in_block == 0 {
            self.block_t_start = rev.t_start;
        }
        self.revs_in_block += 1;
        self.prev = Some((rev.index, rev.t_end));

        self.drop_through(pos_end);

        if self.revs_in_block < self.cfg.revs_per_block {
            return None;
        }
        self.revs_in_block = 0;
        Some(self.finish_block(rev.t_end))
    }

    /// Passes over one revolution without filtering or resampling it, for when no order-map row is
    /// wanted (the order map is sampled by speed step, not kept for every revolution, and the
    /// anti-alias filter is the costliest per-sample work of the engine). Its samples are dropped, the
    /// partial block is discarded, and the next revolution pushed only re-primes and settles the
    /// filter (its impulse response dies out within a small fraction of a turn at a cutoff of ~25X),
    /// so the block after it starts clean.
    pub fn skip_revolution(&mut self, rev: &Revolution) {
        self.reset_block();
        let pos_end = (rev.t_end - self.t0) * self.sample_rate;
        let keep_from = pos_end.floor() - 1.0;
        let first = self.first_index as f64;
        if keep_from > first {
            let k = ((keep_from - first) as usize).min(self.samples.len());
            self.drop_front(k);
        }
        self.filter.invalidate();
        if self.filtered_to < self.first_index {
            self.filtered_to = self.first_index;
        }
        self.settling = 1;
    }

    /// Whether the tracker is in the middle of something a skip would spoil: a block in progress,
    /// or the filter settling before one.
    pub fn busy(&self) -> bool {
        self.revs_in_block > 0 || self.settling > 0
    }

    /// Drops the filtered samples before the one just ahead of `pos_end` (the next revolution's first
    /// interpolation needs one sample before its start). Only filtered samples are dropped, so the
    /// filter's state stays continuous.
    fn drop_through(&mut self, pos_end: f64) {
        let keep_from = pos_end.floor() - 1.0;
        let first = self.first_index as f64;
        if keep_from > first {
            let filtered = (self.filtered_to - self.first_index) as usize;
            let k = ((keep_from - first) as usize).min(filtered);
            self.drop_front(k);
        }
    }

    /// Discards a partial block (tach lost, gap): the next block starts at the next revolution.
    pub fn reset_block(&mut self) {
        self.revs_in_block = 0;
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

    /// Samples currently buffered (filtered and raw), for memory checks.
    pub fn buffered_samples(&self) -> usize {
        self.samples.len()
    }

    /// Anti-alias cutoff applied to the last revolution, Hz, or `None` when bypassed.
    pub fn cutoff_hz(&self) -> Option<f64> {
        self.filter.cutoff_hz()
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
        if self.filtered_to < self.first_index {
            // Raw samples were lost: the filter's state no longer follows the signal.
            self.filtered_to = self.first_index;
            self.filter.invalidate();
        }
    }

    /// Filters buffer positions `from..to` in place, across the deque's two halves.
    fn filter_range(&mut self, from: usize, to: usize) {
        let (a, b) = self.samples.as_mut_slices();
        let na = a.len();
        if from < na {
            self.filter.process(&mut a[from..to.min(na)]);
        }
        if to > na {
            self.filter
                .process(&mut b[from.saturating_sub(na)..to - na]);
        }
    }

    fn resample_into_block(&mut self, rev: &Revolution) {
        let spr = self.cfg.samples_per_rev;
        let out = &mut self.filling[self.revs_in_block * spr..(self.revs_in_block + 1) * spr];
        let first = self.first_index as f64;
        for (j, o) in out.iter_mut().enumerate() {
            let t = rev.time_at(j as f64 / spr as f64);
            let pos = (t - self.t0) * self.sample_rate - first;
            let i = pos.floor();
            let mu = pos - i;
            // In range: the caller checked floor(pos) − 1 ≥ 0 and floor(pos) + 2 < len for the
            // first and last angle, and times increase with the angle.
            let k = i as usize;
            let p = [
                f64::from(self.samples[k - 1]),
                f64::from(self.samples[k]),
                f64::from(self.samples[k + 1]),
                f64::from(self.samples[k + 2]),
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
