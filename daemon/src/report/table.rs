//! The readable table printed by `analyze` and `demo`.

use super::{side_name, verdict_name, CAUTION};
use crate::pipeline::Analysis;
use std::fmt::Write;

fn opt(x: Option<f64>, prec: usize) -> String {
    x.map_or_else(|| "-".to_string(), |v| format!("{v:.prec$}"))
}

/// Renders the analysis as text.
pub(crate) fn render(a: &Analysis) -> String {
    let mut s = String::new();
    let p = a.stats.pulses;
    let _ = writeln!(
        s,
        "{}: {:.1} s at {} Hz, tach {} ({} revolutions; {} pulses filled in, {} dropped, {} losses)",
        a.source, a.duration_s, a.sample_rate, a.tach, a.stats.revolutions, p.inserted, p.dropped, p.losses
    );
    if let Some(m) = &a.config.margins {
        let _ = writeln!(
            s,
            "operating range {:.0}-{:.0} r/min, margin rule {}",
            m.range.min_rpm,
            m.range.max_rpm,
            m.rule.name()
        );
    }
    if a.events.is_empty() {
        let _ = writeln!(
            s,
            "\nno run-up or coast-down found (steady speed, or sweeps too small)"
        );
    }
    for (i, e) in a.events.iter().enumerate() {
        let _ = writeln!(
            s,
            "\nevent {}: {} {:.1}-{:.1} s, {:.0} -> {:.0} r/min, {:+.1} r/min/s",
            i + 1,
            e.kind.name(),
            e.start_s,
            e.end_s,
            e.speed_start_rpm,
            e.speed_end_rpm,
            e.sweep_rate_rpm_s
        );
        for c in &e.channels {
            let sr = c.slow_roll.map_or_else(
                || "no slow-roll compensation".to_string(),
                |v| {
                    format!(
                        "slow roll {:.2} {} at {:.0}° ({:.0}-{:.0} r/min)",
                        v.vector.norm(),
                        c.amplitude,
                        veer_tracker::lag_deg(v.vector),
                        v.speed_min_rpm,
                        v.speed_max_rpm
                    )
                },
            );
            let _ = writeln!(s, "  channel {} [{}], {}", c.name, c.amplitude, sr);
            if c.criticals.is_empty() {
                let _ = writeln!(s, "    no critical speed found");
                continue;
            }
            let _ = writeln!(
                s,
                "    {:>9} {:>10} {:>7} {:>7} {:>7} {:>9} {:>9}  margin",
                "Nc r/min", "peak", "lag °", "AF", "zeta", "N1", "N2"
            );
            for cr in &c.criticals {
                let r = &cr.resonance;
                let margin = cr.margin.map_or_else(
                    || "(no operating range given)".to_string(),
                    |m| {
                        format!(
                            "{} {:.1} % vs {:.1} % required: {}",
                            side_name(m.side),
                            m.actual_pct,
                            m.required_pct,
                            verdict_name(m.verdict)
                        )
                    },
                );
                let _ = writeln!(
                    s,
                    "    {:>9.0} {:>10.2} {:>7.0} {:>7} {:>7} {:>9} {:>9}  {}{}",
                    r.speed_rpm,
                    r.peak_amplitude,
                    r.phase_deg,
                    opt(r.amplification_factor, 1),
                    opt(r.damping_ratio, 3),
                    opt(r.n1_rpm, 0),
                    opt(r.n2_rpm, 0),
                    margin,
                    if r.heavily_damped {
                        " (heavily damped)"
                    } else {
                        ""
                    }
                );
            }
        }
    }
    let _ = writeln!(s, "\n{CAUTION}");
    s
}
