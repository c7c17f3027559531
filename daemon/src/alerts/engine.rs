//! The alert engine of one machine: feeds each rule, debounces it, and keeps the open alerts.

use super::debounce::{Debounce, Step};
use super::describe::{Describe, Note};
use super::drift::{self, DriftFinding};
use super::estimate::{ApproachFinding, EstimateInput, VectorChangeFinding};
use super::health::{self, ChannelHealth, Role};
use super::level::{multiplier_applies, LevelFinding, Levels};
use super::margin::MarginFinding;
use super::shift::{ShiftFinding, ShiftRules};
use super::speed::SpeedHistory;
use super::{Alert, AlertChange, AlertKind, HealthProblem, KnownCritical};
use crate::config::model::{Alerts, Severity};
use serde_json::json;
use std::collections::{BTreeMap, HashMap};
use veer_tracker::drift::{Change, DriftAlert, DriftAlertConfig, Judgement, NotInformative};
use veer_tracker::margin::{MarginRule, OperatingRange};
use veer_tracker::states::MachineState;

/// An open alert and when it was first raised.
#[derive(Clone, Debug)]
struct Open {
    alert: Alert,
    raised_s: f64,
}

/// The settings the rules read, copied from the machine's configuration.
#[derive(Clone, Copy, Debug)]
struct Settings {
    rule: MarginRule,
    warn_band_pct: f64,
    horizon_min: f64,
    window_min: f64,
    delay_s: f64,
    hysteresis_pct: f64,
    shift_pct: f64,
    startup_multiplier: f64,
    estimate_trend_min: f64,
    estimate_sigmas: f64,
}

/// The alert rules of one machine, fed with data-time stamped inputs.
///
/// Every method takes the data time of its input and returns the alert changes it caused, in
/// order; nothing reads a clock. Inputs older than what the engine has seen are used as they
/// come, except speed samples, whose buckets only move forward.
#[derive(Clone, Debug)]
pub(crate) struct AlertEngine {
    machine: String,
    settings: Settings,
    range: OperatingRange,
    sensors: HashMap<String, Levels>,
    criticals: Vec<KnownCritical>,
    speed: SpeedHistory,
    timers: HashMap<AlertKind, HashMap<String, Debounce>>,
    open: BTreeMap<(AlertKind, String), Open>,
    health: HashMap<String, ChannelHealth>,
    pending: Vec<AlertChange>,
    last_time_s: f64,
    /// The estimate rule of each tracked critical, by key (`channel:mode`).
    estimates: HashMap<String, DriftAlert>,
}

impl AlertEngine {
    /// An engine for machine `machine_id` with its alert settings, operating range, vibration
    /// sensors (channel, warning and alarm 1X levels) and known criticals.
    pub fn new(
        machine_id: &str,
        alerts: &Alerts,
        range: OperatingRange,
        sensors: &[(String, Option<f64>, Option<f64>)],
        criticals: Vec<KnownCritical>,
    ) -> Self {
        let finite_or = |v: f64, d: f64| if v.is_finite() { v } else { d };
        let settings = Settings {
            rule: alerts.margin,
            warn_band_pct: finite_or(alerts.warn_band_pct, 0.0).max(0.0),
            horizon_min: finite_or(alerts.drift_horizon_min, 0.0).max(0.0),
            window_min: finite_or(alerts.drift_window_min, 0.0).max(0.0),
            delay_s: finite_or(alerts.delay_s, 0.0).max(0.0),
            hysteresis_pct: finite_or(alerts.hysteresis_pct, 0.0).max(0.0),
            shift_pct: finite_or(alerts.critical_shift_pct, 0.0),
            startup_multiplier: if alerts.startup_multiplier.is_finite()
                && alerts.startup_multiplier > 0.0
            {
                alerts.startup_multiplier
            } else {
                1.0
            },
            estimate_trend_min: finite_or(alerts.estimate_trend_min, 60.0),
            estimate_sigmas: finite_or(alerts.estimate_sigmas, 2.0).max(0.0),
        };
        let sensors = sensors
            .iter()
            .map(|(ch, warning, alarm)| {
                (
                    ch.clone(),
                    Levels {
                        warning: warning.filter(|l| l.is_finite()),
                        alarm: alarm.filter(|l| l.is_finite()),
                    },
                )
            })
            .collect();
        Self {
            machine: machine_id.to_string(),
            speed: SpeedHistory::new(settings.window_min * 60.0),
            settings,
            range,
            sensors,
            criticals,
            timers: HashMap::new(),
            open: BTreeMap::new(),
            health: HashMap::new(),
            pending: Vec::new(),
            last_time_s: f64::NEG_INFINITY,
            estimates: HashMap::new(),
        }
    }

    /// Starts the estimate rule of a tracked critical `key`, or restarts it with a new model
    /// (`refit`: after a new event): its trend starts afresh, and on a refit a vector-change alert
    /// of the old model is cleared, since the new model is fitted on the vector as it now is.
    /// `critical_factor` is the critical over the natural speed.
    pub fn track_critical(
        &mut self,
        key: &str,
        critical_factor: f64,
        af: Option<f64>,
        refit: bool,
    ) {
        let s = self.settings;
        let cfg = DriftAlertConfig {
            range: self.range,
            rule: s.rule,
            af,
            horizon_s: s.horizon_min * 60.0,
            trend_window_s: s.estimate_trend_min * 60.0,
            sigmas: s.estimate_sigmas,
            persistence: 1,
        };
        match DriftAlert::with_critical_factor(cfg, critical_factor) {
            Ok(rule) => {
                self.estimates.insert(key.to_string(), rule);
            }
            Err(e) => {
                tracing::warn!(machine = %self.machine, critical = key, error = %e, "critical not estimated");
                self.untrack_critical(key, "nothing (its model cannot be used)");
            }
        }
        if refit {
            let note = Note {
                message: format!(
                    "cleared: a new run-up or coast-down refitted the model of critical {key}"
                ),
                evidence: json!({ "key": key, "refitted": true }),
            };
            self.clear_later(AlertKind::VectorChange, key, &note);
        }
    }

    /// Takes back an estimate alert a previous run left open (kind by name, key, severity, when
    /// it was raised), so that it clears when its condition does; `false` for the kinds of the
    /// other rules, which find theirs again in the data.
    pub fn restore(&mut self, kind: &str, key: &str, severity: Severity, opened_at: f64) -> bool {
        let kind = match kind {
            k if k == AlertKind::CriticalApproach.name() => AlertKind::CriticalApproach,
            k if k == AlertKind::VectorChange.name() => AlertKind::VectorChange,
            _ => return false,
        };
        let _ = self.timer(kind, key).force(opened_at, severity);
        let alert = Alert {
            machine: self.machine.clone(),
            kind,
            key: key.to_string(),
            severity,
            time_s: opened_at,
            message: format!("{} left open by an earlier run", kind.name()),
            evidence: json!({ "key": key, "restored": true }),
        };
        self.open.insert(
            (kind, key.to_string()),
            Open {
                alert,
                raised_s: opened_at,
            },
        );
        true
    }

    /// Clears the open estimate alerts of keys no rule estimates (after a restart: a critical no
    /// longer tracked, a configured one a measured one now stands for).
    pub fn clear_untracked(&mut self) -> Vec<AlertChange> {
        let stale: Vec<(AlertKind, String)> = self
            .open
            .keys()
            .filter(|(kind, key)| {
                matches!(kind, AlertKind::CriticalApproach | AlertKind::VectorChange)
                    && !self.estimates.contains_key(key)
            })
            .cloned()
            .collect();
        let t = self.last_time_s.max(
            self.open
                .values()
                .map(|o| o.raised_s)
                .fold(f64::NEG_INFINITY, f64::max),
        );
        let mut out = std::mem::take(&mut self.pending);
        for (kind, key) in stale {
            let note = Note {
                message: format!("cleared: critical {key} is no longer estimated"),
                evidence: json!({ "key": key, "untracked": true }),
            };
            out.extend(self.force_clear(kind, &key, t, &note));
        }
        out
    }

    /// Stops the estimate rule of `key` (a configured critical that a measured one now stands
    /// for): an open critical-approach alert of it is cleared, since nothing will judge it again.
    pub fn untrack_critical(&mut self, key: &str, by: &str) {
        if self.estimates.remove(key).is_none() {
            return;
        }
        let note = Note {
            message: format!(
                "cleared: critical {key} is now estimated as the measured critical {by}"
            ),
            evidence: json!({ "key": key, "superseded_by": by }),
        };
        self.clear_later(AlertKind::CriticalApproach, key, &note);
    }

    /// One window's live estimate of a tracked critical.
    pub fn on_estimate(&mut self, input: &EstimateInput<'_>) -> Vec<AlertChange> {
        let e = input.estimate;
        let key = input.key;
        let mut out = self.begin(e.time_s);
        if self.suspended(input.channel) || self.tach_suspended() {
            return out;
        }
        let Some(rule) = self.estimates.get_mut(key) else {
            return out;
        };
        let judgement = rule.judge(e);
        let s = self.settings;
        let expected = input.expected;
        let vc = VectorChangeFinding {
            key: key.to_string(),
            speed_rpm: e.rpm,
            locus_residual: Some(e.locus_residual),
            vector: Some((e.vector.norm(), veer_tracker::lag_deg(e.vector))),
            expected: Some((expected.norm(), veer_tracker::lag_deg(expected))),
        };
        // A window is an average over its whole length: its condition counts as holding from
        // the window's start to its end, so the delay is met by one window at least as long.
        let span = e.revolutions as f64 * 60.0 / e.rpm;
        let span = if span.is_finite() && span > 0.0 {
            span
        } else {
            0.0
        };
        let (t0, t1) = (e.time_s - 0.5 * span, e.time_s + 0.5 * span);
        match judgement {
            Judgement::VectorChange { .. } => {
                let raw = Some(Severity::Warning);
                for t in [t0, t1] {
                    out.extend(self.judge(AlertKind::VectorChange, key, t, raw, false, &vc));
                }
            }
            Judgement::NotInformative => {
                // A window that says nothing of the critical can still show the vector back on
                // the model's locus, unless it was not steady or outside the model altogether.
                let judged_locus = !matches!(
                    e.reason,
                    Some(NotInformative::NotSteady | NotInformative::OutsideModel)
                );
                if e.change != Change::Unbalance && judged_locus {
                    for t in [t0, t1] {
                        out.extend(self.judge(AlertKind::VectorChange, key, t, None, true, &vc));
                    }
                }
                // Too far from resonance for the lag to place the critical means the critical is
                // far from the running speed (r below about 0.65 or above 1.6): beyond any
                // required margin (at most 26 %), so an approach alert has recovered.
                if e.reason == Some(NotInformative::TooFarFromResonance) {
                    let note = Note {
                        message: format!(
                            "cleared: critical {key} is far from the running speed of {:.0} r/min (speed ratio {:.2}): the 1X lag no longer moves with it",
                            e.rpm, e.ratio
                        ),
                        evidence: json!({ "key": key, "speed_rpm": e.rpm, "speed_ratio": e.ratio,
                                          "reason": "too-far-from-resonance" }),
                    };
                    for t in [t0, t1] {
                        out.extend(self.judge(
                            AlertKind::CriticalApproach,
                            key,
                            t,
                            None,
                            true,
                            &note,
                        ));
                    }
                }
            }
            Judgement::Assessed(a) => {
                for t in [t0, t1] {
                    out.extend(self.judge(AlertKind::VectorChange, key, t, None, true, &vc));
                }
                let f = ApproachFinding {
                    key: key.to_string(),
                    known_rpm: input.known_rpm,
                    configured: input.configured,
                    af: input.af,
                    speed_rpm: e.rpm,
                    a,
                    rule: s.rule.name(),
                    hysteresis_pct: s.hysteresis_pct,
                };
                let (raw, recovered) = (f.raw(), f.recovered());
                for t in [t0, t1] {
                    out.extend(self.judge(AlertKind::CriticalApproach, key, t, raw, recovered, &f));
                }
            }
        }
        out
    }

    /// Replaces the known criticals (a measured critical added, a baseline updated).
    ///
    /// Alerts of criticals that keep their key carry on; open alerts of criticals that are gone
    /// are cleared, and the clears come out with the next input's changes.
    pub fn set_criticals(&mut self, criticals: Vec<KnownCritical>) {
        let gone: Vec<(AlertKind, String)> = self
            .open
            .keys()
            .filter(|(kind, key)| {
                matches!(
                    kind,
                    AlertKind::Margin | AlertKind::Drift | AlertKind::CriticalShift
                ) && !key.starts_with("unmatched:")
                    && !criticals.iter().any(|c| &c.key == key)
            })
            .cloned()
            .collect();
        self.criticals = criticals;
        let t = self.last_time_s;
        for (kind, key) in gone {
            let note = Note {
                message: format!("cleared: critical {key} is no longer among the known criticals"),
                evidence: json!({ "critical_key": key, "removed": true }),
            };
            if let Some(change) = self.force_clear(kind, &key, t, &note) {
                self.pending.push(change);
            }
        }
        for kind in [AlertKind::Margin, AlertKind::Drift] {
            if let Some(map) = self.timers.get_mut(&kind) {
                let known = &self.criticals;
                map.retain(|key, _| known.iter().any(|c| &c.key == key));
            }
        }
    }

    /// A speed sample (per revolution or per second) with the machine's state.
    ///
    /// Margin and drift are judged on bucket means when a bucket closes, only at steady speed and
    /// only while the tach is healthy; any other state interrupts their delays.
    pub fn on_speed(&mut self, time_s: f64, rpm: f64, state: MachineState) -> Vec<AlertChange> {
        let mut out = self.begin(time_s);
        if !time_s.is_finite() {
            return out;
        }
        if self.tach_suspended() || !(rpm.is_finite() && rpm > 0.0) {
            self.speed.reset();
            self.interrupt_speed_rules();
            return out;
        }
        let steady = state == MachineState::Steady;
        let closed = self.speed.push(time_s, rpm, steady);
        if !steady {
            self.interrupt_speed_rules();
            return out;
        }
        let s = self.settings;
        let criticals = std::mem::take(&mut self.criticals);
        // The margin is judged on every reading as it arrives, so an alert follows its data within
        // the reading's own averaging (about a second), whatever the drift window's bucket length.
        for c in &criticals {
            let f = MarginFinding::new(c, rpm, s.rule, s.warn_band_pct, s.hysteresis_pct);
            out.extend(self.judge(
                AlertKind::Margin,
                &c.key,
                time_s,
                f.raw(),
                f.recovered(),
                &f,
            ));
        }
        // The trend is fitted over closed buckets only.
        let Some(point) = closed.filter(|p| p.steady) else {
            self.criticals = criticals;
            return out;
        };
        if s.horizon_min > 0.0 {
            if let Some(fit) = drift::fit(self.speed.points(), self.speed.window_s()) {
                for c in &criticals {
                    let f = DriftFinding::new(
                        fit,
                        c,
                        s.rule,
                        s.warn_band_pct,
                        s.window_min,
                        s.horizon_min,
                    );
                    let raw = f.due().then_some(Severity::Warning);
                    let recovered = f.recovered(s.hysteresis_pct);
                    out.extend(self.judge(AlertKind::Drift, &c.key, point.t, raw, recovered, &f));
                }
            }
        }
        self.criticals = criticals;
        out
    }

    /// A 1X amplitude of `channel` at speed `rpm` in `state`.
    pub fn on_level(
        &mut self,
        time_s: f64,
        channel: &str,
        amplitude_1x: f64,
        rpm: f64,
        state: MachineState,
    ) -> Vec<AlertChange> {
        let mut out = self.begin(time_s);
        let Some(&levels) = self.sensors.get(channel) else {
            return out;
        };
        if self.suspended(channel) {
            self.interrupt(AlertKind::Level1x, channel);
            return out;
        }
        if !(time_s.is_finite() && amplitude_1x.is_finite()) {
            return out;
        }
        let multiplier = if multiplier_applies(state, rpm, self.range.min_rpm) {
            self.settings.startup_multiplier
        } else {
            1.0
        };
        let f = LevelFinding {
            channel,
            amplitude: amplitude_1x,
            rpm,
            state,
            multiplier,
            levels,
            hysteresis_pct: self.settings.hysteresis_pct,
        };
        out.extend(self.judge(
            AlertKind::Level1x,
            channel,
            time_s,
            f.raw(),
            f.recovered(),
            &f,
        ));
        out
    }

    /// The criticals an event (run-up or coast-down) found: channel, speed, AF.
    ///
    /// Judged at once, without the delay (an event is already minutes of evidence). Where several
    /// channels found the same critical, the worst finding speaks for it. Finds from unhealthy
    /// channels are ignored, and a known critical the event did not find keeps its alert as it is
    /// (a coast-down that stopped short of it says nothing about it).
    pub fn on_event_criticals(
        &mut self,
        time_s: f64,
        found: &[(String, f64, Option<f64>)],
    ) -> Vec<AlertChange> {
        let mut out = self.begin(time_s);
        let s = &self.settings;
        let rules = ShiftRules {
            range: self.range,
            rule: s.rule,
            limit_pct: s.shift_pct,
            warn_band_pct: s.warn_band_pct,
            hysteresis_pct: s.hysteresis_pct,
        };
        let mut worst: BTreeMap<String, ShiftFinding> = BTreeMap::new();
        let mut channels: Vec<&str> = Vec::new();
        for (channel, rpm, af) in found {
            if self.suspended(channel) || !(rpm.is_finite() && *rpm > 0.0) {
                continue;
            }
            if !channels.contains(&channel.as_str()) {
                channels.push(channel);
            }
            let f = ShiftFinding::new(channel, *rpm, *af, &self.criticals, &rules);
            let rank = |f: &ShiftFinding| (f.raw(), !f.recovered());
            match worst.get(&f.key()) {
                Some(w) if rank(w) >= rank(&f) => {}
                _ => {
                    worst.insert(f.key(), f);
                }
            }
        }
        let stale: Vec<String> = channels
            .iter()
            .map(|ch| format!("unmatched:{ch}"))
            .filter(|k| !worst.contains_key(k) && self.is_open(AlertKind::CriticalShift, k))
            .collect();
        for (key, f) in &worst {
            let timer = self.timer(AlertKind::CriticalShift, key);
            let step = match f.raw() {
                Some(severity) => timer.force(time_s, severity),
                None if f.recovered() => timer.force_clear(),
                None => None,
            };
            if let Some(step) = step {
                let onset = timer.onset();
                out.push(self.record(AlertKind::CriticalShift, key, time_s, step, onset, f));
            }
        }
        for key in stale {
            let note = Note {
                message: format!("cleared: the last event found no unknown critical ({key})"),
                evidence: json!({ "key": key }),
            };
            out.extend(self.force_clear(AlertKind::CriticalShift, &key, time_s, &note));
        }
        out
    }

    /// A health report of `channel` (a vibration sensor, or the tach: any channel that is not one
    /// of the machine's sensors is taken for the tach or the stream as a whole): `None` when healthy.
    ///
    /// Problems are raised at once; a clear follows `delay_s` of health. Call it whenever health
    /// is checked, not only on changes, so a clear can be seen.
    pub fn on_health(
        &mut self,
        time_s: f64,
        channel: &str,
        problem: Option<HealthProblem>,
    ) -> Vec<AlertChange> {
        let mut out = self.begin(time_s);
        let role = self.role(channel);
        self.health
            .entry(channel.to_string())
            .or_default()
            .report(time_s, problem);
        if let Some(p) = problem {
            if !matches!(p, HealthProblem::Gap { .. }) {
                match role {
                    Role::Tach => {
                        self.speed.reset();
                        self.interrupt_speed_rules();
                    }
                    Role::Sensor => self.interrupt(AlertKind::Level1x, channel),
                }
            }
            let severity = health::severity(role, p);
            let timer = self.timer(AlertKind::SensorHealth, channel);
            if let Some(step) = timer.force(time_s, severity) {
                let onset = timer.onset();
                let note = Note {
                    message: health::message(role, channel, p),
                    evidence: health::evidence(role, channel, Some(p)),
                };
                out.push(self.record(AlertKind::SensorHealth, channel, time_s, step, onset, &note));
            }
        }
        out.extend(self.clear_healthy(time_s));
        out
    }

    /// The alerts open now, ordered by kind and key.
    pub fn open_alerts(&self) -> Vec<Alert> {
        self.open.values().map(|o| o.alert.clone()).collect()
    }

    /// Changes left from `set_criticals`, and health alerts whose channel has been well long
    /// enough, at the start of any input.
    fn begin(&mut self, time_s: f64) -> Vec<AlertChange> {
        if time_s.is_finite() && time_s > self.last_time_s {
            self.last_time_s = time_s;
        }
        let mut out = std::mem::take(&mut self.pending);
        if !self.health.is_empty() {
            out.extend(self.clear_healthy(time_s));
        }
        out
    }

    fn clear_healthy(&mut self, t: f64) -> Vec<AlertChange> {
        let delay = self.settings.delay_s;
        let due: Vec<(String, f64)> = self
            .health
            .iter()
            .filter_map(|(ch, h)| {
                let since = h.healthy_since?;
                (t - since >= delay && self.is_open(AlertKind::SensorHealth, ch))
                    .then(|| (ch.clone(), since))
            })
            .collect();
        let mut out = Vec::new();
        for (channel, since) in due {
            let role = self.role(&channel);
            let last = self.health.get_mut(&channel).and_then(|h| {
                h.healthy_since = None;
                h.last_problem
            });
            let mut evidence = health::evidence(role, &channel, None);
            if let Some(obj) = evidence.as_object_mut() {
                obj.insert("last_problem".into(), json!(last.map(HealthProblem::name)));
                obj.insert("healthy_since_s".into(), json!(since));
            }
            let note = Note {
                message: health::cleared(&channel, t - since),
                evidence,
            };
            out.extend(self.force_clear(AlertKind::SensorHealth, &channel, t, &note));
        }
        out
    }

    fn role(&self, channel: &str) -> Role {
        if self.sensors.contains_key(channel) {
            Role::Sensor
        } else {
            Role::Tach
        }
    }

    fn suspended(&self, channel: &str) -> bool {
        self.health
            .get(channel)
            .is_some_and(ChannelHealth::suspended)
    }

    fn tach_suspended(&self) -> bool {
        self.health
            .iter()
            .any(|(ch, h)| h.suspended() && !self.sensors.contains_key(ch))
    }

    fn interrupt_speed_rules(&mut self) {
        for kind in [AlertKind::Margin, AlertKind::Drift] {
            if let Some(map) = self.timers.get_mut(&kind) {
                map.values_mut().for_each(Debounce::interrupt);
            }
        }
    }

    fn interrupt(&mut self, kind: AlertKind, key: &str) {
        if let Some(t) = self.timers.get_mut(&kind).and_then(|m| m.get_mut(key)) {
            t.interrupt();
        }
    }

    fn is_open(&self, kind: AlertKind, key: &str) -> bool {
        self.timers
            .get(&kind)
            .and_then(|m| m.get(key))
            .is_some_and(|t| t.open().is_some())
    }

    fn timer(&mut self, kind: AlertKind, key: &str) -> &mut Debounce {
        let map = self.timers.entry(kind).or_default();
        if !map.contains_key(key) {
            map.insert(key.to_string(), Debounce::default());
        }
        map.get_mut(key).expect("inserted above")
    }

    /// Runs the debouncer of (kind, key) on one evaluation.
    fn judge(
        &mut self,
        kind: AlertKind,
        key: &str,
        t: f64,
        raw: Option<Severity>,
        recovered: bool,
        d: &dyn Describe,
    ) -> Option<AlertChange> {
        let delay = self.settings.delay_s;
        let timer = self.timer(kind, key);
        let step = timer.update(t, raw, recovered, delay)?;
        let onset = timer.onset();
        Some(self.record(kind, key, t, step, onset, d))
    }

    /// Clears an open alert now, the change coming out with the next input's changes.
    fn clear_later(&mut self, kind: AlertKind, key: &str, note: &Note) {
        let t = self.last_time_s;
        if let Some(change) = self.force_clear(kind, key, t, note) {
            self.pending.push(change);
        }
    }

    fn force_clear(
        &mut self,
        kind: AlertKind,
        key: &str,
        t: f64,
        d: &dyn Describe,
    ) -> Option<AlertChange> {
        let step = self.timer(kind, key).force_clear()?;
        Some(self.record(kind, key, t, step, None, d))
    }

    /// Turns a debouncer's step into a change and updates the open alerts.
    fn record(
        &mut self,
        kind: AlertKind,
        key: &str,
        t: f64,
        step: Step,
        onset: Option<f64>,
        d: &dyn Describe,
    ) -> AlertChange {
        let id = (kind, key.to_string());
        let previous = self.open.get(&id);
        let raised_s = previous.map_or(t, |o| o.raised_s);
        let severity = match step {
            Step::Raise(s) => s,
            Step::Escalate => Severity::Alarm,
            Step::Clear => previous.map_or(Severity::Warning, |o| o.alert.severity),
        };
        let mut evidence = d.evidence();
        if let Some(obj) = evidence.as_object_mut() {
            obj.insert("raised_time_s".into(), json!(raised_s));
            if let Some(onset) = onset {
                obj.insert("condition_since_s".into(), json!(onset));
            }
            obj.insert("delay_s".into(), json!(self.settings.delay_s));
        }
        let alert = Alert {
            machine: self.machine.clone(),
            kind,
            key: key.to_string(),
            severity,
            time_s: t,
            message: match step {
                Step::Clear => d.cleared(),
                _ => d.message(severity),
            },
            evidence,
        };
        match step {
            Step::Raise(_) | Step::Escalate => {
                self.open.insert(
                    id,
                    Open {
                        alert: alert.clone(),
                        raised_s,
                    },
                );
                if matches!(step, Step::Raise(_)) {
                    AlertChange::Raised(alert)
                } else {
                    AlertChange::Escalated(alert)
                }
            }
            Step::Clear => {
                self.open.remove(&id);
                AlertChange::Cleared(alert)
            }
        }
    }
}
