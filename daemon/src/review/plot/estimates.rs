//! The live critical-speed estimates over time: one panel per mode and channel, the estimate of
//! each informative window as a line in a ±2σ band, the windows that said nothing as hollow grey
//! marks, the windows that saw the 1X vector leave the model's locus (an unbalance change, not a
//! critical shift) as their own marks, and the speeds the estimate is judged against as horizontal
//! lines: the measured critical the model was fitted on, the ends of the operating range and the
//! speed at which the critical would enter the separation margin the rule requires.
//!
//! The time axis is hours from the first estimate drawn, so panels of one machine share it and
//! the reader does not have to decode dates on the axis; the UTC start is in each panel's axis
//! title and in the SVG's title.

use super::pe;
use super::style::{self, COMPENSATED, CRITICAL, FONT, HALF_POWER, INK, MARGIN, MEASURED, RANGE};
use crate::review::se;
use crate::timefmt::rfc3339;
use anyhow::{bail, Result};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::collections::BTreeMap;
use veer_storage::{CriticalOrigin, CriticalRow, EstimateRow, MachineRow, Store};
use veer_tracker::margin::{
    actual_margin_pct, required_margin_pct, MarginRule, OperatingRange, Side,
};

/// Height of one series' panel, pixels.
const PANEL_H: u32 = 500;
/// Width, pixels.
const W: u32 = 1000;
/// Points of one kind drawn as they are; above this a series is decimated for drawing (the SVG
/// would otherwise grow with the months of running, a few hundred bytes a window).
const MAX_DRAWN: usize = 3000;
/// Time buckets of a decimated series: about one per pixel column of the plot area.
const BUCKETS: usize = 880;
/// A gap between informative windows longer than this many times their median spacing breaks
/// the line: the machine was stopped or off its steady speed, and a line across would suggest
/// estimates that were never made.
const GAP_FACTOR: f64 = 10.0;

/// A `change` value of a window that left the model's locus: a 1X vector change, not a critical
/// shift (docs/critical-estimate.md §4).
pub(crate) const UNBALANCE: &str = "unbalance";

/// A critical whose estimates a series holds: measured (estimated with its event's model) or
/// configured (estimated from the slope of the lag against the speed's wander).
#[derive(Clone, Debug)]
pub(crate) struct Anchor {
    /// Its critical-table row id.
    pub critical_id: i64,
    /// The event it was measured in; `None` for a configured critical.
    pub event_id: Option<i64>,
    /// The row itself.
    pub row: CriticalRow,
}

/// The estimates of one mode on one channel, of one or more criticals (a new run-up
/// gives a new critical and a new model; its estimates carry the series on).
#[derive(Clone, Debug)]
pub(crate) struct EstimateSeries {
    /// Which critical (1 for the lowest).
    pub mode: u32,
    /// The channel it was measured on (`-` when the row names none).
    pub channel: String,
    /// The measured criticals, by the time of their first estimate.
    pub anchors: Vec<Anchor>,
    /// The estimates of all of them, by time.
    pub rows: Vec<EstimateRow>,
}

impl EstimateSeries {
    /// The estimates of one of its criticals, by time.
    pub fn of(&self, critical_id: i64) -> impl Iterator<Item = &EstimateRow> {
        self.rows
            .iter()
            .filter(move |r| r.critical_id == critical_id)
    }
}

/// Whether a window counts for the estimate's line and trend: informative, and not a window
/// that left the locus (whose "estimate" would read an unbalance change as a critical shift).
pub(crate) fn counts(r: &EstimateRow) -> bool {
    r.informative && r.change.as_deref() != Some(UNBALANCE)
}

/// Reads a machine's estimates of the criticals `keep` accepts, grouped into series: a measured
/// critical's by the track its model follows the mode by (so the models of successive events
/// carry one line on), a configured critical's by channel.
pub(crate) fn load(
    store: &Store,
    machine: &str,
    keep: impl Fn(&CriticalRow) -> bool,
) -> Result<Vec<EstimateSeries>> {
    let mut criticals: BTreeMap<i64, (Anchor, Option<String>)> = BTreeMap::new();
    for c in store.criticals(machine).map_err(se)? {
        if !keep(&c.row) {
            continue;
        }
        let event_id = match c.origin {
            CriticalOrigin::Measured { event_id } => Some(event_id),
            CriticalOrigin::Design => None,
        };
        let track = match event_id {
            Some(_) => store.model(c.id).map_err(se)?.map(|m| m.track),
            None => None,
        };
        criticals.insert(
            c.id,
            (
                Anchor {
                    critical_id: c.id,
                    event_id,
                    row: c.row,
                },
                track,
            ),
        );
    }
    let mut by_series: BTreeMap<(u32, String, String), EstimateSeries> = BTreeMap::new();
    for e in store
        .machine_estimates(machine, f64::MIN, f64::MAX)
        .map_err(se)?
    {
        let Some((a, track)) = criticals.get(&e.critical_id) else {
            continue;
        };
        let channel = e
            .row
            .channel
            .clone()
            .or_else(|| a.row.channel.clone())
            .unwrap_or_else(|| "-".to_string());
        let name = match (a.event_id, track) {
            (Some(_), Some(t)) => t.clone(),
            (Some(_), None) => format!("{channel}:{}", a.row.mode),
            (None, _) => format!("{channel}:design-{}", a.row.mode),
        };
        let s = by_series
            .entry((a.row.mode, channel.clone(), name))
            .or_insert_with(|| EstimateSeries {
                mode: a.row.mode,
                channel,
                anchors: Vec::new(),
                rows: Vec::new(),
            });
        if !s.anchors.iter().any(|x| x.critical_id == a.critical_id) {
            s.anchors.push(a.clone());
        }
        s.rows.push(e.row);
    }
    let mut out: Vec<EstimateSeries> = by_series.into_values().collect();
    for s in &mut out {
        s.rows.sort_by(|a, b| a.time.total_cmp(&b.time));
        let first = |id: i64, rows: &[EstimateRow]| {
            rows.iter()
                .find(|r| r.critical_id == id)
                .map_or(f64::INFINITY, |r| r.time)
        };
        let rows = s.rows.clone();
        s.anchors
            .sort_by(|a, b| first(a.critical_id, &rows).total_cmp(&first(b.critical_id, &rows)));
    }
    Ok(out)
}

/// The speed at which a critical would enter the separation margin the rule requires of it: above
/// the range max continuous × (1 + required/100), below it min operating × (1 − required/100);
/// `None` for a critical inside the range (already in breach) or without a range. Returns the
/// speed and the required margin, percent.
pub(crate) fn margin_boundary(
    critical_rpm: f64,
    af: Option<f64>,
    range: &OperatingRange,
    rule: MarginRule,
) -> Option<(f64, f64)> {
    let (side, _) = actual_margin_pct(critical_rpm, range);
    let req = required_margin_pct(rule, af, side);
    match side {
        Side::Above => Some((range.max_rpm * (1.0 + req / 100.0), req)),
        Side::Below => Some((range.min_rpm * (1.0 - req / 100.0), req)),
        Side::Inside => None,
    }
}

/// One drawn point: hours, value, band low, band high.
type Pt = (f64, f64, f64, f64);

/// The points of one kind as drawn. Up to [`MAX_DRAWN`] they are kept as they are; beyond, the
/// time axis is cut into [`BUCKETS`] buckets (about one per pixel column) and each bucket keeps
/// its lowest and its highest value, in time order, with the band's extremes of the bucket —
/// min/max per column rather than bucket means, so that a single outlying window stays visible.
fn decimate(pts: &[Pt], x0: f64, x1: f64) -> Vec<Pt> {
    if pts.len() <= MAX_DRAWN || !(x1 > x0) {
        return pts.to_vec();
    }
    let width = (x1 - x0) / BUCKETS as f64;
    let mut out = Vec::with_capacity(2 * BUCKETS);
    let mut i = 0;
    while i < pts.len() {
        let b = ((pts[i].0 - x0) / width).floor();
        let mut j = i;
        let (mut lo_i, mut hi_i) = (i, i);
        let (mut band_lo, mut band_hi) = (f64::INFINITY, f64::NEG_INFINITY);
        while j < pts.len() && ((pts[j].0 - x0) / width).floor() == b {
            if pts[j].1 < pts[lo_i].1 {
                lo_i = j;
            }
            if pts[j].1 > pts[hi_i].1 {
                hi_i = j;
            }
            band_lo = band_lo.min(pts[j].2);
            band_hi = band_hi.max(pts[j].3);
            j += 1;
        }
        let (a, z) = (lo_i.min(hi_i), lo_i.max(hi_i));
        out.push((pts[a].0, pts[a].1, band_lo, band_hi));
        if z != a {
            out.push((pts[z].0, pts[z].1, band_lo, band_hi));
        }
        i = j;
    }
    out
}

/// The points split where the gap to the next exceeds `gap` hours.
fn segments(pts: &[Pt], gap: f64) -> Vec<&[Pt]> {
    let mut out = Vec::new();
    let mut start = 0;
    for i in 1..pts.len() {
        if pts[i].0 - pts[i - 1].0 > gap {
            out.push(&pts[start..i]);
            start = i;
        }
    }
    if start < pts.len() {
        out.push(&pts[start..]);
    }
    out
}

/// The longest gap a line is drawn across, hours: [`GAP_FACTOR`] median spacings, and at least a
/// hundredth of the axis (so a decimated series, two points a bucket, is never broken up).
fn max_gap(pts: &[Pt], span: f64) -> f64 {
    let mut d: Vec<f64> = pts.windows(2).map(|w| w[1].0 - w[0].0).collect();
    d.sort_by(f64::total_cmp);
    let median = d.get(d.len() / 2).copied().unwrap_or(span);
    (GAP_FACTOR * median).max(span / 100.0)
}

/// Draws the estimates of `series` as SVG text, one panel per series. No estimates at all is an
/// error for the caller to report: an empty plot would read as "nothing moved".
pub(crate) fn render(
    machine: &MachineRow,
    range: Option<OperatingRange>,
    rule: MarginRule,
    series: &[EstimateSeries],
) -> Result<String> {
    let drawn: Vec<&EstimateSeries> = series.iter().filter(|s| !s.rows.is_empty()).collect();
    let Some(t0) = drawn
        .iter()
        .filter_map(|s| s.rows.first().map(|r| r.time))
        .reduce(f64::min)
    else {
        bail!(
            "machine {}: no live critical-speed estimates to plot (they are made at steady speed, for a critical measured by a run-up or coast-down with a fitted model, or a configured one with an AF)",
            machine.id
        );
    };
    let t1 = drawn
        .iter()
        .filter_map(|s| s.rows.last().map(|r| r.time))
        .fold(t0, f64::max);
    let hours = ((t1 - t0) / 3600.0).max(0.0);
    let xmax = if hours > 0.0 { hours * 1.02 } else { 1.0 };
    let start = rfc3339(t0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (W, PANEL_H * drawn.len() as u32))
            .into_drawing_area();
        root.fill(&WHITE).map_err(pe)?;
        let areas = root.split_evenly((drawn.len(), 1));
        for (area, s) in areas.iter().zip(&drawn) {
            let p = PanelIn {
                machine,
                range,
                rule,
                t0,
                xmax,
                start: &start,
            };
            panel(area, &p, s)?;
        }
        root.present().map_err(pe)?;
    }
    let title = format!(
        "Live critical-speed estimates, machine {} ({}), hours from {start} (UTC)",
        machine.id, machine.name
    );
    Ok(style::finish(&svg, &title))
}

/// What every panel of one plot shares.
struct PanelIn<'a> {
    machine: &'a MachineRow,
    range: Option<OperatingRange>,
    rule: MarginRule,
    t0: f64,
    xmax: f64,
    start: &'a str,
}

/// A horizontal reference line of a panel: from, to (hours), speed, label, colour, dashed, and
/// whether its label sits at the right end (the range ends) or the left (the critical's lines),
/// so that lines a few r/min apart keep their labels apart.
struct RefLine {
    x0: f64,
    x1: f64,
    y: f64,
    label: String,
    colour: RGBColor,
    dashed: bool,
    right: bool,
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    p: &PanelIn<'_>,
    s: &EstimateSeries,
) -> Result<()>
where
    DB::ErrorType: 'static,
{
    let h = |t: f64| (t - p.t0) / 3600.0;
    let mut good: Vec<Pt> = Vec::new();
    let mut quiet: Vec<Pt> = Vec::new();
    let mut unbalance: Vec<Pt> = Vec::new();
    for r in &s.rows {
        let x = h(r.time);
        let y = r.estimate_rpm;
        if !(x.is_finite() && y.is_finite()) {
            continue;
        }
        if r.change.as_deref() == Some(UNBALANCE) {
            unbalance.push((x, y, y, y));
        } else if counts(r) {
            let two_sigma = 2.0 * r.uncertainty_rpm.filter(|u| u.is_finite()).unwrap_or(0.0);
            good.push((x, y, y - two_sigma, y + two_sigma));
        } else {
            quiet.push((x, y, y, y));
        }
    }
    let total = good.len() + quiet.len() + unbalance.len();
    let decimated = [&good, &quiet, &unbalance]
        .iter()
        .any(|v| v.len() > MAX_DRAWN);
    let good = decimate(&good, 0.0, p.xmax);
    let quiet = decimate(&quiet, 0.0, p.xmax);
    let unbalance = decimate(&unbalance, 0.0, p.xmax);

    // Reference lines: each anchor's measured critical and margin boundary over the hours of its
    // estimates (the whole axis when the series has one anchor), the range ends across the axis.
    let mut refs: Vec<RefLine> = Vec::new();
    let single = s.anchors.len() == 1;
    for a in &s.anchors {
        let (x0, x1) = if single {
            (0.0, p.xmax)
        } else {
            let times: Vec<f64> = s.of(a.critical_id).map(|r| h(r.time)).collect();
            (
                times.first().copied().unwrap_or(0.0),
                times.last().copied().unwrap_or(p.xmax),
            )
        };
        refs.push(RefLine {
            x0,
            x1,
            y: a.row.speed_rpm,
            label: format!(
                "{}: {} r/min{}",
                a.event_id
                    .map_or("configured critical".to_string(), |id| format!(
                        "measured critical, event {id}"
                    )),
                super::bode::rpm_text(a.row.speed_rpm),
                a.row
                    .amplification_factor
                    .map_or(String::new(), |af| format!(", AF {af:.1}"))
            ),
            colour: CRITICAL,
            dashed: true,
            right: false,
        });
        if let Some(rg) = p.range {
            if let Some((b, req)) =
                margin_boundary(a.row.speed_rpm, a.row.amplification_factor, &rg, p.rule)
            {
                refs.push(RefLine {
                    x0,
                    x1,
                    y: b,
                    label: format!(
                        "enters the required margin ({req:.1} %, {}): {} r/min",
                        p.rule.name(),
                        super::bode::rpm_text(b)
                    ),
                    colour: INK,
                    dashed: true,
                    right: false,
                });
            }
        }
    }
    // The near end of the range sets the axis with the boundary; the far end is drawn if it
    // falls on the axis anyway (a critical 50 % below the range need not squash the plot).
    let below = s.anchors.last().is_none_or(|a| {
        p.machine
            .min_operating_rpm
            .is_some_and(|m| a.row.speed_rpm < m)
    });
    let ends = [
        (p.machine.min_operating_rpm, "minimum operating", below),
        (p.machine.max_continuous_rpm, "maximum continuous", !below),
    ];

    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    let mut take = |v: f64| {
        if v.is_finite() {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    };
    for q in &good {
        take(q.2);
        take(q.3);
    }
    if good.is_empty() {
        for q in quiet.iter().chain(&unbalance) {
            take(q.1);
        }
    }
    for r in &refs {
        take(r.y);
    }
    for (v, _, near) in ends {
        if near {
            if let Some(v) = v {
                take(v);
            }
        }
    }
    let pad = ((hi - lo) * 0.08).max(10.0);
    let (ylo, yhi) = ((lo - pad).max(0.0), hi + pad);
    for (v, what, _) in ends {
        if let Some(v) = v.filter(|v| *v >= ylo && *v <= yhi) {
            refs.push(RefLine {
                x0: 0.0,
                x1: p.xmax,
                y: v,
                label: format!("{what} {} r/min", super::bode::rpm_text(v)),
                colour: RANGE,
                dashed: false,
                right: true,
            });
        }
    }

    let (plot_area, foot) = area.split_vertically(PANEL_H - 84);
    let mut chart = ChartBuilder::on(&plot_area)
        .caption(
            format!(
                "{} · mode {} · channel {} · live critical-speed estimate",
                p.machine.id, s.mode, s.channel
            ),
            (FONT, 20).into_font().color(&INK),
        )
        .margin(12)
        .margin_right(24)
        .x_label_area_size(44)
        .y_label_area_size(72)
        .build_cartesian_2d(0.0..p.xmax, ylo..yhi)
        .map_err(pe)?;
    // The operating range and the margin between it and each boundary, shaded as on the Bode plot.
    if let (Some(rg), Some(a)) = (p.range, s.anchors.last()) {
        let clip = |v: f64| v.clamp(ylo, yhi);
        let mut bands = vec![(rg.min_rpm, rg.max_rpm, RANGE.mix(0.22))];
        if let Some((b, _)) =
            margin_boundary(a.row.speed_rpm, a.row.amplification_factor, &rg, p.rule)
        {
            let edge = if b > rg.max_rpm {
                rg.max_rpm
            } else {
                rg.min_rpm
            };
            bands.push((b.min(edge), b.max(edge), MARGIN.mix(0.45)));
        }
        for (a, b, c) in bands {
            let (a, b) = (clip(a), clip(b));
            if b > a {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(0.0, a), (p.xmax, b)],
                        c.filled(),
                    )))
                    .map_err(pe)?;
            }
        }
    }
    // Enough decimals that ticks a fraction of an hour apart read apart.
    let decimals = if p.xmax >= 10.0 {
        0
    } else if p.xmax >= 1.0 {
        1
    } else {
        2
    };
    chart
        .configure_mesh()
        .x_desc(format!("Hours from {} (UTC)", p.start))
        .y_desc("Critical speed, r/min")
        .x_label_formatter(&|v| format!("{v:.decimals$}"))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style((FONT, 14).into_font().color(&INK))
        .axis_desc_style((FONT, 15).into_font().color(&INK))
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(INK.mix(0.10))
        .draw()
        .map_err(pe)?;

    let gap = max_gap(&good, p.xmax);
    let parts = segments(&good, gap);
    for seg in &parts {
        let mut poly: Vec<(f64, f64)> = seg.iter().map(|q| (q.0, q.3.min(yhi))).collect();
        poly.extend(seg.iter().rev().map(|q| (q.0, q.2.max(ylo))));
        chart
            .draw_series(std::iter::once(Polygon::new(
                poly,
                COMPENSATED.mix(0.18).filled(),
            )))
            .map_err(pe)?;
    }
    for seg in &parts {
        chart
            .draw_series(LineSeries::new(
                seg.iter().map(|q| (q.0, q.1)),
                COMPENSATED.stroke_width(2),
            ))
            .map_err(pe)?;
    }
    // A lone informative window between gaps has no line: mark it.
    chart
        .draw_series(
            parts
                .iter()
                .filter(|g| g.len() == 1)
                .map(|g| Circle::new((g[0].0, g[0].1), 3, COMPENSATED.filled())),
        )
        .map_err(pe)?;
    let clamp = |q: &Pt| (q.0, q.1.clamp(ylo, yhi));
    chart
        .draw_series(
            quiet
                .iter()
                .map(|q| Circle::new(clamp(q), 3, MEASURED.stroke_width(1))),
        )
        .map_err(pe)?;
    chart
        .draw_series(
            unbalance
                .iter()
                .map(|q| TriangleMarker::new(clamp(q), 5, HALF_POWER.filled())),
        )
        .map_err(pe)?;
    for r in &refs {
        let pts = vec![(r.x0, r.y), (r.x1, r.y)];
        if r.dashed {
            chart
                .draw_series(DashedLineSeries::new(pts, 6, 4, r.colour.stroke_width(2)))
                .map_err(pe)?;
        } else {
            chart
                .draw_series(LineSeries::new(pts, r.colour.stroke_width(2)))
                .map_err(pe)?;
        }
        // The label just above its line, at the line's left or right end.
        let (x, h) = if r.right {
            (r.x1 - 0.01 * p.xmax, HPos::Right)
        } else {
            (r.x0 + 0.01 * p.xmax, HPos::Left)
        };
        chart
            .draw_series(std::iter::once(Text::new(
                r.label.clone(),
                (x, r.y),
                (FONT, 13)
                    .into_font()
                    .color(&r.colour)
                    .pos(Pos::new(h, VPos::Bottom)),
            )))
            .map_err(pe)?;
    }
    legend(&foot)?;
    let font = (FONT, 13).into_font().color(&INK);
    let counted = s.rows.iter().filter(|r| counts(r)).count();
    foot.draw(&Text::new(
        format!(
            "{total} windows, {counted} informative. Estimate: the 1X amplitude peak, from the steady 1X phase (and amplitude) and the event's single-mode model, or for a configured critical from the slope of the phase against the speed's wander."
        ),
        (84, 44),
        font.clone(),
    ))
    .map_err(pe)?;
    let note = if decimated {
        format!(
            "Over {MAX_DRAWN} windows of a kind: drawn as the lowest and highest of each of {BUCKETS} time buckets. Marks beyond the axis sit at its edge."
        )
    } else {
        "Green: operating range; yellow: required separation margin. Marks beyond the axis sit at its edge."
            .to_string()
    };
    foot.draw(&Text::new(note, (84, 62), font)).map_err(pe)?;
    Ok(())
}

/// The legend, in two rows under the plot: inside it, it would hide marks or reference labels
/// in whichever corner it took.
fn legend<DB: DrawingBackend>(foot: &DrawingArea<DB, plotters::coord::Shift>) -> Result<()>
where
    DB::ErrorType: 'static,
{
    let font = (FONT, 13).into_font().color(&INK);
    let items = [
        (0, 84, "estimated critical speed (informative windows)"),
        (1, 520, "±2σ of the estimate"),
        (2, 84, "window not informative (see its reason)"),
        (3, 520, "1X vector change (unbalance): not a critical shift"),
    ];
    for (k, x, label) in items {
        let y = if k < 2 { 8 } else { 26 };
        match k {
            0 => foot.draw(&PathElement::new(
                vec![(x, y), (x + 22, y)],
                COMPENSATED.stroke_width(2),
            )),
            1 => foot.draw(&Rectangle::new(
                [(x, y - 5), (x + 22, y + 5)],
                COMPENSATED.mix(0.18).filled(),
            )),
            2 => foot.draw(&Circle::new((x + 11, y), 3, MEASURED.stroke_width(1))),
            _ => foot.draw(&TriangleMarker::new((x + 11, y), 5, HALF_POWER.filled())),
        }
        .map_err(pe)?;
        foot.draw(&Text::new(
            label,
            (x + 30, y),
            font.clone().pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(pe)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decimation_keeps_each_bucket_extremes_and_bounds_the_count() {
        // 20 000 points of a slow line with one spike: the spike must survive, the count must
        // fall to at most two a bucket.
        let mut pts: Vec<Pt> = (0..20_000)
            .map(|i| {
                let x = i as f64 * 0.01;
                (x, 1000.0 - x, 990.0 - x, 1010.0 - x)
            })
            .collect();
        pts[12_345].1 = 5000.0;
        let out = decimate(&pts, 0.0, 200.0);
        assert!(out.len() <= 2 * BUCKETS, "{}", out.len());
        assert!(out.iter().any(|p| p.1 == 5000.0), "the spike is kept");
        assert!(out.windows(2).all(|w| w[1].0 >= w[0].0), "time order kept");
        // Short series are drawn as they are.
        assert_eq!(decimate(&pts[..100], 0.0, 200.0).len(), 100);
    }

    #[test]
    fn lines_break_at_long_gaps_only() {
        let mut pts: Vec<Pt> = (0..10).map(|i| (i as f64, 0.0, 0.0, 0.0)).collect();
        pts.extend((0..10).map(|i| (100.0 + i as f64, 0.0, 0.0, 0.0)));
        let g = max_gap(&pts, 110.0);
        assert_eq!(segments(&pts, g).len(), 2);
    }

    #[test]
    fn boundary_follows_the_side_of_the_critical() {
        let rg = OperatingRange::new(2950.0, 3030.0).expect("a valid range");
        let rule = MarginRule::Fixed { percent: 10.0 };
        // Below: min × (1 − 10/100); above: max × (1 + 10/100) (the definition of the margin,
        // API RP 684; common practice).
        let (b, req) = margin_boundary(1400.0, Some(8.0), &rg, rule).expect("below");
        assert!((b - 2655.0).abs() < 1e-9 && req == 10.0);
        let (b, _) = margin_boundary(4000.0, Some(8.0), &rg, rule).expect("above");
        assert!((b - 3333.0).abs() < 1e-9);
        assert!(margin_boundary(3000.0, Some(8.0), &rg, rule).is_none());
    }
}
