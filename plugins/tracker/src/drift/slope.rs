//! The natural speed from the slope of the lag against the small wander of a steady running speed.
//!
//! At steady speed the running speed still wanders by a fraction of a percent. Each revolution's
//! vector is the steady-state response at its own speed as long as the wander is slow against the
//! mode's settling time `1/(ζωn)` (a fraction of a second for a rotor's first critical, against
//! minutes for the wander). The lag then follows the wander with the local slope
//!
//! `p(r) = dφ/d ln N = r·φ′(r) = 2ζr(1 + r²)/((1 − r²)² + (2ζr)²)`,
//!
//! which grows from 0 far below the critical to about `1/ζ` at it and falls again above. Given ζ and
//! the side of the critical, `p` gives `r`, hence `Nn = N/r`, with no run-up at all: no modal vector,
//! no reference lag. With the curvature `q = dp/d ln N` as a second equation, `(r, ζ)` can be solved
//! jointly, but the curvature of a ±0.5 % wander is poorly determined except close to the critical.
//!
//! Assumptions: one dominant mode, unbalance and background steady over the window, the background
//! small against the mode's response (a large constant vector flattens the measured lag's slope).

use super::classify::Change;
use super::estimate::{Estimate, Method, NotInformative};
use super::model::phase_slope;
use super::DriftError;
use crate::Complex64;

/// The lag's slope against the log speed, `dφ/d ln N`, radians per unit of `ln N`.
pub fn log_slope(r: f64, zeta: f64) -> f64 {
    r * phase_slope(r, zeta)
}

/// The lag's curvature `d²φ/d(ln N)² = d p/d ln N`, by a central difference of [`log_slope`] in
/// `ln r` (step 1e-5: truncation error below 1e-9 of the value on the test grid).
pub fn log_curvature(r: f64, zeta: f64) -> f64 {
    let h: f64 = 1e-5;
    (log_slope(r * h.exp(), zeta) - log_slope(r * (-h).exp(), zeta)) / (2.0 * h)
}

/// Speed ratio where [`log_slope`] peaks (just above 1 for light damping), by golden section.
fn slope_peak(zeta: f64) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = (0.3_f64.ln(), 3.0_f64.ln());
    for _ in 0..80 {
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        if log_slope(c.exp(), zeta) > log_slope(d.exp(), zeta) {
            b = d;
        } else {
            a = c;
        }
    }
    (0.5 * (a + b)).exp()
}

/// The speed ratio whose log slope is `slope`, below the critical (`below = true`) or above it.
/// `None` when the slope is not positive or steeper than the mode can be at this damping.
pub fn ratio_from_slope(slope: f64, zeta: f64, below: bool) -> Option<f64> {
    if !(slope > 0.0 && slope.is_finite() && zeta > 0.0 && zeta < 1.0) {
        return None;
    }
    let peak = slope_peak(zeta);
    if slope > log_slope(peak, zeta) {
        return None;
    }
    let (mut lo, mut hi) = if below {
        (1e-4_f64.ln(), peak.ln())
    } else {
        (peak.ln(), 1e4_f64.ln())
    };
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let rising = (log_slope(mid.exp(), zeta) < slope) == below;
        if rising {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some((0.5 * (lo + hi)).exp())
}

/// Speed ratio and damping from the log slope and log curvature jointly, `(r, ζ)`, on the side of
/// the critical given by `below`. A grid over `ζ ∈ [0.005, 0.5]` gives, through
/// [`ratio_from_slope`], the ratios that match the slope; the damping whose ratio also matches the
/// curvature is then refined by bisection on the curvature mismatch. `None` when no damping matches.
pub fn ratio_and_damping_from_slope(slope: f64, curvature: f64, below: bool) -> Option<(f64, f64)> {
    if !(slope.is_finite() && curvature.is_finite()) {
        return None;
    }
    let mismatch = |lz: f64| {
        let z = lz.exp();
        ratio_from_slope(slope, z, below).map(|r| log_curvature(r, z) - curvature)
    };
    const N: usize = 200;
    let (lo, hi) = (0.005_f64.ln(), 0.5_f64.ln());
    let step = (hi - lo) / (N - 1) as f64;
    let mut prev: Option<(f64, f64)> = None;
    for i in 0..N {
        let lz = lo + step * i as f64;
        let Some(m) = mismatch(lz) else {
            prev = None;
            continue;
        };
        if let Some((plz, pm)) = prev {
            if pm == 0.0 || (pm < 0.0) != (m < 0.0) {
                let (mut a, mut b, mut ma) = (plz, lz, pm);
                for _ in 0..80 {
                    let c = 0.5 * (a + b);
                    let mc = mismatch(c)?;
                    if (mc < 0.0) == (ma < 0.0) {
                        a = c;
                        ma = mc;
                    } else {
                        b = c;
                    }
                }
                let z = (0.5 * (a + b)).exp();
                return ratio_from_slope(slope, z, below).map(|r| (r, z));
            }
        }
        prev = Some((lz, m));
    }
    None
}

/// Settings of the slope estimator.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SlopeConfig {
    /// Length of one regression window, s: it must hold several cycles of the wander.
    pub window_s: f64,
    /// The mode's damping ratio: from a past run-up, a design analysis or, lacking both, a typical
    /// value (0.05–0.15 for an oil-film-bearing rotor's first critical). The ratio is only as good.
    pub damping_ratio: f64,
    /// Whether the critical lies above the running speed (`true`: the machine runs below it).
    pub below_critical: bool,
    /// Vector subtracted from each raw vector first (slow-roll runout); zero if none is known.
    pub slow_roll: Complex64,
    /// The slope must exceed this many of its standard deviations to be informative.
    pub min_t: f64,
    /// An estimate whose standard deviation exceeds this percentage of the natural speed is too noisy.
    pub max_sigma_pct: f64,
}

impl Default for SlopeConfig {
    fn default() -> Self {
        Self {
            window_s: 600.0,
            damping_ratio: 0.1,
            below_critical: true,
            slow_roll: Complex64::new(0.0, 0.0),
            min_t: 5.0,
            max_sigma_pct: 5.0,
        }
    }
}

/// One window's slope estimate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SlopeEstimate {
    /// Mid-time of the window, s.
    pub time_s: f64,
    /// Mean running speed, r/min.
    pub rpm: f64,
    /// Measured `dφ/d ln N`, radians.
    pub slope: f64,
    /// Its standard deviation.
    pub sigma_slope: f64,
    /// Measured curvature `d²φ/d(ln N)²`, radians (poorly determined by a small wander).
    pub curvature: f64,
    /// Estimated natural speed, r/min (NaN when the slope has no solution).
    pub natural_rpm: f64,
    /// Its standard deviation, r/min.
    pub sigma_rpm: f64,
    /// Speed ratio `N/Nn`.
    pub ratio: f64,
    /// Whether the estimate can be acted on.
    pub informative: bool,
    /// Why not, when not.
    pub reason: Option<NotInformative>,
    /// Always [`Method::Slope`]; present so slope and phase estimates can be reported alike.
    pub method: Method,
    /// Revolutions in the window.
    pub revolutions: usize,
}

impl SlopeEstimate {
    /// The estimate in the form the phase estimator gives, for reporting and for
    /// [`super::DriftAlert`]: the slope measures no vector against a model, so the classification
    /// is [`Change::None`], the locus residual 0 and the vector zero.
    pub fn to_estimate(&self) -> Estimate {
        Estimate {
            time_s: self.time_s,
            rpm: self.rpm,
            revolutions: self.revolutions,
            natural_rpm: self.natural_rpm,
            sigma_rpm: self.sigma_rpm,
            ratio: self.ratio,
            informative: self.informative,
            reason: self.reason,
            method: self.method,
            by_phase: None,
            by_amplitude: None,
            sensitivity_deg_per_pct: self.slope.to_degrees() / 100.0,
            locus_residual: 0.0,
            change: Change::None,
            vector: Complex64::new(0.0, 0.0),
        }
    }
}

/// Regression sums over the basis `[1, u, τ, u²]`: `u = 100·ln(N/N_ref)` (percent, for
/// conditioning), `τ` the time since the window began in windows, and the lag `y` relative to the
/// window's first vector (relative angles stay far from the ±180° wrap). The `τ` column takes up the
/// natural speed's own drift over the window: with a wander that trends over the window, that drift
/// would otherwise leak into the slope.
#[derive(Clone, Copy, Debug, Default)]
struct Sums {
    n: f64,
    t_first: f64,
    t_last: f64,
    rpm_ref: f64,
    v_ref: Complex64,
    sum_rpm: f64,
    a: [[f64; 4]; 4],
    b: [f64; 4],
    syy: f64,
}

/// Estimates a critical from the slope of the lag against the wandering steady speed.
#[derive(Clone, Debug)]
pub struct SlopeEstimator {
    cfg: SlopeConfig,
    sums: Sums,
}

impl SlopeEstimator {
    /// A slope estimator; refuses settings outside their meaning.
    pub fn new(cfg: SlopeConfig) -> Result<Self, DriftError> {
        let bad = |field, value, reason| {
            Err(DriftError::InvalidConfig {
                field,
                value,
                reason,
            })
        };
        if !(cfg.window_s.is_finite() && cfg.window_s > 0.0) {
            return bad("window_s", cfg.window_s, "must be positive");
        }
        if !(cfg.damping_ratio > 0.0 && cfg.damping_ratio < 1.0) {
            return bad("damping_ratio", cfg.damping_ratio, "must lie in (0, 1)");
        }
        if !(cfg.min_t.is_finite() && cfg.min_t >= 0.0) {
            return bad("min_t", cfg.min_t, "must be finite and not negative");
        }
        if !(cfg.max_sigma_pct.is_finite() && cfg.max_sigma_pct > 0.0) {
            return bad("max_sigma_pct", cfg.max_sigma_pct, "must be positive");
        }
        if !(cfg.slow_roll.re.is_finite() && cfg.slow_roll.im.is_finite()) {
            return bad("slow_roll", f64::NAN, "must be finite");
        }
        Ok(Self {
            cfg,
            sums: Sums::default(),
        })
    }

    /// Drops the window in progress.
    pub fn reset(&mut self) {
        self.sums = Sums::default();
    }

    /// Adds one revolution; returns the window's estimate when it completes one. Non-finite input
    /// and non-positive speeds are ignored.
    pub fn push(&mut self, time_s: f64, rpm: f64, vector_1x: Complex64) -> Option<SlopeEstimate> {
        let v = vector_1x - self.cfg.slow_roll;
        let ok = time_s.is_finite()
            && rpm.is_finite()
            && rpm > 0.0
            && v.re.is_finite()
            && v.im.is_finite()
            && v.norm() > 0.0;
        if !ok {
            return None;
        }
        let s = &mut self.sums;
        if s.n == 0.0 {
            s.t_first = time_s;
            s.rpm_ref = rpm;
            s.v_ref = v;
        }
        let u = 100.0 * (rpm / s.rpm_ref).ln();
        let tau = (time_s - s.t_first) / self.cfg.window_s;
        let y = -(v * s.v_ref.conj()).arg();
        s.n += 1.0;
        s.t_last = time_s;
        s.sum_rpm += rpm;
        let p = [1.0, u, tau, u * u];
        for (row, &pi) in s.a.iter_mut().zip(&p) {
            for (cell, &pj) in row.iter_mut().zip(&p) {
                *cell += pi * pj;
            }
        }
        for (bi, &pi) in s.b.iter_mut().zip(&p) {
            *bi += pi * y;
        }
        s.syy += y * y;
        if s.t_last - s.t_first < self.cfg.window_s || s.n < 10.0 {
            return None;
        }
        let done = *s;
        self.sums = Sums::default();
        Some(self.evaluate(&done))
    }

    fn evaluate(&self, s: &Sums) -> SlopeEstimate {
        let n = s.n;
        let rpm = s.sum_rpm / n;
        // y = c0 + c1·u + c2·τ for the slope and its noise; with c3·u² added for the curvature.
        let line = solve::<3>(&s.a, &s.b);
        let (b, sigma_b) = match line {
            Some(c) => {
                let fitted: f64 = c.iter().zip(&s.b).map(|(ci, bi)| ci * bi).sum();
                let resid = ((s.syy - fitted) / (n - 3.0)).max(0.0);
                let mut e1 = [0.0; 4];
                e1[1] = 1.0;
                let var = solve::<3>(&s.a, &e1).map_or(f64::INFINITY, |w| w[1] * resid);
                (c[1], var.max(0.0).sqrt())
            }
            None => (f64::NAN, f64::INFINITY),
        };
        let c3 = solve::<4>(&s.a, &s.b).map_or(f64::NAN, |c| c[3]);
        // Per unit ln N: u is in percent.
        let slope = 100.0 * b;
        let sigma_slope = 100.0 * sigma_b;
        let curvature = 2.0 * 1e4 * c3;
        let zeta = self.cfg.damping_ratio;
        let r = ratio_from_slope(slope, zeta, self.cfg.below_critical);
        let (natural_rpm, sigma_rpm, ratio) = match r {
            Some(r) => {
                let h: f64 = 1e-6;
                let dp =
                    (log_slope(r * h.exp(), zeta) - log_slope(r * (-h).exp(), zeta)) / (2.0 * h);
                // σ of ln r from σ of the slope; Nn = N/r.
                let sigma_lnr = sigma_slope / dp.abs();
                let nn = rpm / r;
                (nn, nn * sigma_lnr, r)
            }
            None => (f64::NAN, f64::INFINITY, f64::NAN),
        };
        let t = slope / sigma_slope;
        let reason = if r.is_none() {
            Some(NotInformative::OutsideModel)
        } else if !(t >= self.cfg.min_t) {
            Some(NotInformative::TooFarFromResonance)
        } else if !(sigma_rpm / natural_rpm * 100.0 <= self.cfg.max_sigma_pct) {
            Some(NotInformative::TooNoisy)
        } else {
            None
        };
        SlopeEstimate {
            time_s: 0.5 * (s.t_first + s.t_last),
            rpm,
            slope,
            sigma_slope,
            curvature,
            natural_rpm,
            sigma_rpm,
            ratio,
            informative: reason.is_none(),
            reason,
            method: Method::Slope,
            revolutions: n as usize,
        }
    }
}

/// Solves the leading `N×N` block of the normal equations by Gaussian elimination with partial
/// pivoting; `None` when it is singular.
fn solve<const N: usize>(a: &[[f64; 4]; 4], b: &[f64; 4]) -> Option<[f64; 4]> {
    let mut m = [[0.0; 4]; 4];
    let mut x = [0.0; 4];
    for i in 0..N {
        m[i][..N].copy_from_slice(&a[i][..N]);
        x[i] = b[i];
    }
    let scale = (0..N).map(|i| m[i][i].abs()).fold(0.0, f64::max);
    for col in 0..N {
        let piv = (col..N).max_by(|&i, &j| m[i][col].abs().total_cmp(&m[j][col].abs()))?;
        if !(m[piv][col].abs() > 1e-13 * scale) {
            return None;
        }
        m.swap(col, piv);
        x.swap(col, piv);
        let pivot_row = m[col];
        let pivot_x = x[col];
        for (row, xr) in m.iter_mut().zip(x.iter_mut()).take(N).skip(col + 1) {
            let f = row[col] / pivot_row[col];
            for (cell, &p) in row.iter_mut().zip(&pivot_row).take(N).skip(col) {
                *cell -= f * p;
            }
            *xr -= f * pivot_x;
        }
    }
    for row in (0..N).rev() {
        let s: f64 = (row + 1..N).map(|k| m[row][k] * x[k]).sum();
        x[row] = (x[row] - s) / m[row][row];
    }
    Some(x)
}
