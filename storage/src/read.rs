//! The read queries of [`Tx`]: what `veer status`, `events`, `show`, `plot` and reports need.

use rusqlite::{params, OptionalExtension, Row};

use crate::error::StorageError;
use crate::kinds::Series;
use crate::rows::{
    AlertRow, CriticalOrigin, CriticalRow, EstimateRow, EventChannelRow, EventRow, GapRow,
    HealthRow, IngestRow, MachineRow, ModelRow, OrderMapRow, Polar, ResonanceRow, SensorRow,
    SlowRoll, Stored, TrendRow, VectorPoint, VectorTrace,
};
use crate::tx::Tx;

/// A u64 read from an INTEGER column (negative values cannot be written by this crate).
fn get_u64(r: &Row<'_>, i: usize) -> rusqlite::Result<u64> {
    let v: i64 = r.get(i)?;
    u64::try_from(v).map_err(|e| {
        rusqlite::Error::FromSqlConversionFailure(i, rusqlite::types::Type::Integer, Box::new(e))
    })
}

fn opt_u64(r: &Row<'_>, i: usize) -> rusqlite::Result<Option<u64>> {
    let v: Option<i64> = r.get(i)?;
    v.map(|v| {
        u64::try_from(v).map_err(|e| {
            rusqlite::Error::FromSqlConversionFailure(
                i,
                rusqlite::types::Type::Integer,
                Box::new(e),
            )
        })
    })
    .transpose()
}

const INGEST_COLS: &str = "id, machine, kind, source, content_hash, bytes, status, error, \
     started_at, finished_at, data_start, data_end";

fn ingest_row(r: &Row<'_>) -> rusqlite::Result<Stored<IngestRow>> {
    Ok(Stored {
        id: r.get(0)?,
        row: IngestRow {
            machine: r.get(1)?,
            kind: r.get(2)?,
            source: r.get(3)?,
            content_hash: r.get(4)?,
            bytes: opt_u64(r, 5)?,
            status: r.get(6)?,
            error: r.get(7)?,
            started_at: r.get(8)?,
            finished_at: r.get(9)?,
            data_start: r.get(10)?,
            data_end: r.get(11)?,
        },
    })
}

const EVENT_COLS: &str = "id, machine, ingest_id, kind, start_time, end_time, speed_start_rpm, \
     speed_end_rpm, sweep_rate_rpm_s, vector_count";

fn event_row(r: &Row<'_>) -> rusqlite::Result<Stored<EventRow>> {
    Ok(Stored {
        id: r.get(0)?,
        row: EventRow {
            machine: r.get(1)?,
            ingest_id: r.get(2)?,
            kind: r.get(3)?,
            start_time: r.get(4)?,
            end_time: r.get(5)?,
            speed_start_rpm: r.get(6)?,
            speed_end_rpm: r.get(7)?,
            sweep_rate_rpm_s: r.get(8)?,
            vector_count: get_u64(r, 9)?,
            channels: Vec::new(),
        },
    })
}

const CRITICAL_COLS: &str = "id, machine, mode, origin, event_id, channel, speed_rpm, \
     amplification_factor, damping_ratio, valid_from";

const ESTIMATE_COLS: &str = "id, critical_id, time, estimate_rpm, uncertainty_rpm, informative, \
     channel, speed_rpm, natural_rpm, speed_ratio, method, reason, change_kind, locus_residual, revolutions";

fn estimate_row(r: &Row<'_>) -> rusqlite::Result<Stored<EstimateRow>> {
    let revolutions: Option<i64> = r.get(14)?;
    Ok(Stored {
        id: r.get(0)?,
        row: EstimateRow {
            critical_id: r.get(1)?,
            time: r.get(2)?,
            estimate_rpm: r.get(3)?,
            uncertainty_rpm: r.get(4)?,
            informative: r.get(5)?,
            channel: r.get(6)?,
            speed_rpm: r.get(7)?,
            natural_rpm: r.get(8)?,
            speed_ratio: r.get(9)?,
            method: r.get(10)?,
            reason: r.get(11)?,
            change: r.get(12)?,
            locus_residual: r.get(13)?,
            revolutions: revolutions.and_then(|n| u64::try_from(n).ok()),
        },
    })
}

const MODEL_COLS: &str = "critical_id, track, natural_rpm, damping_ratio, modal_amplitude, \
     modal_phase_deg, background_amplitude, background_phase_deg, slow_roll_amplitude, \
     slow_roll_phase_deg, fit_residual";

fn model_row(r: &Row<'_>) -> rusqlite::Result<ModelRow> {
    model_row_at(r, 0)
}

/// A model read from the columns starting at `at` (after the columns of a joined table).
fn model_row_at(r: &Row<'_>, at: usize) -> rusqlite::Result<ModelRow> {
    let polar = |i: usize| -> rusqlite::Result<Polar> {
        Ok(Polar {
            amplitude: r.get(at + i)?,
            phase_deg: r.get(at + i + 1)?,
        })
    };
    Ok(ModelRow {
        critical_id: r.get(at)?,
        track: r.get(at + 1)?,
        natural_rpm: r.get(at + 2)?,
        damping_ratio: r.get(at + 3)?,
        modal: polar(4)?,
        background: polar(6)?,
        slow_roll: polar(8)?,
        fit_residual: r.get(at + 10)?,
    })
}

fn critical_row(r: &Row<'_>) -> rusqlite::Result<Stored<CriticalRow>> {
    let origin: String = r.get(3)?;
    let event_id: Option<i64> = r.get(4)?;
    let origin = match (origin.as_str(), event_id) {
        ("measured", Some(event_id)) => CriticalOrigin::Measured { event_id },
        // The schema's CHECK ties `design` to a NULL event id.
        _ => CriticalOrigin::Design,
    };
    Ok(Stored {
        id: r.get(0)?,
        row: CriticalRow {
            machine: r.get(1)?,
            mode: r.get(2)?,
            origin,
            channel: r.get(5)?,
            speed_rpm: r.get(6)?,
            amplification_factor: r.get(7)?,
            damping_ratio: r.get(8)?,
            valid_from: r.get(9)?,
        },
    })
}

pub(crate) const TREND_COLS: &str = "id, machine, channel, time, speed_rpm, x1_amplitude, \
     x1_phase_deg, x2_amplitude, x2_phase_deg, overall, overall_min, overall_max, samples";

pub(crate) fn trend_row(r: &Row<'_>) -> rusqlite::Result<Stored<TrendRow>> {
    let x2a: Option<f64> = r.get(7)?;
    let x2p: Option<f64> = r.get(8)?;
    Ok(Stored {
        id: r.get(0)?,
        row: TrendRow {
            machine: r.get(1)?,
            channel: r.get(2)?,
            time: r.get(3)?,
            speed_rpm: r.get(4)?,
            x1: Polar {
                amplitude: r.get(5)?,
                phase_deg: r.get(6)?,
            },
            x2: x2a.zip(x2p).map(|(amplitude, phase_deg)| Polar {
                amplitude,
                phase_deg,
            }),
            overall: r.get(9)?,
            overall_min: r.get(10)?,
            overall_max: r.get(11)?,
            samples: get_u64(r, 12)?,
        },
    })
}

const ALERT_COLS: &str =
    "id, machine, kind, severity, opened_at, closed_at, message, evidence, event_id";

fn alert_row(r: &Row<'_>) -> rusqlite::Result<Stored<AlertRow>> {
    Ok(Stored {
        id: r.get(0)?,
        row: AlertRow {
            machine: r.get(1)?,
            kind: r.get(2)?,
            severity: r.get(3)?,
            opened_at: r.get(4)?,
            closed_at: r.get(5)?,
            message: r.get(6)?,
            evidence: r.get(7)?,
            event_id: r.get(8)?,
        },
    })
}

impl Tx<'_> {
    /// Runs a query and collects its rows.
    fn collect<T>(
        &self,
        op: &'static str,
        sql: &str,
        params: impl rusqlite::Params,
        map: impl FnMut(&Row<'_>) -> rusqlite::Result<T>,
    ) -> Result<Vec<T>, StorageError> {
        let mut st = self.conn.prepare_cached(sql).map_err(self.sql(op))?;
        let rows = st.query_map(params, map).map_err(self.sql(op))?;
        rows.collect::<Result<Vec<T>, _>>().map_err(self.sql(op))
    }

    /// All machines, by id.
    pub fn machines(&self) -> Result<Vec<MachineRow>, StorageError> {
        self.collect(
            "list machines",
            "SELECT id, name, min_operating_rpm, max_continuous_rpm, trip_rpm FROM machine
             ORDER BY id",
            [],
            |r| {
                Ok(MachineRow {
                    id: r.get(0)?,
                    name: r.get(1)?,
                    min_operating_rpm: r.get(2)?,
                    max_continuous_rpm: r.get(3)?,
                    trip_rpm: r.get(4)?,
                })
            },
        )
    }

    /// A machine's sensors, by channel.
    pub fn sensors(&self, machine: &str) -> Result<Vec<SensorRow>, StorageError> {
        self.collect(
            "list sensors",
            "SELECT machine, channel, kind, units, angle_deg FROM sensor WHERE machine = ?1
             ORDER BY channel",
            [machine],
            |r| {
                Ok(SensorRow {
                    machine: r.get(0)?,
                    channel: r.get(1)?,
                    kind: r.get(2)?,
                    units: r.get(3)?,
                    angle_deg: r.get(4)?,
                })
            },
        )
    }

    /// The ingest record of content seen before: one that is `done` if there is one (the content
    /// needs no processing again), else the most recent.
    pub fn ingest_seen(
        &self,
        content_hash: &str,
    ) -> Result<Option<Stored<IngestRow>>, StorageError> {
        const OP: &str = "look up an ingest by content hash";
        let sql = format!(
            "SELECT {INGEST_COLS} FROM ingest WHERE content_hash = ?1
             ORDER BY status = 'done' DESC, id DESC LIMIT 1"
        );
        self.conn
            .prepare_cached(&sql)
            .and_then(|mut st| st.query_row([content_hash], ingest_row).optional())
            .map_err(self.sql(OP))
    }

    /// An ingest record by id.
    pub fn ingest(&self, id: i64) -> Result<Option<Stored<IngestRow>>, StorageError> {
        const OP: &str = "read an ingest record";
        let sql = format!("SELECT {INGEST_COLS} FROM ingest WHERE id = ?1");
        self.conn
            .prepare_cached(&sql)
            .and_then(|mut st| st.query_row([id], ingest_row).optional())
            .map_err(self.sql(OP))
    }

    fn event_channels(&self, event_id: i64) -> Result<Vec<EventChannelRow>, StorageError> {
        self.collect(
            "read an event's channels",
            "SELECT channel, units, slow_roll_amplitude, slow_roll_phase_deg, slow_roll_min_rpm,
               slow_roll_max_rpm, slow_roll_points
             FROM event_channel WHERE event_id = ?1 ORDER BY rowid",
            [event_id],
            |r| {
                let amp: Option<f64> = r.get(2)?;
                let phase: Option<f64> = r.get(3)?;
                let min: Option<f64> = r.get(4)?;
                let max: Option<f64> = r.get(5)?;
                let points = opt_u64(r, 6)?;
                let slow_roll = match (amp, phase, min, max, points) {
                    (
                        Some(amplitude),
                        Some(phase_deg),
                        Some(min_rpm),
                        Some(max_rpm),
                        Some(points),
                    ) => Some(SlowRoll {
                        vector: Polar {
                            amplitude,
                            phase_deg,
                        },
                        min_rpm,
                        max_rpm,
                        points,
                    }),
                    _ => None,
                };
                Ok(EventChannelRow {
                    channel: r.get(0)?,
                    units: r.get(1)?,
                    slow_roll,
                })
            },
        )
    }

    /// Events, oldest first, of one machine or all, starting at or after `since` if given.
    pub fn events(
        &self,
        machine: Option<&str>,
        since: Option<f64>,
    ) -> Result<Vec<Stored<EventRow>>, StorageError> {
        let sql = format!(
            "SELECT {EVENT_COLS} FROM event
             WHERE (?1 IS NULL OR machine = ?1) AND (?2 IS NULL OR start_time >= ?2)
             ORDER BY start_time, id"
        );
        let mut events = self.collect("list events", &sql, params![machine, since], event_row)?;
        for e in &mut events {
            e.row.channels = self.event_channels(e.id)?;
        }
        Ok(events)
    }

    /// One event by id.
    pub fn event(&self, id: i64) -> Result<Option<Stored<EventRow>>, StorageError> {
        const OP: &str = "read an event";
        let sql = format!("SELECT {EVENT_COLS} FROM event WHERE id = ?1");
        let event = self
            .conn
            .prepare_cached(&sql)
            .and_then(|mut st| st.query_row([id], event_row).optional())
            .map_err(self.sql(OP))?;
        match event {
            Some(mut e) => {
                e.row.channels = self.event_channels(id)?;
                Ok(Some(e))
            }
            None => Ok(None),
        }
    }

    /// The vectors of an event, one trace per (channel, order, series), points in inserted order.
    pub fn vectors(&self, event_id: i64) -> Result<Vec<VectorTrace>, StorageError> {
        let rows = self.collect(
            "read an event's vectors",
            "SELECT channel, nx, series, time, speed_rpm, amplitude, phase_deg FROM vector
             WHERE event_id = ?1 ORDER BY channel, nx, series, rowid",
            [event_id],
            |r| {
                let key: (String, u32, Series) = (r.get(0)?, r.get(1)?, r.get(2)?);
                let p = VectorPoint {
                    time: r.get(3)?,
                    speed_rpm: r.get(4)?,
                    vector: Polar {
                        amplitude: r.get(5)?,
                        phase_deg: r.get(6)?,
                    },
                };
                Ok((key, p))
            },
        )?;
        let mut traces: Vec<VectorTrace> = Vec::new();
        for ((channel, order, series), p) in rows {
            match traces.last_mut() {
                Some(t) if t.channel == channel && t.order == order && t.series == series => {
                    t.points.push(p)
                }
                _ => traces.push(VectorTrace {
                    channel,
                    order,
                    series,
                    points: vec![p],
                }),
            }
        }
        Ok(traces)
    }

    /// The order map of an event, spectra by channel then time.
    pub fn order_map(&self, event_id: i64) -> Result<Vec<OrderMapRow>, StorageError> {
        self.collect(
            "read an event's order map",
            "SELECT channel, time, speed_rpm, order_step, amplitudes FROM order_map
             WHERE event_id = ?1 ORDER BY channel, time, rowid",
            [event_id],
            |r| {
                let blob: Vec<u8> = r.get(4)?;
                let amplitudes = blob
                    .chunks_exact(4)
                    .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]))
                    .collect();
                Ok(OrderMapRow {
                    channel: r.get(0)?,
                    time: r.get(1)?,
                    speed_rpm: r.get(2)?,
                    order_step: r.get(3)?,
                    amplitudes,
                })
            },
        )
    }

    /// The resonances of an event, by channel then speed.
    pub fn resonances(&self, event_id: i64) -> Result<Vec<Stored<ResonanceRow>>, StorageError> {
        self.collect(
            "read an event's resonances",
            "SELECT id, channel, nx, speed_rpm, peak_amplitude, phase_deg, phase_change_deg, n1_rpm,
               n2_rpm, amplification_factor, damping_ratio, heavily_damped, natural_rpm,
               required_margin_pct, actual_margin_pct, margin_verdict
             FROM resonance WHERE event_id = ?1 ORDER BY channel, speed_rpm, id",
            [event_id],
            |r| {
                Ok(Stored {
                    id: r.get(0)?,
                    row: ResonanceRow {
                        channel: r.get(1)?,
                        order: r.get(2)?,
                        speed_rpm: r.get(3)?,
                        peak_amplitude: r.get(4)?,
                        phase_deg: r.get(5)?,
                        phase_change_deg: r.get(6)?,
                        n1_rpm: r.get(7)?,
                        n2_rpm: r.get(8)?,
                        amplification_factor: r.get(9)?,
                        damping_ratio: r.get(10)?,
                        heavily_damped: r.get(11)?,
                        natural_rpm: r.get(12)?,
                        required_margin_pct: r.get(13)?,
                        actual_margin_pct: r.get(14)?,
                        margin_verdict: r.get(15)?,
                    },
                })
            },
        )
    }

    /// A machine's whole critical-speed table with its history: by mode, then oldest first.
    pub fn criticals(&self, machine: &str) -> Result<Vec<Stored<CriticalRow>>, StorageError> {
        let sql = format!(
            "SELECT {CRITICAL_COLS} FROM critical WHERE machine = ?1 ORDER BY mode, valid_from, id"
        );
        self.collect("read critical speeds", &sql, [machine], critical_row)
    }

    /// The value of each mode in force now: the row with the latest `valid_from`, by mode.
    pub fn current_criticals(
        &self,
        machine: &str,
    ) -> Result<Vec<Stored<CriticalRow>>, StorageError> {
        let sql = format!(
            "SELECT {CRITICAL_COLS} FROM critical c WHERE machine = ?1 AND id = (
               SELECT id FROM critical WHERE machine = c.machine AND mode = c.mode
               ORDER BY valid_from DESC, id DESC LIMIT 1)
             ORDER BY mode"
        );
        self.collect(
            "read current critical speeds",
            &sql,
            [machine],
            critical_row,
        )
    }

    /// Trend rows of a machine in `[from, to)`, by time.
    pub fn trend(
        &self,
        machine: &str,
        from: f64,
        to: f64,
    ) -> Result<Vec<Stored<TrendRow>>, StorageError> {
        let sql = format!(
            "SELECT {TREND_COLS} FROM trend WHERE machine = ?1 AND time >= ?2 AND time < ?3
             ORDER BY time, channel, id"
        );
        self.collect(
            "read the trend",
            &sql,
            params![machine, from, to],
            trend_row,
        )
    }

    /// The latest trend row of each channel of a machine, by channel.
    pub fn last_trend(&self, machine: &str) -> Result<Vec<Stored<TrendRow>>, StorageError> {
        let sql = format!(
            "SELECT {TREND_COLS} FROM trend t WHERE machine = ?1 AND id = (
               SELECT id FROM trend WHERE machine = t.machine AND channel = t.channel
               ORDER BY time DESC, id DESC LIMIT 1)
             ORDER BY channel"
        );
        self.collect("read the latest trend", &sql, [machine], trend_row)
    }

    /// The time of a machine's newest data: the latest of its trend rows, event ends and ingested
    /// data spans. `None` when nothing is stored for it.
    pub fn last_data_time(&self, machine: &str) -> Result<Option<f64>, StorageError> {
        const OP: &str = "find the latest data time";
        self.conn
            .prepare_cached(
                "SELECT max(t) FROM (
                   SELECT max(time) AS t FROM trend WHERE machine = ?1
                   UNION ALL SELECT max(end_time) FROM event WHERE machine = ?1
                   UNION ALL SELECT max(data_end) FROM ingest WHERE machine = ?1)",
            )
            .and_then(|mut st| st.query_row([machine], |r| r.get(0)))
            .map_err(self.sql(OP))
    }

    /// Open alerts, of one machine or all, oldest first.
    pub fn open_alerts(
        &self,
        machine: Option<&str>,
    ) -> Result<Vec<Stored<AlertRow>>, StorageError> {
        let sql = format!(
            "SELECT {ALERT_COLS} FROM alert WHERE state = 'open' AND (?1 IS NULL OR machine = ?1)
             ORDER BY opened_at, id"
        );
        self.collect("list open alerts", &sql, [machine], alert_row)
    }

    /// Alerts opened or closed at or after `since`, of one machine or all, by opening time.
    pub fn alerts_since(
        &self,
        since: f64,
        machine: Option<&str>,
    ) -> Result<Vec<Stored<AlertRow>>, StorageError> {
        let sql = format!(
            "SELECT {ALERT_COLS} FROM alert
             WHERE (opened_at >= ?1 OR closed_at >= ?1) AND (?2 IS NULL OR machine = ?2)
             ORDER BY opened_at, id"
        );
        self.collect(
            "list recent alerts",
            &sql,
            params![since, machine],
            alert_row,
        )
    }

    /// Gaps of a machine's streams starting at or after `since`, by time.
    pub fn gaps(&self, machine: &str, since: f64) -> Result<Vec<Stored<GapRow>>, StorageError> {
        self.collect(
            "list gaps",
            "SELECT id, machine, ingest_id, source, start_time, end_time, dropped_frames,
               corrupt_frames FROM gap WHERE machine = ?1 AND start_time >= ?2
             ORDER BY start_time, id",
            params![machine, since],
            |r| {
                Ok(Stored {
                    id: r.get(0)?,
                    row: GapRow {
                        machine: r.get(1)?,
                        ingest_id: r.get(2)?,
                        source: r.get(3)?,
                        start_time: r.get(4)?,
                        end_time: r.get(5)?,
                        dropped_frames: get_u64(r, 6)?,
                        corrupt_frames: get_u64(r, 7)?,
                    },
                })
            },
        )
    }

    /// Sensor-health changes of a machine at or after `since`, by time.
    pub fn health(
        &self,
        machine: &str,
        since: f64,
    ) -> Result<Vec<Stored<HealthRow>>, StorageError> {
        self.collect(
            "list sensor-health changes",
            "SELECT id, machine, channel, time, condition, healthy, detail FROM sensor_health
             WHERE machine = ?1 AND time >= ?2 ORDER BY time, id",
            params![machine, since],
            |r| {
                Ok(Stored {
                    id: r.get(0)?,
                    row: HealthRow {
                        machine: r.get(1)?,
                        channel: r.get(2)?,
                        time: r.get(3)?,
                        condition: r.get(4)?,
                        healthy: r.get(5)?,
                        detail: r.get(6)?,
                    },
                })
            },
        )
    }

    /// The live estimates of one critical-table row, by time.
    pub fn estimates(&self, critical_id: i64) -> Result<Vec<Stored<EstimateRow>>, StorageError> {
        let sql = format!(
            "SELECT {ESTIMATE_COLS} FROM critical_estimate WHERE critical_id = ?1 ORDER BY time, id"
        );
        self.collect(
            "list critical-speed estimates",
            &sql,
            [critical_id],
            estimate_row,
        )
    }

    /// The live estimates of every critical of a machine with `from <= time < to`, by critical,
    /// then time.
    pub fn machine_estimates(
        &self,
        machine: &str,
        from: f64,
        to: f64,
    ) -> Result<Vec<Stored<EstimateRow>>, StorageError> {
        let cols = ESTIMATE_COLS
            .split(", ")
            .map(|c| format!("e.{c}"))
            .collect::<Vec<_>>()
            .join(", ");
        let sql = format!(
            "SELECT {cols} FROM critical_estimate e JOIN critical c ON c.id = e.critical_id
             WHERE c.machine = ?1 AND e.time >= ?2 AND e.time < ?3
             ORDER BY e.critical_id, e.time, e.id"
        );
        self.collect(
            "list a machine's critical-speed estimates",
            &sql,
            params![machine, from, to],
            estimate_row,
        )
    }

    /// The model of one measured critical, if its event's fit gave one.
    pub fn model(&self, critical_id: i64) -> Result<Option<ModelRow>, StorageError> {
        const OP: &str = "read a critical's model";
        let sql = format!("SELECT {MODEL_COLS} FROM critical_model WHERE critical_id = ?1");
        self.conn
            .prepare_cached(&sql)
            .and_then(|mut st| st.query_row([critical_id], model_row).optional())
            .map_err(self.sql(OP))
    }

    /// The models a machine's live estimates start from: for each track (a mode followed from
    /// event to event, see [`ModelRow::track`]), the latest measured critical that has a model,
    /// with that model, oldest first.
    pub fn latest_models(
        &self,
        machine: &str,
    ) -> Result<Vec<(Stored<CriticalRow>, ModelRow)>, StorageError> {
        let ccols = CRITICAL_COLS
            .split(", ")
            .map(|c| format!("c.{c}"))
            .collect::<Vec<_>>()
            .join(", ");
        let mcols = MODEL_COLS
            .split(", ")
            .map(|c| format!("m.{c}"))
            .collect::<Vec<_>>()
            .join(", ");
        let sql = format!(
            "SELECT {ccols}, {mcols} FROM critical c JOIN critical_model m ON m.critical_id = c.id
             WHERE c.machine = ?1 AND c.id = (
               SELECT c2.id FROM critical c2 JOIN critical_model m2 ON m2.critical_id = c2.id
               WHERE c2.machine = c.machine AND m2.track = m.track AND c2.origin = 'measured'
               ORDER BY c2.valid_from DESC, c2.id DESC LIMIT 1)
             ORDER BY c.valid_from, c.id"
        );
        let n = CRITICAL_COLS.split(", ").count();
        self.collect("read the latest critical models", &sql, [machine], |r| {
            Ok((critical_row(r)?, model_row_at(r, n)?))
        })
    }

    /// The id of the design critical of `machine` numbered `mode` now in force (its latest
    /// design row): what a live estimate of a design critical is stored against.
    pub fn design_critical_id(
        &self,
        machine: &str,
        mode: u32,
    ) -> Result<Option<i64>, StorageError> {
        const OP: &str = "find a design critical";
        self.conn
            .prepare_cached(
                "SELECT id FROM critical WHERE machine = ?1 AND mode = ?2 AND origin = 'design'
                 ORDER BY valid_from DESC, id DESC LIMIT 1",
            )
            .and_then(|mut st| {
                st.query_row(params![machine, mode], |r| r.get(0))
                    .optional()
            })
            .map_err(self.sql(OP))
    }

    /// The id of the measured critical of `machine` found on `channel` as mode `mode` with
    /// `valid_from` (the end of its event): how a live estimate finds the row it estimates.
    pub fn measured_critical_id(
        &self,
        machine: &str,
        channel: &str,
        mode: u32,
        valid_from: f64,
    ) -> Result<Option<i64>, StorageError> {
        const OP: &str = "find a measured critical";
        self.conn
            .prepare_cached(
                "SELECT id FROM critical WHERE machine = ?1 AND channel = ?2 AND mode = ?3
                   AND origin = 'measured' AND valid_from = ?4 ORDER BY id DESC LIMIT 1",
            )
            .and_then(|mut st| {
                st.query_row(params![machine, channel, mode, valid_from], |r| r.get(0))
                    .optional()
            })
            .map_err(self.sql(OP))
    }
}
