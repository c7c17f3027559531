//! Test modules by theme, and the fixtures they share.

mod atomic;
mod concurrency;
mod migrations;
mod round_trip;
mod schema_doc;
mod trend;

use std::path::PathBuf;

use veer_storage::{
    EventChannelRow, EventKind, EventRow, MachineRow, Polar, SensorRow, SlowRoll, Store,
};

/// A temporary folder holding one database file; removed when dropped.
pub struct Db {
    dir: tempfile::TempDir,
}

impl Db {
    pub fn new() -> Self {
        Db {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    pub fn path(&self) -> PathBuf {
        self.dir.path().join("veer.db")
    }

    /// A writer on the file, with machine `fan-2` and its sensor `x` configured.
    pub fn writer(&self) -> Store {
        let mut s = Store::open(self.path()).expect("open writer");
        s.upsert_machine(&machine("fan-2")).expect("machine");
        s.upsert_sensor(&SensorRow {
            machine: "fan-2".into(),
            channel: "x".into(),
            kind: "displacement".into(),
            units: "um pk-pk".into(),
            angle_deg: Some(45.0),
        })
        .expect("sensor");
        s
    }
}

pub fn machine(id: &str) -> MachineRow {
    MachineRow {
        id: id.into(),
        name: format!("Machine {id}"),
        min_operating_rpm: Some(900.0),
        max_continuous_rpm: Some(1480.0),
        trip_rpm: None,
    }
}

pub fn event(machine: &str, start: f64) -> EventRow {
    EventRow {
        machine: machine.into(),
        ingest_id: None,
        kind: EventKind::RunUp,
        start_time: start,
        end_time: start + 87.5,
        speed_start_rpm: 305.0,
        speed_end_rpm: 1490.0,
        sweep_rate_rpm_s: (1490.0 - 305.0) / 87.5,
        vector_count: 1234,
        channels: vec![
            EventChannelRow {
                channel: "x".into(),
                units: "um pk-pk".into(),
                slow_roll: Some(SlowRoll {
                    vector: Polar {
                        amplitude: 4.5,
                        phase_deg: 12.0,
                    },
                    min_rpm: 305.0,
                    max_rpm: 420.0,
                    points: 40,
                }),
            },
            EventChannelRow {
                channel: "y".into(),
                units: "um pk-pk".into(),
                slow_roll: None,
            },
        ],
    }
}
