//! Check 10: separation margins attached to an event's criticals, against the API 617 7th ed. /
//! API RP 684 2nd ed. (2005) rule recomputed here (REFERENCES §1.3, from memory, unconfirmed):
//! below the range SM = 17·(1 − 1/(AF − 1.5)) ≤ 16 %, above SM = 10 + 17·(1 − 1/(AF − 1.5)) ≤ 26 %,
//! none for AF < 2.5; actual margins (Nmin − Nc)/Nmin and (Nc − Nmc)/Nmc (REFERENCES §1.2).

use crate::support::{engine_config, run, sim_config};
use crate::two_modes::two_modes;
use veer_tracker::config::MarginSettings;
use veer_tracker::engine::EventKind;
use veer_tracker::margin::{MarginRule, OperatingRange, Side, Verdict};
use veer_tracker::sim::SpeedProfile;

/// The 2005 rule, REFERENCES §1.3 (from memory, unconfirmed).
fn required_2005(af: f64, above: bool) -> f64 {
    if af < 2.5 {
        0.0
    } else if above {
        (10.0 + 17.0 * (1.0 - 1.0 / (af - 1.5))).min(26.0)
    } else {
        (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0)
    }
}

#[test]
fn margins_follow_the_2005_rule_from_the_measured_af() {
    let sim = sim_config(
        SpeedProfile::ramp(300.0, 5000.0, 200.0),
        4000.0,
        two_modes(),
        0.5,
    );
    let mut cfg = engine_config(&sim);
    let (nmin, nmc, band) = (2400.0, 3600.0, 5.0);
    cfg.margins = Some(MarginSettings {
        rule: MarginRule::Api2005,
        range: OperatingRange::new(nmin, nmc).expect("valid range"),
        warn_band_pct: band,
    });
    let out = run(&sim, &cfg, false);
    let ev = out.single(EventKind::RunUp);
    let crits = &ev.channels[0].criticals;
    assert_eq!(crits.len(), 2, "{:?}", out.summary());
    let mut sides = Vec::new();
    for c in crits {
        let r = &c.resonance;
        let m = c.margin.expect("a margin assessment");
        let af = r.amplification_factor.expect("AF measured");
        let above = r.speed_rpm > nmc;
        let want_side = if above { Side::Above } else { Side::Below };
        let req = required_2005(af, above);
        let actual = if above {
            (r.speed_rpm - nmc) / nmc * 100.0
        } else {
            (nmin - r.speed_rpm) / nmin * 100.0
        };
        let verdict = if actual < req {
            Verdict::Breach
        } else if actual < req + band {
            Verdict::Warning
        } else {
            Verdict::Clear
        };
        eprintln!(
            "check 10: Nc {:.1} rpm, AF {af:.3}: {:?}, required {:.4} % (formula {req:.4}), actual \
             {:.4} % (formula {actual:.4}), {:?}",
            r.speed_rpm, m.side, m.required_pct, m.actual_pct, m.verdict
        );
        assert_eq!(m.side, want_side);
        assert!(
            (m.required_pct - req).abs() < 1e-9,
            "{} vs {req}",
            m.required_pct
        );
        assert!(
            (m.actual_pct - actual).abs() < 1e-9,
            "{} vs {actual}",
            m.actual_pct
        );
        assert_eq!(m.verdict, verdict);
        sides.push(m.side);
    }
    // One critical on each side of the range, so both formulas were exercised.
    assert_eq!(sides, vec![Side::Below, Side::Above]);
}
