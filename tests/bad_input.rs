//! Bad input: every mistake a user can make ends with a non-zero exit and one line on stderr that
//! says what and where, never a panic.

use crate::support::{error_naming, Dir};

/// A small CSV written by hand: `rows` data rows of time, tach, x, y at 1 kHz, with the field
/// `bad` put into column `col` (0 = time) of 1-based file line `line` (the header is line 1).
fn hand_csv(rows: usize, line: usize, col: usize, bad: &str) -> String {
    let mut s = String::from("time,tach,x,y\n");
    for i in 0..rows {
        let t = i as f64 / 1000.0;
        let mut fields = [
            format!("{t}"),
            (if i % 20 < 10 { "5.0" } else { "0.0" }).to_string(),
            format!("{:.3}", (i as f64 * 0.3).sin()),
            format!("{:.3}", (i as f64 * 0.3).cos()),
        ];
        if i + 2 == line {
            fields[col] = bad.to_string();
        }
        s.push_str(&fields.join(","));
        s.push('\n');
    }
    s
}

/// A short recording of tg-1, in whatever format the name asks for.
fn short_recording(d: &Dir, name: &str) {
    d.simulate(
        name,
        &[
            "--machine",
            "tg-1",
            "--profile",
            "0:300,1:300,4:1200",
            "--rate",
            "6400",
        ],
    );
}

#[test]
fn empty_file() {
    let d = Dir::new();
    d.write("empty.csv", b"");
    let o = d.veer(&["analyze", "empty.csv", "--tach", "tach", "--vib", "x"]);
    error_naming(&o, &["empty.csv"]);
}

#[test]
fn header_only() {
    let d = Dir::new();
    d.write("header.csv", b"time,tach,x,y\n");
    let o = d.veer(&["analyze", "header.csv", "--tach", "tach", "--vib", "x"]);
    error_naming(&o, &["header.csv"]);
}

#[test]
fn missing_column() {
    let d = Dir::new();
    d.write("rec.csv", hand_csv(50, 0, 0, "").as_bytes());
    let o = d.veer(&["analyze", "rec.csv", "--tach", "tach", "--vib", "x,nosuch"]);
    error_naming(&o, &["rec.csv", "nosuch"]);
    // By index: rec.csv has columns 0 (time) to 3 (y), so 9 is beyond them.
    let o = d.veer(&["analyze", "rec.csv", "--tach", "1", "--vib", "9"]);
    error_naming(&o, &["rec.csv", "9"]);
}

#[test]
fn bad_number_names_its_line_and_column() {
    let d = Dir::new();
    d.write("bad.csv", hand_csv(50, 7, 2, "1.2.3").as_bytes());
    let o = d.veer(&["analyze", "bad.csv", "--tach", "tach", "--vib", "x,y"]);
    let line = error_naming(&o, &["bad.csv", "line 7", "x"]);
    assert!(
        !line.contains("line 6") && !line.contains("line 8"),
        "{line}"
    );
}

#[test]
fn nan_value_names_its_line() {
    let d = Dir::new();
    d.write("nan.csv", hand_csv(50, 12, 3, "NaN").as_bytes());
    let o = d.veer(&["analyze", "nan.csv", "--tach", "tach", "--vib", "x,y"]);
    error_naming(&o, &["nan.csv", "line 12", "y"]);
}

#[test]
fn truncated_wav() {
    let d = Dir::new();
    short_recording(&d, "whole.wav");
    let bytes = std::fs::read(d.join("whole.wav")).expect("read the WAV");
    // Cut in the middle of a frame, well inside the data chunk.
    let cut = bytes.len() / 2 + 3;
    d.write("cut.wav", &bytes[..cut]);
    let o = d.veer(&["analyze", "cut.wav", "--tach", "0", "--vib", "1,2"]);
    let line = error_naming(&o, &["cut.wav"]);
    assert!(
        line.to_lowercase().contains("truncat"),
        "does not say the file is cut short: {line}"
    );
}

#[test]
fn wav_with_constant_tach_has_no_pulses() {
    let d = Dir::new();
    let spec = hound::WavSpec {
        channels: 3,
        sample_rate: 6400,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(d.join("flat.wav"), spec).expect("create a WAV");
    for i in 0..6400 * 3 {
        let phase = 2.0 * std::f32::consts::PI * 25.0 * i as f32 / 6400.0;
        for s in [2.5, 40.0 * phase.sin(), 40.0 * phase.cos()] {
            w.write_sample(s).expect("write a sample");
        }
    }
    w.finalize().expect("finish the WAV");
    let o = d.veer(&["analyze", "flat.wav", "--tach", "0", "--vib", "1,2"]);
    error_naming(&o, &["flat.wav", "tach"]);
}

#[test]
fn nonexistent_file() {
    let d = Dir::new();
    let o = d.veer(&["analyze", "nowhere.csv", "--tach", "tach", "--vib", "x"]);
    error_naming(&o, &["nowhere.csv"]);
}

#[test]
fn bad_range() {
    let d = Dir::new();
    short_recording(&d, "rec.csv");
    for bad in ["3030:2950", "fast:slow", "2950"] {
        let o = d.veer(&[
            "analyze", "rec.csv", "--tach", "tach", "--vib", "x", "--range", bad,
        ]);
        error_naming(&o, &["--range", bad]);
    }
}

#[test]
fn bad_units() {
    let d = Dir::new();
    short_recording(&d, "rec.csv");
    let o = d.veer(&[
        "analyze", "rec.csv", "--tach", "tach", "--vib", "x", "--units", "furlongs",
    ]);
    error_naming(&o, &["--units", "furlongs"]);
}

#[test]
fn csv_without_time_column_needs_a_rate() {
    let d = Dir::new();
    d.write("untimed.csv", b"tach,x\n5,0.1\n0,0.2\n5,0.3\n0,0.4\n");
    let o = d.veer(&["analyze", "untimed.csv", "--tach", "tach", "--vib", "x"]);
    error_naming(&o, &["untimed.csv", "--rate"]);
}

#[test]
fn closed_stdout_is_not_a_panic() {
    // `veer analyze ... | head -1` closes the pipe early: the command must stop quietly.
    let d = Dir::new();
    short_recording(&d, "rec.csv");
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_veer"))
        .args([
            "analyze", "rec.csv", "--tach", "tach", "--vib", "x,y", "--json",
        ])
        .current_dir(d.path())
        .env_remove("RUST_BACKTRACE")
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("start veer");
    // Close the reading end before the analysis has printed anything.
    drop(child.stdout.take());
    let o = child.wait_with_output().expect("veer ends");
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        !stderr.contains("panicked") && o.status.code() != Some(101),
        "a closed stdout made veer panic ({}): {stderr}",
        o.status
    );
}
