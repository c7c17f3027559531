//! Separation margins: how far a critical speed must stay from the operating range, and how far it is.
//!
//! A critical speed close to a speed the machine runs at for long periods means a large, lightly
//! damped response in service. The API rotordynamics paragraphs (API RP 684, API 617, API 612) ask for
//! a separation margin (SM) between each critical and the operating range, scaled by how sharp the
//! critical is (its amplification factor, AF): a sharp critical needs more room than a well damped one,
//! and a critical with AF below 2.5 is considered critically damped and needs none.
//!
//! Two editions of the rule are in use and sites specify one or the other, so both are offered:
//!
//! - [`MarginRule::Api1996`]: API 617 6th ed. (1995) / API RP 684 1st ed. (1996). AF < 2.5: none;
//!   2.5 ≤ AF ≤ 3.55: 5 % below the minimum operating speed and 15 % above the maximum continuous
//!   speed (MCS); AF > 3.55: below = 100 − (84 + 6/(AF − 3)) %, above = 126 − 6/(AF − 3) − 100 %.
//!   The AF < 2.5, 2.5..=3.55 band and the "below" formula are confirmed from a secondary source (an
//!   engineering forum post attributing them to API 684); the "above" formula is from memory,
//!   unconfirmed, but it joins the 15 % band continuously at AF = 3.55 and tends to 26 % as AF grows.
//! - [`MarginRule::Api2005`]: API 617 7th ed. (2002) and later / API RP 684 2nd ed. (2005).
//!   AF < 2.5: none; below = 17·(1 − 1/(AF − 1.5)) %, capped at 16 %; above =
//!   10 + 17·(1 − 1/(AF − 1.5)) %, capped at 26 %. From memory, unconfirmed (the clause text was not
//!   reached); the same 16 %/26 % asymptotes as the older rule support the recollection.
//!
//! Margins are percentages of the end of the range they are measured from: (Nmin − Nc)/Nmin below the
//! range, (Nc − Nmc)/Nmc above it.

use thiserror::Error;

/// AF below which the API rules require no separation margin (the response is considered critically
/// damped). API RP 684, both editions; confirmed (secondary source) for the older edition.
pub const AF_NO_MARGIN: f64 = 2.5;

/// Upper end of the older rule's fixed band (5 % / 15 %), API RP 684 1st ed. (secondary source).
const AF_OLD_BAND_END: f64 = 3.55;

/// The most an API rule asks below the range: the 2005 cap, and the older rule's asymptote.
const CAP_BELOW_PCT: f64 = 16.0;

/// The most an API rule asks above the range: the 2005 cap, and the older rule's asymptote.
const CAP_ABOVE_PCT: f64 = 26.0;

/// Errors of this module: only parsing, since the computations themselves cannot fail.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum MarginError {
    /// The text names no known rule and is not a number.
    #[error("unknown separation-margin rule {input:?}: expected \"api\", \"api-2005\", \"api-1996\" or a percentage such as \"15\"")]
    UnknownRule {
        /// The text as given.
        input: String,
    },
    /// A fixed percentage outside 0..=100 (or not finite).
    #[error("separation margin {input:?} is out of range: a fixed margin must be a percentage from 0 to 100")]
    PercentOutOfRange {
        /// The text as given.
        input: String,
    },
    /// An operating range whose ends are not positive, finite and in order.
    #[error("operating range {min_rpm}..{max_rpm} r/min is invalid: both ends must be positive and finite, min ≤ max")]
    InvalidRange {
        /// Minimum operating speed as given, r/min.
        min_rpm: f64,
        /// Maximum continuous speed as given, r/min.
        max_rpm: f64,
    },
}

/// Which separation-margin rule a machine is held to.
///
/// The edition matters (the two differ most at low AF: at AF = 2.5 the older rule asks 5 %/15 %, the
/// newer 0 %/10 %), so the site's choice is recorded rather than assumed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum MarginRule {
    /// API 617 7th ed. and later / API RP 684 2nd ed. (2005): margin from AF, capped 16 %/26 %.
    Api2005,
    /// API 617 6th ed. / API RP 684 1st ed. (1996): fixed band up to AF 3.55, formula above.
    Api1996,
    /// A fixed margin on both sides, whatever the AF, for machines whose specification states one.
    Fixed {
        /// Required margin, percent of the range end it is measured from.
        percent: f64,
    },
}

impl MarginRule {
    /// Reads a rule as written in a machine configuration: `"api"` (the current edition, 2005),
    /// `"api-2005"`, `"api-1996"`, or a number of percent such as `"15"` (a trailing `%` is allowed).
    pub fn parse(s: &str) -> Result<Self, MarginError> {
        let text = s.trim().to_ascii_lowercase();
        match text.as_str() {
            "api" | "api-2005" => return Ok(MarginRule::Api2005),
            "api-1996" => return Ok(MarginRule::Api1996),
            _ => {}
        }
        let number = text.strip_suffix('%').unwrap_or(&text).trim();
        let percent: f64 = number.parse().map_err(|_| MarginError::UnknownRule {
            input: s.to_string(),
        })?;
        if !(0.0..=100.0).contains(&percent) {
            return Err(MarginError::PercentOutOfRange {
                input: s.to_string(),
            });
        }
        Ok(MarginRule::Fixed { percent })
    }

    /// The rule's name as [`MarginRule::parse`] reads it back, for reports and stored results.
    pub fn name(&self) -> String {
        match self {
            MarginRule::Api2005 => "api-2005".to_string(),
            MarginRule::Api1996 => "api-1996".to_string(),
            MarginRule::Fixed { percent } => format!("{percent}"),
        }
    }

    /// Whether the rule scales with AF (and so waives the margin below AF 2.5).
    fn uses_af(&self) -> bool {
        !matches!(self, MarginRule::Fixed { .. })
    }
}

/// Where a critical speed lies relative to the operating range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    /// Below the minimum operating speed: the machine passes it on every start and stop.
    Below,
    /// Within the operating range: the machine may dwell on it.
    Inside,
    /// Above the maximum continuous speed.
    Above,
}

/// The speeds a machine runs at for long periods.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OperatingRange {
    /// Minimum operating speed, r/min.
    pub min_rpm: f64,
    /// Maximum continuous speed (MCS), r/min.
    pub max_rpm: f64,
}

impl OperatingRange {
    /// A checked range: both ends positive and finite, `min_rpm ≤ max_rpm`. The margins are
    /// percentages of the ends, so a zero or negative end would make them meaningless.
    pub fn new(min_rpm: f64, max_rpm: f64) -> Result<Self, MarginError> {
        let range = Self { min_rpm, max_rpm };
        range.validate()?;
        Ok(range)
    }

    /// Checks a range built field by field (for example read from a configuration file).
    pub fn validate(&self) -> Result<(), MarginError> {
        let ok = self.min_rpm.is_finite()
            && self.max_rpm.is_finite()
            && self.min_rpm > 0.0
            && self.min_rpm <= self.max_rpm;
        if ok {
            Ok(())
        } else {
            Err(MarginError::InvalidRange {
                min_rpm: self.min_rpm,
                max_rpm: self.max_rpm,
            })
        }
    }
}

/// How a critical stands against its requirement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    /// An API rule and AF below 2.5: the critical is considered critically damped, no margin applies.
    NotRequired,
    /// The margin is met with more than the warning band to spare.
    Clear,
    /// The margin is met, but by less than the warning band: a drift would soon breach it.
    Warning,
    /// The margin is not met, or the critical lies inside the operating range.
    Breach,
}

/// The full assessment of one critical against one operating range and rule.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MarginAssessment {
    /// Where the critical lies.
    pub side: Side,
    /// The margin the rule requires, percent (0 when not required).
    pub required_pct: f64,
    /// The margin the critical has, percent; negative when inside the range (see
    /// [`actual_margin_pct`]).
    pub actual_pct: f64,
    /// The outcome.
    pub verdict: Verdict,
}

/// The separation margin a rule requires for a critical with amplification factor `af` on `side`.
///
/// `af = None` (or not finite) means the AF could not be measured, for example because a half-power
/// point lies outside the recorded speeds. The critical may then be as sharp as any, so an API rule
/// asks its most conservative requirement, the cap (16 % below, 26 % above); the older rule never quite
/// reaches those values but tends to them as AF grows, so the same figures are its supremum.
/// For a critical inside the range the larger of the two sides' requirements is returned: it has to
/// leave the range one way or the other, and which way is a design decision.
pub fn required_margin_pct(rule: MarginRule, af: Option<f64>, side: Side) -> f64 {
    match side {
        Side::Below => required_one_side(rule, af, false),
        Side::Above => required_one_side(rule, af, true),
        Side::Inside => required_one_side(rule, af, false).max(required_one_side(rule, af, true)),
    }
}

fn required_one_side(rule: MarginRule, af: Option<f64>, above: bool) -> f64 {
    let af = af.filter(|a| a.is_finite());
    let cap = if above { CAP_ABOVE_PCT } else { CAP_BELOW_PCT };
    match rule {
        MarginRule::Fixed { percent } => percent,
        MarginRule::Api2005 => match af {
            None => cap,
            Some(a) if a < AF_NO_MARGIN => 0.0,
            Some(a) => {
                // API 617 7th ed. / API RP 684 2nd ed. — from memory, unconfirmed.
                let base = 17.0 * (1.0 - 1.0 / (a - 1.5));
                let offset = if above { 10.0 } else { 0.0 };
                (offset + base).min(cap)
            }
        },
        MarginRule::Api1996 => match af {
            None => cap,
            Some(a) if a < AF_NO_MARGIN => 0.0,
            // API RP 684 1st ed. band — confirmed (secondary source).
            Some(a) if a <= AF_OLD_BAND_END => {
                if above {
                    15.0
                } else {
                    5.0
                }
            }
            Some(a) => {
                if above {
                    // From memory, unconfirmed (continuous with the 15 % band at AF = 3.55).
                    126.0 - 6.0 / (a - 3.0) - 100.0
                } else {
                    // Confirmed (secondary source).
                    100.0 - (84.0 + 6.0 / (a - 3.0))
                }
            }
        },
    }
}

/// Where a critical lies and the margin it has, percent.
///
/// Below the range: (Nmin − Nc)/Nmin·100; above: (Nc − Nmc)/Nmc·100 (API RP 684). Inside the range the
/// margin is the negative distance to the nearer end, as a percent of that end's speed, so the value is
/// continuous across either end (0 exactly at the end) and says how far the critical has to move to
/// leave the range. The ends are taken in order even if given swapped; a range with a zero or negative
/// end gives a meaningless or non-finite margin, which [`assess`] reports as a breach.
pub fn actual_margin_pct(critical_rpm: f64, range: &OperatingRange) -> (Side, f64) {
    let lo = range.min_rpm.min(range.max_rpm);
    let hi = range.min_rpm.max(range.max_rpm);
    if critical_rpm < lo {
        (Side::Below, (lo - critical_rpm) / lo * 100.0)
    } else if critical_rpm > hi {
        (Side::Above, (critical_rpm - hi) / hi * 100.0)
    } else {
        let to_lo = (critical_rpm - lo) / lo;
        let to_hi = (hi - critical_rpm) / hi;
        (Side::Inside, -to_lo.min(to_hi) * 100.0)
    }
}

/// Assesses one critical: its side, required and actual margins, and the verdict.
///
/// `warn_band_pct` is how many percentage points above the requirement a margin still earns a warning
/// (negative or non-finite values count as 0). Under an API rule a critical with a measured AF below 2.5
/// is [`Verdict::NotRequired`] wherever it lies; otherwise a critical inside the range is always a
/// [`Verdict::Breach`]. An invalid range (see [`OperatingRange::validate`]) or a non-finite speed is a
/// breach too: an assessment that cannot be made must not read as clear.
pub fn assess(
    critical_rpm: f64,
    af: Option<f64>,
    range: &OperatingRange,
    rule: MarginRule,
    warn_band_pct: f64,
) -> MarginAssessment {
    let (side, actual_pct) = actual_margin_pct(critical_rpm, range);
    let required_pct = required_margin_pct(rule, af, side);
    let waived = rule.uses_af() && af.is_some_and(|a| a.is_finite() && a < AF_NO_MARGIN);
    let band = if warn_band_pct.is_finite() {
        warn_band_pct.max(0.0)
    } else {
        0.0
    };
    let measurable = range.validate().is_ok() && critical_rpm.is_finite() && actual_pct.is_finite();
    let verdict = if waived {
        Verdict::NotRequired
    } else if !measurable || side == Side::Inside || actual_pct < required_pct {
        Verdict::Breach
    } else if actual_pct < required_pct + band {
        Verdict::Warning
    } else {
        Verdict::Clear
    };
    MarginAssessment {
        side,
        required_pct,
        actual_pct,
        verdict,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const TOL: f64 = 1e-3;

    /// Older rule, recomputed inside the test from the formulas of API RP 684 1st ed. (1996) as given
    /// in REFERENCES §1.2 (band and "below" confirmed, secondary; "above" from memory, unconfirmed).
    fn old_formula(af: f64, above: bool) -> f64 {
        if af < 2.5 {
            0.0
        } else if af <= 3.55 {
            if above {
                15.0
            } else {
                5.0
            }
        } else if above {
            126.0 - 6.0 / (af - 3.0) - 100.0
        } else {
            100.0 - (84.0 + 6.0 / (af - 3.0))
        }
    }

    /// Newer rule, recomputed from API 617 7th ed. / API RP 684 2nd ed. (2005) as given in
    /// REFERENCES §1.3 (from memory, unconfirmed).
    fn new_formula(af: f64, above: bool) -> f64 {
        if af < 2.5 {
            0.0
        } else if above {
            (10.0 + 17.0 * (1.0 - 1.0 / (af - 1.5))).min(26.0)
        } else {
            (17.0 * (1.0 - 1.0 / (af - 1.5))).min(16.0)
        }
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn older_edition_against_reference_table() {
        // REFERENCES §1.2 recomputed table (API RP 684 1st ed. formulas); AF 2.0 and 2.5 from rules
        // (a) and (b) of the same section. Columns: AF, below, above.
        let table = [
            (2.0, 0.0, 0.0),
            (2.5, 5.0, 15.0),
            (3.0, 5.0, 15.0),
            // Rule (b) is inclusive at 3.55; the table's 3.55 row (5.091 / 15.091) is the formula's
            // value at the joint, checked in `older_rule_joins_its_band_continuously`.
            (3.55, 5.0, 15.0),
            (4.0, 10.0, 20.0),
            (5.0, 13.0, 23.0),
            (10.0, 15.143, 25.143),
            (100.0, 15.938, 25.938),
        ];
        for (af, below, above) in table {
            let b = required_margin_pct(MarginRule::Api1996, Some(af), Side::Below);
            let a = required_margin_pct(MarginRule::Api1996, Some(af), Side::Above);
            assert!(close(b, below, TOL), "AF {af}: below {b} vs table {below}");
            assert!(close(a, above, TOL), "AF {af}: above {a} vs table {above}");
            assert!(
                close(b, old_formula(af, false), 1e-12),
                "AF {af} below formula"
            );
            assert!(
                close(a, old_formula(af, true), 1e-12),
                "AF {af} above formula"
            );
        }
    }

    #[test]
    fn newer_edition_against_reference_values() {
        // REFERENCES §1.3 recomputed values (API 617 7th ed. / API RP 684 2nd ed.); AF 2.0 from the
        // "AF < 2.5: no SM" rule, AF 2.5 from the formula (0 % / 10 %, noted in §1.3).
        let table = [
            (2.0, 0.0, 0.0),
            (2.5, 0.0, 10.0),
            (3.0, 5.667, 15.667),
            (3.55, 8.707, 18.707),
            (5.0, 12.143, 22.143),
            (10.0, 15.0, 25.0),
            (100.0, 16.0, 26.0),
        ];
        for (af, below, above) in table {
            let b = required_margin_pct(MarginRule::Api2005, Some(af), Side::Below);
            let a = required_margin_pct(MarginRule::Api2005, Some(af), Side::Above);
            assert!(close(b, below, TOL), "AF {af}: below {b} vs table {below}");
            assert!(close(a, above, TOL), "AF {af}: above {a} vs table {above}");
            assert!(
                close(b, new_formula(af, false), 1e-12),
                "AF {af} below formula"
            );
            assert!(
                close(a, new_formula(af, true), 1e-12),
                "AF {af} above formula"
            );
        }
    }

    #[test]
    fn older_rule_joins_its_band_continuously() {
        // REFERENCES §1.2: at AF = 3.55 the formulas give 5.09 / 15.09 %, next to the 5 / 15 % band.
        let just_above = 3.55 + 1e-9;
        let b = required_margin_pct(MarginRule::Api1996, Some(just_above), Side::Below);
        let a = required_margin_pct(MarginRule::Api1996, Some(just_above), Side::Above);
        assert!(close(b, 5.091, TOL) && close(a, 15.091, TOL), "{b} {a}");
        assert!(close(b, old_formula(just_above, false), 1e-9));
        assert!((b - 5.0).abs() < 0.1 && (a - 15.0).abs() < 0.1, "{b} {a}");
    }

    #[test]
    fn unknown_af_takes_the_cap_and_fixed_ignores_af() {
        // The caps are 16 % / 26 % (REFERENCES §1.3; asymptotes of §1.2).
        for rule in [MarginRule::Api2005, MarginRule::Api1996] {
            assert_eq!(required_margin_pct(rule, None, Side::Below), 16.0);
            assert_eq!(required_margin_pct(rule, None, Side::Above), 26.0);
            assert_eq!(required_margin_pct(rule, Some(f64::NAN), Side::Above), 26.0);
            // Nothing the rule asks for any AF exceeds what it asks for an unknown AF.
            for af in [2.5, 3.0, 4.0, 10.0, 1e6] {
                assert!(required_margin_pct(rule, Some(af), Side::Above) <= 26.0);
                assert!(required_margin_pct(rule, Some(af), Side::Below) <= 16.0);
            }
        }
        let fixed = MarginRule::Fixed { percent: 15.0 };
        for af in [None, Some(1.0), Some(8.0)] {
            for side in [Side::Below, Side::Inside, Side::Above] {
                assert_eq!(required_margin_pct(fixed, af, side), 15.0);
            }
        }
        // Inside: the larger of the two sides.
        let inside = required_margin_pct(MarginRule::Api2005, Some(5.0), Side::Inside);
        assert!(close(inside, new_formula(5.0, true), 1e-12));
    }

    #[test]
    fn actual_margin_on_hand_cases() {
        // Hand arithmetic from the API RP 684 definitions (REFERENCES §1.2).
        let range = OperatingRange::new(3000.0, 4000.0).expect("valid range");
        let (side, pct) = actual_margin_pct(2400.0, &range); // (3000 − 2400)/3000 = 20 %
        assert_eq!(side, Side::Below);
        assert!(close(pct, 20.0, 1e-9));
        let (side, pct) = actual_margin_pct(5000.0, &range); // (5000 − 4000)/4000 = 25 %
        assert_eq!(side, Side::Above);
        assert!(close(pct, 25.0, 1e-9));
        let (side, pct) = actual_margin_pct(3150.0, &range); // 150/3000 from the lower end = −5 %
        assert_eq!(side, Side::Inside);
        assert!(close(pct, -5.0, 1e-9));
        let (side, pct) = actual_margin_pct(3900.0, &range); // 100/4000 from MCS = −2.5 %
        assert_eq!(side, Side::Inside);
        assert!(close(pct, -2.5, 1e-9));
        let (side, pct) = actual_margin_pct(3000.0, &range);
        assert_eq!(side, Side::Inside);
        assert!(pct.abs() < 1e-12);
    }

    #[test]
    fn verdicts_on_hand_cases() {
        let range = OperatingRange::new(3000.0, 4000.0).expect("valid range");
        let rule = MarginRule::Api2005;
        // AF 10 → 15 % below required (REFERENCES §1.3); 2400 rpm has 20 %: clear with a 3-point band,
        // a warning with a 6-point band.
        let a = assess(2400.0, Some(10.0), &range, rule, 3.0);
        assert_eq!(a.verdict, Verdict::Clear);
        assert!(close(a.required_pct, 15.0, TOL));
        assert_eq!(
            assess(2400.0, Some(10.0), &range, rule, 6.0).verdict,
            Verdict::Warning
        );
        // 2700 rpm has 10 % < 15 %: breach.
        assert_eq!(
            assess(2700.0, Some(10.0), &range, rule, 3.0).verdict,
            Verdict::Breach
        );
        // Above MCS: AF 5 needs 22.143 %; 4800 rpm has 20 %: breach; 5000 rpm has 25 %: warning (band 5).
        assert_eq!(
            assess(4800.0, Some(5.0), &range, rule, 5.0).verdict,
            Verdict::Breach
        );
        assert_eq!(
            assess(5000.0, Some(5.0), &range, rule, 5.0).verdict,
            Verdict::Warning
        );
        assert_eq!(
            assess(5000.0, Some(5.0), &range, rule, 1.0).verdict,
            Verdict::Clear
        );
        // Inside the range: breach under any rule, unless AF < 2.5 waives it under an API rule.
        assert_eq!(
            assess(3500.0, Some(10.0), &range, rule, 0.0).verdict,
            Verdict::Breach
        );
        let fixed = MarginRule::Fixed { percent: 0.0 };
        assert_eq!(
            assess(3500.0, Some(10.0), &range, fixed, 0.0).verdict,
            Verdict::Breach
        );
        assert_eq!(
            assess(3500.0, Some(2.0), &range, rule, 0.0).verdict,
            Verdict::NotRequired
        );
        assert_eq!(
            assess(3500.0, Some(2.0), &range, MarginRule::Api1996, 0.0).verdict,
            Verdict::NotRequired
        );
        // A fixed rule ignores AF: AF 2 inside the range is still a breach.
        let fixed = MarginRule::Fixed { percent: 10.0 };
        assert_eq!(
            assess(3500.0, Some(2.0), &range, fixed, 0.0).verdict,
            Verdict::Breach
        );
        // Unknown AF: the cap (26 % above) applies; 25 % above is a breach.
        assert_eq!(
            assess(5000.0, None, &range, rule, 0.0).verdict,
            Verdict::Breach
        );
        // A bad range never reads as clear.
        let bad = OperatingRange {
            min_rpm: 0.0,
            max_rpm: 0.0,
        };
        assert_eq!(
            assess(-10.0, Some(10.0), &bad, rule, 0.0).verdict,
            Verdict::Breach
        );
    }

    #[test]
    fn rule_parsing_round_trips() {
        assert_eq!(MarginRule::parse("api"), Ok(MarginRule::Api2005));
        assert_eq!(MarginRule::parse(" API-2005 "), Ok(MarginRule::Api2005));
        assert_eq!(MarginRule::parse("api-1996"), Ok(MarginRule::Api1996));
        assert_eq!(
            MarginRule::parse("15"),
            Ok(MarginRule::Fixed { percent: 15.0 })
        );
        assert_eq!(
            MarginRule::parse("12.5%"),
            Ok(MarginRule::Fixed { percent: 12.5 })
        );
        assert!(matches!(
            MarginRule::parse("api-2099"),
            Err(MarginError::UnknownRule { .. })
        ));
        assert!(matches!(
            MarginRule::parse("-3"),
            Err(MarginError::PercentOutOfRange { .. })
        ));
        assert!(matches!(
            MarginRule::parse("NaN"),
            Err(MarginError::PercentOutOfRange { .. })
        ));
        for rule in [
            MarginRule::Api2005,
            MarginRule::Api1996,
            MarginRule::Fixed { percent: 15.0 },
            MarginRule::Fixed { percent: 7.25 },
        ] {
            assert_eq!(MarginRule::parse(&rule.name()), Ok(rule));
        }
        assert!(OperatingRange::new(4000.0, 3000.0).is_err());
        assert!(OperatingRange::new(0.0, 3000.0).is_err());
        assert!(OperatingRange::new(f64::NAN, 3000.0).is_err());
    }
}
