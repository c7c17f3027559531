//! Check 12: sweep-rate bias. Passing a critical at a finite rate, the observed peak comes lower,
//! later on a run-up and earlier on a coast-down, the more so the faster the sweep and the lighter
//! the damping: F. M. Lewis, "Vibration during acceleration through a critical speed", Trans. ASME
//! 54 (1932) (existence confirmed; volume and pages from memory). The size of the effect is
//! checked against the normalised model of REFERENCES §6, x'' + 2ζx' + x = cos φ(t), dφ/dt =
//! Ω0 ± ηt, integrated here with the simulator's exact oscillator (the §6 table is recomputed,
//! not published: it is regenerated here first), then against the engine's critical speeds on
//! full simulated run-ups and coast-downs at several rates.

use crate::support::{critical_near, engine_config, run, sim_config, unbalance_peak_rpm};
use veer_tracker::engine::EventKind;
use veer_tracker::sim::{Sdof, SimMode, SpeedProfile};
use veer_tracker::Complex64;

/// Largest |x| (static deflections) and Ω/ωn where it happens, for one passage of the normalised
/// model from steady state at Ω0 = 0.5 (up) or 1.5 (down) at the constant rate η.
fn passage(zeta: f64, eta: f64, up: bool) -> (f64, f64) {
    let dt = 0.05;
    let steps = (1.0 / eta / dt).ceil() as u64;
    let (w0, sign) = if up { (0.5, 1.0) } else { (1.5, -1.0) };
    let mut osc = Sdof::new(1.0, zeta, dt).expect("valid oscillator");
    let (q, v) = osc
        .periodic_response(Complex64::new(1.0, 0.0), w0)
        .expect("damped");
    osc.set_state(q.re, v.re, 1.0);
    // Forcing phasor by a chirp recurrence (renormalised), no cos per step.
    let mut z = Complex64::new(1.0, 0.0);
    let mut step = Complex64::from_polar(1.0, w0 * dt + sign * eta * dt * dt * 0.5);
    let turn = Complex64::from_polar(1.0, sign * eta * dt * dt);
    let (mut peak, mut at) = (q.norm(), w0);
    for k in 0..steps {
        z *= step;
        step *= turn;
        if k % 1024 == 1023 {
            z /= z.norm();
            step /= step.norm();
        }
        let x = osc.step(z.re).abs();
        if x > peak {
            peak = x;
            at = w0 + sign * eta * (k + 1) as f64 * dt;
        }
    }
    (peak, at)
}

#[test]
// 1.0471 in the table is a peak location that happens to be near π/3, not π/3.
#[allow(clippy::approx_constant)]
fn normalised_model_reproduces_the_transient_passage_table() {
    // REFERENCES §6 table (recomputed there with the same model; tolerance ~1 %). Columns: ζ, η,
    // run-up peak, its Ω/ωn, coast-down peak, its Ω/ωn.
    let table = [
        (0.01, 1e-4, 44.96, 1.0125, 45.18, 0.9871),
        (0.01, 1e-3, 28.32, 1.0564, 28.74, 0.9443),
        (0.01, 1e-2, 12.13, 1.1993, 12.55, 0.7850),
        (0.02, 1e-4, 24.49, 1.0081, 24.59, 0.9909),
        (0.02, 1e-3, 19.67, 1.0471, 19.97, 0.9506),
        (0.05, 1e-4, 9.995, 1.0015, 10.015, 0.9934),
        (0.05, 1e-3, 9.592, 1.0285, 9.722, 0.9666),
        (0.05, 1e-2, 7.028, 1.1390, 7.365, 0.8177),
    ];
    for (z, e, up_peak, up_at, dn_peak, dn_at) in table {
        let (up, ua) = passage(z, e, true);
        let (dn, da) = passage(z, e, false);
        eprintln!(
            "check 12: ζ {z} η {e:e}: up {up:.3} at {ua:.4} (table {up_peak} at {up_at}), \
             down {dn:.3} at {da:.4} (table {dn_peak} at {dn_at})"
        );
        assert!((up / up_peak - 1.0).abs() < 0.01 && (dn / dn_peak - 1.0).abs() < 0.01);
        assert!((ua / up_at - 1.0).abs() < 0.01 && (da / dn_at - 1.0).abs() < 0.01);
        // Lewis 1932: lower than the steady peak 1/(2ζ√(1 − ζ²)) (Rao §3.4), later up, earlier
        // down than the steady peak at √(1 − 2ζ²). At the slowest, well damped sweep the
        // coast-down's free-vibration beat lifts its peak a hair over the steady one (the table's
        // 10.015 against 10.0125), so "lower" is asked to within 0.1 %.
        let steady = 1.0 / (2.0 * z * (1.0 - z * z).sqrt());
        let at = (1.0 - 2.0 * z * z).sqrt();
        assert!(up < steady * 1.001 && dn < steady * 1.001);
        if e >= 1e-3 {
            assert!(
                up < 0.99 * steady && dn < 0.99 * steady,
                "clearly lower at η {e}"
            );
        }
        assert!(ua > at && da < at);
    }
}

#[test]
fn engine_sees_the_sweep_bias_the_model_predicts() {
    let (nat, zeta) = (1200.0, 0.02);
    let steady = unbalance_peak_rpm(nat, zeta);
    let wn = nat * std::f64::consts::TAU / 60.0;
    let mut last_shift = 0.0;
    let mut last_peak = f64::INFINITY;
    for eta in [1e-4, 4e-4, 1e-3] {
        // η = (dΩ/dt)/ωn², so the sweep rate in r/min per second is η·ωn²·60/(2π).
        let rate = eta * wn * wn * 60.0 / std::f64::consts::TAU;
        let ramp = (2400.0 - 300.0) / rate;
        let profile = SpeedProfile::run_up_hold_coast_down(300.0, 2400.0, 10.0, ramp, 5.0, ramp);
        let mode = SimMode {
            natural_rpm: nat,
            damping_ratio: zeta,
            eccentricity: 10.0,
            heavy_spot_deg: 0.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        };
        let sim = sim_config(profile, 2000.0, vec![mode], 0.05);
        let out = run(&sim, &engine_config(&sim), false);
        let up = critical_near(out.single(EventKind::RunUp), nat);
        let down = critical_near(out.single(EventKind::CoastDown), nat);
        let (_, ua) = passage(zeta, eta, true);
        let (_, da) = passage(zeta, eta, false);
        let at = (1.0 - 2.0 * zeta * zeta).sqrt();
        let (model_up, model_down) = ((ua / at - 1.0) * 100.0, (da / at - 1.0) * 100.0);
        let (seen_up, seen_down) = (
            (up.speed_rpm / steady - 1.0) * 100.0,
            (down.speed_rpm / steady - 1.0) * 100.0,
        );
        let mean = 0.5 * (up.speed_rpm + down.speed_rpm);
        eprintln!(
            "check 12: η {eta:e} ({rate:.1} r/min/s): run-up {:.1} r/min ({seen_up:+.2} %, model \
             {model_up:+.2} %), coast-down {:.1} ({seen_down:+.2} %, model {model_down:+.2} %), \
             mean {mean:.1} vs steady peak {steady:.1}; peaks {:.2} / {:.2}",
            up.speed_rpm, down.speed_rpm, up.peak_amplitude, down.peak_amplitude
        );
        // Lewis 1932: later on the run-up, earlier on the coast-down.
        assert!(seen_up > 0.0 && seen_down < 0.0, "η {eta}");
        // The size the model predicts, to within 15 % of the shift plus 0.1 % of speed (the
        // simulator forces by unbalance, ∝ Ω², the model by a constant force; the engine works on
        // per-revolution vectors). Measured: within 0.15 % of speed at every rate.
        for (seen, model) in [(seen_up, model_up), (seen_down, model_down)] {
            assert!(
                (seen - model).abs() < 0.15 * model.abs() + 0.1,
                "η {eta}: {seen} vs {model}"
            );
        }
        // Faster sweeps shift more and show a lower peak.
        assert!(seen_up > last_shift, "η {eta}");
        assert!(up.peak_amplitude < last_peak, "η {eta}");
        last_shift = seen_up;
        last_peak = up.peak_amplitude;
        // Run-up and coast-down together cancel most of the bias (REFERENCES §6).
        assert!(
            (mean - steady).abs() < 0.3 * (up.speed_rpm - steady).abs() + 0.5,
            "η {eta}: mean {mean} vs {steady}"
        );
    }
}
