//! The WAV reader and writer, checked against `hound` as an independent reader and writer,
//! plus hand-built files for the cases `hound` does not write.

use std::fs;
use std::io::Cursor;
use std::path::Path;

use super::*;

/// Scales hound's integers the way the reader documents, independently of the reader: by
/// 2^(bits-1), so full scale is [-1, 1) (common practice for integer PCM).
fn scaled(v: i32, bits: u16) -> f32 {
    (f64::from(v) / f64::from(1u32 << (bits - 1))) as f32
}

#[test]
fn wav_integer_files_written_by_hound_read_back() {
    let dir = tempfile::tempdir().expect("tempdir");
    let frames = 300_000; // several read buffers at 16 bits and more
    for (bits, channels) in [(8u16, 1u16), (16, 2), (16, 1), (24, 3), (32, 6)] {
        let path = dir.path().join(format!("int{bits}_{channels}.wav"));
        let spec = hound::WavSpec {
            channels,
            sample_rate: 51_200,
            bits_per_sample: bits,
            sample_format: hound::SampleFormat::Int,
        };
        let mut w = hound::WavWriter::create(&path, spec).expect("hound create");
        let mut r = Lcg(u64::from(bits));
        let max = (1i64 << (bits - 1)) as f64;
        for _ in 0..frames * usize::from(channels) {
            let v = ((f64::from(r.unit()) * max) as i64).clamp(-(max as i64), max as i64 - 1);
            w.write_sample(v as i32).expect("hound write");
        }
        w.finalize().expect("hound finalize");

        let expected: Vec<i32> = hound::WavReader::open(&path)
            .expect("hound open")
            .samples::<i32>()
            .map(|s| s.expect("hound sample"))
            .collect();
        let mut rec = Recording::open(&path, None).expect("open");
        assert_eq!(rec.format(), Format::Wav);
        assert_eq!(rec.sample_rate(), 51_200.0);
        assert_eq!(rec.channel_names().len(), usize::from(channels));
        assert_eq!(rec.frames_hint(), Some(frames as u64));
        let cols: Vec<usize> = (0..usize::from(channels)).rev().collect();
        let got = read_all(&mut rec, &cols, 100_000).expect("read");
        for (k, &c) in cols.iter().enumerate() {
            assert_eq!(got[k].len(), frames);
            for f in 0..frames {
                let want = scaled(expected[f * usize::from(channels) + c], bits);
                assert_eq!(got[k][f], want, "{bits} bits, channel {c}, frame {f}");
            }
        }
    }
}

#[test]
fn wav_float_files_written_by_hound_read_back() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("f32.wav");
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 8_000,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(&path, spec).expect("hound create");
    let sig = signals(10_000, 5);
    for (a, b) in sig[1].iter().zip(&sig[2]) {
        w.write_sample(*a).expect("hound write");
        w.write_sample(*b).expect("hound write");
    }
    w.finalize().expect("hound finalize");
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.wav_encoding(), Some(Encoding::F32));
    let got = read_all(&mut rec, &[1, 0], 999).expect("read");
    assert_eq!(got, vec![sig[2].clone(), sig[1].clone()]);
}

#[test]
fn wav_writer_float32_and_pcm16_read_by_hound_and_by_us() {
    let dir = tempfile::tempdir().expect("tempdir");
    let frames = 40_000;
    let mut sig = signals(frames, 9);
    // Inside the PCM16 full scale, so nothing clips.
    for v in &mut sig[2] {
        *v = v.clamp(-63.0, 63.0);
    }
    let full_scale = 64.0f32;
    for format in [WavFormat::Float32, WavFormat::Pcm16 { full_scale }] {
        let path = dir.path().join("ours.wav");
        let mut w = WavWriter::create(&path, 3, 10_240, format).expect("create");
        w.write_frames(&slices(&sig, 0..123)).expect("write");
        w.write_frames(&slices(&sig, 123..frames)).expect("write");
        assert_eq!(w.clipped(), 0);
        w.finish().expect("finish");

        let mut h = hound::WavReader::open(&path).expect("hound open");
        assert_eq!(h.spec().channels, 3);
        assert_eq!(h.spec().sample_rate, 10_240);
        assert_eq!(h.len() as usize, frames * 3);
        let mut rec = Recording::open(&path, None).expect("open");
        assert_eq!(rec.frames_hint(), Some(frames as u64));
        let got = read_all(&mut rec, &[0, 1, 2], 4096).expect("read");
        match format {
            WavFormat::Float32 => {
                let hs: Vec<f32> = h.samples::<f32>().map(|s| s.expect("sample")).collect();
                for f in 0..frames {
                    for c in 0..3 {
                        assert_eq!(hs[f * 3 + c], sig[c][f]);
                        assert_eq!(got[c][f], sig[c][f]);
                    }
                }
            }
            WavFormat::Pcm16 { .. } => {
                let hs: Vec<i32> = h.samples::<i32>().map(|s| s.expect("sample")).collect();
                for f in 0..frames {
                    for c in 0..3 {
                        let want = sig[c][f] / full_scale;
                        // Rounding to the nearest of 65536 steps: off by half a step at most.
                        assert!((scaled(hs[f * 3 + c], 16) - want).abs() <= 0.5 / 32768.0 + 1e-7);
                        assert_eq!(got[c][f], scaled(hs[f * 3 + c], 16));
                    }
                }
            }
        }
    }
}

#[test]
fn wav_pcm16_clips_beyond_full_scale_and_counts() {
    let mut w = WavWriter::new(
        Cursor::new(Vec::new()),
        Path::new("mem.wav"),
        1,
        100,
        WavFormat::Pcm16 { full_scale: 1.0 },
    )
    .expect("new");
    w.write_frames(&[&[0.5, 1.0, -1.0, 2.0, -3.0]])
        .expect("write");
    assert_eq!(w.clipped(), 3);
    let bytes = w.finish().expect("finish").into_inner();
    let h = hound::WavReader::new(Cursor::new(bytes)).expect("hound");
    let v: Vec<i16> = h.into_samples::<i16>().map(|s| s.expect("s")).collect();
    assert_eq!(v, [16384, 32767, -32768, 32767, -32768]);
}

/// Builds a WAV file by hand, chunk by chunk.
pub(super) fn riff(chunks: &[(&[u8; 4], Vec<u8>)]) -> Vec<u8> {
    let mut body = b"WAVE".to_vec();
    for (id, data) in chunks {
        body.extend_from_slice(*id);
        body.extend_from_slice(&(data.len() as u32).to_le_bytes());
        body.extend_from_slice(data);
        if data.len() % 2 == 1 {
            body.push(0);
        }
    }
    let mut out = b"RIFF".to_vec();
    out.extend_from_slice(&(body.len() as u32).to_le_bytes());
    out.extend_from_slice(&body);
    out
}

pub(super) fn fmt_chunk(tag: u16, channels: u16, rate: u32, bytes: u16, bits: u16) -> Vec<u8> {
    let mut f = Vec::new();
    f.extend_from_slice(&tag.to_le_bytes());
    f.extend_from_slice(&channels.to_le_bytes());
    f.extend_from_slice(&rate.to_le_bytes());
    f.extend_from_slice(&(rate * u32::from(channels * bytes)).to_le_bytes());
    f.extend_from_slice(&(channels * bytes).to_le_bytes());
    f.extend_from_slice(&bits.to_le_bytes());
    f
}

fn extensible(channels: u16, rate: u32, bytes: u16, valid: u16, code: u16) -> Vec<u8> {
    let mut f = fmt_chunk(0xFFFE, channels, rate, bytes, bytes * 8);
    f.extend_from_slice(&22u16.to_le_bytes());
    f.extend_from_slice(&valid.to_le_bytes());
    f.extend_from_slice(&0u32.to_le_bytes());
    f.extend_from_slice(&code.to_le_bytes());
    f.extend_from_slice(&[
        0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
    ]);
    f
}

#[test]
fn wav_odd_chunks_extensible_and_double_precision() {
    let dir = tempfile::tempdir().expect("tempdir");
    // An odd-sized LIST chunk (padded) before fmt, an unknown chunk after the data.
    let mut data = Vec::new();
    for v in [0i32, 0x40_0000, -0x80_0000, 0x7F_FFFF] {
        data.extend_from_slice(&v.to_le_bytes()[..3]);
    }
    let bytes = riff(&[
        (b"LIST", b"INFOabc".to_vec()),
        (b"fmt ", extensible(1, 1_000, 3, 20, 1)),
        (b"data", data),
        (b"junk", vec![1, 2, 3]),
    ]);
    let path = write(dir.path(), "ext24.wav", &bytes);
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.wav_encoding(), Some(Encoding::I24));
    let got = read_all(&mut rec, &[0], 10).expect("read");
    assert_eq!(got[0], [0.0, 0.5, -1.0, 0x7F_FFFF as f32 / 8_388_608.0]);

    let mut data = Vec::new();
    for v in [0.25f64, -1e-3, 3.0] {
        data.extend_from_slice(&v.to_le_bytes());
    }
    let bytes = riff(&[(b"fmt ", fmt_chunk(3, 1, 500, 8, 64)), (b"data", data)]);
    let path = write(dir.path(), "f64.wav", &bytes);
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(
        read_all(&mut rec, &[0], 10).expect("read")[0],
        [0.25, -1e-3, 3.0]
    );
}

#[test]
fn wav_truncated_delivers_what_is_there_then_says_so() {
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("cut.wav");
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 1_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(&path, spec).expect("hound");
    for i in 0..2_000 {
        w.write_sample((i % 300) as i16).expect("write");
    }
    w.finalize().expect("finalize");
    let full = fs::read(&path).expect("read");
    // Keep 600 frames and half of the next one.
    let cut = full.len() - 400 * 4 - 2;
    fs::write(&path, &full[..cut]).expect("cut");
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.frames_hint(), Some(599));
    let mut out = vec![Vec::new()];
    let mut total = 0;
    let err = loop {
        match rec.read_frames(&[1], &mut out, 256) {
            Ok(n) => {
                assert!(n > 0, "end of data reported as Ok(0)");
                total += n;
            }
            Err(e) => break e,
        }
    };
    assert_eq!(total, 599);
    let msg = one_line(&path, &err);
    assert!(
        msg.ends_with("truncated: header says 1000 frames, file holds 599"),
        "{msg}"
    );
}

#[test]
fn wav_nan_names_frame_and_channel() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut data = Vec::new();
    for v in [0.0f32, 1.0, 0.5, 2.0, f32::NAN, 3.0] {
        data.extend_from_slice(&v.to_le_bytes());
    }
    let bytes = riff(&[(b"fmt ", fmt_chunk(3, 2, 100, 4, 32)), (b"data", data)]);
    let path = write(dir.path(), "nan.wav", &bytes);
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(
        read_all(&mut rec, &[1], 10).expect("channel 1 is clean")[0],
        [1.0, 2.0, 3.0]
    );
    let msg = read_err(&path, None);
    assert!(
        msg.ends_with("frame 2, channel 0: sample is NaN, not a finite number"),
        "{msg}"
    );
}

#[test]
fn wav_header_errors() {
    let dir = tempfile::tempdir().expect("tempdir");
    let pcm = fmt_chunk(1, 1, 100, 2, 16);
    let cases: Vec<(&str, Vec<u8>, &str)> = vec![
        ("short.wav", b"RIFF".to_vec(), "shorter than a RIFF header"),
        (
            "avi.wav",
            b"RIFF\x04\0\0\0AVI ".to_vec(),
            "another kind than WAVE",
        ),
        ("text.wav", b"time,x\n0,1\n1,2\n".to_vec(), "no RIFF header"),
        ("nofmt.wav", riff(&[(b"data", vec![0; 4])]), "no fmt chunk"),
        (
            "nodata.wav",
            riff(&[(b"fmt ", pcm.clone())]),
            "no data chunk",
        ),
        (
            "alaw.wav",
            riff(&[(b"fmt ", fmt_chunk(6, 1, 100, 1, 8)), (b"data", vec![0; 4])]),
            "unsupported WAV encoding: format tag 0x0006 (A-law)",
        ),
        (
            "ext.wav",
            riff(&[
                (b"fmt ", extensible(1, 100, 2, 16, 2)),
                (b"data", vec![0; 4]),
            ]),
            "unsupported WAV encoding: format tag 0x0002 (ADPCM)",
        ),
        (
            "zero.wav",
            riff(&[(b"fmt ", fmt_chunk(1, 1, 0, 2, 16)), (b"data", vec![0; 4])]),
            "sample rate 0 Hz is not usable",
        ),
    ];
    for (name, bytes, want) in cases {
        let path = write(dir.path(), name, &bytes);
        let msg = open_err(&path, None);
        assert!(msg.contains(want), "{name}: {msg}");
    }
}

#[test]
fn wav_rf64_takes_the_data_size_from_ds64() {
    // RF64 (EBU Tech 3306): the 32-bit sizes are 0xFFFFFFFF and the real ones sit in `ds64`.
    let dir = tempfile::tempdir().expect("tempdir");
    let samples: [i16; 4] = [0, 16_384, -16_384, -32_768];
    let mut data = Vec::new();
    for v in samples {
        data.extend_from_slice(&v.to_le_bytes());
    }
    let mut ds64 = Vec::new();
    ds64.extend_from_slice(&0u64.to_le_bytes()); // RIFF size, not used by the reader
    ds64.extend_from_slice(&(data.len() as u64).to_le_bytes());
    ds64.extend_from_slice(&4u64.to_le_bytes()); // sample count
    ds64.extend_from_slice(&0u32.to_le_bytes()); // table length
    let mut bytes = riff(&[(b"ds64", ds64), (b"fmt ", fmt_chunk(1, 1, 2_000, 2, 16))]);
    bytes[0..4].copy_from_slice(b"RF64");
    bytes[4..8].copy_from_slice(&u32::MAX.to_le_bytes());
    bytes.extend_from_slice(b"data");
    bytes.extend_from_slice(&u32::MAX.to_le_bytes());
    bytes.extend_from_slice(&data);
    let path = write(dir.path(), "big.rf64", &bytes);
    let mut rec = Recording::open(&path, None).expect("open");
    assert_eq!(rec.format(), Format::Wav);
    assert_eq!(rec.frames_hint(), Some(4));
    let got = read_all(&mut rec, &[0], 10).expect("read");
    assert_eq!(got[0], [0.0, 0.5, -0.5, -1.0]);
}
