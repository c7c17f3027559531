//! Check 9: the sweep an event reports against the simulated speed profile: direction, mean rate
//! and the times of the ramp's ends (the profile itself is the reference).

use crate::support::{engine_config, err_pct, run, sim_config};
use veer_tracker::engine::EventKind;
use veer_tracker::sim::{SimMode, SpeedProfile};

#[test]
fn sweep_rate_kind_and_times_match_the_profile() {
    // Slow roll 20 s, up to 4000 r/min over 100 s, 30 s hold, down to 300 r/min over 150 s, 20 s.
    let (low, high, roll, up, hold, down) = (300.0, 4000.0, 20.0, 100.0, 30.0, 150.0);
    let profile = SpeedProfile::run_up_hold_coast_down(low, high, roll, up, hold, down);
    let sim = sim_config(profile, 4000.0, vec![SimMode::default()], 0.5);
    let out = run(&sim, &engine_config(&sim), false);
    assert_eq!(out.events.len(), 2, "{:?}", out.summary());
    let cases = [
        (EventKind::RunUp, (high - low) / up, roll, roll + up),
        (
            EventKind::CoastDown,
            (low - high) / down,
            roll + up + hold,
            roll + up + hold + down,
        ),
    ];
    for (kind, rate, t0, t1) in cases {
        let ev = out.single(kind);
        eprintln!(
            "check 9: {}: rate {:.3} vs {rate:.3} rpm/s ({:+.2} %), start {:.2} vs {t0} s, end {:.2} \
             vs {t1} s, speeds {:.0} -> {:.0}",
            kind.name(),
            ev.sweep_rate_rpm_s,
            err_pct(ev.sweep_rate_rpm_s, rate),
            ev.start_s,
            ev.end_s,
            ev.speed_start_rpm,
            ev.speed_end_rpm
        );
        assert!(err_pct(ev.sweep_rate_rpm_s, rate).abs() < 5.0);
        assert!((ev.start_s - t0).abs() < 3.0, "start {}", ev.start_s);
        assert!((ev.end_s - t1).abs() < 3.0, "end {}", ev.end_s);
    }
    // The run-up comes first.
    assert_eq!(out.events[0].kind, EventKind::RunUp);
    assert_eq!(out.events[1].kind, EventKind::CoastDown);
}
