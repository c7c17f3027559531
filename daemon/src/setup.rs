//! From command-line options to the engine's configuration, with errors that name the option.

use crate::cli::{EdgeArg, TrackArgs};
use anyhow::{anyhow, bail, Context, Result};
use veer_tracker::config::{ChannelConfig, EngineConfig, MarginSettings, SlowRoll};
use veer_tracker::margin::{MarginRule, OperatingRange};
use veer_tracker::spectrum::OrderMapConfig;
use veer_tracker::tach::{Edge, TachConfig, TachLevels};
use veer_tracker::units::{Amplitude, Detection, Unit};
use veer_tracker::vectors::VectorConfig;

/// Parses `MIN:MAX` (also `MIN-MAX`) speeds in r/min.
pub(crate) fn parse_range(s: &str, option: &str) -> Result<(f64, f64)> {
    let (a, b) = s
        .split_once(':')
        .or_else(|| s.split_once('-'))
        .ok_or_else(|| anyhow!("--{option} `{s}`: expected MIN:MAX in r/min"))?;
    let lo: f64 = a
        .trim()
        .parse()
        .with_context(|| format!("--{option} `{s}`: `{a}` is not a speed"))?;
    let hi: f64 = b
        .trim()
        .parse()
        .with_context(|| format!("--{option} `{s}`: `{b}` is not a speed"))?;
    if !(lo >= 0.0 && hi > lo && hi.is_finite()) {
        bail!("--{option} `{s}`: needs 0 <= MIN < MAX");
    }
    Ok((lo, hi))
}

/// Picks the i-th of a per-channel list, or its only element.
fn per_channel<T: Clone>(list: &[T], i: usize, option: &str, n: usize) -> Result<T> {
    match list.len() {
        1 => Ok(list[0].clone()),
        len if len == n => Ok(list[i].clone()),
        len => {
            bail!("--{option}: {len} values given for {n} channels (give one, or one per channel)")
        }
    }
}

/// Builds the engine configuration for the named vibration channels.
pub(crate) fn engine_config(t: &TrackArgs, channel_names: &[String]) -> Result<EngineConfig> {
    let n = channel_names.len();
    let mut channels = Vec::with_capacity(n);
    for (i, name) in channel_names.iter().enumerate() {
        let unit_s = per_channel(&t.units, i, "units", n)?;
        let unit = Unit::parse(&unit_s).map_err(|e| anyhow!("--units: {e}"))?;
        let amplitude = match &t.detection {
            Some(d) => Amplitude {
                unit,
                detection: Detection::parse(d).map_err(|e| anyhow!("--detection: {e}"))?,
            },
            None => Amplitude::usual(unit),
        };
        channels.push(ChannelConfig {
            name: name.clone(),
            amplitude,
            scale: per_channel(&t.scale, i, "scale", n)?,
            angle_deg: 0.0,
        });
    }
    let tach = TachConfig {
        ppr: t.ppr,
        gap_teeth: t.gap_teeth,
        edge: match t.edge {
            EdgeArg::Rising => Edge::Rising,
            EdgeArg::Falling => Edge::Falling,
        },
        levels: t.tach_level.map(|trigger| TachLevels {
            trigger,
            // A fixed level gets a fixed hysteresis of 10 % of its magnitude (at least 0.05 units).
            rearm: match t.edge {
                EdgeArg::Rising => trigger - (0.1 * trigger.abs()).max(0.05),
                EdgeArg::Falling => trigger + (0.1 * trigger.abs()).max(0.05),
            },
        }),
        min_rpm: t.min_speed,
        max_rpm: t.max_speed,
        ..TachConfig::default()
    };
    let slow_roll = match t.slow_roll.as_str() {
        "auto" => SlowRoll::Auto,
        "off" | "none" => SlowRoll::Off,
        other => {
            let (min_rpm, max_rpm) = parse_range(other, "slow-roll")?;
            SlowRoll::Window { min_rpm, max_rpm }
        }
    };
    let margins = match &t.range {
        None => None,
        Some(r) => {
            let (lo, hi) = parse_range(r, "range")?;
            let rule = MarginRule::parse(&t.margin).map_err(|e| anyhow!("--margin: {e}"))?;
            Some(MarginSettings {
                rule,
                range: OperatingRange::new(lo, hi).map_err(|e| anyhow!("--range: {e}"))?,
                warn_band_pct: t.warn_band,
            })
        }
    };
    let cfg = EngineConfig {
        tach,
        channels,
        vectors: VectorConfig {
            orders: t.orders.clone(),
            revs_per_vector: t.revs_per_vector,
        },
        order_map: if t.no_order_map {
            None
        } else {
            Some(OrderMapConfig::default())
        },
        slow_roll,
        margins,
        ..EngineConfig::default()
    };
    cfg.validate().map_err(|e| anyhow!("{e}"))?;
    Ok(cfg)
}
