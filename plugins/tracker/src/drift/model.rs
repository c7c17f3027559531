//! The single-mode model of one critical and the closed forms of its phase and amplitude.
//!
//! The mode's 1X response to a rotating unbalance is `v(N) = m·s(r) + b` with `r = N/Nn` and
//! `s(r) = r²/(1 − r² + 2jζr)` (S. S. Rao, *Mechanical Vibrations*, 5th ed. 2011, §3.7, rotating
//! unbalance; the same model [`crate::resonance::fit_mode`] fits). The phase lag of the shape is
//! `φ(r) = atan2(2ζr, 1 − r²)` and its amplitude `A(r) = r²/√((1 − r²)² + (2ζr)²)`.

use super::DriftError;
use crate::resonance::ModeFit;
use crate::Complex64;

/// Phase lag of the unbalance-response shape at speed ratio `r`, radians, in `0..π`:
/// `atan2(2ζr, 1 − r²)` (Rao §3.7). Exactly `π/2` at `r = 1` for every damping.
pub fn phase_lag(r: f64, zeta: f64) -> f64 {
    (2.0 * zeta * r).atan2(1.0 - r * r)
}

/// Slope of the phase lag against the speed ratio, `dφ/dr = 2ζ(1 + r²)/((1 − r²)² + (2ζr)²)`,
/// radians per unit ratio. It peaks near `r = 1` at `1/ζ`: the reason a lightly damped critical
/// shows its approach in the phase long before the amplitude moves much.
pub fn phase_slope(r: f64, zeta: f64) -> f64 {
    let a = 1.0 - r * r;
    let b = 2.0 * zeta * r;
    2.0 * zeta * (1.0 + r * r) / (a * a + b * b)
}

/// The speed ratio whose phase lag is `lag` radians: the positive root of
/// `sin φ·r² + 2ζ cos φ·r − sin φ = 0`, unique because the lag rises monotonically from 0 to π.
///
/// Returns `None` for a lag outside the open interval `(0, π)` or a damping ratio that is not
/// positive and finite: no speed ratio of the model shows such a lag.
pub fn ratio_from_lag(lag: f64, zeta: f64) -> Option<f64> {
    if !(lag > 0.0 && lag < std::f64::consts::PI && zeta > 0.0 && zeta.is_finite()) {
        return None;
    }
    let (s, c) = lag.sin_cos();
    let q = (zeta * zeta * c * c + s * s).sqrt();
    // Two algebraically equal forms of the root; each is free of cancellation on one half.
    let r = if c >= 0.0 {
        s / (zeta * c + q)
    } else {
        (q - zeta * c) / s
    };
    (r.is_finite() && r > 0.0).then_some(r)
}

/// Amplitude of the unbalance-response shape, `r²/√((1 − r²)² + (2ζr)²)` (Rao §3.7).
pub fn amplitude_ratio(r: f64, zeta: f64) -> f64 {
    let a = 1.0 - r * r;
    let b = 2.0 * zeta * r;
    r * r / (a * a + b * b).sqrt()
}

/// Slope of [`amplitude_ratio`] against the speed ratio.
pub fn amplitude_slope(r: f64, zeta: f64) -> f64 {
    let a = 1.0 - r * r;
    let b = 2.0 * zeta * r;
    let d2 = a * a + b * b;
    let d = d2.sqrt();
    let dd2 = -4.0 * r * a + 8.0 * zeta * zeta * r;
    2.0 * r / d - r * r * dd2 / (2.0 * d2 * d)
}

/// Speed ratio of the amplitude peak, `1/√(1 − 2ζ²)` (Rao §3.7), or `None` when `ζ ≥ 1/√2` and the
/// amplitude rises monotonically to its high-speed value.
pub fn peak_ratio(zeta: f64) -> Option<f64> {
    let q = 1.0 - 2.0 * zeta * zeta;
    (q > 0.0).then(|| 1.0 / q.sqrt())
}

/// The speed ratio with amplitude `amp`, on the branch below the amplitude peak (`below = true`) or
/// above it. Bisection: the amplitude is monotonic on each branch (rising from 0 to the peak below,
/// falling from the peak to 1 above). `None` when the branch never reaches `amp`.
pub fn ratio_from_amplitude(amp: f64, zeta: f64, below: bool) -> Option<f64> {
    if !(amp.is_finite() && amp > 0.0 && zeta > 0.0 && zeta.is_finite()) {
        return None;
    }
    let rp = peak_ratio(zeta)?;
    let top = amplitude_ratio(rp, zeta);
    let (mut lo, mut hi) = if below {
        (0.0, rp)
    } else {
        if amp <= 1.0 {
            return None;
        }
        (rp, 1e4)
    };
    if amp > top {
        return None;
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let rising_side = (amplitude_ratio(mid, zeta) < amp) == below;
        if rising_side {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// The unbalance-response shape `r²/(1 − r² + 2jζr)` in veer's phasor convention.
pub fn shape(r: f64, zeta: f64) -> Complex64 {
    Complex64::new(r * r, 0.0) / Complex64::new(1.0 - r * r, 2.0 * zeta * r)
}

/// The model of one critical, taken from the last good run-up or coast-down.
///
/// It predicts the 1X vector at any speed and, read the other way, turns a measured vector into the
/// speed ratio it implies. It holds the fitted mode and the slow-roll vector that was subtracted from
/// the event's response before the fit, so a live vector can be compensated the same way.
#[derive(Clone, Debug, PartialEq)]
pub struct CriticalModel {
    /// Natural speed of the mode at the time of the event, r/min.
    pub natural_rpm: f64,
    /// Damping ratio ζ of the mode.
    pub damping_ratio: f64,
    /// The mode's unbalance vector `m` (its lag is the mode's lag well below the critical).
    pub modal_vector: Complex64,
    /// The fit's constant vector `b` (residual runout, tails of other modes).
    pub background: Complex64,
    /// The slow-roll vector subtracted from the event's response before the fit; subtracted from
    /// every live vector too. Zero when the fit was made on uncompensated vectors.
    pub slow_roll: Complex64,
}

impl CriticalModel {
    /// The model of a fitted mode, with the slow-roll vector that was subtracted before the fit.
    ///
    /// Refuses a fit whose natural speed is not positive and finite, whose damping is not in
    /// `(0, 1)`, or whose modal vector is zero or not finite: none of them can be inverted.
    pub fn from_fit(fit: &ModeFit, slow_roll: Complex64) -> Result<Self, DriftError> {
        let model = Self {
            natural_rpm: fit.natural_rpm,
            damping_ratio: fit.damping_ratio,
            modal_vector: fit.modal_vector,
            background: fit.background,
            slow_roll,
        };
        model.validate()?;
        Ok(model)
    }

    /// Checks a model built field by field.
    pub fn validate(&self) -> Result<(), DriftError> {
        let bad = |reason| Err(DriftError::InvalidModel { reason });
        if !(self.natural_rpm.is_finite() && self.natural_rpm > 0.0) {
            return bad("the natural speed must be positive and finite");
        }
        if !(self.damping_ratio > 0.0 && self.damping_ratio < 1.0) {
            return bad("the damping ratio must lie strictly between 0 and 1");
        }
        let m = self.modal_vector;
        if !(m.re.is_finite() && m.im.is_finite() && m.norm() > 0.0) {
            return bad("the modal vector must be finite and non-zero");
        }
        let others = [self.background, self.slow_roll];
        if others
            .iter()
            .any(|v| !(v.re.is_finite() && v.im.is_finite()))
        {
            return bad("the background and slow-roll vectors must be finite");
        }
        Ok(())
    }

    /// The raw (uncompensated) 1X vector the model predicts at `rpm`, with the mode's natural speed
    /// at `natural_rpm` (pass [`Self::natural_rpm`] for the model as fitted).
    pub fn predict_at(&self, rpm: f64, natural_rpm: f64) -> Complex64 {
        self.modal_vector * shape(rpm / natural_rpm, self.damping_ratio)
            + self.background
            + self.slow_roll
    }

    /// The raw 1X vector the model predicts at `rpm` for the mode as fitted.
    pub fn predict(&self, rpm: f64) -> Complex64 {
        self.predict_at(rpm, self.natural_rpm)
    }

    /// A raw vector reduced to the mode's shape: `(v − slow_roll − b)/m`. For a vector that the model
    /// explains this is `s(r)`, whatever the natural speed has drifted to.
    pub fn normalise(&self, raw: Complex64) -> Complex64 {
        (raw - self.slow_roll - self.background) / self.modal_vector
    }

    /// Speed of the amplitude peak for natural speed `natural_rpm`: the critical speed as API RP 684
    /// measures it, `Nn/√(1 − 2ζ²)`; `Nn` itself when the damping leaves no peak.
    pub fn critical_rpm(&self, natural_rpm: f64) -> f64 {
        natural_rpm * peak_ratio(self.damping_ratio).unwrap_or(1.0)
    }
}
