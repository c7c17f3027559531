//! The Bode plot: 1X amplitude and phase lag against speed on one speed axis, raw and slow-roll
//! compensated, with the criticals marked by their AF, the half-power points, the operating range
//! and the required separation-margin bands shaded.

use super::style::{
    self, BASELINE, COMPENSATED, CRITICAL, FONT, HALF_POWER, INK, MARGIN, MEASURED, RANGE,
};
use super::{pe, unwrap_lags};
use crate::review::EventData;
use anyhow::Result;
use plotters::prelude::*;
use veer_storage::{Series, VectorTrace};
use veer_tracker::margin::{actual_margin_pct, required_margin_pct, Side};

/// Height of one channel's pair of panels, pixels.
const CHANNEL_H: u32 = 620;
/// Width, pixels.
const W: u32 = 1000;

/// The required margin on each side of the range for this event: the largest the rule asks of
/// the criticals on that side, or the rule's most conservative figure when none lies there.
pub(crate) fn margin_bands(ev: &EventData) -> Option<(f64, f64, f64, f64)> {
    let rg = ev.range?;
    let mut below: Option<f64> = None;
    let mut above: Option<f64> = None;
    for c in &ev.resonances {
        let (side, _) = actual_margin_pct(c.speed_rpm, &rg);
        let req = required_margin_pct(ev.rule, c.amplification_factor, side);
        match side {
            Side::Below => below = Some(below.map_or(req, |b: f64| b.max(req))),
            Side::Above => above = Some(above.map_or(req, |b: f64| b.max(req))),
            Side::Inside => {}
        }
    }
    let below = below.unwrap_or_else(|| required_margin_pct(ev.rule, None, Side::Below));
    let above = above.unwrap_or_else(|| required_margin_pct(ev.rule, None, Side::Above));
    Some((rg.min_rpm, rg.max_rpm, below, above))
}

fn speed_max(ev: &EventData, baseline: Option<&EventData>) -> f64 {
    let mut m = ev.event.speed_start_rpm.max(ev.event.speed_end_rpm);
    for t in ev
        .vectors
        .iter()
        .chain(baseline.map_or(&[][..], |b| &b.vectors[..]))
    {
        for p in &t.points {
            m = m.max(p.speed_rpm);
        }
    }
    if let Some((_, hi, _, above)) = margin_bands(ev) {
        m = m.max(hi * (1.0 + above / 100.0));
    }
    (m * 1.04).max(1.0)
}

fn pts(t: &VectorTrace) -> Vec<(f64, f64)> {
    t.points
        .iter()
        .map(|p| (p.speed_rpm, p.vector.amplitude))
        .collect()
}

/// Phase points of a trace, leaving out those whose amplitude is below [`PHASE_FLOOR`] of the
/// trace's largest: a compensated vector near zero (at slow roll) has no meaningful phase, and
/// its noise would throw the unwrapped curve off by turns.
fn phase_pts(t: &VectorTrace) -> Vec<(f64, f64)> {
    let amax = t
        .points
        .iter()
        .map(|p| p.vector.amplitude)
        .fold(0.0f64, f64::max);
    let kept: Vec<_> = t
        .points
        .iter()
        .filter(|p| p.vector.amplitude >= PHASE_FLOOR * amax)
        .copied()
        .collect();
    let lags = unwrap_lags(&kept);
    // The same turn for every curve, run-up or coast-down: the lag at the lowest speed drawn
    // lies in 0..360.
    let shift = kept
        .iter()
        .zip(&lags)
        .min_by(|a, b| a.0.speed_rpm.total_cmp(&b.0.speed_rpm))
        .map_or(0.0, |(_, l)| l.div_euclid(360.0) * 360.0);
    kept.iter()
        .zip(lags)
        .map(|(p, l)| (p.speed_rpm, l - shift))
        .collect()
}

/// Fraction of a trace's largest amplitude below which its phase is not drawn.
const PHASE_FLOOR: f64 = 0.05;

/// A speed as labelled everywhere (rounded to 0.1 r/min first, as `show` prints it).
pub(crate) fn rpm_text(x: f64) -> String {
    format!("{:.0}", (x * 10.0).round() / 10.0)
}

/// Draws the Bode plot of the channels, one pair of panels each.
pub(crate) fn render(
    ev: &EventData,
    channels: &[String],
    baseline: Option<&EventData>,
) -> Result<String> {
    let mut svg = String::new();
    let h = CHANNEL_H * channels.len() as u32;
    {
        let root = SVGBackend::with_string(&mut svg, (W, h)).into_drawing_area();
        root.fill(&WHITE).map_err(pe)?;
        let areas = root.split_evenly((channels.len(), 1));
        for (area, ch) in areas.iter().zip(channels) {
            panel(area, ev, ch, baseline)?;
        }
        root.present().map_err(pe)?;
    }
    let title = format!(
        "Bode plot, event {} ({} {}), 1X amplitude and phase lag against speed",
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
    let xmax = speed_max(ev, baseline);
    let meas = ev.trace(ch, 1, Series::Measured);
    let comp = ev.trace(ch, 1, Series::Compensated);
    let base = baseline.and_then(|b| b.best_1x(ch));
    let traces: Vec<&VectorTrace> = [meas, comp, base].into_iter().flatten().collect();
    let amax = traces
        .iter()
        .flat_map(|t| t.points.iter().map(|p| p.vector.amplitude))
        .fold(0.0f64, f64::max)
        .max(1e-9)
        * 1.22;
    let phases: Vec<Vec<(f64, f64)>> = traces.iter().map(|t| phase_pts(t)).collect();
    let (mut pmin, mut pmax) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in phases.iter().flatten() {
        pmin = pmin.min(p.1);
        pmax = pmax.max(p.1);
    }
    if !pmin.is_finite() {
        (pmin, pmax) = (0.0, 360.0);
    }
    let pstep = [45.0, 90.0, 180.0, 360.0]
        .into_iter()
        .find(|s| (pmax - pmin) / s <= 7.0)
        .unwrap_or(720.0);
    let (pmin, pmax) = (
        (pmin / pstep).floor() * pstep,
        (pmax / pstep).ceil() * pstep,
    );

    let title = format!(
        "Event {} · {} {} · channel {} · 1X Bode",
        ev.id,
        ev.machine.id,
        ev.event.kind.as_str(),
        ch
    );
    let (top, rest) = area.split_vertically(340);
    let (bottom, foot) = rest.split_vertically(250);
    let mut amp = ChartBuilder::on(&top)
        .caption(title, (FONT, 22).into_font().color(&INK))
        .margin(12)
        .margin_right(24)
        .x_label_area_size(28)
        .y_label_area_size(72)
        .build_cartesian_2d(0.0..xmax, 0.0..amax)
        .map_err(pe)?;
    shade(&mut amp, ev, 0.0, amax)?;
    let adigits = if amax >= 10.0 {
        0
    } else if amax >= 1.0 {
        1
    } else {
        2
    };
    amp.configure_mesh()
        .y_desc(format!("1X amplitude, {units}"))
        .x_label_formatter(&|v| format!("{v:.0}"))
        .y_label_formatter(&|v| format!("{v:.adigits$}"))
        .label_style((FONT, 14).into_font().color(&INK))
        .axis_desc_style((FONT, 15).into_font().color(&INK))
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(INK.mix(0.10))
        .draw()
        .map_err(pe)?;
    if let Some(b) = base {
        amp.draw_series(DashedLineSeries::new(
            pts(b),
            6,
            4,
            BASELINE.stroke_width(2),
        ))
        .map_err(pe)?
        .label(format!(
            "baseline event {} (compensated)",
            baseline.map_or(0, |x| x.id)
        ))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BASELINE.stroke_width(2)));
    }
    if let Some(m) = meas {
        amp.draw_series(LineSeries::new(pts(m), MEASURED.stroke_width(1)))
            .map_err(pe)?
            .label("measured (raw)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], MEASURED.stroke_width(1)));
    }
    if let Some(c) = comp {
        amp.draw_series(LineSeries::new(pts(c), COMPENSATED.stroke_width(2)))
            .map_err(pe)?
            .label("slow-roll compensated")
            .legend(|(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], COMPENSATED.stroke_width(2))
            });
    }
    for c in ev.resonances_of(ch) {
        let line = DashedLineSeries::new(
            vec![(c.speed_rpm, 0.0), (c.speed_rpm, amax)],
            5,
            4,
            CRITICAL.stroke_width(2),
        );
        amp.draw_series(line).map_err(pe)?;
        let af = c
            .amplification_factor
            .map_or("-".to_string(), |a| format!("{a:.1}"));
        amp.draw_series(std::iter::once(Text::new(
            format!("Nc {} r/min, AF {af}", rpm_text(c.speed_rpm)),
            (c.speed_rpm, amax * 0.985),
            (FONT, 14).into_font().color(&CRITICAL),
        )))
        .map_err(pe)?;
        if let (Some(n1), Some(n2)) = (c.n1_rpm, c.n2_rpm) {
            let y = c.peak_amplitude / std::f64::consts::SQRT_2;
            amp.draw_series(LineSeries::new(
                vec![(n1, y), (n2, y)],
                HALF_POWER.stroke_width(2),
            ))
            .map_err(pe)?;
            amp.draw_series([n1, n2].map(|n| Circle::new((n, y), 4, HALF_POWER.filled())))
                .map_err(pe)?;
        }
    }
    amp.draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
        .map_err(pe)?
        .label("half-power points (0.707 × peak)")
        .legend(|(x, y)| Circle::new((x + 10, y), 4, HALF_POWER.filled()));
    amp.configure_series_labels()
        .position(SeriesLabelPosition::UpperLeft)
        .background_style(WHITE.mix(0.85))
        .border_style(INK.mix(0.3))
        .label_font((FONT, 13).into_font().color(&INK))
        .draw()
        .map_err(pe)?;

    let mut ph = ChartBuilder::on(&bottom)
        .margin(12)
        .margin_right(24)
        .x_label_area_size(44)
        .y_label_area_size(72)
        .build_cartesian_2d(0.0..xmax, pmin..pmax)
        .map_err(pe)?;
    shade(&mut ph, ev, pmin, pmax)?;
    ph.configure_mesh()
        .x_desc("Speed, r/min")
        .y_desc("1X phase lag, ° (unwrapped)")
        .x_label_formatter(&|v| format!("{v:.0}"))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .y_labels(((pmax - pmin) / pstep) as usize + 1)
        .label_style((FONT, 14).into_font().color(&INK))
        .axis_desc_style((FONT, 15).into_font().color(&INK))
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(INK.mix(0.10))
        .draw()
        .map_err(pe)?;
    for (t, p) in traces.iter().zip(&phases) {
        let is_base = base.is_some_and(|b| std::ptr::eq(*t, b));
        if is_base {
            ph.draw_series(DashedLineSeries::new(
                p.clone(),
                6,
                4,
                BASELINE.stroke_width(2),
            ))
            .map_err(pe)?;
        } else {
            let s = if t.series == Series::Compensated {
                COMPENSATED.stroke_width(2)
            } else {
                MEASURED.stroke_width(1)
            };
            ph.draw_series(LineSeries::new(p.clone(), s)).map_err(pe)?;
        }
    }
    for c in ev.resonances_of(ch) {
        let line = DashedLineSeries::new(
            vec![(c.speed_rpm, pmin), (c.speed_rpm, pmax)],
            5,
            4,
            CRITICAL.stroke_width(2),
        );
        ph.draw_series(line).map_err(pe)?;
    }
    let note = match margin_bands(ev) {
        Some((_, _, b, a)) => format!(
            "Shaded: green = operating range; yellow = required separation margin ({}: {b:.1} % below, {a:.1} % above).",
            ev.rule.name()
        ),
        None => "No operating range stored: no range or margin bands.".to_string(),
    };
    let font = (FONT, 13).into_font().color(&INK);
    foot.draw(&Text::new(
        "Phase lag: shaft angle from the reference pulse to the next positive 1X peak (phase not drawn where the amplitude is below 5 % of its peak).",
        (84, 0),
        font.clone(),
    ))
    .map_err(pe)?;
    foot.draw(&Text::new(note, (84, 16), font)).map_err(pe)?;
    Ok(())
}

/// Shades the required-margin bands and the operating range across a panel.
fn shade<DB: DrawingBackend>(
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    ev: &EventData,
    y0: f64,
    y1: f64,
) -> Result<()>
where
    DB::ErrorType: 'static,
{
    let Some((lo, hi, below, above)) = margin_bands(ev) else {
        return Ok(());
    };
    let bands = [
        (lo * (1.0 - below / 100.0), lo, MARGIN.mix(0.45)),
        (hi, hi * (1.0 + above / 100.0), MARGIN.mix(0.45)),
        (lo, hi, RANGE.mix(0.22)),
    ];
    for (a, b, c) in bands {
        if b > a {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(a, y0), (b, y1)],
                    c.filled(),
                )))
                .map_err(pe)?;
        }
    }
    Ok(())
}
