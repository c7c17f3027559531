//! One machine's engine with everything the daemon keeps beside it: the steady-state trend, the
//! per-channel health checks, and the observations the alert rules are fed.
//!
//! The runner is synchronous and runs on the machine's own thread; it is fed blocks of samples
//! (from a file or a stream) and hands back [`Observation`]s. Times it reports are unix seconds:
//! the engine counts from the start of its input, and the runner adds the input's start time.

use super::convert::{event_record, polar, EventRecord};
use super::health::{ChannelHealth, Condition};
use super::models::{assign_tracks, TrackedModel};
use super::targets::{design_for, design_tracks, DesignTrack, Target, Tracker};
use crate::config::model::Machine;
use anyhow::{anyhow, Result};
use veer_storage::TrendRow;
use veer_tracker::engine::{Engine, Update};
use veer_tracker::states::MachineState;
use veer_tracker::Complex64;

/// What the runner found in a block.
#[derive(Clone, Debug)]
pub(crate) enum Observation {
    /// Mean speed over about a second, with the state at its end.
    Speed {
        time_s: f64,
        rpm: f64,
        state: MachineState,
    },
    /// Mean 1X amplitude of a channel over about a second (display units).
    Level {
        time_s: f64,
        channel: String,
        amplitude: f64,
        rpm: f64,
        state: MachineState,
    },
    /// A finished run-up or coast-down, ready to store.
    Event(Box<EventRecord>),
    /// Steady-state trend points.
    Trend(Vec<TrendRow>),
    /// A channel's health changed (`None`: healthy again).
    Health {
        time_s: f64,
        channel: String,
        condition: Option<Condition>,
    },
    /// One window's live estimate of a tracked critical, at steady speed.
    Estimate {
        target: Box<Target>,
        estimate: veer_tracker::drift::Estimate,
    },
    /// A machine-state change.
    State {
        time_s: f64,
        from: MachineState,
        to: MachineState,
    },
}

/// Averages over an interval.
#[derive(Clone, Debug, Default)]
struct Mean {
    n: usize,
    t: f64,
    rpm: f64,
    v: Vec<Complex64>,
}

impl Mean {
    fn add(&mut self, t: f64, rpm: f64, v: &[Complex64]) {
        if self.n == 0 {
            self.v = v.to_vec();
        } else {
            for (s, x) in self.v.iter_mut().zip(v) {
                *s += *x;
            }
        }
        self.n += 1;
        self.t += t;
        self.rpm += rpm;
    }
}

/// Per-channel sums for the overall (RMS) level of a trend interval.
#[derive(Clone, Copy, Debug, Default)]
struct Overall {
    n: u64,
    sum: f64,
    sum2: f64,
}

/// The engine of one machine and what the daemon keeps beside it.
pub(crate) struct Runner {
    machine: String,
    channels: Vec<String>,
    orders: Vec<u32>,
    engine: Engine,
    t0_unix: f64,
    trend_interval_s: f64,
    trend: Mean,
    trend_start: Option<f64>,
    overall: Vec<Overall>,
    second: Mean,
    second_start: Option<f64>,
    state: MachineState,
    last_rpm: f64,
    health: Vec<ChannelHealth>,
    tach_lost: bool,
    last_time: f64,
    fs: f64,
    /// Live estimators of the measured criticals (empty when the machine's configuration turns
    /// estimates off).
    trackers: Vec<Tracker>,
    estimate_window_s: Option<f64>,
    /// Channels whose data cannot be trusted now (flat, clipping, not finite): no estimate is
    /// made from them, so none is stored as if it were sound.
    unhealthy: Vec<bool>,
    /// Each channel's unit: a model of a velocity or acceleration channel is in displacement.
    units: Vec<veer_tracker::units::Unit>,
}

impl Runner {
    /// A runner for `machine` on samples at `sample_rate` Hz whose first frame is at `t0_unix`,
    /// estimating the criticals of `models` (and of the events it finds) at steady speed.
    pub(crate) fn new(
        machine: &Machine,
        sample_rate: f64,
        t0_unix: f64,
        trend_interval_s: f64,
        models: &[TrackedModel],
    ) -> Result<Self> {
        let cfg = machine.engine_config().map_err(|e| anyhow!("{e}"))?;
        let orders = cfg.vectors.orders.clone();
        let channels: Vec<String> = cfg.channels.iter().map(|c| c.name.clone()).collect();
        let units = cfg.channels.iter().map(|c| c.amplitude.unit).collect();
        let mut engine = Engine::new(cfg, sample_rate, 0.0).map_err(|e| anyhow!("{e}"))?;
        engine.set_emit_revolutions(true);
        let window = sample_rate.round() as usize;
        let n_channels = channels.len();
        let estimate_window_s = machine
            .alerts
            .estimate_critical
            .then_some(machine.alerts.estimate_window_s);
        let mut runner = Self {
            machine: machine.id.clone(),
            health: channels
                .iter()
                .map(|_| ChannelHealth::new(window))
                .collect(),
            overall: vec![Overall::default(); channels.len()],
            channels,
            orders,
            engine,
            t0_unix,
            trend_interval_s,
            trend: Mean::default(),
            trend_start: None,
            second: Mean::default(),
            second_start: None,
            state: MachineState::Stopped,
            last_rpm: 0.0,
            tach_lost: false,
            last_time: t0_unix,
            fs: sample_rate,
            trackers: Vec::new(),
            estimate_window_s,
            unhealthy: vec![false; n_channels],
            units,
        };
        if let Some(window_s) = runner.estimate_window_s {
            let designs = design_tracks(machine);
            let claimed: Vec<&DesignTrack> = models
                .iter()
                .filter_map(|m| design_for(&designs, m))
                .collect();
            for d in &designs {
                if claimed.contains(&d) {
                    continue;
                }
                let target = Target::Design(d.clone());
                let Some(c) = runner.channels.iter().position(|n| n == target.channel()) else {
                    continue;
                };
                if let Some(t) = Tracker::new(target, c, window_s) {
                    runner.trackers.push(t);
                }
            }
        }
        runner.track(models);
        Ok(runner)
    }

    /// The models the trackers follow now.
    fn current_models(&self) -> Vec<TrackedModel> {
        self.trackers
            .iter()
            .filter_map(|t| match &t.target {
                Target::Model(m) => Some(m.clone()),
                Target::Design(_) => None,
            })
            .collect()
    }

    /// Starts (or restarts) the estimators of `models`, each replacing the tracker of its track
    /// and the slope tracker of the configured critical it stands for; models of channels this
    /// runner does not have are left out.
    fn track(&mut self, models: &[TrackedModel]) {
        let Some(window_s) = self.estimate_window_s else {
            return;
        };
        for m in models {
            let Some(c) = self.channels.iter().position(|n| *n == m.channel) else {
                continue;
            };
            let design = design_for(
                self.trackers.iter().filter_map(|t| match &t.target {
                    Target::Design(d) => Some(d),
                    Target::Model(_) => None,
                }),
                m,
            )
            .cloned();
            self.trackers.retain(|t| {
                !t.target.continued_by(m)
                    && !matches!((&t.target, &design), (Target::Design(d), Some(x)) if d == x)
            });
            if let Some(t) = Tracker::new(Target::Model(m.clone()), c, window_s) {
                self.trackers.push(t);
            }
        }
    }

    /// Unix time of the last sample seen.
    pub(crate) fn last_time(&self) -> f64 {
        self.last_time
    }

    /// Feeds one block: the tach and one slice per vibration channel.
    pub(crate) fn push(
        &mut self,
        tach: &[f32],
        vib: &[&[f32]],
        out: &mut Vec<Observation>,
    ) -> Result<()> {
        let block_start = self.last_time;
        self.engine.push(tach, vib).map_err(|e| anyhow!("{e}"))?;
        let fs = self.sample_rate();
        self.last_time = self.t0_unix + self.engine.stats().samples as f64 / fs;
        for (c, x) in vib.iter().enumerate() {
            let o = &mut self.overall[c];
            for &v in x.iter() {
                if v.is_finite() {
                    let v = f64::from(v);
                    o.n += 1;
                    o.sum += v;
                    o.sum2 += v * v;
                }
            }
            for change in self.health[c].push(x) {
                self.unhealthy[c] = change.is_some();
                out.push(Observation::Health {
                    time_s: block_start,
                    channel: self.channels[c].clone(),
                    condition: change,
                });
            }
        }
        let updates = self.engine.take_updates();
        self.handle(updates, out);
        Ok(())
    }

    /// Ends the input: closes an open sweep and flushes the trend.
    pub(crate) fn finish(&mut self, out: &mut Vec<Observation>) {
        let updates = self.engine.finish();
        self.handle(updates, out);
        self.flush_trend(out);
    }

    fn sample_rate(&self) -> f64 {
        self.fs
    }

    fn handle(&mut self, updates: Vec<Update>, out: &mut Vec<Observation>) {
        for u in updates {
            match u {
                Update::Revolution(r) => self.on_revolution(r, out),
                Update::State(c) => {
                    self.state = c.to;
                    out.push(Observation::State {
                        time_s: self.t0_unix + c.time_s,
                        from: c.from,
                        to: c.to,
                    });
                }
                Update::Event(e) => {
                    let mut rec = event_record(&self.machine, &e, self.t0_unix);
                    assign_tracks(&self.current_models(), &mut rec.models);
                    self.track(&rec.models);
                    out.push(Observation::Event(Box::new(rec)));
                }
                Update::TachLost(t) => {
                    // Pulses that stop while the machine was running fast is a lost tach; pulses
                    // that fade out at the end of a coast-down are a stop.
                    let running =
                        matches!(self.state, MachineState::Steady | MachineState::SpeedingUp)
                            && self.last_rpm > 0.0;
                    if running && !self.tach_lost {
                        self.tach_lost = true;
                        out.push(Observation::Health {
                            time_s: self.t0_unix + t,
                            channel: "tach".to_string(),
                            condition: Some(Condition::TachLost),
                        });
                    }
                    self.trend = Mean::default();
                    self.trend_start = None;
                    self.second = Mean::default();
                    self.second_start = None;
                    self.trackers.iter_mut().for_each(Tracker::reset);
                }
                _ => {}
            }
        }
    }

    fn on_revolution(
        &mut self,
        r: veer_tracker::engine::RevolutionUpdate,
        out: &mut Vec<Observation>,
    ) {
        let t = self.t0_unix + r.time_s;
        self.last_rpm = r.speed_rpm;
        if self.tach_lost {
            self.tach_lost = false;
            out.push(Observation::Health {
                time_s: t,
                channel: "tach".to_string(),
                condition: None,
            });
        }
        let start = *self.second_start.get_or_insert(t);
        self.second.add(t, r.speed_rpm, &r.vectors);
        if t - start >= 1.0 {
            let m = std::mem::take(&mut self.second);
            self.second_start = None;
            let n = m.n as f64;
            let (tm, rpm) = (m.t / n, m.rpm / n);
            out.push(Observation::Speed {
                time_s: tm,
                rpm,
                state: r.state,
            });
            if let Some(k1) = self.orders.iter().position(|&o| o == 1) {
                for (c, name) in self.channels.iter().enumerate() {
                    let v = m.v[c * self.orders.len() + k1] / n;
                    out.push(Observation::Level {
                        time_s: tm,
                        channel: name.clone(),
                        amplitude: v.norm(),
                        rpm,
                        state: r.state,
                    });
                }
            }
        }
        if r.state == MachineState::Steady {
            if let Some(k1) = self.orders.iter().position(|&o| o == 1) {
                let k = self.orders.len();
                for tr in &mut self.trackers {
                    if self
                        .unhealthy
                        .get(tr.channel_index)
                        .copied()
                        .unwrap_or(true)
                    {
                        tr.reset();
                        continue;
                    }
                    let raw = r.vectors[tr.channel_index * k + k1];
                    let unit = self.units[tr.channel_index];
                    let Some(v) = tr.vector_form(raw, unit, r.speed_rpm) else {
                        continue;
                    };
                    if let Some(estimate) = tr.push(t, r.speed_rpm, v) {
                        out.push(Observation::Estimate {
                            target: Box::new(tr.target.clone()),
                            estimate,
                        });
                    }
                }
            }
        } else {
            self.trackers.iter_mut().for_each(Tracker::reset);
        }
        if matches!(r.state, MachineState::Steady | MachineState::SlowRoll) {
            let start = *self.trend_start.get_or_insert(t);
            self.trend.add(t, r.speed_rpm, &r.vectors);
            if t - start >= self.trend_interval_s {
                self.flush_trend(out);
            }
        } else {
            self.trend = Mean::default();
            self.trend_start = None;
            for o in &mut self.overall {
                *o = Overall::default();
            }
        }
    }

    fn flush_trend(&mut self, out: &mut Vec<Observation>) {
        let m = std::mem::take(&mut self.trend);
        self.trend_start = None;
        let overall = std::mem::replace(
            &mut self.overall,
            vec![Overall::default(); self.channels.len()],
        );
        if m.n == 0 {
            return;
        }
        let n = m.n as f64;
        let k = self.orders.len();
        let k1 = self.orders.iter().position(|&o| o == 1);
        let k2 = self.orders.iter().position(|&o| o == 2);
        let mut rows = Vec::new();
        for (c, name) in self.channels.iter().enumerate() {
            let Some(k1) = k1 else { break };
            let o = overall[c];
            let rms = if o.n > 1 {
                let mean = o.sum / o.n as f64;
                Some((o.sum2 / o.n as f64 - mean * mean).max(0.0).sqrt())
            } else {
                None
            };
            rows.push(TrendRow {
                machine: self.machine.clone(),
                channel: name.clone(),
                time: m.t / n,
                speed_rpm: m.rpm / n,
                x1: polar(m.v[c * k + k1] / n),
                x2: k2.map(|k2| polar(m.v[c * k + k2] / n)),
                overall: rms,
                overall_min: None,
                overall_max: None,
                samples: m.n as u64,
            });
        }
        if !rows.is_empty() {
            out.push(Observation::Trend(rows));
        }
    }
}
