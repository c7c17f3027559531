//! Tests of critical-speed identification against the closed-form unbalance response.
//!
//! The data are built from the textbook result for a rotating unbalance (S. S. Rao, *Mechanical
//! Vibrations*, 5th ed. 2011, §3.7; REFERENCES §4): amplitude ε·r²/D(r), D = √((1 − r²)² + (2ζr)²),
//! phase lag β + atan2(2ζr, 1 − r²), written here independently of the fitted model's code.

use super::*;
use crate::from_amp_lag;

/// One mode of a synthetic rotor.
#[derive(Clone, Copy)]
struct Mode {
    natural_rpm: f64,
    zeta: f64,
    /// ε: the response far above the critical.
    amp: f64,
    /// β: the lag well below the critical, degrees.
    lag: f64,
}

impl Mode {
    fn new(natural_rpm: f64, zeta: f64) -> Self {
        Self {
            natural_rpm,
            zeta,
            amp: 1.0,
            lag: 30.0,
        }
    }

    /// Rao §3.7: M X/(m e) = r²/D, lag φ = atan2(2ζr, 1 − r²).
    fn response(&self, rpm: f64) -> Complex64 {
        let r = rpm / self.natural_rpm;
        let d = ((1.0 - r * r).powi(2) + (2.0 * self.zeta * r).powi(2)).sqrt();
        let phi = (2.0 * self.zeta * r).atan2(1.0 - r * r).to_degrees();
        from_amp_lag(self.amp * r * r / d, self.lag + phi)
    }

    /// Speed of the unbalance-response peak, ωn/√(1 − 2ζ²) (Rao §3.7; REFERENCES §4 table).
    fn peak_rpm(&self) -> f64 {
        self.natural_rpm / (1.0 - 2.0 * self.zeta * self.zeta).sqrt()
    }
}

/// The seeded generator of the tests: SplitMix64 (G. Steele, D. Lea, C. Flood, "Fast splittable
/// pseudorandom number generators", OOPSLA 2014), with Box–Muller for Gaussian deviates.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn gauss(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

/// A run-up from `lo` to `hi` r/min in steps of `step`, with `f` giving the vector at each speed.
fn run_up(lo: f64, hi: f64, step: f64, mut f: impl FnMut(f64) -> Complex64) -> Vec<ResponsePoint> {
    let n = ((hi - lo) / step).floor() as usize + 1;
    (0..n)
        .map(|k| {
            let rpm = lo + step * k as f64;
            ResponsePoint {
                time_s: 0.05 * k as f64,
                speed_rpm: rpm,
                vector: f(rpm),
            }
        })
        .collect()
}

/// The same points as a coast-down: falling speed, rising time.
fn as_coast_down(points: &[ResponsePoint]) -> Vec<ResponsePoint> {
    points
        .iter()
        .rev()
        .enumerate()
        .map(|(k, p)| ResponsePoint {
            time_s: 0.05 * k as f64,
            ..*p
        })
        .collect()
}

/// Half-power AF of the closed-form unbalance curve, by bisection on the amplitude r²/D: the
/// recomputed oracle of REFERENCES §1.1, regenerated here from the formula.
fn oracle_af(zeta: f64) -> f64 {
    let amp = |r: f64| r * r / ((1.0 - r * r).powi(2) + (2.0 * zeta * r).powi(2)).sqrt();
    let rp = 1.0 / (1.0 - 2.0 * zeta * zeta).sqrt();
    let level = amp(rp) / 2f64.sqrt();
    let bisect = |mut a: f64, mut b: f64| {
        // amp(a) − level and amp(b) − level have opposite signs.
        let sa = amp(a) > level;
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            if (amp(m) > level) == sa {
                a = m;
            } else {
                b = m;
            }
        }
        0.5 * (a + b)
    };
    let r1 = bisect(0.1, rp);
    let r2 = bisect(rp, 10.0);
    rp / (r2 - r1)
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

#[test]
fn oracle_reproduces_reference_af_values() {
    // REFERENCES §1.1, unbalance-excited displacement curve (recomputed): 9.900, 24.960, 4.797.
    for (zeta, af) in [(0.05, 9.900), (0.02, 24.960), (0.10, 4.797)] {
        assert!(
            (oracle_af(zeta) - af).abs() < 1e-3,
            "ζ {zeta}: {}",
            oracle_af(zeta)
        );
    }
}

#[test]
fn clean_single_modes_match_the_closed_form() {
    // Rao §3.7 peak at ωn/√(1 − 2ζ²); REFERENCES §1.1 AF values (recomputed, tolerance 0.5 %).
    for (zeta, af_ref) in [(0.05, 9.900), (0.02, 24.960), (0.10, 4.797)] {
        let mode = Mode::new(3000.0, zeta);
        let points = run_up(300.0, 6000.0, 1.5, |n| mode.response(n));
        let found = identify(&points, &ResonanceConfig::default());
        assert_eq!(found.len(), 1, "ζ {zeta}: {found:?}");
        let r = &found[0];
        assert!(
            rel(r.speed_rpm, mode.peak_rpm()) < 1e-3,
            "ζ {zeta}: Nc {}",
            r.speed_rpm
        );
        let af = r
            .amplification_factor
            .expect("both half-power points inside the data");
        assert!(rel(af, af_ref) < 5e-3, "ζ {zeta}: AF {af} vs {af_ref}");
        assert!(rel(af, oracle_af(zeta)) < 5e-3, "ζ {zeta}: AF {af}");
        // The peak amplitude of Rao's curve is 1/(2ζ√(1 − ζ²)) (REFERENCES §4).
        let top = 1.0 / (2.0 * zeta * (1.0 - zeta * zeta).sqrt());
        assert!(
            rel(r.peak_amplitude, top) < 2e-3,
            "ζ {zeta}: peak {}",
            r.peak_amplitude
        );
        let fit = r.fit.as_ref().expect("fit converges on clean data");
        assert!(
            rel(fit.natural_rpm, 3000.0) < 1e-3,
            "ζ {zeta}: Nn {}",
            fit.natural_rpm
        );
        assert!(
            rel(fit.damping_ratio, zeta) < 0.02,
            "ζ {zeta}: fit ζ {}",
            fit.damping_ratio
        );
        assert!(
            fit.rms_residual < 1e-6,
            "ζ {zeta}: residual {}",
            fit.rms_residual
        );
        let d = r.damping_ratio.expect("damping estimated");
        assert!(rel(d, zeta) < 0.02, "ζ {zeta}: reported ζ {d}");
        assert!(!r.heavily_damped);
        // The unbalance vector: amplitude ε = 1, lag β = 30°.
        assert!((fit.modal_vector.norm() - 1.0).abs() < 1e-3);
        assert!((lag_deg(fit.modal_vector) - 30.0).abs() < 0.1);
        assert!(fit.background.norm() < 1e-3);
    }
}

#[test]
fn phase_regimes_of_the_model_and_of_identification() {
    // Common practice / Rao §3.7: lag ≈ low-speed lag well below, +90° at ωn, ≈ +180° well above.
    let fit = ModeFit {
        natural_rpm: 2000.0,
        damping_ratio: 0.05,
        modal_vector: from_amp_lag(2.0, 40.0),
        background: Complex64::default(),
        rms_residual: 0.0,
        points: 0,
    };
    let lag_at = |rpm: f64| lag_deg(model_vector(rpm, &fit));
    assert!(
        (lag_at(200.0) - 40.0).abs() < 1.0,
        "well below: {}",
        lag_at(200.0)
    );
    assert!(
        (lag_at(2000.0) - 130.0).abs() < 1e-9,
        "at ωn: {}",
        lag_at(2000.0)
    );
    assert!(
        (lag_at(40_000.0) - 220.0).abs() < 1.0,
        "well above: {}",
        lag_at(40_000.0)
    );
    // Far above, the response tends to −modal_vector (amplitude ε).
    assert!((model_vector(1e6, &fit) + fit.modal_vector).norm() < 1e-3);
    // The model against the closed form of the tests (Rao §3.7), at a few speeds.
    let mode = Mode {
        natural_rpm: 2000.0,
        zeta: 0.05,
        amp: 2.0,
        lag: 40.0,
    };
    for rpm in [500.0, 1900.0, 2000.0, 2100.0, 5000.0] {
        assert!(
            (model_vector(rpm, &fit) - mode.response(rpm)).norm() < 1e-9,
            "{rpm}"
        );
    }

    // Identification reads the lag at the peak r_p = 1/√(1 − 2ζ²): β + atan2(2ζ r_p, 1 − r_p²).
    let points = run_up(200.0, 5000.0, 2.0, |n| mode.response(n));
    let found = identify(&points, &ResonanceConfig::default());
    assert_eq!(found.len(), 1);
    let rp = mode.peak_rpm() / mode.natural_rpm;
    let swing = (2.0 * mode.zeta * rp).atan2(1.0 - rp * rp).to_degrees();
    assert!(
        (found[0].phase_deg - (40.0 + swing)).abs() < 0.5,
        "{}",
        found[0].phase_deg
    );
    assert!(
        (found[0].phase_change_deg - swing).abs() < 0.5,
        "{}",
        found[0].phase_change_deg
    );
    assert!((found[0].phase_change_deg - 90.0).abs() < 5.0);
}

#[test]
fn noisy_mode_within_tolerance() {
    // 2 % of peak Gaussian noise on each of the real and imaginary parts (seeded).
    // Tolerances of the brief: Nc within 0.5 % (Rao §3.7 peak), AF within 10 % of 9.900 (REFERENCES §1.1).
    let mode = Mode::new(3000.0, 0.05);
    let sigma = 0.02 * 1.0 / (2.0 * 0.05);
    for seed in 1..=8 {
        let mut rng = Rng(seed);
        let points = run_up(300.0, 6000.0, 1.5, |n| {
            mode.response(n) + Complex64::new(sigma * rng.gauss(), sigma * rng.gauss())
        });
        let found = identify(&points, &ResonanceConfig::default());
        assert_eq!(found.len(), 1, "seed {seed}: {found:?}");
        let r = &found[0];
        assert!(
            rel(r.speed_rpm, mode.peak_rpm()) < 5e-3,
            "seed {seed}: Nc {}",
            r.speed_rpm
        );
        let af = r.amplification_factor.expect("AF measured");
        assert!(rel(af, 9.900) < 0.10, "seed {seed}: AF {af}");
        let fit = r.fit.as_ref().expect("fit");
        assert!(
            rel(fit.natural_rpm, 3000.0) < 2e-3,
            "seed {seed}: Nn {}",
            fit.natural_rpm
        );
        assert!(
            rel(fit.damping_ratio, 0.05) < 0.05,
            "seed {seed}: ζ {}",
            fit.damping_ratio
        );
    }
}

#[test]
fn two_modes_in_one_sweep() {
    // Two modes superposed (modal superposition, common practice), 1 % noise.
    let m1 = Mode::new(1800.0, 0.05);
    let m2 = Mode {
        natural_rpm: 4200.0,
        zeta: 0.04,
        amp: 0.8,
        lag: 150.0,
    };
    let mut rng = Rng(42);
    let points = run_up(300.0, 6500.0, 2.0, |n| {
        m1.response(n) + m2.response(n) + Complex64::new(0.1 * rng.gauss(), 0.1 * rng.gauss())
    });
    let found = identify(&points, &ResonanceConfig::default());
    assert_eq!(found.len(), 2, "{found:?}");
    assert!(
        rel(found[0].speed_rpm, m1.peak_rpm()) < 0.01,
        "{}",
        found[0].speed_rpm
    );
    assert!(
        rel(found[1].speed_rpm, m2.peak_rpm()) < 0.01,
        "{}",
        found[1].speed_rpm
    );
    for (r, m) in found.iter().zip([m1, m2]) {
        let fit = r.fit.as_ref().expect("fit");
        assert!(
            rel(fit.natural_rpm, m.natural_rpm) < 0.005,
            "{}",
            fit.natural_rpm
        );
        assert!(
            rel(fit.damping_ratio, m.zeta) < 0.1,
            "{}",
            fit.damping_ratio
        );
        assert!(!r.heavily_damped);
    }
}

#[test]
fn constant_runout_with_noise_is_no_critical() {
    // A constant 1X residue has no phase change (common practice): no critical, whatever the seed.
    for seed in 1..=10 {
        let mut rng = Rng(seed);
        let runout = from_amp_lag(5.0, 200.0);
        let points = run_up(300.0, 6000.0, 2.0, |_| {
            runout + Complex64::new(0.5 * rng.gauss(), 0.5 * rng.gauss())
        });
        let found = identify(&points, &ResonanceConfig::default());
        assert!(found.is_empty(), "seed {seed}: {found:?}");
    }
}

#[test]
fn amplitude_bumps_without_phase_rise_are_no_critical() {
    // A stray tone's leakage: a narrow amplitude bump, with constant phase, erratic phase, or a phase
    // that swings up and back down as the running speed passes the tone (common practice).
    let bump = |n: f64| 0.5 + 4.0 * (-((n - 2500.0) / 60.0).powi(2)).exp();
    let constant = run_up(300.0, 6000.0, 2.0, |n| from_amp_lag(bump(n), 70.0));
    assert!(identify(&constant, &ResonanceConfig::default()).is_empty());
    for seed in 1..=30 {
        let mut rng = Rng(seed);
        let erratic = run_up(300.0, 6000.0, 2.0, |n| {
            from_amp_lag(bump(n), 360.0 * rng.uniform())
        });
        let found = identify(&erratic, &ResonanceConfig::default());
        assert!(found.is_empty(), "seed {seed}: {found:?}");
    }
    let there_and_back = run_up(300.0, 6000.0, 2.0, |n| {
        from_amp_lag(
            bump(n),
            70.0 + 120.0 * (-((n - 2500.0) / 80.0).powi(2)).exp(),
        )
    });
    assert!(identify(&there_and_back, &ResonanceConfig::default()).is_empty());
    // The same bump with a real mode elsewhere: only the mode is reported.
    let mode = Mode::new(4000.0, 0.05);
    let mixed = run_up(300.0, 6000.0, 2.0, |n| {
        from_amp_lag(bump(n), 70.0) + mode.response(n)
    });
    let found = identify(&mixed, &ResonanceConfig::default());
    assert_eq!(found.len(), 1, "{found:?}");
    assert!(rel(found[0].speed_rpm, mode.peak_rpm()) < 0.01);
}

#[test]
fn heavily_damped_mode_is_flagged() {
    // ζ = 0.25: half-power AF well below 2.5 (API RP 684: no margin required, REFERENCES §1.2).
    let mode = Mode::new(2500.0, 0.25);
    let points = run_up(300.0, 8000.0, 2.0, |n| mode.response(n));
    let found = identify(&points, &ResonanceConfig::default());
    assert_eq!(found.len(), 1, "{found:?}");
    let r = &found[0];
    assert!(r.heavily_damped);
    assert!(r.phase_change_deg > 45.0, "{}", r.phase_change_deg);
    if let Some(af) = r.amplification_factor {
        assert!(af < 2.5, "AF {af}");
    }
    let fit = r.fit.as_ref().expect("fit");
    assert!(rel(fit.natural_rpm, 2500.0) < 0.01, "{}", fit.natural_rpm);
    assert!(rel(fit.damping_ratio, 0.25) < 0.05, "{}", fit.damping_ratio);
}

#[test]
fn coast_down_gives_the_run_up_results() {
    let m1 = Mode::new(1800.0, 0.05);
    let m2 = Mode::new(4200.0, 0.03);
    let mut rng = Rng(7);
    let up = run_up(300.0, 6000.0, 3.0, |n| {
        m1.response(n) + m2.response(n) + Complex64::new(0.2 * rng.gauss(), 0.2 * rng.gauss())
    });
    let down = as_coast_down(&up);
    let cfg = ResonanceConfig::default();
    let a = identify(&up, &cfg);
    let b = identify(&down, &cfg);
    assert_eq!(a.len(), 2);
    assert_eq!(a, b);
    let fa = fit_mode(&up, 1800.0, 0.05);
    let fb = fit_mode(&down, 1800.0, 0.05);
    assert!(fa.is_some());
    assert_eq!(fa, fb);
}

#[test]
fn fit_recovers_mode_and_runout_from_an_off_guess() {
    // Rao §3.7 model plus a constant residual runout vector.
    let mode = Mode {
        natural_rpm: 3200.0,
        zeta: 0.03,
        amp: 25.0,
        lag: 300.0,
    };
    let runout = from_amp_lag(6.0, 45.0);
    let points = run_up(1000.0, 6000.0, 2.5, |n| mode.response(n) + runout);
    let fit = fit_mode(&points, 3300.0, 0.06).expect("fit");
    assert!(rel(fit.natural_rpm, 3200.0) < 1e-4, "{}", fit.natural_rpm);
    assert!(rel(fit.damping_ratio, 0.03) < 1e-3, "{}", fit.damping_ratio);
    assert!((fit.modal_vector - from_amp_lag(25.0, 300.0)).norm() < 1e-3);
    assert!((fit.background - runout).norm() < 1e-3);
    assert!(fit.points >= 8);
    // And identification still finds the critical through the runout.
    let found = identify(&points, &ResonanceConfig::default());
    assert_eq!(found.len(), 1);
    assert!(rel(found[0].speed_rpm, mode.peak_rpm()) < 0.01);
}

#[test]
fn spikes_do_not_move_the_result() {
    // The robust smoother (Cleveland 1979 bisquare re-weighting) ignores isolated spikes.
    let mode = Mode::new(3000.0, 0.05);
    let mut points = run_up(300.0, 6000.0, 1.5, |n| mode.response(n));
    for k in [500, 1200, 1700, 1790, 1850, 2600] {
        points[k].vector *= 3.0;
    }
    let found = identify(&points, &ResonanceConfig::default());
    assert_eq!(found.len(), 1, "{found:?}");
    let af = found[0].amplification_factor.expect("AF");
    assert!(rel(af, 9.900) < 0.01, "AF {af} {found:?}");
    assert!(rel(found[0].speed_rpm, mode.peak_rpm()) < 1e-3);
}

#[test]
fn degenerate_inputs_and_settings() {
    let cfg = ResonanceConfig::default();
    assert!(cfg.validate().is_ok());
    assert!(identify(&[], &cfg).is_empty());
    let few = run_up(1000.0, 1010.0, 2.0, |_| Complex64::new(1.0, 0.0));
    assert!(identify(&few, &cfg).is_empty());
    // Non-finite points are skipped, not propagated.
    let mode = Mode::new(3000.0, 0.05);
    let mut points = run_up(300.0, 6000.0, 2.0, |n| mode.response(n));
    points[100].vector = Complex64::new(f64::NAN, 0.0);
    points[900].speed_rpm = f64::INFINITY;
    let found = identify(&points, &cfg);
    assert_eq!(found.len(), 1);
    for bad in [
        ResonanceConfig {
            min_peak_ratio: 0.5,
            ..cfg.clone()
        },
        ResonanceConfig {
            min_phase_change_deg: f64::NAN,
            ..cfg.clone()
        },
        ResonanceConfig {
            fit_span: 0.0,
            ..cfg.clone()
        },
        ResonanceConfig {
            smoothing_points: 2,
            ..cfg.clone()
        },
    ] {
        assert!(matches!(
            bad.validate(),
            Err(ResonanceError::InvalidConfig { .. })
        ));
        assert!(try_identify(&points, &bad).is_err());
        // The lenient entry point still answers, with the values brought into range.
        let _ = identify(&points, &bad);
    }
    assert!(fit_mode(&points, f64::NAN, 0.05).is_none());
    assert!(fit_mode(&few, 1005.0, 0.05).is_none());
}

#[test]
fn coarse_speed_bins_keep_the_af() {
    // Responses kept in speed bins: a ζ = 0.02 peak at 3000 r/min (half-power band 120 r/min) in
    // 10 and 20 r/min bins, at every placement of the bins relative to the peak. Reference AF 24.960
    // (REFERENCES §1.1, recomputed), Nc from Rao §3.7. Linear interpolation of a half-power crossing
    // between bins cuts the convex flank by a chord, which widens the band by about
    // f''·h²/(8·|f'|) per side (h the bin width in half-widths; f''= 0.177, |f'| = 0.354 at the
    // half-power point of the resonance curve): 0.17 % at 10 r/min, 0.7 % at 20 r/min. Hence the
    // tolerances 0.5 % and 1.5 %.
    let mode = Mode::new(3000.0, 0.02);
    for (bin, tol) in [(10.0, 0.005), (20.0, 0.015)] {
        for k in 0..10 {
            let start = 300.0 + bin * f64::from(k) / 10.0;
            let points = run_up(start, 6000.0, bin, |n| mode.response(n));
            let found = identify(&points, &ResonanceConfig::default());
            assert_eq!(found.len(), 1, "bin {bin}, start {start}: {found:?}");
            let af = found[0].amplification_factor.expect("AF");
            assert!(rel(af, 24.960) < tol, "bin {bin}, start {start}: AF {af}");
            assert!(rel(found[0].speed_rpm, mode.peak_rpm()) < 1e-3);
        }
    }
}
