//! `veer demo`: a demo-plant machine simulated through a run-up and coast-down, then analysed, in
//! a few seconds and without any file.

use crate::cli::{DemoArgs, EdgeArg, TrackArgs};
use crate::pipeline::analyze_simulation;
use crate::plant;
use crate::report::{json, table};
use crate::setup::engine_config;
use anyhow::{anyhow, Result};
use veer_tracker::sim::{SimConfig, Simulator};

pub(crate) fn run(a: DemoArgs) -> Result<()> {
    let started = std::time::Instant::now();
    let m = plant::machine(a.machine.as_deref().unwrap_or("tg-1"))?;
    let sim_cfg = SimConfig {
        // 12.8 kHz is ample for 1X and 2X of these machines and keeps the demo quick.
        sample_rate: 12_800.0,
        profile: plant::profile(&m)?,
        tach: m.tach.clone(),
        channels: m.channels.clone(),
        seed: 7,
        start_at_rest: false,
    };
    let sim = Simulator::new(sim_cfg).map_err(|e| anyhow!("{e}"))?;
    let names: Vec<String> = m.channels.iter().map(|c| c.name.clone()).collect();
    let track = TrackArgs {
        ppr: m.tach.ppr,
        gap_teeth: 0,
        edge: EdgeArg::Rising,
        tach_level: None,
        min_speed: 30.0,
        max_speed: 60_000.0,
        units: vec![m.unit.to_string()],
        detection: None,
        scale: vec![1.0],
        orders: vec![1, 2],
        revs_per_vector: 1,
        slow_roll: "auto".to_string(),
        range: Some(format!("{}:{}", m.min_operating_rpm, m.max_continuous_rpm)),
        margin: "api".to_string(),
        warn_band: 5.0,
        no_order_map: false,
    };
    let cfg = engine_config(&track, &names)?;
    let label = format!("demo: {} ({}), simulated", m.name, m.id);
    let analysis = analyze_simulation(sim, cfg, &label)?;
    // Without --machine, the whole plant also goes through the daemon.
    let plant = if a.machine.is_none() {
        Some(super::plant_demo::run(a.dir.clone())?)
    } else {
        None
    };
    if a.json {
        let mut doc = json::document(&analysis);
        if let Some(p) = &plant {
            doc["plant"] = serde_json::json!({
                "dir": p.dir.display().to_string(),
                "alerts": p.alerts.iter().map(|r| serde_json::json!({
                    "machine": r.machine, "kind": r.kind, "severity": r.severity.as_str(),
                    "opened_at": r.opened_at, "closed_at": r.closed_at, "message": r.message,
                    "evidence": r.evidence.as_deref().and_then(|e| serde_json::from_str::<serde_json::Value>(e).ok()),
                })).collect::<Vec<_>>(),
                "status": p.status,
            });
        }
        let mut text = serde_json::to_string_pretty(&doc)?;
        text.push('\n');
        super::print_out(&text)?;
    } else {
        let mut text = table::render(&analysis);
        if let Some(p) = &plant {
            text.push_str(&super::plant_demo::render(p));
        }
        super::print_out(&text)?;
        eprintln!("(done in {:.1} s)", started.elapsed().as_secs_f64());
    }
    Ok(())
}
