//! Sweep-rate bias of an observed critical speed.
//!
//! Passing a resonance at a finite rate, the response has no time to build up to its steady state:
//! the peak comes lower, later on a run-up and earlier on a coast-down (F. M. Lewis, "Vibration
//! during acceleration through a critical speed", Trans. ASME 54, 1932; volume and pages from
//! memory). How much depends on the damping ratio ζ and the dimensionless acceleration
//! η = (dΩ/dt)/ωn². This module integrates the same normalised model the references use,
//! x'' + 2ζx' + x = cos φ(t), dφ/dt = Ω0 ± ηt, from steady state at Ω0 = 0.5 (up) or 1.5 (down),
//! and reads off where the largest |x| lies: the shift of a peak observed at that rate from the
//! steady-state peak, and how much lower it is.
//!
//! Where a machine has both a run-up and a coast-down through the same critical, the two biases
//! have opposite signs and roughly equal size at equal rates; their sizes grow as √η in the
//! lightly damped limit (from memory), so the estimate weighting each observation by the other's
//! √rate cancels most of the bias even at unequal rates ([`pair_corrected`]).

use veer_tracker::sim::Sdof;
use veer_tracker::Complex64;

/// Largest predicted shift of the peak speed, percent, for a peak to be trusted as the critical.
pub(crate) const TRUST_SHIFT_PCT: f64 = 1.0;

/// Largest predicted loss of peak amplitude, percent, for the peak's AF to be trusted.
pub(crate) const TRUST_LOSS_PCT: f64 = 5.0;

/// The dimensionless acceleration η = (dΩ/dt)/ωn² of a sweep of `rate_rpm_s` through a critical at
/// `critical_rpm`: (2π/60 · rate)/(2π/60 · Nc)² = 60·rate/(2π·Nc²).
pub(crate) fn eta(rate_rpm_s: f64, critical_rpm: f64) -> f64 {
    rate_rpm_s.abs() * 60.0 / (2.0 * std::f64::consts::PI * critical_rpm * critical_rpm)
}

/// The result of one passage of the normalised model.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Passage {
    /// Largest |x| over the passage, as a multiple of the static deflection.
    pub peak: f64,
    /// Ω/ωn where it happened.
    pub at_ratio: f64,
}

/// Passes the normalised oscillator through resonance at the constant rate η, upward from
/// Ω0 = 0.5 or downward from 1.5, starting in steady state; `None` for parameters the model
/// cannot take (ζ not in (0, 1), η not positive, or so small the passage would take too long).
pub(crate) fn passage(zeta: f64, eta: f64, up: bool) -> Option<Passage> {
    if !(zeta > 0.0 && zeta < 1.0 && eta > 0.0 && eta.is_finite()) {
        return None;
    }
    let dt = 0.05;
    let duration = 1.0 / eta;
    let steps = (duration / dt).ceil();
    if steps > 2.0e7 {
        return None;
    }
    let steps = steps as u64;
    let (w0, sign) = if up { (0.5, 1.0) } else { (1.5, -1.0) };
    let mut osc = Sdof::new(1.0, zeta, dt).ok()?;
    let (q, v) = osc.periodic_response(Complex64::new(1.0, 0.0), w0)?;
    osc.set_state(q.re, v.re, 1.0);
    // The forcing e^{jφ_k} by a chirp recurrence: φ_{k+1} − φ_k = Ω0·dt ± η·dt²·(k + ½), so the
    // step phasor turns by ±η·dt² each sample; both are renormalised now and then against drift.
    let mut z = Complex64::new(1.0, 0.0);
    let mut step = Complex64::from_polar(1.0, w0 * dt + sign * eta * dt * dt * 0.5);
    let turn = Complex64::from_polar(1.0, sign * eta * dt * dt);
    let mut best = Passage {
        peak: q.norm(),
        at_ratio: w0,
    };
    for k in 0..steps {
        z *= step;
        step *= turn;
        if k % 1024 == 1023 {
            z /= z.norm();
            step /= step.norm();
        }
        let x = osc.step(z.re).abs();
        if x > best.peak {
            let t = (k + 1) as f64 * dt;
            best = Passage {
                peak: x,
                at_ratio: w0 + sign * eta * t,
            };
        }
    }
    Some(best)
}

/// The steady-state peak of the same model: at Ω/ωn = √(1 − 2ζ²), 1/(2ζ√(1 − ζ²)) times the
/// static deflection (S. S. Rao, Mechanical Vibrations, 5th ed., §3.4).
pub(crate) fn steady_peak(zeta: f64) -> Passage {
    Passage {
        peak: 1.0 / (2.0 * zeta * (1.0 - zeta * zeta).sqrt()),
        at_ratio: (1.0 - 2.0 * zeta * zeta).max(0.0).sqrt(),
    }
}

/// What a sweep's rate does to the peak it shows.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct SweepCheck {
    /// The dimensionless acceleration.
    pub eta: f64,
    /// Predicted shift of the observed peak from the steady-state one, percent (positive: later
    /// on a run-up; negative: earlier on a coast-down).
    pub shift_pct: f64,
    /// Predicted loss of peak amplitude, percent.
    pub loss_pct: f64,
    /// The critical speed with the predicted shift taken out, r/min.
    pub corrected_rpm: f64,
    /// Whether the peak can be taken as the critical: shift and loss within the limits.
    pub trusted: bool,
}

/// Checks one observed critical: `zeta` its damping ratio, `rate_rpm_s` the event's sweep rate.
pub(crate) fn check(observed_rpm: f64, zeta: f64, rate_rpm_s: f64, up: bool) -> Option<SweepCheck> {
    let e = eta(rate_rpm_s, observed_rpm);
    let p = passage(zeta, e, up)?;
    let s = steady_peak(zeta);
    let shift = p.at_ratio / s.at_ratio - 1.0;
    let loss = 1.0 - p.peak / s.peak;
    let shift_pct = shift * 100.0;
    let loss_pct = loss * 100.0;
    Some(SweepCheck {
        eta: e,
        shift_pct,
        loss_pct,
        corrected_rpm: observed_rpm / (1.0 + shift),
        trusted: shift_pct.abs() <= TRUST_SHIFT_PCT && loss_pct <= TRUST_LOSS_PCT,
    })
}

/// The critical speed from a run-up and a coast-down through it: each observation is biased by
/// about k·√η the other way, so Nc = (Nup·√|ad| + Ndown·√|au|)/(√|au| + √|ad|) cancels the bias;
/// at equal rates it is the plain mean.
pub(crate) fn pair_corrected(up_rpm: f64, up_rate: f64, down_rpm: f64, down_rate: f64) -> f64 {
    let (su, sd) = (up_rate.abs().sqrt(), down_rate.abs().sqrt());
    if !(su + sd > 0.0) {
        return 0.5 * (up_rpm + down_rpm);
    }
    (up_rpm * sd + down_rpm * su) / (su + sd)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn passage_reproduces_the_recomputed_table() {
        // REFERENCES §6 recomputed table (numerical integration of the same normalised model;
        // not published numbers, regenerated here; tolerance ~1 %). Qualitative facts: F. M. Lewis,
        // Trans. ASME 54 (1932): lower peak, later on run-up, earlier on coast-down.
        let rows = [
            (0.01, 1e-3, 28.32, 1.0564, 28.74, 0.9443),
            (0.02, 1e-4, 24.49, 1.0081, 24.59, 0.9909),
            (0.05, 1e-3, 9.592, 1.0285, 9.722, 0.9666),
            (0.05, 1e-2, 7.028, 1.1390, 7.365, 0.8177),
        ];
        for (z, e, up_peak, up_at, dn_peak, dn_at) in rows {
            let u = passage(z, e, true).expect("up");
            let d = passage(z, e, false).expect("down");
            assert!(
                (u.peak / up_peak - 1.0).abs() < 0.01,
                "ζ {z} η {e}: up {u:?}"
            );
            assert!(
                (d.peak / dn_peak - 1.0).abs() < 0.01,
                "ζ {z} η {e}: down {d:?}"
            );
            assert!(
                (u.at_ratio - up_at).abs() < 0.01 * up_at,
                "ζ {z} η {e}: up {u:?}"
            );
            assert!(
                (d.at_ratio - dn_at).abs() < 0.01 * dn_at,
                "ζ {z} η {e}: down {d:?}"
            );
        }
    }

    #[test]
    fn pair_correction_is_the_mean_at_equal_rates_and_leans_to_the_slower_sweep() {
        assert!((pair_corrected(1010.0, 20.0, 990.0, -20.0) - 1000.0).abs() < 1e-9);
        // A slow coast-down is nearer the truth than a fast run-up: the estimate leans to it.
        let c = pair_corrected(1040.0, 80.0, 990.0, -5.0);
        assert!(c < 1015.0 && c > 990.0, "{c}");
    }

    #[test]
    fn a_fast_sweep_is_not_trusted_and_a_slow_one_is() {
        // 1400 r/min critical, ζ 0.05: 30 r/min/s gives η ≈ 1.5e-4, ~1000 r/min/s gives η ≈ 5e-3.
        let slow = check(1400.0, 0.05, 30.0, true).expect("slow");
        let fast = check(1400.0, 0.05, 1000.0, true).expect("fast");
        assert!(slow.trusted, "{slow:?}");
        assert!(!fast.trusted && fast.shift_pct > 1.0, "{fast:?}");
        assert!(fast.corrected_rpm < 1400.0);
    }
}
