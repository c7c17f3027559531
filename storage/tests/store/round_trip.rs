//! Every row type goes in and comes back unchanged; the schema's constraints hold.

use veer_storage::{
    AlertRow, AlertState, CriticalOrigin, CriticalRow, EstimateRow, GapRow, HealthRow, IngestKind,
    IngestStatus, ModelRow, NewIngest, OrderMapRow, Polar, ResonanceRow, SensorRow, Series,
    Severity, StorageError, TrendRow, VectorPoint,
};

use super::{event, machine, Db};

fn points(n: usize, offset: f64) -> Vec<VectorPoint> {
    (0..n)
        .map(|i| {
            let f = i as f64;
            VectorPoint {
                time: 1.7e9 + f * 0.25,
                speed_rpm: 300.0 + 10.0 * f,
                vector: Polar {
                    amplitude: offset + f * 0.5,
                    phase_deg: (f * 7.5) % 360.0,
                },
            }
        })
        .collect()
}

#[test]
fn machines_and_sensors_upsert() {
    let db = Db::new();
    let mut s = db.writer();
    let mut m = machine("fan-2");
    m.name = "Renamed fan".into();
    m.trip_rpm = Some(1630.0);
    s.upsert_machine(&m).expect("update");
    s.upsert_machine(&machine("pump-1")).expect("second");
    let ms = s.machines().expect("machines");
    assert_eq!(ms.len(), 2);
    assert_eq!(ms[0], m);
    let mut sensor = s.sensors("fan-2").expect("sensors").remove(0);
    sensor.units = "mil pk-pk".into();
    sensor.angle_deg = None;
    s.upsert_sensor(&sensor).expect("update sensor");
    assert_eq!(s.sensors("fan-2").expect("sensors"), [sensor]);
    let orphan = SensorRow {
        machine: "no-such".into(),
        channel: "x".into(),
        kind: "velocity".into(),
        units: "mm/s rms".into(),
        angle_deg: None,
    };
    assert!(
        s.upsert_sensor(&orphan).is_err(),
        "sensor of an unknown machine"
    );
}

#[test]
fn ingest_records_are_found_by_content_hash() {
    let db = Db::new();
    let mut s = db.writer();
    assert!(s.ingest_seen("abc").expect("lookup").is_none());
    let new = NewIngest {
        machine: Some("fan-2".into()),
        kind: IngestKind::File,
        source: "incoming/fan-2/run-0001.csv".into(),
        content_hash: "abc".into(),
        bytes: Some(123_456),
        started_at: 1.7e9,
    };
    let failed = s.begin_ingest(&new).expect("begin");
    s.finish_ingest(
        failed,
        IngestStatus::Failed,
        Some("no tach pulses"),
        1.7e9 + 1.0,
    )
    .expect("finish");
    let seen = s.ingest_seen("abc").expect("lookup").expect("seen");
    assert_eq!(seen.id, failed);
    assert_eq!(seen.status, IngestStatus::Failed);
    assert_eq!(seen.error.as_deref(), Some("no tach pulses"));

    let done = s.begin_ingest(&new).expect("retry");
    assert_eq!(
        s.ingest_seen("abc").expect("lookup").expect("seen").id,
        done,
        "newest first"
    );
    s.set_ingest_span(done, 1.6e9, 1.6e9 + 90.0).expect("span");
    s.finish_ingest(done, IngestStatus::Done, None, 1.7e9 + 5.0)
        .expect("finish");
    let third = s.begin_ingest(&new).expect("third");
    let seen = s.ingest_seen("abc").expect("lookup").expect("seen");
    assert_eq!(seen.id, done, "a done record wins over newer ones");
    assert_ne!(seen.id, third);
    assert_eq!(seen.row.bytes, Some(123_456));
    assert_eq!(
        (seen.data_start, seen.data_end),
        (Some(1.6e9), Some(1.6e9 + 90.0))
    );
    assert_eq!(seen.finished_at, Some(1.7e9 + 5.0));
    assert_eq!(
        s.ingest(third).expect("by id").expect("row").status,
        IngestStatus::Pending
    );

    let err = s
        .finish_ingest(9999, IngestStatus::Done, None, 0.0)
        .expect_err("missing id");
    assert!(
        matches!(err, StorageError::NotFound { id: 9999, .. }),
        "{err:?}"
    );
}

#[test]
fn events_with_vectors_order_maps_and_resonances() {
    let db = Db::new();
    let mut s = db.writer();
    let e1 = event("fan-2", 1.7e9);
    let id1 = s.insert_event(&e1).expect("event");
    let id2 = s
        .insert_event(&event("fan-2", 1.7e9 + 3600.0))
        .expect("event");
    let got = s.event(id1).expect("read").expect("present");
    assert_eq!(got.row, e1);
    assert!(s.event(id2 + 100).expect("read").is_none());
    assert_eq!(s.events(None, None).expect("all").len(), 2);
    let later = s.events(Some("fan-2"), Some(1.7e9 + 1.0)).expect("since");
    assert_eq!(later.iter().map(|e| e.id).collect::<Vec<_>>(), [id2]);
    assert!(s.events(Some("pump-1"), None).expect("other").is_empty());

    let measured = points(50, 1.0);
    let compensated = points(50, 0.5);
    let two_x = points(20, 0.1);
    s.insert_vectors(id1, "x", 1, Series::Measured, &measured)
        .expect("1X");
    s.insert_vectors(id1, "x", 1, Series::Compensated, &compensated)
        .expect("1X comp");
    s.insert_vectors(id1, "x", 2, Series::Measured, &two_x)
        .expect("2X");
    s.insert_vectors(id2, "x", 1, Series::Measured, &points(5, 9.0))
        .expect("other event");
    let traces = s.vectors(id1).expect("vectors");
    assert_eq!(traces.len(), 3);
    let find = |order, series| {
        traces
            .iter()
            .find(|t| t.channel == "x" && t.order == order && t.series == series)
            .expect("trace")
    };
    assert_eq!(find(1, Series::Measured).points, measured);
    assert_eq!(find(1, Series::Compensated).points, compensated);
    assert_eq!(find(2, Series::Measured).points, two_x);

    let maps = vec![
        OrderMapRow {
            channel: "x".into(),
            time: 1.7e9 + 1.0,
            speed_rpm: 400.0,
            order_step: 1.0 / 16.0,
            amplitudes: (0..321)
                .map(|i| (i as f32).sqrt() * 0.37 + f32::EPSILON)
                .collect(),
        },
        OrderMapRow {
            channel: "x".into(),
            time: 1.7e9 + 2.0,
            speed_rpm: 450.0,
            order_step: 0.0625,
            amplitudes: vec![],
        },
    ];
    s.insert_order_map(id1, &maps).expect("order map");
    assert_eq!(s.order_map(id1).expect("read"), maps);
    assert!(s.order_map(id2).expect("read").is_empty());

    let res = ResonanceRow {
        channel: "x".into(),
        order: 1,
        speed_rpm: 1210.5,
        peak_amplitude: 61.3,
        phase_deg: 131.0,
        phase_change_deg: 88.0,
        n1_rpm: Some(1150.0),
        n2_rpm: None,
        amplification_factor: None,
        damping_ratio: Some(0.051),
        heavily_damped: false,
        natural_rpm: Some(1207.0),
        required_margin_pct: Some(16.0),
        actual_margin_pct: Some(-3.0),
        margin_verdict: Some("inside".into()),
    };
    let rid = s.insert_resonance(id1, &res).expect("resonance");
    let got = s.resonances(id1).expect("read");
    assert_eq!(got.len(), 1);
    assert_eq!((got[0].id, &got[0].row), (rid, &res));
}

#[test]
fn foreign_keys_are_enforced() {
    let db = Db::new();
    let mut s = db.writer();
    let err = s
        .insert_vectors(42, "x", 1, Series::Measured, &points(3, 1.0))
        .expect_err("vectors of a missing event");
    assert!(err.to_string().contains("insert vectors"), "{err}");
    assert!(
        s.vectors(42).expect("read").is_empty(),
        "the failed batch left nothing"
    );
    assert!(s.insert_event(&event("no-such-machine", 0.0)).is_err());
    assert!(s
        .insert_resonance(
            42,
            &ResonanceRow {
                channel: "x".into(),
                order: 1,
                speed_rpm: 1.0,
                peak_amplitude: 1.0,
                phase_deg: 0.0,
                phase_change_deg: 0.0,
                n1_rpm: None,
                n2_rpm: None,
                amplification_factor: None,
                damping_ratio: None,
                heavily_damped: true,
                natural_rpm: None,
                required_margin_pct: None,
                actual_margin_pct: None,
                margin_verdict: None,
            }
        )
        .is_err());
}

#[test]
fn nan_is_refused_where_a_number_is_required() {
    let db = Db::new();
    let mut s = db.writer();
    let id = s.insert_event(&event("fan-2", 0.0)).expect("event");
    let mut p = points(1, 1.0);
    p[0].vector.amplitude = f64::NAN;
    assert!(s.insert_vectors(id, "x", 1, Series::Measured, &p).is_err());
}

#[test]
fn criticals_keep_their_history() {
    let db = Db::new();
    let mut s = db.writer();
    let design = |mode, rpm, valid_from| CriticalRow {
        machine: "fan-2".into(),
        mode,
        origin: CriticalOrigin::Design,
        channel: None,
        speed_rpm: rpm,
        amplification_factor: Some(6.5),
        damping_ratio: None,
        valid_from,
    };
    let config = [design(1, 1210.0, 100.0), design(2, 2900.0, 100.0)];
    assert_eq!(s.sync_design_criticals(&config).expect("sync"), 2);
    let restart = [design(1, 1210.0, 200.0), design(2, 2900.0, 200.0)];
    assert_eq!(
        s.sync_design_criticals(&restart).expect("again"),
        0,
        "restart adds nothing"
    );
    let changed = [design(1, 1250.0, 300.0), design(2, 2900.0, 300.0)];
    assert_eq!(s.sync_design_criticals(&changed).expect("changed"), 1);

    let ev = s.insert_event(&event("fan-2", 400.0)).expect("event");
    let measured = CriticalRow {
        machine: "fan-2".into(),
        mode: 1,
        origin: CriticalOrigin::Measured { event_id: ev },
        channel: Some("x".into()),
        speed_rpm: 1190.0,
        amplification_factor: Some(8.1),
        damping_ratio: Some(0.06),
        valid_from: 500.0,
    };
    let mid = s.add_critical(&measured).expect("measured");
    let bad = CriticalRow {
        origin: CriticalOrigin::Measured { event_id: ev + 1 },
        ..measured.clone()
    };
    assert!(s.add_critical(&bad).is_err(), "measured in a missing event");

    let all = s.criticals("fan-2").expect("history");
    let mode1: Vec<f64> = all
        .iter()
        .filter(|c| c.mode == 1)
        .map(|c| c.speed_rpm)
        .collect();
    assert_eq!(mode1, [1210.0, 1250.0, 1190.0], "oldest first");
    assert_eq!(all.len(), 4);
    let now = s.current_criticals("fan-2").expect("current");
    assert_eq!(now.len(), 2);
    assert_eq!((now[0].id, &now[0].row), (mid, &measured));
    assert_eq!(now[1].speed_rpm, 2900.0);

    let est = EstimateRow {
        critical_id: mid,
        time: 600.0,
        estimate_rpm: 1185.0,
        uncertainty_rpm: Some(12.5),
        informative: true,
        channel: Some("x".into()),
        speed_rpm: Some(1000.0),
        natural_rpm: Some(1150.0),
        speed_ratio: Some(1000.0 / 1150.0),
        method: Some("phase-and-amplitude".into()),
        reason: None,
        change: Some("natural-speed".into()),
        locus_residual: Some(0.004),
        revolutions: Some(500),
    };
    let flat = EstimateRow {
        time: 660.0,
        uncertainty_rpm: None,
        informative: false,
        reason: Some("too-far-from-resonance".into()),
        ..est.clone()
    };
    s.insert_estimate(&flat).expect("estimate");
    s.insert_estimate(&est).expect("estimate");
    let got: Vec<_> = s
        .estimates(mid)
        .expect("read")
        .into_iter()
        .map(|e| e.row)
        .collect();
    assert_eq!(got, [est.clone(), flat]);
    assert!(s
        .insert_estimate(&EstimateRow {
            critical_id: 9999,
            ..est
        })
        .is_err());
}

#[test]
fn critical_models_and_estimate_lookup() {
    let db = Db::new();
    let mut s = db.writer();
    s.upsert_machine(&machine("fan-2")).expect("machine");
    let ev = s.insert_event(&event("fan-2", 400.0)).expect("event");
    let crit = |channel: &str, mode: u32, rpm: f64, valid_from: f64| CriticalRow {
        machine: "fan-2".into(),
        mode,
        origin: CriticalOrigin::Measured { event_id: ev },
        channel: Some(channel.into()),
        speed_rpm: rpm,
        amplification_factor: Some(5.0),
        damping_ratio: Some(0.1),
        valid_from,
    };
    let old_x = s.add_critical(&crit("x", 1, 1900.0, 500.0)).expect("x old");
    let new_x = s.add_critical(&crit("x", 1, 1880.0, 900.0)).expect("x new");
    let no_model = s
        .add_critical(&crit("x", 1, 1870.0, 950.0))
        .expect("x unfitted");
    let y = s.add_critical(&crit("y", 1, 1885.0, 900.0)).expect("y");
    let model = |critical_id: i64, natural_rpm: f64| ModelRow {
        critical_id,
        track: if critical_id == y { "y:1" } else { "x:1" }.to_string(),
        natural_rpm,
        damping_ratio: 0.1,
        modal: Polar {
            amplitude: 40.0,
            phase_deg: 30.0,
        },
        background: Polar {
            amplitude: 0.5,
            phase_deg: 200.0,
        },
        slow_roll: Polar {
            amplitude: 3.0,
            phase_deg: 10.0,
        },
        fit_residual: Some(0.01),
    };
    for (id, nn) in [(old_x, 1881.0), (new_x, 1861.0), (y, 1866.0)] {
        s.insert_model(&model(id, nn)).expect("model");
    }
    assert_eq!(s.model(new_x).expect("read"), Some(model(new_x, 1861.0)));
    assert_eq!(s.model(no_model).expect("read"), None);
    // The latest critical of each channel and mode that has a model: a later critical without
    // one does not hide it.
    let latest = s.latest_models("fan-2").expect("latest");
    let ids: Vec<(i64, i64)> = latest.iter().map(|(c, m)| (c.id, m.critical_id)).collect();
    assert_eq!(ids, [(new_x, new_x), (y, y)]);
    assert_eq!(
        s.measured_critical_id("fan-2", "x", 1, 900.0)
            .expect("find"),
        Some(new_x)
    );
    assert_eq!(
        s.measured_critical_id("fan-2", "x", 2, 900.0)
            .expect("find"),
        None
    );
    assert_eq!(
        s.measured_critical_id("fan-2", "z", 1, 900.0)
            .expect("find"),
        None
    );
    assert_eq!(s.design_critical_id("fan-2", 1).expect("find"), None);
    let d1 = s
        .add_critical(&CriticalRow {
            origin: CriticalOrigin::Design,
            channel: None,
            ..crit("x", 1, 1210.0, 0.0)
        })
        .expect("design");
    let d2 = s
        .add_critical(&CriticalRow {
            origin: CriticalOrigin::Design,
            channel: None,
            ..crit("x", 1, 1250.0, 100.0)
        })
        .expect("design edited");
    assert_ne!(d1, d2);
    assert_eq!(s.design_critical_id("fan-2", 1).expect("find"), Some(d2));
    assert_eq!(s.design_critical_id("fan-2", 2).expect("find"), None);
    let est = EstimateRow {
        critical_id: y,
        time: 1000.0,
        estimate_rpm: 1850.0,
        informative: true,
        ..EstimateRow::default()
    };
    s.insert_estimate(&est).expect("estimate");
    s.insert_estimate(&EstimateRow {
        critical_id: new_x,
        time: 1200.0,
        ..est.clone()
    })
    .expect("estimate");
    let window = s.machine_estimates("fan-2", 900.0, 1100.0).expect("window");
    assert_eq!(window.len(), 1);
    assert_eq!(window[0].row, est);
    assert_eq!(
        s.machine_estimates("fan-2", 0.0, 2000.0)
            .expect("all")
            .len(),
        2
    );
    assert!(s
        .machine_estimates("comp-3", 0.0, 2000.0)
        .expect("other")
        .is_empty());
}

#[test]
fn trend_rows_and_latest_data() {
    let db = Db::new();
    let mut s = db.writer();
    assert_eq!(s.last_data_time("fan-2").expect("empty"), None);
    let row = |channel: &str, time: f64, x2| TrendRow {
        machine: "fan-2".into(),
        channel: channel.into(),
        time,
        speed_rpm: 1480.0,
        x1: Polar {
            amplitude: 20.0,
            phase_deg: 45.0,
        },
        x2,
        overall: Some(31.0),
        overall_min: None,
        overall_max: None,
        samples: 1,
    };
    let rows = vec![
        row("x", 10.0, None),
        row(
            "y",
            10.0,
            Some(Polar {
                amplitude: 2.0,
                phase_deg: 300.0,
            }),
        ),
        row(
            "x",
            20.0,
            Some(Polar {
                amplitude: 3.0,
                phase_deg: 0.0,
            }),
        ),
    ];
    s.insert_trend(&rows).expect("trend");
    let last: Vec<_> = s
        .last_trend("fan-2")
        .expect("last")
        .into_iter()
        .map(|r| r.row)
        .collect();
    assert_eq!(last, [rows[2].clone(), rows[1].clone()]);
    let window: Vec<_> = s
        .trend("fan-2", 10.0, 20.0)
        .expect("range")
        .into_iter()
        .map(|r| r.row)
        .collect();
    assert_eq!(window, rows[..2]);
    assert_eq!(s.last_data_time("fan-2").expect("time"), Some(20.0));
    s.insert_event(&event("fan-2", 5.0))
        .expect("event ending at 92.5");
    assert_eq!(s.last_data_time("fan-2").expect("time"), Some(92.5));
}

#[test]
fn alerts_open_and_close() {
    let db = Db::new();
    let mut s = db.writer();
    s.upsert_machine(&machine("pump-1")).expect("machine");
    let alert = AlertRow {
        machine: "fan-2".into(),
        kind: "running-speed-margin".into(),
        severity: Severity::Warning,
        opened_at: 1000.0,
        closed_at: None,
        message: "running speed 1420 r/min is 3.5 % above critical 1372 r/min (needs 5 %)".into(),
        evidence: Some(r#"{"critical_rpm":1372,"speed_rpm":1420,"required_pct":5}"#.into()),
        event_id: None,
    };
    let a = s.open_alert(&alert).expect("open");
    let b = s
        .open_alert(&AlertRow {
            machine: "pump-1".into(),
            severity: Severity::Alarm,
            opened_at: 2000.0,
            ..alert.clone()
        })
        .expect("open");
    let open = s.open_alerts(None).expect("open");
    assert_eq!(open.iter().map(|x| x.id).collect::<Vec<_>>(), [a, b]);
    assert_eq!(open[0].row, alert);
    assert_eq!(open[0].state(), AlertState::Open);
    assert_eq!(
        s.open_alerts(Some("pump-1")).expect("open")[0].severity,
        Severity::Alarm
    );

    assert!(s.close_alert(a, 1500.0).expect("close"));
    assert!(!s.close_alert(a, 1600.0).expect("again"), "already closed");
    assert!(matches!(
        s.close_alert(777, 1.0),
        Err(StorageError::NotFound { .. })
    ));
    assert_eq!(s.open_alerts(Some("fan-2")).expect("open").len(), 0);
    let since = s.alerts_since(1400.0, None).expect("since");
    assert_eq!(since.len(), 2, "closed after 1400, opened after 1400");
    assert_eq!(since[0].closed_at, Some(1500.0));
    assert_eq!(since[0].state(), AlertState::Closed);
    assert_eq!(
        s.alerts_since(1600.0, Some("fan-2")).expect("since").len(),
        0
    );

    let bad = AlertRow {
        evidence: Some("{not json".into()),
        ..alert
    };
    assert!(s.open_alert(&bad).is_err(), "evidence must be JSON");
}

#[test]
fn gaps_and_sensor_health() {
    let db = Db::new();
    let mut s = db.writer();
    let gap = GapRow {
        machine: "fan-2".into(),
        ingest_id: None,
        source: "/dev/ttyUSB0".into(),
        start_time: 100.0,
        end_time: 100.4,
        dropped_frames: 12,
        corrupt_frames: 3,
    };
    s.insert_gap(&gap).expect("gap");
    assert!(
        s.insert_gap(&GapRow {
            end_time: 99.0,
            ..gap.clone()
        })
        .is_err(),
        "end before start"
    );
    let got: Vec<_> = s
        .gaps("fan-2", 0.0)
        .expect("gaps")
        .into_iter()
        .map(|g| g.row)
        .collect();
    assert_eq!(got, [gap]);
    assert!(s.gaps("fan-2", 100.5).expect("gaps").is_empty());

    let lost = HealthRow {
        machine: "fan-2".into(),
        channel: Some("tach".into()),
        time: 50.0,
        condition: "tach-lost".into(),
        healthy: false,
        detail: Some("no pulse for 2.0 s".into()),
    };
    let back = HealthRow {
        time: 55.0,
        healthy: true,
        detail: None,
        ..lost.clone()
    };
    let source = HealthRow {
        channel: None,
        condition: "source-silent".into(),
        time: 60.0,
        ..lost.clone()
    };
    for h in [&lost, &back, &source] {
        s.insert_health(h).expect("health");
    }
    let got: Vec<_> = s
        .health("fan-2", 0.0)
        .expect("health")
        .into_iter()
        .map(|h| h.row)
        .collect();
    assert_eq!(got, [lost, back, source]);
}
