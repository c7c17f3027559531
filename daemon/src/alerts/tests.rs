//! Tests of the alert rules and outputs, driven by data time: hours of simulated running take
//! milliseconds, and nothing sleeps.

use super::drift;
use super::speed::Point;
use super::time::rfc3339;
use super::*;
use crate::config::model::{Alerts, Output, OutputKind};
use std::collections::VecDeque;
use veer_tracker::margin::{MarginRule, OperatingRange};
use veer_tracker::states::MachineState;

/// Start of every simulated run: 2023-11-14T22:13:20Z.
const T0: f64 = 1_700_000_000.0;

/// The critical the speed drifts toward: above the running speed, AF 8.
const NC: f64 = 3600.0;
const AF: f64 = 8.0;

/// API 617 7th ed. / API RP 684 2nd ed. requirement for a critical above the running speed,
/// 10 + 17·(1 − 1/(AF − 1.5)) capped at 26 % (REFERENCES §1.3: from memory, unconfirmed);
/// recomputed here rather than taken from the code under test.
fn required_above(af: f64) -> f64 {
    (10.0 + 17.0 * (1.0 - 1.0 / (af - 1.5))).min(26.0)
}

/// Same edition, critical below the running speed: 17·(1 − 1/(AF − 1.5)), capped at 16 %.
fn required_below(af: f64) -> f64 {
    (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0)
}

const BAND: f64 = 5.0;

fn settings() -> Alerts {
    Alerts {
        margin: MarginRule::Api2005,
        warn_band_pct: BAND,
        drift_horizon_min: 30.0,
        drift_window_min: 10.0,
        delay_s: 30.0,
        hysteresis_pct: 1.0,
        critical_shift_pct: 5.0,
        startup_multiplier: 2.0,
        estimate_critical: true,
        estimate_window_s: 30.0,
        estimate_trend_min: 60.0,
        estimate_sigmas: 2.0,
        outputs: Vec::new(),
    }
}

fn range() -> OperatingRange {
    OperatingRange::new(2000.0, 3000.0).expect("valid range")
}

fn critical(key: &str, rpm: f64, af: Option<f64>) -> KnownCritical {
    KnownCritical {
        key: key.to_string(),
        rpm,
        af,
        origin: "design".to_string(),
        baseline_rpm: None,
    }
}

fn engine_with(alerts: &Alerts) -> AlertEngine {
    let sensors = vec![("x".to_string(), Some(50.0), Some(100.0))];
    AlertEngine::new(
        "tg-1",
        alerts,
        range(),
        &sensors,
        vec![critical("design-1", NC, Some(AF))],
    )
}

/// A small deterministic noise source (64-bit LCG, Knuth's MMIX constants), uniform in ±`amp`.
struct Noise(u64);

impl Noise {
    fn next(&mut self, amp: f64) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0) * amp
    }
}

/// Feeds one steady speed sample a second from `from_s` to `to_s` (relative to [`T0`]).
fn run(
    e: &mut AlertEngine,
    from_s: u32,
    to_s: u32,
    speed: impl Fn(f64) -> f64,
    out: &mut Vec<AlertChange>,
) {
    for i in from_s..to_s {
        let t = f64::from(i);
        out.extend(e.on_speed(T0 + t, speed(t), MachineState::Steady));
    }
}

fn of_kind(changes: &[AlertChange], kind: AlertKind) -> Vec<&AlertChange> {
    changes.iter().filter(|c| c.alert().kind == kind).collect()
}

fn num(a: &Alert, field: &str) -> f64 {
    a.evidence[field]
        .as_f64()
        .unwrap_or_else(|| panic!("evidence {field} missing in {}", a.evidence))
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

#[test]
fn drift_then_warning_then_alarm_each_once() {
    // 30 min at 2500 r/min, then a ramp of 5 r/min per minute for 90 min toward a critical at
    // 3600 r/min (AF 8, above), with ±2 r/min of noise.
    let mut e = engine_with(&settings());
    let mut noise = Noise(7);
    let ramp_start = 1800.0;
    let slope_per_s = 5.0 / 60.0;
    let truth = |t: f64| 2500.0 + slope_per_s * (t - ramp_start).max(0.0);
    let speeds: Vec<f64> = (0..7200)
        .map(|i| truth(f64::from(i)) + noise.next(2.0))
        .collect();
    let mut changes = Vec::new();
    run(&mut e, 0, 7200, |t| speeds[t as usize], &mut changes);

    assert_eq!(changes.len(), 3, "changes: {changes:#?}");
    let (drift, warn, alarm) = match changes.as_slice() {
        [AlertChange::Raised(d), AlertChange::Raised(w), AlertChange::Escalated(a)] => (d, w, a),
        other => panic!("unexpected order: {other:#?}"),
    };
    assert_eq!(drift.kind, AlertKind::Drift);
    assert_eq!(drift.severity, Severity::Warning);
    assert_eq!(
        (warn.kind, warn.severity),
        (AlertKind::Margin, Severity::Warning)
    );
    assert_eq!(
        (alarm.kind, alarm.severity),
        (AlertKind::Margin, Severity::Alarm)
    );
    for a in [drift, warn, alarm] {
        assert_eq!(a.key, "design-1");
        assert_eq!(a.machine, "tg-1");
    }
    assert!(drift.time_s < warn.time_s && warn.time_s < alarm.time_s);

    // Thresholds, recomputed: margin m = (Nc − N)/N·100, so N = Nc/(1 + m/100).
    let required = required_above(AF);
    let warning = required + BAND;
    let n_warning = NC / (1.0 + warning / 100.0);
    let n_required = NC / (1.0 + required / 100.0);
    let t_warning = T0 + ramp_start + (n_warning - 2500.0) / slope_per_s;
    let t_required = T0 + ramp_start + (n_required - 2500.0) / slope_per_s;

    // Margin warning: raised once the bucket means have been inside the band for the 30 s delay.
    let n = num(warn, "speed_rpm");
    assert!(close(num(warn, "actual_pct"), (NC - n) / n * 100.0, 1e-9));
    assert!(close(num(warn, "required_pct"), required, 1e-9));
    assert!(close(num(warn, "warning_pct"), warning, 1e-9));
    assert!(num(warn, "actual_pct") < warning && num(warn, "actual_pct") >= required);
    assert_eq!(warn.evidence["rule"], "api-2005");
    assert_eq!(warn.evidence["side"], "above");
    assert!(close(num(warn, "af"), AF, 0.0));
    assert!(
        warn.time_s >= t_warning + 30.0 - 40.0 && warn.time_s <= t_warning + 30.0 + 60.0,
        "warning at {} s vs crossing {} s",
        warn.time_s - T0,
        t_warning - T0
    );
    assert!(warn.message.contains("warning") && warn.message.contains("3600"));

    // Escalation to alarm.
    let n = num(alarm, "speed_rpm");
    assert!(num(alarm, "actual_pct") < required);
    assert!(close(num(alarm, "actual_pct"), (NC - n) / n * 100.0, 1e-9));
    assert!(alarm.time_s >= t_required + 30.0 - 40.0 && alarm.time_s <= t_required + 90.0);
    assert!(close(num(alarm, "raised_time_s"), warn.time_s, 0.0));

    // Drift: the slope, the crossing speed and a crossing time that comes true.
    assert!(
        close(num(drift, "slope_rpm_per_min"), 5.0, 0.25),
        "{}",
        drift.evidence
    );
    assert!(close(num(drift, "crossing_speed_rpm"), n_warning, 1e-6));
    assert!(close(num(drift, "breach_speed_rpm"), n_required, 1e-6));
    let minutes = num(drift, "minutes_to_crossing");
    assert!(minutes > 0.0 && minutes <= 30.0);
    let predicted = num(drift, "crossing_time_s");
    assert!(close(predicted, drift.time_s + minutes * 60.0, 1.0));
    assert!(
        close(predicted, t_warning, 180.0),
        "predicted {} s, true {} s",
        predicted - T0,
        t_warning - T0
    );
    assert!(num(drift, "slope_rpm_per_min").abs() > 3.0 * num(drift, "slope_se_rpm_per_min"));
    assert!(
        drift
            .message
            .contains(&format!("in about {minutes:.0} min")),
        "{}",
        drift.message
    );
    assert!(close(num(drift, "window_min"), 10.0, 0.0));

    // What is open at the end: the margin alarm and the drift warning.
    let open = e.open_alerts();
    assert_eq!(open.len(), 2);
    assert!(open
        .iter()
        .any(|a| a.kind == AlertKind::Margin && a.severity == Severity::Alarm));
}

#[test]
fn stationary_speed_outside_the_band_raises_nothing_for_hours() {
    // 2500 r/min is 44 % from the critical (warning below 29.4 %), with noise and a slow governor
    // wander of ±5 r/min over 20 minutes, for six hours.
    let mut e = engine_with(&settings());
    let mut noise = Noise(11);
    let wander = |t: f64| 5.0 * (2.0 * std::f64::consts::PI * t / 1200.0).sin();
    let speeds: Vec<f64> = (0..6 * 3600)
        .map(|i| 2500.0 + wander(f64::from(i)) + noise.next(3.0))
        .collect();
    let mut changes = Vec::new();
    run(&mut e, 0, 6 * 3600, |t| speeds[t as usize], &mut changes);
    assert!(changes.is_empty(), "{changes:#?}");
    assert!(e.open_alerts().is_empty());
}

#[test]
fn insignificant_slope_near_the_band_raises_no_drift() {
    // 12 r/min outside the warning threshold with ±40 r/min of noise and no trend: fitted slopes
    // of a few tenths of r/min per minute would "reach" the band within the horizon, but none is
    // more than three standard errors from zero.
    let n_warning = NC / (1.0 + (required_above(AF) + BAND) / 100.0);
    let mut noise = Noise(13);
    let speeds: Vec<f64> = (0..6 * 3600)
        .map(|_| n_warning - 12.0 + noise.next(40.0))
        .collect();
    let mut e = engine_with(&settings());
    let mut changes = Vec::new();
    run(&mut e, 0, 6 * 3600, |t| speeds[t as usize], &mut changes);
    assert!(
        of_kind(&changes, AlertKind::Drift).is_empty(),
        "{changes:#?}"
    );
}

#[test]
fn noise_at_the_threshold_does_not_chatter() {
    // Hover on the warning threshold: ±3 r/min noise plus an 8 r/min swing every 4 minutes, so
    // the bucket means cross it for minutes at a time.
    let n_warning = NC / (1.0 + (required_above(AF) + BAND) / 100.0);
    let hover = |seed| {
        let mut noise = Noise(seed);
        (0..7200)
            .map(|i| {
                let t = f64::from(i);
                n_warning + 8.0 * (2.0 * std::f64::consts::PI * t / 240.0).sin() + noise.next(3.0)
            })
            .collect::<Vec<f64>>()
    };
    let speeds = hover(3);
    let mut e = engine_with(&settings());
    let mut changes = Vec::new();
    run(&mut e, 0, 7200, |t| speeds[t as usize], &mut changes);
    let margin = of_kind(&changes, AlertKind::Margin);
    assert_eq!(margin.len(), 1, "{margin:#?}");
    assert!(matches!(margin[0], AlertChange::Raised(a) if a.severity == Severity::Warning));

    // Leaving for a clear speed clears it once, after the delay.
    let mut after = Vec::new();
    run(&mut e, 7200, 9000, |_| 2500.0, &mut after);
    let margin = of_kind(&after, AlertKind::Margin);
    assert_eq!(margin.len(), 1, "{margin:#?}");
    assert!(matches!(margin[0], AlertChange::Cleared(_)));

    // Without delay and hysteresis the same data would chatter: the guards are what hold it.
    let bare = Alerts {
        delay_s: 0.0,
        hysteresis_pct: 0.0,
        ..settings()
    };
    let mut e = engine_with(&bare);
    let mut changes = Vec::new();
    run(&mut e, 0, 7200, |t| speeds[t as usize], &mut changes);
    assert!(of_kind(&changes, AlertKind::Margin).len() > 20);
}

#[test]
fn dead_tach_raises_health_and_no_margin_alert() {
    // The last speed the tach gave sits inside the warning band (26.3 % from the critical), and
    // keeps coming, stale, after the tach died.
    let stale = 2850.0;
    assert!((NC - stale) / stale * 100.0 < required_above(AF) + BAND);
    let mut e = engine_with(&settings());
    let mut changes = e.on_health(T0, "tach", Some(HealthProblem::TachLost));
    run(&mut e, 1, 3600, |_| stale, &mut changes);
    assert_eq!(changes.len(), 1, "{changes:#?}");
    let AlertChange::Raised(h) = &changes[0] else {
        panic!("{changes:#?}")
    };
    assert_eq!(
        (h.kind, h.severity),
        (AlertKind::SensorHealth, Severity::Alarm)
    );
    assert_eq!(h.key, "tach");
    assert!(
        h.message.contains("margin alerts suspended"),
        "{}",
        h.message
    );
    assert_eq!(h.evidence["problem"], "tach-lost");
    // Repeated reports of the same problem change nothing.
    assert!(e
        .on_health(T0 + 3600.0, "tach", Some(HealthProblem::TachLost))
        .is_empty());

    // The tach comes back: the health alert clears after the delay, then the margin is judged.
    let mut back = Vec::new();
    for i in 3601..3700 {
        let t = T0 + f64::from(i);
        back.extend(e.on_health(t, "tach", None));
        back.extend(e.on_speed(t, stale, MachineState::Steady));
    }
    let health = of_kind(&back, AlertKind::SensorHealth);
    assert_eq!(health.len(), 1);
    let AlertChange::Cleared(c) = health[0] else {
        panic!("{health:#?}")
    };
    assert!(c.time_s >= T0 + 3601.0 + 30.0);
    let margin = of_kind(&back, AlertKind::Margin);
    assert_eq!(margin.len(), 1, "{margin:#?}");
    assert!(matches!(margin[0], AlertChange::Raised(a) if a.severity == Severity::Warning));
}

#[test]
fn tach_loss_keeps_open_margin_alerts_as_they_are() {
    let mut e = engine_with(&settings());
    let mut changes = Vec::new();
    run(&mut e, 0, 120, |_| 2850.0, &mut changes);
    assert_eq!(of_kind(&changes, AlertKind::Margin).len(), 1);
    let mut later = e.on_health(T0 + 120.0, "tach", Some(HealthProblem::FlatLine));
    // A clear speed reported while the tach is bad must not clear the alert.
    run(&mut e, 121, 1000, |_| 2500.0, &mut later);
    assert_eq!(later.len(), 1, "{later:#?}");
    assert_eq!(later[0].alert().kind, AlertKind::SensorHealth);
    assert!(e
        .open_alerts()
        .iter()
        .any(|a| a.kind == AlertKind::Margin && a.severity == Severity::Warning));
}

#[test]
fn stream_gap_is_a_warning_that_suspends_nothing() {
    let mut e = engine_with(&settings());
    let changes = e.on_health(T0, "stream", Some(HealthProblem::Gap { frames: 512 }));
    assert_eq!(changes.len(), 1);
    let a = changes[0].alert();
    assert_eq!(a.severity, Severity::Warning);
    assert!(a.message.contains("512 frames"), "{}", a.message);
    let mut later = Vec::new();
    run(&mut e, 1, 120, |_| 2850.0, &mut later);
    // The gap clears after the delay, and the margin is judged meanwhile.
    assert_eq!(of_kind(&later, AlertKind::SensorHealth).len(), 1);
    assert_eq!(of_kind(&later, AlertKind::Margin).len(), 1);
}

#[test]
fn level_1x_with_and_without_the_startup_multiplier() {
    // Levels 50 (warning) and 100 (alarm); amplitude 150.
    let feed = |state: MachineState, rpm: f64| {
        let mut e = engine_with(&settings());
        let mut changes = Vec::new();
        for i in 0..120 {
            changes.extend(e.on_level(T0 + f64::from(i), "x", 150.0, rpm, state));
        }
        changes
    };
    // Steady above the minimum operating speed: plain levels, alarm.
    let steady = feed(MachineState::Steady, 2500.0);
    assert_eq!(steady.len(), 1, "{steady:#?}");
    let a = steady[0].alert();
    assert_eq!((a.kind, a.severity), (AlertKind::Level1x, Severity::Alarm));
    assert!(close(num(a, "multiplier"), 1.0, 0.0));
    assert!(
        close(a.time_s, T0 + 30.0, 0.0),
        "raised after the 30 s delay"
    );

    // Run-up below the minimum operating speed: levels × 2 (API 670 Annex I setpoint
    // multiplier; the factor is this machine's setting), so 150 is only above the warning 100.
    let runup = feed(MachineState::SpeedingUp, 1500.0);
    assert_eq!(runup.len(), 1, "{runup:#?}");
    let a = runup[0].alert();
    assert_eq!(a.severity, Severity::Warning);
    assert!(close(num(a, "multiplier"), 2.0, 0.0));
    assert!(close(num(a, "effective_alarm_level"), 200.0, 1e-12));
    assert!(a.message.contains("× 2"), "{}", a.message);

    // A run-up above the minimum operating speed has passed its criticals: plain levels.
    let above = feed(MachineState::SpeedingUp, 2200.0);
    assert_eq!(above[0].alert().severity, Severity::Alarm);

    // Unhealthy channel: nothing from it.
    let mut e = engine_with(&settings());
    let health = e.on_health(T0, "x", Some(HealthProblem::Clipping));
    assert_eq!(health[0].alert().severity, Severity::Warning);
    assert!(health[0].alert().message.contains("suspended"));
    let mut changes = Vec::new();
    for i in 1..200 {
        changes.extend(e.on_level(T0 + f64::from(i), "x", 150.0, 2500.0, MachineState::Steady));
    }
    assert!(changes.is_empty(), "{changes:#?}");
}

#[test]
fn level_clears_with_hysteresis() {
    let mut e = engine_with(&settings());
    let mut changes = Vec::new();
    for i in 0..60 {
        changes.extend(e.on_level(T0 + f64::from(i), "x", 60.0, 2500.0, MachineState::Steady));
    }
    assert_eq!(changes.len(), 1);
    // 49.7 is below the warning level 50 but not by the 1 % hysteresis (49.5): stays open.
    for i in 60..200 {
        changes.extend(e.on_level(T0 + f64::from(i), "x", 49.7, 2500.0, MachineState::Steady));
    }
    assert_eq!(changes.len(), 1, "{changes:#?}");
    for i in 200..300 {
        changes.extend(e.on_level(T0 + f64::from(i), "x", 40.0, 2500.0, MachineState::Steady));
    }
    assert_eq!(changes.len(), 2);
    assert!(matches!(&changes[1], AlertChange::Cleared(a) if a.time_s == T0 + 230.0));
}

#[test]
fn critical_shift_beyond_the_limit_and_into_the_margin() {
    // A known critical at 1500 r/min, below the 2000-3000 r/min range; limit 5 %.
    let mut e = AlertEngine::new(
        "tg-1",
        &settings(),
        range(),
        &[("x".to_string(), None, None)],
        vec![critical("design-1", 1500.0, Some(5.0))],
    );
    // Found 6.7 % higher, still clear of the range margin: warning.
    let c = e.on_event_criticals(T0, &[("x".to_string(), 1600.0, Some(5.0))]);
    assert_eq!(c.len(), 1, "{c:#?}");
    let AlertChange::Raised(a) = &c[0] else {
        panic!("{c:#?}")
    };
    assert_eq!(
        (a.kind, a.severity),
        (AlertKind::CriticalShift, Severity::Warning)
    );
    assert_eq!(a.key, "design-1");
    assert!(close(
        num(a, "shift_pct"),
        (1600.0 - 1500.0) / 1500.0 * 100.0,
        1e-9
    ));
    // API RP 684 margin below the range: (Nmin − Nc)/Nmin (REFERENCES §1.2).
    assert!(close(
        num(a, "actual_pct"),
        (2000.0 - 1600.0) / 2000.0 * 100.0,
        1e-9
    ));
    assert!(close(num(a, "required_pct"), required_below(5.0), 1e-9));

    // The same finding again changes nothing; a smaller shift clears it.
    assert!(e
        .on_event_criticals(T0 + 100.0, &[("x".to_string(), 1590.0, Some(5.0))])
        .is_empty());
    let c = e.on_event_criticals(T0 + 200.0, &[("x".to_string(), 1540.0, Some(5.0))]);
    assert!(matches!(c.as_slice(), [AlertChange::Cleared(_)]), "{c:#?}");

    // Into the margin: 1800 r/min is 10 % below the range, 12.1 % is required: alarm.
    let c = e.on_event_criticals(T0 + 300.0, &[("x".to_string(), 1800.0, Some(5.0))]);
    assert!(matches!(c.as_slice(), [AlertChange::Raised(a)] if a.severity == Severity::Alarm));
    assert!(c[0].alert().message.contains("requires"));

    // A critical inside the range that matches none: alarm under its own key.
    let c = e.on_event_criticals(T0 + 400.0, &[("x".to_string(), 2500.0, Some(5.0))]);
    let raised: Vec<_> = c
        .iter()
        .filter(|c| matches!(c, AlertChange::Raised(_)))
        .collect();
    assert_eq!(raised.len(), 1, "{c:#?}");
    assert_eq!(raised[0].alert().key, "unmatched:x");
    assert_eq!(raised[0].alert().severity, Severity::Alarm);
}

#[test]
fn shift_from_an_unhealthy_channel_is_ignored() {
    let mut e = AlertEngine::new(
        "tg-1",
        &settings(),
        range(),
        &[("x".to_string(), None, None)],
        vec![critical("design-1", 1500.0, Some(5.0))],
    );
    e.on_health(T0, "x", Some(HealthProblem::NotFinite));
    let c = e.on_event_criticals(T0 + 10.0, &[("x".to_string(), 1800.0, Some(5.0))]);
    assert!(c.is_empty(), "{c:#?}");
}

#[test]
fn removed_critical_clears_its_alerts() {
    let mut e = engine_with(&settings());
    let mut changes = Vec::new();
    run(&mut e, 0, 120, |_| 2850.0, &mut changes);
    assert_eq!(e.open_alerts().len(), 1);
    e.set_criticals(vec![critical("design-2", 9000.0, Some(AF))]);
    let c = e.on_speed(T0 + 121.0, 2850.0, MachineState::Steady);
    assert!(
        matches!(c.as_slice(), [AlertChange::Cleared(a)] if a.key == "design-1"),
        "{c:#?}"
    );
    assert!(e.open_alerts().is_empty());
}

#[test]
fn low_af_is_waived_under_api_rules() {
    // AF 2 < 2.5: critically damped, no margin required (API RP 684); even running on it.
    let mut e = AlertEngine::new(
        "tg-1",
        &settings(),
        range(),
        &[],
        vec![critical("design-1", 2500.0, Some(2.0))],
    );
    let mut changes = Vec::new();
    run(&mut e, 0, 600, |_| 2500.0, &mut changes);
    assert!(changes.is_empty(), "{changes:#?}");
}

#[test]
fn fit_recovers_a_straight_line() {
    // y = 3000 + 0.1 t r/min: slope 6 r/min per minute, zero residuals.
    let points: VecDeque<Point> = (0..100)
        .map(|i| {
            let t = T0 + f64::from(i) * 6.0;
            Point {
                t,
                rpm: 3000.0 + 0.1 * (t - T0),
                steady: true,
            }
        })
        .collect();
    let f = drift::fit(&points, 600.0).expect("enough points");
    assert!(close(f.slope_rpm_per_min, 6.0, 1e-9));
    assert!(close(f.speed_now_rpm, 3000.0 + 0.1 * 594.0, 1e-6));
    assert!(f.slope_se_rpm_per_min < 1e-6);
    // Too short a span for the window: no trend.
    assert!(drift::fit(&points, 3600.0).is_none());
}

#[test]
fn fit_standard_error_matches_the_textbook_formula() {
    // se(b) = sqrt(SSE/(n − 2) / Sxx) (simple linear regression, e.g. Montgomery & Runger,
    // "Applied Statistics and Probability for Engineers"), computed here the slow way.
    let mut noise = Noise(5);
    let points: VecDeque<Point> = (0..300)
        .map(|i| Point {
            t: T0 + f64::from(i),
            rpm: 2000.0 + 0.02 * f64::from(i) + noise.next(4.0),
            steady: true,
        })
        .collect();
    let f = drift::fit(&points, 300.0).expect("enough points");
    let n = points.len() as f64;
    let mt = points.iter().map(|p| p.t - T0).sum::<f64>() / n;
    let my = points.iter().map(|p| p.rpm).sum::<f64>() / n;
    let sxx: f64 = points.iter().map(|p| (p.t - T0 - mt).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.t - T0 - mt) * (p.rpm - my)).sum();
    let b = sxy / sxx;
    let a = my - b * mt;
    let sse: f64 = points
        .iter()
        .map(|p| (p.rpm - (a + b * (p.t - T0))).powi(2))
        .sum();
    let se = (sse / (n - 2.0) / sxx).sqrt();
    assert!(close(f.slope_rpm_per_min, b * 60.0, 1e-9));
    assert!(close(
        f.slope_se_rpm_per_min,
        se * 60.0,
        1e-9 * se.max(1.0) * 60.0
    ));
}

#[test]
fn rfc3339_against_gnu_date() {
    // Expected values from GNU coreutils `date -u -d @SECONDS`.
    assert_eq!(rfc3339(0.0), "1970-01-01T00:00:00.000Z");
    assert_eq!(rfc3339(951_782_400.0), "2000-02-29T00:00:00.000Z");
    assert_eq!(rfc3339(1_700_000_000.25), "2023-11-14T22:13:20.250Z");
    assert_eq!(rfc3339(-1.0), "1969-12-31T23:59:59.000Z");
    assert_eq!(rfc3339(4_102_444_800.0), "2100-01-01T00:00:00.000Z");
    assert_eq!(rfc3339(59.9996), "1970-01-01T00:01:00.000Z");
}

fn sample_change(severity: Severity) -> AlertChange {
    AlertChange::Raised(Alert {
        machine: "tg-1".to_string(),
        kind: AlertKind::Margin,
        key: "design-1".to_string(),
        severity,
        time_s: T0,
        message: "warning: it's \"near\"; $(not run)".to_string(),
        evidence: serde_json::json!({ "speed_rpm": 2850.0, "required_pct": 24.4 }),
    })
}

#[tokio::test]
async fn jsonl_lines_parse_and_carry_the_fields() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("nested/alerts.jsonl");
    let outputs = vec![
        Output {
            kind: OutputKind::Jsonl { path: path.clone() },
            min_severity: Severity::Warning,
        },
        Output {
            kind: OutputKind::Log,
            min_severity: Severity::Warning,
        },
    ];
    let warn = sample_change(Severity::Warning);
    let AlertChange::Raised(a) = warn.clone() else {
        unreachable!()
    };
    let cleared = AlertChange::Cleared(Alert {
        time_s: T0 + 60.5,
        ..a
    });
    assert!(deliver(&warn, &outputs).await.is_empty());
    assert!(deliver(&cleared, &outputs).await.is_empty());
    let text = std::fs::read_to_string(&path).expect("file written");
    let docs: Vec<serde_json::Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).expect("each line is JSON"))
        .collect();
    assert_eq!(docs.len(), 2);
    assert_eq!(docs[0]["event"], "raised");
    assert_eq!(docs[1]["event"], "cleared");
    for d in &docs {
        for field in [
            "event", "machine", "kind", "key", "severity", "time", "time_s", "message", "evidence",
        ] {
            assert!(d.get(field).is_some(), "{field} missing in {d}");
        }
        assert_eq!(d["machine"], "tg-1");
        assert_eq!(d["kind"], "margin");
        assert_eq!(d["severity"], "warning");
        assert_eq!(d["evidence"]["speed_rpm"], 2850.0);
    }
    assert_eq!(docs[0]["time"], "2023-11-14T22:13:20.000Z");
    assert_eq!(docs[1]["time"], "2023-11-14T22:14:20.500Z");

    // min_severity: an alarm-only output does not get a warning.
    let alarm_only = vec![Output {
        kind: OutputKind::Jsonl {
            path: dir.path().join("alarms.jsonl"),
        },
        min_severity: Severity::Alarm,
    }];
    assert!(deliver(&warn, &alarm_only).await.is_empty());
    assert!(!dir.path().join("alarms.jsonl").exists());
    assert!(deliver(&sample_change(Severity::Alarm), &alarm_only)
        .await
        .is_empty());
    assert!(dir.path().join("alarms.jsonl").exists());

    // A file that cannot be written is an error line, not a failure of the others.
    let bad = vec![
        Output {
            kind: OutputKind::Jsonl {
                path: path.join("under-a-file.jsonl"),
            },
            min_severity: Severity::Warning,
        },
        outputs[0].clone(),
    ];
    let errors = deliver(&warn, &bad).await;
    assert_eq!(errors.len(), 1, "{errors:?}");
    assert_eq!(
        std::fs::read_to_string(&path)
            .expect("file")
            .lines()
            .count(),
        3
    );
}

fn script(dir: &std::path::Path, name: &str, body: &str) -> String {
    use std::os::unix::fs::PermissionsExt;
    let path = dir.join(name);
    std::fs::write(&path, format!("#!/bin/sh\n{body}\n")).expect("script written");
    std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755)).expect("chmod");
    path.to_string_lossy().into_owned()
}

#[tokio::test]
async fn command_gets_the_fields_in_its_environment() {
    let dir = tempfile::tempdir().expect("temp dir");
    let env_file = dir.path().join("env.txt");
    let program = script(dir.path(), "dump.sh", "env > \"$1\"");
    let outputs = vec![Output {
        kind: OutputKind::Command {
            argv: vec![program, env_file.to_string_lossy().into_owned()],
            timeout_s: 10.0,
        },
        min_severity: Severity::Warning,
    }];
    let change = sample_change(Severity::Alarm);
    let errors = deliver(&change, &outputs).await;
    assert!(errors.is_empty(), "{errors:?}");
    let env = std::fs::read_to_string(&env_file).expect("script ran");
    let var = |name: &str| {
        env.lines()
            .find_map(|l| l.strip_prefix(&format!("{name}=")))
            .unwrap_or_else(|| panic!("{name} not passed: {env}"))
            .to_string()
    };
    assert_eq!(var("VEER_ALERT_EVENT"), "raised");
    assert_eq!(var("VEER_ALERT_MACHINE"), "tg-1");
    assert_eq!(var("VEER_ALERT_KIND"), "margin");
    assert_eq!(var("VEER_ALERT_KEY"), "design-1");
    assert_eq!(var("VEER_ALERT_SEVERITY"), "alarm");
    assert_eq!(var("VEER_ALERT_TIME"), "2023-11-14T22:13:20.000Z");
    assert_eq!(var("VEER_ALERT_MESSAGE"), change.alert().message);
    let evidence: serde_json::Value =
        serde_json::from_str(&var("VEER_ALERT_EVIDENCE")).expect("evidence is JSON");
    assert_eq!(evidence, change.alert().evidence);
}

#[tokio::test]
async fn command_failures_are_reported_not_fatal() {
    let dir = tempfile::tempdir().expect("temp dir");
    let hang = script(dir.path(), "hang.sh", "exec sleep 30");
    let fail = script(
        dir.path(),
        "fail.sh",
        "echo 'pager unreachable' >&2; exit 3",
    );
    let command = |argv: Vec<String>, timeout_s| Output {
        kind: OutputKind::Command { argv, timeout_s },
        min_severity: Severity::Warning,
    };
    let outputs = vec![
        command(vec![hang], 0.3),
        command(vec![fail], 10.0),
        command(
            vec![dir.path().join("missing").to_string_lossy().into_owned()],
            10.0,
        ),
        command(Vec::new(), 10.0),
    ];
    let started = std::time::Instant::now();
    let errors = deliver(&sample_change(Severity::Warning), &outputs).await;
    assert!(
        started.elapsed().as_secs_f64() < 10.0,
        "the hung command was not killed"
    );
    assert_eq!(errors.len(), 4, "{errors:?}");
    assert!(errors[0].contains("killed"), "{}", errors[0]);
    assert!(errors[1].contains("pager unreachable"), "{}", errors[1]);
    assert!(errors[2].contains("cannot start"), "{}", errors[2]);
    assert!(errors[3].contains("empty"), "{}", errors[3]);
}

/// One window's estimate of a critical with natural speed `nn` (σ `sigma`) at 2500 r/min.
fn window(
    t: f64,
    nn: f64,
    sigma: f64,
    change: veer_tracker::drift::Change,
) -> veer_tracker::drift::Estimate {
    use veer_tracker::drift::{Change, Estimate, Method, NotInformative};
    let off = change == Change::Unbalance;
    Estimate {
        time_s: t,
        rpm: 2500.0,
        revolutions: 1250,
        natural_rpm: nn,
        sigma_rpm: sigma,
        ratio: 2500.0 / nn,
        informative: !off,
        reason: off.then_some(NotInformative::OffLocus),
        method: Method::Phase,
        by_phase: Some(nn),
        by_amplitude: None,
        sensitivity_deg_per_pct: 1.0,
        locus_residual: if off { 0.4 } else { 0.002 },
        change,
        vector: veer_tracker::Complex64::new(30.0, -20.0),
    }
}

/// The input of one window of the critical `x:1` measured at `NC` with AF `AF`.
fn input(est: &veer_tracker::drift::Estimate) -> EstimateInput<'_> {
    EstimateInput {
        key: "x:1",
        channel: "x",
        known_rpm: NC,
        configured: false,
        af: Some(AF),
        estimate: est,
        expected: est.vector,
    }
}

#[test]
fn a_critical_estimated_closing_in_warns_ahead_then_alarms_and_an_unbalance_change_does_neither() {
    use veer_tracker::drift::Change;
    let s = settings();
    let mut e = engine_with(&s);
    e.track_critical("x:1", 1.0, Some(AF), false);
    // Required above the range: 24.4 % for AF 8 (recomputed); the critical enters it at
    // 3000 × 1.244 = 3731 r/min.
    let boundary = 3000.0 * (1.0 + required_above(AF) / 100.0);
    let sigma = 10.0;
    // Natural speed falling 200 r/min per hour from 4200 r/min; a window every 30 s.
    let truth = |t: f64| 4200.0 - 200.0 * t / 3600.0;
    let mut changes = Vec::new();
    let mut t = 0.0;
    while t < 4.0 * 3600.0 {
        let est = window(T0 + t, truth(t), sigma, Change::NaturalSpeed);
        changes.extend(e.on_estimate(&input(&est)));
        t += 30.0;
    }
    let approach = of_kind(&changes, AlertKind::CriticalApproach);
    let raised: Vec<&Alert> = approach
        .iter()
        .filter(|c| matches!(c, AlertChange::Raised(_)))
        .map(|c| c.alert())
        .collect();
    assert_eq!(raised.len(), 1, "{approach:?}");
    let warn = raised[0];
    assert_eq!(warn.severity, Severity::Warning, "{}", warn.message);
    let crossing = (4200.0 - boundary) / 200.0 * 3600.0;
    let lead = T0 + crossing - warn.time_s;
    // The projection looks 30 min ahead and is moved 2 σ towards the range: it must warn at
    // least the horizon before the truth crosses, but not hours early.
    assert!(
        (30.0 * 60.0..60.0 * 60.0).contains(&lead),
        "warned {lead} s ahead"
    );
    let alarm: Vec<&Alert> = approach
        .iter()
        .filter(|c| matches!(c, AlertChange::Escalated(_)))
        .map(|c| c.alert())
        .collect();
    assert_eq!(alarm.len(), 1);
    // The present bound (estimate − 2σ) enters the margin 2σ before the truth does.
    let present_crossing = (4200.0 - boundary - 2.0 * sigma) / 200.0 * 3600.0;
    let at = alarm[0].time_s - T0;
    assert!(
        at >= present_crossing && at <= present_crossing + 120.0 && at < crossing,
        "alarm at {at} s, present bound crosses at {present_crossing} s, truth at {crossing} s"
    );
    assert!(alarm[0].evidence["present"]["breach"].as_bool() == Some(true));
    assert!(of_kind(&changes, AlertKind::VectorChange).is_empty());

    // Slowed far below the critical, the lag no longer places it: the approach alarm recovers.
    let mut far = window(T0 + 5.0 * 3600.0, truth(4.0 * 3600.0), sigma, Change::None);
    far.informative = false;
    far.reason = Some(veer_tracker::drift::NotInformative::TooFarFromResonance);
    let after = e.on_estimate(&input(&far));
    assert!(
        matches!(of_kind(&after, AlertKind::CriticalApproach).as_slice(), [AlertChange::Cleared(a)] if a.message.contains("far from the running speed")),
        "{after:?}"
    );

    // The same critical unmoved, with the unbalance turned: vector change, no approach.
    let mut e = engine_with(&s);
    e.track_critical("x:1", 1.0, Some(AF), false);
    let mut changes = Vec::new();
    for i in 0..200 {
        let t = f64::from(i) * 30.0;
        let change = if i < 100 {
            Change::None
        } else {
            Change::Unbalance
        };
        let est = window(T0 + t, 4200.0, sigma, change);
        changes.extend(e.on_estimate(&input(&est)));
    }
    assert!(of_kind(&changes, AlertKind::CriticalApproach).is_empty());
    assert!(of_kind(&changes, AlertKind::CriticalShift).is_empty());
    let vc = of_kind(&changes, AlertKind::VectorChange);
    assert_eq!(vc.len(), 1, "{vc:?}");
    assert!(matches!(vc[0], AlertChange::Raised(_)));
    assert!(vc[0].alert().time_s >= T0 + 100.0 * 30.0);
    assert!(vc[0].alert().message.contains("not a critical shift"));
    // A new run-up refits the model: the vector change clears with the next input, first, even
    // when that input is off the new model's locus too (and raises it afresh on its own).
    e.track_critical("x:1", 1.0, Some(AF), true);
    let est = window(T0 + 6000.0, 4200.0, sigma, Change::Unbalance);
    let after = e.on_estimate(&input(&est));
    let changes = of_kind(&after, AlertKind::VectorChange);
    assert!(
        matches!(changes.first(), Some(AlertChange::Cleared(a)) if a.message.contains("refitted")),
        "{after:?}"
    );
    assert!(
        matches!(changes.get(1), Some(AlertChange::Raised(_))),
        "{after:?}"
    );
    // Far from resonance the lag says nothing of the critical, but a vector back on the locus
    // clears the change, and an approach alert recovers: the critical is far from the speed.
    let mut far = window(T0 + 6100.0, 4200.0, sigma, Change::None);
    far.informative = false;
    far.reason = Some(veer_tracker::drift::NotInformative::TooFarFromResonance);
    let after = e.on_estimate(&input(&far));
    assert!(
        matches!(
            of_kind(&after, AlertKind::VectorChange).as_slice(),
            [AlertChange::Cleared(_)]
        ),
        "{after:?}"
    );
}

#[test]
fn estimate_alerts_left_open_by_an_earlier_run_are_taken_back_and_can_clear() {
    use veer_tracker::drift::Change;
    let mut e = engine_with(&settings());
    assert!(e.restore("vector-change", "x:1", Severity::Warning, T0));
    assert!(e.restore("critical-approach", "x:9", Severity::Alarm, T0));
    assert!(
        !e.restore("margin", "design-1", Severity::Warning, T0),
        "found again in the data"
    );
    // Reloading the model after the restart is not a refit: the vector change stays open...
    e.track_critical("x:1", 1.0, Some(AF), false);
    let cleared = e.clear_untracked();
    // ... and the approach alert of a critical nothing estimates any more is closed.
    assert!(
        matches!(cleared.as_slice(), [AlertChange::Cleared(a)] if a.key == "x:9" && a.kind == AlertKind::CriticalApproach),
        "{cleared:?}"
    );
    assert_eq!(e.open_alerts().len(), 1);
    // A window back on the locus clears the vector change as it would have before the restart.
    let est = window(T0 + 60.0, 4200.0, 10.0, Change::None);
    let after = e.on_estimate(&input(&est));
    assert!(
        matches!(
            of_kind(&after, AlertKind::VectorChange).as_slice(),
            [AlertChange::Cleared(_)]
        ),
        "{after:?}"
    );
    assert!(e.open_alerts().is_empty());
}
