//! Data windows for the block FFT, in their periodic ("DFT-even") form.
//!
//! The periodic form `w[j] = Σ_k (−1)^k a_k cos(2π k j / N)` is the one meant for spectral analysis:
//! an on-bin tone then leaks into a fixed, small set of neighbours (F. J. Harris, "On the use of
//! windows for harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1):51–83,
//! 1978 — page numbers from memory). Its coherent gain — the mean of the window, which scales a sinusoid's DFT peak — is
//! exactly `a_0`, and amplitudes are divided by it so that a pure nX sinusoid of amplitude A reads A.

/// Window applied to each angle-domain block before the FFT.
///
/// Hann is the everyday choice: low leakage, an on-bin order leaks only into its two neighbours at
/// half amplitude. The flat top reads an off-bin component's amplitude within a fraction of a
/// percent, at the price of a main lobe five bins wide. Rectangular suits only signals that are
/// exactly periodic in the block, such as test signals.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Window {
    /// Hann (raised cosine), coherent gain 0.5 (Harris 1978, Table I — from memory).
    #[default]
    Hann,
    /// No window, coherent gain 1.
    Rectangular,
    /// Five-term flat top, coherent gain 0.21557895.
    FlatTop,
}

/// Cosine-series coefficients of the five-term flat top, from G. D'Antona & A. Ferrero, "Digital
/// Signal Processing for Measurement Systems", Springer, 2006, p. 70 (the same values are used by
/// SciPy's `signal.windows.flattop`). They sum to 1, so the window peaks at 1.
const FLAT_TOP: [f64; 5] = [
    0.21557895,
    0.41663158,
    0.277263158,
    0.083578947,
    0.006947368,
];

impl Window {
    /// Lower-case name used in logs and in exported data: `hann`, `rectangular`, `flat_top`.
    pub fn name(self) -> &'static str {
        match self {
            Window::Hann => "hann",
            Window::Rectangular => "rectangular",
            Window::FlatTop => "flat_top",
        }
    }

    /// Cosine-series coefficients `a_k` of the window.
    fn coefficients(self) -> &'static [f64] {
        match self {
            Window::Hann => &[0.5, 0.5],
            Window::Rectangular => &[1.0],
            Window::FlatTop => &FLAT_TOP,
        }
    }

    /// The periodic window of length `n`, computed once per tracker (not in any per-sample loop).
    pub fn table(self, n: usize) -> Vec<f64> {
        let a = self.coefficients();
        (0..n)
            .map(|j| {
                let x = std::f64::consts::TAU * j as f64 / n as f64;
                a.iter()
                    .enumerate()
                    .map(|(k, &ak)| {
                        let sign = if k % 2 == 0 { 1.0 } else { -1.0 };
                        sign * ak * (k as f64 * x).cos()
                    })
                    .sum()
            })
            .collect()
    }

    /// Coherent gain: the mean of the periodic window, `a_0` (Harris 1978).
    pub fn coherent_gain(self) -> f64 {
        self.coefficients()[0]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coherent_gain_is_mean_of_table() {
        // Harris 1978, Table I: Hann coherent gain 0.50; rectangular 1.00. Flat top: a_0 of the
        // D'Antona & Ferrero coefficients. The periodic form's mean equals a_0 for any N ≥ 5.
        for (w, cg) in [
            (Window::Hann, 0.5),
            (Window::Rectangular, 1.0),
            (Window::FlatTop, 0.21557895),
        ] {
            for n in [64usize, 1024] {
                let t = w.table(n);
                let mean = t.iter().sum::<f64>() / n as f64;
                assert!((mean - cg).abs() < 1e-12, "{w:?} n={n} mean {mean}");
                assert!((w.coherent_gain() - cg).abs() < 1e-15);
            }
        }
    }

    #[test]
    fn windows_are_periodic_and_peak_at_centre() {
        // Periodic (DFT-even) form, Harris 1978: w[0] is the edge, w[N/2] the peak.
        let n = 256;
        let hann = Window::Hann.table(n);
        assert!(hann[0].abs() < 1e-15);
        assert!((hann[n / 2] - 1.0).abs() < 1e-15);
        for j in 1..n {
            assert!((hann[j] - hann[n - j]).abs() < 1e-14);
        }
        let ft = Window::FlatTop.table(n);
        // The flat-top coefficients sum to 1 (peak) and their alternating sum is near 0 (edge).
        assert!((ft[n / 2] - 1.0).abs() < 1e-8);
        assert!(ft[0].abs() < 1e-3);
    }
}
