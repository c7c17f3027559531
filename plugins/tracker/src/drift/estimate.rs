//! The live estimate of a critical's natural speed from steady-state 1X vectors.
//!
//! Per window of whole revolutions the normalised vector `z̄ = mean((v − slow roll − b)/m)` is formed
//! (see [`CriticalModel::normalise`]). Its lag `φ = −arg z̄` gives the speed ratio by
//! [`ratio_from_lag`], hence `Nn = N̄/r`; its amplitude `|z̄| = r²/D(r)` gives a second ratio on the
//! same side of the peak, which is combined with the first (inverse-variance weights) when the two
//! agree. The standard deviation of the lag is `σ_φ = σ⊥/|z̄|` (the vector's noise across its own
//! direction), so `σ_r = σ_φ/φ′(r)` and `σ_Nn = Nn·σ_r/r`.

use super::classify::{classify, nearest_on_locus, Change, ClassifyConfig};
use super::model::{
    amplitude_slope, peak_ratio, phase_slope, ratio_from_amplitude, ratio_from_lag, CriticalModel,
};
use super::DriftError;
use crate::Complex64;

/// Settings of the live estimator.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EstimatorConfig {
    /// Length of one averaging window, s. Longer windows average more noise but follow a fast drift
    /// less closely; at steady speed a drift over hours allows minutes.
    pub window_s: f64,
    /// Below this phase sensitivity (degrees of lag per percent change of the natural speed) the
    /// running speed is too far from the critical for its phase to say where the critical is.
    pub min_sensitivity_deg_per_pct: f64,
    /// An estimate whose standard deviation exceeds this percentage of the natural speed is too noisy.
    pub max_sigma_pct: f64,
    /// Floor of the per-revolution phase noise, degrees: the window's measured scatter is used when
    /// larger. Keeps a window of identical (quantised) vectors from claiming zero uncertainty.
    pub phase_noise_deg: f64,
    /// How well the model knows the unbalance amplitude, percent: the amplitude equation is given
    /// this relative uncertainty on top of the noise (the fit's error of `|m|`).
    pub amplitude_model_pct: f64,
    /// A window whose speeds spread by more than this percentage of their mean is not steady.
    pub max_speed_spread_pct: f64,
    /// How well the model knows the damping ratio, percent. The lag inversion leans on ζ: holding
    /// `tan φ = 2ζr/(1 − r²)` fixed, `δr/r = −(1 − r²)/(1 + r²)·δζ/ζ`, so a ζ error shifts the
    /// estimate by up to that fraction (2.6 % at r = 0.77 for a 10 % ζ error, nothing at r = 1).
    /// Added to the lag's uncertainty as a systematic term; 0 trusts the fit's ζ entirely.
    pub damping_model_pct: f64,
    /// Thresholds of the change classification.
    pub classify: ClassifyConfig,
}

impl Default for EstimatorConfig {
    fn default() -> Self {
        Self {
            window_s: 30.0,
            min_sensitivity_deg_per_pct: 0.3,
            max_sigma_pct: 1.0,
            phase_noise_deg: 0.5,
            amplitude_model_pct: 2.0,
            max_speed_spread_pct: 3.0,
            damping_model_pct: 0.0,
            classify: ClassifyConfig::default(),
        }
    }
}

impl EstimatorConfig {
    /// Checks every setting.
    pub fn validate(&self) -> Result<(), DriftError> {
        let check = |field, value: f64, ok: bool, reason| {
            if ok {
                Ok(())
            } else {
                Err(DriftError::InvalidConfig {
                    field,
                    value,
                    reason,
                })
            }
        };
        let pos = |v: f64| v.is_finite() && v > 0.0;
        let nonneg = |v: f64| v.is_finite() && v >= 0.0;
        check(
            "window_s",
            self.window_s,
            pos(self.window_s),
            "must be positive",
        )?;
        check(
            "min_sensitivity_deg_per_pct",
            self.min_sensitivity_deg_per_pct,
            nonneg(self.min_sensitivity_deg_per_pct),
            "must be finite and not negative",
        )?;
        check(
            "max_sigma_pct",
            self.max_sigma_pct,
            pos(self.max_sigma_pct),
            "must be positive",
        )?;
        check(
            "phase_noise_deg",
            self.phase_noise_deg,
            nonneg(self.phase_noise_deg),
            "must be finite and not negative",
        )?;
        check(
            "amplitude_model_pct",
            self.amplitude_model_pct,
            nonneg(self.amplitude_model_pct),
            "must be finite and not negative",
        )?;
        check(
            "max_speed_spread_pct",
            self.max_speed_spread_pct,
            pos(self.max_speed_spread_pct),
            "must be positive",
        )?;
        check(
            "damping_model_pct",
            self.damping_model_pct,
            nonneg(self.damping_model_pct),
            "must be finite and not negative",
        )?;
        let c = &self.classify;
        check(
            "classify.min_locus_residual",
            c.min_locus_residual,
            pos(c.min_locus_residual),
            "must be positive",
        )?;
        check(
            "classify.locus_sigmas",
            c.locus_sigmas,
            nonneg(c.locus_sigmas),
            "must be finite and not negative",
        )?;
        check(
            "classify.shift_sigmas",
            c.shift_sigmas,
            nonneg(c.shift_sigmas),
            "must be finite and not negative",
        )?;
        check(
            "classify.min_shift_pct",
            c.min_shift_pct,
            nonneg(c.min_shift_pct),
            "must be finite and not negative",
        )
    }
}

/// Which equations an estimate rests on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// The lag alone.
    Phase,
    /// The lag and the amplitude, which agreed.
    PhaseAndAmplitude,
    /// The local slope of the lag against the wandering speed (see [`super::SlopeEstimator`]).
    Slope,
    /// Neither equation had a solution; the natural speed is that of the nearest point of the locus.
    Locus,
}

impl Method {
    /// The name as stored and printed.
    pub fn name(self) -> &'static str {
        match self {
            Method::Phase => "phase",
            Method::PhaseAndAmplitude => "phase-and-amplitude",
            Method::Slope => "slope",
            Method::Locus => "locus",
        }
    }
}

/// Why an estimate is not to be acted on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NotInformative {
    /// The speed spread over the window: not a steady-state window.
    NotSteady,
    /// The lag lies outside what the model can show (0 to 180° from the mode's low-speed lag).
    OutsideModel,
    /// The vector left the model's locus: the unbalance changed, the model no longer applies.
    OffLocus,
    /// The phase hardly moves with the natural speed at this ratio.
    TooFarFromResonance,
    /// The uncertainty is larger than the configured limit.
    TooNoisy,
}

impl NotInformative {
    /// The name as stored and printed.
    pub fn name(self) -> &'static str {
        match self {
            NotInformative::NotSteady => "not-steady",
            NotInformative::OutsideModel => "outside-model",
            NotInformative::OffLocus => "off-locus",
            NotInformative::TooFarFromResonance => "too-far-from-resonance",
            NotInformative::TooNoisy => "too-noisy",
        }
    }
}

/// One window's estimate of the natural speed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Estimate {
    /// Mid-time of the window, s.
    pub time_s: f64,
    /// Mean running speed over the window, r/min.
    pub rpm: f64,
    /// Number of revolutions averaged.
    pub revolutions: usize,
    /// The estimated natural speed, r/min.
    pub natural_rpm: f64,
    /// Its standard deviation, r/min (infinite when the equations were degenerate).
    pub sigma_rpm: f64,
    /// The speed ratio `N/Nn` it implies.
    pub ratio: f64,
    /// Whether the estimate can be acted on; see `reason` when not.
    pub informative: bool,
    /// Why not, when not.
    pub reason: Option<NotInformative>,
    /// Which equations gave it.
    pub method: Method,
    /// The natural speed the lag alone implies, r/min.
    pub by_phase: Option<f64>,
    /// The natural speed the amplitude alone implies, r/min.
    pub by_amplitude: Option<f64>,
    /// Degrees of lag per percent change of the natural speed at this ratio.
    pub sensitivity_deg_per_pct: f64,
    /// Distance of the normalised vector from the model's locus, relative to its size.
    pub locus_residual: f64,
    /// What changed since the model's event.
    pub change: Change,
    /// The window's mean raw 1X vector (before the model's compensation), input units.
    pub vector: Complex64,
}

/// Sums over the window in progress; no allocation per revolution.
#[derive(Clone, Copy, Debug, Default)]
struct Window {
    n: usize,
    t_first: f64,
    t_last: f64,
    sum_z: Complex64,
    sum_z2: f64,
    sum_rpm: f64,
    min_rpm: f64,
    max_rpm: f64,
}

/// The live estimator of one critical: feed it one 1X vector per revolution at steady speed.
#[derive(Clone, Debug)]
pub struct Estimator {
    model: CriticalModel,
    cfg: EstimatorConfig,
    win: Window,
    rejected: u64,
}

impl Estimator {
    /// An estimator for `model`; refuses an invalid model or configuration.
    pub fn new(model: CriticalModel, cfg: EstimatorConfig) -> Result<Self, DriftError> {
        model.validate()?;
        cfg.validate()?;
        Ok(Self {
            model,
            cfg,
            win: Window::default(),
            rejected: 0,
        })
    }

    /// The model the estimator inverts.
    pub fn model(&self) -> &CriticalModel {
        &self.model
    }

    /// Revolutions refused so far (non-finite values, non-positive speed, time going backwards).
    pub fn rejected(&self) -> u64 {
        self.rejected
    }

    /// Drops the window in progress: call when the machine leaves steady speed.
    pub fn reset(&mut self) {
        self.win = Window::default();
    }

    /// Adds one revolution's raw 1X vector (time in s, mean speed in r/min). Returns the window's
    /// estimate when the revolution completes a window of [`EstimatorConfig::window_s`].
    pub fn push(&mut self, time_s: f64, rpm: f64, vector_1x: Complex64) -> Option<Estimate> {
        let ok = time_s.is_finite()
            && rpm.is_finite()
            && rpm > 0.0
            && vector_1x.re.is_finite()
            && vector_1x.im.is_finite()
            && (self.win.n == 0 || time_s >= self.win.t_last);
        if !ok {
            self.rejected += 1;
            return None;
        }
        let z = self.model.normalise(vector_1x);
        let w = &mut self.win;
        if w.n == 0 {
            w.t_first = time_s;
            w.min_rpm = rpm;
            w.max_rpm = rpm;
        }
        w.n += 1;
        w.t_last = time_s;
        w.sum_z += z;
        w.sum_z2 += z.norm_sqr();
        w.sum_rpm += rpm;
        w.min_rpm = w.min_rpm.min(rpm);
        w.max_rpm = w.max_rpm.max(rpm);
        if w.t_last - w.t_first < self.cfg.window_s || w.n < 2 {
            return None;
        }
        let done = *w;
        self.win = Window::default();
        Some(self.evaluate(&done))
    }

    /// The estimate from a window's sums.
    fn evaluate(&self, w: &Window) -> Estimate {
        let n = w.n as f64;
        let zeta = self.model.damping_ratio;
        let z = w.sum_z / n;
        let rpm = w.sum_rpm / n;
        let amp = z.norm();
        // Scatter of one revolution's z per component, then of the window's mean.
        let var = ((w.sum_z2 - n * z.norm_sqr()) / (n - 1.0)).max(0.0);
        let floor = self.cfg.phase_noise_deg.to_radians() * amp;
        let sigma_c = (var / 2.0).sqrt().max(floor) / n.sqrt();
        let sigma_phase = if amp > 0.0 {
            sigma_c / amp
        } else {
            f64::INFINITY
        };

        let lag = -z.arg();
        let r_phase = ratio_from_lag(lag, zeta);
        let damping_pct = self.cfg.damping_model_pct;
        let sigma_r_phase = r_phase.map(|r| {
            let noise = sigma_phase / phase_slope(r, zeta);
            let model = r * (1.0 - r * r).abs() / (1.0 + r * r) * damping_pct / 100.0;
            noise.hypot(model)
        });

        let below = r_phase.is_none_or(|r| peak_ratio(zeta).is_none_or(|p| r <= p));
        let r_amp = ratio_from_amplitude(amp, zeta, below);
        let sigma_amp =
            (sigma_c.powi(2) + (self.cfg.amplitude_model_pct / 100.0 * amp).powi(2)).sqrt();
        let sigma_r_amp = r_amp.map(|r| sigma_amp / amplitude_slope(r, zeta).abs());

        let (r_locus, dist) = nearest_on_locus(z, zeta);
        let locus_residual = if amp > 0.0 { dist / amp } else { f64::INFINITY };
        let locus_sigma = if amp > 0.0 {
            sigma_c / amp
        } else {
            f64::INFINITY
        };

        let (ratio, sigma_r, method) = match (r_phase, sigma_r_phase, r_amp, sigma_r_amp) {
            (Some(rp), Some(sp), Some(ra), Some(sa))
                if sa.is_finite() && (rp - ra).abs() <= 3.0 * (sp * sp + sa * sa).sqrt() =>
            {
                let (wp, wa) = (1.0 / (sp * sp), 1.0 / (sa * sa));
                let r = (wp * rp + wa * ra) / (wp + wa);
                (r, (1.0 / (wp + wa)).sqrt(), Method::PhaseAndAmplitude)
            }
            (Some(rp), Some(sp), _, _) => (rp, sp, Method::Phase),
            _ => (r_locus, f64::INFINITY, Method::Locus),
        };
        let natural_rpm = rpm / ratio;
        let sigma_rpm = natural_rpm * sigma_r / ratio;
        let sensitivity_deg_per_pct = (ratio * phase_slope(ratio, zeta)).to_degrees() / 100.0;
        let change = classify(
            locus_residual,
            locus_sigma,
            natural_rpm - self.model.natural_rpm,
            sigma_rpm,
            self.model.natural_rpm,
            &self.cfg.classify,
        );
        let spread_pct = (w.max_rpm - w.min_rpm) / rpm * 100.0;
        let reason = if spread_pct > self.cfg.max_speed_spread_pct {
            Some(NotInformative::NotSteady)
        } else if method == Method::Locus {
            Some(NotInformative::OutsideModel)
        } else if change == Change::Unbalance {
            Some(NotInformative::OffLocus)
        } else if sensitivity_deg_per_pct < self.cfg.min_sensitivity_deg_per_pct {
            Some(NotInformative::TooFarFromResonance)
        } else if !(sigma_rpm / natural_rpm * 100.0 <= self.cfg.max_sigma_pct) {
            Some(NotInformative::TooNoisy)
        } else {
            None
        };
        Estimate {
            time_s: 0.5 * (w.t_first + w.t_last),
            rpm,
            revolutions: w.n,
            natural_rpm,
            sigma_rpm,
            ratio,
            informative: reason.is_none(),
            reason,
            method,
            by_phase: r_phase.map(|r| rpm / r),
            by_amplitude: r_amp.map(|r| rpm / r),
            sensitivity_deg_per_pct,
            locus_residual,
            change,
            vector: self.model.modal_vector * z + self.model.background + self.model.slow_roll,
        }
    }
}
