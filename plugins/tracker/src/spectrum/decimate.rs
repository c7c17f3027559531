//! Decimation ahead of the anti-alias low-pass, for low shaft speeds.
//!
//! The tracking low-pass needs its cutoff (25.6 orders with the defaults) and the resampler needs
//! 64 points per revolution, but the raw rate does not follow the speed: at 400 r/min and 25.6 kHz
//! the cutoff is 171 Hz, 1/150 of the sample rate, and the eight-pole recurrence would run on 60
//! raw samples for every angle sample it feeds. So when `fs / cutoff` is large the raw samples are
//! first decimated by an integer `D` with a third-order CIC (cascaded integrator-comb) filter
//! (E. B. Hogenauer, "An economical class of digital filters for decimation and interpolation",
//! IEEE Trans. ASSP 29(2), 1981; pages 155–162 from memory), whose response is
//!
//! `|H(f)| = |sin(π f D / fs) / (D sin(π f / fs))|³`,
//!
//! and the Butterworth then runs at `fs / D`. `D` is chosen so that the decimated rate stays at least
//! [`MIN_RATE_OF_CUTOFF`] = 12 times the cutoff. With that margin (numbers from the closed form,
//! checked in the tests):
//!
//! - **Alias rejection.** What folds onto the pass band `0 … fc` after decimation comes from within
//!   `fc` of a multiple of `fs / D`, near the CIC's triple zeros: at least 53 dB down (D = 2), 62 dB
//!   for D ≥ 8; with the Butterworth's own rejection of what lands above `fc`, nothing that could
//!   reach the order map is less than 55 dB down.
//! - **Droop.** The CIC alone is 2 % low at 20X (0.18 dB). A three-tap compensator at the decimated
//!   rate, `−β, 1 + 2β, −β` with `β = (1 − 1/D²)/8`, is the inverse of the droop's second-order term
//!   (`|H| ≈ 1 − (1 − 1/D²)·w²/8` at `w = 2π f D / fs`, from the series of the closed form), and leaves
//!   less than 0.06 % at 20X. The amplitudes therefore need no per-bin correction, and each spectrum
//!   stays exactly the scaled DFT of its resampled block.
//! - **Interpolation.** The cubic resampler then works at `f / (fs/D) ≤ 1/12` at the cutoff, within
//!   the range it already meets at high speed on the raw samples (see [`super::resample`]).
//! - **Look-ahead.** The CIC is a symmetric FIR whose centre lies `3(D − 1)/2` input samples before
//!   its newest input, and the compensator adds one decimated sample; the time mapping accounts for
//!   both, so the filtered stream is not shifted against the raw one. The last angle point of a
//!   revolution then needs raw samples up to `4.5·D − 1.5` after it (`3(D − 1)/2` to the CIC's
//!   newest input, `D` for the compensator, `2D` for the interpolation's two points beyond), which
//!   is less than the `1/samples_per_rev` of a revolution that separates it from the revolution's
//!   end whenever the decimated rate is at least 11.25 × the cutoff (the cutoff being
//!   `0.4 × samples_per_rev` orders). At 12 × the margin is 6 % of an angle step: only a revolution
//!   whose speed changes by more than about 12 % within itself would find its last outputs
//!   missing, and be dropped like one whose samples are not there.
//!
//! **FIR form.** Hogenauer's structure (integrators at the input rate, combs at the output rate) is
//! a running-sum recurrence: three dependent additions per input sample, and with floating-point
//! input the third integrator grows like `n³` and loses the signal's low digits unless it is reset
//! often. The same response is computed here non-recursively, as a dot product of the `3D − 2`
//! integer taps of the cascade (the coefficients of `(1 + z⁻¹ + … + z^{−(D−1)})³`) with the inputs,
//! once per output: three multiply-adds per input sample, no loop-carried dependency beyond
//! independent accumulators, exact to `f64` rounding and with no state to drift.

/// The decimated rate is kept at least this many times the anti-alias cutoff, at every revolution.
pub const MIN_RATE_OF_CUTOFF: f64 = 12.0;

/// Largest decimation factor used: beyond it (cutoffs below `fs / 49 152`, a few r/min) the taps'
/// table would outgrow its use.
pub const MAX_FACTOR: usize = 4096;

/// Closed-form magnitude of the third-order CIC of decimation `d` at `f_hz`, normalised to unit DC
/// gain (Hogenauer 1981).
pub fn cic_magnitude(f_hz: f64, sample_rate: f64, d: usize) -> f64 {
    let x = std::f64::consts::PI * f_hz / sample_rate;
    let den = d as f64 * x.sin();
    if den.abs() < 1e-300 {
        return 1.0;
    }
    ((d as f64 * x).sin() / den).abs().powi(3)
}

/// The droop compensator's coefficient `β` for decimation `d` (0 when `d = 1`).
pub fn compensator_beta(d: usize) -> f64 {
    let d = d as f64;
    (1.0 - 1.0 / (d * d)) / 8.0
}

/// Gain of the compensator `−β, 1 + 2β, −β` at `f_hz` on a stream at `decimated_rate`: a real,
/// zero-phase `1 + 2β(1 − cos w)`.
pub fn compensator_gain(f_hz: f64, decimated_rate: f64, d: usize) -> f64 {
    let w = std::f64::consts::TAU * f_hz / decimated_rate;
    1.0 + 2.0 * compensator_beta(d) * (1.0 - w.cos())
}

/// Largest decimation factor that keeps the decimated rate at least [`MIN_RATE_OF_CUTOFF`] times
/// `cutoff_hz`; 1 (no decimation) when even 2 would not, or when the cutoff is not a positive
/// number.
pub fn factor_for(sample_rate: f64, cutoff_hz: f64) -> usize {
    let ratio = sample_rate / (MIN_RATE_OF_CUTOFF * cutoff_hz);
    if ratio >= 2.0 && ratio.is_finite() {
        (ratio.floor() as usize).min(MAX_FACTOR)
    } else {
        1
    }
}

/// The CIC taps of decimation `d`: the `3d − 2` coefficients of `(1 + z⁻¹ + … + z^{−(d−1)})³`,
/// which count the ways of writing `k` as a sum of three integers in `0..d`:
/// `C(k+2, 2) − 3·C(k−d+2, 2) + 3·C(k−2d+2, 2)` (inclusion–exclusion, common practice). They are
/// symmetric and sum to `d³`.
pub fn cic_taps(d: usize) -> Vec<f64> {
    let c2 = |n: i64| {
        if n >= 2 {
            (n * (n - 1) / 2) as f64
        } else {
            0.0
        }
    };
    let d = d.max(1) as i64;
    (0..3 * d - 2)
        .map(|k| c2(k + 2) - 3.0 * c2(k - d + 2) + 3.0 * c2(k - 2 * d + 2))
        .collect()
}

/// A third-order CIC decimator in FIR form: one output per call, from the `taps().len()` inputs
/// that end at the output's newest sample.
#[derive(Clone, Debug)]
pub struct Cic {
    d: usize,
    taps: Vec<f64>,
    scale: f64,
}

impl Cic {
    /// A decimator by `d` (at least 1; a larger one is clamped to [`MAX_FACTOR`]).
    pub fn new(d: usize) -> Self {
        let d = d.clamp(1, MAX_FACTOR);
        let taps = cic_taps(d);
        Self {
            d,
            taps,
            scale: 1.0 / (d as f64).powi(3),
        }
    }

    /// Decimation factor.
    pub fn factor(&self) -> usize {
        self.d
    }

    /// Inputs each output depends on, `3d − 2`.
    pub fn support(&self) -> usize {
        self.taps.len()
    }

    /// The output whose newest input is the last of `xs`; `xs` holds exactly
    /// [`support`](Self::support) inputs, oldest first (fewer or more give a truncated sum). The
    /// taps are symmetric, so they need no reversal. Eight independent accumulators keep the sum off
    /// the adder's latency.
    pub fn output(&self, xs: &[f32]) -> f64 {
        let mut acc = [0.0f64; 8];
        let mut hc = self.taps.chunks_exact(8);
        let mut xc = xs.chunks_exact(8);
        for (h, x) in (&mut hc).zip(&mut xc) {
            for i in 0..8 {
                acc[i] += h[i] * f64::from(x[i]);
            }
        }
        let mut tail = 0.0;
        for (h, x) in hc.remainder().iter().zip(xc.remainder()) {
            tail += h * f64::from(*x);
        }
        let sum = ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]));
        (sum + tail) * self.scale
    }

    /// Computes every output whose inputs lie in `xs`, the `k`-th from `xs[k·d .. k·d + support]`,
    /// and hands them to `emit` in order. Small factors, where the work per output is a handful of
    /// taps, get loops with the taps' count known at compile time, unrolled and without the
    /// general loop's set-up.
    #[inline]
    pub fn run(&self, xs: &[f32], mut emit: impl FnMut(f64)) {
        match self.d {
            2 => self.run_fixed::<4>(xs, &mut emit),
            3 => self.run_fixed::<7>(xs, &mut emit),
            4 => self.run_fixed::<10>(xs, &mut emit),
            5 => self.run_fixed::<13>(xs, &mut emit),
            6 => self.run_fixed::<16>(xs, &mut emit),
            _ => {
                for w in xs.windows(self.taps.len()).step_by(self.d) {
                    emit(self.output(w));
                }
            }
        }
    }

    fn run_fixed<const L: usize>(&self, xs: &[f32], emit: &mut impl FnMut(f64)) {
        let Ok(h) = <&[f64; L]>::try_from(&self.taps[..]) else {
            return;
        };
        for w in xs.windows(L).step_by(self.d) {
            let Ok(x) = <&[f32; L]>::try_from(w) else {
                return;
            };
            let mut acc = [0.0f64; 4];
            for i in 0..L {
                acc[i % 4] += h[i] * f64::from(x[i]);
            }
            emit(((acc[0] + acc[1]) + (acc[2] + acc[3])) * self.scale);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const TAU: f64 = std::f64::consts::TAU;

    /// The taps by direct convolution of three boxcars of length `d`: the slow reference.
    fn taps_by_convolution(d: usize) -> Vec<f64> {
        let boxcar = vec![1.0; d];
        let conv = |a: &[f64], b: &[f64]| {
            let mut out = vec![0.0; a.len() + b.len() - 1];
            for (i, x) in a.iter().enumerate() {
                for (j, y) in b.iter().enumerate() {
                    out[i + j] += x * y;
                }
            }
            out
        };
        conv(&conv(&boxcar, &boxcar), &boxcar)
    }

    #[test]
    fn taps_are_the_cascade_of_three_boxcars() {
        for d in [1, 2, 3, 5, 8, 13, 40] {
            let taps = cic_taps(d);
            assert_eq!(taps, taps_by_convolution(d), "d = {d}");
            let sum: f64 = taps.iter().sum();
            assert_eq!(sum, (d * d * d) as f64);
        }
    }

    /// Gain of the decimated output for a unit cosine at `f` (cycles per input sample): least
    /// squares on the input cosine and its quadrature, both taken at the outputs' centre times.
    /// The quadrature part must vanish (the symmetric FIR, centred, adds no delay).
    fn measured_gain(d: usize, f: f64) -> f64 {
        let cic = Cic::new(d);
        let l = cic.support();
        let n_out = 4000;
        let n_in = l + d * n_out;
        let phase = 0.4;
        let x: Vec<f32> = (0..n_in)
            .map(|i| (TAU * f * i as f64 + phase).cos() as f32)
            .collect();
        let (mut cc, mut cs, mut ss, mut yc, mut ys) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for m in 0..n_out {
            let newest = l - 1 + m * d;
            let y = cic.output(&x[newest + 1 - l..=newest]);
            // Output m is centred on input newest − 3(d − 1)/2.
            let t = newest as f64 - 1.5 * (d as f64 - 1.0);
            let (s, c) = (TAU * f * t + phase).sin_cos();
            cc += c * c;
            cs += c * s;
            ss += s * s;
            yc += y * c;
            ys += y * s;
        }
        let det = cc * ss - cs * cs;
        let a = (yc * ss - ys * cs) / det;
        let b = (ys * cc - yc * cs) / det;
        assert!(
            b.abs() < 1e-8 + 1e-6 * a.abs(),
            "d {d} f {f}: quadrature {b:e} of {a:e}"
        );
        a.abs()
    }

    #[test]
    fn measured_response_matches_closed_form() {
        // Hogenauer 1981: |H| = |sin(π f D) / (D sin(π f))|³, f in cycles per input sample. In the
        // pass band, at 1/12 of the decimated rate (the lowest rate kept per unit cutoff), and in the
        // first folding band on both sides of its null, where the output is an alias. The inputs are
        // f32, whose rounding (6e-8) sets the absolute tolerance.
        for d in [2usize, 3, 7, 16, 50] {
            let fd = 1.0 / d as f64;
            let freqs = [0.003 * fd, fd / 12.0, 0.3 * fd, 0.94 * fd, 1.02 * fd];
            // Only tones below the input's own Nyquist (1.02 × fd is above it for d = 2).
            for f in freqs.into_iter().filter(|&f| f < 0.5) {
                let want = cic_magnitude(f, 1.0, d);
                let got = measured_gain(d, f);
                assert!(
                    (got - want).abs() < 1e-8 + 1e-6 * want,
                    "d {d} f {f:.5}: measured {got:.6e}, closed form {want:.6e}, diff {:.2e}",
                    got - want
                );
            }
        }
    }

    #[test]
    fn run_matches_output_for_every_kernel() {
        // The unrolled small-factor loops and the general one against the plain dot product.
        let mut state = 7u64;
        let xs: Vec<f32> = (0..997)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                ((state >> 40) as f64 / (1u64 << 24) as f64 - 0.5) as f32
            })
            .collect();
        for d in [2usize, 3, 4, 5, 6, 7, 13] {
            let cic = Cic::new(d);
            let l = cic.support();
            let mut got = Vec::new();
            cic.run(&xs, |c| got.push(c));
            let want: Vec<f64> = (0..)
                .map(|k| k * d)
                .take_while(|&o| o + l <= xs.len())
                .map(|o| cic.output(&xs[o..o + l]))
                .collect();
            assert_eq!(got.len(), want.len(), "d {d}");
            for (g, w) in got.iter().zip(&want) {
                assert!((g - w).abs() < 1e-15, "d {d}: {g} vs {w}");
            }
        }
    }

    #[test]
    fn margins_quoted_in_the_module_docs() {
        // From the closed forms, with the decimated rate at its lowest, 12 × the cutoff, and the
        // cutoff at 25.6 orders (the defaults). The Butterworth's rejection above the cutoff is
        // taken from the analog prototype, 1/√(1 + (f/fc)^16) (the bilinear one at fs/D is higher).
        for d in [2usize, 3, 8, 40] {
            let fd = 1.0 / d as f64;
            let fc = fd / MIN_RATE_OF_CUTOFF;
            let at_order = |o: f64| o * fc / 25.6;
            let droop20 = 1.0 - cic_magnitude(at_order(20.0), 1.0, d);
            assert!(droop20 > 0.015 && droop20 < 0.021, "d {d}: droop {droop20}");
            for k in 0..=200 {
                let f = at_order(20.0 * k as f64 / 200.0);
                let g = cic_magnitude(f, 1.0, d) * compensator_gain(f, fd, d);
                assert!((g - 1.0).abs() < 6e-4, "d {d}: compensated {g} at {f}");
            }
            let in_band = if d >= 8 { 62.0 } else { 53.0 };
            let mut worst_in = f64::INFINITY;
            let mut worst_all = f64::INFINITY;
            for j in 1..=d / 2 {
                for k in 0..=1000 {
                    let fa = 0.5 * fd * k as f64 / 1000.0;
                    for f in [j as f64 * fd - fa, j as f64 * fd + fa] {
                        if !(f > 0.0 && f < 0.5) {
                            continue;
                        }
                        let cic_db = -20.0 * cic_magnitude(f, 1.0, d).log10();
                        let bw_db = 10.0 * (1.0 + (fa / fc).powi(16)).log10();
                        if fa <= fc {
                            worst_in = worst_in.min(cic_db);
                        }
                        worst_all = worst_all.min(cic_db + bw_db);
                    }
                }
            }
            assert!(worst_in >= in_band, "d {d}: in band {worst_in:.1} dB");
            assert!(worst_all >= 55.0, "d {d}: overall {worst_all:.1} dB");
        }
    }

    #[test]
    fn factor_keeps_the_rate_margin() {
        for (fs, fc) in [
            (25_600.0, 171.0),
            (51_200.0, 128.0),
            (25_600.0, 1000.0),
            (8000.0, 3000.0),
        ] {
            let d = factor_for(fs, fc);
            if d > 1 {
                // The largest factor that keeps the margin.
                assert!(fs / d as f64 >= MIN_RATE_OF_CUTOFF * fc);
                assert!(fs / ((d + 1) as f64) < MIN_RATE_OF_CUTOFF * fc);
            } else {
                assert!(fs / 2.0 < MIN_RATE_OF_CUTOFF * fc);
            }
        }
        assert_eq!(factor_for(25_600.0, f64::NAN), 1);
        assert_eq!(factor_for(25_600.0, 0.0), 1);
        assert_eq!(factor_for(1e9, 1e-3), MAX_FACTOR);
    }
}
