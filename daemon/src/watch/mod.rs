//! `veer watch`: the daemon.
//!
//! The shape: one source task per machine (a watched folder, or a serial port on its own thread),
//! one worker thread per machine running its engine and alert rules, one storage writer thread, and
//! one task delivering alerts to the outputs. They are joined by bounded channels, so a slow stage
//! pushes back toward the sources instead of growing memory. Shutdown (SIGINT, SIGTERM, or the
//! caller's token) stops the sources first; the workers finish the input in hand, the writer commits
//! what it holds, and the function returns.

pub(crate) mod folder;
pub(crate) mod machine;
pub(crate) mod writer;

use crate::alerts::{deliver, AlertChange};
use crate::config::model::{Machine, Source};
use crate::config::Config;
use crate::ingest::types::StreamEvent;
use anyhow::{anyhow, Result};
use machine::{Job, Worker};
use std::collections::HashMap;
use tokio::sync::mpsc;
use tokio_util::sync::CancellationToken;
use veer_storage::{AlertRow, CriticalOrigin, CriticalRow, MachineRow, SensorRow};
use writer::{AlertId, Record};

/// The identity of an alert and, for a raise or an escalation, the row to open.
pub(crate) fn alert_record(c: &AlertChange) -> (AlertId, Option<AlertRow>) {
    let a = c.alert();
    let id = (a.machine.clone(), a.kind.name().to_string(), a.key.clone());
    match c {
        AlertChange::Cleared(_) => (id, None),
        AlertChange::Raised(_) | AlertChange::Escalated(_) => {
            let mut evidence = a.evidence.clone();
            if let Some(obj) = evidence.as_object_mut() {
                obj.insert("key".to_string(), serde_json::json!(a.key));
            }
            (
                id,
                Some(AlertRow {
                    machine: a.machine.clone(),
                    kind: a.kind.name().to_string(),
                    severity: writer::severity(a.severity),
                    opened_at: a.time_s,
                    closed_at: None,
                    message: a.message.clone(),
                    evidence: Some(evidence.to_string()),
                    event_id: None,
                }),
            )
        }
    }
}

fn setup_record(cfg: &Config) -> Record {
    let mut machines = Vec::new();
    let mut sensors = Vec::new();
    let mut criticals = Vec::new();
    for m in &cfg.machines {
        machines.push(MachineRow {
            id: m.id.clone(),
            name: m.name.clone(),
            min_operating_rpm: Some(m.min_operating_rpm),
            max_continuous_rpm: Some(m.max_continuous_rpm),
            trip_rpm: m.trip_rpm,
        });
        for s in &m.sensors {
            sensors.push(SensorRow {
                machine: m.id.clone(),
                channel: s.channel.clone(),
                kind: format!("{:?}", s.kind).to_lowercase(),
                units: s.amplitude.to_string(),
                angle_deg: Some(s.angle_deg),
            });
        }
        for (i, c) in m.criticals.iter().enumerate() {
            criticals.push(CriticalRow {
                machine: m.id.clone(),
                mode: i as u32 + 1,
                origin: CriticalOrigin::Design,
                channel: None,
                speed_rpm: c.rpm,
                amplification_factor: c.af,
                damping_ratio: None,
                valid_from: 0.0,
            });
        }
    }
    Record::Setup {
        machines,
        sensors,
        criticals,
    }
}

/// Delivers alert changes to each machine's outputs, in order, off the workers' threads.
async fn deliver_alerts(
    mut rx: mpsc::Receiver<(String, AlertChange)>,
    outputs: HashMap<String, Vec<crate::config::model::Output>>,
) {
    while let Some((machine, change)) = rx.recv().await {
        let Some(outs) = outputs.get(&machine) else {
            continue;
        };
        for e in deliver(&change, outs).await {
            tracing::error!(machine, error = %e, "alert output failed");
        }
    }
}

/// Runs the daemon until `shutdown` is cancelled.
pub(crate) async fn run(cfg: Config, shutdown: CancellationToken) -> Result<()> {
    if let Some(dir) = cfg.database.parent() {
        if !dir.as_os_str().is_empty() {
            std::fs::create_dir_all(dir).map_err(|e| anyhow!("{}: {e}", dir.display()))?;
        }
    }
    let queues = cfg.daemon.queues;
    let (wtx, wrx) = std::sync::mpsc::sync_channel::<Record>(queues.records);
    let (ready_tx, ready_rx) = std::sync::mpsc::channel();
    let db = cfg.database.clone();
    let writer = std::thread::Builder::new()
        .name("veer-writer".into())
        .spawn(move || writer::run(db, wrx, ready_tx))?;
    ready_rx
        .recv()
        .map_err(|_| anyhow!("the storage writer did not start"))??;
    wtx.send(setup_record(&cfg))
        .map_err(|_| anyhow!("the storage writer has stopped"))?;

    let (atx, arx) = mpsc::channel(queues.alerts);
    let outputs = cfg
        .machines
        .iter()
        .map(|m| (m.id.clone(), m.alerts.outputs.clone()))
        .collect();
    let alert_task = tokio::spawn(deliver_alerts(arx, outputs));

    let sources = CancellationToken::new();
    let mut workers = Vec::new();
    let mut source_tasks = Vec::new();
    for m in &cfg.machines {
        let (jtx, jrx) = mpsc::channel::<Job>(queues.blocks);
        let worker = Worker::new(m.clone(), cfg.daemon.clone(), wtx.clone(), atx.clone());
        let name = format!("veer-{}", m.id);
        workers.push(
            std::thread::Builder::new()
                .name(name)
                .spawn(move || worker.run(jrx))?,
        );
        source_tasks.push(start_source(m, jtx, sources.clone(), queues.blocks));
        tracing::info!(machine = %m.id, "watching");
    }
    drop(wtx);
    drop(atx);

    shutdown.cancelled().await;
    tracing::info!("stopping: no new input taken; finishing what is in hand");
    sources.cancel();
    for t in source_tasks {
        let _ = t.await;
    }
    for w in workers {
        let _ = tokio::task::spawn_blocking(move || w.join()).await;
    }
    let _ = tokio::task::spawn_blocking(move || writer.join()).await;
    let _ = alert_task.await;
    tracing::info!("stopped");
    Ok(())
}

/// Starts a machine's source; the returned task ends when the source stops.
fn start_source(
    m: &Machine,
    jobs: mpsc::Sender<Job>,
    cancel: CancellationToken,
    queue: usize,
) -> tokio::task::JoinHandle<()> {
    match &m.source {
        Source::Folder(f) => {
            let (ptx, mut prx) = mpsc::channel(queue);
            let folder = tokio::spawn(folder::run(m.id.clone(), f.clone(), ptx, cancel));
            tokio::spawn(async move {
                while let Some(path) = prx.recv().await {
                    if jobs.send(Job::File(path)).await.is_err() {
                        break;
                    }
                }
                let _ = folder.await;
            })
        }
        Source::Serial(s) => {
            let (stx, mut srx) = mpsc::channel::<StreamEvent>(queue);
            let cfg = s.clone();
            let c2 = cancel.clone();
            let thread = std::thread::Builder::new()
                .name(format!("veer-serial-{}", m.id))
                .spawn(move || crate::serial::run_serial(&cfg, stx, c2));
            tokio::spawn(async move {
                while let Some(ev) = srx.recv().await {
                    if jobs.send(Job::Stream(ev)).await.is_err() {
                        break;
                    }
                }
                if let Ok(t) = thread {
                    let _ = tokio::task::spawn_blocking(move || t.join()).await;
                }
            })
        }
    }
}
