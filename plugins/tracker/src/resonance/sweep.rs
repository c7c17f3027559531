//! A response put in speed order and smoothed, the common input of peak picking and the phase test.

use super::smooth::{median, smooth};
use crate::{Complex64, ResponsePoint};

/// Neighbours on each side that an isolated spike is judged against.
const SPIKE_NEIGHBOURS: usize = 2;

/// A point whose amplitude exceeds its neighbours' median amplitude by more than this fraction (and
/// whose vector is farther than six noise deviations from their median vector) is a spike. A peak
/// resolved by at least three points in its half-power band stands less than 20 % above its
/// neighbours; a spike is a point that is, say, doubled. Only points that stand out upwards are
/// replaced: a response whose phase jumps from point to point must keep its scatter, or the phase
/// test could no longer see it.
const SPIKE_FRACTION: f64 = 0.5;

/// Scale from the median absolute deviation to the standard deviation of Gaussian noise.
const MAD_TO_SIGMA: f64 = 1.4826;

/// One event's response sorted by speed, with its smoothed amplitude and smoothed vector.
pub(crate) struct Sweep {
    /// Speeds, r/min, non-decreasing.
    pub speed: Vec<f64>,
    /// Measured vectors, isolated spikes replaced (see `despike`).
    pub vector: Vec<Complex64>,
    /// Smoothed amplitude (of `|v|`): peaks and half-power points are read from it.
    pub amp: Vec<f64>,
    /// Smoothed vector (real and imaginary parts smoothed apart): the phase is read from it, so a
    /// noisy point cannot fake a phase swing.
    pub smooth_vec: Vec<Complex64>,
    /// Robust estimate of the amplitude noise of a single point (σ of `|v|` about the smooth curve).
    pub noise: f64,
    /// Points per local fit of the smoother.
    pub window: usize,
}

impl Sweep {
    /// Sorts and smooths the usable points (finite, positive speed), without robustness passes (the
    /// form used to look for peaks). Ties in speed are ordered by the vector, so a coast-down gives
    /// exactly the same sweep as the run-up it mirrors.
    pub(crate) fn new(points: &[ResponsePoint], window: usize) -> Self {
        let mut data: Vec<(f64, Complex64)> = points
            .iter()
            .filter(|p| {
                p.speed_rpm.is_finite()
                    && p.speed_rpm > 0.0
                    && p.vector.re.is_finite()
                    && p.vector.im.is_finite()
            })
            .map(|p| (p.speed_rpm, p.vector))
            .collect();
        data.sort_by(|a, b| {
            a.0.total_cmp(&b.0)
                .then(a.1.re.total_cmp(&b.1.re))
                .then(a.1.im.total_cmp(&b.1.im))
        });
        let (speed, vector): (Vec<f64>, Vec<Complex64>) = data.into_iter().unzip();
        let vector = despike(&vector);
        Self::from_sorted(speed, vector, window, false)
    }

    /// The same points smoothed robustly with another window (the form used to measure a peak).
    pub(crate) fn robust_with_window(&self, window: usize) -> Self {
        Self::from_sorted(self.speed.clone(), self.vector.clone(), window, true)
    }

    fn from_sorted(speed: Vec<f64>, vector: Vec<Complex64>, window: usize, robust: bool) -> Self {
        let raw_amp: Vec<f64> = vector.iter().map(|v| v.norm()).collect();
        let amp = smooth(&speed, &raw_amp, window, robust);
        let re: Vec<f64> = vector.iter().map(|v| v.re).collect();
        let im: Vec<f64> = vector.iter().map(|v| v.im).collect();
        let smooth_vec = smooth(&speed, &re, window, robust)
            .into_iter()
            .zip(smooth(&speed, &im, window, robust))
            .map(|(a, b)| Complex64::new(a, b))
            .collect();
        let mut dev: Vec<f64> = raw_amp
            .iter()
            .zip(&amp)
            .map(|(a, s)| (a - s).abs())
            .collect();
        let noise = MAD_TO_SIGMA * median(&mut dev);
        Self {
            speed,
            vector,
            amp,
            smooth_vec,
            noise,
            window,
        }
    }

    /// Number of points.
    pub(crate) fn len(&self) -> usize {
        self.speed.len()
    }

    /// The smoothed vector at `speed`, linearly interpolated between the neighbouring points.
    pub(crate) fn vector_at(&self, speed: f64) -> Complex64 {
        let n = self.len();
        if n == 0 {
            return Complex64::default();
        }
        let k = self.speed.partition_point(|&s| s < speed);
        if k == 0 {
            return self.smooth_vec[0];
        }
        if k >= n {
            return self.smooth_vec[n - 1];
        }
        let (s0, s1) = (self.speed[k - 1], self.speed[k]);
        let t = if s1 > s0 {
            (speed - s0) / (s1 - s0)
        } else {
            0.0
        };
        self.smooth_vec[k - 1] * (1.0 - t) + self.smooth_vec[k] * t
    }
}

/// Replaces isolated spikes (a point far from the component-wise median of its two neighbours on each
/// side) by that median: a Hampel filter (F. R. Hampel, "The influence curve and its role in robust
/// estimation", J. Am. Stat. Assoc. 69(346), 1974 — from memory) on the vector. It runs before the
/// peak search because a spike on the flank of a sharp critical can out-top the smoothed peak, and a
/// smoother cannot tell a one-point spike from a one-point peak; a critical must be resolved by a
/// few points to have a half-power band at all.
fn despike(vector: &[Complex64]) -> Vec<Complex64> {
    let n = vector.len();
    let span = 2 * SPIKE_NEIGHBOURS + 1;
    if n < span {
        return vector.to_vec();
    }
    let (mut re, mut im, mut amp) = (Vec::new(), Vec::new(), Vec::new());
    let medians: Vec<(Complex64, f64)> = (0..n)
        .map(|k| {
            let lo = k.saturating_sub(SPIKE_NEIGHBOURS).min(n - span);
            re.clear();
            im.clear();
            amp.clear();
            for (j, v) in vector.iter().enumerate().skip(lo).take(span) {
                if j != k {
                    re.push(v.re);
                    im.push(v.im);
                    amp.push(v.norm());
                }
            }
            let m = Complex64::new(median(&mut re), median(&mut im));
            (m, median(&mut amp))
        })
        .collect();
    let mut dev: Vec<f64> = vector
        .iter()
        .zip(&medians)
        .map(|(v, (m, _))| (v - m).norm())
        .collect();
    let noise = MAD_TO_SIGMA * median(&mut dev);
    vector
        .iter()
        .zip(&medians)
        .map(|(&v, &(m, m_amp))| {
            let stands_out = v.norm() > (1.0 + SPIKE_FRACTION) * m_amp;
            if stands_out && (v - m).norm() > 6.0 * noise {
                m
            } else {
                v
            }
        })
        .collect()
}
