//! The JSON document of `veer analyze --json` (the contract in the design notes, plus extra keys).

use super::CAUTION;
use crate::pipeline::Analysis;
use serde_json::{json, Value};
pub(crate) use veer_results::event;
use veer_results::round as r;

/// The whole document.
pub(crate) fn document(a: &Analysis) -> Value {
    let p = a.stats.pulses;
    let mut doc = json!({
        "source": a.source,
        "sample_rate_hz": a.sample_rate,
        "start_s": r(a.start_s, 6),
        "vibration_channels": a.channels,
        "duration_s": r(a.duration_s, 3),
        "tach": {
            "column": a.tach,
            "revolutions": a.stats.revolutions,
            "pulses": p.pulses,
            "pulses_inserted": p.inserted,
            "pulses_dropped": p.dropped,
            "tach_losses": p.losses,
        },
        "events": a.events.iter().map(event).collect::<Vec<_>>(),
        "caution": CAUTION,
    });
    if let Some(m) = &a.config.margins {
        doc["margin_rule"] = json!(m.rule.name());
        doc["operating_range_rpm"] = json!([m.range.min_rpm, m.range.max_rpm]);
    }
    doc
}
