//! Tests of the readers and writers together: round trips, `hound` as an independent WAV
//! reader and writer, and every error a user can meet, each checked to be one line.

use std::fs;
use std::io::Cursor;
use std::path::{Path, PathBuf};

use super::*;

mod csv;
mod wav;

/// A deterministic generator, so a failure replays (Knuth's MMIX LCG constants, The Art of
/// Computer Programming vol. 2, 3rd ed.).
struct Lcg(u64);
impl Lcg {
    fn next_u32(&mut self) -> u32 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 32) as u32
    }
    /// Uniform in [-1, 1).
    fn unit(&mut self) -> f32 {
        (self.next_u32() >> 8) as f32 / (1u32 << 23) as f32 - 1.0
    }
}

/// Test signals of varied magnitude: a tach-like square wave, a sine with noise, and values
/// spread over many decades (which stress the float text round trip).
fn signals(frames: usize, seed: u64) -> Vec<Vec<f32>> {
    let mut r = Lcg(seed);
    let tach = (0..frames)
        .map(|i| if i % 97 < 5 { 5.0 } else { 0.0 })
        .collect();
    let x = (0..frames)
        .map(|i| 40.0 * (i as f32 * 0.013).sin() + r.unit())
        .collect();
    let y = (0..frames)
        .map(|_| r.unit() * 10f32.powi((r.next_u32() % 16) as i32 - 8))
        .collect();
    vec![tach, x, y]
}

fn slices(cols: &[Vec<f32>], range: std::ops::Range<usize>) -> Vec<&[f32]> {
    cols.iter().map(|c| &c[range.clone()]).collect()
}

/// Reads every frame of `cols` in blocks of `block`, checking that no block is over-full.
fn read_all(
    rec: &mut Recording,
    cols: &[usize],
    block: usize,
) -> Result<Vec<Vec<f32>>, DecodeError> {
    let mut all = vec![Vec::new(); cols.len()];
    let mut out = vec![Vec::new(); cols.len()];
    loop {
        let n = rec.read_frames(cols, &mut out, block)?;
        if n == 0 {
            return Ok(all);
        }
        assert!(n <= block);
        for (a, o) in all.iter_mut().zip(&out) {
            assert_eq!(o.len(), n);
            a.extend_from_slice(o);
        }
    }
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    fs::write(&p, bytes).expect("write test file");
    p
}

/// The message of the error from opening `path`, asserted to be one line naming the file.
fn open_err(path: &Path, rate: Option<f64>) -> String {
    let e = Recording::open(path, rate).expect_err("open should fail");
    one_line(path, &e)
}

fn one_line(path: &Path, e: &DecodeError) -> String {
    let msg = e.to_string();
    assert!(!msg.contains('\n'), "more than one line: {msg}");
    assert!(
        msg.starts_with(&path.display().to_string()),
        "does not start with the file: {msg}"
    );
    msg
}

/// The error from opening and reading all frames of the first channel (a bad row among the
/// first ones may already fail the opening, where the time column is measured).
fn read_err(path: &Path, rate: Option<f64>) -> String {
    let e = match Recording::open(path, rate) {
        Ok(mut rec) => read_all(&mut rec, &[0], 4096).expect_err("reading should fail"),
        Err(e) => e,
    };
    one_line(path, &e)
}

#[test]
fn format_comes_from_extension_else_content() {
    let dir = tempfile::tempdir().expect("tempdir");
    let wav = wav::riff(&[
        (b"fmt ", wav::fmt_chunk(1, 1, 100, 2, 16)),
        (b"data", vec![0; 4]),
    ]);
    let p = write(dir.path(), "capture.dat", &wav);
    assert_eq!(Format::detect(&p).expect("detect"), Format::Wav);
    let p = write(dir.path(), "capture", b"time,x\n0,1\n1,2\n");
    assert_eq!(Format::detect(&p).expect("detect"), Format::Csv);
    let p = write(dir.path(), "upper.WAV", &wav);
    assert_eq!(
        Recording::open(&p, None).expect("open").format(),
        Format::Wav
    );
}

#[test]
fn writers_refuse_bad_input() {
    let label = Path::new("out.csv");
    let mut w = CsvWriter::new(Vec::new(), label, &["a", "b"], 100.0, 0.0).expect("new");
    let e = w.write_frames(&[&[1.0], &[f32::NAN]]).expect_err("nan");
    assert_eq!(
        e.to_string(),
        "out.csv: frame 0, channel b: sample is NaN, not a finite number"
    );
    assert!(w.write_frames(&[&[1.0], &[1.0, 2.0]]).is_err());
    assert!(w.write_frames(&[&[1.0]]).is_err());
    assert!(CsvWriter::new(Vec::new(), label, &["a"], 0.0, 0.0).is_err());
    assert!(CsvWriter::new(Vec::new(), label, &["a\nb"], 1.0, 0.0).is_err());
    let wl = Path::new("out.wav");
    assert!(WavWriter::new(Cursor::new(Vec::new()), wl, 0, 100, WavFormat::Float32).is_err());
    let bad_scale = WavFormat::Pcm16 { full_scale: 0.0 };
    assert!(WavWriter::new(Cursor::new(Vec::new()), wl, 1, 100, bad_scale).is_err());
}

#[test]
fn damaged_files_give_errors_not_panics() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut csv = Vec::new();
    let sig = signals(300, 4);
    let mut w =
        CsvWriter::new(&mut csv, Path::new("m.csv"), &["a", "b", "c"], 100.0, 0.0).expect("new");
    w.write_frames(&slices(&sig, 0..300)).expect("write");
    w.finish().expect("finish");
    let mut wav = Cursor::new(Vec::new());
    let mut w =
        WavWriter::new(&mut wav, Path::new("m.wav"), 3, 100, WavFormat::Float32).expect("new");
    w.write_frames(&slices(&sig, 0..300)).expect("write");
    w.finish().expect("finish");
    let wav = wav.into_inner();
    let mut r = Lcg(99);
    let mut opened = 0;
    for round in 0..800 {
        let (name, good) = if round % 2 == 0 {
            ("f.csv", &csv)
        } else {
            ("f.wav", &wav)
        };
        let mut bytes = good.clone();
        let cut = r.next_u32() as usize % (bytes.len() + 1);
        if r.next_u32() % 3 == 1 {
            bytes.truncate(cut);
        }
        for _ in 0..(r.next_u32() % 8) {
            if !bytes.is_empty() {
                let i = r.next_u32() as usize % bytes.len();
                // Damage the header more often: that is where the parsing decisions are.
                let i = if r.next_u32() % 2 == 1 {
                    i % 64.min(bytes.len())
                } else {
                    i
                };
                bytes[i] = r.next_u32() as u8;
            }
        }
        let path = write(dir.path(), name, &bytes);
        if let Ok(mut rec) = Recording::open(&path, None) {
            opened += 1;
            let n = rec.channel_names().len();
            let cols: Vec<usize> = (0..n).collect();
            if let Err(e) = read_all(&mut rec, &cols, 97) {
                one_line(&path, &e);
            }
        }
    }
    // Most damage leaves a readable file: the loop must have got past the headers.
    assert!(opened > 150, "only {opened} damaged files opened");
}

// ---------------------------------------------------------------- speed

/// Throughput in release: `cargo test --release -p veer -- --ignored --nocapture throughput`.
#[test]
#[ignore]
fn throughput() {
    use std::time::Instant;
    let dir = tempfile::tempdir().expect("tempdir");

    // CSV: time and four channels, about 200 MB.
    let path = dir.path().join("big.csv");
    let block = 100_000;
    let sig = signals(block, 3);
    let fourth: Vec<f32> = sig[1].iter().map(|v| v * 0.37).collect();
    let cols = [&sig[0][..], &sig[1][..], &sig[2][..], &fourth[..]];
    let mut w = CsvWriter::create(&path, &["tach", "x", "y", "z"], 51_200.0, 0.0).expect("create");
    let t = Instant::now();
    while fs::metadata(&path).map(|m| m.len()).unwrap_or(0) < 200_000_000 {
        w.write_frames(&cols).expect("write");
    }
    let frames = w.frames();
    w.finish().expect("finish");
    let size = fs::metadata(&path).expect("meta").len() as f64;
    println!(
        "CSV write: {:.0} MB in {:.2} s: {:.0} MB/s",
        size / 1e6,
        t.elapsed().as_secs_f64(),
        size / 1e6 / t.elapsed().as_secs_f64()
    );
    for sel in [vec![0usize, 1, 2, 3], vec![0, 1]] {
        let mut rec = Recording::open(&path, None).expect("open");
        let mut out = vec![Vec::with_capacity(65_536); sel.len()];
        let t = Instant::now();
        let mut n = 0u64;
        loop {
            let k = rec.read_frames(&sel, &mut out, 65_536).expect("read");
            if k == 0 {
                break;
            }
            n += k as u64;
        }
        let s = t.elapsed().as_secs_f64();
        assert_eq!(n, frames);
        println!(
            "CSV read {} of 4 channels: {:.0} MB/s ({:.1} M rows/s)",
            sel.len(),
            size / 1e6 / s,
            n as f64 / 1e6 / s
        );
    }
    fs::remove_file(&path).expect("remove");

    // WAV: 4 channels, 50 M frames of PCM16 (400 MB), then float32 of 25 M frames.
    for (format, total) in [
        (WavFormat::Pcm16 { full_scale: 64.0 }, 50_000_000u64),
        (WavFormat::Float32, 25_000_000),
    ] {
        let path = dir.path().join("big.wav");
        let mut w = WavWriter::create(&path, 4, 51_200, format).expect("create");
        let cols = [&sig[0][..], &sig[1][..], &sig[1][..], &fourth[..]];
        while w.frames() < total {
            w.write_frames(&cols).expect("write");
        }
        w.finish().expect("finish");
        for sel in [vec![0usize, 1, 2, 3], vec![1]] {
            let mut rec = Recording::open(&path, None).expect("open");
            let mut out = vec![Vec::with_capacity(65_536); sel.len()];
            let t = Instant::now();
            let mut n = 0u64;
            loop {
                let k = rec.read_frames(&sel, &mut out, 65_536).expect("read");
                if k == 0 {
                    break;
                }
                n += k as u64;
            }
            let s = t.elapsed().as_secs_f64();
            println!(
                "WAV {:?} read {} of 4 channels: {:.0} M samples/s converted ({:.0} M frames/s)",
                format,
                sel.len(),
                (n * sel.len() as u64) as f64 / 1e6 / s,
                n as f64 / 1e6 / s
            );
        }
        fs::remove_file(&path).expect("remove");
    }
}
