//! [`Tx`]: every typed operation, run on one connection, inside or outside a transaction.

use std::path::Path;

use rusqlite::{params, Connection, OptionalExtension};

use crate::error::StorageError;
use crate::kinds::{AlertState, IngestStatus, Series};
use crate::rows::{
    AlertRow, CriticalOrigin, CriticalRow, EstimateRow, EventRow, GapRow, HealthRow, MachineRow,
    ModelRow, NewIngest, OrderMapRow, ResonanceRow, SensorRow, TrendRow, VectorPoint,
};

/// The typed operations on a database, bound to one connection.
///
/// [`Store::transaction`](crate::Store::transaction) hands one to its closure: everything done
/// through it commits together or not at all. The same operations are on [`Store`](crate::Store)
/// itself, each in a transaction of its own.
pub struct Tx<'a> {
    pub(crate) conn: &'a Connection,
    pub(crate) path: &'a Path,
}

impl<'a> Tx<'a> {
    /// Maps an SQLite error to one naming the file and the operation.
    pub(crate) fn sql(&self, op: &'static str) -> impl Fn(rusqlite::Error) -> StorageError + 'a {
        let path = self.path;
        move |source| StorageError::Sqlite {
            path: path.to_path_buf(),
            op,
            source,
        }
    }

    /// A count as SQLite's signed 64-bit integer, refusing what does not fit.
    pub(crate) fn int(&self, op: &'static str, v: u64) -> Result<i64, StorageError> {
        i64::try_from(v).map_err(|_| StorageError::InvalidArgument {
            path: self.path.to_path_buf(),
            op,
            reason: format!("count {v} does not fit a 64-bit signed integer"),
        })
    }

    /// Inserts or updates a machine from the configuration. Rows referring to it are kept.
    pub fn upsert_machine(&self, m: &MachineRow) -> Result<(), StorageError> {
        const OP: &str = "upsert a machine";
        self.conn
            .prepare_cached(
                "INSERT INTO machine (id, name, min_operating_rpm, max_continuous_rpm, trip_rpm)
                 VALUES (?1, ?2, ?3, ?4, ?5)
                 ON CONFLICT (id) DO UPDATE SET name = excluded.name,
                   min_operating_rpm = excluded.min_operating_rpm,
                   max_continuous_rpm = excluded.max_continuous_rpm,
                   trip_rpm = excluded.trip_rpm",
            )
            .and_then(|mut st| {
                st.execute(params![
                    m.id,
                    m.name,
                    m.min_operating_rpm,
                    m.max_continuous_rpm,
                    m.trip_rpm
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(())
    }

    /// Inserts or updates a sensor channel from the configuration. The machine must exist.
    pub fn upsert_sensor(&self, s: &SensorRow) -> Result<(), StorageError> {
        const OP: &str = "upsert a sensor";
        self.conn
            .prepare_cached(
                "INSERT INTO sensor (machine, channel, kind, units, angle_deg)
                 VALUES (?1, ?2, ?3, ?4, ?5)
                 ON CONFLICT (machine, channel) DO UPDATE SET kind = excluded.kind,
                   units = excluded.units, angle_deg = excluded.angle_deg",
            )
            .and_then(|mut st| {
                st.execute(params![s.machine, s.channel, s.kind, s.units, s.angle_deg])
            })
            .map_err(self.sql(OP))?;
        Ok(())
    }

    /// Records the start of processing a file or stream segment, as `pending`. Returns its id.
    pub fn begin_ingest(&self, n: &NewIngest) -> Result<i64, StorageError> {
        const OP: &str = "record an ingest";
        let bytes = n.bytes.map(|b| self.int(OP, b)).transpose()?;
        self.conn
            .prepare_cached(
                "INSERT INTO ingest (machine, kind, source, content_hash, bytes, status, started_at)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    n.machine,
                    n.kind,
                    n.source,
                    n.content_hash,
                    bytes,
                    IngestStatus::Pending,
                    n.started_at
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Sets the outcome of an ingest. Committing `done` in the same transaction as the results is
    /// what makes a restart after a crash neither lose nor duplicate them.
    pub fn finish_ingest(
        &self,
        id: i64,
        status: IngestStatus,
        error: Option<&str>,
        finished_at: f64,
    ) -> Result<(), StorageError> {
        const OP: &str = "finish an ingest";
        let n = self
            .conn
            .prepare_cached(
                "UPDATE ingest SET status = ?2, error = ?3, finished_at = ?4 WHERE id = ?1",
            )
            .and_then(|mut st| st.execute(params![id, status, error, finished_at]))
            .map_err(self.sql(OP))?;
        self.found(OP, "ingest record", id, n)
    }

    /// Records the time span of the data an ingest held (first and last sample).
    pub fn set_ingest_span(&self, id: i64, start: f64, end: f64) -> Result<(), StorageError> {
        const OP: &str = "record an ingest's data span";
        let n = self
            .conn
            .prepare_cached("UPDATE ingest SET data_start = ?2, data_end = ?3 WHERE id = ?1")
            .and_then(|mut st| st.execute(params![id, start, end]))
            .map_err(self.sql(OP))?;
        self.found(OP, "ingest record", id, n)
    }

    fn found(
        &self,
        op: &'static str,
        what: &'static str,
        id: i64,
        rows: usize,
    ) -> Result<(), StorageError> {
        if rows == 0 {
            Err(StorageError::NotFound {
                path: self.path.to_path_buf(),
                op,
                what,
                id,
            })
        } else {
            Ok(())
        }
    }

    /// Inserts an event with its channels. Returns the event's id.
    pub fn insert_event(&self, e: &EventRow) -> Result<i64, StorageError> {
        const OP: &str = "insert an event";
        let count = self.int(OP, e.vector_count)?;
        self.conn
            .prepare_cached(
                "INSERT INTO event (machine, ingest_id, kind, start_time, end_time, speed_start_rpm,
                   speed_end_rpm, sweep_rate_rpm_s, vector_count)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    e.machine,
                    e.ingest_id,
                    e.kind,
                    e.start_time,
                    e.end_time,
                    e.speed_start_rpm,
                    e.speed_end_rpm,
                    e.sweep_rate_rpm_s,
                    count
                ])
            })
            .map_err(self.sql(OP))?;
        let id = self.conn.last_insert_rowid();
        let mut st = self
            .conn
            .prepare_cached(
                "INSERT INTO event_channel (event_id, channel, units, slow_roll_amplitude,
                   slow_roll_phase_deg, slow_roll_min_rpm, slow_roll_max_rpm, slow_roll_points)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
            )
            .map_err(self.sql(OP))?;
        for c in &e.channels {
            let sr = c.slow_roll.as_ref();
            let points = sr.map(|s| self.int(OP, s.points)).transpose()?;
            st.execute(params![
                id,
                c.channel,
                c.units,
                sr.map(|s| s.vector.amplitude),
                sr.map(|s| s.vector.phase_deg),
                sr.map(|s| s.min_rpm),
                sr.map(|s| s.max_rpm),
                points
            ])
            .map_err(self.sql(OP))?;
        }
        Ok(id)
    }

    /// Inserts one series of nX vectors of an event, in the given order (the order they are read
    /// back in). The statement is prepared once and cached, so a batch costs one step per row.
    pub fn insert_vectors(
        &self,
        event_id: i64,
        channel: &str,
        order: u32,
        series: Series,
        points: &[VectorPoint],
    ) -> Result<(), StorageError> {
        const OP: &str = "insert vectors";
        let mut st = self
            .conn
            .prepare_cached(
                "INSERT INTO vector (event_id, channel, nx, series, time, speed_rpm, amplitude,
                   phase_deg) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
            )
            .map_err(self.sql(OP))?;
        for p in points {
            st.execute(params![
                event_id,
                channel,
                order,
                series,
                p.time,
                p.speed_rpm,
                p.vector.amplitude,
                p.vector.phase_deg
            ])
            .map_err(self.sql(OP))?;
        }
        Ok(())
    }

    /// Inserts order-map spectra of an event; amplitudes go in as little-endian f32 BLOBs.
    pub fn insert_order_map(
        &self,
        event_id: i64,
        rows: &[OrderMapRow],
    ) -> Result<(), StorageError> {
        const OP: &str = "insert an order map";
        let mut st = self
            .conn
            .prepare_cached(
                "INSERT INTO order_map (event_id, channel, time, speed_rpm, order_step, bins,
                   amplitudes) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )
            .map_err(self.sql(OP))?;
        let mut blob = Vec::new();
        for r in rows {
            blob.clear();
            blob.extend(r.amplitudes.iter().flat_map(|a| a.to_le_bytes()));
            let bins = self.int(OP, r.amplitudes.len() as u64)?;
            st.execute(params![
                event_id,
                r.channel,
                r.time,
                r.speed_rpm,
                r.order_step,
                bins,
                blob
            ])
            .map_err(self.sql(OP))?;
        }
        Ok(())
    }

    /// Inserts an identified resonance of an event. Returns its id.
    pub fn insert_resonance(&self, event_id: i64, r: &ResonanceRow) -> Result<i64, StorageError> {
        const OP: &str = "insert a resonance";
        self.conn
            .prepare_cached(
                "INSERT INTO resonance (event_id, channel, nx, speed_rpm, peak_amplitude, phase_deg,
                   phase_change_deg, n1_rpm, n2_rpm, amplification_factor, damping_ratio,
                   heavily_damped, natural_rpm, required_margin_pct, actual_margin_pct,
                   margin_verdict)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    event_id,
                    r.channel,
                    r.order,
                    r.speed_rpm,
                    r.peak_amplitude,
                    r.phase_deg,
                    r.phase_change_deg,
                    r.n1_rpm,
                    r.n2_rpm,
                    r.amplification_factor,
                    r.damping_ratio,
                    r.heavily_damped,
                    r.natural_rpm,
                    r.required_margin_pct,
                    r.actual_margin_pct,
                    r.margin_verdict
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Adds a value to a machine's critical-speed table (a new row: history is never overwritten).
    /// Returns its id.
    pub fn add_critical(&self, c: &CriticalRow) -> Result<i64, StorageError> {
        const OP: &str = "add a critical speed";
        let (origin, event_id) = match c.origin {
            CriticalOrigin::Design => ("design", None),
            CriticalOrigin::Measured { event_id } => ("measured", Some(event_id)),
        };
        self.conn
            .prepare_cached(
                "INSERT INTO critical (machine, mode, origin, event_id, channel, speed_rpm,
                   amplification_factor, damping_ratio, valid_from)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    c.machine,
                    c.mode,
                    origin,
                    event_id,
                    c.channel,
                    c.speed_rpm,
                    c.amplification_factor,
                    c.damping_ratio,
                    c.valid_from
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Brings a machine's design criticals in line with the configuration: for each row (origin
    /// design), a new row is added only when the mode's latest design value differs, so restarting
    /// the daemon adds nothing and a changed configuration leaves its history. Returns how many
    /// rows were added.
    pub fn sync_design_criticals(&self, rows: &[CriticalRow]) -> Result<usize, StorageError> {
        const OP: &str = "update design critical speeds";
        let mut added = 0;
        for c in rows.iter().filter(|c| c.origin == CriticalOrigin::Design) {
            let latest: Option<(f64, Option<f64>, Option<f64>)> = self
                .conn
                .prepare_cached(
                    "SELECT speed_rpm, amplification_factor, damping_ratio FROM critical
                     WHERE machine = ?1 AND mode = ?2 AND origin = 'design'
                     ORDER BY valid_from DESC, id DESC LIMIT 1",
                )
                .and_then(|mut st| {
                    st.query_row(params![c.machine, c.mode], |r| {
                        Ok((r.get(0)?, r.get(1)?, r.get(2)?))
                    })
                    .optional()
                })
                .map_err(self.sql(OP))?;
            if latest != Some((c.speed_rpm, c.amplification_factor, c.damping_ratio)) {
                self.add_critical(c)?;
                added += 1;
            }
        }
        Ok(added)
    }

    /// Inserts trend rows (one statement prepared once for the whole batch).
    pub fn insert_trend(&self, rows: &[TrendRow]) -> Result<(), StorageError> {
        const OP: &str = "insert trend rows";
        let mut st = self
            .conn
            .prepare_cached(
                "INSERT INTO trend (machine, channel, time, speed_rpm, x1_amplitude, x1_phase_deg,
                   x2_amplitude, x2_phase_deg, overall, overall_min, overall_max, samples)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
            )
            .map_err(self.sql(OP))?;
        for r in rows {
            let samples = self.int(OP, r.samples)?;
            st.execute(params![
                r.machine,
                r.channel,
                r.time,
                r.speed_rpm,
                r.x1.amplitude,
                r.x1.phase_deg,
                r.x2.map(|v| v.amplitude),
                r.x2.map(|v| v.phase_deg),
                r.overall,
                r.overall_min,
                r.overall_max,
                samples
            ])
            .map_err(self.sql(OP))?;
        }
        Ok(())
    }

    /// Raises an alert. Returns its id. A row with `closed_at` set is stored closed (an alert that
    /// came and went between two writes).
    pub fn open_alert(&self, a: &AlertRow) -> Result<i64, StorageError> {
        const OP: &str = "open an alert";
        self.conn
            .prepare_cached(
                "INSERT INTO alert (machine, kind, severity, state, opened_at, closed_at, message,
                   evidence, event_id) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    a.machine,
                    a.kind,
                    a.severity,
                    a.state(),
                    a.opened_at,
                    a.closed_at,
                    a.message,
                    a.evidence,
                    a.event_id
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Clears an open alert. Returns `false` when it was already closed (its closing time is kept).
    pub fn close_alert(&self, id: i64, closed_at: f64) -> Result<bool, StorageError> {
        const OP: &str = "close an alert";
        let n = self
            .conn
            .prepare_cached(
                "UPDATE alert SET state = ?2, closed_at = ?3 WHERE id = ?1 AND state = 'open'",
            )
            .and_then(|mut st| st.execute(params![id, AlertState::Closed, closed_at]))
            .map_err(self.sql(OP))?;
        if n > 0 {
            return Ok(true);
        }
        let exists: bool = self
            .conn
            .query_row("SELECT count(*) > 0 FROM alert WHERE id = ?1", [id], |r| {
                r.get(0)
            })
            .map_err(self.sql(OP))?;
        self.found(OP, "alert", id, usize::from(exists))?;
        Ok(false)
    }

    /// Records a gap in a stream. Returns its id.
    pub fn insert_gap(&self, g: &GapRow) -> Result<i64, StorageError> {
        const OP: &str = "insert a gap";
        let dropped = self.int(OP, g.dropped_frames)?;
        let corrupt = self.int(OP, g.corrupt_frames)?;
        self.conn
            .prepare_cached(
                "INSERT INTO gap (machine, ingest_id, source, start_time, end_time, dropped_frames,
                   corrupt_frames) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    g.machine,
                    g.ingest_id,
                    g.source,
                    g.start_time,
                    g.end_time,
                    dropped,
                    corrupt
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Records a change of a sensor's health. Returns its id.
    pub fn insert_health(&self, h: &HealthRow) -> Result<i64, StorageError> {
        const OP: &str = "insert a sensor-health change";
        self.conn
            .prepare_cached(
                "INSERT INTO sensor_health (machine, channel, time, condition, healthy, detail)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    h.machine,
                    h.channel,
                    h.time,
                    h.condition,
                    h.healthy,
                    h.detail
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Records a live critical-speed estimate. Returns its id.
    pub fn insert_estimate(&self, e: &EstimateRow) -> Result<i64, StorageError> {
        const OP: &str = "insert a critical-speed estimate";
        let revolutions = e.revolutions.map(|n| i64::try_from(n).unwrap_or(i64::MAX));
        self.conn
            .prepare_cached(
                "INSERT INTO critical_estimate (critical_id, time, estimate_rpm, uncertainty_rpm,
                   informative, channel, speed_rpm, natural_rpm, speed_ratio, method, reason,
                   change_kind, locus_residual, revolutions)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    e.critical_id,
                    e.time,
                    e.estimate_rpm,
                    e.uncertainty_rpm,
                    e.informative,
                    e.channel,
                    e.speed_rpm,
                    e.natural_rpm,
                    e.speed_ratio,
                    e.method,
                    e.reason,
                    e.change,
                    e.locus_residual,
                    revolutions
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Records the single-mode model of a measured critical (one per critical; a second model of
    /// the same critical replaces the first).
    pub fn insert_model(&self, m: &ModelRow) -> Result<(), StorageError> {
        const OP: &str = "insert a critical's model";
        self.conn
            .prepare_cached(
                "INSERT OR REPLACE INTO critical_model (critical_id, track, natural_rpm,
                   damping_ratio, modal_amplitude, modal_phase_deg, background_amplitude,
                   background_phase_deg, slow_roll_amplitude, slow_roll_phase_deg, fit_residual)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            )
            .and_then(|mut st| {
                st.execute(params![
                    m.critical_id,
                    m.track,
                    m.natural_rpm,
                    m.damping_ratio,
                    m.modal.amplitude,
                    m.modal.phase_deg,
                    m.background.amplitude,
                    m.background.phase_deg,
                    m.slow_roll.amplitude,
                    m.slow_roll.phase_deg,
                    m.fit_residual
                ])
            })
            .map_err(self.sql(OP))?;
        Ok(())
    }
}
