//! Check 8: bounded event size. Memory cannot be measured from a test, but what an event keeps can:
//! its response is kept in speed bins of `bin_pct` percent, so a channel has at most
//! ln(hi/lo)/ln(1 + bin_pct/100) + 2 points whatever the recording's length, and its order map at
//! most `max_map_rows` rows (the engine's own design bound; common practice for streaming analysis).

use crate::support::{engine_config, run, sim_config};
use veer_tracker::engine::{Event, EventKind};
use veer_tracker::sim::{SimMode, SpeedProfile, TachSim};
use veer_tracker::spectrum::OrderMapConfig;

/// The most points a channel of `ev` may hold: one per speed bin between its lowest and highest
/// speeds, plus one for each partial bin at the ends.
fn bin_bound(ev: &Event, bin_pct: f64) -> f64 {
    let (lo, hi) = ev.channels[0]
        .response
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(lo, hi), p| {
            (lo.min(p.speed_rpm), hi.max(p.speed_rpm))
        });
    (hi / lo).ln() / (1.0 + bin_pct / 100.0).ln() + 2.0
}

#[test]
fn event_responses_and_order_maps_stay_within_their_bounds() {
    let profile = SpeedProfile::run_up_hold_coast_down(300.0, 4000.0, 20.0, 150.0, 20.0, 150.0);
    let sim = sim_config(profile, 4000.0, vec![SimMode::default()], 0.5);
    let mut cfg = engine_config(&sim);
    cfg.order_map = Some(OrderMapConfig::default());
    cfg.max_map_rows = 64;
    let out = run(&sim, &cfg, false);
    assert_eq!(out.events.len(), 2, "{:?}", out.summary());
    for ev in &out.events {
        let ch = &ev.channels[0];
        let bound = bin_bound(ev, cfg.bin_pct);
        // One order-map row per 16 revolutions without the cap.
        let uncapped = ev.vectors / 16;
        eprintln!(
            "check 8: {} {:.0}->{:.0} rpm: {} vectors, {} points (bound {bound:.0}), {} map rows \
             (cap {}, {} uncapped)",
            ev.kind.name(),
            ev.speed_start_rpm,
            ev.speed_end_rpm,
            ev.vectors,
            ch.response.len(),
            ch.order_map.len(),
            cfg.max_map_rows,
            uncapped
        );
        assert!(
            ev.vectors as f64 > 3.0 * bound,
            "the binning must have something to do"
        );
        assert!(
            ch.response.len() as f64 <= bound,
            "{} points",
            ch.response.len()
        );
        assert_eq!(ch.compensated.len(), ch.response.len());
        for (_, series) in &ch.other_orders {
            assert_eq!(series.len(), ch.response.len());
        }
        assert!(
            uncapped > 2 * cfg.max_map_rows as u64,
            "the cap must have something to do"
        );
        assert!(!ch.order_map.is_empty() && ch.order_map.len() <= cfg.max_map_rows);
    }
}

#[test]
fn speed_bins_hold_with_a_jittered_tach() {
    // The same 2 µs rms pulse jitter as the toothed-wheel check, on a moderate run-up: 1000 → 3000
    // r/min over 150 s (0.4–1.3 %/s). Successive revolutions' speeds then scatter by about 0.01 %,
    // more than they advance, near every bin edge.
    let profile = SpeedProfile::constant(1000.0, 5.0).then_ramp_to(3000.0, 150.0);
    let mut sim = sim_config(profile, 4000.0, vec![SimMode::default()], 0.5);
    sim.tach = TachSim {
        jitter_s: 2e-6,
        ..TachSim::default()
    };
    let cfg = engine_config(&sim);
    let out = run(&sim, &cfg, false);
    let ev = out.single(EventKind::RunUp);
    let bound = bin_bound(ev, cfg.bin_pct);
    let points = ev.channels[0].response.len();
    eprintln!(
        "check 8: jittered tach, run-up: {} vectors, {points} points (bound {bound:.0})",
        ev.vectors
    );
    assert!(points as f64 <= bound, "{points} points, bound {bound:.0}");
}
