//! SQLite storage of veer: the schema, its versioned migrations and typed queries.
//!
//! # Design
//!
//! One process writes (the daemon, through [`Store::open`]); any number read at the same time
//! (`veer status`, reports, users' own SQL, through [`Store::open_read_only`] or any SQLite
//! client). The database runs in WAL mode, so a reader sees the last committed state and neither
//! waits for nor blocks the writer.
//!
//! The writer batches: [`Store::transaction`] runs a closure over a [`Tx`] and commits everything
//! it did at once, or nothing if it fails. The daemon stores an event with its vectors, order map,
//! resonances and its ingest record's `done` status in one such transaction, so after a crash an
//! input is either wholly stored and marked done, or not at all and processed again: never twice.
//!
//! The schema is versioned with `PRAGMA user_version` and migrated forward by ordered SQL scripts
//! (`src/migrations/`); a database newer than the code is refused rather than misread.
//!
//! This crate does not know the order-tracking engine: it stores plain rows ([`rows`]) that the
//! daemon converts engine results into. Conventions, also described for users in `SCHEMA.md`:
//!
//! * times are unix seconds (UTC) as REAL;
//! * speeds are r/min;
//! * an nX vector is an amplitude (in the channel's units, kept per event channel) and a phase lag
//!   in degrees, `0..360`: the shaft angle from the reference pulse to the next positive peak of
//!   the nX signal (see [`Polar`]).
//!
//! # Example
//!
//! ```
//! use veer_storage::{MachineRow, Store};
//!
//! let dir = tempfile::tempdir()?;
//! let mut store = Store::open(dir.path().join("veer.db"))?;
//! store.upsert_machine(&MachineRow {
//!     id: "fan-2".into(),
//!     name: "Cooling tower fan 2".into(),
//!     min_operating_rpm: Some(900.0),
//!     max_continuous_rpm: Some(1480.0),
//!     trip_rpm: Some(1630.0),
//! })?;
//! let reader = Store::open_read_only(store.path())?;
//! assert_eq!(reader.machines()?.len(), 1);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

#![deny(missing_docs)]

mod error;
mod kinds;
mod read;
pub mod rows;
mod schema;
mod store;
mod trend;
mod tx;

pub use error::StorageError;
pub use kinds::{AlertState, EventKind, IngestKind, IngestStatus, Series, Severity};
pub use rows::{
    AlertRow, CriticalOrigin, CriticalRow, DownsampleStats, EstimateRow, EventChannelRow, EventRow,
    GapRow, HealthRow, IngestRow, MachineRow, ModelRow, NewIngest, OrderMapRow, Polar,
    ResonanceRow, SensorRow, SlowRoll, Stored, TrendRow, VectorPoint, VectorTrace,
};
pub use schema::{APPLICATION_ID, SCHEMA_VERSION};
pub use store::Store;
pub use tx::Tx;
