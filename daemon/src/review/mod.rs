//! Review after an event: the stored run-ups and coast-downs as tables, plots and an HTML report,
//! and each machine's margins with recommended alarm settings.
//!
//! Everything here reads the database only (a WAL reader beside the daemon) and recomputes nothing
//! the engine stored: the figures shown are the engine's, so `show` agrees with `analyze` on the
//! same data. What is added is what needs more than one event or a model: the sweep-rate bias of a
//! critical speed ([`bias`]), the comparison with a baseline run ([`report`]) and the history of a
//! machine's criticals ([`margins`]).

pub(crate) mod bias;
pub(crate) mod events;
pub(crate) mod margins;
pub(crate) mod plot;
pub(crate) mod report;
pub(crate) mod show;

use crate::config::Config;
use anyhow::{anyhow, Result};
use serde_json::{json, Value};
use veer_storage::{
    EventKind, EventRow, MachineRow, OrderMapRow, Polar, ResonanceRow, Series, Store, VectorPoint,
    VectorTrace,
};
use veer_tracker::margin::{MarginRule, OperatingRange};

/// Warning band, points, when no configuration names one (the configuration's default).
pub(crate) const DEFAULT_BAND_PCT: f64 = 5.0;

/// A machine's margin rule and warning band: from the configuration when given, else the
/// configuration's defaults (current API edition, 5 points).
pub(crate) fn rule_for(cfg: Option<&Config>, machine: &str) -> (MarginRule, f64) {
    cfg.and_then(|c| c.machine(machine))
        .map_or((MarginRule::Api2005, DEFAULT_BAND_PCT), |m| {
            (m.alerts.margin, m.alerts.warn_band_pct)
        })
}

/// The machine's operating range, when both ends are stored and valid.
pub(crate) fn range_of(m: &MachineRow) -> Option<OperatingRange> {
    match (m.min_operating_rpm, m.max_continuous_rpm) {
        (Some(a), Some(b)) => OperatingRange::new(a, b).ok(),
        _ => None,
    }
}

/// Everything stored about one event, read in one go.
pub(crate) struct EventData {
    /// Event id.
    pub id: i64,
    /// The event row with its channels.
    pub event: EventRow,
    /// Its machine.
    pub machine: MachineRow,
    /// The machine's operating range.
    pub range: Option<OperatingRange>,
    /// The margin rule the machine is held to.
    pub rule: MarginRule,
    /// Its warning band, points.
    pub band: f64,
    /// The resonances the engine found, by channel then speed.
    pub resonances: Vec<ResonanceRow>,
    /// The nX vector traces.
    pub vectors: Vec<VectorTrace>,
    /// The order map.
    pub order_map: Vec<OrderMapRow>,
}

fn se(e: veer_storage::StorageError) -> anyhow::Error {
    anyhow!("{e}")
}

/// Reads one event and what belongs to it; an unknown id is an error naming it.
pub(crate) fn load(store: &Store, cfg: Option<&Config>, id: i64) -> Result<EventData> {
    let ev = store
        .event(id)
        .map_err(se)?
        .ok_or_else(|| anyhow!("no event {id} in the database (see `veer events`)"))?;
    let machine = store
        .machines()
        .map_err(se)?
        .into_iter()
        .find(|m| m.id == ev.machine)
        .ok_or_else(|| anyhow!("event {id}: machine {} is not in the database", ev.machine))?;
    let (rule, band) = rule_for(cfg, &machine.id);
    Ok(EventData {
        id,
        range: range_of(&machine),
        machine,
        rule,
        band,
        resonances: store
            .resonances(id)
            .map_err(se)?
            .into_iter()
            .map(|r| r.row)
            .collect(),
        vectors: store.vectors(id).map_err(se)?,
        order_map: store.order_map(id).map_err(se)?,
        event: ev.row,
    })
}

impl EventData {
    /// The event's channel names, in stored order.
    pub fn channels(&self) -> Vec<String> {
        self.event
            .channels
            .iter()
            .map(|c| c.channel.clone())
            .collect()
    }

    /// A channel's amplitude units as frozen with the event.
    pub fn units(&self, channel: &str) -> String {
        self.event
            .channels
            .iter()
            .find(|c| c.channel == channel)
            .map_or_else(String::new, |c| c.units.clone())
    }

    /// One vector trace.
    pub fn trace(&self, channel: &str, order: u32, series: Series) -> Option<&VectorTrace> {
        self.vectors
            .iter()
            .find(|t| t.channel == channel && t.order == order && t.series == series)
    }

    /// The compensated 1X trace where there is one, else the measured one: what criticals were
    /// found in.
    pub fn best_1x(&self, channel: &str) -> Option<&VectorTrace> {
        self.trace(channel, 1, Series::Compensated)
            .or_else(|| self.trace(channel, 1, Series::Measured))
    }

    /// The resonances of one channel.
    pub fn resonances_of<'a>(&'a self, channel: &'a str) -> impl Iterator<Item = &'a ResonanceRow> {
        self.resonances.iter().filter(move |r| r.channel == channel)
    }

    /// Whether the event is a run-up.
    pub fn is_run_up(&self) -> bool {
        self.event.kind == EventKind::RunUp
    }
}

/// The mean vector of the points inside a speed window, averaged through real and imaginary
/// parts (never by averaging phase), with the number of points and their speed span.
pub(crate) fn mean_vector(
    points: &[VectorPoint],
    lo: f64,
    hi: f64,
) -> Option<(Polar, usize, f64, f64)> {
    let inside: Vec<&VectorPoint> = points
        .iter()
        .filter(|p| p.speed_rpm >= lo && p.speed_rpm <= hi)
        .collect();
    if inside.is_empty() {
        return None;
    }
    let n = inside.len() as f64;
    let (mut re, mut im) = (0.0, 0.0);
    let (mut smin, mut smax) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in &inside {
        let (a, b) = p.vector.to_re_im();
        re += a;
        im += b;
        smin = smin.min(p.speed_rpm);
        smax = smax.max(p.speed_rpm);
    }
    Some((Polar::from_re_im(re / n, im / n), inside.len(), smin, smax))
}

/// Rounds for print: JSON readers get figures to a sensible precision, not float noise.
pub(crate) fn r(x: f64, digits: i32) -> Value {
    if !x.is_finite() {
        return Value::Null;
    }
    let f = 10f64.powi(digits);
    json!((x * f).round() / f)
}

/// [`r`] of an optional value.
pub(crate) fn ro(x: Option<f64>, digits: i32) -> Value {
    x.map_or(Value::Null, |v| r(v, digits))
}

/// A figure for a table, `-` when missing.
pub(crate) fn fmt_opt(x: Option<f64>, prec: usize) -> String {
    x.filter(|v| v.is_finite())
        .map_or_else(|| "-".to_string(), |v| format!("{v:.prec$}"))
}

/// The signed difference of two phase lags, wrapped into −180..180 degrees.
pub(crate) fn phase_diff(a: f64, b: f64) -> f64 {
    (a - b + 180.0).rem_euclid(360.0) - 180.0
}
