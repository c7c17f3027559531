//! The review plots, drawn with plotters into SVG text: no font files, no system libraries; text
//! stays text (the generic `sans-serif` family), so the plots scale cleanly on screen and in print.

pub(crate) mod bode;
pub(crate) mod estimates;
pub(crate) mod order_map;
pub(crate) mod polar;
pub(crate) mod style;

use super::EventData;
use crate::cli::PlotKind;
use anyhow::{anyhow, bail, Result};
use veer_storage::VectorPoint;

/// Turns a plotters error into ours.
pub(crate) fn pe<E: std::fmt::Debug>(e: E) -> anyhow::Error {
    anyhow!("drawing the plot: {e:?}")
}

/// Draws one plot of an event (and, for Bode and polar, a baseline event overlaid) as SVG text.
pub(crate) fn render(
    kind: PlotKind,
    ev: &EventData,
    channel: Option<&str>,
    baseline: Option<&EventData>,
) -> Result<String> {
    let channels: Vec<String> = match channel {
        Some(c) => {
            if !ev.channels().iter().any(|x| x == c) {
                bail!(
                    "event {} has no channel {c:?} (channels: {})",
                    ev.id,
                    ev.channels().join(", ")
                );
            }
            vec![c.to_string()]
        }
        None => ev.channels(),
    };
    if channels.is_empty() {
        bail!("event {} has no channels to plot", ev.id);
    }
    match kind {
        PlotKind::Bode => bode::render(ev, &channels, baseline),
        PlotKind::Polar => polar::render(ev, &channels, baseline),
        PlotKind::OrderMap => order_map::render(ev, &channels),
    }
}

/// Phase lags made continuous along a sweep (no jumps of 360°), the first one kept in 0..360: a
/// phase that rises through a critical is then drawn as the rise it is.
pub(crate) fn unwrap_lags(points: &[VectorPoint]) -> Vec<f64> {
    let mut out = Vec::with_capacity(points.len());
    let mut prev: Option<f64> = None;
    for p in points {
        let v = match prev {
            None => p.vector.phase_deg,
            Some(last) => last + super::phase_diff(p.vector.phase_deg, last),
        };
        out.push(v);
        prev = Some(v);
    }
    out
}
