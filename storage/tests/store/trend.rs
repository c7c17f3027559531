//! Downsampling of old trend rows.

use veer_storage::{Polar, StorageError, Store, TrendRow};

use super::Db;

const T0: f64 = 1_700_000_400.0; // a multiple of 600 s, so buckets start at T0
const STEP: f64 = 10.0;

fn raw(channel: &str, i: u32) -> TrendRow {
    let f = f64::from(i);
    TrendRow {
        machine: "fan-2".into(),
        channel: channel.into(),
        time: T0 + f * STEP,
        speed_rpm: 1470.0 + (f * 0.37).sin() * 5.0,
        x1: Polar {
            amplitude: 20.0 + (f * 0.11).cos(),
            phase_deg: (355.0 + f * 0.2) % 360.0,
        },
        x2: (!i.is_multiple_of(3)).then_some(Polar {
            amplitude: 2.0 + f * 0.01,
            phase_deg: 120.0,
        }),
        overall: Some(30.0 + (f * 0.05).sin() * 3.0),
        overall_min: None,
        overall_max: None,
        samples: 1,
    }
}

fn rows(s: &Store) -> Vec<TrendRow> {
    s.trend("fan-2", 0.0, f64::INFINITY)
        .expect("trend")
        .into_iter()
        .map(|r| r.row)
        .collect()
}

/// Vector mean by direct summation of cos/sin: the reference the merge is checked against.
fn vector_mean(v: &[Polar]) -> (f64, f64) {
    let n = v.len() as f64;
    let re: f64 = v
        .iter()
        .map(|p| p.amplitude * p.phase_deg.to_radians().cos())
        .sum::<f64>()
        / n;
    let im: f64 = v
        .iter()
        .map(|p| -p.amplitude * p.phase_deg.to_radians().sin())
        .sum::<f64>()
        / n;
    (re, im)
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * b.abs().max(1.0)
}

#[test]
fn downsampling_averages_old_rows_and_is_idempotent() {
    let db = Db::new();
    let mut s = db.writer();
    // Two hours at 10 s on two channels.
    let all: Vec<TrendRow> = ["x", "y"]
        .iter()
        .flat_map(|c| (0..720).map(|i| raw(c, i)))
        .collect();
    s.insert_trend(&all).expect("insert");
    let older_than = T0 + 3600.0;
    let stats = s
        .downsample_trend("fan-2", older_than, 600.0)
        .expect("downsample");
    assert_eq!(stats.buckets_merged, 12, "6 ten-minute buckets per channel");
    assert_eq!(stats.rows_deleted, 720);

    let after = rows(&s);
    assert_eq!(after.len(), 12 + 720, "new rows untouched");
    for channel in ["x", "y"] {
        for b in 0..6u32 {
            let lo = T0 + f64::from(b) * 600.0;
            let inputs: Vec<&TrendRow> = all
                .iter()
                .filter(|r| r.channel == channel && r.time >= lo && r.time < lo + 600.0)
                .collect();
            assert_eq!(inputs.len(), 60);
            let merged: Vec<&TrendRow> = after
                .iter()
                .filter(|r| r.channel == channel && r.time >= lo && r.time < lo + 600.0)
                .collect();
            assert_eq!(merged.len(), 1, "one row per bucket");
            let m = merged[0];
            assert_eq!(m.samples, 60);
            let mean_t = inputs.iter().map(|r| r.time).sum::<f64>() / 60.0;
            assert!(close(m.time, mean_t, 1e-12));
            let (re, im) = vector_mean(&inputs.iter().map(|r| r.x1).collect::<Vec<_>>());
            let (mre, mim) = m.x1.to_re_im();
            assert!(
                close(mre, re, 1e-9) && close(mim, im, 1e-9),
                "{mre},{mim} vs {re},{im}"
            );
            let x2: Vec<Polar> = inputs.iter().filter_map(|r| r.x2).collect();
            let (re2, im2) = vector_mean(&x2);
            let (m2re, m2im) = m.x2.expect("2X kept").to_re_im();
            assert!(close(m2re, re2, 1e-9) && close(m2im, im2, 1e-9));
            let overall: Vec<f64> = inputs.iter().filter_map(|r| r.overall).collect();
            let mean_o = overall.iter().sum::<f64>() / overall.len() as f64;
            assert!(close(m.overall.expect("overall"), mean_o, 1e-12));
            let lo_o = overall.iter().cloned().fold(f64::INFINITY, f64::min);
            let hi_o = overall.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            assert_eq!((m.overall_min, m.overall_max), (Some(lo_o), Some(hi_o)));
            let mean_speed = inputs.iter().map(|r| r.speed_rpm).sum::<f64>() / 60.0;
            assert!(close(m.speed_rpm, mean_speed, 1e-12));
        }
    }
    for r in after.iter().filter(|r| r.time >= older_than) {
        assert_eq!(r.samples, 1);
    }

    let again = s
        .downsample_trend("fan-2", older_than, 600.0)
        .expect("again");
    assert_eq!(again, Default::default(), "second pass changes nothing");
    assert_eq!(rows(&s), after);

    // Moving the horizon on merges the next rows; merging twice equals merging once.
    s.downsample_trend("fan-2", T0 + 7200.0, 600.0)
        .expect("later");
    let later = rows(&s);
    assert_eq!(later.len(), 24);
    assert!(later.iter().all(|r| r.samples == 60));
    assert_eq!(s.integrity_check().expect("check"), ["ok"]);
}

#[test]
fn only_whole_buckets_are_merged() {
    let db = Db::new();
    let mut s = db.writer();
    let all: Vec<TrendRow> = (0..90).map(|i| raw("x", i)).collect();
    s.insert_trend(&all).expect("insert");
    // The horizon falls in the second bucket: it is left alone until the horizon passes its end.
    s.downsample_trend("fan-2", T0 + 900.0, 600.0)
        .expect("first");
    let first = rows(&s);
    assert_eq!(first.len(), 1 + 30);
    assert_eq!(first[0].samples, 60);
    assert_eq!(&first[1..], &all[60..]);
    s.downsample_trend("fan-2", T0 + 1200.0, 600.0)
        .expect("second");
    let second = rows(&s);
    assert_eq!(second.len(), 2);
    assert_eq!(second[0], first[0], "the first bucket is not merged again");

    // The same as merging the second bucket on its own, from raw rows.
    let db2 = Db::new();
    let mut s2 = db2.writer();
    s2.insert_trend(&all[60..]).expect("insert");
    s2.downsample_trend("fan-2", T0 + 1200.0, 600.0)
        .expect("one pass");
    assert_eq!(rows(&s2), second[1..]);
}

#[test]
fn a_bad_bucket_width_is_refused() {
    let db = Db::new();
    let mut s = db.writer();
    for bad in [0.0, -5.0, f64::NAN, f64::INFINITY] {
        let err = s.downsample_trend("fan-2", T0, bad).expect_err("bad width");
        assert!(
            matches!(err, StorageError::InvalidArgument { .. }),
            "{err:?}"
        );
    }
}
