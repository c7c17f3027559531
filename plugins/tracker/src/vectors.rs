//! nX vectors: amplitude and phase of whole-number orders over whole revolutions.
//!
//! For each revolution (or block of revolutions) between reference pulses the order-n phasor is the
//! synchronous DFT `X_n = (2/W) Σ w_i x_i e^{−j n θ_i}`, with θ_i the modelled shaft angle at each sample
//! (the time-variant DFT of Dilworth & Blough, SAE 2007, with the quadratic angle model of
//! [`crate::types::Revolution`]). Summing over whole turns keeps orders from leaking into each other.
//! Two details matter in practice:
//!
//! - Each sample is weighted by the angle it covers (speed × sample interval), so the sum is an
//!   integral over angle even when the speed changes by several percent within a turn on a fast
//!   run-up at low speed.
//! - The turn rarely holds a whole number of samples, so the first and last samples are weighted by
//!   the part of their sampling interval that lies inside the turn (a midpoint rule with partial end
//!   cells). Without it, 1X carries an error of order one part in the samples per turn.
//! - Proximity probes carry a DC gap voltage many times the 1X amplitude. Any residual non-orthogonality
//!   of the discrete kernel would leak it into 1X, so the kernel's own response to a constant is
//!   subtracted: `X_n = (2/W)(S_xn − (M/W)·S_1n)`, with `M = Σ w x` and `S_1n = Σ w e^{−jnθ}`.
//!
//! The per-sample loop computes the phasor by a chirp recurrence (the angle is quadratic in time, so
//! the per-sample rotation itself rotates by a constant), restarted from an exact `sin_cos` every
//! `RESTART` (256) samples so rounding cannot drift; the phasors are shared by all channels.

use crate::types::{Complex64, Revolution};
use std::f64::consts::TAU;
use thiserror::Error;

/// Samples per tile: the phasor recurrence restarts exactly at each tile, and the scratch arrays
/// hold one tile.
const RESTART: usize = 256;
/// Interleaved chains of the phasor recurrence.
const LANES: usize = 4;

/// Which orders to compute, and over how many revolutions.
#[derive(Clone, Debug, PartialEq)]
pub struct VectorConfig {
    /// Whole-number orders, e.g. `[1, 2]` for 1X and 2X.
    pub orders: Vec<u32>,
    /// Revolutions per vector: 1 gives one vector per turn; more average noise down on steady running.
    pub revs_per_vector: u32,
}

impl Default for VectorConfig {
    fn default() -> Self {
        Self {
            orders: vec![1, 2],
            revs_per_vector: 1,
        }
    }
}

/// A vector setting that cannot work.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum VectorError {
    /// The named field has a value outside its allowed range.
    #[error("vector setting `{field}`: {reason}")]
    Invalid {
        /// Name of the setting.
        field: &'static str,
        /// Why it was refused.
        reason: &'static str,
    },
}

impl VectorConfig {
    /// Checks the settings, naming the first bad one.
    pub fn validate(&self) -> Result<(), VectorError> {
        if self.orders.is_empty() || self.orders.len() > 16 {
            return Err(VectorError::Invalid {
                field: "orders",
                reason: "list 1 to 16 orders",
            });
        }
        if self.orders.iter().any(|&n| n == 0 || n > 64) {
            return Err(VectorError::Invalid {
                field: "orders",
                reason: "orders must be whole numbers from 1 to 64",
            });
        }
        if self.revs_per_vector == 0 || self.revs_per_vector > 10_000 {
            return Err(VectorError::Invalid {
                field: "revs_per_vector",
                reason: "must be between 1 and 10000",
            });
        }
        Ok(())
    }
}

/// The nX vectors of one revolution or block of revolutions.
#[derive(Clone, Debug, PartialEq)]
pub struct RevVectors {
    /// Index of the first revolution in the block.
    pub first_rev: u64,
    /// Start of the first revolution, s.
    pub t_start: f64,
    /// End of the last revolution, s.
    pub t_end: f64,
    /// Mean speed over the block, r/min.
    pub speed_rpm: f64,
    /// Phasors in the channel's raw units (peak), channel-major: `vectors[ch * orders + k]` is order
    /// `orders[k]` of channel `ch`.
    pub vectors: Vec<Complex64>,
    /// Mean value of each channel over the block (gap voltage, offset).
    pub dc: Vec<f64>,
}

impl RevVectors {
    /// Mid-time of the block, s.
    pub fn time_s(&self) -> f64 {
        0.5 * (self.t_start + self.t_end)
    }
}

/// Sums of one channel over the revolutions of a block.
#[derive(Clone, Debug, Default)]
struct ChannelSums {
    m: f64,
    s: Vec<Complex64>,
}

/// Computes nX vectors revolution by revolution; one per set of channels.
#[derive(Clone, Debug)]
pub struct VectorCalculator {
    orders: Vec<u32>,
    revs_per_vector: u32,
    channels: usize,
    /// First-order phasor scratch e^{−jθ_i}, shared by every order and channel.
    base_re: Vec<f64>,
    base_im: Vec<f64>,
    /// Angle weight of each sample (turns), end cells scaled by their share inside the turn.
    wt: Vec<f64>,
    /// Weighted phasor scratch per order: real and imaginary parts of w_i e^{−jnθ_i}.
    re: Vec<Vec<f64>>,
    im: Vec<Vec<f64>>,
    sums: Vec<ChannelSums>,
    /// Kernel sums Σ w e^{−jnθ} per order, and Σ w (turns).
    s1: Vec<Complex64>,
    w: f64,
    revs_in_block: u32,
    block_first: u64,
    block_start: f64,
    last_end: f64,
}

impl VectorCalculator {
    /// A calculator for `channels` channels.
    pub fn new(cfg: &VectorConfig, channels: usize) -> Result<Self, VectorError> {
        cfg.validate()?;
        let k = cfg.orders.len();
        Ok(Self {
            orders: cfg.orders.clone(),
            revs_per_vector: cfg.revs_per_vector,
            channels,
            base_re: vec![0.0; RESTART],
            base_im: vec![0.0; RESTART],
            wt: vec![0.0; RESTART],
            re: vec![vec![0.0; RESTART]; k],
            im: vec![vec![0.0; RESTART]; k],
            sums: vec![
                ChannelSums {
                    m: 0.0,
                    s: vec![Complex64::new(0.0, 0.0); k]
                };
                channels
            ],
            s1: vec![Complex64::new(0.0, 0.0); k],
            w: 0.0,
            revs_in_block: 0,
            block_first: 0,
            block_start: 0.0,
            last_end: f64::NAN,
        })
    }

    /// The orders computed, in the order of [`RevVectors::vectors`].
    pub fn orders(&self) -> &[u32] {
        &self.orders
    }

    /// Discards a partly collected block (after a loss of the tach or a gap in the data).
    pub fn reset(&mut self) {
        self.revs_in_block = 0;
        self.w = 0.0;
        for s in &mut self.s1 {
            *s = Complex64::new(0.0, 0.0);
        }
        for c in &mut self.sums {
            c.m = 0.0;
            for s in &mut c.s {
                *s = Complex64::new(0.0, 0.0);
            }
        }
        self.last_end = f64::NAN;
    }

    /// Adds one revolution. `channels[c][i]` is channel `c` at time `first_time + i/fs`; the slices must
    /// cover the revolution and one sample either side. Returns the block's vectors once it holds
    /// `revs_per_vector` consecutive revolutions; `None` if the slices do not cover the revolution.
    pub fn process(
        &mut self,
        rev: &Revolution,
        first_time: f64,
        fs: f64,
        channels: &[&[f32]],
    ) -> Option<RevVectors> {
        debug_assert_eq!(channels.len(), self.channels);
        let len = channels.iter().map(|c| c.len()).min().unwrap_or(0);
        let dt = 1.0 / fs;
        let pos_a = (rev.t_start - first_time) * fs;
        let pos_b = (rev.t_end - first_time) * fs;
        let ia = pos_a.round();
        let ib = pos_b.round();
        if ia < 0.0 || ib + 1.0 > len as f64 || ib <= ia {
            return None;
        }
        // A revolution that does not follow the previous one starts a new block.
        if self.revs_in_block > 0 && (rev.t_start - self.last_end).abs() > 0.5 * dt {
            self.reset();
        }
        if self.revs_in_block == 0 {
            self.block_first = rev.index;
            self.block_start = rev.t_start;
        }
        let (ia, ib) = (ia as usize, ib as usize);
        // Partial weights of the end cells: the share of [t_i − dt/2, t_i + dt/2] inside the turn.
        let wa = ia as f64 + 0.5 - pos_a;
        let wb = pos_b - (ib as f64 - 0.5);
        let n = ib - ia + 1;
        let t_first = first_time + ia as f64 * dt;
        let mut weights_total = 0.0;
        // Tiles of RESTART samples keep every scratch array in the L1 cache, whatever the length of
        // the revolution (a slow-roll turn at 25.6 kHz holds ten thousand samples and more).
        let mut from = 0;
        while from < n {
            let len = RESTART.min(n - from);
            self.fill_tile(rev, t_first, dt, from, len, n, wa, wb);
            weights_total += sum4(&self.wt[..len]);
            for k in 0..self.orders.len() {
                let s = Complex64::new(sum4(&self.re[k][..len]), sum4(&self.im[k][..len]));
                self.s1[k] += s;
            }
            for (c, x) in channels.iter().enumerate() {
                let x = &x[ia + from..ia + from + len];
                self.sums[c].m += dot1(x, &self.wt[..len]);
                for k in 0..self.orders.len() {
                    let (sr, si) = dot2(x, &self.re[k][..len], &self.im[k][..len]);
                    self.sums[c].s[k] += Complex64::new(sr, si);
                }
            }
            from += len;
        }
        self.w += weights_total;
        self.revs_in_block += 1;
        self.last_end = rev.t_end;
        if self.revs_in_block < self.revs_per_vector {
            return None;
        }
        Some(self.finish_block(rev.t_end))
    }

    fn finish_block(&mut self, t_end: f64) -> RevVectors {
        let k = self.orders.len();
        let w = self.w;
        let mut vectors = Vec::with_capacity(self.channels * k);
        let mut dc = Vec::with_capacity(self.channels);
        for c in &self.sums {
            let mean = c.m / w;
            dc.push(mean);
            for j in 0..k {
                vectors.push((c.s[j] - self.s1[j] * mean) * (2.0 / w));
            }
        }
        let revs = f64::from(self.revs_in_block);
        let out = RevVectors {
            first_rev: self.block_first,
            t_start: self.block_start,
            t_end,
            speed_rpm: 60.0 * revs / (t_end - self.block_start),
            vectors,
            dc,
        };
        self.reset();
        out
    }

    /// Fills the scratch for the tile of `len` samples starting `from` samples after the first
    /// sample of the revolution (at time `t_first`; the revolution holds `n` samples): the angle
    /// weights and, per order, the weighted phasors `w_i e^{−jnθ_i}`. `wa` and `wb` are the shares
    /// of the revolution's first and last sampling cells inside it.
    #[allow(clippy::too_many_arguments)]
    fn fill_tile(
        &mut self,
        rev: &Revolution,
        t_first: f64,
        dt: f64,
        from: usize,
        len: usize,
        n: usize,
        wa: f64,
        wb: f64,
    ) {
        // The angle advanced per sample, in turns: dθ/dt·dt, linear in time for the quadratic model.
        // Weighting by it makes the sum an integral over angle, not time, so that on a fast run-up the
        // later (faster) samples of the turn count for the larger angle they cover.
        let tau0 = t_first + from as f64 * dt - rev.t_start;
        let (w0, dw) = ((rev.c1 + 2.0 * rev.c2 * tau0) * dt, 2.0 * rev.c2 * dt * dt);
        for (i, w) in self.wt[..len].iter_mut().enumerate() {
            *w = w0 + dw * i as f64;
        }
        if from == 0 {
            self.wt[0] *= wa;
        }
        if from + len == n {
            self.wt[len - 1] *= wb;
        }
        // θ_i = 2π(c1 τ_i + c2 τ_i²). The phasor e^{−jθ_i} comes from a chirp recurrence (the step
        // itself rotates by a constant, the angle's second difference), run in LANES interleaved
        // chains so that the multiply latency of one chain hides behind the others; each tile
        // restarts every chain from an exact sin_cos so rounding cannot accumulate.
        let t_tile = t_first + from as f64 * dt;
        let theta = |i: usize| TAU * rev.frac_at(t_tile + i as f64 * dt);
        // Second difference of θ over LANES samples: 2π·2·c2·(LANES·dt)².
        let lanes_dt = LANES as f64 * dt;
        let q = Complex64::from_polar(1.0, -TAU * 2.0 * rev.c2 * lanes_dt * lanes_dt);
        let (q_re, q_im) = (q.re, q.im);
        let (re1, im1) = (&mut self.base_re[..len], &mut self.base_im[..len]);
        let mut p_re = [0.0; LANES];
        let mut p_im = [0.0; LANES];
        let mut r_re = [0.0; LANES];
        let mut r_im = [0.0; LANES];
        for l in 0..LANES {
            let (th0, th1) = (theta(l), theta(l + LANES));
            let (s0, c0) = (-th0).sin_cos();
            let (s1, c1) = (-(th1 - th0)).sin_cos();
            p_re[l] = c0;
            p_im[l] = s0;
            r_re[l] = c1;
            r_im[l] = s1;
        }
        let full = len / LANES * LANES;
        let mut i = 0;
        while i < full {
            for l in 0..LANES {
                re1[i + l] = p_re[l];
                im1[i + l] = p_im[l];
                let (pr, pi) = (p_re[l], p_im[l]);
                let (rr, ri) = (r_re[l], r_im[l]);
                p_re[l] = pr * rr - pi * ri;
                p_im[l] = pr * ri + pi * rr;
                r_re[l] = rr * q_re - ri * q_im;
                r_im[l] = rr * q_im + ri * q_re;
            }
            i += LANES;
        }
        for (l, j) in (full..len).enumerate() {
            re1[j] = p_re[l];
            im1[j] = p_im[l];
        }
        // Each order as a power of the first, e^{−jnθ} = (e^{−jθ})^n, times the weight.
        for k in 0..self.orders.len() {
            power_into(
                &self.base_re[..len],
                &self.base_im[..len],
                &self.wt[..len],
                self.orders[k],
                &mut self.re[k][..len],
                &mut self.im[k][..len],
            );
        }
    }
}

/// `out = w·(re + j·im)^order`, elementwise.
fn power_into(
    re: &[f64],
    im: &[f64],
    w: &[f64],
    order: u32,
    out_re: &mut [f64],
    out_im: &mut [f64],
) {
    let n = re
        .len()
        .min(im.len())
        .min(w.len())
        .min(out_re.len())
        .min(out_im.len());
    for i in 0..n {
        let b = Complex64::new(re[i], im[i]);
        let mut p = b;
        for _ in 1..order {
            p *= b;
        }
        out_re[i] = w[i] * p.re;
        out_im[i] = w[i] * p.im;
    }
}

/// `Σ x·w` in four lanes.
fn dot1(x: &[f32], w: &[f64]) -> f64 {
    let mut acc = [0.0f64; 4];
    let n = x.len().min(w.len());
    let (x, w) = (&x[..n], &w[..n]);
    let full = n / 4 * 4;
    for i in (0..full).step_by(4) {
        for l in 0..4 {
            acc[l] += f64::from(x[i + l]) * w[i + l];
        }
    }
    let tail: f64 = (full..n).map(|i| f64::from(x[i]) * w[i]).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// Sum in four independent lanes, so the compiler can keep several additions in flight.
fn sum4(x: &[f64]) -> f64 {
    let mut acc = [0.0f64; 4];
    let chunks = x.chunks_exact(4);
    let rem = chunks.remainder();
    for c in chunks {
        for l in 0..4 {
            acc[l] += c[l];
        }
    }
    let tail: f64 = rem.iter().sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// `(Σ x·re, Σ x·im)` in four lanes.
fn dot2(x: &[f32], re: &[f64], im: &[f64]) -> (f64, f64) {
    let mut ar = [0.0f64; 4];
    let mut ai = [0.0f64; 4];
    let n = x.len().min(re.len()).min(im.len());
    let (x, re, im) = (&x[..n], &re[..n], &im[..n]);
    let full = n / 4 * 4;
    for i in (0..full).step_by(4) {
        for l in 0..4 {
            let v = f64::from(x[i + l]);
            ar[l] += v * re[i + l];
            ai[l] += v * im[i + l];
        }
    }
    let mut tr = 0.0;
    let mut ti = 0.0;
    for i in full..n {
        let v = f64::from(x[i]);
        tr += v * re[i];
        ti += v * im[i];
    }
    (
        (ar[0] + ar[1]) + (ar[2] + ar[3]) + tr,
        (ai[0] + ai[1]) + (ai[2] + ai[3]) + ti,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::types::{from_amp_lag, lag_deg};

    /// Samples of `dc + Σ A_n cos(n θ(t) − φ_n)` for θ(t) = 2π(f0 t + a t²/2), and the revolutions.
    fn signal(
        fs: f64,
        f0: f64,
        a: f64,
        secs: f64,
        dc: f64,
        comps: &[(u32, f64, f64)],
    ) -> (Vec<f32>, Vec<Revolution>) {
        let n = (secs * fs) as usize;
        let theta = |t: f64| f0 * t + 0.5 * a * t * t;
        let x = (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                let th = TAU * theta(t);
                let mut v = dc;
                for &(ord, amp, lag) in comps {
                    v += amp * (f64::from(ord) * th - lag.to_radians()).cos();
                }
                v as f32
            })
            .collect();
        // Exact revolutions with their exact quadratic angle model.
        let mut revs = Vec::new();
        let time_of = |turn: f64| {
            if a == 0.0 {
                turn / f0
            } else {
                (-f0 + (f0 * f0 + 2.0 * a * turn).sqrt()) / a
            }
        };
        let mut k = 0u64;
        loop {
            let t0 = time_of(k as f64);
            let t1 = time_of(k as f64 + 1.0);
            if t1 > secs - 2.0 / fs {
                break;
            }
            let c1 = f0 + a * t0;
            let c2 = 0.5 * a;
            revs.push(Revolution {
                index: k,
                t_start: t0,
                t_end: t1,
                c1,
                c2,
            });
            k += 1;
        }
        (x, revs)
    }

    #[test]
    fn orders_and_phases_at_constant_speed() {
        // 1X 20 at 30° lag, 2X 5 at 200° lag, a DC gap of −800 (proximity probe in µm-equivalent).
        let fs = 5000.0;
        let (x, revs) = signal(
            fs,
            23.7,
            0.0,
            2.0,
            -800.0,
            &[(1, 20.0, 30.0), (2, 5.0, 200.0)],
        );
        let mut calc = VectorCalculator::new(&VectorConfig::default(), 1).expect("valid");
        let mut got = 0;
        for r in &revs {
            let v = calc
                .process(r, 0.0, fs, &[&x])
                .expect("one vector per turn");
            got += 1;
            let (v1, v2) = (v.vectors[0], v.vectors[1]);
            // Tolerances: f32 samples with a DC 40 times the 1X carry about 1e-5 relative rounding.
            assert!((v1.norm() - 20.0).abs() < 2e-3, "1X {}", v1.norm());
            assert!((lag_deg(v1) - 30.0).abs() < 0.01, "1X lag {}", lag_deg(v1));
            assert!((v2.norm() - 5.0).abs() < 2e-3, "2X {}", v2.norm());
            assert!((lag_deg(v2) - 200.0).abs() < 0.05);
            assert!((v.dc[0] + 800.0).abs() < 1e-2);
            assert!((v.speed_rpm - 23.7 * 60.0).abs() < 1e-6);
        }
        assert_eq!(got, revs.len());
    }

    #[test]
    fn quadratic_angle_keeps_orders_apart_on_a_fast_run_up() {
        // 10 → 30 rev/s in 2 s (600 rpm/s): with the chirp the 1X is exact to sampling precision.
        let fs = 10_000.0;
        let (x, revs) = signal(fs, 10.0, 10.0, 2.0, 3.0, &[(1, 1.0, 90.0), (3, 0.5, 10.0)]);
        let cfg = VectorConfig {
            orders: vec![1, 2, 3],
            revs_per_vector: 1,
        };
        let mut calc = VectorCalculator::new(&cfg, 1).expect("valid");
        for r in &revs {
            let v = calc.process(r, 0.0, fs, &[&x]).expect("vector");
            assert!((v.vectors[0] - from_amp_lag(1.0, 90.0)).norm() < 2e-4);
            assert!(
                v.vectors[1].norm() < 2e-4,
                "2X leak {}",
                v.vectors[1].norm()
            );
            assert!((v.vectors[2] - from_amp_lag(0.5, 10.0)).norm() < 2e-4);
        }
    }

    #[test]
    #[allow(clippy::needless_range_loop)]
    fn matches_direct_formula_with_sin_cos_per_sample() {
        // The recurrence against the obviously correct sum with sin_cos at every sample.
        let fs = 7777.0;
        let (x, revs) = signal(fs, 17.0, 4.0, 1.5, 0.0, &[(1, 2.0, 45.0), (2, 1.0, 300.0)]);
        let mut calc = VectorCalculator::new(&VectorConfig::default(), 1).expect("valid");
        for r in &revs {
            let v = calc.process(r, 0.0, fs, &[&x]).expect("vector");
            let pos_a = r.t_start * fs;
            let pos_b = r.t_end * fs;
            let (ia, ib) = (pos_a.round() as usize, pos_b.round() as usize);
            for (k, ord) in [1.0, 2.0].iter().enumerate() {
                let (mut s, mut s1, mut m, mut w) =
                    (Complex64::new(0.0, 0.0), Complex64::new(0.0, 0.0), 0.0, 0.0);
                for i in ia..=ib {
                    let share = if i == ia {
                        ia as f64 + 0.5 - pos_a
                    } else if i == ib {
                        pos_b - (ib as f64 - 0.5)
                    } else {
                        1.0
                    };
                    // Angle covered by the sample: the speed in turns/s times the sample interval.
                    let wi = share * r.rpm_at(i as f64 / fs) / 60.0 / fs;
                    let th = TAU * r.frac_at(i as f64 / fs) * ord;
                    let e = Complex64::from_polar(1.0, -th);
                    s += e * (wi * f64::from(x[i]));
                    s1 += e * wi;
                    m += wi * f64::from(x[i]);
                    w += wi;
                }
                let direct = (s - s1 * (m / w)) * (2.0 / w);
                assert!((v.vectors[k] - direct).norm() < 1e-10, "order {ord}");
            }
        }
    }

    #[test]
    fn blocks_of_revolutions_average_and_reset_on_gaps() {
        let fs = 4000.0;
        let (x, revs) = signal(fs, 20.0, 0.0, 3.0, 0.0, &[(1, 1.0, 0.0)]);
        let cfg = VectorConfig {
            orders: vec![1],
            revs_per_vector: 4,
        };
        let mut calc = VectorCalculator::new(&cfg, 2).expect("valid");
        let mut out = Vec::new();
        for (i, r) in revs.iter().enumerate() {
            if i == 9 {
                // A lost revolution: the block in progress is dropped, not stretched over the gap.
                continue;
            }
            if let Some(v) = calc.process(r, 0.0, fs, &[&x, &x]) {
                out.push(v);
            }
        }
        // Revolutions 0–3, 4–7, then 8 is dropped with the gap, then 10–13, ...
        assert_eq!(out[0].first_rev, 0);
        assert_eq!(out[1].first_rev, 4);
        assert_eq!(out[2].first_rev, 10);
        for v in &out {
            assert!((v.vectors[0] - Complex64::new(1.0, 0.0)).norm() < 1e-4);
            assert_eq!(v.vectors[0], v.vectors[1]);
        }
    }

    #[test]
    fn non_unit_first_order_and_bad_settings() {
        let fs = 3000.0;
        let (x, revs) = signal(fs, 15.0, 0.0, 1.0, 0.0, &[(2, 1.5, 60.0)]);
        let cfg = VectorConfig {
            orders: vec![2],
            revs_per_vector: 1,
        };
        let mut calc = VectorCalculator::new(&cfg, 1).expect("valid");
        let v = calc.process(&revs[3], 0.0, fs, &[&x]).expect("vector");
        assert!((v.vectors[0] - from_amp_lag(1.5, 60.0)).norm() < 1e-3);
        let bad = VectorConfig {
            orders: vec![0],
            revs_per_vector: 1,
        };
        assert!(VectorCalculator::new(&bad, 1).is_err());
        // A slice that does not cover the revolution is refused, not read out of bounds.
        assert!(calc.process(&revs[3], 0.0, fs, &[&x[..100]]).is_none());
    }
}
