//! The user documentation matches the schema: every table and column is described, and every
//! example query runs.

use rusqlite::Connection;
use veer_storage::{
    AlertRow, CriticalOrigin, CriticalRow, EstimateRow, Polar, ResonanceRow, Series, Severity,
    TrendRow, VectorPoint,
};

use super::{event, Db};

const DOC: &str = include_str!("../../SCHEMA.md");

fn sql_blocks() -> Vec<String> {
    let mut blocks = Vec::new();
    let mut current: Option<String> = None;
    for line in DOC.lines() {
        match (&mut current, line.trim()) {
            (None, "```sql") => current = Some(String::new()),
            (Some(b), "```") => {
                blocks.push(std::mem::take(b));
                current = None;
            }
            (Some(b), _) => {
                b.push_str(line);
                b.push('\n');
            }
            (None, _) => {}
        }
    }
    blocks
}

#[test]
fn every_table_and_column_is_documented() {
    let db = Db::new();
    drop(db.writer());
    let c = Connection::open(db.path()).expect("raw open");
    let mut st = c
        .prepare(
            "SELECT m.name, p.name FROM sqlite_schema AS m, pragma_table_info(m.name) AS p
             WHERE m.type = 'table' ORDER BY m.name, p.cid",
        )
        .expect("prepare");
    let cols: Vec<(String, String)> = st
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    assert!(cols.len() > 50);
    for (table, column) in cols {
        let heading = format!("### {table}\n");
        let start = DOC
            .find(&heading)
            .unwrap_or_else(|| panic!("table {table} undocumented"));
        let section = &DOC[start + heading.len()..];
        let section = &section[..section
            .find("\n## ")
            .or(section.find("\n### "))
            .unwrap_or(section.len())];
        assert!(
            section.contains(&format!("`{column}`")),
            "column {table}.{column} undocumented"
        );
    }
}

#[test]
fn every_example_query_runs_and_finds_rows() {
    let db = Db::new();
    let mut s = db.writer();
    let now = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .expect("clock")
        .as_secs_f64();
    let id = s
        .insert_event(&event("fan-2", now - 3600.0))
        .expect("event");
    assert_eq!(id, 1);
    let pts: Vec<VectorPoint> = (0..10)
        .map(|i| VectorPoint {
            time: now - 3600.0 + f64::from(i),
            speed_rpm: 300.0 + 100.0 * f64::from(i),
            vector: Polar {
                amplitude: 5.0 + f64::from(i),
                phase_deg: 20.0 + 9.0 * f64::from(i),
            },
        })
        .collect();
    // The examples use event 12: insert up to it.
    let mut last = id;
    while last < 12 {
        last = s
            .insert_event(&event("fan-2", now - 3000.0 + last as f64))
            .expect("event");
    }
    for series in [Series::Measured, Series::Compensated] {
        s.insert_vectors(12, "x", 1, series, &pts).expect("vectors");
    }
    s.insert_resonance(
        12,
        &ResonanceRow {
            channel: "x".into(),
            order: 1,
            speed_rpm: 1210.0,
            peak_amplitude: 61.0,
            phase_deg: 131.0,
            phase_change_deg: 90.0,
            n1_rpm: Some(1150.0),
            n2_rpm: Some(1270.0),
            amplification_factor: Some(10.1),
            damping_ratio: Some(0.05),
            heavily_damped: false,
            natural_rpm: None,
            required_margin_pct: Some(16.0),
            actual_margin_pct: Some(-5.0),
            margin_verdict: Some("inside".into()),
        },
    )
    .expect("resonance");
    s.add_critical(&CriticalRow {
        machine: "fan-2".into(),
        mode: 1,
        origin: CriticalOrigin::Measured { event_id: 12 },
        channel: Some("x".into()),
        speed_rpm: 1210.0,
        amplification_factor: Some(10.1),
        damping_ratio: Some(0.05),
        valid_from: now - 100.0,
    })
    .expect("critical");
    let critical = s
        .measured_critical_id("fan-2", "x", 1, now - 100.0)
        .expect("lookup")
        .expect("the measured critical");
    s.insert_estimate(&EstimateRow {
        critical_id: critical,
        time: now - 60.0,
        estimate_rpm: 1195.0,
        uncertainty_rpm: Some(4.0),
        informative: true,
        speed_rpm: Some(1000.0),
        method: Some("phase".into()),
        change: Some("natural-speed".into()),
        ..EstimateRow::default()
    })
    .expect("estimate");
    s.open_alert(&AlertRow {
        machine: "fan-2".into(),
        kind: "running-speed-margin".into(),
        severity: Severity::Alarm,
        opened_at: now - 50.0,
        closed_at: None,
        message: "inside the margin".into(),
        evidence: Some(r#"{"speed_rpm": 1220}"#.into()),
        event_id: Some(12),
    })
    .expect("alert");
    let trend: Vec<TrendRow> = (0..5)
        .map(|i| TrendRow {
            machine: "fan-2".into(),
            channel: "x".into(),
            time: now - 600.0 + f64::from(i) * 60.0,
            speed_rpm: 1480.0,
            x1: Polar {
                amplitude: 20.0,
                phase_deg: 45.0,
            },
            x2: None,
            overall: Some(30.0),
            overall_min: None,
            overall_max: None,
            samples: 1,
        })
        .collect();
    s.insert_trend(&trend).expect("trend");
    let c = Connection::open(db.path()).expect("raw open");
    let blocks = sql_blocks();
    assert!(blocks.len() >= 8, "{} examples", blocks.len());
    let mut with_rows = 0;
    for doc_sql in &blocks {
        // The bundled SQLite is built without the math functions the `sqlite3` shell has; swap
        // them for built-ins of the same arity so the rest of each query (names, joins, syntax)
        // is still checked.
        let sql = &doc_sql
            .replace("radians(", "abs(")
            .replace("cos(", "abs(")
            .replace("sin(", "abs(")
            .replace("sqrt(", "abs(")
            .replace("power(", "max(");
        let mut st = c
            .prepare(sql)
            .unwrap_or_else(|e| panic!("example does not prepare: {e}\n{sql}"));
        let n = st
            .query_map([], |_| Ok(()))
            .and_then(|rows| rows.collect::<Result<Vec<()>, _>>())
            .unwrap_or_else(|e| panic!("example fails: {e}\n{sql}"))
            .len();
        if n > 0 {
            with_rows += 1;
        }
    }
    // Failed imports and gaps are empty here; all the others must find the rows above.
    assert_eq!(with_rows, blocks.len() - 2);
}
