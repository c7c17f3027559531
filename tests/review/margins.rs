//! `veer margins`: the margin table against the API rule worked by hand, and the recommended
//! alarm settings against the ISO baseline practice worked by hand.

use super::plant;
use crate::support::num;

/// API 617 7th ed. / API RP 684 2nd ed. (2005) separation margin, percent (REFERENCES §1.3, from
/// memory, unconfirmed): below the range 17·(1 − 1/(AF − 1.5)) capped at 16; above it 10 more,
/// capped at 26; none for AF < 2.5.
fn api_2005(af: f64, above: bool) -> f64 {
    if af < 2.5 {
        0.0
    } else if above {
        (10.0 + 17.0 * (1.0 - 1.0 / (af - 1.5))).min(26.0)
    } else {
        (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0)
    }
}

/// API 617 6th ed. / API RP 684 1st ed. (1996), REFERENCES §1.2: 5 / 15 % up to AF 3.55
/// (confirmed, secondary), then 100 − (84 + 6/(AF − 3)) below (confirmed, secondary) and
/// 126 − 6/(AF − 3) − 100 above (from memory).
fn api_1996(af: f64, above: bool) -> f64 {
    if af < 2.5 {
        0.0
    } else if af <= 3.55 {
        if above {
            15.0
        } else {
            5.0
        }
    } else if above {
        26.0 - 6.0 / (af - 3.0)
    } else {
        16.0 - 6.0 / (af - 3.0)
    }
}

#[test]
fn margin_table_matches_the_api_rule_by_hand() {
    let p = plant();
    // tg-1 runs under the 2005 rule, comp-3 under the 1996 one (the demo configuration).
    for (machine, rule, lo, hi) in [
        ("tg-1", "api-2005", 2950.0, 3030.0),
        ("comp-3", "api-1996", 5200.0, 6800.0),
    ] {
        let doc = p.json(&p.cfg_args(&["margins", machine, "--json"]));
        assert_eq!(doc["margin_rule"], rule);
        let crits = doc["criticals"].as_array().expect("criticals");
        assert!(!crits.is_empty(), "{doc}");
        for c in crits {
            let nc = num(&c["current"], "speed_rpm");
            let af = num(&c["current"], "amplification_factor");
            let above = nc > hi;
            let (want_actual, side) = if above {
                ((nc - hi) / hi * 100.0, "above-range")
            } else if nc < lo {
                ((lo - nc) / lo * 100.0, "below-range")
            } else {
                panic!("demo criticals lie outside the range");
            };
            let want_req = if rule == "api-2005" {
                api_2005(af, above)
            } else {
                api_1996(af, above)
            };
            let m = &c["margin"];
            assert_eq!(m["side"], side);
            // Rounded to 0.01 in print; AF itself is printed to 0.01 (so allow its rounding).
            assert!(
                (num(m, "required_pct") - want_req).abs() < 0.02,
                "{machine}: {m} vs {want_req}"
            );
            assert!(
                (num(m, "actual_pct") - want_actual).abs() < 0.011,
                "{machine}: {m} vs {want_actual}"
            );
            let verdict = if want_actual < want_req {
                "alarm"
            } else if want_actual < want_req + num(&doc, "warn_band_pct") {
                "warning"
            } else {
                "clear"
            };
            assert_eq!(m["verdict"], verdict, "{machine} {c}");
            // History: the design value and one measured value per event and channel.
            let hist = c["history"].as_array().expect("history");
            assert!(hist.iter().any(|h| h["origin"] == "design"), "{c}");
            assert_eq!(
                hist.iter().filter(|h| h["origin"] == "measured").count(),
                4,
                "{c}"
            );
            let b = num(c, "bias_corrected_rpm");
            let speeds: Vec<f64> = hist
                .iter()
                .filter(|h| h["origin"] == "measured")
                .map(|h| num(h, "speed_rpm"))
                .collect();
            let (mn, mx) = speeds
                .iter()
                .fold((f64::MAX, f64::MIN), |(a, z), &s| (a.min(s), z.max(s)));
            assert!(
                b >= mn && b <= mx,
                "bias-corrected {b} within the run-up/coast-down spread {speeds:?}"
            );
        }
    }
}

#[test]
fn recommended_levels_follow_the_baseline_rule_and_paste_as_toml() {
    let p = plant();
    let doc = p.json(&p.cfg_args(&["margins", "tg-1", "--json"]));
    let rec = doc["recommended"]["channels"].as_array().expect("channels");
    assert_eq!(rec.len(), 2);
    for c in rec {
        let base = num(c, "baseline_1x");
        let n = num(c, "baseline_speed_rpm");
        // ISO 7919-3 Annex A (from memory): B/C = 9000/√n, C/D = 13 200/√n µm pk-pk; ISO
        // 10816-3 / 20816-3 practice (from memory): alarm-type level = baseline + 0.25·B/C,
        // at most 1.25·B/C.
        let bc = 9000.0 / n.sqrt();
        let cd = 13_200.0 / n.sqrt();
        let warn = (base + 0.25 * bc).min(1.25 * bc);
        assert!((num(c, "warning_1x") - warn).abs() < 0.051, "{c} vs {warn}");
        assert!(
            (num(c, "alarm_1x") - cd.max(1.25 * warn)).abs() < 0.051,
            "{c}"
        );
        assert!(num(c, "warning_1x") < num(c, "alarm_1x"));
        assert!(base > 0.0 && c["baseline_points"].as_u64().unwrap_or(0) > 0);
    }
    // The snippet is TOML that reads back to the same figures.
    let text = doc["toml"].as_str().expect("toml");
    let t: toml::Table = toml::from_str(text).unwrap_or_else(|e| panic!("{e}\n{text}"));
    let sensors = t["sensors"].as_array().expect("sensors");
    assert_eq!(sensors.len(), 2);
    for (s, c) in sensors.iter().zip(rec) {
        assert_eq!(s["channel"].as_str(), c["channel"].as_str());
        let w = s["warning_1x"]
            .as_float()
            .or_else(|| s["warning_1x"].as_integer().map(|i| i as f64))
            .expect("warning");
        assert!((w - num(c, "warning_1x")).abs() < 1e-9);
    }
    assert_eq!(t["machine"]["alerts"]["margin"].as_str(), Some("api-2005"));
    let human = p.run(&p.cfg_args(&["margins", "tg-1"]));
    assert!(
        human.contains("warning_1x") && human.contains("standards and local codes"),
        "{human}"
    );
}
