//! `events` and `show` against the engine: the figures `show` prints for a stored event are the
//! ones `veer analyze` computes on the same recording.

use super::plant;
use crate::support::{num, Dir};

#[test]
fn events_lists_every_stored_sweep_with_its_criticals() {
    let p = plant();
    let doc = p.json(&p.db_args(&["events", "--json"]));
    let events = doc["events"].as_array().expect("events");
    // The demo plant: three machines, each with one run-up and one coast-down.
    assert_eq!(events.len(), 6, "{doc}");
    for e in events {
        let up = e["kind"] == "run-up";
        let rate = num(e, "sweep_rate_rpm_s");
        assert!(up == (rate > 0.0), "sweep sign matches the kind: {e}");
        assert!(
            up == (num(e, "speed_end_rpm") > num(e, "speed_start_rpm")),
            "{e}"
        );
    }
    let tg: Vec<_> = events.iter().filter(|e| e["machine"] == "tg-1").collect();
    // tg-1 passes both its criticals on two channels both ways.
    assert!(tg.iter().all(|e| e["criticals_found"] == 4), "{tg:?}");
    let only = p.json(&p.db_args(&["events", "--json", "--machine", "fan-2"]));
    assert_eq!(only["events"].as_array().map(Vec::len), Some(2));
    let later = p.json(&p.db_args(&["events", "--json", "--since", "2999-01-01"]));
    assert_eq!(later["events"].as_array().map(Vec::len), Some(0));
    let text = p.run(&p.db_args(&["events"]));
    assert!(
        text.contains("tg-1") && text.contains("coast-down"),
        "{text}"
    );
}

#[test]
fn show_gives_the_engines_figures_for_the_same_recording() {
    let p = plant();
    let wav = p.recording("tg-1");
    let d = Dir::new();
    let w = wav.display().to_string();
    // The same analysis run directly: tach column 0, probes x and y are columns 1 and 2.
    let engine = d.json(&[
        "analyze",
        &w,
        "--tach",
        "0",
        "--vib",
        "1,2",
        "--range",
        "2950:3030",
        "--json",
    ]);
    for (kind, ev) in [("run-up", 0), ("coast-down", 1)] {
        let id = p.event_id("tg-1", kind);
        let shown = p.json(&p.db_args(&["show", &id.to_string(), "--json"]));
        let e = &engine["events"][ev];
        assert_eq!(e["kind"], kind);
        let chans = shown["channels"].as_array().expect("channels");
        assert_eq!(chans.len(), 2);
        for (i, c) in chans.iter().enumerate() {
            let want = e["channels"][i]["resonances"]
                .as_array()
                .expect("resonances");
            let got = c["criticals"].as_array().expect("criticals");
            assert_eq!(got.len(), want.len(), "{kind} channel {i}");
            for (g, w) in got.iter().zip(want) {
                for key in [
                    "speed_rpm",
                    "amplification_factor",
                    "damping_ratio",
                    "phase_deg",
                    "peak_amplitude",
                    "n1_rpm",
                    "n2_rpm",
                ] {
                    let (a, b) = (num(g, key), num(w, key));
                    // Both round the same double to the same digits: equal.
                    assert!(
                        (a - b).abs() < 1e-9,
                        "{kind} ch {i} {key}: show {a} vs engine {b}"
                    );
                }
                for key in ["required_pct", "actual_pct"] {
                    assert!(
                        (num(&g["margin"], key) - num(&w["margin"], key)).abs() < 0.011,
                        "{key}"
                    );
                }
                assert_eq!(g["margin"]["verdict"], w["margin"]["verdict"]);
                assert_eq!(g["margin"]["side"], w["margin"]["side"]);
                // A 30 r/min/s sweep past these well damped modes is slow enough to trust.
                assert_eq!(g["sweep"]["trusted"], true, "{g}");
                // The run-up sees the critical later, the coast-down earlier (Lewis 1932); the
                // corrected figure lies between them.
                let b = num(&g["bias_corrected"], "rpm");
                let other = num(&g["bias_corrected"], "other_rpm");
                let me = num(g, "speed_rpm");
                assert!(b > me.min(other) && b < me.max(other), "{g}");
                assert!((kind == "run-up") == (me > other), "{g}");
            }
        }
    }
    let text = p.run(&p.db_args(&["show", &p.event_id("tg-1", "run-up").to_string()]));
    assert!(
        text.contains("1X at operating speed")
            && text.contains("not a machinery protection system"),
        "{text}"
    );
}

#[test]
fn show_of_an_unknown_event_is_one_clear_error() {
    let p = plant();
    let args = p.db_args(&["show", "9999"]);
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = crate::support::veer(&a, &p.dir);
    crate::support::error_naming(&o, &["9999"]);
}
