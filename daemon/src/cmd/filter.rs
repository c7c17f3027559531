//! `veer filter`: samples on stdin, results on stdout as JSON lines, as they happen.
//!
//! Meant to sit in a pipeline behind any program that can write samples: CSV rows (a header row,
//! then one row per sample instant) or veer's serial line formats (`text` or `frames`). Whatever a
//! read returns is parsed and pushed at once, and every result line is flushed, so a revolution's
//! line leaves while the input is still streaming. The engine's settings come from the same options
//! as `veer analyze`, and an event line has the keys of an event of `veer analyze --json`, plus
//! `"type": "event"`; the other lines are `revolution`, `state`, `tach-lost` and `gap`.

use crate::cli::FilterArgs;
use crate::config::model::SerialFormat;
use crate::ingest::types::StreamEvent;
use crate::report::json;
use crate::serial::{Decoder, StreamLayout};
use crate::setup::engine_config;
use anyhow::{anyhow, bail, Context, Result};
use serde_json::{json, Value};
use std::io::{BufRead, Write};
use veer_tracker::config::EngineConfig;
use veer_tracker::engine::{Engine, Update};
use veer_tracker::lag_deg;

/// Rows read before the rate is measured from a CSV `time` column (without `--rate`).
const RATE_ROWS: usize = 1024;

/// Rounds for print, as the JSON report does.
fn r(x: f64, digits: i32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let f = 10f64.powi(digits);
    json!((x * f).round() / f)
}

/// The engine and where its output goes.
struct Sink {
    cfg: EngineConfig,
    engine: Option<Engine>,
    revolutions: bool,
    names: Vec<String>,
    orders: Vec<u32>,
    out: std::io::StdoutLock<'static>,
    /// The reader went away (`| head`): stop quietly.
    closed: bool,
}

impl Sink {
    fn start(&mut self, rate: f64, t0: f64) -> Result<()> {
        let mut e = Engine::new(self.cfg.clone(), rate, t0).map_err(|e| anyhow!("{e}"))?;
        e.set_emit_revolutions(self.revolutions);
        self.engine = Some(e);
        Ok(())
    }

    fn push(&mut self, tach: &[f32], vib: &[&[f32]]) -> Result<()> {
        let Some(e) = self.engine.as_mut() else {
            bail!("samples before the engine was started");
        };
        e.push(tach, vib).map_err(|e| anyhow!("{e}"))?;
        let updates = e.take_updates();
        self.write(updates)
    }

    fn finish(&mut self) -> Result<()> {
        if let Some(mut e) = self.engine.take() {
            let updates = e.finish();
            self.write(updates)?;
        }
        Ok(())
    }

    fn line(&mut self, v: &Value) -> Result<()> {
        if self.closed {
            return Ok(());
        }
        let r = writeln!(self.out, "{v}").and_then(|()| self.out.flush());
        match r {
            Ok(()) => Ok(()),
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {
                self.closed = true;
                Ok(())
            }
            Err(e) => Err(anyhow!("stdout: {e}")),
        }
    }

    fn write(&mut self, updates: Vec<Update>) -> Result<()> {
        for u in updates {
            let v = match &u {
                Update::Revolution(rev) => {
                    let n = self.orders.len().max(1);
                    let vectors: Vec<Value> = rev
                        .vectors
                        .iter()
                        .enumerate()
                        .map(|(i, v)| {
                            json!({
                                "channel": self.names.get(i / n).map_or("?", |s| s.as_str()),
                                "order": self.orders.get(i % n).copied().unwrap_or(0),
                                "amplitude": r(v.norm(), 4),
                                "phase_deg": r(lag_deg(*v), 2),
                            })
                        })
                        .collect();
                    json!({
                        "type": "revolution",
                        "time_s": r(rev.time_s, 6),
                        "speed_rpm": r(rev.speed_rpm, 3),
                        "state": rev.state.name(),
                        "vectors": vectors,
                    })
                }
                Update::State(c) => json!({
                    "type": "state",
                    "time_s": r(c.time_s, 3),
                    "from": c.from.name(),
                    "to": c.to.name(),
                    "speed_rpm": r(c.speed_rpm, 1),
                }),
                Update::Event(e) => {
                    let mut v = json::event(e);
                    v["type"] = json!("event");
                    v
                }
                Update::TachLost(t) => json!({"type": "tach-lost", "time_s": r(*t, 3)}),
                _ => continue,
            };
            self.line(&v)?;
        }
        Ok(())
    }
}

pub(crate) fn run(a: FilterArgs) -> Result<()> {
    let stdin = std::io::stdin().lock();
    match a.format.as_str() {
        "csv" => csv(a, stdin),
        "text" => serial(a, SerialFormat::Text, stdin),
        "frames" => serial(a, SerialFormat::Frames, stdin),
        other => bail!("--format {other}: use csv, text or frames"),
    }
}

fn sink(a: &FilterArgs, names: Vec<String>) -> Result<Sink> {
    let cfg = engine_config(&a.track, &names)?;
    Ok(Sink {
        orders: cfg.vectors.orders.clone(),
        cfg,
        engine: None,
        revolutions: !a.no_revolutions,
        names,
        out: std::io::stdout().lock(),
        closed: false,
    })
}

/// Finds a column by exact name, or by 0-based index among the channels (the time column not
/// counted), as `veer analyze` does.
fn resolve(names: &[String], col: &str) -> Result<usize> {
    let want = col.trim();
    if let Some(i) = names.iter().position(|n| n == want) {
        return Ok(i);
    }
    match want.parse::<usize>() {
        Ok(i) if i < names.len() => Ok(i),
        _ => bail!("no column `{want}` (columns: {})", names.join(", ")),
    }
}

/// The CSV stream's layout: which field is time, and the tach and sensors among the rest.
struct CsvLayout {
    time: Option<usize>,
    /// Field index of the tach, then of each sensor.
    picks: Vec<usize>,
    fields: usize,
}

fn csv<R: BufRead>(a: FilterArgs, mut input: R) -> Result<()> {
    let mut header = String::new();
    input.read_line(&mut header).context("stdin")?;
    let fields: Vec<String> = header
        .trim()
        .split(',')
        .map(|s| s.trim().to_string())
        .collect();
    if header.trim().is_empty() {
        bail!("stdin: no header row");
    }
    let time = fields
        .iter()
        .position(|f| ["time", "t", "time_s"].contains(&f.to_ascii_lowercase().as_str()));
    let channels: Vec<usize> = (0..fields.len()).filter(|&i| Some(i) != time).collect();
    let channel_names: Vec<String> = channels.iter().map(|&i| fields[i].clone()).collect();
    let mut picks = vec![channels[resolve(&channel_names, &a.tach)?]];
    for v in &a.vib {
        picks.push(channels[resolve(&channel_names, v)?]);
    }
    let names: Vec<String> = picks[1..].iter().map(|&i| fields[i].clone()).collect();
    let layout = CsvLayout {
        time,
        picks,
        fields: fields.len(),
    };
    if a.rate.is_none() && time.is_none() {
        bail!("stdin: no time column (time, t or time_s): give --rate");
    }
    let mut sink = sink(&a, names)?;
    let mut cols: Vec<Vec<f32>> = vec![Vec::new(); layout.picks.len()];
    let mut times: Vec<f64> = Vec::new();
    let mut line_no = 1u64;
    let mut pending: Vec<u8> = Vec::new();
    loop {
        // Whatever one read returns, so that results leave while the input is still streaming.
        let chunk = input.fill_buf().context("stdin")?;
        let eof = chunk.is_empty();
        pending.extend_from_slice(chunk);
        let n = chunk.len();
        input.consume(n);
        if eof && !pending.is_empty() && pending.last() != Some(&b'\n') {
            pending.push(b'\n');
        }
        let complete = pending
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |i| i + 1);
        for line in pending[..complete].split(|&b| b == b'\n') {
            if line.is_empty() || line.iter().all(u8::is_ascii_whitespace) {
                continue;
            }
            line_no += 1;
            parse_row(line, &layout, line_no, &mut cols, &mut times)?;
        }
        pending.drain(..complete);
        if sink.engine.is_none() && (a.rate.is_some() || times.len() >= RATE_ROWS || eof) {
            if cols[0].is_empty() {
                if eof {
                    break;
                }
                continue;
            }
            let rate = match a.rate {
                Some(r) => r,
                None => measured_rate(&times)?,
            };
            sink.start(rate, times.first().copied().unwrap_or(0.0))?;
        }
        if sink.engine.is_some() && !cols[0].is_empty() {
            let vib: Vec<&[f32]> = cols[1..].iter().map(|c| c.as_slice()).collect();
            sink.push(&cols[0], &vib)?;
            for c in &mut cols {
                c.clear();
            }
        }
        if eof {
            break;
        }
    }
    sink.finish()
}

fn parse_row(
    line: &[u8],
    layout: &CsvLayout,
    line_no: u64,
    cols: &mut [Vec<f32>],
    times: &mut Vec<f64>,
) -> Result<()> {
    let text = std::str::from_utf8(line).map_err(|_| anyhow!("stdin line {line_no}: not UTF-8"))?;
    let fields: Vec<&str> = text.trim_end_matches('\r').split(',').collect();
    if fields.len() != layout.fields {
        bail!(
            "stdin line {line_no}: {} fields, the header has {}",
            fields.len(),
            layout.fields
        );
    }
    for (c, &i) in layout.picks.iter().enumerate() {
        let v: f32 = fields[i].trim().parse().map_err(|_| {
            anyhow!(
                "stdin line {line_no}: `{}` is not a number",
                fields[i].trim()
            )
        })?;
        cols[c].push(v);
    }
    // The first rows' times give the rate; later times are not needed.
    if let Some(t) = layout.time {
        if times.len() < RATE_ROWS {
            let v: f64 = fields[t].trim().parse().map_err(|_| {
                anyhow!(
                    "stdin line {line_no}: time `{}` is not a number",
                    fields[t].trim()
                )
            })?;
            times.push(v);
        }
    }
    Ok(())
}

/// Sample rate from the first rows' times: the mean step, taken as the nearest whole number of
/// hertz when it is within a part in 10⁴ of it (loggers run at whole-hertz rates, and times printed
/// to a few decimals cannot tell better).
fn measured_rate(times: &[f64]) -> Result<f64> {
    let (Some(&first), Some(&last)) = (times.first(), times.last()) else {
        bail!("stdin: no rows to measure the rate from");
    };
    if times.len() < 2 || !(last > first) {
        bail!("stdin: the time column does not increase; give --rate");
    }
    let rate = (times.len() - 1) as f64 / (last - first);
    let whole = rate.round();
    Ok(if whole > 0.0 && (rate - whole).abs() <= 1e-4 * rate {
        whole
    } else {
        rate
    })
}

fn serial<R: BufRead>(a: FilterArgs, format: SerialFormat, mut input: R) -> Result<()> {
    let rate = a
        .rate
        .ok_or_else(|| anyhow!("--rate is needed for a serial stream"))?;
    if a.channels.is_empty() {
        bail!("--channels is needed for a serial stream: the names in the order the logger sends them");
    }
    let mut picks = vec![resolve(&a.channels, &a.tach)?];
    for v in &a.vib {
        picks.push(resolve(&a.channels, v)?);
    }
    let names = picks[1..].iter().map(|&i| a.channels[i].clone()).collect();
    let mut sink = sink(&a, names)?;
    let mut decoder = Decoder::new(
        format,
        StreamLayout {
            sample_rate: rate,
            channels: a.channels.clone(),
        },
    );
    let mut events = Vec::new();
    // Where the next block must start for the engine in progress to continue.
    let mut next_frame: Option<u64> = None;
    loop {
        let chunk = input.fill_buf().context("stdin")?;
        if chunk.is_empty() {
            break;
        }
        let now = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0.0, |d| d.as_secs_f64());
        decoder.push(chunk, now, &mut events);
        let n = chunk.len();
        input.consume(n);
        for ev in events.drain(..) {
            match ev {
                StreamEvent::Block(b) => {
                    if next_frame != Some(b.first_frame) {
                        // A break in the frame count: the engine cannot bridge it.
                        sink.finish()?;
                        sink.start(b.sample_rate, b.first_frame as f64 / b.sample_rate)?;
                    }
                    let frames = b.channels.first().map_or(0, Vec::len) as u64;
                    next_frame = Some(b.first_frame + frames);
                    let vib: Vec<&[f32]> = picks[1..]
                        .iter()
                        .map(|&i| b.channels[i].as_slice())
                        .collect();
                    sink.push(&b.channels[picks[0]], &vib)?;
                }
                StreamEvent::Gap(g) => {
                    sink.line(&json!({
                        "type": "gap",
                        "first_frame": g.first_frame,
                        "frames": g.frames,
                        "reason": g.reason,
                    }))?;
                }
                _ => {}
            }
        }
    }
    sink.finish()
}
