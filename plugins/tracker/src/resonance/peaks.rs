//! Peak candidates of a smoothed amplitude, their interpolated top, half-power points and the phase
//! test that tells a critical from a bump.

use super::linalg::{accumulate, solve};
use super::sweep::Sweep;
use crate::{lag_deg, Complex64};

/// Points within this fraction of the highest sample form the top of the peak that a parabola is
/// fitted to: wide enough to average noise, narrow enough that the curve's asymmetry does not move the
/// vertex.
const TOP_FRACTION: f64 = 0.9;

/// The phase is compared between the flanks where the amplitude has fallen to this fraction of the
/// peak (or the valley towards the next peak, whichever comes first). On an isolated mode the lag
/// there is about 30° and 150° from the low-speed value (r = 1 ∓ √3·ζ).
const FLANK_FRACTION: f64 = 0.5;

/// Each side of the peak must carry at least this share of the required phase change: a lag that
/// goes up on one side and down on the other (as the leakage of a fixed-frequency tone does when the
/// running speed passes it) is not a critical.
const SIDE_SHARE: f64 = 0.25;

/// One local maximum of the smoothed amplitude, with its surroundings.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Candidate {
    /// Index of the highest sample.
    pub index: usize,
    /// Index of the lowest point between the peak and the nearest higher point (or the start).
    pub left_col: usize,
    /// The same to the right.
    pub right_col: usize,
    /// The higher of the two cols' amplitudes: the level the peak stands above.
    pub baseline: f64,
}

impl Candidate {
    /// How many times the peak exceeds its baseline.
    pub(crate) fn ratio(&self, amp: &[f64]) -> f64 {
        if self.baseline > 0.0 {
            amp[self.index] / self.baseline
        } else {
            f64::INFINITY
        }
    }
}

/// All interior local maxima of `amp`, with the cols that delimit them (the key cols of topographic
/// prominence). A ripple on the flank of a larger peak gets a col just below itself, hence a ratio
/// close to 1.
pub(crate) fn candidates(amp: &[f64]) -> Vec<Candidate> {
    let n = amp.len();
    let mut out = Vec::new();
    for i in 1..n.saturating_sub(1) {
        let a = amp[i];
        if !(a > amp[i - 1] && a >= amp[i + 1]) {
            continue;
        }
        // Ties: walking left stops only at a strictly higher point and walking right at an equal one,
        // so of two equal tops exactly one sees the other as higher.
        let mut left_col = i;
        let mut j = i;
        while j > 0 {
            j -= 1;
            if amp[j] > a {
                break;
            }
            if amp[j] < amp[left_col] {
                left_col = j;
            }
        }
        let mut right_col = i;
        for (k, &v) in amp.iter().enumerate().skip(i + 1) {
            if v >= a {
                break;
            }
            if v < amp[right_col] {
                right_col = k;
            }
        }
        out.push(Candidate {
            index: i,
            left_col,
            right_col,
            baseline: amp[left_col].max(amp[right_col]),
        });
    }
    out
}

/// The speed and amplitude of the top of the peak: the maximum of a least-squares cubic through the
/// points within 90 % of the highest sample (a parabola when there are fewer than five, and at least
/// three points), or the sample itself when the polynomial has no maximum inside them. The cubic term
/// takes up the asymmetry of an unbalance response (steeper above the critical than below), which
/// would otherwise pull a parabola's vertex by a fraction of a percent at ζ = 0.1; a least-squares
/// polynomial rather than the highest sample also keeps noise from biasing the peak upwards.
pub(crate) fn vertex(sweep: &Sweep, c: &Candidate) -> (f64, f64) {
    let (speed, amp) = (&sweep.speed[..], &sweep.amp[..]);
    let i = c.index;
    let level = TOP_FRACTION * amp[i];
    let mut lo = i;
    while lo > c.left_col && amp[lo - 1] >= level {
        lo -= 1;
    }
    let mut hi = i;
    while hi < c.right_col && amp[hi + 1] >= level {
        hi += 1;
    }
    // At least one smoother's window (and three points), so a top narrowed by noise still averages.
    let want = sweep.window.max(3);
    while hi - lo + 1 < want && (lo > c.left_col || hi < c.right_col) {
        if lo > c.left_col {
            lo -= 1;
        }
        if hi - lo + 1 < want && hi < c.right_col {
            hi += 1;
        }
    }
    if hi - lo < 2 {
        lo = lo.min(i.saturating_sub(1));
        hi = hi.max((i + 1).min(amp.len() - 1));
    }
    let fallback = (speed[i], amp[i]);
    // The polynomial goes through the measured amplitudes of the top, not the smoothed ones: their
    // noise is independent from point to point, so a fit over tens of points averages it far better
    // than the smoother (whose ripple is correlated over its window and lifts the highest sample).
    // Points the smoother treats as outliers (beyond six noise deviations, or 1 % of the peak on clean
    // data) are left out.
    let limit = (6.0 * sweep.noise).max(0.01 * amp[i]);
    let mut ys: Vec<(f64, f64)> = (lo..=hi)
        .map(|k| (speed[k], sweep.vector[k].norm()))
        .zip(lo..=hi)
        .filter(|&((_, y), k)| (y - amp[k]).abs() <= limit)
        .map(|(p, _)| p)
        .collect();
    if ys.len() < 3 {
        ys = (lo..=hi).map(|k| (speed[k], amp[k])).collect();
    }
    let x0 = speed[i];
    let h = (speed[hi] - speed[lo]).max(f64::MIN_POSITIVE);
    let (ulo, uhi) = ((speed[lo] - x0) / h, (speed[hi] - x0) / h);
    let coef: [f64; 4] = if ys.len() >= 5 {
        let mut m = [[0.0; 4]; 4];
        let mut t = [0.0; 4];
        for &(x, y) in &ys {
            accumulate(&mut m, &mut t, (x - x0) / h, y, 1.0);
        }
        match solve(m, t) {
            Some(c) => c,
            None => return fallback,
        }
    } else {
        let mut m = [[0.0; 3]; 3];
        let mut t = [0.0; 3];
        for &(x, y) in &ys {
            accumulate(&mut m, &mut t, (x - x0) / h, y, 1.0);
        }
        match solve(m, t) {
            Some([c0, c1, c2]) => [c0, c1, c2, 0.0],
            None => return fallback,
        }
    };
    let [c0, c1, c2, c3] = coef;
    let value = |u: f64| c0 + u * (c1 + u * (c2 + u * c3));
    // Stationary points: c1 + 2 c2 u + 3 c3 u² = 0; keep maxima inside the top, nearest the sample.
    let roots: Vec<f64> = if c3.abs() > 1e-12 * c2.abs() {
        let disc = 4.0 * c2 * c2 - 12.0 * c3 * c1;
        if disc < 0.0 {
            Vec::new()
        } else {
            let q = -0.5 * (2.0 * c2 + (2.0 * c2).signum() * disc.sqrt());
            let mut r = vec![q / (3.0 * c3)];
            if q != 0.0 {
                r.push(c1 / q);
            }
            r
        }
    } else if c2 != 0.0 {
        vec![-c1 / (2.0 * c2)]
    } else {
        Vec::new()
    };
    let Some(u) = roots
        .into_iter()
        .filter(|&u| u >= ulo && u <= uhi && 2.0 * c2 + 6.0 * c3 * u < 0.0 && u.is_finite())
        .min_by(|a, b| a.abs().total_cmp(&b.abs()))
    else {
        return fallback;
    };
    // The value from a quartic where there are points enough: a cubic's constant term absorbs the
    // fourth-order flattening of the top and reads it some 0.2 % low (ζ = 0.02..0.05); at the
    // stationary point a small error of location changes the value only to second order.
    let top = if ys.len() >= 7 {
        let mut m = [[0.0; 5]; 5];
        let mut t = [0.0; 5];
        for &(x, y) in &ys {
            accumulate(&mut m, &mut t, (x - x0) / h, y, 1.0);
        }
        solve(m, t).map_or(value(u), |q| {
            q.iter().rev().fold(0.0, |acc, &ck| acc * u + ck)
        })
    } else {
        value(u)
    };
    // A polynomial that strays from the smoothed top by more than the top's own 10 % has been thrown
    // by noise on too few points: the smoothed sample is the safer answer.
    let stray = (top - amp[i]).abs();
    if stray.is_nan() || stray > (1.0 - TOP_FRACTION) * amp[i] {
        return fallback;
    }
    (x0 + u * h, top)
}

/// Half-power speeds: where the smoothed amplitude crosses `peak/√2` below and above the peak at
/// `index`, by linear interpolation between the two samples either side of each crossing. `None` for
/// a side whose crossing is not inside the data, or where the amplitude rises above the peak (another
/// mode) before falling to the half-power level.
pub(crate) fn half_power(
    speed: &[f64],
    amp: &[f64],
    index: usize,
    peak: f64,
) -> (Option<f64>, Option<f64>) {
    let level = peak * std::f64::consts::FRAC_1_SQRT_2;
    // "Higher than the peak" is judged against the highest sample too, which may exceed the
    // interpolated top by a hair.
    let ceiling = peak.max(amp[index]);
    let crossing = |a: usize, b: usize| {
        // Sample a is above the level, b below it.
        let (ya, yb) = (amp[a], amp[b]);
        let t = (ya - level) / (ya - yb);
        speed[a] + t * (speed[b] - speed[a])
    };
    let mut n1 = None;
    for j in (0..index).rev() {
        if amp[j] > ceiling {
            break;
        }
        if amp[j] < level {
            n1 = Some(crossing(j + 1, j));
            break;
        }
    }
    let mut n2 = None;
    for (j, &a) in amp.iter().enumerate().skip(index + 1) {
        if a > ceiling {
            break;
        }
        if a < level {
            n2 = Some(crossing(j - 1, j));
            break;
        }
    }
    (n1, n2)
}

/// What the phase does across a candidate peak.
#[derive(Clone, Copy, Debug)]
pub(crate) struct PhaseSwing {
    /// Index of the lower flank.
    pub left: usize,
    /// Index of the upper flank.
    pub right: usize,
    /// Lag rise from the lower flank to the peak, degrees (unwrapped).
    pub rise_below: f64,
    /// Lag rise from the peak to the upper flank, degrees (unwrapped).
    pub rise_above: f64,
    /// Amplitude-weighted agreement of the measured phases with the smoothed phase between the
    /// flanks, 0..=1: `|Σ v·conj(s)| / Σ |v||s|`. Near 1 for a mode even with noise at a few percent
    /// of the peak; far from 1 for leakage whose phase jumps from point to point.
    pub coherence: f64,
}

impl PhaseSwing {
    /// Whether the swing confirms a critical: a lag rising through the peak by at least
    /// `min_change_deg`, on both sides, with coherent phases.
    pub(crate) fn confirms(&self, min_change_deg: f64, min_coherence: f64) -> bool {
        let share = SIDE_SHARE * min_change_deg;
        self.rise_below + self.rise_above >= min_change_deg
            && self.rise_below >= share
            && self.rise_above >= share
            && self.coherence >= min_coherence
    }
}

/// Measures the lag swing across candidate `c` of the sweep.
pub(crate) fn phase_swing(sweep: &Sweep, c: &Candidate) -> PhaseSwing {
    let amp = &sweep.amp;
    let i = c.index;
    let level = FLANK_FRACTION * amp[i];
    let mut left = i;
    while left > c.left_col && amp[left] > level {
        left -= 1;
    }
    let mut right = i;
    while right < c.right_col && amp[right] > level {
        right += 1;
    }
    // Unwrap the lag of the smoothed vector outward from the peak, step by step.
    let unwrapped_rise = |from: usize, to: usize| -> f64 {
        let mut total = 0.0;
        let mut prev = lag_deg(sweep.smooth_vec[from]);
        let mut k = from;
        while k != to {
            k = if to > from { k + 1 } else { k - 1 };
            let lag = lag_deg(sweep.smooth_vec[k]);
            total += wrap180(lag - prev);
            prev = lag;
        }
        total
    };
    let rise_below = -unwrapped_rise(i, left);
    let rise_above = unwrapped_rise(i, right);
    let mut dot = Complex64::default();
    let mut norm = 0.0;
    for k in left..=right {
        let (v, s) = (sweep.vector[k], sweep.smooth_vec[k]);
        dot += v * s.conj();
        norm += v.norm() * s.norm();
    }
    let coherence = if norm > 0.0 { dot.norm() / norm } else { 0.0 };
    PhaseSwing {
        left,
        right,
        rise_below,
        rise_above,
        coherence,
    }
}

/// An angle difference brought into −180..180 degrees.
pub(crate) fn wrap180(d: f64) -> f64 {
    let w = (d + 180.0).rem_euclid(360.0) - 180.0;
    if w >= 180.0 {
        w - 360.0
    } else {
        w
    }
}
