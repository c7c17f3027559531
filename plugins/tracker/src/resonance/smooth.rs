//! Robust local-quadratic smoothing of a response along speed.
//!
//! Peak picking and half-power crossings need a curve without the point-to-point scatter of noise,
//! but plain moving averages flatten a sharp peak (a 5-point mean lowers the top of a ζ = 0.02 peak
//! sampled every 0.1 % of speed by about 0.25 %, enough to bias AF by 0.5 %). A local quadratic fit
//! follows the curvature of the peak, so its bias comes only from fourth-order terms. Robustness
//! weights from the residuals of a first pass then remove the pull of isolated spikes (the LOWESS
//! scheme of W. S. Cleveland, "Robust locally weighted regression and smoothing scatterplots",
//! J. Am. Stat. Assoc. 74(368), 1979: tricube distance weights, bisquare robustness weights at six
//! median absolute residuals).

use super::linalg::{accumulate, solve};

/// Number of robustness passes after the first fit (Cleveland recommends two).
const ROBUST_PASSES: usize = 2;

/// Smooths `y` sampled at the sorted abscissae `x`, using `window` neighbouring points (by index) for
/// each local fit, with robustness passes when `robust`. Returns the smoothed values, one per input
/// point.
///
/// Robustness cannot tell a spike from a genuine peak only a sample or two wide; so peaks are looked
/// for without it (a spike then has to fail the phase test) and measured with it, once the window has
/// been matched to the peak's width.
pub(crate) fn smooth(x: &[f64], y: &[f64], window: usize, robust: bool) -> Vec<f64> {
    let n = x.len().min(y.len());
    if n == 0 {
        return Vec::new();
    }
    let window = window.clamp(1, n);
    let passes = if robust { ROBUST_PASSES } else { 0 };
    let mut weights = vec![1.0; n];
    let mut out = local_fits(x, y, window, &weights);
    let scale = y.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    for _ in 0..passes {
        let mut abs_res: Vec<f64> = (0..n).map(|i| (y[i] - out[i]).abs()).collect();
        // Noise-free data leave residuals near rounding level, and the largest of them sit on the
        // curvature of a peak: a floor of 0.01 % of the largest value keeps them from being taken for
        // outliers.
        let s = median(&mut abs_res).max(1e-4 * scale);
        if s.is_nan() || s <= 0.0 {
            break;
        }
        for ((w, &yi), &oi) in weights.iter_mut().zip(y).zip(&out) {
            let u = (yi - oi) / (6.0 * s);
            *w = if u.abs() < 1.0 {
                let t = 1.0 - u * u;
                t * t
            } else {
                0.0
            };
        }
        out = local_fits(x, y, window, &weights);
    }
    out
}

/// The median of `v` (reordered in place); 0 for an empty slice.
pub(crate) fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

fn local_fits(x: &[f64], y: &[f64], window: usize, robust: &[f64]) -> Vec<f64> {
    let n = x.len().min(y.len());
    (0..n)
        .map(|i| {
            let lo = i.saturating_sub(window / 2).min(n - window);
            local_fit(
                &x[lo..lo + window],
                &y[lo..lo + window],
                &robust[lo..lo + window],
                x[i],
            )
            .unwrap_or(y[i])
        })
        .collect()
}

/// Weighted quadratic fit of `y` against `x` around `x0`, evaluated at `x0`; falls back to a linear
/// fit and then to a weighted mean when the points do not determine a parabola (repeated speeds).
fn local_fit(x: &[f64], y: &[f64], robust: &[f64], x0: f64) -> Option<f64> {
    let h = x.iter().fold(0.0_f64, |m, &v| m.max((v - x0).abs())) * 1.0001;
    // Normal equations of the weighted fit in the scaled abscissa u = (x − x0)/h.
    let mut m = [[0.0_f64; 3]; 3];
    let mut t = [0.0_f64; 3];
    for ((&xi, &yi), &ri) in x.iter().zip(y).zip(robust) {
        let u = if h > 0.0 { (xi - x0) / h } else { 0.0 };
        accumulate(&mut m, &mut t, u, yi, tricube(u) * ri);
    }
    if m[0][0].is_nan() || m[0][0] <= 0.0 {
        return None;
    }
    if let Some(c) = solve(m, t) {
        return Some(c[0]);
    }
    let line = [[m[0][0], m[0][1]], [m[1][0], m[1][1]]];
    if let Some(c) = solve(line, [t[0], t[1]]) {
        return Some(c[0]);
    }
    Some(t[0] / m[0][0])
}

fn tricube(u: f64) -> f64 {
    let a = u.abs();
    if a >= 1.0 {
        0.0
    } else {
        let t = 1.0 - a * a * a;
        t * t * t
    }
}
