//! [`Store`]: one connection to a veer database, for the writer or for a reader.

use std::path::{Path, PathBuf};
use std::time::Duration;

use rusqlite::{Connection, OpenFlags, TransactionBehavior};

use crate::error::StorageError;
use crate::kinds::{IngestStatus, Series};
use crate::rows::{
    AlertRow, CriticalRow, DownsampleStats, EstimateRow, EventRow, GapRow, HealthRow, IngestRow,
    MachineRow, ModelRow, NewIngest, OrderMapRow, ResonanceRow, SensorRow, Stored, TrendRow,
    VectorPoint, VectorTrace,
};
use crate::schema;
use crate::tx::Tx;

/// How long a statement waits for another connection's lock before failing. A reader never waits
/// for the writer under WAL; this covers checkpoints and a second writer.
const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

/// Prepared statements kept per connection: every statement of the crate fits.
const STATEMENT_CACHE: usize = 64;

/// A connection to a veer database.
///
/// There is one writer (the daemon), opened with [`Store::open`], and any number of readers
/// (`veer status`, reports), opened with [`Store::open_read_only`]. The database runs in WAL mode,
/// so readers see the last committed state and never wait for, or block, the writer.
///
/// Every operation is on [`Tx`] and, for convenience, on `Store` itself, where a write runs in a
/// transaction of its own. Batch several writes with [`Store::transaction`]: one transaction
/// for many rows is both atomic and far faster than a transaction per row.
pub struct Store {
    conn: Connection,
    path: PathBuf,
    read_only: bool,
}

impl std::fmt::Debug for Store {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Store")
            .field("path", &self.path)
            .field("read_only", &self.read_only)
            .finish()
    }
}

impl Store {
    /// Opens the database for writing, creating it if missing, and migrates it to this code's
    /// schema. Sets WAL mode, `synchronous = NORMAL` (safe with WAL: a power cut may lose the
    /// last commits but never corrupts), foreign keys and a busy timeout. A database written by
    /// a newer veer, or a file that is not a veer database, is refused.
    pub fn open(path: impl AsRef<Path>) -> Result<Self, StorageError> {
        let path = path.as_ref().to_path_buf();
        let conn = Connection::open(&path).map_err(|source| StorageError::Open {
            path: path.clone(),
            source,
        })?;
        let mut store = Store {
            conn,
            path,
            read_only: false,
        };
        store.configure()?;
        schema::check_writable(&store.conn, &store.path)?;
        let op = "switch to WAL mode";
        let mode: String = store
            .conn
            .pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))
            .map_err(store.view().sql(op))?;
        if !mode.eq_ignore_ascii_case("wal") {
            return Err(StorageError::InvalidArgument {
                path: store.path.clone(),
                op,
                reason: format!("the file system kept journal mode `{mode}`"),
            });
        }
        store
            .conn
            .pragma_update(None, "synchronous", "NORMAL")
            .map_err(store.view().sql("set synchronous mode"))?;
        schema::migrate(&mut store.conn, &store.path)?;
        Ok(store)
    }

    /// Opens an existing database for reading only. Nothing is migrated: a database that is not
    /// at this code's schema version is refused (a writer migrates it).
    pub fn open_read_only(path: impl AsRef<Path>) -> Result<Self, StorageError> {
        let path = path.as_ref().to_path_buf();
        let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn =
            Connection::open_with_flags(&path, flags).map_err(|source| StorageError::Open {
                path: path.clone(),
                source,
            })?;
        let store = Store {
            conn,
            path,
            read_only: true,
        };
        store.configure()?;
        schema::check_current(&store.conn, &store.path)?;
        Ok(store)
    }

    fn configure(&self) -> Result<(), StorageError> {
        let sql = self.view().sql("configure the connection");
        self.conn.busy_timeout(BUSY_TIMEOUT).map_err(&sql)?;
        self.conn
            .pragma_update(None, "foreign_keys", true)
            .map_err(&sql)?;
        self.conn
            .set_prepared_statement_cache_capacity(STATEMENT_CACHE);
        Ok(())
    }

    /// The database file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Whether this store was opened with [`Store::open_read_only`].
    pub fn is_read_only(&self) -> bool {
        self.read_only
    }

    /// The schema version this code reads and writes (`PRAGMA user_version` of a current file).
    pub fn schema_version() -> i64 {
        schema::SCHEMA_VERSION
    }

    /// The operations without a transaction around them.
    fn view(&self) -> Tx<'_> {
        Tx {
            conn: &self.conn,
            path: &self.path,
        }
    }

    /// Runs `f` in one write transaction: everything it does is committed together when it
    /// returns `Ok`, and nothing of it is kept when it returns `Err` (or panics, or the process
    /// dies before the commit). This is how an event, its vectors and resonances and its ingest
    /// record's `done` are stored all or nothing.
    ///
    /// The transaction takes the write lock at its start (`BEGIN IMMEDIATE`), so it cannot fail
    /// half-way for want of the lock.
    pub fn transaction<T, E>(&mut self, f: impl FnOnce(&Tx<'_>) -> Result<T, E>) -> Result<T, E>
    where
        E: From<StorageError>,
    {
        const OP: &str = "begin a transaction";
        if self.read_only {
            return Err(StorageError::ReadOnly {
                path: self.path.clone(),
                op: OP,
            }
            .into());
        }
        let path = &self.path;
        let sql = |op| {
            move |source| StorageError::Sqlite {
                path: path.clone(),
                op,
                source,
            }
        };
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(sql(OP))?;
        let out = f(&Tx { conn: &tx, path })?;
        tx.commit().map_err(sql("commit a transaction"))?;
        Ok(out)
    }

    /// Runs `f` in one read transaction, so that several queries see the same committed state
    /// even while the writer commits between them.
    pub fn snapshot<T, E>(&self, f: impl FnOnce(&Tx<'_>) -> Result<T, E>) -> Result<T, E>
    where
        E: From<StorageError>,
    {
        let sql = |op| {
            let path = self.path.clone();
            move |source| StorageError::Sqlite { path, op, source }
        };
        let tx = self
            .conn
            .unchecked_transaction()
            .map_err(sql("begin a read transaction"))?;
        let out = f(&self.view())?;
        tx.finish().map_err(sql("end a read transaction"))?;
        Ok(out)
    }

    /// Runs SQLite's `PRAGMA integrity_check`: `["ok"]` for a sound file, else the problems found.
    pub fn integrity_check(&self) -> Result<Vec<String>, StorageError> {
        let op = "check integrity";
        let mut st = self
            .conn
            .prepare("PRAGMA integrity_check")
            .map_err(self.view().sql(op))?;
        let rows = st
            .query_map([], |r| r.get(0))
            .map_err(self.view().sql(op))?;
        rows.collect::<Result<_, _>>().map_err(self.view().sql(op))
    }

    // --- writes, each in its own transaction ---

    /// [`Tx::upsert_machine`] in a transaction of its own.
    pub fn upsert_machine(&mut self, m: &MachineRow) -> Result<(), StorageError> {
        self.transaction(|tx| tx.upsert_machine(m))
    }

    /// [`Tx::upsert_sensor`] in a transaction of its own.
    pub fn upsert_sensor(&mut self, s: &SensorRow) -> Result<(), StorageError> {
        self.transaction(|tx| tx.upsert_sensor(s))
    }

    /// [`Tx::begin_ingest`] in a transaction of its own.
    pub fn begin_ingest(&mut self, n: &NewIngest) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.begin_ingest(n))
    }

    /// [`Tx::finish_ingest`] in a transaction of its own.
    pub fn finish_ingest(
        &mut self,
        id: i64,
        status: IngestStatus,
        error: Option<&str>,
        finished_at: f64,
    ) -> Result<(), StorageError> {
        self.transaction(|tx| tx.finish_ingest(id, status, error, finished_at))
    }

    /// [`Tx::set_ingest_span`] in a transaction of its own.
    pub fn set_ingest_span(&mut self, id: i64, start: f64, end: f64) -> Result<(), StorageError> {
        self.transaction(|tx| tx.set_ingest_span(id, start, end))
    }

    /// [`Tx::insert_event`] in a transaction of its own.
    pub fn insert_event(&mut self, e: &EventRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.insert_event(e))
    }

    /// [`Tx::insert_vectors`] in a transaction of its own: the whole slice commits at once.
    pub fn insert_vectors(
        &mut self,
        event_id: i64,
        channel: &str,
        order: u32,
        series: Series,
        points: &[VectorPoint],
    ) -> Result<(), StorageError> {
        self.transaction(|tx| tx.insert_vectors(event_id, channel, order, series, points))
    }

    /// [`Tx::insert_order_map`] in a transaction of its own.
    pub fn insert_order_map(
        &mut self,
        event_id: i64,
        rows: &[OrderMapRow],
    ) -> Result<(), StorageError> {
        self.transaction(|tx| tx.insert_order_map(event_id, rows))
    }

    /// [`Tx::insert_resonance`] in a transaction of its own.
    pub fn insert_resonance(
        &mut self,
        event_id: i64,
        r: &ResonanceRow,
    ) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.insert_resonance(event_id, r))
    }

    /// [`Tx::add_critical`] in a transaction of its own.
    pub fn add_critical(&mut self, c: &CriticalRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.add_critical(c))
    }

    /// [`Tx::sync_design_criticals`] in a transaction of its own.
    pub fn sync_design_criticals(&mut self, rows: &[CriticalRow]) -> Result<usize, StorageError> {
        self.transaction(|tx| tx.sync_design_criticals(rows))
    }

    /// [`Tx::insert_trend`] in a transaction of its own: the whole slice commits at once.
    pub fn insert_trend(&mut self, rows: &[TrendRow]) -> Result<(), StorageError> {
        self.transaction(|tx| tx.insert_trend(rows))
    }

    /// [`Tx::downsample_trend`] in a transaction of its own, so a pass is all or nothing.
    pub fn downsample_trend(
        &mut self,
        machine: &str,
        older_than: f64,
        bucket_s: f64,
    ) -> Result<DownsampleStats, StorageError> {
        self.transaction(|tx| tx.downsample_trend(machine, older_than, bucket_s))
    }

    /// [`Tx::open_alert`] in a transaction of its own.
    pub fn open_alert(&mut self, a: &AlertRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.open_alert(a))
    }

    /// [`Tx::close_alert`] in a transaction of its own.
    pub fn close_alert(&mut self, id: i64, closed_at: f64) -> Result<bool, StorageError> {
        self.transaction(|tx| tx.close_alert(id, closed_at))
    }

    /// [`Tx::insert_gap`] in a transaction of its own.
    pub fn insert_gap(&mut self, g: &GapRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.insert_gap(g))
    }

    /// [`Tx::insert_health`] in a transaction of its own.
    pub fn insert_health(&mut self, h: &HealthRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.insert_health(h))
    }

    /// [`Tx::insert_estimate`] in a transaction of its own.
    pub fn insert_estimate(&mut self, e: &EstimateRow) -> Result<i64, StorageError> {
        self.transaction(|tx| tx.insert_estimate(e))
    }

    // --- reads ---

    /// See [`Tx::machines`].
    pub fn machines(&self) -> Result<Vec<MachineRow>, StorageError> {
        self.view().machines()
    }

    /// See [`Tx::sensors`].
    pub fn sensors(&self, machine: &str) -> Result<Vec<SensorRow>, StorageError> {
        self.view().sensors(machine)
    }

    /// See [`Tx::ingest_seen`].
    pub fn ingest_seen(
        &self,
        content_hash: &str,
    ) -> Result<Option<Stored<IngestRow>>, StorageError> {
        self.view().ingest_seen(content_hash)
    }

    /// See [`Tx::ingest`].
    pub fn ingest(&self, id: i64) -> Result<Option<Stored<IngestRow>>, StorageError> {
        self.view().ingest(id)
    }

    /// See [`Tx::events`].
    pub fn events(
        &self,
        machine: Option<&str>,
        since: Option<f64>,
    ) -> Result<Vec<Stored<EventRow>>, StorageError> {
        self.view().events(machine, since)
    }

    /// See [`Tx::event`].
    pub fn event(&self, id: i64) -> Result<Option<Stored<EventRow>>, StorageError> {
        self.view().event(id)
    }

    /// See [`Tx::vectors`].
    pub fn vectors(&self, event_id: i64) -> Result<Vec<VectorTrace>, StorageError> {
        self.view().vectors(event_id)
    }

    /// See [`Tx::order_map`].
    pub fn order_map(&self, event_id: i64) -> Result<Vec<OrderMapRow>, StorageError> {
        self.view().order_map(event_id)
    }

    /// See [`Tx::resonances`].
    pub fn resonances(&self, event_id: i64) -> Result<Vec<Stored<ResonanceRow>>, StorageError> {
        self.view().resonances(event_id)
    }

    /// See [`Tx::criticals`].
    pub fn criticals(&self, machine: &str) -> Result<Vec<Stored<CriticalRow>>, StorageError> {
        self.view().criticals(machine)
    }

    /// See [`Tx::current_criticals`].
    pub fn current_criticals(
        &self,
        machine: &str,
    ) -> Result<Vec<Stored<CriticalRow>>, StorageError> {
        self.view().current_criticals(machine)
    }

    /// See [`Tx::trend`].
    pub fn trend(
        &self,
        machine: &str,
        from: f64,
        to: f64,
    ) -> Result<Vec<Stored<TrendRow>>, StorageError> {
        self.view().trend(machine, from, to)
    }

    /// See [`Tx::last_trend`].
    pub fn last_trend(&self, machine: &str) -> Result<Vec<Stored<TrendRow>>, StorageError> {
        self.view().last_trend(machine)
    }

    /// See [`Tx::last_data_time`].
    pub fn last_data_time(&self, machine: &str) -> Result<Option<f64>, StorageError> {
        self.view().last_data_time(machine)
    }

    /// See [`Tx::open_alerts`].
    pub fn open_alerts(
        &self,
        machine: Option<&str>,
    ) -> Result<Vec<Stored<AlertRow>>, StorageError> {
        self.view().open_alerts(machine)
    }

    /// See [`Tx::alerts_since`].
    pub fn alerts_since(
        &self,
        since: f64,
        machine: Option<&str>,
    ) -> Result<Vec<Stored<AlertRow>>, StorageError> {
        self.view().alerts_since(since, machine)
    }

    /// See [`Tx::gaps`].
    pub fn gaps(&self, machine: &str, since: f64) -> Result<Vec<Stored<GapRow>>, StorageError> {
        self.view().gaps(machine, since)
    }

    /// See [`Tx::health`].
    pub fn health(
        &self,
        machine: &str,
        since: f64,
    ) -> Result<Vec<Stored<HealthRow>>, StorageError> {
        self.view().health(machine, since)
    }

    /// See [`Tx::estimates`].
    pub fn estimates(&self, critical_id: i64) -> Result<Vec<Stored<EstimateRow>>, StorageError> {
        self.view().estimates(critical_id)
    }

    /// See [`Tx::machine_estimates`].
    pub fn machine_estimates(
        &self,
        machine: &str,
        from: f64,
        to: f64,
    ) -> Result<Vec<Stored<EstimateRow>>, StorageError> {
        self.view().machine_estimates(machine, from, to)
    }

    /// See [`Tx::model`].
    pub fn model(&self, critical_id: i64) -> Result<Option<ModelRow>, StorageError> {
        self.view().model(critical_id)
    }

    /// See [`Tx::latest_models`].
    pub fn latest_models(
        &self,
        machine: &str,
    ) -> Result<Vec<(Stored<CriticalRow>, ModelRow)>, StorageError> {
        self.view().latest_models(machine)
    }

    /// See [`Tx::measured_critical_id`].
    pub fn measured_critical_id(
        &self,
        machine: &str,
        channel: &str,
        mode: u32,
        valid_from: f64,
    ) -> Result<Option<i64>, StorageError> {
        self.view()
            .measured_critical_id(machine, channel, mode, valid_from)
    }

    /// See [`Tx::design_critical_id`].
    pub fn design_critical_id(
        &self,
        machine: &str,
        mode: u32,
    ) -> Result<Option<i64>, StorageError> {
        self.view().design_critical_id(machine, mode)
    }

    /// Records the model of a measured critical (see [`Tx::insert_model`]).
    pub fn insert_model(&mut self, m: &ModelRow) -> Result<(), StorageError> {
        self.transaction(|tx| tx.insert_model(m))
    }
}
