//! Check 1: a single mode driven by unbalance through a slow run-up, against the textbook steady
//! response (S. S. Rao, Mechanical Vibrations, 5th ed., §3.7 rotating unbalance).

use crate::support::{
    critical_near, engine_config, err_pct, run, sim_config, unbalance_half_power_af,
    unbalance_peak_rpm, wrap180,
};
use veer_tracker::engine::EventKind;
use veer_tracker::sim::{SimMode, SpeedProfile};

#[test]
fn slow_run_up_matches_single_mode_unbalance_response() {
    let (nat, zeta, ecc, heavy) = (2400.0, 0.05, 10.0, 30.0);
    let mode = SimMode {
        natural_rpm: nat,
        damping_ratio: zeta,
        eccentricity: ecc,
        heavy_spot_deg: heavy,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    // 300 → 4000 r/min over 200 s: η = (dΩ/dt)/ωn² ≈ 3·10⁻⁵, below the slowest row of the sweep
    // table of REFERENCES §6 (η = 10⁻⁴ moves the peak by 0.1 % at ζ = 0.05), so quasi-steady.
    let profile = SpeedProfile::ramp(300.0, 4000.0, 200.0);
    let sim = sim_config(profile, 4000.0, vec![mode], 0.5);
    let cfg = engine_config(&sim);
    let out = run(&sim, &cfg, false);
    let ev = out.single(EventKind::RunUp);
    let c = critical_near(ev, nat);
    // Peak speed ωn/√(1 − 2ζ²): Rao §3.7; REFERENCES §4 (confirmed).
    let nc_want = unbalance_peak_rpm(nat, zeta);
    // Half-power AF of the unbalance displacement curve: 9.900 at ζ = 0.05 (REFERENCES §1.1,
    // recomputed; regenerated here by bisection).
    let af_want = unbalance_half_power_af(zeta);
    assert!((af_want - 9.900).abs() < 0.001, "recomputed AF {af_want}");
    let af = c
        .amplification_factor
        .expect("both half-power points inside the sweep");
    let fit = c.fit.as_ref().expect("a single-mode fit");
    // Peak amplitude ε/(2ζ√(1 − ζ²)) peak (Rao §3.7), stated pk-pk: × 2.
    let peak_want = 2.0 * ecc / (2.0 * zeta * (1.0 - zeta * zeta).sqrt());
    eprintln!(
        "check 1: Nc {:.2} vs {:.2} ({:+.3} %), AF {:.3} vs {:.3} ({:+.2} %), fit Nn {:.2} ({:+.3} %), \
         ζ fit {:.4}, peak {:.2} vs {:.2} µm pk-pk ({:+.2} %), phase change {:.1}°",
        c.speed_rpm,
        nc_want,
        err_pct(c.speed_rpm, nc_want),
        af,
        af_want,
        err_pct(af, af_want),
        fit.natural_rpm,
        err_pct(fit.natural_rpm, nat),
        fit.damping_ratio,
        c.peak_amplitude,
        peak_want,
        err_pct(c.peak_amplitude, peak_want),
        c.phase_change_deg
    );
    assert!(
        err_pct(c.speed_rpm, nc_want).abs() < 0.5,
        "Nc {}",
        c.speed_rpm
    );
    assert!(err_pct(af, af_want).abs() < 10.0, "AF {af}");
    assert!(
        err_pct(fit.natural_rpm, nat).abs() < 0.5,
        "fit Nn {}",
        fit.natural_rpm
    );
    // The lag at Nc against the simulated heavy spot itself: atan2(2ζr, 1 − r²) = 92.9° at the
    // peak r = 1/√(1 − 2ζ²) (Rao §3.7).
    let r = nc_want / nat;
    let lag_want = (2.0 * zeta * r).atan2(1.0 - r * r).to_degrees();
    let lag = wrap180(c.phase_deg - heavy);
    eprintln!("check 1: lag at Nc − heavy spot {lag:.2}° (theory {lag_want:.2}°)");
    assert!((lag - lag_want).abs() < 10.0, "lag {lag} vs {lag_want}");
    assert!(
        (c.phase_change_deg - 90.0).abs() < 10.0,
        "phase change {}",
        c.phase_change_deg
    );
}
