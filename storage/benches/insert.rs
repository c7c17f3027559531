//! Insert throughput of nX vector rows: 200 000 rows in transactions of 1000, and for comparison
//! one row per transaction. Prints the median of five runs, each on a fresh database file.
//!
//! Run with `cargo bench -p veer-storage`.

use std::time::{Duration, Instant};

use veer_storage::{
    EventChannelRow, EventKind, EventRow, MachineRow, Polar, Series, StorageError, Store,
    VectorPoint,
};

const ROWS: usize = 200_000;
const BATCH: usize = 1000;
const SINGLE_ROWS: usize = 5_000;
const RUNS: usize = 5;

fn setup(dir: &tempfile::TempDir) -> Result<(Store, i64), StorageError> {
    let mut store = Store::open(dir.path().join("bench.db"))?;
    store.upsert_machine(&MachineRow {
        id: "fan-2".into(),
        name: "Cooling tower fan 2".into(),
        min_operating_rpm: Some(900.0),
        max_continuous_rpm: Some(1480.0),
        trip_rpm: Some(1630.0),
    })?;
    let event = store.insert_event(&EventRow {
        machine: "fan-2".into(),
        ingest_id: None,
        kind: EventKind::RunUp,
        start_time: 1.7e9,
        end_time: 1.7e9 + 90.0,
        speed_start_rpm: 300.0,
        speed_end_rpm: 1490.0,
        sweep_rate_rpm_s: 13.2,
        vector_count: ROWS as u64,
        channels: vec![EventChannelRow {
            channel: "x".into(),
            units: "um pk-pk".into(),
            slow_roll: None,
        }],
    })?;
    Ok((store, event))
}

fn points(n: usize) -> Vec<VectorPoint> {
    (0..n)
        .map(|i| {
            let f = i as f64;
            VectorPoint {
                time: 1.7e9 + f * 1e-3,
                speed_rpm: 300.0 + f * 0.006,
                vector: Polar {
                    amplitude: 10.0 + (f * 1e-3).sin(),
                    phase_deg: (f * 0.01) % 360.0,
                },
            }
        })
        .collect()
}

/// Time to insert `pts` in transactions of `batch` rows.
fn run(pts: &[VectorPoint], batch: usize) -> Result<Duration, StorageError> {
    let dir = tempfile::tempdir().map_err(|e| StorageError::InvalidArgument {
        path: "bench".into(),
        op: "create a temporary folder",
        reason: e.to_string(),
    })?;
    let (mut store, event) = setup(&dir)?;
    let start = Instant::now();
    for chunk in pts.chunks(batch) {
        store.insert_vectors(event, "x", 1, Series::Measured, chunk)?;
    }
    let elapsed = start.elapsed();
    let stored: usize = store.vectors(event)?.iter().map(|t| t.points.len()).sum();
    assert_eq!(stored, pts.len());
    Ok(elapsed)
}

fn median_rate(pts: &[VectorPoint], batch: usize) -> Result<(f64, Vec<f64>), StorageError> {
    let mut rates = Vec::with_capacity(RUNS);
    for _ in 0..RUNS {
        let t = run(pts, batch)?;
        rates.push(pts.len() as f64 / t.as_secs_f64());
    }
    let mut sorted = rates.clone();
    sorted.sort_by(f64::total_cmp);
    Ok((sorted[RUNS / 2], rates))
}

fn main() -> Result<(), StorageError> {
    let pts = points(ROWS);
    let (batched, all) = median_rate(&pts, BATCH)?;
    println!(
        "vector rows, {ROWS} in transactions of {BATCH}: median {batched:.0} rows/s \
         (runs: {})",
        all.iter()
            .map(|r| format!("{r:.0}"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let (single, all) = median_rate(&pts[..SINGLE_ROWS], 1)?;
    println!(
        "vector rows, {SINGLE_ROWS} one per transaction: median {single:.0} rows/s (runs: {})",
        all.iter()
            .map(|r| format!("{r:.0}"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    Ok(())
}
