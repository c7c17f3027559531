//! The single storage writer: one thread owns the database connection and applies records in
//! transactions, fed by a bounded channel so that a slow disk pushes back on the engines.
//!
//! A file's whole result (its ingest record marked done, its events with their vectors, order maps,
//! resonances and measured criticals, its trend rows and health changes) is one transaction. After a
//! crash an input is therefore either wholly stored and marked done, or not stored at all and
//! processed again when the daemon restarts: never half, never twice.

use crate::ingest::convert::EventRecord;
use crate::ingest::models::TrackedModel;
use crate::ingest::targets::Target;
use anyhow::{Context, Result};
use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::mpsc::{Receiver, RecvTimeoutError, SyncSender};
use std::time::Duration;
use tokio::sync::oneshot;
use veer_storage::{
    AlertRow, CriticalOrigin, EstimateRow, GapRow, HealthRow, IngestStatus, MachineRow, NewIngest,
    SensorRow, Severity, Store, TrendRow, Tx,
};
use veer_tracker::drift::Estimate;

/// Identifies an open alert: machine, kind and what it is about.
pub(crate) type AlertId = (String, String, String);

/// A file's complete result.
#[derive(Debug)]
pub(crate) struct FileResult {
    pub ingest: NewIngest,
    pub events: Vec<EventRecord>,
    pub trend: Vec<TrendRow>,
    pub health: Vec<HealthRow>,
    pub estimates: Vec<EstimateRecord>,
    pub data_span: Option<(f64, f64)>,
    pub finished_at: f64,
}

/// Which critical row an estimate belongs to.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum CriticalRef {
    /// The measured critical found on `channel` as `mode` by the event ending at `valid_from`.
    Measured {
        channel: String,
        mode: u32,
        valid_from: f64,
    },
    /// The configured critical numbered `mode`, as now in force.
    Design { mode: u32 },
}

/// A live estimate with what names its critical row (the writer stores events before the
/// estimates they feed, so the row is there to be found).
#[derive(Clone, Debug)]
pub(crate) struct EstimateRecord {
    pub machine: String,
    pub critical: CriticalRef,
    /// The row, its `critical_id` filled in by the writer.
    pub row: EstimateRow,
}

impl EstimateRecord {
    /// The row of one window's estimate of `target` on `machine`: the natural speed turned into
    /// the critical speed as the critical table holds it.
    pub(crate) fn new(machine: &str, target: &Target, e: &Estimate) -> Self {
        let factor = target.critical_factor();
        let finite = |v: f64| v.is_finite().then_some(v);
        let critical = match target {
            Target::Model(m) => CriticalRef::Measured {
                channel: m.channel.clone(),
                mode: m.mode,
                valid_from: m.valid_from,
            },
            Target::Design(d) => CriticalRef::Design { mode: d.mode },
        };
        let estimate_rpm = e.natural_rpm * factor;
        let by_model = matches!(target, Target::Model(_));
        Self {
            machine: machine.to_string(),
            critical,
            row: EstimateRow {
                critical_id: 0,
                time: e.time_s,
                // A slope with no solution leaves no number: the row keeps the configured value,
                // marked not informative.
                estimate_rpm: if estimate_rpm.is_finite() {
                    estimate_rpm
                } else {
                    target.critical_rpm()
                },
                uncertainty_rpm: finite(e.sigma_rpm * factor),
                informative: e.informative && estimate_rpm.is_finite(),
                channel: Some(target.channel().to_string()),
                speed_rpm: finite(e.rpm),
                natural_rpm: finite(e.natural_rpm),
                speed_ratio: finite(e.ratio),
                method: Some(e.method.name().to_string()),
                reason: e.reason.map(|r| r.name().to_string()),
                // The slope measures no vector against a model: it says nothing of the locus.
                change: by_model.then(|| e.change.name().to_string()),
                locus_residual: finite(e.locus_residual).filter(|_| by_model),
                revolutions: Some(e.revolutions as u64),
            },
        }
    }
}

/// What the writer is asked to do.
#[derive(Debug)]
pub(crate) enum Record {
    /// Machines and sensors from the configuration, and design criticals.
    Setup {
        machines: Vec<MachineRow>,
        sensors: Vec<SensorRow>,
        criticals: Vec<veer_storage::CriticalRow>,
    },
    /// Whether a file with this content hash was already ingested.
    Seen {
        hash: String,
        reply: oneshot::Sender<bool>,
    },
    /// A file analysed to the end.
    File(Box<FileResult>),
    /// A file that could not be read.
    FileFailed {
        ingest: NewIngest,
        error: String,
        finished_at: f64,
    },
    /// A stream segment begins; replies with its ingest id.
    SegmentStart {
        ingest: NewIngest,
        reply: oneshot::Sender<Option<i64>>,
    },
    /// A stream segment ends.
    SegmentEnd {
        id: i64,
        span: Option<(f64, f64)>,
        error: Option<String>,
        finished_at: f64,
    },
    /// Events from a stream.
    Events {
        ingest_id: Option<i64>,
        events: Vec<EventRecord>,
    },
    /// Trend points.
    Trend(Vec<TrendRow>),
    /// Live critical-speed estimates from a stream.
    Estimates(Vec<EstimateRecord>),
    /// The models the machine's live estimates resume from after a restart.
    Models {
        machine: String,
        reply: oneshot::Sender<Vec<TrackedModel>>,
    },
    /// A health change.
    Health(HealthRow),
    /// Missing or damaged stream data.
    Gap(GapRow),
    /// An alert raised (or raised again at a new severity, which closes the old row).
    AlertOpen { id: AlertId, row: AlertRow },
    /// An alert cleared.
    AlertClose { id: AlertId, time: f64 },
    /// Replies once everything before it is committed.
    Flush(oneshot::Sender<()>),
    /// The machine's current critical speeds as stored (design and measured): channel, speed, AF.
    Criticals {
        machine: String,
        reply: oneshot::Sender<Vec<StoredCritical>>,
    },
    /// The alerts of a machine still open in the database: kind, key, severity, opened at.
    OpenAlerts {
        machine: String,
        reply: oneshot::Sender<Vec<(String, String, Severity, f64)>>,
    },
}

/// A stored critical as the worker needs it: channel, speed (r/min), AF, and whether measured.
pub(crate) type StoredCritical = (Option<String>, f64, Option<f64>, bool);

/// An alert row still open in the database.
#[derive(Clone, Copy, Debug)]
struct OpenAlert {
    id: i64,
    opened_at: f64,
    severity: Severity,
}

/// The sending side, cloned by every task that stores something.
pub(crate) type WriterTx = SyncSender<Record>;

/// Runs the writer until every sender is dropped. Errors of one record are logged and the writer
/// carries on; only failing to open the database is fatal.
pub(crate) fn run(path: PathBuf, rx: Receiver<Record>, ready: std::sync::mpsc::Sender<Result<()>>) {
    let mut store = match Store::open(&path).with_context(|| format!("{}", path.display())) {
        Ok(s) => {
            let _ = ready.send(Ok(()));
            s
        }
        Err(e) => {
            let _ = ready.send(Err(e));
            return;
        }
    };
    let mut alerts: HashMap<AlertId, OpenAlert> = HashMap::new();
    // Alerts left open by an earlier run stay open; they are matched by machine, kind and key.
    if let Ok(open) = store.open_alerts(None) {
        for a in open {
            let key = alert_key_of(&a.row);
            alerts.insert(
                (a.row.machine.clone(), a.row.kind.clone(), key),
                OpenAlert {
                    id: a.id,
                    opened_at: a.row.opened_at,
                    severity: a.row.severity,
                },
            );
        }
    }
    let mut trend: Vec<TrendRow> = Vec::new();
    loop {
        let msg = match rx.recv_timeout(Duration::from_millis(500)) {
            Ok(m) => Some(m),
            Err(RecvTimeoutError::Timeout) => None,
            Err(RecvTimeoutError::Disconnected) => break,
        };
        match msg {
            Some(Record::Trend(rows)) => {
                trend.extend(rows);
                if trend.len() >= 1000 {
                    flush_trend(&mut store, &mut trend);
                }
            }
            Some(Record::Flush(reply)) => {
                flush_trend(&mut store, &mut trend);
                let _ = reply.send(());
            }
            Some(other) => {
                flush_trend(&mut store, &mut trend);
                if let Err(e) = apply(&mut store, &mut alerts, other) {
                    tracing::error!(error = %format!("{e:#}"), "storage write failed");
                }
            }
            None => flush_trend(&mut store, &mut trend),
        }
    }
    flush_trend(&mut store, &mut trend);
}

/// What an alert is about (a critical, a channel): veer writes it as the `key` field of the
/// alert's evidence, so an alert left open by an earlier run can be found again.
fn alert_key_of(row: &AlertRow) -> String {
    row.evidence
        .as_deref()
        .and_then(|e| serde_json::from_str::<serde_json::Value>(e).ok())
        .and_then(|v| v.get("key").and_then(|k| k.as_str()).map(str::to_string))
        .unwrap_or_default()
}

fn flush_trend(store: &mut Store, rows: &mut Vec<TrendRow>) {
    if rows.is_empty() {
        return;
    }
    let batch = std::mem::take(rows);
    if let Err(e) = store.transaction(|tx| tx.insert_trend(&batch)) {
        tracing::error!(error = %e, rows = batch.len(), "storing trend rows failed");
    }
}

fn store_events(tx: &Tx<'_>, ingest_id: Option<i64>, events: &[EventRecord]) -> Result<()> {
    for rec in events {
        let mut ev = rec.event.clone();
        ev.ingest_id = ingest_id;
        let eid = tx.insert_event(&ev)?;
        for (channel, order, series, points) in &rec.traces {
            tx.insert_vectors(eid, channel, *order, *series, points)?;
        }
        tx.insert_order_map(eid, &rec.order_map)?;
        for r in &rec.resonances {
            tx.insert_resonance(eid, r)?;
        }
        for c in &rec.criticals {
            let mut c = c.clone();
            c.origin = CriticalOrigin::Measured { event_id: eid };
            let cid = tx.add_critical(&c)?;
            let model = rec
                .models
                .iter()
                .find(|m| Some(&m.channel) == c.channel.as_ref() && m.mode == c.mode);
            if let Some(m) = model {
                tx.insert_model(&m.row(cid))?;
            }
        }
    }
    Ok(())
}

/// Stores estimates, each against its critical row; an estimate whose critical is not stored
/// (its event failed to store) is logged and dropped rather than failing the batch.
fn store_estimates(tx: &Tx<'_>, estimates: &[EstimateRecord]) -> Result<()> {
    let mut ids: HashMap<String, Option<i64>> = HashMap::new();
    for e in estimates {
        let k = match &e.critical {
            CriticalRef::Measured {
                channel,
                mode,
                valid_from,
            } => format!("{}|{channel}|{mode}|{}", e.machine, valid_from.to_bits()),
            CriticalRef::Design { mode } => format!("{}|design|{mode}", e.machine),
        };
        let id = match ids.get(&k) {
            Some(id) => *id,
            None => {
                let id = match &e.critical {
                    CriticalRef::Measured {
                        channel,
                        mode,
                        valid_from,
                    } => tx.measured_critical_id(&e.machine, channel, *mode, *valid_from)?,
                    CriticalRef::Design { mode } => tx.design_critical_id(&e.machine, *mode)?,
                };
                ids.insert(k, id);
                id
            }
        };
        let Some(critical_id) = id else {
            tracing::warn!(machine = %e.machine, critical = ?e.critical, "estimate of a critical that is not stored; dropped");
            continue;
        };
        tx.insert_estimate(&EstimateRow {
            critical_id,
            ..e.row.clone()
        })?;
    }
    Ok(())
}

fn apply(store: &mut Store, alerts: &mut HashMap<AlertId, OpenAlert>, msg: Record) -> Result<()> {
    match msg {
        Record::Setup {
            machines,
            sensors,
            criticals,
        } => store.transaction(|tx| -> Result<()> {
            for m in &machines {
                tx.upsert_machine(m)?;
            }
            for s in &sensors {
                tx.upsert_sensor(s)?;
            }
            tx.sync_design_criticals(&criticals)?;
            Ok(())
        })?,
        Record::Seen { hash, reply } => {
            let seen = store
                .ingest_seen(&hash)?
                .is_some_and(|r| r.row.status == IngestStatus::Done);
            let _ = reply.send(seen);
        }
        Record::File(f) => store.transaction(|tx| -> Result<()> {
            let id = tx.begin_ingest(&f.ingest)?;
            store_events(tx, Some(id), &f.events)?;
            tx.insert_trend(&f.trend)?;
            for h in &f.health {
                tx.insert_health(h)?;
            }
            store_estimates(tx, &f.estimates)?;
            if let Some((a, b)) = f.data_span {
                tx.set_ingest_span(id, a, b)?;
            }
            tx.finish_ingest(id, IngestStatus::Done, None, f.finished_at)?;
            Ok(())
        })?,
        Record::FileFailed {
            ingest,
            error,
            finished_at,
        } => store.transaction(|tx| -> Result<()> {
            let id = tx.begin_ingest(&ingest)?;
            tx.finish_ingest(id, IngestStatus::Failed, Some(&error), finished_at)?;
            Ok(())
        })?,
        Record::SegmentStart { ingest, reply } => {
            let id = store.begin_ingest(&ingest).ok();
            let _ = reply.send(id);
        }
        Record::SegmentEnd {
            id,
            span,
            error,
            finished_at,
        } => store.transaction(|tx| -> Result<()> {
            if let Some((a, b)) = span {
                tx.set_ingest_span(id, a, b)?;
            }
            let status = if error.is_some() {
                IngestStatus::Failed
            } else {
                IngestStatus::Done
            };
            tx.finish_ingest(id, status, error.as_deref(), finished_at)?;
            Ok(())
        })?,
        Record::Events { ingest_id, events } => {
            store.transaction(|tx| store_events(tx, ingest_id, &events))?
        }
        Record::Trend(rows) => store.transaction(|tx| tx.insert_trend(&rows))?,
        Record::Estimates(rows) => store.transaction(|tx| store_estimates(tx, &rows))?,
        Record::Models { machine, reply } => {
            let models = store
                .latest_models(&machine)?
                .iter()
                .filter_map(|(c, m)| TrackedModel::from_stored(c, m))
                .collect();
            let _ = reply.send(models);
        }
        Record::Health(h) => {
            store.insert_health(&h)?;
        }
        Record::Gap(g) => {
            store.insert_gap(&g)?;
        }
        Record::AlertOpen { id, row } => {
            if let Some(old) = alerts.get(&id).copied() {
                if old.severity == row.severity {
                    // Raised again with the same severity (after a restart): the open row stands.
                    return Ok(());
                }
                // Data may arrive out of order: never close a row before it opened.
                store.close_alert(old.id, row.opened_at.max(old.opened_at))?;
                alerts.remove(&id);
            }
            let db_id = store.open_alert(&row)?;
            alerts.insert(
                id,
                OpenAlert {
                    id: db_id,
                    opened_at: row.opened_at,
                    severity: row.severity,
                },
            );
        }
        Record::AlertClose { id, time } => {
            if let Some(old) = alerts.remove(&id) {
                store.close_alert(old.id, time.max(old.opened_at))?;
            }
        }
        Record::Criticals { machine, reply } => {
            let rows = store
                .current_criticals(&machine)?
                .into_iter()
                .map(|c| {
                    let measured = matches!(c.origin, CriticalOrigin::Measured { .. });
                    (
                        c.channel.clone(),
                        c.speed_rpm,
                        c.amplification_factor,
                        measured,
                    )
                })
                .collect();
            let _ = reply.send(rows);
        }
        Record::OpenAlerts { machine, reply } => {
            let open = alerts
                .iter()
                .filter(|((m, _, _), _)| *m == machine)
                .map(|((_, kind, key), a)| (kind.clone(), key.clone(), a.severity, a.opened_at))
                .collect();
            let _ = reply.send(open);
        }
        Record::Flush(reply) => {
            let _ = reply.send(());
        }
    }
    Ok(())
}

/// Severity as stored.
pub(crate) fn severity(s: crate::config::model::Severity) -> Severity {
    match s {
        crate::config::model::Severity::Warning => Severity::Warning,
        crate::config::model::Severity::Alarm => Severity::Alarm,
    }
}
