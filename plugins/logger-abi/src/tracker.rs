//! The tracker behind a handle: the engine, started at the first block, and the queue of results
//! waiting to be polled. Safe Rust only; the C interface is a thin layer over it.
//!
//! A host program hands over blocks with their sample rate and the time of their first sample. The
//! engine starts at the first block; a later block whose rate differs, or whose timestamp is more
//! than [`GAP_TOLERANCE_SAMPLES`] sample periods away from where the previous block ended, is a
//! break in the data: the engine in progress is finished (an open sweep is closed and reported),
//! a `Gap` result is queued, and a new engine starts at the new block. The engine cannot bridge a
//! gap: its revolutions are timed by sample count.

use crate::status::AbiError;
use std::collections::VecDeque;
use veer_tracker::config::EngineConfig;
use veer_tracker::engine::{Engine, EngineStats, Update};

/// How far, in sample periods, a block's timestamp may be from the end of the previous block
/// before it counts as a break in the data.
pub const GAP_TOLERANCE_SAMPLES: f64 = 2.0;

/// Results kept unpolled before further revolution results are dropped (state changes and events
/// are never dropped): bounds memory when a host program never polls.
pub const QUEUE_CAP: usize = 65_536;

/// One result waiting to be polled.
#[derive(Clone, Debug, PartialEq)]
pub enum Output {
    /// Something the engine reported.
    Update(Update),
    /// A break in the data: the engine was finished and started again.
    Gap {
        /// Timestamp of the block that started the new engine, s.
        time_s: f64,
        /// Where the data would have continued, s.
        expected_s: f64,
    },
}

/// A sample type the interface accepts.
pub trait Sample: Copy {
    /// The engine's sample type.
    fn to_f32(self) -> f32;
    /// Whether the value is a number (finite after conversion to f32).
    fn is_usable(self) -> bool;
}

impl Sample for f32 {
    #[inline]
    fn to_f32(self) -> f32 {
        self
    }
    #[inline]
    fn is_usable(self) -> bool {
        self.is_finite()
    }
}

impl Sample for f64 {
    #[inline]
    fn to_f32(self) -> f32 {
        self as f32
    }
    #[inline]
    fn is_usable(self) -> bool {
        (self as f32).is_finite()
    }
}

/// Counters of a tracker since it was created or reset.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Counters {
    /// The running engine's counters (since the last break in the data).
    pub engine: EngineStats,
    /// Frames accepted since creation or reset.
    pub frames: u64,
    /// Breaks in the data (engine restarts).
    pub gaps: u64,
    /// Revolution results dropped because the queue was full.
    pub dropped: u64,
}

/// The tracker behind one handle.
#[derive(Debug)]
pub struct Tracker {
    cfg: EngineConfig,
    names: Vec<String>,
    orders: Vec<u32>,
    engine: Option<Engine>,
    rate: f64,
    start_s: f64,
    engine_frames: u64,
    revolutions: bool,
    queue: VecDeque<Output>,
    counters: Counters,
    scratch: Vec<Vec<f32>>,
    /// The message of the last failed call on this handle.
    pub last_error: String,
}

impl Tracker {
    /// A tracker for a configuration string (see [`crate::config`]).
    pub fn from_config_str(text: &str) -> Result<Self, AbiError> {
        let cfg = crate::config::parse(text)?;
        Ok(Self::new(cfg))
    }

    /// A tracker for a checked configuration. Per-revolution results are on.
    pub fn new(cfg: EngineConfig) -> Self {
        let names = cfg.channels.iter().map(|c| c.name.clone()).collect();
        let orders = cfg.vectors.orders.clone();
        let n = cfg.channels.len() + 1;
        Self {
            cfg,
            names,
            orders,
            engine: None,
            rate: 0.0,
            start_s: 0.0,
            engine_frames: 0,
            revolutions: true,
            queue: VecDeque::new(),
            counters: Counters::default(),
            scratch: vec![Vec::new(); n],
            last_error: String::new(),
        }
    }

    /// Channels a block must have: the tach, then the sensors in configured order.
    pub fn channel_count(&self) -> usize {
        self.names.len() + 1
    }

    /// The sensors' names, in configured order.
    pub fn channel_names(&self) -> &[String] {
        &self.names
    }

    /// The orders of each revolution's vectors.
    pub fn orders(&self) -> &[u32] {
        &self.orders
    }

    /// Turns per-revolution results on or off (on by default).
    pub fn set_revolutions(&mut self, on: bool) {
        self.revolutions = on;
        if let Some(e) = &mut self.engine {
            e.set_emit_revolutions(on);
        }
    }

    /// Counters so far.
    pub fn counters(&self) -> Counters {
        let mut c = self.counters;
        c.engine = self.engine.as_ref().map(|e| e.stats()).unwrap_or_default();
        c
    }

    /// Results waiting.
    pub fn pending(&self) -> usize {
        self.queue.len()
    }

    /// The next result, left in the queue.
    pub fn peek(&self) -> Option<&Output> {
        self.queue.front()
    }

    /// Takes the next result.
    pub fn pop(&mut self) -> Option<Output> {
        self.queue.pop_front()
    }

    /// Forgets the data and the results; keeps the configuration and the revolution setting.
    pub fn reset(&mut self) {
        self.engine = None;
        self.queue.clear();
        self.counters = Counters::default();
        self.last_error.clear();
    }

    /// Ends the data: finishes the engine (closing an open sweep); the next block starts afresh.
    pub fn finish(&mut self) {
        if let Some(mut e) = self.engine.take() {
            let updates = e.finish();
            self.enqueue(updates);
        }
    }

    /// Checks a planar block (channel count, equal lengths, finite samples) and starts it at
    /// `rate` and `t0`; returns its number of frames. Nothing is consumed when it fails.
    fn check_planar<S: Sample>(
        &mut self,
        channels: &[&[S]],
        rate: f64,
        t0: f64,
    ) -> Result<usize, AbiError> {
        let want = self.channel_count();
        if channels.len() != want {
            return Err(AbiError::Length(format!(
                "{} channels given, {want} expected (the tach, then {} sensor(s))",
                channels.len(),
                want - 1
            )));
        }
        let frames = channels.first().map_or(0, |c| c.len());
        if let Some(i) = channels.iter().position(|c| c.len() != frames) {
            return Err(AbiError::Length(format!(
                "channel {i} has {} samples, the tach {frames}",
                channels[i].len()
            )));
        }
        for (i, c) in channels.iter().enumerate() {
            if let Some(k) = c.iter().position(|x| !x.is_usable()) {
                return Err(self.nonfinite(i, k));
            }
        }
        self.begin(rate, t0, frames)?;
        Ok(frames)
    }

    /// Feeds one block given one slice per channel (tach first), all of the same length.
    pub fn push_planar<S: Sample>(
        &mut self,
        channels: &[&[S]],
        rate: f64,
        t0: f64,
    ) -> Result<(), AbiError> {
        if self.check_planar(channels, rate, t0)? == 0 {
            return Ok(());
        }
        let mut scratch = std::mem::take(&mut self.scratch);
        for (dst, src) in scratch.iter_mut().zip(channels) {
            dst.clear();
            dst.extend(src.iter().map(|x| x.to_f32()));
        }
        let r = self.feed(&scratch);
        self.scratch = scratch;
        r
    }

    /// Feeds one block of f32 samples without copying them, one slice per channel (tach first).
    pub fn push_planar_f32(
        &mut self,
        channels: &[&[f32]],
        rate: f64,
        t0: f64,
    ) -> Result<(), AbiError> {
        if self.check_planar(channels, rate, t0)? == 0 {
            return Ok(());
        }
        self.feed(channels)
    }

    /// Feeds one block of interleaved frames: `n_channels` samples per frame, tach first.
    pub fn push_interleaved<S: Sample>(
        &mut self,
        samples: &[S],
        n_channels: usize,
        rate: f64,
        t0: f64,
    ) -> Result<(), AbiError> {
        let want = self.channel_count();
        if n_channels != want {
            return Err(AbiError::Length(format!(
                "{n_channels} channels per frame given, {want} expected (the tach, then {} sensor(s))",
                want - 1
            )));
        }
        if !samples.len().is_multiple_of(want) {
            return Err(AbiError::Length(format!(
                "{} samples is not a whole number of {want}-channel frames",
                samples.len()
            )));
        }
        if let Some(k) = samples.iter().position(|x| !x.is_usable()) {
            return Err(self.nonfinite(k % want, k / want));
        }
        let frames = samples.len() / want;
        self.begin(rate, t0, frames)?;
        if frames == 0 {
            return Ok(());
        }
        let mut scratch = std::mem::take(&mut self.scratch);
        for (c, dst) in scratch.iter_mut().enumerate() {
            dst.clear();
            dst.extend(samples[c..].iter().step_by(want).map(|x| x.to_f32()));
        }
        let r = self.feed(&scratch);
        self.scratch = scratch;
        r
    }

    fn nonfinite(&self, channel: usize, frame: usize) -> AbiError {
        let name = match channel {
            0 => "the tach".to_string(),
            c => format!("sensor `{}`", self.names[c - 1]),
        };
        AbiError::NonFinite(format!(
            "channel {channel} ({name}), frame {frame} of the block is NaN or infinite; the block was refused whole"
        ))
    }

    /// Checks rate and timestamp, and starts (or restarts) the engine where needed.
    fn begin(&mut self, rate: f64, t0: f64, frames: usize) -> Result<(), AbiError> {
        if !(rate.is_finite() && rate > 0.0) {
            return Err(AbiError::Argument(format!(
                "sample rate {rate} Hz: must be a positive, finite rate"
            )));
        }
        if !t0.is_finite() {
            return Err(AbiError::Argument(format!(
                "timestamp {t0} s: must be finite"
            )));
        }
        if frames == 0 {
            return Ok(());
        }
        if self.engine.is_some() {
            let expected = self.start_s + self.engine_frames as f64 / self.rate;
            let same_rate = (rate - self.rate).abs() <= 1e-9 * self.rate;
            if same_rate && (t0 - expected).abs() <= GAP_TOLERANCE_SAMPLES / rate {
                return Ok(());
            }
            self.finish();
            self.counters.gaps += 1;
            self.queue.push_back(Output::Gap {
                time_s: t0,
                expected_s: expected,
            });
        }
        let mut engine = Engine::new(self.cfg.clone(), rate, t0)
            .map_err(|e| AbiError::Argument(format!("cannot start the engine: {e}")))?;
        engine.set_emit_revolutions(self.revolutions);
        self.engine = Some(engine);
        self.rate = rate;
        self.start_s = t0;
        self.engine_frames = 0;
        Ok(())
    }

    fn feed<T: AsRef<[f32]>>(&mut self, channels: &[T]) -> Result<(), AbiError> {
        let Some(engine) = self.engine.as_mut() else {
            return Err(AbiError::Internal("no engine after start".to_string()));
        };
        let tach = channels[0].as_ref();
        let vib: Vec<&[f32]> = channels[1..].iter().map(|c| c.as_ref()).collect();
        engine
            .push(tach, &vib)
            .map_err(|e| AbiError::Length(e.to_string()))?;
        let updates = engine.take_updates();
        self.engine_frames += tach.len() as u64;
        self.counters.frames += tach.len() as u64;
        self.enqueue(updates);
        Ok(())
    }

    fn enqueue(&mut self, updates: Vec<Update>) {
        for u in updates {
            if matches!(u, Update::Revolution(_)) && self.queue.len() >= QUEUE_CAP {
                self.counters.dropped += 1;
                continue;
            }
            self.queue.push_back(Output::Update(u));
        }
    }

    /// The next result as one line of JSON (no newline), left in the queue.
    pub fn peek_json(&self) -> Option<String> {
        self.queue
            .front()
            .map(|o| crate::json::output(o, &self.names, &self.orders).to_string())
    }
}
