//! `veer analyze` on simulated recordings: the JSON contract, CSV against WAV, and the critical
//! speeds against the rotor model the simulator plays.

use crate::support::{arr, num, num_or_null, rel, success, text, Dir};
use serde_json::Value;

/// A run-up of tg-1 from slow roll to running speed: 45 r/min/s, short enough for a debug build,
/// slow enough that the sweep barely shifts the peaks (see `model_peak_rpm`).
const RUN_UP: &str = "0:300,3:300,63:3000,65:3000";

/// Sample rate of the recordings: 128 samples per turn at 3000 r/min is ample for 1X and 2X.
const RATE: &str = "6400";

/// The modes of tg-1 in the demo plant: natural speed (r/min) and damping ratio.
const TG1_MODES: [(f64, f64); 2] = [(1380.0, 0.045), (2420.0, 0.06)];

/// Where a proximity probe sees the peak of an unbalance-driven mode: the displacement response
/// M·X/(m·e) = r²/√((1 − r²)² + (2ζr)²) peaks at r = 1/√(1 − 2ζ²) (rotating unbalance, S. S. Rao,
/// Mechanical Vibrations, 5th ed., §3.7). A run-up at finite rate moves the peak a little above
/// this and the neighbouring mode pulls it a little (F. M. Lewis, Trans. ASME 54, 1932: the peak
/// comes later on a run-up); at this sweep rate both stay well inside the 2 % allowed.
fn model_peak_rpm(natural_rpm: f64, zeta: f64) -> f64 {
    natural_rpm / (1.0 - 2.0 * zeta * zeta).sqrt()
}

/// One event as the contract describes it: kind, speeds, and per channel the critical speeds.
#[derive(Debug)]
pub struct EventSummary {
    pub kind: String,
    pub speed_start_rpm: f64,
    pub speed_end_rpm: f64,
    /// Per channel, in the order asked for: (channel name, critical speeds in r/min).
    pub channels: Vec<(String, Vec<f64>)>,
}

/// Checks every key the design's contract promises, with its type and range, and returns the
/// events in a form the tests can compare.
pub fn check_contract(doc: &Value) -> Vec<EventSummary> {
    let mut out = Vec::new();
    for e in arr(doc, "events") {
        let kind = text(e, "kind").to_string();
        assert!(
            kind == "run-up" || kind == "coast-down",
            "event kind `{kind}` is neither run-up nor coast-down"
        );
        let start = num(e, "start_s");
        let end = num(e, "end_s");
        assert!(start >= 0.0 && end > start, "event times {start}..{end} s");
        let n0 = num(e, "speed_start_rpm");
        let n1 = num(e, "speed_end_rpm");
        assert!(n0 >= 0.0 && n1 >= 0.0, "negative speeds in {e}");
        match kind.as_str() {
            "run-up" => assert!(n1 > n0, "a run-up from {n0} to {n1} r/min"),
            _ => assert!(n1 < n0, "a coast-down from {n0} to {n1} r/min"),
        }
        let mut channels = Vec::new();
        for c in arr(e, "channels") {
            let name = text(c, "channel").to_string();
            let mut speeds = Vec::new();
            for r in arr(c, "resonances") {
                let nc = num(r, "speed_rpm");
                assert!(
                    nc >= n0.min(n1) && nc <= n0.max(n1),
                    "critical at {nc} r/min outside the event's sweep {n0}..{n1}"
                );
                assert!(num(r, "peak_amplitude") > 0.0, "peak amplitude in {r}");
                let phase = num(r, "phase_deg");
                assert!(
                    (0.0..360.0).contains(&phase),
                    "phase_deg {phase} not in [0, 360)"
                );
                if let Some(af) = num_or_null(r, "amplification_factor") {
                    assert!(af > 0.0, "amplification factor {af}");
                }
                if let Some(z) = num_or_null(r, "damping_ratio") {
                    assert!(z > 0.0 && z < 1.0, "damping ratio {z}");
                }
                speeds.push(nc);
            }
            channels.push((name, speeds));
        }
        out.push(EventSummary {
            kind,
            speed_start_rpm: n0,
            speed_end_rpm: n1,
            channels,
        });
    }
    out
}

/// Asserts two analyses of the same run found the same critical speeds within `tol` (relative):
/// every critical of one has a partner in the other, both ways.
fn assert_same_criticals(a: &[EventSummary], b: &[EventSummary], tol: f64, what: &str) {
    assert_eq!(
        a.len(),
        b.len(),
        "{what}: event counts differ: {a:?} vs {b:?}"
    );
    for (ea, eb) in a.iter().zip(b) {
        assert_eq!(ea.kind, eb.kind, "{what}: event kinds differ");
        assert_eq!(
            ea.channels.len(),
            eb.channels.len(),
            "{what}: channel counts differ"
        );
        for ((na, sa), (nb, sb)) in ea.channels.iter().zip(&eb.channels) {
            for (from, to) in [(sa, sb), (sb, sa)] {
                for &x in from {
                    let near = to.iter().map(|&y| rel(y, x)).fold(f64::INFINITY, f64::min);
                    assert!(
                        near <= tol,
                        "{what}: critical {x} r/min (channel {na}/{nb}) has no partner within \
                         {} %: {sa:?} vs {sb:?}",
                        tol * 100.0
                    );
                }
            }
        }
    }
}

/// The one run-up of an analysis of [`RUN_UP`], checked against the profile.
fn the_run_up(events: &[EventSummary]) -> &EventSummary {
    assert_eq!(events.len(), 1, "expected one event: {events:?}");
    let e = &events[0];
    assert_eq!(e.kind, "run-up");
    // The profile starts at 300 r/min and ends at 3000 r/min.
    assert!(
        rel(e.speed_start_rpm, 300.0) < 0.1,
        "run-up starts at {} r/min",
        e.speed_start_rpm
    );
    assert!(
        rel(e.speed_end_rpm, 3000.0) < 0.02,
        "run-up ends at {} r/min",
        e.speed_end_rpm
    );
    assert_eq!(e.channels.len(), 2, "two channels asked for: {e:?}");
    e
}

#[test]
fn contract_keys_and_criticals_agree_across_formats_and_with_the_model() {
    let d = Dir::new();
    let sim = ["--machine", "tg-1", "--profile", RUN_UP, "--rate", RATE];
    d.simulate("run.csv", &sim);
    d.simulate("run.wav", &[&sim[..], &["--wav-format", "f32"]].concat());
    d.simulate(
        "run16.wav",
        &[&sim[..], &["--wav-format", "pcm16", "--full-scale", "1000"]].concat(),
    );

    let by_name = d.json(&[
        "analyze", "run.csv", "--tach", "tach", "--vib", "x,y", "--json",
    ]);
    // In a CSV the time column is column 0, so tach, x, y are 1, 2, 3.
    let csv_index = d.json(&[
        "analyze", "run.csv", "--tach", "1", "--vib", "2,3", "--json",
    ]);
    let wav = d.json(&[
        "analyze", "run.wav", "--tach", "0", "--vib", "1,2", "--json",
    ]);
    let wav16 = d.json(&[
        "analyze",
        "run16.wav",
        "--tach",
        "0",
        "--vib",
        "1,2",
        "--json",
    ]);

    let by_name = check_contract(&by_name);
    let csv_index = check_contract(&csv_index);
    let wav = check_contract(&wav);
    let wav16 = check_contract(&wav16);

    let names: Vec<&str> = the_run_up(&by_name)
        .channels
        .iter()
        .map(|c| c.0.as_str())
        .collect();
    assert_eq!(
        names,
        ["x", "y"],
        "channels are reported under their header names"
    );
    the_run_up(&csv_index);
    the_run_up(&wav);
    the_run_up(&wav16);

    // Same data read three ways: the decoders must not change what the engine sees.
    assert_same_criticals(&by_name, &csv_index, 1e-9, "CSV by name vs by index");
    assert_same_criticals(&by_name, &wav, 0.005, "CSV vs float WAV");
    assert_same_criticals(&by_name, &wav16, 0.005, "CSV vs 16-bit WAV");

    for events in [&by_name, &wav, &wav16] {
        for (name, speeds) in &the_run_up(events).channels {
            for (n, zeta) in TG1_MODES {
                let expected = model_peak_rpm(n, zeta);
                let found = speeds
                    .iter()
                    .copied()
                    .min_by(|a, b| rel(*a, expected).total_cmp(&rel(*b, expected)))
                    .unwrap_or(f64::NAN);
                assert!(
                    rel(found, expected) <= 0.02,
                    "channel {name}: mode at {n} r/min, ζ {zeta} should peak near {expected:.0} \
                     r/min; nearest critical found: {found} (all: {speeds:?})"
                );
            }
        }
    }
}

#[test]
fn csv_without_time_column_takes_rate_and_range_adds_margins() {
    let d = Dir::new();
    d.simulate(
        "timed.csv",
        &[
            "--machine",
            "tg-1",
            "--profile",
            "0:300,2:300,32:3000,33:3000",
            "--rate",
            RATE,
        ],
    );
    // Drop the time column: what is left is tach,x,y, and only --rate can give the sample rate.
    let timed = std::fs::read_to_string(d.join("timed.csv")).expect("read the recording");
    let untimed: String = timed
        .lines()
        .map(|l| l.split_once(',').map_or(l, |(_, rest)| rest))
        .flat_map(|l| [l, "\n"])
        .collect();
    assert!(
        untimed.starts_with("tach,x,y\n"),
        "unexpected header: {}",
        &untimed[..40]
    );
    d.write("untimed.csv", untimed.as_bytes());

    let base = [
        "analyze",
        "untimed.csv",
        "--tach",
        "tach",
        "--vib",
        "x,y",
        "--rate",
        RATE,
    ];
    let plain = d.json(&[&base[..], &["--json"]].concat());
    assert_eq!(
        num(&plain, "sample_rate_hz"),
        6400.0,
        "the rate given is the rate used"
    );
    let timed_doc = d.json(&[
        "analyze",
        "timed.csv",
        "--tach",
        "tach",
        "--vib",
        "x,y",
        "--json",
    ]);
    assert_same_criticals(
        &check_contract(&timed_doc),
        &check_contract(&plain),
        1e-9,
        "with a time column vs without one and --rate",
    );
    let events = check_contract(&plain);
    assert!(
        events
            .iter()
            .any(|e| e.channels.iter().any(|c| !c.1.is_empty())),
        "no critical speed found: {plain}"
    );
    for e in arr(&plain, "events") {
        for c in arr(e, "channels") {
            for r in arr(c, "resonances") {
                assert!(
                    r.get("margin").is_none(),
                    "a margin without an operating range: {r}"
                );
            }
        }
    }

    let ranged = d.json(&[&base[..], &["--json", "--range", "2950:3030"]].concat());
    check_contract(&ranged);
    let mut margins = 0;
    for e in arr(&ranged, "events") {
        for c in arr(e, "channels") {
            for r in arr(c, "resonances") {
                let m = r
                    .get("margin")
                    .unwrap_or_else(|| panic!("no margin object in {r}"));
                let nc = num(r, "speed_rpm");
                assert!(
                    nc < 2950.0,
                    "the run-up's criticals lie below the range: {nc}"
                );
                assert_eq!(text(m, "side"), "below-range");
                // Separation margin below the range: (Nmin − Nc) / Nmin × 100 (API RP 684, as
                // quoted in REFERENCES.md §1.2; confirmed, secondary).
                let expected_sm = (2950.0 - nc) / 2950.0 * 100.0;
                let actual = num(m, "actual_pct");
                assert!(
                    (actual - expected_sm).abs() < 0.05,
                    "margin {actual} % vs {expected_sm} %"
                );
                let required = num(m, "required_pct");
                if let Some(af) = num_or_null(r, "amplification_factor").filter(|&af| af >= 2.5) {
                    // Newer rule, critical below the range: SM = 17 (1 − 1/(AF − 1.5)), at most
                    // 16 % (API 617 7th ed. / API RP 684 2nd ed.; from memory, unconfirmed).
                    let rule = (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0);
                    assert!(
                        (required - rule).abs() < 0.05,
                        "required {required} % vs {rule} % (AF {af})"
                    );
                }
                let verdict = text(m, "verdict");
                assert!(
                    ["no-margin-needed", "clear", "warning", "alarm"].contains(&verdict),
                    "verdict `{verdict}`"
                );
                margins += 1;
            }
        }
    }
    assert!(margins > 0, "no resonance carried a margin: {ranged}");
    assert_eq!(
        ranged.get("operating_range_rpm"),
        Some(&serde_json::json!([2950.0, 3030.0])),
        "the operating range is echoed"
    );

    let o = d.veer(&base);
    let table = success(&o, &base);
    assert!(
        table.contains("not a machinery protection system"),
        "the table lacks the caution:\n{table}"
    );
    assert!(
        table.contains("run-up"),
        "the table names no run-up:\n{table}"
    );
}

#[test]
fn steady_speed_gives_no_events() {
    let d = Dir::new();
    d.simulate(
        "steady.csv",
        &[
            "--machine",
            "tg-1",
            "--profile",
            "0:1500,60:1500",
            "--rate",
            RATE,
        ],
    );
    let args = [
        "analyze",
        "steady.csv",
        "--tach",
        "tach",
        "--vib",
        "x,y",
        "--json",
    ];
    let doc = d.json(&args);
    assert_eq!(
        doc.get("events"),
        Some(&serde_json::json!([])),
        "events at steady speed: {doc}"
    );
    // 1500 r/min for 60 s is 1500 turns; allow for the turns cut at either end.
    let revs = num(&doc["tach"], "revolutions");
    assert!(
        (revs - 1500.0).abs() <= 3.0,
        "{revs} revolutions counted, 1500 turned"
    );
}
