//! Closed forms of the Jeffcott rotor: unbalance response, shaft stiffness, critical speed.

use crate::types::Complex64;

/// Steady-state unbalance response of a single mode, displacement over eccentricity, at speed
/// ratio `r = Ω/ω_n` and damping ratio `zeta`: `r² / (1 − r² + 2jζr)`, in veer's phasor convention.
///
/// This is the 1X vector of a mode with eccentricity 1 and the heavy spot at the reference mark, seen
/// by a probe at the reference mark: its phase lag (see [`crate::lag_deg`]) is 0 at slow roll, exactly
/// 90° at `r = 1` and tends to 180° far above the critical, where the amplitude tends to 1 (the rotor
/// spins about its mass centre). Multiply by `ε·e^{−j(β+α)}` for heavy spot β and probe angle α.
/// Source: S. S. Rao, *Mechanical Vibrations*, rotating unbalance (§3.7 in the 5th ed.).
pub fn unbalance_response(r: f64, zeta: f64) -> Complex64 {
    Complex64::new(r * r, 0.0) / Complex64::new(1.0 - r * r, 2.0 * zeta * r)
}

/// Lateral stiffness at mid-span of a simply supported massless round shaft carrying a central
/// disk, N/m: `k = 48EI/L³` with `I = πd⁴/64`, from Young's modulus `e_pa` (Pa), diameter `d_m` and
/// bearing span `l_m` (m). The textbook Jeffcott (Laval) rotor, used to give demo machines a
/// plausible first critical.
pub fn jeffcott_stiffness(e_pa: f64, d_m: f64, l_m: f64) -> f64 {
    let i = std::f64::consts::PI * d_m.powi(4) / 64.0;
    48.0 * e_pa * i / l_m.powi(3)
}

/// Undamped natural frequency of stiffness `k` (N/m) and mass `m` (kg), in r/min:
/// `(60/2π)·√(k/m)`, the critical speed of a Jeffcott rotor.
pub fn natural_rpm(k: f64, m: f64) -> f64 {
    60.0 / (2.0 * std::f64::consts::PI) * (k / m).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::types::lag_deg;

    #[test]
    fn unbalance_peak_location_height_and_phase() {
        // S. S. Rao, Mechanical Vibrations (5th ed.), §3.7 rotating unbalance; REFERENCES.md §4
        // (confirmed): the peak of r²/D is at r = 1/√(1 − 2ζ²) with height 1/(2ζ√(1 − ζ²)); at r = 1
        // the ratio is 1/(2ζ) and the lag exactly 90°.
        for zeta in [0.02, 0.05, 0.1, 0.3] {
            // Golden-section search for the maximum of |H| on [0.8, 1.6].
            let f = |r: f64| unbalance_response(r, zeta).norm();
            let g = (5f64.sqrt() - 1.0) / 2.0;
            let (mut a, mut b) = (0.8, 1.6);
            for _ in 0..200 {
                let c = b - g * (b - a);
                let d = a + g * (b - a);
                if f(c) > f(d) {
                    b = d;
                } else {
                    a = c;
                }
            }
            let r_peak = 0.5 * (a + b);
            let expected = 1.0 / (1.0 - 2.0 * zeta * zeta).sqrt();
            assert!(
                (r_peak - expected).abs() < 1e-6,
                "ζ {zeta}: {r_peak} vs {expected}"
            );
            let height = 1.0 / (2.0 * zeta * (1.0 - zeta * zeta).sqrt());
            assert!((f(expected) - height).abs() < 1e-12 * height);
            let at_one = unbalance_response(1.0, zeta);
            assert!((lag_deg(at_one) - 90.0).abs() < 1e-12);
            assert!((at_one.norm() - 1.0 / (2.0 * zeta)).abs() < 1e-12);
        }
        // ζ = 0.05: peak r = 1.002509, height 10.012523 (REFERENCES.md §4, recomputed).
        assert!((1.0 / (1.0 - 2.0 * 0.05f64.powi(2)).sqrt() - 1.002509).abs() < 1e-6);
        let far = unbalance_response(100.0, 0.05);
        assert!((far.norm() - 1.0).abs() < 1e-3 && lag_deg(far) > 179.0);
        assert!(lag_deg(unbalance_response(0.01, 0.05)) < 0.1);
    }

    #[test]
    fn jeffcott_worked_example() {
        // REFERENCES.md §5, confirmed: worked exam solution (studyadda.com; same question on
        // byjus.com): 10 kg disk at mid-span, d = 30 mm, L = 500 mm, E = 2.1e11 Pa →
        // k = 3 206 309 N/m, fc ≈ 90 Hz (recomputed there: 90.120 Hz, 5 407.2 r/min).
        let k = jeffcott_stiffness(2.1e11, 0.030, 0.500);
        assert!((k - 3_206_309.0).abs() < 1.0, "k = {k}");
        let rpm = natural_rpm(k, 10.0);
        assert!((rpm / 60.0 - 90.12).abs() < 0.005, "fc = {}", rpm / 60.0);
        assert!((rpm - 5407.2).abs() < 0.1);
    }
}
