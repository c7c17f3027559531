//! Check 3: the three phase regimes of an unbalance response (S. S. Rao, Mechanical Vibrations,
//! 5th ed., §3.7; the trade's lag convention, REFERENCES §7): the lag stays near the low-speed lag
//! well below the critical, is about 90° beyond it at the critical and near 180° beyond it well
//! above (common practice).

use crate::support::{critical_near, engine_config, run, sim_config, wrap180};
use veer_tracker::engine::EventKind;
use veer_tracker::lag_deg;
use veer_tracker::sim::{SimMode, SpeedProfile};

#[test]
fn phase_lag_regimes_below_at_and_above_the_critical() {
    let (nat, zeta, heavy) = (2400.0, 0.05, 75.0);
    let mode = SimMode {
        natural_rpm: nat,
        damping_ratio: zeta,
        eccentricity: 10.0,
        heavy_spot_deg: heavy,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    // Up to r = 2.5, 300 → 6000 r/min over 200 s (quasi-steady, REFERENCES §6).
    let sim = sim_config(
        SpeedProfile::ramp(300.0, 6000.0, 200.0),
        4000.0,
        vec![mode],
        0.5,
    );
    let out = run(&sim, &engine_config(&sim), false);
    let ev = out.single(EventKind::RunUp);
    let comp = &ev.channels[0].compensated;
    let rel = |p: &veer_tracker::ResponsePoint| wrap180(lag_deg(p.vector) - heavy);

    // Well below (r < 0.5): each point with 0.3 ≤ r < 0.5 (amplitude at least 10 % of ε, far above
    // the noise) within 10° of the low-speed lag, and the mean direction of all points below r = 0.5
    // within 10° too (the theory's excess lag is atan(2ζr/(1 − r²)) ≤ 3.8° there).
    let below: Vec<f64> = comp
        .iter()
        .filter(|p| (0.3..0.5).contains(&(p.speed_rpm / nat)))
        .map(rel)
        .collect();
    let mean_below: veer_tracker::Complex64 = comp
        .iter()
        .filter(|p| p.speed_rpm / nat < 0.5)
        .map(|p| p.vector / p.vector.norm())
        .sum();
    let mean_below = wrap180(lag_deg(mean_below) - heavy);
    // At the critical (Nc ± 0.3 %): 90° within 15°.
    let nc = critical_near(ev, nat).speed_rpm;
    let at: Vec<f64> = comp
        .iter()
        .filter(|p| (p.speed_rpm / nc - 1.0).abs() < 0.003)
        .map(rel)
        .collect();
    // Well above (r > 2): 180° within 20° (on the −180..180 wrap, |rel| near 180).
    let above: Vec<f64> = comp
        .iter()
        .filter(|p| p.speed_rpm / nat > 2.0)
        .map(|p| rel(p).abs())
        .collect();
    let worst = |v: &[f64], want: f64| v.iter().map(|x| (x - want).abs()).fold(0.0, f64::max);
    eprintln!(
        "check 3: {} points below, worst |lag − β| {:.2}°, mean {mean_below:.2}°; {} at Nc, worst |Δ − 90| {:.2}°; \
         {} above, worst |Δ − 180| {:.2}°",
        below.len(),
        worst(&below, 0.0),
        at.len(),
        worst(&at, 90.0),
        above.len(),
        worst(&above, 180.0)
    );
    assert!(below.len() > 20 && at.len() >= 2 && above.len() > 20);
    assert!(worst(&below, 0.0) < 10.0, "{below:?}");
    assert!(mean_below.abs() < 10.0, "{mean_below}");
    assert!(worst(&at, 90.0) < 15.0, "{at:?}");
    assert!(worst(&above, 180.0) < 20.0, "{above:?}");
}
