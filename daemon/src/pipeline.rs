//! Runs the engine over a whole recording or simulation, block by block, in bounded memory.

use crate::decode::Recording;
use anyhow::{bail, Context, Result};
use std::io::{IsTerminal, Write};
use std::time::Instant;
use veer_tracker::config::EngineConfig;
use veer_tracker::engine::{Engine, EngineStats, Event, Update};
use veer_tracker::sim::Simulator;

/// Frames per block handed to the engine: large enough to amortise calls, small enough for cache.
const BLOCK: usize = 65_536;

/// What an analysis found, with what it was made from.
#[derive(Debug)]
pub(crate) struct Analysis {
    /// The file (or simulation) analysed.
    pub source: String,
    pub tach: String,
    pub channels: Vec<String>,
    pub sample_rate: f64,
    pub start_s: f64,
    pub duration_s: f64,
    pub events: Vec<Event>,
    pub stats: EngineStats,
    pub config: EngineConfig,
    pub elapsed_s: f64,
}

/// Prints progress on stderr when it is a terminal, at most a few times a second.
struct Progress {
    on: bool,
    total: Option<u64>,
    last: Instant,
}

impl Progress {
    fn new(total: Option<u64>) -> Self {
        Self {
            on: std::io::stderr().is_terminal(),
            total,
            last: Instant::now(),
        }
    }

    fn show(&mut self, done: u64) {
        if !self.on || self.last.elapsed().as_millis() < 250 {
            return;
        }
        self.last = Instant::now();
        if let Some(total) = self.total.filter(|&t| t > 0) {
            let pct = 100.0 * done as f64 / total as f64;
            eprint!("\ranalysing… {pct:5.1} %");
        } else {
            eprint!("\ranalysing… {done} frames");
        }
        let _ = std::io::stderr().flush();
    }

    fn done(&self) {
        if self.on {
            eprint!("\r\x1b[K");
        }
    }
}

fn collect(updates: Vec<Update>, events: &mut Vec<Event>) {
    for u in updates {
        if let Update::Event(e) = u {
            events.push(*e);
        }
    }
}

/// Analyses a recording: `tach` and `vib` are resolved column indices.
pub(crate) fn analyze_recording(
    rec: &mut Recording,
    tach: usize,
    vib: &[usize],
    cfg: EngineConfig,
) -> Result<Analysis> {
    let started = Instant::now();
    let source = rec.path().display().to_string();
    let fs = rec.sample_rate();
    let t0 = rec.start_time_s();
    let mut engine = Engine::new(cfg.clone(), fs, t0).map_err(|e| anyhow::anyhow!("{e}"))?;
    let mut cols = Vec::with_capacity(vib.len() + 1);
    cols.push(tach);
    cols.extend_from_slice(vib);
    let mut out: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK); cols.len()];
    let mut events = Vec::new();
    let mut frames = 0u64;
    let mut progress = Progress::new(rec.frames_hint());
    loop {
        let n = rec.read_frames(&cols, &mut out, BLOCK)?;
        if n == 0 {
            break;
        }
        frames += n as u64;
        let (t, v) = out.split_at(1);
        let vibs: Vec<&[f32]> = v.iter().map(|c| c.as_slice()).collect();
        engine.push(&t[0], &vibs).with_context(|| source.clone())?;
        collect(engine.take_updates(), &mut events);
        progress.show(frames);
    }
    progress.done();
    collect(engine.finish(), &mut events);
    if frames == 0 {
        bail!("{source}: the recording holds no samples");
    }
    let stats = engine.stats();
    let tach_label = rec.channel_label(tach);
    if stats.revolutions == 0 {
        bail!(
            "{source}: no tach pulses found in column {tach_label} (check --tach, --edge, --ppr and --min-speed)"
        );
    }
    Ok(Analysis {
        source,
        tach: tach_label,
        channels: vib.iter().map(|&c| rec.channel_label(c)).collect(),
        sample_rate: fs,
        start_s: t0,
        duration_s: frames as f64 / fs,
        events,
        stats,
        config: cfg,
        elapsed_s: started.elapsed().as_secs_f64(),
    })
}

/// Analyses a simulation straight from the simulator, without a file.
pub(crate) fn analyze_simulation(
    mut sim: Simulator,
    cfg: EngineConfig,
    label: &str,
) -> Result<Analysis> {
    let started = Instant::now();
    let fs = sim.sample_rate();
    let names = sim.channel_names();
    let nch = names.len();
    let mut engine = Engine::new(cfg.clone(), fs, 0.0).map_err(|e| anyhow::anyhow!("{e}"))?;
    let mut inter = Vec::with_capacity(BLOCK * nch);
    let mut cols: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK); nch];
    let mut events = Vec::new();
    let mut frames = 0u64;
    let mut progress = Progress::new(Some(sim.total_frames()));
    loop {
        inter.clear();
        let n = sim.next_block(BLOCK, &mut inter);
        if n == 0 {
            break;
        }
        for c in cols.iter_mut() {
            c.clear();
        }
        for frame in inter.chunks_exact(nch) {
            for (c, &x) in cols.iter_mut().zip(frame) {
                c.push(x);
            }
        }
        frames += n as u64;
        let (t, v) = cols.split_at(1);
        let vibs: Vec<&[f32]> = v.iter().map(|c| c.as_slice()).collect();
        engine
            .push(&t[0], &vibs)
            .map_err(|e| anyhow::anyhow!("{e}"))?;
        collect(engine.take_updates(), &mut events);
        progress.show(frames);
    }
    progress.done();
    collect(engine.finish(), &mut events);
    Ok(Analysis {
        source: label.to_string(),
        tach: names[0].clone(),
        channels: names[1..].to_vec(),
        sample_rate: fs,
        start_s: 0.0,
        duration_s: frames as f64 / fs,
        events,
        stats: engine.stats(),
        config: cfg,
        elapsed_s: started.elapsed().as_secs_f64(),
    })
}
