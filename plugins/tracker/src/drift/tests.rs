//! Unit checks of the drift module: the closed forms against the textbook formulas, the inversions
//! by round trip, and the estimator, classifier and alert rule on noiseless cases.

use super::classify::{classify, nearest_on_locus};
use super::model::*;
use super::slope::{log_curvature, log_slope, ratio_and_damping_from_slope, ratio_from_slope};
use super::*;
use crate::margin::{MarginRule, OperatingRange, Side};
use crate::resonance::ModeFit;
use crate::sim::unbalance_response;
use crate::{from_amp_lag, lag_deg, Complex64};

const RATIOS: [f64; 10] = [0.2, 0.5, 0.75, 0.9, 0.97, 1.0, 1.03, 1.1, 1.35, 2.5];
const DAMPINGS: [f64; 5] = [0.02, 0.05, 0.1, 0.3, 0.6];

#[test]
fn phase_lag_matches_rao_and_the_simulator() {
    // S. S. Rao, Mechanical Vibrations, 5th ed., §3.7 (REFERENCES §4, confirmed):
    // φ = atan2(2ζr, 1 − r²), exactly 90° at r = 1 for every ζ, tending to 180° above.
    for zeta in DAMPINGS {
        for r in RATIOS {
            let formula = (2.0 * zeta * r).atan2(1.0 - r * r).to_degrees();
            let lag = phase_lag(r, zeta).to_degrees();
            assert!((lag - formula).abs() < 1e-12, "ζ {zeta} r {r}");
            // The simulator's independent shape and veer's lag convention agree.
            let sim = lag_deg(unbalance_response(r, zeta));
            assert!((sim - formula).abs() < 1e-9, "ζ {zeta} r {r}: {sim}");
            let amp = amplitude_ratio(r, zeta);
            assert!((amp - unbalance_response(r, zeta).norm()).abs() < 1e-12);
        }
        assert!((phase_lag(1.0, zeta).to_degrees() - 90.0).abs() < 1e-12);
    }
}

#[test]
fn phase_slope_matches_formula_and_finite_difference() {
    // dφ/dr = 2ζ(1 + r²)/((1 − r²)² + (2ζr)²): derivative of Rao's §3.7 lag, recomputed here by
    // a central difference of the lag itself; at r = 1 it is 1/ζ.
    for zeta in DAMPINGS {
        for r in RATIOS {
            let h = 1e-6;
            let fd = (phase_lag(r + h, zeta) - phase_lag(r - h, zeta)) / (2.0 * h);
            let formula =
                2.0 * zeta * (1.0 + r * r) / ((1.0 - r * r).powi(2) + (2.0 * zeta * r).powi(2));
            let s = phase_slope(r, zeta);
            assert!((s - formula).abs() <= 1e-12 * formula, "ζ {zeta} r {r}");
            assert!((s - fd).abs() <= 1e-5 * s, "ζ {zeta} r {r}: {s} vs {fd}");
        }
        assert!((phase_slope(1.0, zeta) - 1.0 / zeta).abs() < 1e-9);
    }
}

#[test]
fn lag_inverts_to_the_speed_ratio() {
    // Inversion of Rao's §3.7 lag: tan φ = 2ζr/(1 − r²) → sin φ·r² + 2ζ cos φ·r − sin φ = 0.
    for zeta in DAMPINGS {
        for r in RATIOS {
            let lag = (2.0 * zeta * r).atan2(1.0 - r * r);
            let back = ratio_from_lag(lag, zeta).expect("lag inside (0, π)");
            assert!(
                (back - r).abs() < 1e-10 * r.max(1.0),
                "ζ {zeta} r {r}: {back}"
            );
            // The textbook quadratic root, computed in its naive form, agrees.
            let (s, c) = lag.sin_cos();
            let naive = (-zeta * c + (zeta * zeta * c * c + s * s).sqrt()) / s;
            assert!((back - naive).abs() < 1e-8 * r.max(1.0));
        }
        assert!(
            (ratio_from_lag(std::f64::consts::FRAC_PI_2, zeta).expect("90°") - 1.0).abs() < 1e-12
        );
    }
    assert!(ratio_from_lag(0.0, 0.1).is_none());
    assert!(ratio_from_lag(-0.1, 0.1).is_none());
    assert!(ratio_from_lag(std::f64::consts::PI, 0.1).is_none());
    assert!(ratio_from_lag(1.0, f64::NAN).is_none());
}

#[test]
fn amplitude_inverts_on_each_branch() {
    for zeta in [0.02, 0.05, 0.1, 0.3] {
        let peak = peak_ratio(zeta).expect("light damping has a peak");
        // Rao §3.7: peak at r = 1/√(1 − 2ζ²) with height 1/(2ζ√(1 − ζ²)).
        let height = 1.0 / (2.0 * zeta * (1.0 - zeta * zeta).sqrt());
        assert!((amplitude_ratio(peak, zeta) - height).abs() < 1e-9 * height);
        for r in RATIOS {
            let below = r <= peak;
            let a = amplitude_ratio(r, zeta);
            let back = ratio_from_amplitude(a, zeta, below).expect("on its branch");
            assert!((back - r).abs() < 1e-8, "ζ {zeta} r {r}: {back}");
            let h = 1e-6;
            let fd = (amplitude_ratio(r + h, zeta) - amplitude_ratio(r - h, zeta)) / (2.0 * h);
            assert!((amplitude_slope(r, zeta) - fd).abs() < 1e-5 * fd.abs().max(1.0));
        }
    }
    assert!(ratio_from_amplitude(0.5, 0.1, false).is_none());
}

#[test]
fn slope_inverts_alone_and_with_curvature() {
    // p(r) = r·dφ/dr from the Rao §3.7 lag; round trips on both sides of the critical.
    for zeta in [0.03, 0.05, 0.1, 0.2] {
        for r in [0.5, 0.75, 0.9, 0.97, 1.1, 1.3, 2.0] {
            let p = log_slope(r, zeta);
            let below = r < 1.0;
            let back = ratio_from_slope(p, zeta, below).expect("slope on its branch");
            assert!((back - r).abs() < 1e-8, "ζ {zeta} r {r}: {back}");
            if (0.7..=1.4).contains(&r) {
                let q = log_curvature(r, zeta);
                let (rj, zj) = ratio_and_damping_from_slope(p, q, below).expect("joint solution");
                assert!((rj - r).abs() < 1e-5, "ζ {zeta} r {r}: joint r {rj}");
                assert!(
                    (zj - zeta).abs() < 1e-4 * zeta.max(1.0),
                    "ζ {zeta} r {r}: {zj}"
                );
            }
        }
    }
    assert!(ratio_from_slope(-1.0, 0.1, true).is_none());
    // No mode with ζ = 0.1 is steeper than about 1/ζ.
    assert!(ratio_from_slope(20.0, 0.1, true).is_none());
}

#[test]
fn locus_distance_tells_along_from_off() {
    let zeta = 0.1;
    for r in [0.6, 0.8, 0.95, 1.0, 1.2] {
        let z = shape(r, zeta);
        let (rl, d) = nearest_on_locus(z, zeta);
        assert!(d < 1e-9 * z.norm().max(1.0), "r {r}: {d}");
        assert!((rl - r).abs() < 1e-6, "r {r}: {rl}");
        // The unbalance turned by 30°: off the locus. Least so at the critical itself, where the
        // locus is close to a circle through the origin (the Nyquist circle) and a turn about the
        // origin partly follows it: 1 − cos 30° ≈ 0.13 of the diameter at most.
        let turned = z * Complex64::from_polar(1.0, (-30f64).to_radians());
        let (_, d) = nearest_on_locus(turned, zeta);
        let least = if (r - 1.0f64).abs() < 0.01 {
            0.05
        } else {
            0.15
        };
        assert!(d / z.norm() > least, "r {r}: {}", d / z.norm());
    }
    let cfg = ClassifyConfig::default();
    assert_eq!(
        classify(0.3, 0.001, 0.0, 1.0, 1000.0, &cfg),
        Change::Unbalance
    );
    assert_eq!(
        classify(f64::NAN, 0.001, 0.0, 1.0, 1000.0, &cfg),
        Change::Unbalance
    );
    assert_eq!(
        classify(0.01, 0.001, 50.0, 1.0, 1000.0, &cfg),
        Change::NaturalSpeed
    );
    assert_eq!(classify(0.01, 0.001, 5.0, 1.0, 1000.0, &cfg), Change::None);
}

fn model(natural_rpm: f64, zeta: f64) -> CriticalModel {
    let fit = ModeFit {
        natural_rpm,
        damping_ratio: zeta,
        modal_vector: from_amp_lag(40.0, 60.0),
        background: from_amp_lag(2.0, 10.0),
        rms_residual: 0.01,
        points: 100,
    };
    CriticalModel::from_fit(&fit, from_amp_lag(5.0, 200.0)).expect("valid fit")
}

/// Feeds `revs` noiseless revolutions at `rpm` with the natural speed at `true_nn`.
fn feed(est: &mut Estimator, m: &CriticalModel, rpm: f64, true_nn: f64) -> Vec<Estimate> {
    let mut t = 0.0;
    let mut out = Vec::new();
    for _ in 0..3000 {
        t += 60.0 / rpm;
        if let Some(e) = est.push(t, rpm, m.predict_at(rpm, true_nn)) {
            out.push(e);
        }
    }
    out
}

#[test]
fn noiseless_windows_give_the_natural_speed() {
    let m = model(1900.0, 0.1);
    let mut est = Estimator::new(m.clone(), EstimatorConfig::default()).expect("valid");
    for true_nn in [1900.0, 1800.0, 1600.0, 1500.0] {
        est.reset();
        let out = feed(&mut est, &m, 1450.0, true_nn);
        assert!(!out.is_empty());
        for e in &out {
            assert!((e.natural_rpm - true_nn).abs() < 1e-6 * true_nn, "{e:?}");
            assert!(e.informative, "{e:?}");
            assert!(e.locus_residual < 1e-6);
            let expected = if (true_nn - 1900.0).abs() < 1.0 {
                Change::None
            } else {
                Change::NaturalSpeed
            };
            assert_eq!(e.change, expected);
            assert_eq!(e.method, Method::PhaseAndAmplitude);
        }
    }
}

#[test]
fn far_from_resonance_is_not_informative() {
    // r = 0.25: the lag moves about 0.06° per percent of natural speed.
    let m = model(1900.0, 0.1);
    let mut est = Estimator::new(m.clone(), EstimatorConfig::default()).expect("valid");
    let out = feed(&mut est, &m, 475.0, 1900.0);
    assert!(!out.is_empty());
    for e in out {
        assert!(!e.informative);
        assert_eq!(e.reason, Some(NotInformative::TooFarFromResonance));
        assert!(e.sensitivity_deg_per_pct < 0.3);
    }
}

#[test]
fn bad_input_is_refused_not_panicked_on() {
    let m = model(1900.0, 0.1);
    let bad = EstimatorConfig {
        window_s: f64::NAN,
        ..EstimatorConfig::default()
    };
    assert!(matches!(
        Estimator::new(m.clone(), bad),
        Err(DriftError::InvalidConfig {
            field: "window_s",
            ..
        })
    ));
    let mut broken = m.clone();
    broken.damping_ratio = 0.0;
    assert!(Estimator::new(broken, EstimatorConfig::default()).is_err());
    let mut est = Estimator::new(m, EstimatorConfig::default()).expect("valid");
    assert!(est
        .push(f64::NAN, 1450.0, Complex64::new(1.0, 0.0))
        .is_none());
    assert!(est.push(1.0, -5.0, Complex64::new(1.0, 0.0)).is_none());
    assert!(est
        .push(1.0, 1450.0, Complex64::new(f64::INFINITY, 0.0))
        .is_none());
    assert_eq!(est.rejected(), 3);
    assert!(SlopeEstimator::new(SlopeConfig {
        damping_ratio: 1.5,
        ..SlopeConfig::default()
    })
    .is_err());
}

#[test]
fn alert_on_a_critical_already_too_close() {
    let m = model(1900.0, 0.1);
    let cfg = DriftAlertConfig {
        range: OperatingRange::new(1380.0, 1460.0).expect("valid range"),
        rule: MarginRule::Api2005,
        af: Some(5.0),
        horizon_s: 0.0,
        trend_window_s: 3600.0,
        sigmas: 2.0,
        persistence: 2,
    };
    let mut alert = DriftAlert::new(cfg, &m).expect("valid alert settings");
    let mut est = Estimator::new(m.clone(), EstimatorConfig::default()).expect("valid");
    // 1700 r/min natural: critical ≈ 1717, margin 17.6 % above 1460 < 22.1 % (AF 5, API 2005).
    let out = feed(&mut est, &m, 1450.0, 1700.0);
    let raised: Vec<_> = out.iter().filter_map(|e| alert.update(e)).collect();
    assert_eq!(raised.len(), 1, "{raised:?}");
    match raised[0] {
        DriftAlertEvent::CriticalApproach {
            side,
            actual_pct,
            required_pct,
            ..
        } => {
            assert_eq!(side, Side::Above);
            assert!(actual_pct < required_pct);
        }
        other => panic!("expected a critical approach, got {other:?}"),
    }
    let bad = DriftAlertConfig {
        horizon_s: f64::NAN,
        ..cfg
    };
    assert!(DriftAlert::new(bad, &m).is_err());
    // The same rule far from breach stays quiet.
    let mut alert = DriftAlert::new(cfg, &m).expect("valid alert settings");
    est.reset();
    let out = feed(&mut est, &m, 1450.0, 1900.0);
    assert!(out.iter().all(|e| alert.update(e).is_none()));
}

#[test]
fn scaled_unbalance_is_off_the_locus_too() {
    // Same angle, 30 % more unbalance: the lag alone says nothing changed, the amplitude disagrees.
    let m = model(1900.0, 0.1);
    let mut grown = m.clone();
    grown.modal_vector *= 1.3;
    let mut est = Estimator::new(m.clone(), EstimatorConfig::default()).expect("valid");
    let mut t = 0.0;
    let mut seen = 0;
    for _ in 0..3000 {
        t += 60.0 / 1450.0;
        if let Some(e) = est.push(t, 1450.0, grown.predict(1450.0)) {
            assert_eq!(e.change, Change::Unbalance, "{e:?}");
            assert_eq!(e.reason, Some(NotInformative::OffLocus));
            let by_phase = e.by_phase.expect("the lag inverts");
            assert!((by_phase - 1900.0).abs() < 1e-6 * 1900.0);
            seen += 1;
        }
    }
    assert!(seen > 0);
}

#[test]
fn noisy_windows_are_not_informative() {
    // r ≈ 0.76, ζ = 0.1: about 0.74° of lag per percent. A per-revolution scatter of 40 % of the
    // vector (an erratic probe) over a 30 s window leaves a lag σ of about 0.6°, some 0.85 % of
    // natural speed from the lag alone and about 0.45 % with the amplitude; a limit of 0.2 % makes
    // it too noisy.
    let m = model(1900.0, 0.1);
    let cfg = EstimatorConfig {
        max_sigma_pct: 0.2,
        classify: ClassifyConfig {
            min_locus_residual: 10.0,
            ..ClassifyConfig::default()
        },
        ..EstimatorConfig::default()
    };
    let mut est = Estimator::new(m.clone(), cfg).expect("valid");
    let clean = m.predict(1450.0);
    let scale = (clean - m.slow_roll - m.background).norm() * 0.4;
    let mut t = 0.0;
    let mut seen = 0;
    for i in 0..3000u32 {
        t += 60.0 / 1450.0;
        // A deterministic ±scale scatter alternating in quadrature (mean zero over four turns).
        let kick = Complex64::from_polar(scale, f64::from(i % 4) * std::f64::consts::FRAC_PI_2);
        if let Some(e) = est.push(t, 1450.0, clean + kick) {
            assert_eq!(e.reason, Some(NotInformative::TooNoisy), "{e:?}");
            assert!(e.sigma_rpm / e.natural_rpm * 100.0 > 0.2);
            seen += 1;
        }
    }
    assert!(seen > 0);
}

#[test]
fn damping_error_biases_the_lag_inversion_as_predicted() {
    // From Rao's §3.7 lag, tan φ = 2ζr/(1 − r²) at fixed φ: δr/r ≈ −(1 − r²)/(1 + r²)·δζ/ζ.
    let zeta = 0.1;
    for r in [0.6, 0.77, 0.9, 1.0, 1.2] {
        let lag = phase_lag(r, zeta);
        let wrong = ratio_from_lag(lag, zeta * 1.01).expect("inverts");
        let predicted = -(1.0 - r * r) / (1.0 + r * r) * 0.01;
        let got = wrong / r - 1.0;
        assert!(
            (got - predicted).abs() < 1e-4,
            "r {r}: {got} vs {predicted}"
        );
    }
    // The configured ζ uncertainty widens σ by that much where the noise is negligible.
    let m = model(1900.0, 0.1);
    let cfg = EstimatorConfig {
        damping_model_pct: 10.0,
        amplitude_model_pct: 1000.0,
        max_sigma_pct: 100.0,
        ..EstimatorConfig::default()
    };
    let mut est = Estimator::new(m.clone(), cfg).expect("valid");
    let out = feed(&mut est, &m, 1450.0, 1900.0);
    let r: f64 = 1450.0 / 1900.0;
    let expected = 1900.0 * (1.0 - r * r) / (1.0 + r * r) * 0.1;
    for e in out {
        assert!(
            (e.sigma_rpm - expected).abs() < 0.05 * expected,
            "{} vs {expected}",
            e.sigma_rpm
        );
    }
}

#[test]
fn a_projection_through_the_whole_range_is_a_breach() {
    use super::{Change, Estimate, Judgement, Method};
    let cfg = DriftAlertConfig {
        range: OperatingRange::new(1380.0, 1460.0).expect("valid range"),
        rule: MarginRule::Api2005,
        af: Some(5.0),
        horizon_s: 3.0 * 3600.0,
        trend_window_s: 3.0 * 3600.0,
        sigmas: 0.0,
        persistence: 1,
    };
    let mut alert = DriftAlert::with_critical_factor(cfg, 1.0).expect("valid");
    // Falling 5 r/min per minute from 2000 r/min: in three hours the line is at 1000 r/min,
    // 27.5 % below the range, which a margin measured from the low end alone would call clear.
    let mut last = None;
    for i in 0..=100 {
        let t = f64::from(i) * 60.0;
        let nn = 2000.0 - 5.0 * f64::from(i);
        let e = Estimate {
            time_s: t,
            rpm: 1450.0,
            revolutions: 1450,
            natural_rpm: nn,
            sigma_rpm: 2.0,
            ratio: 1450.0 / nn,
            informative: true,
            reason: None,
            method: Method::Phase,
            by_phase: Some(nn),
            by_amplitude: None,
            sensitivity_deg_per_pct: 1.0,
            locus_residual: 0.0,
            change: Change::NaturalSpeed,
            vector: Complex64::new(1.0, 0.0),
        };
        last = Some(alert.judge(&e));
    }
    let Some(Judgement::Assessed(a)) = last else {
        panic!("expected an assessment, got {last:?}");
    };
    // Present: 1500 r/min, 2.7 % above the range: already a breach; the projection crosses.
    let p = a.projected.expect("a projection after 100 min of history");
    assert_eq!(p.side, Side::Below, "{p:?}");
    assert!(p.actual_pct > p.required_pct, "{p:?}");
    assert!(p.breach, "{p:?}");
}
