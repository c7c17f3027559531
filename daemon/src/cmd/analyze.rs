//! `veer analyze`: one recording in, events and critical speeds out.

use crate::cli::AnalyzeArgs;
use crate::decode::Recording;
use crate::pipeline::analyze_recording;
use crate::report::{json, table};
use crate::setup::engine_config;
use anyhow::Result;

pub(crate) fn run(a: AnalyzeArgs) -> Result<()> {
    let mut rec = Recording::open(&a.file, a.rate)?;
    let tach = rec.resolve(&a.tach)?;
    let vib = a
        .vib
        .iter()
        .map(|c| rec.resolve(c))
        .collect::<Result<Vec<_>, _>>()?;
    let names: Vec<String> = vib.iter().map(|&c| rec.channel_label(c)).collect();
    let cfg = engine_config(&a.track, &names)?;
    let analysis = analyze_recording(&mut rec, tach, &vib, cfg)?;
    if a.json {
        let mut text = serde_json::to_string_pretty(&json::document(&analysis))?;
        text.push('\n');
        super::print_out(&text)?;
    } else {
        super::print_out(&table::render(&analysis))?;
    }
    if a.bench {
        let samples = analysis.duration_s * analysis.sample_rate * (vib.len() + 1) as f64;
        let bytes = std::fs::metadata(&a.file)
            .map(|m| m.len() as f64)
            .unwrap_or(0.0);
        let t = analysis.elapsed_s.max(1e-9);
        eprintln!(
            "bench: {:.3} s, {:.1} M samples ({} channels read), {:.1} M samples/s, {:.1} MB/s, peak memory {} MiB",
            t,
            samples / 1e6,
            vib.len() + 1,
            samples / t / 1e6,
            bytes / t / 1e6,
            super::peak_memory_mib().map_or_else(|| "?".to_string(), |m| format!("{m:.1}"))
        );
    }
    Ok(())
}
