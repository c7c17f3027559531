//! Alert rules and outputs of a machine.

use super::check::{refuse_others, required, Checker, Result};
use super::key::KeyPath;
use super::model::{Alerts, Output, OutputKind};
use super::raw::{RawAlerts, RawOutput, RawOutputKind, DEFAULT_TIMEOUT_S};
use std::path::Path;
use veer_tracker::margin::MarginRule;

/// Checks `[machine.alerts]`: the margin rule parses, bands and times are in range, and every
/// output has the keys its kind needs and no others.
pub(super) fn alerts(c: &Checker, k: &KeyPath, a: RawAlerts) -> Result<Alerts> {
    let margin =
        MarginRule::parse(&a.margin.0).map_err(|e| c.bad(&k.key("margin"), e.to_string()))?;
    c.within(
        &k.key("warn_band_pct"),
        a.warn_band_pct,
        0.0,
        49.9,
        "must be between 0 and 50 points",
    )?;
    c.within(
        &k.key("drift_horizon_min"),
        a.drift_horizon_min,
        0.0,
        525_600.0,
        "must be 0 (off) or a positive number of minutes",
    )?;
    c.above(
        &k.key("drift_window_min"),
        a.drift_window_min,
        0.0,
        525_600.0,
        "must be a positive number of minutes",
    )?;
    c.within(
        &k.key("delay_s"),
        a.delay_s,
        0.0,
        86_400.0,
        "must be between 0 and 86400 s",
    )?;
    c.within(
        &k.key("hysteresis_pct"),
        a.hysteresis_pct,
        0.0,
        20.0,
        "must be between 0 and 20 points",
    )?;
    c.above(
        &k.key("critical_shift_pct"),
        a.critical_shift_pct,
        0.0,
        50.0,
        "must be above 0 and at most 50 percent",
    )?;
    // API 670 Annex I: usually 2× or 3× (REFERENCES §1.4); 1 turns it off, above 10 is a mistake.
    c.within(
        &k.key("startup_multiplier"),
        a.startup_multiplier,
        1.0,
        10.0,
        "must be between 1 (off) and 10",
    )?;
    c.within(
        &k.key("estimate_window_s"),
        a.estimate_window_s,
        1.0,
        3600.0,
        "must be between 1 and 3600 s",
    )?;
    c.within(
        &k.key("estimate_trend_min"),
        a.estimate_trend_min,
        1.0,
        525_600.0,
        "must be at least 1 minute",
    )?;
    c.within(
        &k.key("estimate_sigmas"),
        a.estimate_sigmas,
        0.0,
        6.0,
        "must be between 0 and 6 standard deviations",
    )?;
    if a.outputs.is_empty() {
        return Err(c.bad(
            &k.key("outputs"),
            "list at least one output, such as { kind = \"log\" }",
        ));
    }
    let mut outputs = Vec::with_capacity(a.outputs.len());
    for (i, o) in a.outputs.into_iter().enumerate() {
        outputs.push(output(c, &k.key("outputs").index(i), o)?);
    }
    Ok(Alerts {
        margin,
        warn_band_pct: a.warn_band_pct,
        drift_horizon_min: a.drift_horizon_min,
        drift_window_min: a.drift_window_min,
        delay_s: a.delay_s,
        hysteresis_pct: a.hysteresis_pct,
        critical_shift_pct: a.critical_shift_pct,
        startup_multiplier: a.startup_multiplier,
        estimate_critical: a.estimate_critical,
        estimate_window_s: a.estimate_window_s,
        estimate_trend_min: a.estimate_trend_min,
        estimate_sigmas: a.estimate_sigmas,
        outputs,
    })
}

fn output(c: &Checker, k: &KeyPath, o: RawOutput) -> Result<Output> {
    let kind = match o.kind {
        RawOutputKind::Log => {
            let given = [
                ("path", o.path.is_some()),
                ("argv", o.argv.is_some()),
                ("timeout_s", o.timeout_s.is_some()),
            ];
            refuse_others(c, k, "log output", &given)?;
            OutputKind::Log
        }
        RawOutputKind::Jsonl => {
            let what = "jsonl output";
            refuse_others(
                c,
                k,
                what,
                &[
                    ("argv", o.argv.is_some()),
                    ("timeout_s", o.timeout_s.is_some()),
                ],
            )?;
            let path = required(c, k, "path", o.path, what)?;
            OutputKind::Jsonl {
                path: c.resolve(&k.key("path"), &path)?,
            }
        }
        RawOutputKind::Command => {
            let what = "command output";
            refuse_others(c, k, what, &[("path", o.path.is_some())])?;
            let mut argv = required(c, k, "argv", o.argv, what)?;
            let Some(program) = argv.first_mut() else {
                return Err(c.bad(&k.key("argv"), "must give at least the program to run"));
            };
            if program.trim().is_empty() {
                return Err(c.bad(&k.key("argv").index(0), "must name the program to run"));
            }
            // A relative path with a separator is the site's own script beside the configuration;
            // a bare name is left for a `PATH` lookup, as a shell would do.
            if program.contains('/') && Path::new(program.as_str()).is_relative() {
                *program = c.base.join(program.as_str()).to_string_lossy().into_owned();
            }
            let timeout_s = o.timeout_s.unwrap_or(DEFAULT_TIMEOUT_S);
            c.above(
                &k.key("timeout_s"),
                timeout_s,
                0.0,
                3600.0,
                "must be between 0 and 3600 s",
            )?;
            OutputKind::Command { argv, timeout_s }
        }
    };
    Ok(Output {
        kind,
        min_severity: o.min_severity,
    })
}
