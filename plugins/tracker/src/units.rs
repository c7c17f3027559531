//! Sensor kinds, engineering units and the way amplitudes are stated.
//!
//! The trade states shaft displacement peak-to-peak (proximity probes: µm pk-pk or mils pk-pk), casing
//! velocity as RMS (mm/s RMS, the quantity of the ISO 10816/20816 casing criteria) or peak, and
//! acceleration as peak (g or m/s²). veer keeps every vector internally as a peak phasor of the
//! channel's signal and converts only for display, so that ratios (AF, margins) never depend on it.

use crate::types::Complex64;
use std::f64::consts::{SQRT_2, TAU};
use std::fmt;
use thiserror::Error;

/// What a vibration sensor measures.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SensorKind {
    /// Relative shaft displacement (proximity probe) or casing displacement.
    Displacement,
    /// Casing velocity (velocity pickup, or an integrated accelerometer).
    Velocity,
    /// Casing acceleration (accelerometer).
    Acceleration,
}

/// The engineering unit of a channel's samples.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Unit {
    /// Micrometres.
    Micrometre,
    /// Thousandths of an inch.
    Mil,
    /// Millimetres per second.
    MillimetrePerSecond,
    /// Inches per second.
    InchPerSecond,
    /// Standard gravity, 9.80665 m/s².
    G,
    /// Metres per second squared.
    MetrePerSecond2,
}

/// How an amplitude is stated.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Detection {
    /// Peak to peak: twice the peak of a sinusoid.
    PeakToPeak,
    /// Zero to peak.
    Peak,
    /// Root mean square: peak/√2 for a sinusoid.
    Rms,
}

/// A unit or detection name that veer does not know.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum UnitError {
    /// Not a known unit.
    #[error("unknown unit `{0}` (use um, mil, mm/s, in/s, g or m/s2)")]
    Unit(String),
    /// Not a known detection.
    #[error("unknown amplitude detection `{0}` (use pk-pk, pk or rms)")]
    Detection(String),
    /// The detection does not suit the unit.
    #[error("unit `{unit}` is a {kind:?}; it cannot be stated as {detection}")]
    Mismatch {
        /// The unit.
        unit: &'static str,
        /// Its kind.
        kind: SensorKind,
        /// The refused detection.
        detection: &'static str,
    },
}

impl Unit {
    /// Parses a unit as written in a configuration (`um`, `µm`, `mil`, `mm/s`, `in/s`, `g`, `m/s2`).
    pub fn parse(s: &str) -> Result<Self, UnitError> {
        Ok(match s.trim().to_ascii_lowercase().as_str() {
            "um" | "µm" | "μm" | "micron" | "microns" => Unit::Micrometre,
            "mil" | "mils" => Unit::Mil,
            "mm/s" | "mmps" => Unit::MillimetrePerSecond,
            "in/s" | "ips" => Unit::InchPerSecond,
            "g" => Unit::G,
            "m/s2" | "m/s^2" | "m/s²" => Unit::MetrePerSecond2,
            _ => return Err(UnitError::Unit(s.to_string())),
        })
    }

    /// The quantity the unit measures.
    pub fn kind(self) -> SensorKind {
        match self {
            Unit::Micrometre | Unit::Mil => SensorKind::Displacement,
            Unit::MillimetrePerSecond | Unit::InchPerSecond => SensorKind::Velocity,
            Unit::G | Unit::MetrePerSecond2 => SensorKind::Acceleration,
        }
    }

    /// The unit's symbol as printed.
    pub fn symbol(self) -> &'static str {
        match self {
            Unit::Micrometre => "µm",
            Unit::Mil => "mil",
            Unit::MillimetrePerSecond => "mm/s",
            Unit::InchPerSecond => "in/s",
            Unit::G => "g",
            Unit::MetrePerSecond2 => "m/s²",
        }
    }

    /// One unit expressed in SI base units (m, m/s or m/s²).
    fn to_si(self) -> f64 {
        match self {
            Unit::Micrometre => 1e-6,
            Unit::Mil => 25.4e-6,
            Unit::MillimetrePerSecond => 1e-3,
            Unit::InchPerSecond => 25.4e-3,
            // Standard gravity, CGPM 1901 (conventional value).
            Unit::G => 9.806_65,
            Unit::MetrePerSecond2 => 1.0,
        }
    }

    /// The detection the trade usually states this kind in (common practice).
    pub fn usual_detection(self) -> Detection {
        match self.kind() {
            SensorKind::Displacement => Detection::PeakToPeak,
            SensorKind::Velocity => Detection::Rms,
            SensorKind::Acceleration => Detection::Peak,
        }
    }
}

impl Detection {
    /// Parses `pk-pk`, `pp`, `pk`, `peak`, `rms`.
    pub fn parse(s: &str) -> Result<Self, UnitError> {
        Ok(match s.trim().to_ascii_lowercase().as_str() {
            "pk-pk" | "pp" | "p-p" | "pkpk" | "peak-to-peak" => Detection::PeakToPeak,
            "pk" | "peak" | "0-pk" => Detection::Peak,
            "rms" => Detection::Rms,
            _ => return Err(UnitError::Detection(s.to_string())),
        })
    }

    /// Factor from a sinusoid's peak to this detection.
    pub fn from_peak(self) -> f64 {
        match self {
            Detection::PeakToPeak => 2.0,
            Detection::Peak => 1.0,
            Detection::Rms => 1.0 / SQRT_2,
        }
    }

    /// The label printed after a unit symbol.
    pub fn label(self) -> &'static str {
        match self {
            Detection::PeakToPeak => "pk-pk",
            Detection::Peak => "pk",
            Detection::Rms => "RMS",
        }
    }
}

/// A channel's unit and the detection its amplitudes are stated in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Amplitude {
    /// Engineering unit of the samples.
    pub unit: Unit,
    /// How amplitudes are stated.
    pub detection: Detection,
}

impl Amplitude {
    /// The unit with its usual detection.
    pub fn usual(unit: Unit) -> Self {
        Self {
            unit,
            detection: unit.usual_detection(),
        }
    }

    /// Converts a peak phasor of the signal to the stated detection.
    pub fn display(self, peak: Complex64) -> Complex64 {
        peak * self.detection.from_peak()
    }
}

impl fmt::Display for Amplitude {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} {}", self.unit.symbol(), self.detection.label())
    }
}

/// Converts an order-`order` peak phasor in `unit` at `speed_rpm` to a displacement peak phasor in µm.
///
/// For a harmonic of angular frequency ω: V = jωX and A = jωV = −ω²X, so X = V/(jω) = −A/ω²
/// (standard identities; REFERENCES §7). Returns `None` at zero speed, where it is undefined.
pub fn to_displacement_um(
    v: Complex64,
    unit: Unit,
    order: f64,
    speed_rpm: f64,
) -> Option<Complex64> {
    let omega = TAU * order * speed_rpm / 60.0;
    let si = v * unit.to_si();
    let metres = match unit.kind() {
        SensorKind::Displacement => si,
        SensorKind::Velocity | SensorKind::Acceleration if !(omega > 0.0) => return None,
        SensorKind::Velocity => si / Complex64::new(0.0, omega),
        SensorKind::Acceleration => -si / (omega * omega),
    };
    Some(metres * 1e6)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::types::{from_amp_lag, lag_deg};

    #[test]
    fn velocity_and_acceleration_to_displacement() {
        // REFERENCES §7 numeric oracle (recomputed from the identities): 1X at 50 Hz (3000 r/min),
        // 4.5 mm/s RMS → 6.364 mm/s peak → 20.26 µm peak → 40.5 µm pk-pk; acceleration peak 2.00 m/s².
        let v_peak = 4.5 * SQRT_2;
        let v = from_amp_lag(v_peak, 0.0);
        let x = to_displacement_um(v, Unit::MillimetrePerSecond, 1.0, 3000.0).expect("speed > 0");
        let pkpk = Amplitude::usual(Unit::Micrometre).display(x).norm();
        assert!((pkpk - 40.51).abs() < 0.01, "{pkpk}");
        // Velocity leads displacement by 90°: in the lag convention the displacement lags 90° more.
        assert!((lag_deg(x) - 90.0).abs() < 1e-9);
        let a_peak = TAU * 50.0 * v_peak * 1e-3;
        assert!((a_peak - 2.0).abs() < 0.01, "{a_peak}");
        let a = from_amp_lag(a_peak, 0.0);
        let xa = to_displacement_um(a, Unit::MetrePerSecond2, 1.0, 3000.0).expect("speed > 0");
        assert!((xa.norm() - x.norm()).abs() < 1e-9);
        assert!((lag_deg(xa) - 180.0).abs() < 1e-9);
        assert!(to_displacement_um(v, Unit::MillimetrePerSecond, 1.0, 0.0).is_none());
    }

    #[test]
    fn detections_and_labels() {
        // Sinusoid: p-p = 2 × peak, RMS = peak/√2 (standard identities).
        let v = Complex64::new(3.0, 4.0);
        assert!((Amplitude::usual(Unit::Mil).display(v).norm() - 10.0).abs() < 1e-12);
        let rms = Amplitude::usual(Unit::MillimetrePerSecond)
            .display(v)
            .norm();
        assert!((rms - 5.0 / SQRT_2).abs() < 1e-12);
        assert_eq!(Amplitude::usual(Unit::Micrometre).to_string(), "µm pk-pk");
        assert_eq!(
            Amplitude::usual(Unit::MillimetrePerSecond).to_string(),
            "mm/s RMS"
        );
        assert_eq!(Unit::parse("µm"), Ok(Unit::Micrometre));
        assert!(Unit::parse("furlong").is_err());
        assert_eq!(Detection::parse("RMS"), Ok(Detection::Rms));
        // 1 mil = 25.4 µm exactly (international inch, 1959).
        let x = to_displacement_um(Complex64::new(1.0, 0.0), Unit::Mil, 1.0, 1000.0).expect("ok");
        assert!((x.re - 25.4).abs() < 1e-12);
    }
}
