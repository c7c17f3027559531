//! Check 6: slow-roll (runout) compensation. The 1X vector measured at slow roll is subtracted from
//! every later vector, V_comp = V_meas − V_slowroll (trade practice; REFERENCES §7, confirmed from
//! trade sources): a runout of 30 % of the peak then leaves the critical as without runout.

use crate::support::{critical_near, engine_config, err_pct, run, sim_config};
use veer_tracker::config::SlowRoll;
use veer_tracker::engine::{Event, EventKind};
use veer_tracker::sim::{SimConfig, SimMode, SpeedProfile};
use veer_tracker::{from_amp_lag, lag_deg};

const NAT: f64 = 2400.0;
const ZETA: f64 = 0.05;
const ECC: f64 = 10.0;

fn sim(runout: f64) -> SimConfig {
    let mode = SimMode {
        natural_rpm: NAT,
        damping_ratio: ZETA,
        eccentricity: ECC,
        heavy_spot_deg: 30.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    // 20 s of slow roll at 300 r/min, then a run-up to 4000 r/min over 200 s.
    let profile = SpeedProfile::constant(300.0, 20.0).then_ramp_to(4000.0, 200.0);
    let mut s = sim_config(profile, 4000.0, vec![mode], 0.5);
    s.channels[0].runout = runout;
    // Nearly in phase with the response at the critical (lag 30° + 93°), the worst case for the
    // uncompensated amplitude.
    s.channels[0].runout_lag_deg = 120.0;
    s
}

/// The peak amplitude of the critical near NAT, or (if none is identified) the highest compensated
/// amplitude within ±2 % of `near_rpm`.
fn peak_near(ev: &Event, near_rpm: f64) -> f64 {
    let ch = &ev.channels[0];
    match ch
        .criticals
        .iter()
        .find(|c| (c.resonance.speed_rpm / near_rpm - 1.0).abs() < 0.02)
    {
        Some(c) => c.resonance.peak_amplitude,
        None => ch
            .compensated
            .iter()
            .filter(|p| (p.speed_rpm / near_rpm - 1.0).abs() < 0.02)
            .map(|p| p.vector.norm())
            .fold(0.0, f64::max),
    }
}

#[test]
fn slow_roll_compensation_removes_runout() {
    // Peak response ε/(2ζ√(1 − ζ²)) (S. S. Rao, Mechanical Vibrations, 5th ed., §3.7); runout 30 %.
    let peak = ECC / (2.0 * ZETA * (1.0 - ZETA * ZETA).sqrt());
    let runout = 0.3 * peak;
    let clean_sim = sim(0.0);
    let clean = run(&clean_sim, &engine_config(&clean_sim), false);
    let c0 = critical_near(clean.single(EventKind::RunUp), NAT).clone();

    let runout_sim = sim(runout);
    let cfg = engine_config(&runout_sim);
    assert_eq!(cfg.slow_roll, SlowRoll::Auto);
    let comp = run(&runout_sim, &cfg, false);
    let ev = comp.single(EventKind::RunUp);
    let c = critical_near(ev, NAT);
    // The slow-roll vector found: the runout plus the mode's small response at slow roll, pk-pk.
    let sr = ev.channels[0].slow_roll.expect("a slow-roll vector");
    let sr_want = 2.0 * runout_sim.channels[0].steady_1x(sr.speed_min_rpm);
    let sr_want_runout = 2.0 * from_amp_lag(runout, 120.0);

    let off_cfg = veer_tracker::config::EngineConfig {
        slow_roll: SlowRoll::Off,
        ..cfg.clone()
    };
    let off = run(&runout_sim, &off_cfg, false);
    let off_ev = off.single(EventKind::RunUp);
    let off_peak = peak_near(off_ev, c0.speed_rpm);
    eprintln!(
        "check 6: runout {runout:.2} µm pk ({:.1} % of peak); slow roll {:.2} µm pk-pk at {:.1}° \
         ({} points, {:.0}-{:.0} rpm) vs {:.2} at {:.1}°; compensated Nc {:.2} vs clean {:.2} \
         ({:+.3} %), peak {:.2} vs {:.2} ({:+.2} %); off: peak {off_peak:.2} ({:+.1} %)",
        runout / peak * 100.0,
        sr.vector.norm(),
        lag_deg(sr.vector),
        sr.points,
        sr.speed_min_rpm,
        sr.speed_max_rpm,
        sr_want.norm(),
        lag_deg(sr_want),
        c.speed_rpm,
        c0.speed_rpm,
        err_pct(c.speed_rpm, c0.speed_rpm),
        c.peak_amplitude,
        c0.peak_amplitude,
        err_pct(c.peak_amplitude, c0.peak_amplitude),
        err_pct(off_peak, c0.peak_amplitude)
    );
    assert!(sr.speed_max_rpm < 400.0, "slow roll taken at {:?}", sr);
    assert!(
        (sr.vector - sr_want).norm() < 0.03 * sr_want_runout.norm(),
        "{sr:?}"
    );
    assert!(err_pct(c.speed_rpm, c0.speed_rpm).abs() < 0.5);
    assert!(err_pct(c.peak_amplitude, c0.peak_amplitude).abs() < 3.0);
    assert!(ev.channels[0].slow_roll.is_some() && off_ev.channels[0].slow_roll.is_none());
    assert!(
        err_pct(off_peak, c0.peak_amplitude).abs() > 5.0,
        "off peak {off_peak}"
    );
}
