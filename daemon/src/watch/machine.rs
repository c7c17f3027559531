//! One machine's worker: its own thread, its engine, its alert rules.
//!
//! Files and stream events arrive on a bounded channel; the worker runs them through a
//! [`Runner`], stores the results through the writer, and feeds the machine's alert engine. A file
//! that cannot be read is recorded with its error and moved aside; a stream gap ends the engine's
//! run and a new one starts where data resumes. Nothing here can stop the daemon: every failure is
//! logged with the machine and the input, and the worker goes on with the next job.

use super::writer::{EstimateRecord, FileResult, Record, WriterTx};
use crate::alerts::{AlertChange, AlertEngine, EstimateInput, HealthProblem, KnownCritical};
use crate::config::model::{DaemonSettings, Machine, Source};
use crate::decode::Recording;
use crate::ingest::convert::EventRecord;
use crate::ingest::health::Condition;
use crate::ingest::models::TrackedModel;
use crate::ingest::runner::{Observation, Runner};
use crate::ingest::targets::{design_for, design_tracks, Target};
use crate::ingest::types::StreamEvent;
use crate::timefmt;
use anyhow::{anyhow, Context, Result};
use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::{Path, PathBuf};
use tokio::sync::{mpsc, oneshot};
use veer_storage::{GapRow, HealthRow, IngestKind, NewIngest, TrendRow};

/// Work for a machine.
#[derive(Debug)]
pub(crate) enum Job {
    /// A complete capture file.
    File(PathBuf),
    /// Something from the machine's serial stream.
    Stream(StreamEvent),
}

/// Frames per block read from a file.
const BLOCK: usize = 65_536;

/// The machine's worker state.
pub(crate) struct Worker {
    machine: Machine,
    daemon: DaemonSettings,
    writer: WriterTx,
    alerts_out: mpsc::Sender<(String, AlertChange)>,
    alerts: AlertEngine,
    /// The criticals the rules judge against: design values, then as measured.
    known: Vec<KnownCritical>,
    /// Alerts left open by the previous run (kind, key, severity), not notified again when found.
    carried_over: Vec<(String, String, veer_storage::Severity)>,
    /// The measured criticals estimated at steady speed, with their models: the latest per
    /// channel and mode.
    models: Vec<TrackedModel>,
    stream: Option<StreamRun>,
}

/// A stream segment in progress: its runner, where it continues, and its ingest record.
struct StreamRun {
    runner: Runner,
    next_frame: u64,
    ingest_id: Option<i64>,
    first_s: f64,
    tach: usize,
    vib: Vec<usize>,
}

/// What the worker collected from a run, to store.
#[derive(Default)]
struct Collected {
    events: Vec<EventRecord>,
    trend: Vec<TrendRow>,
    health: Vec<HealthRow>,
    estimates: Vec<EstimateRecord>,
}

fn known_criticals(m: &Machine) -> Vec<KnownCritical> {
    m.criticals
        .iter()
        .enumerate()
        .map(|(i, c)| KnownCritical {
            key: format!("{}-{}", c.origin.name(), i + 1),
            rpm: c.rpm,
            af: c.af,
            origin: c.origin.name().to_string(),
            baseline_rpm: None,
        })
        .collect()
}

/// A stored severity as the rules name it.
fn severity_of(s: veer_storage::Severity) -> crate::config::model::Severity {
    match s {
        veer_storage::Severity::Warning => crate::config::model::Severity::Warning,
        veer_storage::Severity::Alarm => crate::config::model::Severity::Alarm,
    }
}

fn condition_problem(c: Condition) -> HealthProblem {
    match c {
        Condition::TachLost => HealthProblem::TachLost,
        Condition::FlatLine => HealthProblem::FlatLine,
        Condition::Clipping => HealthProblem::Clipping,
        Condition::NotFinite => HealthProblem::NotFinite,
    }
}

/// SHA-256 of a file's content, read in large chunks.
pub(crate) fn content_hash(path: &Path) -> std::io::Result<(String, u64)> {
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut n = 0u64;
    loop {
        let k = f.read(&mut buf)?;
        if k == 0 {
            break;
        }
        n += k as u64;
        h.update(&buf[..k]);
    }
    let digest = h.finalize();
    Ok((digest.iter().map(|b| format!("{b:02x}")).collect(), n))
}

/// When a file's first frame was taken, unix seconds. In order: a CSV `time` column holding unix
/// time (values after 2001, i.e. above 1e9 s); a `YYYYMMDDTHHMMSS` UTC timestamp in the file
/// name; the file's modification time less the recording's length.
pub(crate) fn file_start_time(path: &Path, rec: &Recording) -> f64 {
    let t = rec.start_time_s();
    if t > 1e9 {
        return t;
    }
    if let Some(t) = path
        .file_name()
        .and_then(|n| n.to_str())
        .and_then(timefmt::from_file_name)
    {
        return t;
    }
    let mtime = std::fs::metadata(path)
        .and_then(|m| m.modified())
        .ok()
        .and_then(|m| m.duration_since(std::time::UNIX_EPOCH).ok())
        .map_or_else(timefmt::now, |d| d.as_secs_f64());
    let length = rec
        .frames_hint()
        .map_or(0.0, |n| n as f64 / rec.sample_rate());
    mtime - length
}

impl Worker {
    pub(crate) fn new(
        machine: Machine,
        daemon: DaemonSettings,
        writer: WriterTx,
        alerts_out: mpsc::Sender<(String, AlertChange)>,
    ) -> Self {
        let range = machine.operating_range();
        let sensors: Vec<(String, Option<f64>, Option<f64>)> = machine
            .sensors
            .iter()
            .map(|s| (s.channel.clone(), s.warning_1x, s.alarm_1x))
            .collect();
        let known = known_criticals(&machine);
        let mut alerts =
            AlertEngine::new(&machine.id, &machine.alerts, range, &sensors, known.clone());
        if machine.alerts.estimate_critical {
            for d in design_tracks(&machine) {
                let t = Target::Design(d);
                alerts.track_critical(&t.key(), t.critical_factor(), t.af(), false);
            }
        }
        Self {
            machine,
            daemon,
            writer,
            alerts_out,
            alerts,
            known,
            carried_over: Vec::new(),
            models: Vec::new(),
            stream: None,
        }
    }

    /// Puts `m` in force for its track (replacing the older model of its mode) and starts its
    /// estimate rule (`refit`: a new event fitted it, rather than a restart reloading it); the
    /// configured critical it stands for stops being estimated by the slope.
    fn adopt_model(&mut self, m: &TrackedModel, refit: bool) {
        self.models.retain(|k| k.track != m.track);
        self.models.push(m.clone());
        let designs = design_tracks(&self.machine);
        if let Some(d) = design_for(&designs, m) {
            let key = Target::Design(d.clone()).key();
            self.alerts.untrack_critical(&key, &m.key());
        }
        self.alerts
            .track_critical(&m.key(), m.critical_factor(), m.af, refit);
    }

    /// After a restart the live estimates resume from the models stored with the measured
    /// criticals, the latest per channel and mode.
    fn load_models(&mut self) {
        if !self.machine.alerts.estimate_critical {
            return;
        }
        let (tx, rx) = oneshot::channel();
        if self
            .writer
            .send(Record::Models {
                machine: self.machine.id.clone(),
                reply: tx,
            })
            .is_err()
        {
            return;
        }
        for m in rx.blocking_recv().unwrap_or_default() {
            self.adopt_model(&m, false);
        }
    }

    /// Runs jobs until the channel closes.
    pub(crate) fn run(mut self, mut jobs: mpsc::Receiver<Job>) {
        self.load_carried_over();
        self.load_measured();
        self.load_models();
        // An estimate alert left open for a critical nothing estimates any more is closed.
        let ch = self.alerts.clear_untracked();
        self.alert_changes(ch);
        while let Some(job) = jobs.blocking_recv() {
            match job {
                Job::File(path) => {
                    if let Err(e) = self.file(&path) {
                        tracing::error!(machine = %self.machine.id, file = %path.display(), error = %format!("{e:#}"), "file not ingested");
                    }
                }
                Job::Stream(ev) => self.stream_event(ev),
            }
        }
        self.end_stream(None);
        let (tx, rx) = oneshot::channel();
        if self.writer.send(Record::Flush(tx)).is_ok() {
            let _ = rx.blocking_recv();
        }
    }

    /// After a restart the rules start from the criticals as last measured, not the design values:
    /// the measured ones stored by earlier runs update the known criticals as a new event would.
    fn load_measured(&mut self) {
        let (tx, rx) = oneshot::channel();
        if self
            .writer
            .send(Record::Criticals {
                machine: self.machine.id.clone(),
                reply: tx,
            })
            .is_err()
        {
            return;
        }
        let found: Vec<(String, f64, Option<f64>)> = rx
            .blocking_recv()
            .unwrap_or_default()
            .into_iter()
            .filter(|c| c.3)
            .map(|(ch, rpm, af, _)| (ch.unwrap_or_default(), rpm, af))
            .collect();
        self.follow_measured(&found);
    }

    /// Asks the writer which of the machine's alerts a previous run left open, so that the same
    /// condition found again after a restart does not notify the outputs a second time.
    fn load_carried_over(&mut self) {
        let (tx, rx) = oneshot::channel();
        if self
            .writer
            .send(Record::OpenAlerts {
                machine: self.machine.id.clone(),
                reply: tx,
            })
            .is_ok()
        {
            for (kind, key, severity, opened_at) in rx.blocking_recv().unwrap_or_default() {
                // The estimate rules take their open alerts back, so that they can clear them;
                // the other rules meet theirs again in the data.
                if self
                    .alerts
                    .restore(&kind, &key, severity_of(severity), opened_at)
                {
                    continue;
                }
                self.carried_over.push((kind, key, severity));
            }
        }
    }

    fn alert_changes(&mut self, changes: Vec<AlertChange>) {
        for c in changes {
            if let AlertChange::Raised(a) = &c {
                let was_open = self.carried_over.iter().position(|(kind, key, sev)| {
                    kind == a.kind.name()
                        && *key == a.key
                        && *sev == super::writer::severity(a.severity)
                });
                if let Some(i) = was_open {
                    // Already open and already notified by the run before the restart.
                    self.carried_over.swap_remove(i);
                    continue;
                }
            }
            let (id, record) = super::alert_record(&c);
            let _ = self.writer.send(match record {
                Some(row) => Record::AlertOpen { id, row },
                None => Record::AlertClose {
                    id,
                    time: c.alert().time_s,
                },
            });
            if self
                .alerts_out
                .blocking_send((self.machine.id.clone(), c))
                .is_err()
            {
                tracing::warn!(machine = %self.machine.id, "alert outputs have stopped");
            }
        }
    }

    /// Feeds the alert engine and collects what is to be stored.
    fn observe(&mut self, obs: Vec<Observation>, into: &mut Collected) {
        for o in obs {
            match o {
                Observation::Speed { time_s, rpm, state } => {
                    let ch = self.alerts.on_speed(time_s, rpm, state);
                    self.alert_changes(ch);
                }
                Observation::Level {
                    time_s,
                    channel,
                    amplitude,
                    rpm,
                    state,
                } => {
                    let ch = self
                        .alerts
                        .on_level(time_s, &channel, amplitude, rpm, state);
                    self.alert_changes(ch);
                }
                Observation::Event(rec) => {
                    let found: Vec<(String, f64, Option<f64>)> = rec
                        .criticals
                        .iter()
                        .map(|c| {
                            (
                                c.channel.clone().unwrap_or_default(),
                                c.speed_rpm,
                                c.amplification_factor,
                            )
                        })
                        .collect();
                    let ch = self.alerts.on_event_criticals(rec.event.end_time, &found);
                    self.alert_changes(ch);
                    self.follow_measured(&found);
                    if self.machine.alerts.estimate_critical {
                        for m in &rec.models {
                            self.adopt_model(m, true);
                        }
                    }
                    into.events.push(*rec);
                }
                Observation::Estimate { target, estimate } => {
                    let key = target.key();
                    let ch = self.alerts.on_estimate(&EstimateInput {
                        key: &key,
                        channel: target.channel(),
                        known_rpm: target.critical_rpm(),
                        configured: matches!(*target, Target::Design(_)),
                        af: target.af(),
                        estimate: &estimate,
                        expected: target.expected(estimate.rpm),
                    });
                    self.alert_changes(ch);
                    into.estimates
                        .push(EstimateRecord::new(&self.machine.id, &target, &estimate));
                }
                Observation::Trend(rows) => into.trend.extend(rows),
                Observation::Health {
                    time_s,
                    channel,
                    condition,
                } => {
                    tracing::info!(machine = %self.machine.id, channel, condition = condition.map_or("healthy", |c| c.name()), "sensor health");
                    into.health.push(HealthRow {
                        machine: self.machine.id.clone(),
                        channel: Some(channel.clone()),
                        time: time_s,
                        condition: condition.map_or("healthy", |c| c.name()).to_string(),
                        healthy: condition.is_none(),
                        detail: None,
                    });
                    let ch =
                        self.alerts
                            .on_health(time_s, &channel, condition.map(condition_problem));
                    self.alert_changes(ch);
                }
                Observation::State { time_s, from, to } => {
                    tracing::debug!(machine = %self.machine.id, at = time_s, from = from.name(), to = to.name(), "machine state");
                }
            }
        }
    }

    /// After an event, the margin and drift rules judge the running speed against the criticals as
    /// measured: each known critical within ±25 % of a found one takes the found speed (averaged over
    /// the channels that saw it) and AF, keeping its key so its alerts carry on, with the previous
    /// speed kept as the baseline for the shift rule.
    fn follow_measured(&mut self, found: &[(String, f64, Option<f64>)]) {
        if found.is_empty() {
            return;
        }
        let mut list = self.known.clone();
        for k in &mut list {
            let near: Vec<&(String, f64, Option<f64>)> = found
                .iter()
                .filter(|(_, rpm, _)| (rpm / k.rpm - 1.0).abs() <= 0.25)
                .collect();
            if near.is_empty() {
                continue;
            }
            let n = near.len() as f64;
            let rpm = near.iter().map(|f| f.1).sum::<f64>() / n;
            let afs: Vec<f64> = near.iter().filter_map(|f| f.2).collect();
            k.baseline_rpm = Some(k.baseline_rpm.unwrap_or(k.rpm));
            k.rpm = rpm;
            k.af = if afs.is_empty() {
                k.af
            } else {
                Some(afs.iter().sum::<f64>() / afs.len() as f64)
            };
            k.origin = "measured".to_string();
        }
        self.known = list.clone();
        self.alerts.set_criticals(list);
    }

    /// Resolves the tach and sensor channels among a source's channel names. A file whose channels
    /// have no names (WAV: `0`, `1`, ...) holding exactly the tach and the sensors is read in the
    /// configured order: the tach first, then the sensors as listed.
    fn channel_indices(&self, names: &[String]) -> Result<(usize, Vec<usize>)> {
        let unnamed = names.iter().enumerate().all(|(i, n)| *n == i.to_string());
        let wanted: Vec<&str> = std::iter::once(self.machine.tach.channel.as_str())
            .chain(self.machine.sensors.iter().map(|s| s.channel.as_str()))
            .collect();
        if unnamed
            && names.len() == wanted.len()
            && !wanted.iter().all(|w| names.iter().any(|n| n == w))
        {
            return Ok((0, (1..names.len()).collect()));
        }
        let find = |want: &str| {
            names
                .iter()
                .position(|n| n == want)
                .ok_or_else(|| anyhow!("channel `{want}` not found (has: {})", names.join(", ")))
        };
        let tach = find(&self.machine.tach.channel)?;
        let vib = self
            .machine
            .sensors
            .iter()
            .map(|s| find(&s.channel))
            .collect::<Result<Vec<_>>>()?;
        Ok((tach, vib))
    }

    fn file(&mut self, path: &Path) -> Result<()> {
        if !path.exists() {
            return Ok(());
        }
        let (hash, bytes) = content_hash(path).with_context(|| path.display().to_string())?;
        let (tx, rx) = oneshot::channel();
        self.writer
            .send(Record::Seen {
                hash: hash.clone(),
                reply: tx,
            })
            .map_err(|_| anyhow!("the storage writer has stopped"))?;
        if rx.blocking_recv().unwrap_or(false) {
            tracing::info!(machine = %self.machine.id, file = %path.display(), "already ingested (same content); skipped");
            return Ok(());
        }
        let ingest = NewIngest {
            machine: Some(self.machine.id.clone()),
            kind: IngestKind::File,
            source: path.display().to_string(),
            content_hash: hash,
            bytes: Some(bytes),
            started_at: timefmt::now(),
        };
        match self.analyze_file(path) {
            Ok((collected, span)) => {
                let events = collected.events.len();
                let _ = self.writer.send(Record::File(Box::new(FileResult {
                    ingest,
                    events: collected.events,
                    trend: collected.trend,
                    health: collected.health,
                    estimates: collected.estimates,
                    data_span: span,
                    finished_at: timefmt::now(),
                })));
                tracing::info!(machine = %self.machine.id, file = %path.display(), events, "file ingested");
                Ok(())
            }
            Err(e) => {
                let error = format!("{e:#}");
                let _ = self.writer.send(Record::FileFailed {
                    ingest,
                    error: error.clone(),
                    finished_at: timefmt::now(),
                });
                self.set_aside(path);
                Err(e)
            }
        }
    }

    fn analyze_file(&mut self, path: &Path) -> Result<(Collected, Option<(f64, f64)>)> {
        let rate = match &self.machine.source {
            Source::Folder(f) => f.sample_rate,
            Source::Serial(_) => None,
        };
        let mut rec = Recording::open(path, rate)?;
        let names: Vec<String> = (0..rec.channel_names().len())
            .map(|i| rec.channel_names()[i].clone())
            .collect();
        let (tach, vib) = self
            .channel_indices(&names)
            .with_context(|| path.display().to_string())?;
        let t0 = file_start_time(path, &rec);
        let mut runner = Runner::new(
            &self.machine,
            rec.sample_rate(),
            t0,
            self.daemon.trend_interval_s,
            &self.models,
        )?;
        let mut cols = vec![tach];
        cols.extend(&vib);
        let mut out: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK); cols.len()];
        let mut collected = Collected::default();
        let mut obs = Vec::new();
        loop {
            let n = rec.read_frames(&cols, &mut out, BLOCK)?;
            if n == 0 {
                break;
            }
            let views: Vec<&[f32]> = out[1..].iter().map(|c| c.as_slice()).collect();
            runner.push(&out[0], &views, &mut obs)?;
            self.observe(std::mem::take(&mut obs), &mut collected);
        }
        runner.finish(&mut obs);
        self.observe(obs, &mut collected);
        Ok((collected, Some((t0, runner.last_time()))))
    }

    /// Moves a file that could not be read into the failed folder, so it is neither lost nor retried.
    fn set_aside(&self, path: &Path) {
        let Source::Folder(f) = &self.machine.source else {
            return;
        };
        let Some(name) = path.file_name() else { return };
        if let Err(e) = std::fs::create_dir_all(&f.failed_dir)
            .and_then(|()| std::fs::rename(path, f.failed_dir.join(name)))
        {
            tracing::error!(machine = %self.machine.id, file = %path.display(), error = %e, "cannot move the file aside");
        }
    }

    fn stream_event(&mut self, ev: StreamEvent) {
        match ev {
            StreamEvent::Connected { port } => {
                tracing::info!(machine = %self.machine.id, port, "serial port open");
            }
            StreamEvent::Disconnected {
                port,
                error,
                retry_in_s,
            } => {
                tracing::warn!(machine = %self.machine.id, port, error, retry_in_s, "serial port lost; retrying");
            }
            StreamEvent::Gap(g) => {
                tracing::warn!(machine = %self.machine.id, frames = g.frames, corrupt = g.corrupt, reason = %g.reason, "stream gap");
                let ingest_id = self.stream.as_ref().and_then(|s| s.ingest_id);
                let source = match &self.machine.source {
                    Source::Serial(s) => s.port.clone(),
                    Source::Folder(f) => f.path.display().to_string(),
                };
                let _ = self.writer.send(Record::Gap(GapRow {
                    machine: self.machine.id.clone(),
                    ingest_id,
                    source,
                    start_time: g.start_unix_s,
                    end_time: g.end_unix_s,
                    dropped_frames: g.frames,
                    corrupt_frames: g.corrupt,
                }));
                let ch = self.alerts.on_health(
                    g.start_unix_s,
                    "stream",
                    Some(HealthProblem::Gap { frames: g.frames }),
                );
                self.alert_changes(ch);
                self.end_stream(None);
            }
            StreamEvent::Block(b) => {
                if let Err(e) = self.stream_block(b) {
                    tracing::error!(machine = %self.machine.id, error = %format!("{e:#}"), "stream block not processed");
                    self.end_stream(Some(format!("{e:#}")));
                }
            }
        }
    }

    fn stream_block(&mut self, b: crate::ingest::types::SampleBlock) -> Result<()> {
        let continues = self
            .stream
            .as_ref()
            .is_some_and(|s| s.next_frame == b.first_frame);
        if !continues {
            self.end_stream(None);
            let names = match &self.machine.source {
                Source::Serial(s) => s.channels.clone(),
                Source::Folder(_) => return Err(anyhow!("a stream block for a folder machine")),
            };
            let (tach, vib) = self.channel_indices(&names)?;
            let runner = Runner::new(
                &self.machine,
                b.sample_rate,
                b.start_unix_s,
                self.daemon.trend_interval_s,
                &self.models,
            )?;
            let (tx, rx) = oneshot::channel();
            let port = match &self.machine.source {
                Source::Serial(s) => s.port.clone(),
                Source::Folder(_) => String::new(),
            };
            let _ = self.writer.send(Record::SegmentStart {
                ingest: NewIngest {
                    machine: Some(self.machine.id.clone()),
                    kind: IngestKind::Stream,
                    source: format!("{port} from frame {}", b.first_frame),
                    content_hash: format!("stream:{}:{}:{}", self.machine.id, port, b.start_unix_s),
                    bytes: None,
                    started_at: timefmt::now(),
                },
                reply: tx,
            });
            let ingest_id = rx.blocking_recv().ok().flatten();
            self.stream = Some(StreamRun {
                runner,
                next_frame: b.first_frame,
                ingest_id,
                first_s: b.start_unix_s,
                tach,
                vib,
            });
        }
        let Some(run) = self.stream.as_mut() else {
            return Ok(());
        };
        let frames = b.channels.first().map_or(0, |c| c.len()) as u64;
        let views: Vec<&[f32]> = run.vib.iter().map(|&i| b.channels[i].as_slice()).collect();
        let mut obs = Vec::new();
        run.runner.push(&b.channels[run.tach], &views, &mut obs)?;
        run.next_frame = b.first_frame + frames;
        let ingest_id = run.ingest_id;
        let mut collected = Collected::default();
        self.observe(obs, &mut collected);
        self.store_collected(ingest_id, collected);
        Ok(())
    }

    fn store_collected(&self, ingest_id: Option<i64>, c: Collected) {
        if !c.events.is_empty() {
            let _ = self.writer.send(Record::Events {
                ingest_id,
                events: c.events,
            });
        }
        if !c.trend.is_empty() {
            let _ = self.writer.send(Record::Trend(c.trend));
        }
        for h in c.health {
            let _ = self.writer.send(Record::Health(h));
        }
        if !c.estimates.is_empty() {
            let _ = self.writer.send(Record::Estimates(c.estimates));
        }
    }

    /// Closes the stream segment in progress, if any: its open sweep is analysed and stored.
    fn end_stream(&mut self, error: Option<String>) {
        let Some(mut run) = self.stream.take() else {
            return;
        };
        let mut obs = Vec::new();
        run.runner.finish(&mut obs);
        let mut collected = Collected::default();
        self.observe(obs, &mut collected);
        self.store_collected(run.ingest_id, collected);
        if let Some(id) = run.ingest_id {
            let _ = self.writer.send(Record::SegmentEnd {
                id,
                span: Some((run.first_s, run.runner.last_time())),
                error,
                finished_at: timefmt::now(),
            });
        }
    }
}
