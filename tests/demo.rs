//! `veer demo`: quick, self-contained, and it finds what the demo machine has.

use crate::analyze::check_contract;
use crate::support::{rel, success, Dir};
use std::time::{Duration, Instant};

/// Generous for a debug build on a small machine; the demo takes a few seconds there.
const DEMO_LIMIT: Duration = Duration::from_secs(30);

#[test]
fn demo_prints_the_caution_and_a_critical() {
    let d = Dir::new();
    let t = Instant::now();
    let o = d.veer(&["demo"]);
    let took = t.elapsed();
    let out = success(&o, &["demo"]);
    assert!(took < DEMO_LIMIT, "the demo took {took:?}");
    assert!(
        out.contains("not a machinery protection system"),
        "no caution:\n{out}"
    );
    assert!(out.contains("event 1: run-up"), "no run-up event:\n{out}");
    // A table row of a critical starts with its speed in r/min.
    let criticals = out
        .lines()
        .filter(|l| {
            l.split_whitespace()
                .next()
                .is_some_and(|w| w.parse::<f64>().is_ok())
        })
        .count();
    assert!(criticals > 0, "no critical speed printed:\n{out}");
}

#[test]
fn demo_json_parses_and_follows_the_passage_through_resonance() {
    let d = Dir::new();
    let doc = d.json(&["demo", "--json"]);
    let events = check_contract(&doc);
    let up = events
        .iter()
        .find(|e| e.kind == "run-up")
        .expect("a run-up");
    let down = events
        .iter()
        .find(|e| e.kind == "coast-down")
        .expect("a coast-down");
    // tg-1's first mode: 1380 r/min, ζ 0.045, seen by a probe near 1380/√(1 − 2ζ²) r/min
    // (rotating unbalance: S. S. Rao, Mechanical Vibrations, 5th ed., §3.7).
    let steady = 1380.0 / (1.0 - 2.0 * 0.045f64.powi(2)).sqrt();
    let first = |e: &crate::analyze::EventSummary, ch: usize| {
        e.channels[ch]
            .1
            .iter()
            .copied()
            .min_by(|a, b| rel(*a, steady).total_cmp(&rel(*b, steady)))
            .unwrap_or(f64::NAN)
    };
    for ch in 0..up.channels.len() {
        let (nu, nd) = (first(up, ch), first(down, ch));
        assert!(
            rel(nu, steady) < 0.02 && rel(nd, steady) < 0.02,
            "{nu} / {nd} vs {steady}"
        );
        // Passing a resonance at a finite rate, the peak comes late on a run-up and early on a
        // coast-down (F. M. Lewis, Trans. ASME 54, 1932; REFERENCES.md §6, confirmed).
        assert!(
            nu > nd,
            "channel {ch}: run-up peak {nu} r/min not above coast-down peak {nd}"
        );
    }
}
