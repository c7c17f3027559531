//! The streaming engine: blocks of samples in, revolutions, state changes and finished events out.
//!
//! Samples are kept only for the revolutions not yet processed (bounded by the longest plausible
//! revolution), and an event's response is kept in speed bins, so memory does not grow with the
//! length of a recording. The stages run in the order the data allows: tach edges become
//! revolutions, each revolution gives nX vectors and feeds the order map, its speed drives the state
//! tracker, and a sweep's binned 1X response is analysed for critical speeds when the sweep ends.
//!
//! Slow-roll compensation (vector subtraction of the runout measured at slow roll, a trade practice,
//! REFERENCES §7): with [`SlowRoll::Auto`] the runout is the mean 1X vector of the event's lowest
//! speeds (up to 10 % above its lowest speed, if that is at most 35 % of its top speed), or else of
//! the last stretch of steady slow roll seen before the event.

use crate::angle::{AngleTracker, PulseStats};
use crate::config::{ConfigError, EngineConfig, SlowRoll};
use crate::margin::{assess, MarginAssessment};
use crate::resonance::{identify, Resonance};
use crate::spectrum::{OrderSpectrum, OrderTracker};
use crate::states::{MachineState, StateChange, StateTracker};
use crate::tach::TachDecoder;
use crate::types::{Complex64, ResponsePoint, Revolution};
use crate::units::Amplitude;
use crate::vectors::{RevVectors, VectorCalculator};
use std::collections::VecDeque;
use thiserror::Error;

/// Seconds of history kept beyond the state tracker's windows, to seed a sweep once recognised.
const RECENT_EXTRA_S: f64 = 40.0;
/// Most revolutions of history kept.
const RECENT_MAX_POINTS: usize = 20_000;

/// The direction of a sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum EventKind {
    /// Speed rising.
    RunUp,
    /// Speed falling.
    CoastDown,
}

impl EventKind {
    /// The name used in reports and JSON: `run-up` or `coast-down`.
    pub fn name(self) -> &'static str {
        match self {
            EventKind::RunUp => "run-up",
            EventKind::CoastDown => "coast-down",
        }
    }
}

/// The runout vector subtracted from an event's 1X response.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SlowRollVector {
    /// Mean 1X vector over the slow-roll revolutions, display units.
    pub vector: Complex64,
    /// Lowest speed it was taken at, r/min.
    pub speed_min_rpm: f64,
    /// Highest speed it was taken at, r/min.
    pub speed_max_rpm: f64,
    /// Number of vectors averaged.
    pub points: usize,
}

/// A critical speed found in an event, with the margin it requires and has.
#[derive(Clone, Debug, PartialEq)]
pub struct Critical {
    /// The identified resonance.
    pub resonance: Resonance,
    /// The separation-margin judgement, when the operating range is known.
    pub margin: Option<MarginAssessment>,
}

/// One channel's results for an event.
#[derive(Clone, Debug, PartialEq)]
pub struct EventChannel {
    /// Channel name.
    pub name: String,
    /// Unit and detection of the amplitudes.
    pub amplitude: Amplitude,
    /// The runout vector subtracted, if any.
    pub slow_roll: Option<SlowRollVector>,
    /// 1X response as measured, per speed bin (display units).
    pub response: Vec<ResponsePoint>,
    /// 1X response with the slow-roll vector subtracted.
    pub compensated: Vec<ResponsePoint>,
    /// The other configured orders, as measured: (order, response).
    pub other_orders: Vec<(u32, Vec<ResponsePoint>)>,
    /// Critical speeds found, in speed order.
    pub criticals: Vec<Critical>,
    /// Order-map rows over the event (display units).
    pub order_map: Vec<OrderSpectrum>,
}

/// A finished run-up or coast-down.
#[derive(Clone, Debug, PartialEq)]
pub struct Event {
    /// Direction.
    pub kind: EventKind,
    /// Start time, s.
    pub start_s: f64,
    /// End time, s.
    pub end_s: f64,
    /// Speed at the start, r/min.
    pub speed_start_rpm: f64,
    /// Speed at the end, r/min.
    pub speed_end_rpm: f64,
    /// Mean sweep rate, r/min per second (negative on a coast-down).
    pub sweep_rate_rpm_s: f64,
    /// Vectors (revolutions or blocks) that went into the event.
    pub vectors: u64,
    /// Per-channel results, in the configured channel order.
    pub channels: Vec<EventChannel>,
}

/// The vectors of one revolution (or block of revolutions), in display units.
#[derive(Clone, Debug, PartialEq)]
pub struct RevolutionUpdate {
    /// Mid-time, s.
    pub time_s: f64,
    /// Mean speed, r/min.
    pub speed_rpm: f64,
    /// Machine state after this revolution.
    pub state: MachineState,
    /// Phasors, channel-major: `vectors[ch * orders + k]`.
    pub vectors: Vec<Complex64>,
}

/// Something the engine has to report.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Update {
    /// A revolution's vectors (only when enabled with [`Engine::set_emit_revolutions`]).
    Revolution(RevolutionUpdate),
    /// The machine state changed.
    State(StateChange),
    /// A run-up or coast-down finished.
    Event(Box<Event>),
    /// The tach was lost: no plausible pulse since the last revolution; the time is when the silence
    /// passed the longest plausible revolution, s.
    TachLost(f64),
}

/// Counters for health reporting.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct EngineStats {
    /// Samples per channel pushed.
    pub samples: u64,
    /// Revolutions completed by the tach.
    pub revolutions: u64,
    /// Vectors (revolutions or blocks) computed.
    pub vectors: u64,
    /// Vectors discarded because a channel held NaN or infinite samples.
    pub bad_vectors: u64,
    /// What the pulse repair did.
    pub pulses: PulseStats,
    /// Events finished (kept or not).
    pub sweeps: u64,
    /// Sweeps too small to count as events.
    pub small_sweeps: u64,
}

/// A failure of the engine's input.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum EngineError {
    /// The configuration was refused.
    #[error(transparent)]
    Config(#[from] ConfigError),
    /// The blocks pushed do not fit the configuration.
    #[error("block shape: {0}")]
    Shape(String),
}

/// Averages the vectors of consecutive revolutions that fall in one speed bin.
#[derive(Clone, Debug)]
struct Bin {
    key: i64,
    n: usize,
    t: f64,
    s: f64,
    v: Vec<Complex64>,
}

/// A point of an event in progress: all channels and orders at one speed.
#[derive(Clone, Debug)]
struct Point {
    time_s: f64,
    speed_rpm: f64,
    v: Vec<Complex64>,
}

/// A sweep being collected.
#[derive(Clone, Debug)]
struct Sweep {
    kind: EventKind,
    start_s: f64,
    points: Vec<Point>,
    bin: Option<Bin>,
    maps: Vec<Vec<OrderSpectrum>>,
    vectors: u64,
}

/// Running mean of vectors (slow-roll estimates).
#[derive(Clone, Debug, Default)]
struct MeanVectors {
    sum: Vec<Complex64>,
    n: usize,
    min_rpm: f64,
    max_rpm: f64,
}

impl MeanVectors {
    fn add(&mut self, v: &[Complex64], rpm: f64) {
        if self.n == 0 {
            self.sum = v.to_vec();
            self.min_rpm = rpm;
            self.max_rpm = rpm;
        } else {
            for (s, x) in self.sum.iter_mut().zip(v) {
                *s += *x;
            }
            self.min_rpm = self.min_rpm.min(rpm);
            self.max_rpm = self.max_rpm.max(rpm);
        }
        self.n += 1;
    }

    fn vector(&self, idx: usize) -> Option<SlowRollVector> {
        if self.n < 3 {
            return None;
        }
        Some(SlowRollVector {
            vector: self.sum.get(idx).copied()? / self.n as f64,
            speed_min_rpm: self.min_rpm,
            speed_max_rpm: self.max_rpm,
            points: self.n,
        })
    }
}

/// The order-tracking engine.
#[derive(Debug)]
pub struct Engine {
    cfg: EngineConfig,
    fs: f64,
    t0: f64,
    tach: TachDecoder,
    angle: AngleTracker,
    vectors: VectorCalculator,
    states: StateTracker,
    maps: Vec<OrderTracker>,
    /// Display factor per channel: scale × detection.
    factor: Vec<f64>,
    orders: usize,
    order1: Option<usize>,
    buf: Vec<Vec<f32>>,
    buf_start: u64,
    total: u64,
    edges: Vec<f64>,
    new_revs: Vec<Revolution>,
    pending: VecDeque<Revolution>,
    recent: VecDeque<Point>,
    sweep: Option<Sweep>,
    slow_roll_state: MeanVectors,
    slow_roll_window: MeanVectors,
    in_window: bool,
    losses_seen: u64,
    /// Speed, time and last revolution index of the last order-map row.
    last_row: Option<(f64, f64, u64)>,
    emit_revolutions: bool,
    updates: Vec<Update>,
    stats: EngineStats,
}

impl Engine {
    /// An engine for samples at `sample_rate` Hz, the first at time `t0` s.
    pub fn new(cfg: EngineConfig, sample_rate: f64, t0: f64) -> Result<Self, EngineError> {
        cfg.validate()?;
        let tach = TachDecoder::new(&cfg.tach, sample_rate, t0).map_err(ConfigError::from)?;
        let angle = AngleTracker::new(&cfg.tach);
        let n = cfg.channels.len();
        let vectors = VectorCalculator::new(&cfg.vectors, n).map_err(ConfigError::from)?;
        let states = StateTracker::new(&cfg.states).map_err(ConfigError::from)?;
        let max_rev_s = 60.0 / cfg.tach.min_rpm;
        let mut maps = Vec::new();
        if let Some(m) = &cfg.order_map {
            for _ in 0..n {
                maps.push(
                    OrderTracker::new(m, sample_rate, t0, max_rev_s).map_err(ConfigError::from)?,
                );
            }
        }
        let factor = cfg
            .channels
            .iter()
            .map(|c| c.scale * c.amplitude.detection.from_peak())
            .collect();
        let orders = cfg.vectors.orders.len();
        let order1 = cfg.vectors.orders.iter().position(|&o| o == 1);
        Ok(Self {
            fs: sample_rate,
            t0,
            tach,
            angle,
            vectors,
            states,
            maps,
            factor,
            orders,
            order1,
            buf: vec![Vec::new(); n],
            buf_start: 0,
            total: 0,
            edges: Vec::new(),
            new_revs: Vec::new(),
            pending: VecDeque::new(),
            recent: VecDeque::new(),
            sweep: None,
            slow_roll_state: MeanVectors::default(),
            slow_roll_window: MeanVectors::default(),
            in_window: false,
            losses_seen: 0,
            last_row: None,
            emit_revolutions: false,
            updates: Vec::new(),
            stats: EngineStats::default(),
            cfg,
        })
    }

    /// The configuration in force.
    pub fn config(&self) -> &EngineConfig {
        &self.cfg
    }

    /// Whether every revolution's vectors are reported (off by default: events carry what matters).
    pub fn set_emit_revolutions(&mut self, on: bool) {
        self.emit_revolutions = on;
    }

    /// Counters so far.
    pub fn stats(&self) -> EngineStats {
        let mut s = self.stats;
        s.pulses = self.angle.stats();
        s
    }

    /// The current machine state.
    pub fn state(&self) -> MachineState {
        self.states.state()
    }

    /// Takes the updates produced so far.
    pub fn take_updates(&mut self) -> Vec<Update> {
        std::mem::take(&mut self.updates)
    }

    /// Feeds one block: the tach samples and one slice per vibration channel, all the same length.
    pub fn push(&mut self, tach: &[f32], channels: &[&[f32]]) -> Result<(), EngineError> {
        if channels.len() != self.buf.len() {
            return Err(EngineError::Shape(format!(
                "{} vibration channels given, {} configured",
                channels.len(),
                self.buf.len()
            )));
        }
        if let Some(bad) = channels.iter().position(|c| c.len() != tach.len()) {
            return Err(EngineError::Shape(format!(
                "channel {} has {} samples, the tach {}",
                self.cfg.channels[bad].name,
                channels[bad].len(),
                tach.len()
            )));
        }
        for (b, c) in self.buf.iter_mut().zip(channels) {
            b.extend_from_slice(c);
        }
        self.total += tach.len() as u64;
        self.stats.samples = self.total;
        self.edges.clear();
        self.tach.push(tach, &mut self.edges);
        self.new_revs.clear();
        self.angle.push_edges(&self.edges, &mut self.new_revs);
        self.stats.revolutions += self.new_revs.len() as u64;
        self.pending.extend(self.new_revs.iter().copied());
        let now = self.t0 + self.total as f64 / self.fs;
        if self.edges.is_empty() {
            self.angle.note_time(now);
        }
        self.process_ready(false);
        let losses = self.angle.stats().losses;
        if losses > self.losses_seen {
            self.losses_seen = losses;
            self.on_tach_lost(now);
        }
        self.trim();
        Ok(())
    }

    /// Ends the data: processes what can be processed and closes an open sweep.
    pub fn finish(&mut self) -> Vec<Update> {
        self.process_ready(true);
        let end = self.recent.back().map(|p| p.time_s);
        if let Some(t) = end {
            self.close_sweep(t);
        }
        self.take_updates()
    }

    fn on_tach_lost(&mut self, now: f64) {
        let last = self.recent.back().map_or(now, |p| p.time_s);
        // Dated when the silence became longer than any plausible revolution, not when the block
        // that revealed it ended: a long block would otherwise date the loss late by its length.
        let lost_at = (last + self.angle.max_silence()).min(now);
        self.updates.push(Update::TachLost(lost_at));
        self.close_sweep(last);
        if let Some(c) = self.states.stopped(last) {
            self.updates.push(Update::State(c));
        }
        self.vectors.reset();
        for m in &mut self.maps {
            m.reset_block();
        }
        self.recent.clear();
        self.pending.clear();
    }

    /// Processes pending revolutions whose samples (plus a few after) have arrived.
    fn process_ready(&mut self, all: bool) {
        let last_time = self.t0 + (self.total as f64 - 1.0) / self.fs;
        while let Some(rev) = self.pending.front().copied() {
            if !all && rev.t_end + 3.0 / self.fs > last_time {
                break;
            }
            self.pending.pop_front();
            self.process_revolution(&rev);
        }
    }

    fn process_revolution(&mut self, rev: &Revolution) {
        let first_time = self.t0 + self.buf_start as f64 / self.fs;
        let slices: Vec<&[f32]> = self.buf.iter().map(|b| b.as_slice()).collect();
        let vectors = self.vectors.process(rev, first_time, self.fs, &slices);
        let wanted = self.maps.first().is_some_and(|m| m.busy()) || self.row_wanted(rev);
        // The order map gets only the samples of the revolutions it uses (with a few either side
        // for its interpolation), straight from the engine's buffer.
        let from = (((rev.t_start - self.t0) * self.fs).floor() as i64 - 3)
            .max(self.buf_start as i64) as u64;
        let to = (((rev.t_end - self.t0) * self.fs).ceil() as u64 + 4).min(self.total);
        for c in 0..self.maps.len() {
            if !wanted {
                self.maps[c].skip_revolution(rev);
                continue;
            }
            if to > from {
                let (a, b) = (
                    (from - self.buf_start) as usize,
                    (to - self.buf_start) as usize,
                );
                self.maps[c].push_samples_at(from, &self.buf[c][a..b]);
            }
            if let Some(mut spec) = self.maps[c].push_revolution(rev) {
                if c == 0 {
                    self.last_row = Some((spec.speed_rpm, spec.time_s, rev.index));
                }
                let f = self.factor[c] as f32;
                for a in &mut spec.amplitudes {
                    *a *= f.abs();
                }
                if let Some(sw) = &mut self.sweep {
                    push_map_row(&mut sw.maps[c], spec, self.cfg.max_map_rows);
                }
            }
        }
        if let Some(v) = vectors {
            self.on_vectors(v);
        }
    }

    /// Whether an order-map row should start at this revolution: rows are taken by speed step
    /// (like a speed-triggered analyser) and, at steady speed, by time interval, but never back to
    /// back: at least one block's worth of revolutions lies between rows. That bounds the order
    /// map's share of the work (its anti-alias filter is the costliest per-sample stage) to half
    /// the data even where a slow machine sweeps through several speed steps within one block.
    fn row_wanted(&self, rev: &Revolution) -> bool {
        let gap = self
            .cfg
            .order_map
            .as_ref()
            .map_or(0, |m| m.revs_per_block as u64);
        match self.last_row {
            None => true,
            Some((speed, time, last_index)) => {
                rev.index > last_index + gap
                    && ((rev.mean_rpm() / speed).ln().abs() >= self.cfg.map_step_pct / 100.0
                        || rev.mid_time() - time >= self.cfg.map_interval_s)
            }
        }
    }

    fn on_vectors(&mut self, rv: RevVectors) {
        self.stats.vectors += 1;
        if rv
            .vectors
            .iter()
            .any(|v| !(v.re.is_finite() && v.im.is_finite()))
        {
            self.stats.bad_vectors += 1;
            return;
        }
        let mut v = rv.vectors;
        for (c, f) in self.factor.iter().enumerate() {
            for x in &mut v[c * self.orders..(c + 1) * self.orders] {
                *x *= *f;
            }
        }
        let point = Point {
            time_s: rv.t_start * 0.5 + rv.t_end * 0.5,
            speed_rpm: rv.speed_rpm,
            v,
        };
        if let Some(change) = self.states.update(point.time_s, point.speed_rpm) {
            self.on_state_change(change);
        }
        self.track_slow_roll(&point);
        if let Some(sw) = &mut self.sweep {
            if point.time_s >= sw.start_s {
                add_to_sweep(sw, &point, self.cfg.bin_pct);
            }
        }
        if self.emit_revolutions {
            self.updates.push(Update::Revolution(RevolutionUpdate {
                time_s: point.time_s,
                speed_rpm: point.speed_rpm,
                state: self.states.state(),
                vectors: point.v.clone(),
            }));
        }
        // Long enough to hold the start of a slow sweep, which is only recognised once the speed
        // has moved a few percent; capped in points so that fast machines stay bounded too.
        let keep = self.cfg.states.slope_window_s + self.cfg.states.hold_s + RECENT_EXTRA_S;
        self.recent.push_back(point);
        while let (Some(f), Some(b)) = (self.recent.front(), self.recent.back()) {
            if b.time_s - f.time_s > keep || self.recent.len() > RECENT_MAX_POINTS {
                self.recent.pop_front();
            } else {
                break;
            }
        }
    }

    fn track_slow_roll(&mut self, p: &Point) {
        if self.states.state() == MachineState::SlowRoll {
            self.slow_roll_state.add(&p.v, p.speed_rpm);
        }
        if let SlowRoll::Window { min_rpm, max_rpm } = self.cfg.slow_roll {
            let inside = p.speed_rpm >= min_rpm && p.speed_rpm <= max_rpm;
            if inside && !self.in_window {
                // A new stretch inside the window replaces the old estimate.
                self.slow_roll_window = MeanVectors::default();
            }
            if inside {
                self.slow_roll_window.add(&p.v, p.speed_rpm);
            }
            self.in_window = inside;
        }
    }

    fn on_state_change(&mut self, change: StateChange) {
        self.updates.push(Update::State(change));
        if change.from.is_sweep() {
            self.close_sweep(change.time_s);
        }
        if change.to == MachineState::SlowRoll {
            self.slow_roll_state = MeanVectors::default();
        }
        if change.to.is_sweep() {
            let kind = if change.to == MachineState::SpeedingUp {
                EventKind::RunUp
            } else {
                EventKind::CoastDown
            };
            let mut sw = Sweep {
                kind,
                start_s: change.time_s,
                points: Vec::new(),
                bin: None,
                maps: vec![Vec::new(); self.maps.len()],
                vectors: 0,
            };
            for p in self.recent.iter().filter(|p| p.time_s >= change.time_s) {
                add_to_sweep(&mut sw, p, self.cfg.bin_pct);
            }
            self.sweep = Some(sw);
        }
    }

    /// Ends the sweep in progress at `end_s`, analyses it and reports it if it is big enough.
    fn close_sweep(&mut self, end_s: f64) {
        let Some(mut sw) = self.sweep.take() else {
            return;
        };
        if let Some(bin) = sw.bin.take() {
            sw.points.push(bin_point(&bin));
        }
        sw.points.retain(|p| p.time_s <= end_s);
        self.stats.sweeps += 1;
        let (Some(first), Some(last)) = (sw.points.first(), sw.points.last()) else {
            self.stats.small_sweeps += 1;
            return;
        };
        let (lo, hi) = sw
            .points
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(lo, hi), p| {
                (lo.min(p.speed_rpm), hi.max(p.speed_rpm))
            });
        if sw.points.len() < 8 || hi - lo < self.cfg.min_sweep_share * hi {
            self.stats.small_sweeps += 1;
            return;
        }
        let (speed_start, speed_end) = (first.speed_rpm, last.speed_rpm);
        let (t_first, t_last) = (first.time_s, last.time_s);
        let duration = (t_last - t_first).max(1e-9);
        let channels = (0..self.cfg.channels.len())
            .map(|c| self.event_channel(&sw, c, lo, hi))
            .collect();
        let event = Event {
            kind: sw.kind,
            start_s: sw.start_s.min(t_first),
            end_s: end_s.max(t_last).min(t_last + self.cfg.states.hold_s),
            speed_start_rpm: speed_start,
            speed_end_rpm: speed_end,
            sweep_rate_rpm_s: (speed_end - speed_start) / duration,
            vectors: sw.vectors,
            channels,
        };
        self.updates.push(Update::Event(Box::new(event)));
    }

    fn event_channel(&self, sw: &Sweep, c: usize, lo: f64, hi: f64) -> EventChannel {
        let cfg = &self.cfg.channels[c];
        let series = |k: usize| -> Vec<ResponsePoint> {
            sw.points
                .iter()
                .map(|p| ResponsePoint {
                    time_s: p.time_s,
                    speed_rpm: p.speed_rpm,
                    vector: p.v[c * self.orders + k],
                })
                .collect()
        };
        let other_orders = self
            .cfg
            .vectors
            .orders
            .iter()
            .enumerate()
            .filter(|(k, _)| Some(*k) != self.order1)
            .map(|(k, &o)| (o, series(k)))
            .collect();
        let order_map = sw.maps.get(c).cloned().unwrap_or_default();
        let Some(k1) = self.order1 else {
            return EventChannel {
                name: cfg.name.clone(),
                amplitude: cfg.amplitude,
                slow_roll: None,
                response: Vec::new(),
                compensated: Vec::new(),
                other_orders,
                criticals: Vec::new(),
                order_map,
            };
        };
        let response = series(k1);
        let idx = c * self.orders + k1;
        let slow_roll = match self.cfg.slow_roll {
            SlowRoll::Off => None,
            SlowRoll::Window { .. } => self.slow_roll_window.vector(idx),
            SlowRoll::Auto => {
                let mut low = MeanVectors::default();
                if lo <= 0.35 * hi {
                    for p in sw.points.iter().filter(|p| p.speed_rpm <= 1.1 * lo) {
                        low.add(&p.v, p.speed_rpm);
                    }
                }
                low.vector(idx).or_else(|| self.slow_roll_state.vector(idx))
            }
        };
        let runout = slow_roll.map_or(Complex64::new(0.0, 0.0), |s| s.vector);
        let compensated: Vec<ResponsePoint> = response
            .iter()
            .map(|p| ResponsePoint {
                vector: p.vector - runout,
                ..*p
            })
            .collect();
        let criticals = identify(&compensated, &self.cfg.resonance)
            .into_iter()
            .map(|r| {
                let margin = self.cfg.margins.map(|m| {
                    assess(
                        r.speed_rpm,
                        r.amplification_factor,
                        &m.range,
                        m.rule,
                        m.warn_band_pct,
                    )
                });
                Critical {
                    resonance: r,
                    margin,
                }
            })
            .collect();
        EventChannel {
            name: cfg.name.clone(),
            amplitude: cfg.amplitude,
            slow_roll,
            response,
            compensated,
            other_orders,
            criticals,
            order_map,
        }
    }

    /// Drops samples no pending or future revolution can need.
    fn trim(&mut self) {
        let now_idx = self.total;
        let keep_s = self.angle.max_silence() + 0.05;
        let mut keep_from = now_idx.saturating_sub((keep_s * self.fs) as u64);
        if let Some(rev) = self.pending.front() {
            let idx = ((rev.t_start - self.t0) * self.fs).floor() as i64 - 4;
            keep_from = keep_from.min(idx.max(0) as u64);
        }
        let dead = keep_from.saturating_sub(self.buf_start) as usize;
        let len = self.buf.first().map_or(0, |b| b.len());
        // Drain only when the dead prefix is large, so the copy is amortised.
        if dead > 0 && dead >= len / 2 {
            for b in &mut self.buf {
                b.drain(..dead.min(b.len()));
            }
            self.buf_start += dead as u64;
        }
    }
}

fn bin_point(b: &Bin) -> Point {
    let n = b.n as f64;
    Point {
        time_s: b.t / n,
        speed_rpm: b.s / n,
        v: b.v.iter().map(|x| x / n).collect(),
    }
}

fn add_to_sweep(sw: &mut Sweep, p: &Point, bin_pct: f64) {
    sw.vectors += 1;
    let key = (p.speed_rpm.max(1e-9).ln() / (1.0 + bin_pct / 100.0).ln()).floor() as i64;
    // A speed that dithers back across the edge of the bin just entered (tach jitter) stays in the
    // current bin, so the number of points is bounded by the speed range, not the duration.
    let behind = match sw.kind {
        EventKind::RunUp => -1,
        EventKind::CoastDown => 1,
    };
    match &mut sw.bin {
        Some(b) if b.key == key || b.key + behind == key => {
            b.n += 1;
            b.t += p.time_s;
            b.s += p.speed_rpm;
            for (s, x) in b.v.iter_mut().zip(&p.v) {
                *s += *x;
            }
        }
        _ => {
            if let Some(b) = sw.bin.take() {
                sw.points.push(bin_point(&b));
            }
            sw.bin = Some(Bin {
                key,
                n: 1,
                t: p.time_s,
                s: p.speed_rpm,
                v: p.v.clone(),
            });
        }
    }
}

/// Appends an order-map row, merging neighbours pairwise once the cap is reached.
fn push_map_row(rows: &mut Vec<OrderSpectrum>, row: OrderSpectrum, cap: usize) {
    rows.push(row);
    if rows.len() < cap {
        return;
    }
    let merged: Vec<OrderSpectrum> = rows
        .chunks(2)
        .map(|pair| {
            if pair.len() == 1 {
                return pair[0].clone();
            }
            let (a, b) = (&pair[0], &pair[1]);
            OrderSpectrum {
                time_s: 0.5 * (a.time_s + b.time_s),
                speed_rpm: 0.5 * (a.speed_rpm + b.speed_rpm),
                order_step: a.order_step,
                amplitudes: a
                    .amplitudes
                    .iter()
                    .zip(&b.amplitudes)
                    .map(|(x, y)| 0.5 * (x + y))
                    .collect(),
            }
        })
        .collect();
    *rows = merged;
}
