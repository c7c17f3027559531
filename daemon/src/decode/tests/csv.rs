//! The CSV reader and writer: exact round trips, the forms of CSV found in the field, and
//! every error with its line and column.

use std::path::Path;

use super::*;

#[test]
fn csv_round_trip_is_exact() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("run.csv");
    let frames = 150_000; // several MiB: crosses many read-buffer boundaries
    let sig = signals(frames, 1);
    let mut w = CsvWriter::create(&path, &["tach", "x", "y"], 25_600.0, 12.5).expect("create");
    let mut at = 0;
    for len in [1, 999, 70_000, 79_000] {
        w.write_frames(&slices(&sig, at..at + len)).expect("write");
        at += len;
    }
    assert_eq!(w.frames(), frames as u64);
    w.finish().expect("finish");

    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.format(), Format::Csv);
    assert_eq!(rec.channel_names(), ["tach", "x", "y"]);
    assert_eq!(rec.sample_rate(), 25_600.0);
    assert_eq!(rec.start_time_s(), 12.5);
    let hint = rec.frames_hint().expect("hint") as f64;
    assert!((hint / frames as f64 - 1.0).abs() < 0.2, "hint {hint}");
    // Out of order and with a channel twice.
    let cols = [
        rec.resolve("y").expect("y"),
        rec.resolve("1").expect("tach by index"),
        rec.resolve("y").expect("y"),
    ];
    assert_eq!(cols, [2, 0, 2]);
    let got = read_all(&mut rec, &cols, 7_777).expect("read");
    for (g, want) in got.iter().zip([&sig[2], &sig[0], &sig[2]]) {
        assert_eq!(g.len(), frames);
        for (i, (a, b)) in g.iter().zip(want.iter()).enumerate() {
            assert_eq!(a.to_bits(), b.to_bits(), "frame {i}: {a} vs {b}");
        }
    }
    assert_eq!(
        rec.read_frames(&cols, &mut [vec![], vec![], vec![]], 10)
            .expect("end"),
        0
    );
}

#[test]
fn csv_rate_that_is_not_whole_is_recovered_closely() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("odd.csv");
    let rate = 2_560.0 / 3.0;
    let sig = signals(5_000, 2);
    let mut w = CsvWriter::create(&path, &["a", "b", "c"], rate, 0.0).expect("create");
    w.write_frames(&slices(&sig, 0..5_000)).expect("write");
    w.finish().expect("finish");
    let rec = Recording::open(&path, None).expect("open");
    assert!(
        (rec.sample_rate() / rate - 1.0).abs() < 1e-9,
        "{}",
        rec.sample_rate()
    );
}

#[test]
fn csv_accepts_bom_crlf_spaces_quotes_and_other_separators() {
    let dir = tempfile::tempdir().expect("tempdir");
    let files: [(&str, &[u8]); 4] = [
        (
            "bom.csv",
            b"\xEF\xBB\xBF Time , \"tach\",\"x, um\"\r\n0.0, 1 ,2.5\r\n0.001,  -3e-1 , +.5\r\n0.002,4,\"6\"\r\n\r\n",
        ),
        (
            "semi.csv",
            b"t;tach;x, um\n0;1;2,5\n0,001;-0,3;0.5\n0,002;4;6",
        ),
        (
            "tab.csv",
            b"time_s\ttach\tx, um\n0\t1\t2.5\n0.001\t-0.3\t0.5\n\n0.002\t4\t6\n",
        ),
        (
            "lf_no_end.txt",
            b"\n\ntime,tach,\"x, um\"\n0,1,2.5\n0.001,-0.3,0.5\n0.002,4,6",
        ),
    ];
    for (name, bytes) in files {
        let path = write(dir.path(), name, bytes);
        let mut rec = Recording::open(&path, None).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(rec.channel_names(), ["tach", "x, um"], "{name}");
        assert_eq!(rec.sample_rate(), 1000.0, "{name}");
        let got = read_all(&mut rec, &[0, 1], 2).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(
            got,
            vec![vec![1.0, -0.3, 4.0], vec![2.5, 0.5, 6.0]],
            "{name}"
        );
    }
}

#[test]
fn csv_times_rounded_to_microseconds_still_give_the_rate() {
    // 48 kHz with times printed to 1 µs: steps alternate between 20 and 21 µs, 2.4 % apart,
    // which the reader must put down to the printing, not to uneven sampling.
    let dir = tempfile::tempdir().expect("tempdir");
    let mut text = String::from("time,x\n");
    for i in 0..20_000 {
        text.push_str(&format!("{:.6},{}\n", i as f64 / 48_000.0, i % 7));
    }
    let path = write(dir.path(), "us.csv", text.as_bytes());
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.sample_rate(), 48_000.0);
    assert_eq!(
        read_all(&mut rec, &[0], 3000).expect("read")[0].len(),
        20_000
    );
}

#[test]
fn csv_gap_in_time_is_reported_at_its_line() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut text = String::from("time,x\n");
    let mut line = 1;
    let mut gap_line = 0;
    for i in 0..200_000u32 {
        if i == 150_000 {
            continue; // one sample missing
        }
        line += 1;
        if i == 150_001 {
            gap_line = line;
        }
        text.push_str(&format!("{},{}\n", f64::from(i) / 1000.0, i % 5));
    }
    let path = write(dir.path(), "gap.csv", text.as_bytes());
    let msg = read_err(&path, None);
    assert!(
        msg.contains(&format!(
            "line {gap_line}: time step is 0.002 s but the file's step is 0.001 s"
        )),
        "{msg}"
    );
    // Told the rate, the reader trusts the user and reads on.
    let mut rec = Recording::open(&path, Some(1000.0)).expect("open");
    assert_eq!(
        read_all(&mut rec, &[0], 50_000).expect("read")[0].len(),
        199_999
    );
}

#[test]
fn csv_without_header_is_read_by_index_with_a_rate() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "bare.csv", b"1,2\n3,4\n5,6\n");
    let msg = open_err(&path, None);
    assert!(
        msg.contains("no header row") && msg.contains("--rate"),
        "{msg}"
    );
    let mut rec = Recording::open(&path, Some(10.0)).expect("open");
    assert_eq!(rec.channel_names(), ["0", "1"]);
    let c = rec.resolve("1").expect("index");
    assert_eq!(
        read_all(&mut rec, &[c], 10).expect("read"),
        vec![vec![2.0, 4.0, 6.0]]
    );
}

#[test]
fn csv_bad_number_names_file_line_and_column() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut text = String::from("time,x\n");
    for i in 0..1040 {
        text.push_str(&format!("{},{}\n", f64::from(i) * 0.5, i));
    }
    text.push_str("520,1.2.3\n521,7\n");
    let path = write(dir.path(), "run.csv", text.as_bytes());
    let msg = read_err(&path, None);
    assert_eq!(
        msg,
        format!(
            "{} line 1042: column 'x': not a number: \"1.2.3\"",
            path.display()
        )
    );
}

#[test]
fn csv_value_errors_each_give_one_line() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cases: [(&str, &str); 8] = [
        ("time,x\n0,1\n1,\n2,3\n", "line 3: column 'x': empty field"),
        (
            "time,x\n0,1\n1,nan\n",
            "line 3: column 'x': not a finite number: \"nan\"",
        ),
        (
            "time,x\n0,1\n1,-inf\n",
            "line 3: column 'x': not a finite number: \"-inf\"",
        ),
        (
            "time,x\n0,1\n1,1e39\n",
            "line 3: column 'x': not a finite number: \"1e39\"",
        ),
        (
            "time,x\n0,1\n1,abc\n",
            "line 3: column 'x': not a number: \"abc\"",
        ),
        (
            "time,x\n0,1\n1,2,3\n",
            "line 3: expected 2 fields like the header, found 3",
        ),
        (
            "time,x\n0,1\n1\n",
            "line 3: expected 2 fields like the header, found 1",
        ),
        (
            "time,x\n0,1\n1,2\n2,3\n3, 4 5\n",
            "line 5: column 'x': not a number: \"4 5\"",
        ),
    ];
    for (k, (text, want)) in cases.iter().enumerate() {
        let path = write(dir.path(), &format!("case{k}.csv"), text.as_bytes());
        let msg = read_err(&path, None);
        assert!(msg.ends_with(want), "{text:?}: {msg}");
    }
}

#[test]
fn csv_file_level_errors() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cases: [(&str, &str, Option<f64>); 7] = [
        ("", "the file is empty", None),
        ("\n \r\n\n", "the file is empty", None),
        ("time,x\n", "header row but no data rows", None),
        ("tach,x\n1,2\n3,4\n", "no time column (a column named 'time', 't', 'time_s'); give the sample rate with --rate HZ", None),
        ("time,x\n0,1\n", "only one row, so it gives no time step", None),
        ("time,x\n1,1\n1,2\n", "line 3: time does not increase (1 s, then 1 s)", None),
        ("tach,x\n1,2\n", "sample rate -5 Hz is not usable", Some(-5.0)),
    ];
    for (k, (text, want, rate)) in cases.iter().enumerate() {
        let path = write(dir.path(), &format!("file{k}.csv"), text.as_bytes());
        let msg = open_err(&path, *rate);
        assert!(msg.contains(want), "{text:?}: {msg}");
    }
    let missing = dir.path().join("absent.csv");
    let msg = open_err(&missing, None);
    assert!(msg.contains("No such file"), "{msg}");
}

#[test]
fn csv_missing_column_lists_what_is_there() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "cols.csv", b"time,tach,x\n0,1,2\n1,1,2\n");
    let rec = Recording::open(&path, None).expect("open");
    let e = rec.resolve("y").expect_err("no y");
    let msg = one_line(&path, &e);
    assert!(
        msg.ends_with("no column named 'y'; available columns: 'tach' (1), 'x' (2)"),
        "{msg}"
    );
    assert_eq!(rec.resolve("X").expect("case"), 1);
    assert_eq!(rec.resolve("2").expect("index"), 1);
    assert!(rec.resolve("0").is_err());
}

#[test]
fn csv_columns_not_asked_for_are_not_converted() {
    // Only the field count of other columns is checked: a note column does not stop a run.
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "note.csv", b"time,x,note\n0,1,ok\n1,2,bad\n");
    let mut rec = Recording::open(&path, None).expect("open");
    let x = rec.resolve("x").expect("x");
    assert_eq!(
        read_all(&mut rec, &[x], 10).expect("read"),
        vec![vec![1.0, 2.0]]
    );
    let mut rec = Recording::open(&path, None).expect("open");
    let note = rec.resolve("note").expect("note");
    let msg = one_line(&path, &read_all(&mut rec, &[note], 10).expect_err("note"));
    assert!(
        msg.contains("line 2: column 'note': not a number: \"ok\""),
        "{msg}"
    );
}

#[test]
fn read_frames_rejects_impossible_requests() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = write(dir.path(), "r.csv", b"time,x\n0,1\n1,2\n");
    let mut rec = Recording::open(&path, None).expect("open");
    assert!(rec.read_frames(&[5], &mut [vec![]], 10).is_err());
    assert!(rec.read_frames(&[0], &mut [], 10).is_err());
    assert_eq!(rec.read_frames(&[0], &mut [vec![]], 0).expect("zero"), 0);
}

#[test]
fn csv_writer_quotes_awkward_names_and_prints_plain_times() {
    let mut w = CsvWriter::new(
        Vec::new(),
        Path::new("o.csv"),
        &["x, um", "say \"hi\""],
        1000.0,
        0.0,
    )
    .expect("new");
    w.write_frames(&[&[1.0, 2.0], &[0.5, -0.25]])
        .expect("write");
    let text = String::from_utf8(w.finish().expect("finish")).expect("utf8");
    assert_eq!(
        text,
        "time,\"x, um\",\"say \"\"hi\"\"\"\n0.0,1.0,0.5\n0.001,2.0,-0.25\n"
    );
}
