//! `veer report EVENT [--baseline EVENT]`: one self-contained HTML file: the summary, the plots as
//! inline SVG, the margin table and the caution. No script, no style sheet or font from outside,
//! no link: it opens offline and prints as it shows. With a baseline, both runs are overlaid on
//! the Bode and polar plots and the changes are given in numbers. The live estimates made since
//! from this event's criticals close it, as a plot over time and a table.

use super::margins::live_blocks;
use super::plot::estimates;
use super::plot::style::escape;
use super::plot::{self};
use super::show::{document_of, matching};
use super::{fmt_opt, load, mean_vector, phase_diff, EventData};
use crate::cli::PlotKind;
use crate::config::Config;
use crate::report::CAUTION;
use anyhow::{bail, Result};
use serde_json::Value;
use std::fmt::Write;
use veer_storage::{CriticalOrigin, Polar, Store};

const STYLE: &str = "body{font-family:sans-serif;color:#202020;max-width:1040px;margin:24px auto;padding:0 16px;line-height:1.4}\
h1{font-size:1.5em;margin-bottom:.2em}h2{font-size:1.2em;margin-top:1.6em;border-bottom:1px solid #ccc}\
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}th,td{border:1px solid #bbb;padding:3px 8px;text-align:right}td{white-space:nowrap}\
th{background:#f0f0f0}td.l,th.l{text-align:left}.caution{border:2px solid #D55E00;padding:8px 12px;margin:12px 0;background:#fff7f0}\
.alarm{color:#b00000;font-weight:bold}.warning{color:#a05000;font-weight:bold}figure{margin:1em 0}\
figcaption{font-size:.9em;color:#444}svg{max-width:100%;height:auto;display:block}\
@media print{h2{page-break-before:auto}figure{page-break-inside:avoid}}";

/// An SVG made fit for inline use in HTML: the namespace declaration (implied in HTML) dropped, so
/// the file holds no address at all.
fn inline(svg: &str) -> String {
    svg.replacen(" xmlns=\"http://www.w3.org/2000/svg\"", "", 1)
}

fn f(v: &Value, p: usize) -> String {
    fmt_opt(v.as_f64(), p)
}

fn verdict_cell(v: &Value) -> String {
    let t = v.as_str().unwrap_or("-");
    let class = match t {
        "alarm" => " class=\"alarm l\"",
        "warning" => " class=\"warning l\"",
        _ => " class=\"l\"",
    };
    format!("<td{class}>{}</td>", escape(t))
}

fn vector_at(ev: &EventData, ch: &str) -> Option<Polar> {
    let rg = ev.range?;
    let t = ev.best_1x(ch)?;
    mean_vector(&t.points, rg.min_rpm, rg.max_rpm).map(|v| v.0)
}

/// Renders the report of `event`, with `baseline` overlaid and compared when given.
pub(crate) fn render(
    store: &Store,
    cfg: Option<&Config>,
    event: i64,
    baseline: Option<i64>,
) -> Result<String> {
    let ev = load(store, cfg, event)?;
    let base = match baseline {
        Some(b) => {
            let be = load(store, cfg, b)?;
            if be.machine.id != ev.machine.id {
                bail!(
                    "baseline event {b} is of machine {}, event {event} of {}: compare events of one machine",
                    be.machine.id,
                    ev.machine.id
                );
            }
            Some(be)
        }
        None => None,
    };
    let doc = document_of(store, &ev)?;
    let mut h = String::new();
    let e = &doc["event"];
    let title = format!(
        "veer review: event {} · {} · {}",
        ev.id,
        ev.machine.id,
        ev.event.kind.as_str()
    );
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><meta name=\"viewport\" content=\"width=device-width,initial-scale=1\"><title>{}</title><style>{STYLE}</style></head><body>\n",
        escape(&title)
    );
    let _ = writeln!(h, "<h1>{}</h1>", escape(&title));
    let _ = writeln!(
        h,
        "<p>{} — {}</p>",
        escape(&ev.machine.name),
        escape(e["start"].as_str().unwrap_or(""))
    );
    let _ = writeln!(
        h,
        "<div class=\"caution\"><strong>Caution.</strong> {}</div>",
        escape(CAUTION)
    );
    // Summary.
    let _ = writeln!(h, "<h2>Summary</h2><table>");
    let rows = [
        (
            "Machine",
            format!("{} ({})", ev.machine.id, ev.machine.name),
        ),
        ("Event", format!("{} ({})", ev.id, ev.event.kind.as_str())),
        (
            "Start – end (UTC)",
            format!(
                "{} – {}",
                e["start"].as_str().unwrap_or(""),
                e["end"].as_str().unwrap_or("")
            ),
        ),
        (
            "Speed",
            format!(
                "{} → {} r/min",
                f(&e["speed_start_rpm"], 0),
                f(&e["speed_end_rpm"], 0)
            ),
        ),
        (
            "Sweep rate",
            format!("{} r/min/s", f(&e["sweep_rate_rpm_s"], 1)),
        ),
        (
            "Operating range",
            ev.range.map_or("not stored".into(), |g| {
                format!("{:.0}–{:.0} r/min", g.min_rpm, g.max_rpm)
            }),
        ),
        (
            "Margin rule",
            format!("{}, warning band {} points", ev.rule.name(), ev.band),
        ),
        (
            "Baseline",
            base.as_ref().map_or("none".into(), |b| {
                format!(
                    "event {} ({}, {})",
                    b.id,
                    b.event.kind.as_str(),
                    crate::timefmt::rfc3339(b.event.start_time)
                )
            }),
        ),
    ];
    for (k, v) in rows {
        let _ = writeln!(
            h,
            "<tr><th class=\"l\">{}</th><td class=\"l\">{}</td></tr>",
            escape(k),
            escape(&v)
        );
    }
    let _ = writeln!(h, "</table>");
    // Margin table.
    let _ = writeln!(h, "<h2>Critical speeds and separation margins</h2>");
    let _ = writeln!(h, "<table><tr><th class=\"l\">Channel</th><th>Nc, r/min</th><th>AF</th><th>ζ</th><th>Phase lag, °</th><th>Peak</th><th>N1, r/min</th><th>N2, r/min</th><th class=\"l\">Fit</th><th class=\"l\">Side</th><th>Required, %</th><th>Actual, %</th><th class=\"l\">Verdict</th><th class=\"l\">Sweep</th><th>Bias-corrected, r/min</th></tr>");
    let empty = Vec::new();
    let mut any = false;
    for c in doc["channels"].as_array().unwrap_or(&empty) {
        for x in c["criticals"].as_array().unwrap_or(&empty) {
            any = true;
            let m = &x["margin"];
            let sw = &x["sweep"];
            let sweep = if sw.is_null() {
                "-".to_string()
            } else if sw["trusted"].as_bool().unwrap_or(false) {
                format!(
                    "ok (shift {:+.2} %)",
                    sw["predicted_shift_pct"].as_f64().unwrap_or(f64::NAN)
                )
            } else {
                format!(
                    "too fast: shift {:+.2} %",
                    sw["predicted_shift_pct"].as_f64().unwrap_or(f64::NAN)
                )
            };
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{} {}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td>{}<td class=\"l\">{}</td><td>{}</td></tr>",
                escape(c["channel"].as_str().unwrap_or("")),
                f(&x["speed_rpm"], 0),
                f(&x["amplification_factor"], 1),
                f(&x["damping_ratio"], 3),
                f(&x["phase_deg"], 0),
                f(&x["peak_amplitude"], 2),
                escape(c["units"].as_str().unwrap_or("")),
                f(&x["n1_rpm"], 0),
                f(&x["n2_rpm"], 0),
                escape(x["fit"]["quality"].as_str().unwrap_or("-")),
                escape(m["side"].as_str().unwrap_or("-")),
                f(&m["required_pct"], 1),
                f(&m["actual_pct"], 1),
                verdict_cell(&m["verdict"]),
                escape(&sweep),
                f(&x["bias_corrected"]["rpm"], 0)
            );
        }
    }
    if !any {
        let _ = writeln!(h, "<tr><td class=\"l\" colspan=\"15\">No critical speed was found in this event.</td></tr>");
    }
    let _ = writeln!(h, "</table>");
    // 1X at operating speed.
    let _ = writeln!(h, "<h2>1X vector at operating speed</h2><table><tr><th class=\"l\">Channel</th><th class=\"l\">Series</th><th>Amplitude</th><th>Phase lag, °</th><th>Points</th><th>Speeds, r/min</th></tr>");
    for c in doc["channels"].as_array().unwrap_or(&empty) {
        for key in ["measured", "compensated"] {
            let p = &c["vector_at_operating_speed"][key];
            if p.is_null() {
                continue;
            }
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td class=\"l\">{key}</td><td>{} {}</td><td>{}</td><td>{}</td><td>{}–{}</td></tr>",
                escape(c["channel"].as_str().unwrap_or("")),
                f(&p["amplitude"], 2),
                escape(c["units"].as_str().unwrap_or("")),
                f(&p["phase_deg"], 0),
                p["points"],
                f(&p["speed_min_rpm"], 0),
                f(&p["speed_max_rpm"], 0)
            );
        }
    }
    let _ = writeln!(h, "</table>");
    if let Some(b) = &base {
        compare(&mut h, &ev, b);
    }
    // Plots.
    let plots = [
        (PlotKind::Bode, "Bode plot", "1X amplitude (top) and phase lag (bottom) against speed; grey: measured, blue: slow-roll compensated, orange dashed: baseline; vermilion dashed lines: criticals with their AF; purple: half-power points; green: operating range; yellow: required separation margin."),
        (PlotKind::Polar, "Polar plot", "Tip of the compensated 1X vector as speed changes, labelled in r/min; angle is phase lag, 0° at right, growing clockwise; circled: criticals; orange dashed: baseline."),
        (PlotKind::OrderMap, "Order map", "Order-spectrum amplitude over speed (linear colour scale at right); dashed white: 1X and 2X order lines; vermilion dashed curves: constant frequency through each critical (a fixed-frequency resonance follows such a curve, an order-related peak stays on its order line)."),
    ];
    let chans = ev.channels();
    for (kind, name, caption) in plots {
        let b = if kind == PlotKind::OrderMap {
            None
        } else {
            base.as_ref()
        };
        let _ = writeln!(h, "<h2>{name}</h2>");
        if chans.is_empty() {
            let _ = writeln!(h, "<p>No channels.</p>");
            continue;
        }
        let svg = plot::render(kind, &ev, None, b)?;
        let _ = writeln!(
            h,
            "<figure>{}<figcaption>{}</figcaption></figure>",
            inline(&svg),
            escape(caption)
        );
    }
    live(&mut h, store, &ev)?;
    let _ = writeln!(
        h,
        "<div class=\"caution\"><strong>Caution.</strong> {}</div>",
        escape(CAUTION)
    );
    let _ = writeln!(h, "</body></html>");
    Ok(h)
}

/// "Critical speeds since this event": the live estimates made from this event's criticals (with
/// the model fitted on this event), as a plot over time and the latest informative estimate of
/// each; one sentence when there are none.
fn live(h: &mut String, store: &Store, ev: &EventData) -> Result<()> {
    let _ = writeln!(h, "<h2>Critical speeds since this event</h2>");
    let id = ev.id;
    let series = estimates::load(store, &ev.machine.id, |c| {
        c.origin == CriticalOrigin::Measured { event_id: id }
    })?;
    if series.iter().all(|s| s.rows.is_empty()) {
        let _ = writeln!(
            h,
            "<p>No live estimates were made from this event's critical speeds (the machine has not yet run at steady speed since, or the event gave no fitted model).</p>"
        );
        return Ok(());
    }
    let svg = estimates::render(&ev.machine, ev.range, ev.rule, &series)?;
    let _ = writeln!(
        h,
        "<figure>{}<figcaption>{}</figcaption></figure>",
        inline(&svg),
        escape("Live estimates of each critical speed measured in this event, over time: blue line, the estimate of informative windows with its ±2σ band; hollow grey: windows that did not constrain it; purple triangles: windows where the 1X vector left the model's locus (an unbalance change, not a critical shift); vermilion dashed: the critical as measured in this event; dark dashed: where the critical would enter the required separation margin; green: the operating range.")
    );
    let blocks = live_blocks(store, &series, ev.range, ev.rule, ev.band)?;
    let _ = writeln!(h, "<table><tr><th class=\"l\">Channel</th><th>Mode</th><th>Measured, r/min</th><th>Estimates</th><th>Informative</th><th>Unbalance</th><th class=\"l\">Latest informative (UTC)</th><th>Running, r/min</th><th>Estimate, r/min</th><th>σ, r/min</th><th class=\"l\">Side</th><th>Required, %</th><th>Actual, %</th><th class=\"l\">Verdict</th><th>Trend (24 h), r/min/day</th></tr>");
    for b in &blocks {
        let l = &b["latest"];
        let m = &l["margin"];
        let _ = writeln!(
            h,
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td>{}<td>{}</td></tr>",
            escape(b["channel"].as_str().unwrap_or("")),
            b["mode"],
            f(&b["measured_rpm"], 0),
            b["estimates"],
            b["informative"],
            b["unbalance"],
            escape(l["time"].as_str().unwrap_or("none yet")),
            f(&l["speed_rpm"], 0),
            f(&l["estimate_rpm"], 0),
            f(&l["uncertainty_rpm"], 1),
            escape(m["side"].as_str().unwrap_or("-")),
            f(&m["required_pct"], 1),
            f(&m["actual_pct"], 1),
            verdict_cell(&m["verdict"]),
            f(&b["trend_24h"]["rpm_per_day"], 1)
        );
    }
    let _ = writeln!(h, "</table>");
    Ok(())
}

/// The changes from the baseline, in numbers: each critical's speed and AF, and the 1X vector at
/// operating speed.
fn compare(h: &mut String, ev: &EventData, b: &EventData) {
    let _ = writeln!(h, "<h2>Change from baseline event {}</h2>", b.id);
    let _ = writeln!(h, "<table><tr><th class=\"l\">Channel</th><th>Nc now, r/min</th><th>Nc baseline, r/min</th><th>ΔNc, r/min</th><th>ΔNc, %</th><th>AF now</th><th>AF baseline</th><th>ΔAF</th></tr>");
    for c in &ev.resonances {
        let Some(o) = matching(&b.resonances, &c.channel, c.speed_rpm) else {
            let _ = writeln!(h, "<tr><td class=\"l\">{}</td><td>{:.0}</td><td colspan=\"6\" class=\"l\">no matching critical in the baseline</td></tr>", escape(&c.channel), c.speed_rpm);
            continue;
        };
        let daf = c
            .amplification_factor
            .zip(o.amplification_factor)
            .map(|(a, bb)| a - bb);
        let _ = writeln!(
            h,
            "<tr><td class=\"l\">{}</td><td>{:.0}</td><td>{:.0}</td><td>{:+.0}</td><td>{:+.2}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&c.channel),
            c.speed_rpm,
            o.speed_rpm,
            c.speed_rpm - o.speed_rpm,
            (c.speed_rpm - o.speed_rpm) / o.speed_rpm * 100.0,
            fmt_opt(c.amplification_factor, 2),
            fmt_opt(o.amplification_factor, 2),
            daf.map_or("-".into(), |d| format!("{d:+.2}"))
        );
    }
    let _ = writeln!(h, "</table>");
    let _ = writeln!(h, "<table><tr><th class=\"l\">Channel</th><th>1X now</th><th>1X baseline</th><th>ΔAmplitude</th><th>Lag now, °</th><th>Lag baseline, °</th><th>ΔLag, °</th><th>|Vector change|</th></tr>");
    for ch in ev.channels() {
        let units = ev.units(&ch);
        match (vector_at(ev, &ch), vector_at(b, &ch)) {
            (Some(a), Some(o)) => {
                let (ar, ai) = a.to_re_im();
                let (or, oi) = o.to_re_im();
                let _ = writeln!(
                    h,
                    "<tr><td class=\"l\">{}</td><td>{:.2} {u}</td><td>{:.2} {u}</td><td>{:+.2}</td><td>{:.0}</td><td>{:.0}</td><td>{:+.0}</td><td>{:.2} {u}</td></tr>",
                    escape(&ch),
                    a.amplitude,
                    o.amplitude,
                    a.amplitude - o.amplitude,
                    a.phase_deg,
                    o.phase_deg,
                    phase_diff(a.phase_deg, o.phase_deg),
                    (ar - or).hypot(ai - oi),
                    u = escape(&units)
                );
            }
            _ => {
                let _ = writeln!(h, "<tr><td class=\"l\">{}</td><td colspan=\"7\" class=\"l\">operating speed not reached in both runs</td></tr>", escape(&ch));
            }
        }
    }
    let _ = writeln!(h, "</table>");
}
