//! Check 4: a two-mode coast-down: both criticals found, in speed order, at the textbook peak
//! speeds (S. S. Rao, Mechanical Vibrations, 5th ed., §3.7), allowing for the small low bias of a
//! coast-down (F. M. Lewis, Trans. ASME 54, 1932; REFERENCES §6).

use crate::support::{
    engine_config, err_pct, run, sim_config, steady_peak_rpm, unbalance_peak_rpm,
};
use veer_tracker::engine::EventKind;
use veer_tracker::sim::{SimMode, SpeedProfile};

/// Modes at 1800 and 4200 r/min, ζ = 0.05 and 0.04.
pub fn two_modes() -> Vec<SimMode> {
    vec![
        SimMode {
            natural_rpm: 1800.0,
            damping_ratio: 0.05,
            eccentricity: 8.0,
            heavy_spot_deg: 40.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        },
        SimMode {
            natural_rpm: 4200.0,
            damping_ratio: 0.04,
            eccentricity: 6.0,
            heavy_spot_deg: 250.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        },
    ]
}

#[test]
fn two_mode_coast_down_finds_both_in_order() {
    // 10 s at 5000 r/min, then a coast to 200 r/min over 240 s: 20 r/min/s, η = (dΩ/dt)/ωn² of
    // 6·10⁻⁵ and 1·10⁻⁵, where REFERENCES §6 puts the coast-down shift well below 1 %.
    let profile = SpeedProfile::constant(5000.0, 10.0).then_ramp_to(200.0, 240.0);
    let sim = sim_config(profile, 4000.0, two_modes(), 0.5);
    let out = run(&sim, &engine_config(&sim), false);
    let ev = out.single(EventKind::CoastDown);
    let crits: Vec<f64> = ev.channels[0]
        .criticals
        .iter()
        .map(|c| c.resonance.speed_rpm)
        .collect();
    assert_eq!(crits.len(), 2, "criticals {crits:?}");
    // Order preserved: reported in speed order, the lower mode first.
    assert!(crits[0] < crits[1], "{crits:?}");
    for (got, m) in crits.iter().zip(two_modes()) {
        // The steady peak of the two modes superposed (modal superposition of the Rao §3.7
        // response): the other mode's nearly constant vector moves the peak a little from the
        // single-mode ωn/√(1 − 2ζ²).
        let single = unbalance_peak_rpm(m.natural_rpm, m.damping_ratio);
        let want = steady_peak_rpm(&sim.channels[0], single);
        eprintln!(
            "check 4: mode {:.0}: Nc {got:.1} vs steady two-mode peak {want:.1} ({:+.3} %), \
             single-mode peak {single:.1} ({:+.3} %)",
            m.natural_rpm,
            err_pct(*got, want),
            err_pct(*got, single)
        );
        assert!(err_pct(*got, want).abs() < 1.0, "{got} vs {want}");
    }
}
