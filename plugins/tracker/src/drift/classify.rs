//! Telling a drift of the natural speed from a change of the unbalance.
//!
//! A change of the mode's natural speed changes only `r = N/Nn`: the normalised vector
//! `z = (v − slow roll − b)/m` stays on the locus `{s(r) : r > 0}` of the model and slides along it.
//! A change of the unbalance (a lost blade piece, a deposit, a thermal bow) multiplies `m` by some
//! complex factor `k ≠ 1`, and `k·s(r)` lies off the locus: for no `r′` does `s(r′) = k·s(r)`, since
//! equal phases force `r′ = r` and then equal amplitudes force `k = 1`. The distance of `z` from the
//! locus, against what noise and the model's own error can explain, tells the two apart.

use super::model::shape;
use crate::Complex64;

/// What a window's 1X vector says has changed since the model's event.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Change {
    /// The vector agrees with the model as fitted, within its uncertainty.
    None,
    /// The vector moved along the model's locus: the natural speed has moved.
    NaturalSpeed,
    /// The vector moved off the locus: the unbalance (or a bow, or runout) changed. A 1X
    /// vector-change alert, not a critical shift; the natural-speed estimate is not trusted.
    Unbalance,
}

impl Change {
    /// The name as stored and printed.
    pub fn name(self) -> &'static str {
        match self {
            Change::None => "none",
            Change::NaturalSpeed => "natural-speed",
            Change::Unbalance => "unbalance",
        }
    }
}

/// Thresholds of the classification.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ClassifyConfig {
    /// A locus residual (relative to the vector's size) above this is off the locus whatever the
    /// noise: the floor for model error (fit error of `m`, `b` and ζ). 0.05 is several times what
    /// a good run-up fit leaves on a drifting mode, and well below the 0.5 a 30° turn of the
    /// unbalance gives at r ≈ 0.77 (or the 0.08 of a 30 % growth of its amplitude).
    pub min_locus_residual: f64,
    /// ... and above this many standard deviations of its noise.
    pub locus_sigmas: f64,
    /// A natural speed counts as moved when it differs from the model's by more than this many
    /// of its standard deviations...
    pub shift_sigmas: f64,
    /// ... and by more than this percentage of the model's natural speed (model error floor).
    pub min_shift_pct: f64,
}

impl Default for ClassifyConfig {
    fn default() -> Self {
        Self {
            min_locus_residual: 0.05,
            locus_sigmas: 5.0,
            shift_sigmas: 3.0,
            min_shift_pct: 1.0,
        }
    }
}

/// The point of the locus nearest to `z`: `(r, |z − s(r)|)`.
///
/// A log-spaced grid over `r ∈ [0.02, 50]` finds the right valley, golden-section search refines it.
/// Costs some 500 evaluations of the shape: meant for once per window, not per revolution.
pub fn nearest_on_locus(z: Complex64, zeta: f64) -> (f64, f64) {
    const N: usize = 400;
    let (lo, hi) = (0.02_f64.ln(), 50.0_f64.ln());
    let step = (hi - lo) / (N - 1) as f64;
    let dist = |x: f64| (z - shape(x.exp(), zeta)).norm();
    let mut best = (0usize, f64::INFINITY);
    for i in 0..N {
        let d = dist(lo + step * i as f64);
        if d < best.1 {
            best = (i, d);
        }
    }
    let centre = lo + step * best.0 as f64;
    let (mut a, mut b) = (centre - step, centre + step);
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        if dist(c) < dist(d) {
            b = d;
        } else {
            a = c;
        }
    }
    let x = 0.5 * (a + b);
    let d = dist(x);
    if d <= best.1 {
        (x.exp(), d)
    } else {
        (centre.exp(), best.1)
    }
}

/// Classifies one window.
///
/// `locus_residual` is the distance from the locus relative to the vector's size and `locus_sigma`
/// its noise on the same scale; `shift_rpm` is the estimated natural speed minus the model's and
/// `sigma_rpm` its standard deviation. Off the locus wins: a changed unbalance also shifts the phase,
/// and read as a natural speed that shift would be a false critical alarm.
pub fn classify(
    locus_residual: f64,
    locus_sigma: f64,
    shift_rpm: f64,
    sigma_rpm: f64,
    model_rpm: f64,
    cfg: &ClassifyConfig,
) -> Change {
    let locus_limit = cfg.min_locus_residual.max(cfg.locus_sigmas * locus_sigma);
    if !(locus_residual <= locus_limit) {
        return Change::Unbalance;
    }
    let shift_limit = (cfg.shift_sigmas * sigma_rpm).max(cfg.min_shift_pct / 100.0 * model_rpm);
    if shift_rpm.abs() > shift_limit {
        Change::NaturalSpeed
    } else {
        Change::None
    }
}
