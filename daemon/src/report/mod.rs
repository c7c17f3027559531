//! Printing results: a readable table for people, one JSON document for programs.

pub(crate) mod json;
pub(crate) mod table;

/// The caution every report carries: veer advises, it does not protect.
pub(crate) const CAUTION: &str = "veer is not a machinery protection system and does not replace one. \
Alarm and trip settings follow the machine builder's data, the applicable standards and local codes, \
and are set by qualified people.";

pub(crate) use veer_results::{side_name, verdict_name};
