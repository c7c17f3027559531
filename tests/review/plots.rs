//! `veer plot`: the SVG read back. Axes carry their units and the phase convention, the marks of
//! the criticals sit at the criticals' speeds on the speed axis, and the polar plot's points turn
//! the way the stored phase lag does.

use super::plant;
use super::svg::{axis, labels, polylines};
use crate::support::num;
use veer_storage::{Series, Store};

/// Critical marks, compensated curve (the plots' palette).
const CRITICAL: &str = "#D55E00";
const COMPENSATED: &str = "#0072B2";

fn plot(kind: &str, event: i64, channel: &str) -> String {
    let p = plant();
    let out = p.dir.join(format!("{kind}-{event}-{channel}.svg"));
    let o = out.display().to_string();
    let ev = event.to_string();
    p.run(&p.db_args(&[
        "plot",
        &ev,
        "--kind",
        kind,
        "--channel",
        channel,
        "--out",
        &o,
    ]));
    let svg = std::fs::read_to_string(&out).expect("the plot was written");
    assert!(
        svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"),
        "an SVG document"
    );
    svg
}

#[test]
fn bode_has_units_phase_convention_and_marks_at_the_criticals() {
    let p = plant();
    let id = p.event_id("tg-1", "run-up");
    let svg = plot("bode", id, "x");
    let l = labels(&svg);
    let has = |s: &str| l.iter().any(|x| x.text.contains(s));
    for want in [
        "Speed, r/min",
        "1X amplitude, µm pk-pk",
        "phase lag, °",
        "reference pulse to the next positive 1X peak",
        "operating range",
        "required separation margin",
    ] {
        assert!(has(want), "no label {want:?}");
    }
    // The speed axis of the amplitude panel: its tick labels are the topmost numeric row.
    let top_ticks = l
        .iter()
        .filter(|x| x.text == "500")
        .map(|x| x.y)
        .fold(f64::MAX, f64::min);
    let (a, b) = axis(&l, true, top_ticks);
    let shown = p.json(&p.db_args(&["show", &id.to_string(), "--json"]));
    let crits = shown["channels"][0]["criticals"]
        .as_array()
        .expect("criticals");
    assert_eq!(crits.len(), 2);
    // Every critical: a vertical mark at its speed (within a pixel of rounding) and its AF label.
    let marks: Vec<f64> = polylines(&svg, CRITICAL)
        .into_iter()
        .filter(|pts| pts.len() == 2 && pts[0].0 == pts[1].0)
        .map(|pts| a + b * pts[0].0)
        .collect();
    for c in crits {
        let nc = num(c, "speed_rpm");
        let px_rpm = b.abs() * 1.5;
        assert!(
            marks.iter().any(|m| (m - nc).abs() <= px_rpm),
            "no mark at {nc}: {marks:?}"
        );
        let af = format!("AF {:.1}", num(c, "amplification_factor"));
        let lab = l
            .iter()
            .find(|x| x.text.contains(&af))
            .unwrap_or_else(|| panic!("no {af} label"));
        assert!(
            (a + b * lab.x - nc).abs() <= px_rpm,
            "label {lab:?} at {nc}"
        );
    }
    // Raw and compensated curves are both drawn.
    assert!(polylines(&svg, "#808080").iter().any(|p| p.len() > 100));
    assert!(polylines(&svg, COMPENSATED).iter().any(|p| p.len() > 100));
}

#[test]
fn polar_points_turn_the_way_the_phase_lag_does() {
    let p = plant();
    let id = p.event_id("tg-1", "run-up");
    let svg = plot("polar", id, "x");
    let l = labels(&svg);
    assert!(
        l.iter().any(|x| x.text.contains("lag growing clockwise")),
        "phase convention stated"
    );
    assert!(
        l.iter().any(|x| x.text.contains("µm pk-pk")),
        "units on the axes"
    );
    let bottom = l
        .iter()
        .filter(|x| x.text == "0")
        .map(|x| x.y)
        .fold(f64::MIN, f64::max);
    let (ax, bx) = axis(&l, true, bottom);
    let left = l
        .iter()
        .filter(|x| x.text == "0")
        .map(|x| x.x)
        .fold(f64::MAX, f64::min);
    let (ay, by) = axis(&l, false, left);
    let curve = polylines(&svg, COMPENSATED)
        .into_iter()
        .max_by_key(Vec::len)
        .expect("the vector curve");
    let store = Store::open_read_only(p.dir.join("veer.db")).expect("db");
    let trace = store
        .vectors(id)
        .expect("vectors")
        .into_iter()
        .find(|t| t.channel == "x" && t.order == 1 && t.series == Series::Compensated)
        .expect("compensated 1X");
    assert_eq!(
        curve.len(),
        trace.points.len(),
        "one plotted point per stored vector"
    );
    let amax = trace
        .points
        .iter()
        .map(|q| q.vector.amplitude)
        .fold(0.0, f64::max);
    let mut checked = 0;
    for (px, q) in curve.iter().zip(&trace.points) {
        if q.vector.amplitude < 0.3 * amax {
            continue; // near the origin a pixel is many degrees
        }
        let (x, y) = (ax + bx * px.0, ay + by * px.1);
        // The stored vector is amplitude·e^{−j·lag}: lag = −atan2(im, re).
        let lag = (-y.atan2(x)).to_degrees().rem_euclid(360.0);
        let d = (lag - q.vector.phase_deg + 180.0).rem_euclid(360.0) - 180.0;
        assert!(
            d.abs() < 3.0,
            "at {:.0} r/min: plotted lag {lag:.1} vs stored {:.1}",
            q.speed_rpm,
            q.vector.phase_deg
        );
        checked += 1;
    }
    assert!(checked > 100, "{checked} points checked");
    // Criticals are marked and labelled.
    assert!(l.iter().filter(|x| x.text.starts_with("Nc ")).count() == 2);
}

#[test]
fn order_map_states_its_scale_and_marks_orders_and_criticals() {
    let p = plant();
    let id = p.event_id("tg-1", "coast-down");
    let svg = plot("order-map", id, "y");
    let l = labels(&svg);
    for want in [
        "Speed, r/min",
        "Order",
        "amplitude, µm pk-pk (linear)",
        "1X",
        "2X",
        "Nc ",
    ] {
        assert!(l.iter().any(|x| x.text.contains(want)), "no label {want:?}");
    }
    // The colour scale has numbers from 0 up.
    assert!(l.iter().any(|x| x.text == "0.0"));
    // Many cells of colour.
    assert!(svg.matches("<rect").count() > 200);
}
