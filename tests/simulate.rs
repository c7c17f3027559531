//! `veer simulate`: the machines it knows and the layout of the files it writes.

use crate::support::{error_naming, success, Dir};

#[test]
fn list_names_the_demo_machines() {
    let d = Dir::new();
    let o = d.veer(&["simulate", "--list"]);
    let out = success(&o, &["simulate", "--list"]);
    for id in ["tg-1", "comp-3", "fan-2"] {
        assert!(
            out.lines().any(|l| l.split_whitespace().next() == Some(id)),
            "`{id}` is not listed:\n{out}"
        );
    }
}

#[test]
fn csv_layout_is_time_tach_x_y_at_the_rate_asked() {
    let d = Dir::new();
    d.simulate(
        "r.csv",
        &[
            "--machine",
            "tg-1",
            "--profile",
            "0:300,2:600",
            "--rate",
            "3200",
        ],
    );
    let s = std::fs::read_to_string(d.join("r.csv")).expect("read the CSV");
    let mut lines = s.lines();
    assert_eq!(lines.next(), Some("time,tach,x,y"));
    let rows: Vec<Vec<f64>> = lines
        .map(|l| {
            l.split(',')
                .map(|f| f.parse().unwrap_or_else(|e| panic!("`{f}` in `{l}`: {e}")))
                .collect()
        })
        .collect();
    // 2 s at 3200 Hz.
    assert!((rows.len() as i64 - 6400).abs() <= 1, "{} rows", rows.len());
    assert!(
        rows.iter().all(|r| r.len() == 4),
        "every row has four fields"
    );
    let step = rows[1][0] - rows[0][0];
    assert!((step - 1.0 / 3200.0).abs() < 1e-9, "time step {step} s");
}

#[test]
fn wav_layout_is_tach_x_y_in_the_format_asked() {
    let d = Dir::new();
    let base = [
        "--machine",
        "tg-1",
        "--profile",
        "0:300,1:600",
        "--rate",
        "3200",
    ];
    d.simulate("f.wav", &[&base[..], &["--wav-format", "f32"]].concat());
    d.simulate(
        "p.wav",
        &[
            &base[..],
            &["--wav-format", "pcm16", "--full-scale", "1000"],
        ]
        .concat(),
    );
    for (name, bits, format) in [
        ("f.wav", 32, hound::SampleFormat::Float),
        ("p.wav", 16, hound::SampleFormat::Int),
    ] {
        let r = hound::WavReader::open(d.join(name)).expect("hound opens the WAV");
        let spec = r.spec();
        assert_eq!(spec.channels, 3, "{name}: tach, x, y");
        assert_eq!(spec.sample_rate, 3200, "{name}");
        assert_eq!(spec.bits_per_sample, bits, "{name}");
        assert_eq!(spec.sample_format, format, "{name}");
        assert!(
            (i64::from(r.duration()) - 3200).abs() <= 1,
            "{name}: {} frames",
            r.duration()
        );
    }
}

#[test]
fn unknown_extension_and_machine_are_one_line_errors() {
    let d = Dir::new();
    let o = d.veer(&["simulate", "--out", "r.txt", "--profile", "0:300,1:600"]);
    error_naming(&o, &["r.txt"]);
    let o = d.veer(&["simulate", "--out", "r.csv", "--machine", "nosuch"]);
    error_naming(&o, &["nosuch"]);
}
