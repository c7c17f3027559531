//! The polar plot: the tip of the compensated 1X vector as speed changes, points labelled with
//! their speed and criticals marked. The angle is the phase lag, 0° at the right and growing
//! clockwise (the vector is amplitude·e^{−j·lag}, as stored); rings carry the amplitude.

use super::pe;
use super::style::{self, BASELINE, COMPENSATED, CRITICAL, FONT, INK};
use crate::review::EventData;
use anyhow::Result;
use plotters::prelude::*;
use veer_storage::VectorTrace;

/// Side of one channel's square plot, pixels.
const SIDE: u32 = 640;

fn xy(t: &VectorTrace) -> Vec<(f64, f64)> {
    t.points.iter().map(|p| p.vector.to_re_im()).collect()
}

/// Draws the polar plot of the channels, side by side.
pub(crate) fn render(
    ev: &EventData,
    channels: &[String],
    baseline: Option<&EventData>,
) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (SIDE * channels.len() as u32, SIDE + 40))
            .into_drawing_area();
        root.fill(&WHITE).map_err(pe)?;
        let areas = root.split_evenly((1, channels.len()));
        for (area, ch) in areas.iter().zip(channels) {
            panel(area, ev, ch, baseline)?;
        }
        root.present().map_err(pe)?;
    }
    let title = format!(
        "Polar plot, event {} ({} {}), compensated 1X vector against speed",
        ev.id,
        ev.machine.id,
        ev.event.kind.as_str()
    );
    Ok(style::finish(&svg, &title))
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    ev: &EventData,
    ch: &str,
    baseline: Option<&EventData>,
) -> Result<()>
where
    DB::ErrorType: 'static,
{
    let units = ev.units(ch);
    let Some(t) = ev.best_1x(ch) else {
        area.draw(&Text::new(
            format!("channel {ch}: no 1X vectors stored"),
            (40, 40),
            (FONT, 16),
        ))
        .map_err(pe)?;
        return Ok(());
    };
    let base = baseline.and_then(|b| b.best_1x(ch));
    let rmax = t
        .points
        .iter()
        .chain(base.map_or(&[][..], |b| &b.points[..]))
        .map(|p| p.vector.amplitude)
        .fold(0.0f64, f64::max)
        .max(1e-9);
    let ring = style::nice_step(rmax, 4.0);
    let r = (rmax / ring).ceil() * ring * 1.12;
    let (plot, foot) = area.split_vertically(SIDE);
    let mut chart = ChartBuilder::on(&plot)
        .caption(
            format!(
                "Event {} · {} · channel {} · 1X polar ({})",
                ev.id,
                ev.event.kind.as_str(),
                ch,
                t.series.as_str()
            ),
            (FONT, 18).into_font().color(&INK),
        )
        .margin(12)
        .x_label_area_size(36)
        .y_label_area_size(56)
        .build_cartesian_2d(-r..r, -r..r)
        .map_err(pe)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(units.clone())
        .y_desc(units.clone())
        .x_label_formatter(&|v| format!("{v:.0}"))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style((FONT, 13).into_font().color(&INK))
        .axis_desc_style((FONT, 14).into_font().color(&INK))
        .draw()
        .map_err(pe)?;
    // Rings and spokes.
    let mut a = ring;
    while a < r {
        let circle: Vec<(f64, f64)> = (0..=120)
            .map(|i| {
                let th = i as f64 / 120.0 * std::f64::consts::TAU;
                (a * th.cos(), a * th.sin())
            })
            .collect();
        chart
            .draw_series(LineSeries::new(circle, INK.mix(0.15)))
            .map_err(pe)?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!("{a:.0}"),
                (
                    a * std::f64::consts::FRAC_1_SQRT_2,
                    a * std::f64::consts::FRAC_1_SQRT_2,
                ),
                (FONT, 12).into_font().color(&INK.mix(0.6)),
            )))
            .map_err(pe)?;
        a += ring;
    }
    for lag in (0..360).step_by(30) {
        let th = -(lag as f64).to_radians();
        chart
            .draw_series(LineSeries::new(
                vec![(0.0, 0.0), (r * th.cos(), r * th.sin())],
                INK.mix(0.12),
            ))
            .map_err(pe)?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!("{lag}°"),
                (0.9 * r * th.cos(), 0.9 * r * th.sin()),
                (FONT, 13).into_font().color(&INK),
            )))
            .map_err(pe)?;
    }
    if let Some(b) = base {
        chart
            .draw_series(DashedLineSeries::new(xy(b), 6, 4, BASELINE.stroke_width(2)))
            .map_err(pe)?
            .label(format!("baseline event {}", baseline.map_or(0, |x| x.id)))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BASELINE.stroke_width(2)));
    }
    chart
        .draw_series(LineSeries::new(xy(t), COMPENSATED.stroke_width(2)))
        .map_err(pe)?
        .label(format!("event {} 1X, {}", ev.id, t.series.as_str()))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], COMPENSATED.stroke_width(2)));
    // Speed labels at round speeds, about a dozen along the sweep.
    let (lo, hi) = t
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.speed_rpm), b.max(p.speed_rpm))
        });
    let step = style::nice_step(hi - lo, 10.0);
    let mut last_bucket: Option<i64> = None;
    for p in &t.points {
        let bucket = (p.speed_rpm / step).floor() as i64;
        if last_bucket.is_some_and(|b| b != bucket) && p.vector.amplitude >= 0.08 * rmax {
            let (x, y) = p.vector.to_re_im();
            chart
                .draw_series(std::iter::once(Circle::new(
                    (x, y),
                    3,
                    COMPENSATED.filled(),
                )))
                .map_err(pe)?;
            chart
                .draw_series(std::iter::once(Text::new(
                    format!(
                        "{:.0}",
                        (bucket.max(last_bucket.unwrap_or(bucket)) as f64) * step
                    ),
                    (x, y),
                    (FONT, 12).into_font().color(&COMPENSATED),
                )))
                .map_err(pe)?;
        }
        last_bucket = Some(bucket);
    }
    if let (Some(first), Some(last)) = (t.points.first(), t.points.last()) {
        for (p, what, dy) in [(first, "start", 0.0), (last, "end", -0.05 * r)] {
            let (x, y) = p.vector.to_re_im();
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x, y), (x, y)],
                    INK.stroke_width(6),
                )))
                .map_err(pe)?;
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("{what} {:.0} r/min", p.speed_rpm),
                    (x, y + dy),
                    (FONT, 12).into_font().color(&INK),
                )))
                .map_err(pe)?;
        }
    }
    for c in ev.resonances_of(ch) {
        let Some(p) = t.points.iter().min_by(|a, b| {
            (a.speed_rpm - c.speed_rpm)
                .abs()
                .total_cmp(&(b.speed_rpm - c.speed_rpm).abs())
        }) else {
            continue;
        };
        let (x, y) = p.vector.to_re_im();
        chart
            .draw_series(std::iter::once(Circle::new(
                (x, y),
                7,
                CRITICAL.stroke_width(3),
            )))
            .map_err(pe)?;
        let af = c
            .amplification_factor
            .map_or("-".to_string(), |a| format!("{a:.1}"));
        chart
            .draw_series(std::iter::once(Text::new(
                format!("Nc {} r/min, AF {af}", super::bode::rpm_text(c.speed_rpm)),
                (x + r * 0.03, y - r * 0.03),
                (FONT, 14).into_font().color(&CRITICAL),
            )))
            .map_err(pe)?;
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperLeft)
        .background_style(WHITE.mix(0.85))
        .border_style(INK.mix(0.3))
        .label_font((FONT, 13).into_font().color(&INK))
        .draw()
        .map_err(pe)?;
    foot.draw(&Text::new(
        "Angle: 1X phase lag from the reference pulse, 0° at right, lag growing clockwise; rings: amplitude.",
        (12, 8),
        (FONT, 13).into_font().color(&INK),
    ))
    .map_err(pe)?;
    Ok(())
}
