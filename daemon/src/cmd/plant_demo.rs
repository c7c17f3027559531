//! The plant part of `veer demo`: the three machines of the demo plant simulated for a few minutes
//! each, dropped as capture files into watched folders, and run through the real daemon (the same
//! `watch` code, configuration, storage writer and alert rules) into a database. Then the alerts it
//! raised and the status table are printed.
//!
//! The cooling tower fan is the one with a story: after its run-up it runs at 900 r/min and its
//! speed creeps up toward 1000 r/min, toward its first critical at 1210 r/min (AF 6.5), whose
//! API 684 requirement above the running speed is 23.6 %: the drift alert comes first, then the
//! margin warning, then the alarm.

use crate::plant;
use crate::timefmt;
use anyhow::{anyhow, bail, Context, Result};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};
use tokio_util::sync::CancellationToken;
use veer_storage::Store;
use veer_tracker::sim::{SimConfig, Simulator, SpeedProfile};

/// The demo plant's configuration, with every machine fed from a folder inside `dir`.
fn config_text() -> String {
    r#"# Written by `veer demo`: the fictional demo plant, every machine fed from a folder.
database = "veer.db"

[daemon]
trend_interval_s = 10

[[machine]]
id = "tg-1"
name = "Steam turbine generator 1"
min_operating_rpm = 2950
max_continuous_rpm = 3030
trip_rpm = 3300
source = { kind = "folder", path = "incoming/tg-1", settle_s = 0 }
tach = { channel = "tach", ppr = 1 }
sensors = [
  { channel = "x", kind = "displacement", units = "um", angle_deg = 45, warning_1x = 88, alarm_1x = 164 },
  { channel = "y", kind = "displacement", units = "um", angle_deg = 135, warning_1x = 88, alarm_1x = 164 },
]
criticals = [ { rpm = 1380, af = 11.1, origin = "design" }, { rpm = 2420, af = 8.3, origin = "design" } ]
[machine.alerts]
margin = "api"
outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]

[[machine]]
id = "comp-3"
name = "Process gas compressor 3"
min_operating_rpm = 5200
max_continuous_rpm = 6800
trip_rpm = 7480
source = { kind = "folder", path = "incoming/comp-3", settle_s = 0 }
tach = { channel = "tach", ppr = 1 }
sensors = [
  { channel = "x", kind = "displacement", units = "um", angle_deg = 45 },
  { channel = "y", kind = "displacement", units = "um", angle_deg = 135 },
]
criticals = [ { rpm = 2900, af = 7.1, origin = "design" } ]
[machine.alerts]
margin = "api-1996"
outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]

[[machine]]
id = "fan-2"
name = "Cooling tower fan 2"
min_operating_rpm = 600
max_continuous_rpm = 1000
source = { kind = "folder", path = "incoming/fan-2", settle_s = 0 }
tach = { channel = "tach", ppr = 1, max_rpm = 2000 }
sensors = [ { channel = "v", kind = "velocity", units = "mm/s" } ]
criticals = [ { rpm = 1210, af = 6.5, origin = "design" } ]
[machine.alerts]
margin = "api"
drift_window_min = 5
drift_horizon_min = 30
delay_s = 10
outputs = [ { kind = "jsonl", path = "alerts.jsonl" } ]
"#
    .to_string()
}

/// Speed profiles of the demo: a few minutes per machine.
fn profile(id: &str) -> Vec<(f64, f64)> {
    match id {
        "tg-1" => vec![
            (0.0, 300.0),
            (15.0, 300.0),
            (105.0, 3000.0),
            (165.0, 3000.0),
            (285.0, 200.0),
        ],
        "comp-3" => vec![
            (0.0, 400.0),
            (10.0, 400.0),
            (70.0, 6200.0),
            (130.0, 6200.0),
            (210.0, 300.0),
        ],
        // Run-up, then a slow creep from 900 toward 1000 r/min, then a coast-down.
        _ => vec![
            (0.0, 150.0),
            (20.0, 150.0),
            (80.0, 900.0),
            (140.0, 900.0),
            (560.0, 1000.0),
            (580.0, 1000.0),
            (700.0, 100.0),
        ],
    }
}

/// Simulates one machine into a WAV file named with its start time (so the daemon dates it).
fn write_recording(dir: &Path, m: &plant::DemoMachine, start_unix: f64) -> Result<PathBuf> {
    let cfg = SimConfig {
        sample_rate: if m.id == "fan-2" { 2560.0 } else { 6400.0 },
        profile: SpeedProfile::new(profile(m.id)).map_err(|e| anyhow!("{e}"))?,
        tach: m.tach.clone(),
        channels: m.channels.clone(),
        seed: 11,
        start_at_rest: false,
    };
    let mut sim = Simulator::new(cfg).map_err(|e| anyhow!("{e}"))?;
    let folder = dir.join("incoming").join(m.id);
    std::fs::create_dir_all(&folder).with_context(|| folder.display().to_string())?;
    let stamp = timefmt::rfc3339(start_unix).replace([':', '-'], "");
    let stamp = stamp.trim_end_matches('Z');
    // Written under a temporary name and renamed into place, as a logger should.
    let tmp = folder.join(format!(".{}_{stamp}Z.wav.part", m.id));
    let path = folder.join(format!("{}_{stamp}Z.wav", m.id));
    let names = sim.channel_names();
    let channels = u16::try_from(names.len()).context("channels")?;
    let rate = sim.sample_rate() as u32;
    let mut w =
        crate::decode::WavWriter::create(&tmp, channels, rate, crate::decode::WavFormat::Float32)?;
    let mut inter = Vec::new();
    let mut cols: Vec<Vec<f32>> = vec![Vec::new(); names.len()];
    loop {
        inter.clear();
        let n = sim.next_block(65_536, &mut inter);
        if n == 0 {
            break;
        }
        for c in cols.iter_mut() {
            c.clear();
        }
        for frame in inter.chunks_exact(names.len()) {
            for (c, &x) in cols.iter_mut().zip(frame) {
                c.push(x);
            }
        }
        let views: Vec<&[f32]> = cols.iter().map(|c| c.as_slice()).collect();
        w.write_frames(&views)?;
    }
    w.finish()?;
    std::fs::rename(&tmp, &path).with_context(|| path.display().to_string())?;
    Ok(path)
}

/// What the plant part produced: the folder, the alerts raised (in order) and the status document.
pub(crate) struct PlantRun {
    pub dir: PathBuf,
    pub alerts: Vec<veer_storage::AlertRow>,
    pub status: Value,
}

/// Runs the plant through the daemon in `dir` (created; a fresh folder under the system's temp
/// folder when `None`).
pub(crate) fn run(dir: Option<PathBuf>) -> Result<PlantRun> {
    let dir = match dir {
        Some(d) => d,
        None => std::env::temp_dir().join(format!("veer-demo-{}", std::process::id())),
    };
    if dir.join("veer.db").exists() {
        bail!(
            "{}: already holds a demo database; give an empty folder",
            dir.display()
        );
    }
    std::fs::create_dir_all(&dir).with_context(|| dir.display().to_string())?;
    let config_path = dir.join("plant.toml");
    std::fs::write(&config_path, config_text())
        .with_context(|| config_path.display().to_string())?;
    let cfg = crate::config::load(&config_path).map_err(|e| anyhow!("{e}"))?;
    // Recordings dated an hour ago, one after the other.
    let start = (timefmt::now() / 60.0).floor() * 60.0 - 3600.0;
    let mut files = 0;
    for (i, m) in plant::machines().iter().enumerate() {
        write_recording(&dir, m, start + 900.0 * i as f64)?;
        files += 1;
    }
    let db = cfg.database.clone();
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()?;
    rt.block_on(async move {
        let shutdown = CancellationToken::new();
        let daemon = tokio::spawn(crate::watch::run(cfg, shutdown.clone()));
        let began = Instant::now();
        loop {
            tokio::time::sleep(Duration::from_millis(200)).await;
            if ingested(&db, files) >= files || began.elapsed() > Duration::from_secs(120) {
                break;
            }
        }
        shutdown.cancel();
        daemon.await.map_err(|e| anyhow!("{e}"))?
    })?;
    let store = Store::open_read_only(dir.join("veer.db")).map_err(|e| anyhow!("{e}"))?;
    let alerts = store
        .alerts_since(0.0, None)
        .map_err(|e| anyhow!("{e}"))?
        .into_iter()
        .map(|a| a.row)
        .collect();
    let cfg = crate::config::load(&config_path).map_err(|e| anyhow!("{e}"))?;
    let status = super::status::document(&store, Some(&cfg))?;
    Ok(PlantRun {
        dir,
        alerts,
        status,
    })
}

/// Files ingested so far (done or failed), 0 while the database does not exist yet. Ingest ids
/// count from 1, one per file here.
fn ingested(db: &Path, files: usize) -> usize {
    let Ok(store) = Store::open_read_only(db) else {
        return 0;
    };
    (1..=files as i64)
        .filter(|&id| {
            store
                .ingest(id)
                .ok()
                .flatten()
                .is_some_and(|r| r.row.status != veer_storage::IngestStatus::Pending)
        })
        .count()
}

/// The plant part as text.
pub(crate) fn render(run: &PlantRun) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "\nThe demo plant through the daemon (config, recordings and database in {}):",
        run.dir.display()
    );
    let _ = writeln!(s, "\nalerts raised, in order:");
    if run.alerts.is_empty() {
        let _ = writeln!(s, "  none");
    }
    for a in &run.alerts {
        let _ = writeln!(
            s,
            "  {} {:7} {:14} {:<8} {}",
            timefmt::rfc3339(a.opened_at),
            a.severity.as_str(),
            a.kind,
            a.machine,
            a.message
        );
    }
    let _ = writeln!(s, "\nstatus:");
    s.push_str(&super::status::text(&run.status));
    s
}
