//! Printing results: a readable table for people, one JSON document for programs.

pub(crate) mod json;
pub(crate) mod table;

use veer_tracker::margin::{Side, Verdict};

/// The caution every report carries: veer advises, it does not protect.
pub(crate) const CAUTION: &str = "veer is not a machinery protection system and does not replace one. \
Alarm and trip settings follow the machine builder's data, the applicable standards and local codes, \
and are set by qualified people.";

/// The plain name of a side, as printed and in JSON.
pub(crate) fn side_name(s: Side) -> &'static str {
    match s {
        Side::Below => "below-range",
        Side::Inside => "inside-range",
        Side::Above => "above-range",
    }
}

/// The plain name of a verdict, as printed and in JSON.
pub(crate) fn verdict_name(v: Verdict) -> &'static str {
    match v {
        Verdict::NotRequired => "no-margin-needed",
        Verdict::Clear => "clear",
        Verdict::Warning => "warning",
        Verdict::Breach => "alarm",
    }
}
