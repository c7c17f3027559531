//! Plain data shared by the engine's stages: a revolution's angle model and an nX response point.
//!
//! Phasor convention, used everywhere in veer: an nX component is written
//! `x(θ) = Re(v · e^{j n θ})`, where θ is the shaft angle since the reference pulse. Its amplitude is
//! `|v|` and its phase lag is `(−arg v) mod 360°`, the angle the shaft turns from the reference pulse
//! to the next positive peak of the nX signal (the trade's convention, see `lag_deg`).

pub use rustfft::num_complex::Complex64;

/// One revolution between two consecutive reference pulses, with its shaft-angle model.
///
/// Within the revolution the angle, as a fraction of a turn, is `c1·τ + c2·τ²` with `τ = t − t_start`;
/// the model reaches exactly one turn at `t_end`. A quadratic through three consecutive pulse times is
/// the computed-order-tracking angle model of Fyfe & Munck (MSSP 11(2), 1997).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Revolution {
    /// Running count of revolutions since the engine started.
    pub index: u64,
    /// Time of the reference pulse that starts the revolution, s.
    pub t_start: f64,
    /// Time of the reference pulse that ends it, s.
    pub t_end: f64,
    /// Linear coefficient of the angle model, turns per second.
    pub c1: f64,
    /// Quadratic coefficient of the angle model, turns per second squared.
    pub c2: f64,
}

impl Revolution {
    /// A revolution with a constant speed between its pulses.
    pub fn uniform(index: u64, t_start: f64, t_end: f64) -> Self {
        Self {
            index,
            t_start,
            t_end,
            c1: 1.0 / (t_end - t_start),
            c2: 0.0,
        }
    }

    /// Duration of the revolution, s.
    pub fn period(&self) -> f64 {
        self.t_end - self.t_start
    }

    /// Mean speed over the revolution, r/min.
    pub fn mean_rpm(&self) -> f64 {
        60.0 / self.period()
    }

    /// Mid-time of the revolution, s.
    pub fn mid_time(&self) -> f64 {
        0.5 * (self.t_start + self.t_end)
    }

    /// Fraction of the turn completed at time `t` (0 at `t_start`, 1 at `t_end`).
    pub fn frac_at(&self, t: f64) -> f64 {
        let tau = t - self.t_start;
        tau * (self.c1 + self.c2 * tau)
    }

    /// Instantaneous speed at time `t`, r/min.
    pub fn rpm_at(&self, t: f64) -> f64 {
        60.0 * (self.c1 + 2.0 * self.c2 * (t - self.t_start))
    }

    /// Time at which the fraction `frac` of the turn is reached (inverse of `frac_at`).
    pub fn time_at(&self, frac: f64) -> f64 {
        // Solve c2 τ² + c1 τ − frac = 0 for the root near frac/c1, in the cancellation-free form.
        let disc = self.c1 * self.c1 + 4.0 * self.c2 * frac;
        let tau = 2.0 * frac / (self.c1 + disc.max(0.0).sqrt());
        self.t_start + tau
    }
}

/// One point of an nX response: the vector measured over a revolution (or a block of them) at a speed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ResponsePoint {
    /// Mid-time of the revolutions the vector was computed over, s.
    pub time_s: f64,
    /// Mean speed over those revolutions, r/min.
    pub speed_rpm: f64,
    /// The phasor, in the channel's display units (see the module doc for the convention).
    pub vector: Complex64,
}

/// Phase lag of a phasor in degrees, 0 to 360: the shaft angle from the reference pulse to the next
/// positive peak of `Re(v e^{jθ})`.
pub fn lag_deg(v: Complex64) -> f64 {
    let lag = (-v.arg()).to_degrees();
    let wrapped = lag.rem_euclid(360.0);
    // rem_euclid can return 360.0 for tiny negative inputs; keep the range half-open.
    if wrapped >= 360.0 {
        0.0
    } else {
        wrapped
    }
}

/// The phasor with amplitude `amp` and phase lag `lag_deg` degrees.
pub fn from_amp_lag(amp: f64, lag_deg: f64) -> Complex64 {
    Complex64::from_polar(amp, -lag_deg.to_radians())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lag_round_trip_and_range() {
        for lag in [0.0, 1.0, 89.5, 90.0, 179.0, 181.0, 270.0, 359.5] {
            let v = from_amp_lag(2.0, lag);
            assert!((lag_deg(v) - lag).abs() < 1e-9, "lag {lag}");
            assert!((v.norm() - 2.0).abs() < 1e-12);
        }
    }

    #[test]
    fn lag_is_angle_to_next_positive_peak() {
        // x(θ) = cos(θ − 30°) peaks 30° after the reference: lag 30°.
        let lag = 30.0_f64;
        let v = from_amp_lag(1.0, lag);
        let theta = lag.to_radians();
        let x = (v * Complex64::from_polar(1.0, theta)).re;
        assert!((x - 1.0).abs() < 1e-12);
    }

    #[test]
    fn revolution_angle_inverts() {
        let t0 = 2.0;
        let t1 = 2.05;
        // A speeding-up revolution: c2 > 0 and frac(t1) = 1.
        let c2 = 40.0;
        let c1 = (1.0 - c2 * (t1 - t0) * (t1 - t0)) / (t1 - t0);
        let rev = Revolution {
            index: 0,
            t_start: t0,
            t_end: t1,
            c1,
            c2,
        };
        assert!((rev.frac_at(t1) - 1.0).abs() < 1e-12);
        for f in [0.0, 0.1, 0.5, 0.9, 1.0] {
            assert!((rev.frac_at(rev.time_at(f)) - f).abs() < 1e-12);
        }
        assert!(rev.rpm_at(t1) > rev.rpm_at(t0));
    }
}
