//! Recordings for the daemon: simulated with `veer simulate`, then damaged or rearranged the way
//! real captures go wrong, and dropped into a watched folder the ways loggers do it.

use crate::support::Dir;
use std::path::Path;

/// Simulates the demo fan into `name` (CSV or WAV by extension, or a serial byte stream with
/// `extra = ["--serial", "text"]`) at `rate` Hz through `profile` (`T:RPM,...`).
pub fn fan(d: &Dir, name: &str, profile: &str, rate: u32, seed: u64, extra: &[&str]) {
    let rate = rate.to_string();
    let seed = seed.to_string();
    let mut args = vec![
        "--machine",
        "fan-2",
        "--rate",
        &rate,
        "--profile",
        profile,
        "--seed",
        &seed,
    ];
    args.extend_from_slice(extra);
    d.simulate(name, &args);
}

/// `csv` with field `column` (0-based) of file line `line` (1-based, the header is line 1)
/// replaced by `bad`.
pub fn with_bad_field(csv: &str, line: usize, column: usize, bad: &str) -> String {
    let mut out = String::with_capacity(csv.len() + bad.len());
    for (i, l) in csv.lines().enumerate() {
        if i + 1 == line {
            let mut fields: Vec<&str> = l.split(',').collect();
            assert!(column < fields.len(), "line {line} has no column {column}");
            fields[column] = bad;
            out.push_str(&fields.join(","));
        } else {
            out.push_str(l);
        }
        out.push('\n');
    }
    assert!(
        csv.lines().count() >= line,
        "the CSV has fewer than {line} lines"
    );
    out
}

/// Copies the WAV `src` to `dst` with its tach (channel 0) held at its lowest value from
/// `from_s` seconds on, as when a tach cable breaks: the vibration channels carry on unchanged.
pub fn with_dead_tach(src: &Path, dst: &Path, from_s: f64) {
    let mut r = hound::WavReader::open(src).expect("open the simulated WAV");
    let spec = r.spec();
    assert_eq!(spec.sample_format, hound::SampleFormat::Float, "f32 WAV");
    let samples: Vec<f32> = r
        .samples::<f32>()
        .collect::<Result<_, _>>()
        .expect("read the simulated WAV");
    let channels = usize::from(spec.channels);
    let low = samples
        .iter()
        .step_by(channels)
        .fold(f32::INFINITY, |a, &b| a.min(b));
    let from = (from_s * f64::from(spec.sample_rate)) as usize;
    let mut w = hound::WavWriter::create(dst, spec).expect("create the WAV");
    for (i, frame) in samples.chunks_exact(channels).enumerate() {
        for (c, &x) in frame.iter().enumerate() {
            let v = if c == 0 && i >= from { low } else { x };
            w.write_sample(v).expect("write a sample");
        }
    }
    w.finalize().expect("finish the WAV");
}

/// Moves the file `src` into `folder/name` through a hidden temporary name in the folder (a
/// rename within one file system, so the daemon sees it appear whole).
pub fn publish_file(src: &Path, folder: &Path, name: &str) {
    std::fs::create_dir_all(folder).expect("create the folder");
    let tmp = folder.join(format!(".{name}.part"));
    std::fs::rename(src, &tmp).expect("move the recording beside the folder");
    std::fs::rename(&tmp, folder.join(name)).expect("rename into place");
}
