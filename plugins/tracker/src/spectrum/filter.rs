//! The tracking anti-alias low-pass applied to raw samples before angle resampling.
//!
//! A Butterworth low-pass built as a cascade of second-order sections, each designed with the
//! low-pass formulas of R. Bristow-Johnson's "Cookbook formulae for audio EQ biquad filter
//! coefficients" (the bilinear transform of `1 / (s² + s/Q + 1)`, pre-warped at the cutoff). With
//! the sections' Q set to the Butterworth pole pairs, `Q_k = 1 / (2 sin((2k − 1)π / 2n))` for
//! `k = 1 … n/2` (pole positions of the Butterworth polynomial; A. V. Oppenheim & R. W. Schafer,
//! "Discrete-Time Signal Processing", 3rd ed., §7.2 — from memory), the cascade is exactly the
//! bilinear-transformed Butterworth of order `n`:
//! `|H(f)|² = 1 / (1 + (tan(πf/fs) / tan(πfc/fs))^{2n})`.
//!
//! **Order.** The anti-alias filter has eight poles ([`AntiAliasFilter`], four sections). Four poles
//! are not enough here: with the cutoff at 0.8 × the angle Nyquist (25.6 orders at 64 samples per
//! revolution), an order-50 component, which folds onto order 14, is only 23 dB down after a
//! fourth-order Butterworth (`10·log10(1 + (50/25.6)^8)`), against 47 dB after the eighth-order
//! one. The eighth order also keeps the pass band flatter: −0.08 dB at 20X instead of −0.56 dB.
//!
//! **Structure and precision.** Each section runs in transposed direct form II, which needs two
//! state variables and keeps its internal signals within the range of the output for a low-pass
//! (common practice; J. O. Smith, "Introduction to Digital Filters", 2007, "Transposed Direct
//! Forms"). State and coefficients are `f64`: at slow roll the cutoff can be below 10⁻³·fs, where
//! the poles crowd `z = 1` and an `f32` section's coefficients (the term `1 − cos ω0 ≈ ω0²/2`) and
//! round-off lose several digits; on 64-bit CPUs an `f64` multiply-add costs the same as an `f32`
//! one in this serial recurrence, so there is nothing to gain from `f32`.

/// Cutoffs above this fraction of the sample rate bypass the filter: the angle sampling rate is
/// then higher than the raw one and the acquisition has already band-limited the signal.
pub const BYPASS_FRACTION: f64 = 0.45;

/// One second-order section in transposed direct form II, with `a0` normalised to 1.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
struct Biquad {
    b0: f64,
    b1: f64,
    b2: f64,
    a1: f64,
    a2: f64,
    s1: f64,
    s2: f64,
    /// Last two inputs and outputs `[x₋₁, x₋₂, y₋₁, y₋₂]`, recorded at the end of each run of
    /// samples so that a retune can rebuild the state for the new coefficients.
    hist: [f64; 4],
}

impl Biquad {
    /// Cookbook low-pass coefficients for cutoff `w0` (rad/sample) and quality factor `q`,
    /// keeping the current state so that a retune does not restart the filter.
    fn set_lowpass(&mut self, w0: f64, q: f64) {
        let (sin, cos) = w0.sin_cos();
        let alpha = sin / (2.0 * q);
        let a0 = 1.0 + alpha;
        let b1 = (1.0 - cos) / a0;
        self.b0 = 0.5 * b1;
        self.b1 = b1;
        self.b2 = 0.5 * b1;
        self.a1 = -2.0 * cos / a0;
        self.a2 = (1.0 - alpha) / a0;
    }

    /// Sets the state to the steady state for a constant input `x` (unit DC gain: output `x`), so
    /// that a probe's DC gap voltage does not start the filter with a step.
    fn prime(&mut self, x: f64) {
        self.s2 = (self.b2 - self.a2) * x;
        self.s1 = (self.b1 - self.a1) * x + self.s2;
        self.hist = [x; 4];
    }

    /// Rebuilds the transposed-form state from the last two inputs and outputs with the current
    /// coefficients: the section then continues as a direct form I section would after a
    /// coefficient change, whose state is the signal itself. Left alone, the transposed form's
    /// state (which mixes signal and old coefficients) would jump, a transient that costs 0.2 % of
    /// the 1X amplitude in a 20 rev/s² run-up (0.05 % with the rebuild, about what a fixed cutoff
    /// costs).
    fn rebuild_state(&mut self) {
        let [x1, x2, y1, y2] = self.hist;
        self.s1 = self.b1 * x1 + self.b2 * x2 - self.a1 * y1 - self.a2 * y2;
        self.s2 = self.b2 * x1 - self.a2 * y1;
    }

    /// Complex response at `w` rad/sample.
    fn response(&self, w: f64) -> (f64, f64) {
        // H = (b0 + b1 z⁻¹ + b2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²), z⁻¹ = e^{−jw}.
        let (s1, c1) = w.sin_cos();
        let (s2, c2) = (2.0 * w).sin_cos();
        let num = (
            self.b0 + self.b1 * c1 + self.b2 * c2,
            -(self.b1 * s1 + self.b2 * s2),
        );
        let den = (
            1.0 + self.a1 * c1 + self.a2 * c2,
            -(self.a1 * s1 + self.a2 * s2),
        );
        let d = den.0 * den.0 + den.1 * den.1;
        (
            (num.0 * den.0 + num.1 * den.1) / d,
            (num.1 * den.0 - num.0 * den.1) / d,
        )
    }
}

/// A Butterworth low-pass of order `2·S` whose cutoff can be retuned between blocks of samples.
#[derive(Clone, Debug)]
pub struct TrackingLowPass<const S: usize> {
    sections: [Biquad; S],
    q: [f64; S],
    sample_rate: f64,
    cutoff_hz: Option<f64>,
    primed: bool,
}

/// The anti-alias filter of the order tracker: eighth-order Butterworth, four sections.
pub type AntiAliasFilter = TrackingLowPass<4>;

impl<const S: usize> TrackingLowPass<S> {
    /// A filter for samples at `sample_rate` Hz, bypassed until a cutoff is set.
    pub fn new(sample_rate: f64) -> Self {
        let n = (2 * S) as f64;
        let mut q = [0.0; S];
        for (k, qk) in q.iter_mut().enumerate() {
            *qk = 1.0 / (2.0 * ((2 * k + 1) as f64 * std::f64::consts::PI / (2.0 * n)).sin());
        }
        Self {
            sections: [Biquad::default(); S],
            q,
            sample_rate,
            cutoff_hz: None,
            primed: false,
        }
    }

    /// Filter order (number of poles).
    pub const fn order() -> usize {
        2 * S
    }

    /// Retunes the cutoff, keeping the state (the change between revolutions is small, so the
    /// transient is negligible). A cutoff above [`BYPASS_FRACTION`]·fs, or not positive, bypasses
    /// the filter.
    pub fn set_cutoff(&mut self, cutoff_hz: f64) {
        if !(cutoff_hz > 0.0 && cutoff_hz <= BYPASS_FRACTION * self.sample_rate) {
            self.cutoff_hz = None;
            self.primed = false;
            return;
        }
        if self.cutoff_hz == Some(cutoff_hz) {
            return;
        }
        let w0 = std::f64::consts::TAU * cutoff_hz / self.sample_rate;
        for (s, &q) in self.sections.iter_mut().zip(&self.q) {
            s.set_lowpass(w0, q);
            if self.primed {
                s.rebuild_state();
            }
        }
        self.cutoff_hz = Some(cutoff_hz);
    }

    /// Current cutoff, Hz, or `None` when bypassed.
    pub fn cutoff_hz(&self) -> Option<f64> {
        self.cutoff_hz
    }

    /// Forgets the state (samples were lost): the next sample primes it again.
    pub fn invalidate(&mut self) {
        self.primed = false;
    }

    /// Filters `xs` in place; does nothing while bypassed. The per-sample loop is the whole cost of
    /// the tracker on the raw data: `S` sections of five multiply-adds, no branches, no allocation.
    pub fn process(&mut self, xs: &mut [f32]) {
        if self.cutoff_hz.is_none() || xs.is_empty() {
            return;
        }
        let mut st = self.sections;
        if !self.primed {
            let x0 = f64::from(xs[0]);
            for s in st.iter_mut() {
                s.prime(x0);
            }
            self.primed = true;
        }
        // The per-sample loop runs each section in direct form I on its recorded history. The
        // transposed form's recurrence passes through two multiplies and two adds per sample
        // (y → s1 → y); direct form I's passes through one multiply and one subtraction
        // (y₋₁ → a1·y₋₁ → y), the feed-forward part and the a2 term being ready in advance, so it
        // runs about twice as fast. Afterwards the transposed-form state is rebuilt from the
        // history, exactly as after a retune, so both forms describe the same filter state.
        // For the cookbook low-pass b0 = b2 = b1/2.
        let mut h: [[f64; 4]; S] = [[0.0; 4]; S];
        let mut c: [[f64; 3]; S] = [[0.0; 3]; S];
        for k in 0..S {
            h[k] = st[k].hist;
            c[k] = [st[k].b0, st[k].a1, st[k].a2];
        }
        for x in xs.iter_mut() {
            let mut v = f64::from(*x);
            for k in 0..S {
                let [x1, x2, y1, y2] = h[k];
                let [b0, a1, a2] = c[k];
                let t = b0 * (v + x2 + 2.0 * x1) - a2 * y2;
                let y = t - a1 * y1;
                h[k] = [v, x1, y, y1];
                v = y;
            }
            *x = v as f32;
        }
        for k in 0..S {
            st[k].hist = h[k];
            st[k].rebuild_state();
        }
        self.sections = st;
    }

    /// Magnitude response at `f_hz` with the current cutoff (1 when bypassed).
    pub fn magnitude(&self, f_hz: f64) -> f64 {
        if self.cutoff_hz.is_none() {
            return 1.0;
        }
        let w = std::f64::consts::TAU * f_hz / self.sample_rate;
        let (mut re, mut im) = (1.0, 0.0);
        for s in &self.sections {
            let (hr, hi) = s.response(w);
            (re, im) = (re * hr - im * hi, re * hi + im * hr);
        }
        re.hypot(im)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Closed form of the bilinear-transformed Butterworth magnitude (Oppenheim & Schafer, DTSP,
    /// 3rd ed., §7.2 — from memory; follows from the pre-warped frequency map Ω = tan(ω/2)).
    fn butterworth_bilinear(f: f64, fc: f64, fs: f64, order: usize) -> f64 {
        let r = (std::f64::consts::PI * f / fs).tan() / (std::f64::consts::PI * fc / fs).tan();
        1.0 / (1.0 + r.powi(2 * order as i32)).sqrt()
    }

    #[test]
    fn cascade_matches_bilinear_butterworth() {
        let fs = 25_600.0;
        for fc in [40.0, 640.0, 5000.0] {
            let mut f8 = AntiAliasFilter::new(fs);
            f8.set_cutoff(fc);
            let mut f4 = TrackingLowPass::<2>::new(fs);
            f4.set_cutoff(fc);
            for ratio in [0.0, 0.3, 0.78, 1.0, 1.5, 1.953, 3.0] {
                let f = ratio * fc;
                let want8 = butterworth_bilinear(f, fc, fs, 8);
                let want4 = butterworth_bilinear(f, fc, fs, 4);
                assert!(
                    (f8.magnitude(f) - want8).abs() < 1e-9 * want8.max(1e-3),
                    "fc {fc} f {f}"
                );
                assert!(
                    (f4.magnitude(f) - want4).abs() < 1e-9 * want4.max(1e-3),
                    "fc {fc} f {f}"
                );
            }
            // −3 dB at the cutoff: the Butterworth definition.
            assert!((f8.magnitude(fc) - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-9);
        }
    }

    #[test]
    fn fourth_order_is_not_enough_for_order_50() {
        // Why eight poles: at 64 samples/rev the cutoff is 25.6 orders; order 50 must be ≥ 40 dB
        // down. Computed on the real sections at a typical speed (25 Hz, fs 25.6 kHz).
        let (fs, speed) = (25_600.0, 25.0);
        let fc = 25.6 * speed;
        let mut f4 = TrackingLowPass::<2>::new(fs);
        f4.set_cutoff(fc);
        let mut f8 = AntiAliasFilter::new(fs);
        f8.set_cutoff(fc);
        let db4 = -20.0 * f4.magnitude(50.0 * speed).log10();
        let db8 = -20.0 * f8.magnitude(50.0 * speed).log10();
        assert!(db4 < 30.0, "4th order {db4} dB");
        assert!(db8 > 45.0, "8th order {db8} dB");
        // Pass-band droop at 20X, the default top of the map.
        let droop8 = -20.0 * f8.magnitude(20.0 * speed).log10();
        assert!(droop8 < 0.1, "droop {droop8} dB");
    }

    #[test]
    fn time_domain_gain_matches_response_and_dc_is_primed() {
        let fs = 10_000.0;
        let mut f = AntiAliasFilter::new(fs);
        f.set_cutoff(500.0);
        // A 2 V offset plus a tone at 0.9·fc: after priming there is no start-up step, and the
        // tone's steady-state amplitude matches |H| (phasor recurrence, renormalised each step).
        let tone = 450.0;
        let want = f.magnitude(tone);
        let n = 20_000;
        let mut x = vec![0f32; n];
        let rot = num_rot(tone / fs);
        let mut p = (1.0f64, 0.0f64);
        for v in x.iter_mut() {
            *v = (2.0 + p.1) as f32;
            p = (p.0 * rot.0 - p.1 * rot.1, p.0 * rot.1 + p.1 * rot.0);
            let norm = p.0.hypot(p.1);
            p = (p.0 / norm, p.1 / norm);
        }
        let mut y = x.clone();
        f.process(&mut y[..7]);
        f.process(&mut y[7..]);
        assert!((y[0] - 2.0).abs() < 1e-6, "primed start {}", y[0]);
        let tail = &y[n / 2..];
        let peak = tail
            .iter()
            .map(|&v| (f64::from(v) - 2.0).abs())
            .fold(0.0, f64::max);
        assert!((peak - want).abs() < 2e-3 * want, "peak {peak} want {want}");
    }

    fn num_rot(f_norm: f64) -> (f64, f64) {
        let w = std::f64::consts::TAU * f_norm;
        (w.cos(), w.sin())
    }

    #[test]
    fn bypass_above_limit() {
        let mut f = AntiAliasFilter::new(1000.0);
        f.set_cutoff(460.0);
        assert_eq!(f.cutoff_hz(), None);
        let mut x = [1.0f32, -1.0, 0.5];
        f.process(&mut x);
        assert_eq!(x, [1.0, -1.0, 0.5]);
        f.set_cutoff(100.0);
        assert_eq!(f.cutoff_hz(), Some(100.0));
    }
}
