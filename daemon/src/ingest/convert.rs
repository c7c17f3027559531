//! From the engine's results to the database's plain rows.
//!
//! The engine works in seconds since the start of its input; rows hold unix time, so every time is
//! shifted by the input's start (`t0_unix`).

use veer_storage::{
    CriticalOrigin, CriticalRow, EventChannelRow, EventKind, OrderMapRow, Polar, ResonanceRow,
    Series, SlowRoll, VectorPoint,
};
use veer_tracker::engine::{Event, EventKind as EngineKind};
use veer_tracker::types::ResponsePoint;
use veer_tracker::{lag_deg, Complex64};

/// A vector as stored: amplitude and phase lag.
pub(crate) fn polar(v: Complex64) -> Polar {
    Polar {
        amplitude: v.norm(),
        phase_deg: lag_deg(v),
    }
}

fn points(series: &[ResponsePoint], t0_unix: f64) -> Vec<VectorPoint> {
    series
        .iter()
        .map(|p| VectorPoint {
            time: t0_unix + p.time_s,
            speed_rpm: p.speed_rpm,
            vector: polar(p.vector),
        })
        .collect()
}

/// One vector series of an event: channel, order, series kind, points.
pub(crate) type Trace = (String, u32, Series, Vec<VectorPoint>);

/// An event with everything stored alongside it.
#[derive(Clone, Debug)]
pub(crate) struct EventRecord {
    pub event: veer_storage::EventRow,
    pub traces: Vec<Trace>,
    pub order_map: Vec<OrderMapRow>,
    pub resonances: Vec<ResonanceRow>,
    /// Measured criticals (event id filled in by the writer).
    pub criticals: Vec<CriticalRow>,
    /// The models of the criticals whose fit was good, stored beside their critical rows.
    pub models: Vec<super::models::TrackedModel>,
}

/// Converts a finished engine event of `machine` into rows.
pub(crate) fn event_record(machine: &str, ev: &Event, t0_unix: f64) -> EventRecord {
    let kind = match ev.kind {
        EngineKind::RunUp => EventKind::RunUp,
        EngineKind::CoastDown => EventKind::CoastDown,
    };
    let channels = ev
        .channels
        .iter()
        .map(|c| EventChannelRow {
            channel: c.name.clone(),
            units: c.amplitude.to_string(),
            slow_roll: c.slow_roll.map(|s| SlowRoll {
                vector: polar(s.vector),
                min_rpm: s.speed_min_rpm,
                max_rpm: s.speed_max_rpm,
                points: s.points as u64,
            }),
        })
        .collect();
    let event = veer_storage::EventRow {
        machine: machine.to_string(),
        ingest_id: None,
        kind,
        start_time: t0_unix + ev.start_s,
        end_time: t0_unix + ev.end_s,
        speed_start_rpm: ev.speed_start_rpm,
        speed_end_rpm: ev.speed_end_rpm,
        sweep_rate_rpm_s: ev.sweep_rate_rpm_s,
        vector_count: ev.vectors,
        channels,
    };
    let mut traces = Vec::new();
    let mut order_map = Vec::new();
    let mut resonances = Vec::new();
    let mut criticals = Vec::new();
    for c in &ev.channels {
        if !c.response.is_empty() {
            traces.push((
                c.name.clone(),
                1,
                Series::Measured,
                points(&c.response, t0_unix),
            ));
            traces.push((
                c.name.clone(),
                1,
                Series::Compensated,
                points(&c.compensated, t0_unix),
            ));
        }
        for (order, series) in &c.other_orders {
            traces.push((
                c.name.clone(),
                *order,
                Series::Measured,
                points(series, t0_unix),
            ));
        }
        order_map.extend(c.order_map.iter().map(|row| OrderMapRow {
            channel: c.name.clone(),
            time: t0_unix + row.time_s,
            speed_rpm: row.speed_rpm,
            order_step: row.order_step,
            amplitudes: row.amplitudes.clone(),
        }));
        for (mode, cr) in c.criticals.iter().enumerate() {
            let r = &cr.resonance;
            resonances.push(ResonanceRow {
                channel: c.name.clone(),
                order: 1,
                speed_rpm: r.speed_rpm,
                peak_amplitude: r.peak_amplitude,
                phase_deg: r.phase_deg,
                phase_change_deg: r.phase_change_deg,
                n1_rpm: r.n1_rpm,
                n2_rpm: r.n2_rpm,
                amplification_factor: r.amplification_factor,
                damping_ratio: r.damping_ratio,
                heavily_damped: r.heavily_damped,
                natural_rpm: r.fit.as_ref().map(|f| f.natural_rpm),
                required_margin_pct: cr.margin.map(|m| m.required_pct),
                actual_margin_pct: cr.margin.map(|m| m.actual_pct),
                margin_verdict: cr
                    .margin
                    .map(|m| crate::report::verdict_name(m.verdict).to_string()),
            });
            criticals.push(CriticalRow {
                machine: machine.to_string(),
                mode: mode as u32 + 1,
                origin: CriticalOrigin::Measured { event_id: 0 },
                channel: Some(c.name.clone()),
                speed_rpm: r.speed_rpm,
                amplification_factor: r.amplification_factor,
                damping_ratio: r.damping_ratio,
                valid_from: t0_unix + ev.end_s,
            });
        }
    }
    EventRecord {
        event,
        traces,
        order_map,
        resonances,
        criticals,
        models: super::models::models_of(ev, t0_unix),
    }
}
