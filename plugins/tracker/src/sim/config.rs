//! What a simulated recording contains: speed profile, tachometer, channels and their modes.

use super::rotor::unbalance_response;
use super::{SimError, SpeedProfile};
use crate::types::{from_amp_lag, Complex64};

/// One rotor mode as a channel sees it: a single-degree-of-freedom resonance driven by unbalance.
#[derive(Clone, Debug, PartialEq)]
pub struct SimMode {
    /// Undamped natural frequency, r/min (the critical speed when damping is light).
    pub natural_rpm: f64,
    /// Modal damping ratio ζ (0.05 gives an amplification factor near 10).
    pub damping_ratio: f64,
    /// Response amplitude (peak, channel units) far above the critical, where the rotor spins about
    /// its mass centre; the unbalance eccentricity expressed in the channel's units.
    pub eccentricity: f64,
    /// Angle of the unbalance (heavy spot) from the reference mark, degrees, measured against
    /// rotation: it is the 1X phase lag at slow roll seen by a probe at the tach pickup.
    pub heavy_spot_deg: f64,
    /// When set, the natural speed (r/min) at the end of the speed profile: the natural speed then
    /// moves linearly in time from [`Self::natural_rpm`] at t = 0 to this value, as when a bearing
    /// wears or a support loosens during the recording. The damping ratio stays the same.
    pub natural_rpm_end: Option<f64>,
    /// When set, `(time_s, degrees)`: from that time on the heavy spot is turned by that many
    /// degrees (against rotation, like [`Self::heavy_spot_deg`]) with the eccentricity unchanged, as
    /// when a piece is thrown or a deposit shifts. The mode then settles to its new steady state
    /// through its own free transient.
    pub heavy_spot_step: Option<(f64, f64)>,
}

impl Default for SimMode {
    /// A first critical at 2 400 r/min, ζ = 0.05, unit eccentricity, heavy spot at the mark.
    fn default() -> Self {
        Self {
            natural_rpm: 2400.0,
            damping_ratio: 0.05,
            eccentricity: 1.0,
            heavy_spot_deg: 0.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        }
    }
}

impl SimMode {
    /// The steady-state 1X vector of this mode at constant `rpm`, seen by a probe at
    /// `probe_angle_deg`: `ε·H(r)·e^{−j(β+α)}` with `H` from [`unbalance_response`].
    pub fn steady_vector(&self, rpm: f64, probe_angle_deg: f64) -> Complex64 {
        let r = rpm / self.natural_rpm;
        let h = unbalance_response(r, self.damping_ratio);
        h * from_amp_lag(self.eccentricity, self.heavy_spot_deg + probe_angle_deg)
    }

    /// The natural speed, r/min, at time `t` of a recording whose speed profile lasts `duration_s`:
    /// [`Self::natural_rpm`] when it does not drift, otherwise linear in time from it at t = 0 to
    /// [`Self::natural_rpm_end`] at `duration_s` (held outside that span).
    pub fn natural_rpm_at(&self, t: f64, duration_s: f64) -> f64 {
        match self.natural_rpm_end {
            Some(end) if duration_s > 0.0 => {
                let u = (t / duration_s).clamp(0.0, 1.0);
                self.natural_rpm + (end - self.natural_rpm) * u
            }
            Some(end) if t > 0.0 => end,
            _ => self.natural_rpm,
        }
    }

    /// The heavy-spot angle, degrees, at time `t`: [`Self::heavy_spot_deg`], plus the step's turn
    /// from the step's time on.
    pub fn heavy_spot_deg_at(&self, t: f64) -> f64 {
        match self.heavy_spot_step {
            Some((at, turn)) if t >= at => self.heavy_spot_deg + turn,
            _ => self.heavy_spot_deg,
        }
    }

    /// The steady-state 1X vector at constant `rpm` with the natural speed and heavy spot this mode
    /// has at time `t` of a recording lasting `duration_s`, seen by a probe at `probe_angle_deg`.
    ///
    /// What the mode settles to if its natural speed and heavy spot stayed as they are at `t`: the
    /// quasi-static reference for a slowly drifting mode (the simulated response trails it by
    /// about the mode's settling time `1/(ζω_n)`).
    pub fn steady_vector_at(
        &self,
        rpm: f64,
        probe_angle_deg: f64,
        t: f64,
        duration_s: f64,
    ) -> Complex64 {
        let r = rpm / self.natural_rpm_at(t, duration_s);
        let h = unbalance_response(r, self.damping_ratio);
        h * from_amp_lag(
            self.eccentricity,
            self.heavy_spot_deg_at(t) + probe_angle_deg,
        )
    }

    fn validate_as(&self, field: &str) -> Result<(), SimError> {
        if !(self.natural_rpm.is_finite() && self.natural_rpm > 0.0) {
            return Err(SimError::invalid(
                format!("{field}.natural_rpm"),
                "must be finite and positive",
            ));
        }
        if !(self.damping_ratio.is_finite() && self.damping_ratio >= 0.0) {
            return Err(SimError::invalid(
                format!("{field}.damping_ratio"),
                "must be finite and not negative",
            ));
        }
        finite(self.eccentricity, &format!("{field}.eccentricity"))?;
        finite(self.heavy_spot_deg, &format!("{field}.heavy_spot_deg"))?;
        if let Some(end) = self.natural_rpm_end {
            if !(end.is_finite() && end > 0.0) {
                return Err(SimError::invalid(
                    format!("{field}.natural_rpm_end"),
                    "must be finite and positive",
                ));
            }
        }
        if let Some((at, turn)) = self.heavy_spot_step {
            if !(at.is_finite() && at >= 0.0) {
                return Err(SimError::invalid(
                    format!("{field}.heavy_spot_step.time_s"),
                    "must be finite and not negative",
                ));
            }
            finite(turn, &format!("{field}.heavy_spot_step.degrees"))?;
        }
        Ok(())
    }
}

/// A stray tone at a fixed frequency, not locked to the shaft: a neighbouring machine, mains hum.
/// Its phase is 0 (a cosine peak) at t = 0.
#[derive(Clone, Debug, PartialEq)]
pub struct Tone {
    /// Frequency, Hz (below half the sample rate).
    pub freq_hz: f64,
    /// Amplitude, peak, channel units.
    pub amplitude: f64,
}

/// One simulated vibration channel: the modes it sees plus everything else a real probe picks up.
#[derive(Clone, Debug, PartialEq)]
pub struct SimChannel {
    /// Channel name, unique, not `tach`.
    pub name: String,
    /// Modes summed into this channel.
    pub modes: Vec<SimMode>,
    /// Probe angle from the tach pickup, degrees, in the direction of rotation. For an isotropic
    /// rotor (circular orbit) it adds to every mode's phase lag; two probes 90° apart give an orbit.
    pub probe_angle_deg: f64,
    /// 1X mechanical/electrical runout: a constant 1X vector at every speed, peak amplitude.
    pub runout: f64,
    /// Phase lag of the runout vector, degrees.
    pub runout_lag_deg: f64,
    /// A constant 2X component (misalignment, shaft ovality), peak amplitude.
    pub second_order: f64,
    /// Phase lag of the 2X component, degrees of the 2X cycle (veer convention with n = 2).
    pub second_order_lag_deg: f64,
    /// White Gaussian noise, r.m.s.
    pub noise_rms: f64,
    /// Stray fixed-frequency tones.
    pub tones: Vec<Tone>,
    /// Constant offset (DC gap voltage of a proximity probe, sensor bias).
    pub offset: f64,
}

impl Default for SimChannel {
    /// Channel `x` with the default mode and nothing else: a clean unbalance response.
    fn default() -> Self {
        Self::new("x")
    }
}

impl SimChannel {
    /// A channel named `name` with one default mode, probe at 0°, no runout, noise or offset.
    pub fn new(name: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            modes: vec![SimMode::default()],
            probe_angle_deg: 0.0,
            runout: 0.0,
            runout_lag_deg: 0.0,
            second_order: 0.0,
            second_order_lag_deg: 0.0,
            noise_rms: 0.0,
            tones: Vec::new(),
            offset: 0.0,
        }
    }

    /// The steady-state 1X vector at constant `rpm`: all modes plus runout. What a perfect tracker
    /// measures at that speed once the transients have died away.
    pub fn steady_1x(&self, rpm: f64) -> Complex64 {
        let modes: Complex64 = self
            .modes
            .iter()
            .map(|m| m.steady_vector(rpm, self.probe_angle_deg))
            .sum();
        modes + from_amp_lag(self.runout, self.runout_lag_deg)
    }

    /// [`Self::steady_1x`] with every mode's natural speed and heavy spot as they are at time `t`
    /// of a recording lasting `duration_s` (see [`SimMode::steady_vector_at`]).
    pub fn steady_1x_at(&self, rpm: f64, t: f64, duration_s: f64) -> Complex64 {
        let modes: Complex64 = self
            .modes
            .iter()
            .map(|m| m.steady_vector_at(rpm, self.probe_angle_deg, t, duration_s))
            .sum();
        modes + from_amp_lag(self.runout, self.runout_lag_deg)
    }

    /// The 2X vector (constant at every speed).
    pub fn steady_2x(&self) -> Complex64 {
        from_amp_lag(self.second_order, self.second_order_lag_deg)
    }

    fn validate_as(&self, field: &str, sample_rate: f64) -> Result<(), SimError> {
        if self.name.trim().is_empty() {
            return Err(SimError::invalid(
                format!("{field}.name"),
                "must not be empty",
            ));
        }
        if self.name == "tach" {
            return Err(SimError::invalid(
                format!("{field}.name"),
                "`tach` is the tachometer's name",
            ));
        }
        for (i, m) in self.modes.iter().enumerate() {
            m.validate_as(&format!("{field}.modes[{i}]"))?;
        }
        finite(self.probe_angle_deg, &format!("{field}.probe_angle_deg"))?;
        finite(self.runout, &format!("{field}.runout"))?;
        finite(self.runout_lag_deg, &format!("{field}.runout_lag_deg"))?;
        finite(self.second_order, &format!("{field}.second_order"))?;
        finite(
            self.second_order_lag_deg,
            &format!("{field}.second_order_lag_deg"),
        )?;
        if !(self.noise_rms.is_finite() && self.noise_rms >= 0.0) {
            return Err(SimError::invalid(
                format!("{field}.noise_rms"),
                "must be finite and not negative",
            ));
        }
        for (i, t) in self.tones.iter().enumerate() {
            if !(t.freq_hz.is_finite() && t.freq_hz >= 0.0 && t.freq_hz < 0.5 * sample_rate) {
                return Err(SimError::invalid(
                    format!("{field}.tones[{i}].freq_hz"),
                    "must be between 0 and half the sample rate",
                ));
            }
            finite(t.amplitude, &format!("{field}.tones[{i}].amplitude"))?;
        }
        finite(self.offset, &format!("{field}.offset"))
    }
}

/// The simulated tachometer: a toothed wheel (or a single keyway) seen by a pickup.
#[derive(Clone, Debug, PartialEq)]
pub struct TachSim {
    /// Teeth (pulses) per revolution; tooth 0 is the reference mark.
    pub ppr: u32,
    /// Tooth indices (0..ppr) that never produce a pulse: a missing-tooth wheel.
    pub missing: Vec<u32>,
    /// R.m.s. timing jitter of each pulse edge, s (Gaussian, truncated at 4 σ).
    pub jitter_s: f64,
    /// Fraction of a tooth pitch during which the signal is high. The width is a shaft angle, as on
    /// a real wheel, so at constant speed it is the fraction of the tooth period.
    pub duty: f64,
    /// Signal level between pulses.
    pub low: f32,
    /// Signal level during a pulse.
    pub high: f32,
}

impl Default for TachSim {
    /// One pulse per turn, 0 V / 5 V, high for 30 % of a turn, no jitter.
    fn default() -> Self {
        Self {
            ppr: 1,
            missing: Vec::new(),
            jitter_s: 0.0,
            duty: 0.3,
            low: 0.0,
            high: 5.0,
        }
    }
}

impl TachSim {
    fn validate_as(&self, field: &str) -> Result<(), SimError> {
        if self.ppr == 0 {
            return Err(SimError::invalid(
                format!("{field}.ppr"),
                "must be at least 1",
            ));
        }
        for (i, &m) in self.missing.iter().enumerate() {
            if m >= self.ppr {
                return Err(SimError::invalid(
                    format!("{field}.missing[{i}]"),
                    "must be below ppr",
                ));
            }
        }
        if (0..self.ppr).all(|k| self.missing.contains(&k)) {
            return Err(SimError::invalid(
                format!("{field}.missing"),
                "leaves no tooth at all",
            ));
        }
        if !(self.jitter_s.is_finite() && self.jitter_s >= 0.0) {
            return Err(SimError::invalid(
                format!("{field}.jitter_s"),
                "must be finite and not negative",
            ));
        }
        if !(self.duty > 0.0 && self.duty < 1.0) {
            return Err(SimError::invalid(
                format!("{field}.duty"),
                "must be strictly between 0 and 1",
            ));
        }
        if !self.low.is_finite() {
            return Err(SimError::invalid(format!("{field}.low"), "must be finite"));
        }
        if !self.high.is_finite() {
            return Err(SimError::invalid(format!("{field}.high"), "must be finite"));
        }
        Ok(())
    }
}

/// A whole simulated recording.
#[derive(Clone, Debug, PartialEq)]
pub struct SimConfig {
    /// Samples per second per channel.
    pub sample_rate: f64,
    /// Shaft speed over time; the recording lasts its duration.
    pub profile: SpeedProfile,
    /// The tachometer channel.
    pub tach: TachSim,
    /// Vibration channels, in output order after the tach.
    pub channels: Vec<SimChannel>,
    /// Seed of the noise and jitter; the same seed gives the same recording.
    pub seed: u64,
    /// Start every mode at rest instead of in its steady state at the initial speed (then the
    /// recording begins with a start-up transient at the natural frequencies).
    pub start_at_rest: bool,
}

impl Default for SimConfig {
    /// 25.6 kHz, the default run-up, one pulse per turn, the default channel `x`, seed 1.
    fn default() -> Self {
        Self {
            sample_rate: 25_600.0,
            profile: SpeedProfile::default(),
            tach: TachSim::default(),
            channels: vec![SimChannel::default()],
            seed: 1,
            start_at_rest: false,
        }
    }
}

impl SimConfig {
    /// Checks every setting; the error names the first bad field (e.g. `channels[1].modes[0].damping_ratio`).
    pub fn validate(&self) -> Result<(), SimError> {
        if !(self.sample_rate.is_finite() && self.sample_rate > 0.0) {
            return Err(SimError::invalid(
                "sample_rate",
                "must be finite and positive",
            ));
        }
        self.profile.validate_as("profile.points")?;
        let frames = self.profile.duration_s() * self.sample_rate;
        if !(frames.round() >= 1.0 && frames < 1e15) {
            return Err(SimError::invalid(
                "profile.points",
                "duration gives no frame at this sample rate",
            ));
        }
        self.tach.validate_as("tach")?;
        // At least four samples per tooth at the top speed, so pulses stay distinct; this also keeps
        // 1X and 2X below the Nyquist frequency.
        let tooth_hz = self.profile.max_rpm() / 60.0 * f64::from(self.tach.ppr);
        if tooth_hz > 0.25 * self.sample_rate {
            return Err(SimError::invalid(
                "sample_rate",
                format!(
                    "{} Hz is below four samples per tach tooth at the top speed ({tooth_hz:.1} teeth/s)",
                    self.sample_rate
                ),
            ));
        }
        for (i, ch) in self.channels.iter().enumerate() {
            let field = format!("channels[{i}]");
            ch.validate_as(&field, self.sample_rate)?;
            if self.channels[..i].iter().any(|c| c.name == ch.name) {
                return Err(SimError::invalid(
                    format!("{field}.name"),
                    "repeats an earlier channel's name",
                ));
            }
        }
        Ok(())
    }
}

fn finite(x: f64, field: &str) -> Result<(), SimError> {
    if x.is_finite() {
        Ok(())
    } else {
        Err(SimError::invalid(field, "must be finite"))
    }
}
