//! Critical speeds from an event's 1X response: peak, phase swing, half-power AF and a single-mode fit.
//!
//! A critical speed shows in a run-up or coast-down as a peak of the 1X amplitude while the phase lag
//! rises through it: by about 90° at the natural speed and about 180° well above it, relative to the
//! lag well below (S. S. Rao, *Mechanical Vibrations*, 5th ed. 2011, §3.7, rotating unbalance). An
//! amplitude bump without that swing is something else: a fixed-frequency tone leaking into the 1X
//! filter, a structural resonance of the probe mount, noise. So [`identify`] asks both:
//!
//! 1. the points are put in speed order (run-up and coast-down alike) and smoothed by a robust local
//!    quadratic ([`ResonanceConfig::smoothing_points`] per fit), amplitude and vector alike;
//! 2. each local maximum of the smoothed amplitude must stand above the higher of the valleys that
//!    separate it from higher ground by [`ResonanceConfig::min_peak_ratio`], and above the scatter of
//!    the points;
//! 3. the lag of the smoothed vector, unwrapped along speed, must rise from the lower flank to the
//!    upper flank by [`ResonanceConfig::min_phase_change_deg`], on both sides of the peak, and the
//!    measured phases must agree with the smoothed one (leakage of a stray tone is erratic in phase).
//!
//! A confirmed peak is re-smoothed with a window matched to its own half-power band (dense noisy
//! records get more averaging, coarse speed bins almost none), then gets its interpolated top (speed
//! Nc and amplitude, from a least-squares polynomial through the top), its half-power speeds N1 and
//! N2 (0.707 of the peak, linear interpolation between samples) and AF = Nc/(N2 − N1) (API RP 684,
//! lateral critical speed section — from memory as to wording, formula high confidence). On an
//! unbalance-driven displacement curve the half-power AF is slightly below 1/(2ζ) (ζ = 0.05:
//! 9.900 rather than 10; recomputed values, REFERENCES §1.1), so the damping ratio is taken from a
//! single-mode fit ([`fit_mode`]) when it matches the data well, and from 1/(2·AF) otherwise.

mod fit;
mod linalg;
mod peaks;
mod smooth;
mod sweep;

#[cfg(test)]
mod tests;

pub use fit::{fit_mode, model_vector};

use crate::{lag_deg, Complex64, ResponsePoint};
use sweep::Sweep;
use thiserror::Error;

/// Measured phases must agree with the smoothed phase between the flanks at least this well (an
/// amplitude-weighted mean resultant length; 0.9 allows a scatter of about 25° rms).
const MIN_PHASE_COHERENCE: f64 = 0.9;

/// A peak must rise above its baseline by at least this many standard deviations of the point
/// scatter, so that noise ripples on a low, flat stretch are not taken for peaks.
const MIN_PROMINENCE_SIGMAS: f64 = 6.0;

/// A fit whose rms residual exceeds this fraction of the peak, and twice what the scatter of the
/// points alone would leave, does not describe the data well enough for its damping ratio to be
/// preferred over the half-power estimate.
const GOOD_FIT_RMS: f64 = 0.1;

/// Share of a peak's half-power band that the re-measuring smoother spans (see `matched_window`).
const MATCHED_WINDOW_FRACTION: f64 = 0.25;

/// Widest re-measuring smoother, points: bounds the cost on very densely sampled records.
const MAX_MATCHED_WINDOW: usize = 201;

/// Errors of the resonance stage: only an invalid configuration can be refused.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ResonanceError {
    /// A configuration value outside its meaningful range.
    #[error("resonance setting {field} = {value} is invalid: {reason}")]
    InvalidConfig {
        /// Name of the field.
        field: &'static str,
        /// The value given.
        value: f64,
        /// What the value must be.
        reason: &'static str,
    },
}

/// Settings of critical-speed identification.
///
/// The defaults suit a response sampled once per revolution or per narrow speed bin with noise up to a
/// few percent of the peak. They are settings rather than constants because sites differ in how sharp
/// a critical must be before they want to hear about it.
#[derive(Clone, Debug)]
pub struct ResonanceConfig {
    /// A peak must exceed its local baseline (the higher of the valleys either side) by this factor.
    /// 1.5 keeps heavily damped modes (ζ ≈ 0.25 stands about 1.6–2 times above the plateau the
    /// unbalance response settles on far above the critical) and rejects noise ripples. Beyond
    /// ζ ≈ 0.35 the unbalance peak, 1/(2ζ√(1 − ζ²)) times the plateau (Rao §3.7), stands less than
    /// 1.5 times above it; lower the ratio to report such modes.
    pub min_peak_ratio: f64,
    /// The lag must rise by at least this many degrees between the flanks of the peak. An isolated
    /// mode rises about 120° between its half-amplitude points; 45° leaves room for interference with
    /// neighbouring modes and residual runout.
    pub min_phase_change_deg: f64,
    /// Below this AF a critical is reported as heavily damped; 2.5 is where API RP 684 stops asking for
    /// a separation margin (REFERENCES §1.2). A fitted ζ of 1/(2·this) or more flags it as well.
    pub heavily_damped_af: f64,
    /// Half-width of the fit window, in half-power half-bandwidths on each side of the peak (or in
    /// units of ζ·Nc where a half-power point is missing). 3 covers the response down to about a third
    /// of the peak: enough points for a stable fit, little of the neighbouring modes.
    pub fit_span: f64,
    /// Number of neighbouring points in each local fit of the robust smoother used to find peaks.
    /// More points average more noise; a window much wider than a quarter of the half-power band
    /// starts to blunt peaks. Each confirmed peak is then re-measured with a window matched to its own
    /// band (a quarter of the points inside it), so this setting mostly governs detection.
    pub smoothing_points: usize,
}

impl Default for ResonanceConfig {
    fn default() -> Self {
        Self {
            min_peak_ratio: 1.5,
            min_phase_change_deg: 45.0,
            heavily_damped_af: 2.5,
            fit_span: 3.0,
            smoothing_points: 11,
        }
    }
}

impl ResonanceConfig {
    /// Checks every setting, so that a configuration file cannot silently switch identification off.
    pub fn validate(&self) -> Result<(), ResonanceError> {
        let bad = |field, value, reason| {
            Err(ResonanceError::InvalidConfig {
                field,
                value,
                reason,
            })
        };
        if !(self.min_peak_ratio.is_finite() && self.min_peak_ratio >= 1.0) {
            return bad(
                "min_peak_ratio",
                self.min_peak_ratio,
                "must be a finite factor of at least 1",
            );
        }
        if !(self.min_phase_change_deg.is_finite()
            && self.min_phase_change_deg > 0.0
            && self.min_phase_change_deg <= 180.0)
        {
            return bad(
                "min_phase_change_deg",
                self.min_phase_change_deg,
                "must be more than 0 and at most 180 degrees",
            );
        }
        if !(self.heavily_damped_af.is_finite() && self.heavily_damped_af >= 0.0) {
            return bad(
                "heavily_damped_af",
                self.heavily_damped_af,
                "must be a finite, non-negative AF",
            );
        }
        if !(self.fit_span.is_finite() && self.fit_span > 0.0) {
            return bad("fit_span", self.fit_span, "must be positive and finite");
        }
        if self.smoothing_points < 3 {
            return bad(
                "smoothing_points",
                self.smoothing_points as f64,
                "must be at least 3 (a local quadratic needs three points)",
            );
        }
        Ok(())
    }
}

/// One identified critical speed.
#[derive(Clone, Debug, PartialEq)]
pub struct Resonance {
    /// Nc: speed of the amplitude peak of the smoothed response (vertex of a parabola through its
    /// top), r/min. This is what API RP 684 calls the critical speed, slightly above the natural speed
    /// on an unbalance response (by 1/√(1 − 2ζ²), Rao §3.7).
    pub speed_rpm: f64,
    /// Amplitude at the peak, in the units of the input.
    pub peak_amplitude: f64,
    /// Phase lag at the peak, degrees, 0..360 (of the smoothed vector).
    pub phase_deg: f64,
    /// Lag at the peak minus the lag well below the critical, degrees; about 90 on a clean mode. "Well
    /// below" is the lag of the fitted mode's unbalance vector when the fit is good (so residual runout
    /// at low speed, where the mode's response vanishes, does not bias it); otherwise the lag at the
    /// lower flank, which understates the change by some 30°.
    pub phase_change_deg: f64,
    /// Lower half-power speed N1, r/min; `None` when not inside the data.
    pub n1_rpm: Option<f64>,
    /// Upper half-power speed N2, r/min; `None` when not inside the data.
    pub n2_rpm: Option<f64>,
    /// AF = Nc/(N2 − N1) (API RP 684); `None` when a half-power point is missing.
    pub amplification_factor: Option<f64>,
    /// Best estimate of the damping ratio: the fit's when its rms residual is below 10 % of the peak
    /// or within twice what the points' scatter explains, else 1/(2·AF), else `None`.
    pub damping_ratio: Option<f64>,
    /// AF below [`ResonanceConfig::heavily_damped_af`] or a good fit with ζ ≥ 1/(2·that AF): a
    /// broad, well damped response rather than a sharp critical (no API margin needed below AF 2.5).
    pub heavily_damped: bool,
    /// The single-mode fit over the points around the peak, when it converged.
    pub fit: Option<ModeFit>,
}

/// A single-mode fit of the response around a critical (see [`fit_mode`]).
#[derive(Clone, Debug, PartialEq)]
pub struct ModeFit {
    /// Natural speed Nn of the mode, r/min (where the lag is 90° past the mode's low-speed lag).
    pub natural_rpm: f64,
    /// Damping ratio ζ.
    pub damping_ratio: f64,
    /// The mode's unbalance vector ε·e^{−jβ}, in the input's units: its lag β is the lag the mode
    /// shows well below the critical, and far above the critical the mode's response tends to
    /// `−modal_vector` (amplitude ε, lag β + 180°: the mass-centre inversion).
    pub modal_vector: Complex64,
    /// A constant vector absorbing residual runout and the tails of other modes in the window.
    pub background: Complex64,
    /// Rms of |data − model| over the fitted points, divided by the model's peak amplitude.
    pub rms_residual: f64,
    /// Number of points fitted.
    pub points: usize,
}

impl ModeFit {
    /// Whether the fit describes the data well enough to be believed over the half-power estimate.
    /// Noise alone leaves an rms residual of about √2 times the amplitude scatter `noise` of a point
    /// (both components scatter); a fit within twice that, or within 10 % of the peak, is good.
    fn is_good(&self, noise: f64, peak: f64) -> bool {
        let from_noise = if peak > 0.0 {
            2.0 * std::f64::consts::SQRT_2 * noise / peak
        } else {
            0.0
        };
        self.rms_residual <= GOOD_FIT_RMS.max(from_noise)
    }
}

/// Checks `cfg`, then identifies the critical speeds (see [`identify`]).
pub fn try_identify(
    points: &[ResponsePoint],
    cfg: &ResonanceConfig,
) -> Result<Vec<Resonance>, ResonanceError> {
    cfg.validate()?;
    Ok(identify(points, cfg))
}

/// Identifies the critical speeds in one event's 1X response, sorted by speed.
///
/// The points may come in run-up or coast-down order; non-finite points and non-positive speeds are
/// skipped. Settings outside their valid range (see [`ResonanceConfig::validate`]) are brought to the
/// nearest valid value rather than refused, so a bad setting never panics; use [`try_identify`] to
/// refuse them instead.
pub fn identify(points: &[ResponsePoint], cfg: &ResonanceConfig) -> Vec<Resonance> {
    let cfg = sanitized(cfg);
    let sweep = Sweep::new(points, cfg.smoothing_points);
    if sweep.len() < cfg.smoothing_points.max(5) {
        return Vec::new();
    }
    let mut found: Vec<Resonance> = peaks::candidates(&sweep.amp)
        .into_iter()
        .filter(|c| {
            let prominence = sweep.amp[c.index] - c.baseline;
            c.ratio(&sweep.amp) >= cfg.min_peak_ratio
                && prominence >= MIN_PROMINENCE_SIGMAS * sweep.noise
        })
        .filter_map(|c| describe(&sweep, &c, &cfg))
        .collect();
    found.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    found
}

/// Confirms a candidate that passed the amplitude tests by its phase swing (`None` if it fails), then
/// measures it, re-smoothed robustly with a window matched to its own bandwidth.
fn describe(sweep: &Sweep, c: &peaks::Candidate, cfg: &ResonanceConfig) -> Option<Resonance> {
    let swing = peaks::phase_swing(sweep, c);
    if !swing.confirms(cfg.min_phase_change_deg, MIN_PHASE_COHERENCE) {
        return None;
    }
    let first = measure(sweep, c, &swing, cfg);
    let window = matched_window(sweep, &first, &swing);
    let fine = sweep.robust_with_window(window);
    // The same peak on the re-smoothed curve: its highest point between the first pass's flanks.
    let index = (swing.left..=swing.right)
        .max_by(|&a, &b| fine.amp[a].total_cmp(&fine.amp[b]))
        .unwrap_or(c.index);
    let refined = peaks::Candidate {
        index,
        baseline: fine.amp[c.left_col].max(fine.amp[c.right_col]),
        ..*c
    };
    let swing = peaks::phase_swing(&fine, &refined);
    Some(measure(&fine, &refined, &swing, cfg))
}

/// Smoothing window matched to a peak: a quarter of the points inside its half-power band, odd, from
/// 3 to 201. A quarter band keeps the smoother's bias on the top and the flanks below 0.1 % while
/// averaging as many points as that allows: densely sampled noisy data get more smoothing, coarse
/// speed bins (a few per band) get almost none. The band is counted between the half-power points
/// and also estimated from the half-amplitude flanks (2√3·ζ·Nc wide against 2ζ·Nc on an isolated
/// mode), and the larger is used: in heavy noise the first pass can put its half-power points on a
/// ripple of the top, and a window matched to that ripple would only sharpen it.
fn matched_window(sweep: &Sweep, first: &Resonance, swing: &peaks::PhaseSwing) -> usize {
    let from_flanks = (swing.right - swing.left + 1) as f64 / 3f64.sqrt();
    let in_band = match (first.n1_rpm, first.n2_rpm) {
        (Some(a), Some(b)) => {
            let count = sweep.speed.iter().filter(|&&s| s >= a && s <= b).count() as f64;
            count.max(from_flanks)
        }
        _ => from_flanks,
    };
    let w = (in_band * MATCHED_WINDOW_FRACTION).round() as usize;
    (w.clamp(3, MAX_MATCHED_WINDOW) / 2) * 2 + 1
}

/// Measures a confirmed peak on one smoothing of the sweep.
fn measure(
    sweep: &Sweep,
    c: &peaks::Candidate,
    swing: &peaks::PhaseSwing,
    cfg: &ResonanceConfig,
) -> Resonance {
    let (nc, peak) = peaks::vertex(sweep, c);
    let (n1, n2) = peaks::half_power(&sweep.speed, &sweep.amp, c.index, peak);
    let af = match (n1, n2) {
        (Some(a), Some(b)) if b > a => Some(nc / (b - a)),
        _ => None,
    };
    // Damping guess for the fit: from AF, else from the spacing of the half-amplitude flanks
    // (r = 1 ∓ √3·ζ on an isolated mode).
    let flank_width = sweep.speed[swing.right] - sweep.speed[swing.left];
    let zeta_guess = af
        .map(|a| 0.5 / a)
        .unwrap_or(flank_width / (2.0 * 3f64.sqrt() * nc));
    let below = n1.map_or(zeta_guess * nc, |s| nc - s);
    let above = n2.map_or(zeta_guess * nc, |s| s - nc);
    let lo = (nc - cfg.fit_span * below).max(sweep.speed[c.left_col]);
    let hi = (nc + cfg.fit_span * above).min(sweep.speed[c.right_col]);
    let mode = fit::fit_window(&sweep.speed, &sweep.vector, lo, hi, nc, zeta_guess);
    let good = mode.as_ref().filter(|m| m.is_good(sweep.noise, peak));
    let phase_deg = lag_deg(sweep.vector_at(nc));
    let phase_change_deg = match good {
        Some(m) => peaks::wrap180(phase_deg - lag_deg(m.modal_vector)),
        None => swing.rise_below,
    };
    let damping_ratio = good
        .map(|m| m.damping_ratio)
        .or_else(|| af.map(|a| 0.5 / a));
    let heavy_zeta = if cfg.heavily_damped_af > 0.0 {
        0.5 / cfg.heavily_damped_af
    } else {
        f64::INFINITY
    };
    let heavily_damped = af.is_some_and(|a| a < cfg.heavily_damped_af)
        || good.is_some_and(|m| m.damping_ratio >= heavy_zeta);
    Resonance {
        speed_rpm: nc,
        peak_amplitude: peak,
        phase_deg,
        phase_change_deg,
        n1_rpm: n1,
        n2_rpm: n2,
        amplification_factor: af,
        damping_ratio,
        heavily_damped,
        fit: mode,
    }
}

/// The configuration with every value brought into its valid range (NaN → the default).
fn sanitized(cfg: &ResonanceConfig) -> ResonanceConfig {
    let d = ResonanceConfig::default();
    let pick = |v: f64, default: f64, lo: f64, hi: f64| {
        if v.is_nan() {
            default
        } else {
            v.clamp(lo, hi)
        }
    };
    ResonanceConfig {
        min_peak_ratio: pick(cfg.min_peak_ratio, d.min_peak_ratio, 1.0, f64::MAX),
        min_phase_change_deg: pick(
            cfg.min_phase_change_deg,
            d.min_phase_change_deg,
            1e-9,
            180.0,
        ),
        heavily_damped_af: pick(cfg.heavily_damped_af, d.heavily_damped_af, 0.0, f64::MAX),
        fit_span: pick(cfg.fit_span, d.fit_span, 1e-3, 1e3),
        smoothing_points: cfg.smoothing_points.max(3),
    }
}
