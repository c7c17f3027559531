//! The order map: order-spectrum amplitude over speed as a colour map, order up the side, with the
//! 1X and 2X order lines and the criticals marked. An order-related peak stays on its order line
//! as speed changes; a fixed-frequency resonance instead follows a curve order = f·60/N, drawn
//! through each critical, so the two can be told apart at a glance.

use super::pe;
use super::style::{self, CRITICAL, FONT, INK};
use crate::review::EventData;
use anyhow::Result;
use plotters::prelude::*;
use veer_storage::OrderMapRow;

const W: u32 = 1000;
const CHANNEL_H: u32 = 480;
/// Highest order shown.
const MAX_ORDER: f64 = 6.0;
/// Finest order resolution drawn: finer bins are merged (by their maximum) to keep the file small.
const DRAW_STEP: f64 = 0.125;
/// Orders below this are left out of the picture and the scale (the DC bin holds probe gap).
const MIN_ORDER: f64 = 0.25;
/// Cells below this fraction of the scale are left as the background (the scale's bottom colour).
const FLOOR: f64 = 0.02;

/// Draws the order map of the channels, one panel each.
pub(crate) fn render(ev: &EventData, channels: &[String]) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (W, CHANNEL_H * channels.len() as u32))
            .into_drawing_area();
        root.fill(&WHITE).map_err(pe)?;
        let areas = root.split_evenly((channels.len(), 1));
        for (area, ch) in areas.iter().zip(channels) {
            panel(area, ev, ch)?;
        }
        root.present().map_err(pe)?;
    }
    let title = format!(
        "Order map, event {} ({} {}), order-spectrum amplitude against speed",
        ev.id,
        ev.machine.id,
        ev.event.kind.as_str()
    );
    Ok(style::finish(&svg, &title))
}

/// One spectrum reduced to the drawn orders: (order at the cell's centre, amplitude).
fn cells(row: &OrderMapRow) -> Vec<(f64, f64)> {
    let step = row.order_step;
    if !(step > 0.0) {
        return Vec::new();
    }
    let merge = (DRAW_STEP / step).round().max(1.0) as usize;
    let dstep = step * merge as f64;
    let mut out = Vec::new();
    for (i, chunk) in row.amplitudes.chunks(merge).enumerate() {
        let order = i as f64 * dstep;
        if !(MIN_ORDER - 1e-9..=MAX_ORDER + 1e-9).contains(&order) {
            continue;
        }
        let a = chunk.iter().fold(0.0f32, |m, &x| m.max(x));
        out.push((order, f64::from(a)));
    }
    out
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    ev: &EventData,
    ch: &str,
) -> Result<()>
where
    DB::ErrorType: 'static,
{
    let units = ev.units(ch);
    let mut rows: Vec<&OrderMapRow> = ev.order_map.iter().filter(|r| r.channel == ch).collect();
    rows.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    let xmax = rows.last().map_or(1.0, |r| r.speed_rpm) * 1.04;
    let (map_area, bar_area) = area.split_horizontally(W - 110);
    let mut chart = ChartBuilder::on(&map_area)
        .caption(
            format!(
                "Event {} · {} {} · channel {} · order map",
                ev.id,
                ev.machine.id,
                ev.event.kind.as_str(),
                ch
            ),
            (FONT, 20).into_font().color(&INK),
        )
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(64)
        .build_cartesian_2d(0.0..xmax, 0.0..MAX_ORDER + 0.25)
        .map_err(pe)?;
    let all: Vec<(usize, Vec<(f64, f64)>)> = rows
        .iter()
        .enumerate()
        .map(|(i, r)| (i, cells(r)))
        .collect();
    let amax = all
        .iter()
        .flat_map(|(_, c)| c.iter().map(|x| x.1))
        .fold(0.0f64, f64::max)
        .max(1e-12);
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(0.0, 0.0), (xmax, MAX_ORDER + 0.25)],
            style::scale(0.0).filled(),
        )))
        .map_err(pe)?;
    let half = DRAW_STEP / 2.0;
    for (i, c) in &all {
        let n = rows[*i].speed_rpm;
        let lo = if *i == 0 {
            (n - 10.0).max(0.0)
        } else {
            0.5 * (n + rows[i - 1].speed_rpm)
        };
        let hi = if i + 1 == rows.len() {
            n + 10.0
        } else {
            0.5 * (n + rows[i + 1].speed_rpm)
        };
        let rects = c.iter().filter(|(_, a)| *a / amax >= FLOOR).map(|&(o, a)| {
            Rectangle::new(
                [(lo, o - half), (hi, o + half)],
                style::scale(a / amax).filled(),
            )
        });
        chart.draw_series(rects).map_err(pe)?;
    }
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc("Speed, r/min")
        .y_desc("Order (multiple of running speed)")
        .x_label_formatter(&|v| format!("{v:.0}"))
        .y_label_formatter(&|v| format!("{v:.0}X"))
        .y_labels(8)
        .label_style((FONT, 14).into_font().color(&INK))
        .axis_desc_style((FONT, 15).into_font().color(&INK))
        .draw()
        .map_err(pe)?;
    for (o, name) in [(1.0, "1X"), (2.0, "2X")] {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(0.0, o), (xmax, o)],
                8,
                5,
                WHITE.mix(0.8).stroke_width(1),
            ))
            .map_err(pe)?;
        chart
            .draw_series(std::iter::once(Text::new(
                name.to_string(),
                (xmax * 0.005, o + 0.08),
                (FONT, 14).into_font().color(&WHITE),
            )))
            .map_err(pe)?;
    }
    for c in ev.resonances_of(ch) {
        let nc = c.speed_rpm;
        let order = f64::from(c.order.max(1));
        // The fixed-frequency curve through the critical: order = order_c · Nc / N.
        let curve: Vec<(f64, f64)> = (0..=200)
            .map(|i| nc * order / MAX_ORDER + (xmax - nc * order / MAX_ORDER) * i as f64 / 200.0)
            .filter(|n| *n > 0.0)
            .map(|n| (n, order * nc / n))
            .collect();
        chart
            .draw_series(DashedLineSeries::new(curve, 4, 4, CRITICAL.stroke_width(2)))
            .map_err(pe)?;
        chart
            .draw_series(std::iter::once(Circle::new(
                (nc, order),
                8,
                CRITICAL.stroke_width(3),
            )))
            .map_err(pe)?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!(
                    "Nc {} r/min ({:.1} Hz)",
                    super::bode::rpm_text(nc),
                    nc * order / 60.0
                ),
                (nc, order + 0.3),
                (FONT, 14).into_font().color(&WHITE),
            )))
            .map_err(pe)?;
    }
    // The colour scale, with its numbers.
    let mut bar = ChartBuilder::on(&bar_area)
        .margin_top(44)
        .margin_bottom(56)
        .margin_right(8)
        .y_label_area_size(56)
        .build_cartesian_2d(0.0..1.0, 0.0..amax)
        .map_err(pe)?;
    let steps = 64;
    bar.draw_series((0..steps).map(|i| {
        let a = amax * i as f64 / steps as f64;
        let b = amax * (i + 1) as f64 / steps as f64;
        Rectangle::new(
            [(0.0, a), (1.0, b)],
            style::scale((a + b) / 2.0 / amax).filled(),
        )
    }))
    .map_err(pe)?;
    bar.configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_desc(format!("amplitude, {units} (linear)"))
        .y_label_formatter(&|v| format!("{v:.1}"))
        .label_style((FONT, 12).into_font().color(&INK))
        .axis_desc_style((FONT, 13).into_font().color(&INK))
        .draw()
        .map_err(pe)?;
    Ok(())
}
