//! The live critical-speed estimates in `veer margins` and `veer report`, against a database
//! written here with veer-storage: a machine, a run-up with a measured critical and its model, and
//! three days of estimates along a known straight line (the critical falling 100 r/min per day),
//! with windows that said nothing and windows that saw an unbalance change mixed in at values far
//! off the line, so that counting them in would show in the figures.

use super::svg::labels;
use crate::support::{num, num_or_null, one_error_line, success, text, Dir};
use serde_json::Value;
use std::path::{Path, PathBuf};
use veer_storage::{
    CriticalOrigin, CriticalRow, EstimateRow, EventChannelRow, EventKind, EventRow, MachineRow,
    ModelRow, Polar, Store,
};

const MACHINE: &str = "fan-9";
/// A machine with a measured critical but no estimates.
const IDLE: &str = "idle-1";
const MIN_RPM: f64 = 2950.0;
const MAX_RPM: f64 = 3030.0;
const CRITICAL_RPM: f64 = 1400.0;
const AF: f64 = 8.0;
/// Start of the run-up, unix seconds (2027-01-15).
const T_EVENT: f64 = 1_800_000_000.0;
/// The first estimate: an hour after the run-up.
const T_FIRST: f64 = T_EVENT + 600.0 + 3600.0;
/// The line the informative estimates follow, r/min per day.
const SLOPE: f64 = -100.0;
/// Estimates of the first series: three days, one every 15 minutes.
const N_X: usize = 288;
/// Estimates of the second series (mode 1 seen on channel y).
const N_Y: usize = 40;

/// What each window of the first series is, by its index.
fn kind_of(i: usize) -> &'static str {
    if i == N_X - 1 || i % 7 == 3 {
        // The last window too: the latest informative one is then not the last row.
        "quiet"
    } else if i % 23 == 5 {
        "unbalance"
    } else {
        "good"
    }
}

/// A deterministic scatter about the line, r/min (|noise| ≤ 4).
fn noise(i: usize) -> f64 {
    4.0 * (i as f64 * 1.7).sin()
}

/// σ of window `i`, r/min: 5 to 9, so the weights differ.
fn sigma(i: usize) -> f64 {
    5.0 + (i % 5) as f64
}

fn time_of(i: usize) -> f64 {
    T_FIRST + i as f64 * 900.0
}

fn on_line(t: f64) -> f64 {
    CRITICAL_RPM + SLOPE * (t - T_FIRST) / 86_400.0
}

fn row(critical_id: i64, i: usize, kind: &str) -> EstimateRow {
    let t = time_of(i);
    let base = EstimateRow {
        critical_id,
        time: t,
        speed_rpm: Some(2990.0 + (i % 3) as f64),
        revolutions: Some(400),
        ..EstimateRow::default()
    };
    match kind {
        "good" => EstimateRow {
            estimate_rpm: on_line(t) + noise(i),
            uncertainty_rpm: Some(sigma(i)),
            informative: true,
            method: Some("phase-and-amplitude".into()),
            change: Some(if i > 200 { "natural-speed" } else { "none" }.into()),
            locus_residual: Some(0.01),
            ..base
        },
        "unbalance" => EstimateRow {
            // Far off the line: counted in, it would bend the trend.
            estimate_rpm: 1900.0,
            uncertainty_rpm: Some(6.0),
            informative: false,
            method: Some("locus".into()),
            reason: Some("off-locus".into()),
            change: Some("unbalance".into()),
            locus_residual: Some(0.4),
            ..base
        },
        _ => EstimateRow {
            estimate_rpm: 2600.0,
            uncertainty_rpm: None,
            informative: false,
            method: Some("phase".into()),
            reason: Some("not-steady".into()),
            ..base
        },
    }
}

struct Db {
    path: PathBuf,
    /// The run-up whose criticals have estimates.
    run_up: i64,
    /// A later coast-down whose critical has none.
    coast_down: i64,
}

fn event(store: &mut Store, machine: &str, kind: EventKind, start: f64) -> i64 {
    let (a, b) = match kind {
        EventKind::RunUp => (300.0, 3000.0),
        EventKind::CoastDown => (3000.0, 300.0),
    };
    store
        .insert_event(&EventRow {
            machine: machine.into(),
            ingest_id: None,
            kind,
            start_time: start,
            end_time: start + 600.0,
            speed_start_rpm: a,
            speed_end_rpm: b,
            sweep_rate_rpm_s: (b - a) / 600.0,
            vector_count: 0,
            channels: ["x", "y"]
                .map(|c| EventChannelRow {
                    channel: c.into(),
                    units: "µm pk-pk".into(),
                    slow_roll: None,
                })
                .to_vec(),
        })
        .expect("insert an event")
}

fn measured(store: &mut Store, machine: &str, event: i64, channel: &str, at: f64) -> i64 {
    store
        .add_critical(&CriticalRow {
            machine: machine.into(),
            mode: 1,
            origin: CriticalOrigin::Measured { event_id: event },
            channel: Some(channel.into()),
            speed_rpm: CRITICAL_RPM,
            amplification_factor: Some(AF),
            damping_ratio: Some(0.062),
            valid_from: at,
        })
        .expect("add a critical")
}

fn build(dir: &Dir) -> Db {
    let path = dir.join("veer.db");
    let mut store = Store::open(&path).expect("create the database");
    for (id, name) in [(MACHINE, "Test fan"), (IDLE, "Idle fan")] {
        store
            .upsert_machine(&MachineRow {
                id: id.into(),
                name: name.into(),
                min_operating_rpm: Some(MIN_RPM),
                max_continuous_rpm: Some(MAX_RPM),
                trip_rpm: Some(3300.0),
            })
            .expect("a machine");
    }
    store
        .sync_design_criticals(&[CriticalRow {
            machine: MACHINE.into(),
            mode: 1,
            origin: CriticalOrigin::Design,
            channel: None,
            speed_rpm: 1450.0,
            amplification_factor: Some(6.0),
            damping_ratio: None,
            valid_from: 0.0,
        }])
        .expect("a design critical");
    let run_up = event(&mut store, MACHINE, EventKind::RunUp, T_EVENT);
    let cx = measured(&mut store, MACHINE, run_up, "x", T_EVENT + 600.0);
    let cy = measured(&mut store, MACHINE, run_up, "y", T_EVENT + 600.0);
    for c in [cx, cy] {
        store
            .insert_model(&ModelRow {
                critical_id: c,
                track: if c == cx { "x:1" } else { "y:1" }.to_string(),
                natural_rpm: 1395.0,
                damping_ratio: 0.062,
                modal: Polar {
                    amplitude: 20.0,
                    phase_deg: 40.0,
                },
                background: Polar {
                    amplitude: 1.0,
                    phase_deg: 0.0,
                },
                slow_roll: Polar {
                    amplitude: 0.0,
                    phase_deg: 0.0,
                },
                fit_residual: Some(0.02),
            })
            .expect("a model");
    }
    for i in 0..N_X {
        store
            .insert_estimate(&row(cx, i, kind_of(i)))
            .expect("an estimate");
    }
    for i in 0..N_Y {
        store
            .insert_estimate(&row(cy, i * 7, "good"))
            .expect("an estimate");
    }
    // A later coast-down with a critical of its own, never estimated.
    let coast_down = event(
        &mut store,
        MACHINE,
        EventKind::CoastDown,
        T_EVENT + 5.0 * 86_400.0,
    );
    measured(
        &mut store,
        MACHINE,
        coast_down,
        "x",
        T_EVENT + 5.0 * 86_400.0 + 600.0,
    );
    // The idle machine: an event and a measured critical, no estimates.
    let idle_ev = event(&mut store, IDLE, EventKind::RunUp, T_EVENT);
    measured(&mut store, IDLE, idle_ev, "x", T_EVENT + 600.0);
    drop(store);
    Db {
        path,
        run_up,
        coast_down,
    }
}

fn run(dir: &Dir, db: &Path, args: &[&str]) -> String {
    let d = db.display().to_string();
    let mut all: Vec<&str> = args.to_vec();
    all.extend(["--db", d.as_str()]);
    let o = dir.veer(&all);
    success(&o, &all)
}

/// API 617 7th ed. / API RP 684 2nd ed. (2005) separation margin below the range, percent:
/// 17·(1 − 1/(AF − 1.5)), capped at 16 (from memory, unconfirmed; as tests/review/margins.rs).
fn api_2005_below(af: f64) -> f64 {
    (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0)
}

/// Ordinary least squares, closed form (any regression text; common practice): the slope of
/// (x, y) and its standard error √(s²/Sxx), s² = Σ residual² / (n − 2).
fn ols(points: &[(f64, f64)]) -> (f64, f64) {
    let n = points.len() as f64;
    let mx = points.iter().map(|p| p.0).sum::<f64>() / n;
    let my = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let b = sxy / sxx;
    let rss: f64 = points
        .iter()
        .map(|p| (p.1 - my - b * (p.0 - mx)).powi(2))
        .sum();
    (b, (rss / (n - 2.0) / sxx).sqrt())
}

fn block<'a>(doc: &'a Value, channel: &str) -> &'a Value {
    doc["live_estimates"]
        .as_array()
        .expect("live_estimates")
        .iter()
        .find(|b| b["channel"] == channel)
        .unwrap_or_else(|| panic!("no block of channel {channel}: {doc}"))
}

#[test]
fn margins_reports_counts_latest_and_the_trend_of_the_last_day() {
    let dir = Dir::new();
    let db = build(&dir);
    let out = run(&dir, &db.path, &["margins", MACHINE, "--json"]);
    let doc: Value = serde_json::from_str(&out).expect("JSON");
    assert_eq!(
        doc["live_estimates"].as_array().map(Vec::len),
        Some(2),
        "one block per measured critical with estimates (not the design row, not the coast-down's)"
    );
    let b = block(&doc, "x");
    assert_eq!(b["event"].as_i64(), Some(db.run_up));
    assert_eq!(b["mode"].as_u64(), Some(1));
    assert_eq!(num(&b["model"], "natural_rpm"), 1395.0);
    let kinds: Vec<&str> = (0..N_X).map(kind_of).collect();
    let good = kinds.iter().filter(|k| **k == "good").count();
    let unb = kinds.iter().filter(|k| **k == "unbalance").count();
    assert_eq!(b["estimates"].as_u64(), Some(N_X as u64));
    assert_eq!(b["informative"].as_u64(), Some(good as u64));
    assert_eq!(b["unbalance"].as_u64(), Some(unb as u64));
    assert!(
        good > 200 && unb >= 10,
        "the data mix: {good} good, {unb} unbalance"
    );

    // The latest informative window, not the last row (which said nothing).
    let last_good = (0..N_X).rev().find(|i| kinds[*i] == "good").expect("one");
    let l = &b["latest"];
    assert_eq!(num(l, "unix_time"), time_of(last_good));
    let want = on_line(time_of(last_good)) + noise(last_good);
    assert!(
        (num(l, "estimate_rpm") - want).abs() <= 0.05,
        "{l} vs {want}"
    );
    assert_eq!(num(l, "uncertainty_rpm"), sigma(last_good));
    assert_eq!(
        num(l, "speed_rpm"),
        2990.0 + (last_good % 3) as f64,
        "running speed of that window"
    );
    // Its margin: below the range, (Nmin − Nc)/Nmin (API RP 684; common practice), against the
    // 2005 rule with the measured AF (no configuration: the default rule).
    let m = &l["margin"];
    assert_eq!(text(m, "side"), "below-range");
    let actual = (MIN_RPM - want) / MIN_RPM * 100.0;
    assert!((num(m, "actual_pct") - actual).abs() < 0.011, "{m}");
    assert!(
        (num(m, "required_pct") - api_2005_below(AF)).abs() < 0.006,
        "{m}"
    );
    assert_eq!(text(m, "verdict"), "clear", "{actual} % against 14.4 % + 5");

    // The trend over the last 24 h of data: every informative window from the last row's time
    // minus a day. The outside check: ordinary least squares (closed form) over those windows.
    let end = time_of(N_X - 1);
    let pts: Vec<(f64, f64)> = (0..N_X)
        .filter(|i| kinds[*i] == "good" && time_of(*i) >= end - 86_400.0)
        .map(|i| {
            (
                (time_of(i) - end) / 86_400.0,
                on_line(time_of(i)) + noise(i),
            )
        })
        .collect();
    let (b_ols, se) = ols(&pts);
    let t = &b["trend_24h"];
    let got = num(t, "rpm_per_day");
    assert_eq!(t["points"].as_u64(), Some(pts.len() as u64));
    assert_eq!(text(t, "weighting"), "1/sigma^2");
    // Weighted and ordinary fits of the same points differ by a fraction of the slope's standard
    // error; 3 of them (plus print rounding) bounds it, and the line's own slope lies there too.
    let tol = 3.0 * se + 0.01;
    assert!(
        (got - b_ols).abs() <= tol,
        "trend {got} vs OLS {b_ols} ± {tol} r/min/day"
    );
    assert!(
        (got - SLOPE).abs() <= tol + 3.0 * se,
        "trend {got} vs the line's {SLOPE}"
    );
    assert!(se < 5.0, "the data pin the slope: se {se}");
    // The slope's σ with known σ of each point: 1/√(Σw(t − t̄)²), w = 1/σ² (weighted least
    // squares, closed form; common practice) — the points scatter less than their σ, so no
    // χ² scaling applies.
    let w: Vec<(f64, f64)> = (0..N_X)
        .filter(|i| kinds[*i] == "good" && time_of(*i) >= end - 86_400.0)
        .map(|i| ((time_of(i) - end) / 86_400.0, 1.0 / sigma(i).powi(2)))
        .collect();
    let sw: f64 = w.iter().map(|p| p.1).sum();
    let mt = w.iter().map(|p| p.0 * p.1).sum::<f64>() / sw;
    let stt: f64 = w.iter().map(|p| p.1 * (p.0 - mt).powi(2)).sum();
    let want_sigma = 1.0 / stt.sqrt();
    assert!(
        (num(t, "sigma_rpm_per_day") - want_sigma).abs() <= 0.006,
        "{t} vs {want_sigma}"
    );

    // The second series: 40 windows over 70 h, the last day holding a few of them.
    let y = block(&doc, "y");
    assert_eq!(y["estimates"].as_u64(), Some(N_Y as u64));
    assert_eq!(y["unbalance"].as_u64(), Some(0));
    assert!(num_or_null(&y["trend_24h"], "rpm_per_day").is_some());

    // The same in the table.
    let human = run(&dir, &db.path, &["margins", MACHINE]);
    assert!(
        human.contains("live critical-speed estimates")
            && human.contains(&format!(
                "{N_X} estimates, {good} informative, {unb} unbalance"
            )),
        "{human}"
    );
}

#[test]
fn plot_has_one_panel_per_series_with_its_labels() {
    let dir = Dir::new();
    let db = build(&dir);
    let svg_path = dir.join("estimates.svg");
    let p = svg_path.display().to_string();
    // The document still goes to stdout.
    let out = run(
        &dir,
        &db.path,
        &["margins", MACHINE, "--json", "--plot", &p],
    );
    assert!(serde_json::from_str::<Value>(&out).is_ok(), "{out}");
    let svg = std::fs::read_to_string(&svg_path).expect("the plot was written");
    assert!(
        svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"),
        "an SVG document"
    );
    assert_eq!(svg.matches("<svg").count(), 1);
    assert_eq!(svg.matches("</svg>").count(), 1);
    assert!(svg.contains("<title>Live critical-speed estimates, machine fan-9"));
    let l = labels(&svg);
    let panels: Vec<&str> = l
        .iter()
        .map(|x| x.text.as_str())
        .filter(|t| t.contains("live critical-speed estimate"))
        .collect();
    assert_eq!(
        panels,
        vec![
            "fan-9 · mode 1 · channel x · live critical-speed estimate",
            "fan-9 · mode 1 · channel y · live critical-speed estimate"
        ],
        "one panel per (mode, channel)"
    );
    let has = |s: &str| l.iter().filter(|x| x.text.contains(s)).count();
    // 2027-01-15T09:10:00Z is T_FIRST (1 800 000 000 + 4200 s, worked with a calendar library).
    assert_eq!(has("Hours from 2027-01-15T09:10:00Z (UTC)"), 2);
    assert_eq!(has("Critical speed, r/min"), 2);
    assert_eq!(has("measured critical, event"), 2);
    assert_eq!(has("1400 r/min"), 2);
    assert_eq!(has("not a critical shift"), 2);
    assert_eq!(has("minimum operating 2950 r/min"), 2);
    // The margin boundary: min × (1 − required/100), API 2005 with AF 8 (from memory, as above).
    let boundary = MIN_RPM * (1.0 - api_2005_below(AF) / 100.0);
    assert_eq!(
        has(&format!(
            "enters the required margin (14.4 %, api-2005): {boundary:.0} r/min"
        )),
        2,
        "boundary {boundary}"
    );
    // The unbalance windows as their own marks (filled purple triangles), the quiet ones as
    // hollow grey circles.
    assert!(svg.contains("fill=\"#CC79A7\""));
    assert!(svg.matches("stroke=\"#808080\"").count() >= 40);
}

#[test]
fn plot_without_estimates_fails_in_one_line() {
    let dir = Dir::new();
    let db = build(&dir);
    let svg_path = dir.join("none.svg");
    let p = svg_path.display().to_string();
    let d = db.path.display().to_string();
    let args = ["margins", IDLE, "--plot", &p, "--db", &d];
    let o = dir.veer(&args);
    let line = one_error_line(&o);
    assert!(
        line.contains(IDLE) && line.contains("no live critical-speed estimates"),
        "{line}"
    );
    assert!(!svg_path.exists(), "no empty plot is written");
    // Without --plot the same machine is fine, and says it has none.
    let human = run(&dir, &db.path, &["margins", IDLE]);
    assert!(
        human.contains("live critical-speed estimates: none stored"),
        "{human}"
    );
}

#[test]
fn report_has_the_section_with_an_inline_plot() {
    let dir = Dir::new();
    let db = build(&dir);
    let out = dir.join("report.html");
    let o = out.display().to_string();
    run(
        &dir,
        &db.path,
        &["report", &db.run_up.to_string(), "--out", &o],
    );
    let html = std::fs::read_to_string(&out).expect("written");
    assert!(html.contains("<h2>Critical speeds since this event</h2>"));
    let section = &html[html
        .find("Critical speeds since this event")
        .expect("section")..];
    assert!(section.contains("<svg"), "the estimates plot is inline");
    assert!(section.contains("<title>Live critical-speed estimates"));
    assert!(!section.contains("xmlns="), "inline SVG without an address");
    // The table: one row per critical, the latest informative estimate of channel x.
    let kinds: Vec<&str> = (0..N_X).map(kind_of).collect();
    let last_good = (0..N_X).rev().find(|i| kinds[*i] == "good").expect("one");
    let want = on_line(time_of(last_good)) + noise(last_good);
    assert!(
        section.contains(&format!("<td>{want:.0}</td>")),
        "the latest estimate {want:.0} in the table"
    );
    assert!(html.contains("not a machinery protection system"));
    // The coast-down: its critical has no estimates, one sentence says so.
    run(
        &dir,
        &db.path,
        &["report", &db.coast_down.to_string(), "--out", &o],
    );
    let html = std::fs::read_to_string(&out).expect("written");
    assert!(html.contains("<h2>Critical speeds since this event</h2>"));
    assert!(html.contains("No live estimates were made from this event's critical speeds"));
    assert!(!html.contains("Live critical-speed estimates"));
}
