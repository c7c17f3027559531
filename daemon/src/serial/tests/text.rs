//! The text format.

use super::{feed, layout, signal, slice, views, Collected, Lcg};
use crate::serial::crc16::crc16;
use crate::serial::text::{TextDecoder, TextEncoder};

const RATE: f64 = 2560.0;

/// The encoded stream of `cols` with a header every `every` lines, starting at `seq`.
fn encode(cols: &[Vec<f32>], every: u64, seq: u32) -> Vec<u8> {
    let names: Vec<String> = layout(cols.len(), RATE).channels;
    let names: Vec<&str> = names.iter().map(String::as_str).collect();
    let mut enc = TextEncoder::new(&names, RATE)
        .expect("encoder")
        .with_header_every(every)
        .with_first_seq(seq);
    let mut out = Vec::new();
    enc.encode(&views(cols), &mut out).expect("encode");
    out
}

fn decoder(channels: usize) -> TextDecoder {
    TextDecoder::new(layout(channels, RATE))
}

fn decode(bytes: &[u8], channels: usize, chunk: usize) -> (Collected, TextDecoder) {
    let mut d = decoder(channels);
    let got = feed(bytes, chunk, 1000.0, |b, t, o| d.push(b, t, o));
    got.assert_consistent();
    (got, d)
}

/// Byte ranges of the lines of `bytes`, `\n` included.
fn lines(bytes: &[u8]) -> Vec<std::ops::Range<usize>> {
    let mut out = Vec::new();
    let mut start = 0;
    for (i, &b) in bytes.iter().enumerate() {
        if b == b'\n' {
            out.push(start..i + 1);
            start = i + 1;
        }
    }
    out
}

#[test]
fn crc16_matches_the_catalogue_check_value() {
    // Check value of CRC-16/IBM-3740 over "123456789": 0x29B1 (Greg Cook, "Catalogue of
    // parametrised CRC algorithms", CRC-16/IBM-3740, a.k.a. CRC-16/CCITT-FALSE).
    assert_eq!(crc16(b"123456789"), 0x29B1);
    assert_eq!(crc16(b""), 0xFFFF);
}

#[test]
fn lines_look_as_documented() {
    let cols = vec![vec![0.52f32], vec![12.7], vec![-3.1]];
    let mut enc = TextEncoder::new(&["tach", "x", "y"], RATE)
        .expect("encoder")
        .with_first_seq(1234);
    let mut out = Vec::new();
    enc.encode(&views(&cols), &mut out).expect("encode");
    let text = String::from_utf8(out).expect("ascii");
    let mut it = text.lines();
    let header = it.next().expect("header");
    let data = it.next().expect("data");
    assert!(
        header.starts_with("#veer v1 rate=2560 channels=tach,x,y*"),
        "{header}"
    );
    assert!(data.starts_with("1234,0.52,12.7,-3.1*"), "{data}");
    let (body, sum) = data.split_once('*').expect("star");
    assert_eq!(sum, format!("{:04X}", crc16(body.as_bytes())));
}

#[test]
fn round_trip_in_any_chunk_size() {
    let cols = signal(3, 10_000, 7);
    let bytes = encode(&cols, 500, 0);
    for chunk in [1, 7, 4096, bytes.len()] {
        let (got, d) = decode(&bytes, 3, chunk);
        assert_eq!(got.joined(), cols, "chunk {chunk}");
        assert!(got.gaps.is_empty(), "chunk {chunk}: {:?}", got.gaps);
        assert_eq!(got.blocks[0].first_frame, 0);
        assert_eq!(d.stats().corrupt, 0);
        assert_eq!(d.stats().frames, 10_000);
        // Every push flushes: with 1-byte pushes each block is one frame.
        if chunk == 1 {
            assert_eq!(got.blocks.len(), 10_000);
        }
    }
}

#[test]
fn special_values_survive() {
    let cols = vec![
        vec![0.0, -0.0, f32::MIN_POSITIVE, f32::MAX, f32::INFINITY],
        vec![1e-30, -1e30, 1.0 / 3.0, f32::NEG_INFINITY, f32::NAN],
    ];
    let (got, _) = decode(&encode(&cols, 100, 0), 2, 3);
    let back = got.joined();
    for (a, b) in back.iter().flatten().zip(cols.iter().flatten()) {
        assert!(
            a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
            "{a} vs {b}"
        );
    }
}

#[test]
fn a_damaged_character_drops_one_line_and_leaves_a_gap_of_one() {
    let cols = signal(3, 3000, 8);
    let mut bytes = encode(&cols, 1000, 0);
    let ranges = lines(&bytes);
    // Lines: header, frames 0..999, header, frames 1000..1999, ... Damage frame 1500's line.
    let victim = ranges[1 + 1500 + 1].clone();
    assert!(bytes[victim.start..].starts_with(b"1500,"));
    bytes[victim.start + 6] ^= 0x01;
    for chunk in [1, 7, 4096] {
        let (got, d) = decode(&bytes, 3, chunk);
        assert_eq!(got.gaps.len(), 1, "{:?}", got.gaps);
        let g = &got.gaps[0];
        assert_eq!((g.first_frame, g.frames, g.corrupt), (1500, 1, 1));
        assert_eq!(g.reason, "checksum mismatch");
        assert_eq!(d.stats().corrupt, 1);
        assert_eq!(got.frames(), 2999);
        let mut want = slice(&cols, 0, 1500);
        for (w, rest) in want.iter_mut().zip(slice(&cols, 1501, 3000)) {
            w.extend(rest);
        }
        assert_eq!(got.joined(), want);
    }
}

#[test]
fn deleted_lines_become_a_gap_of_their_count() {
    let cols = signal(2, 2000, 9);
    let bytes = encode(&cols, 5000, 0);
    let ranges = lines(&bytes);
    // Remove frames 300..=336 (lines 301..=337).
    let mut cut = bytes[..ranges[301].start].to_vec();
    cut.extend_from_slice(&bytes[ranges[337].end..]);
    let (got, d) = decode(&cut, 2, 7);
    assert_eq!(got.gaps.len(), 1);
    let g = &got.gaps[0];
    assert_eq!((g.first_frame, g.frames, g.corrupt), (300, 37, 0));
    assert_eq!(g.reason, "sequence jump");
    // The gap is dated by the stream clock: anchored at the first frame, one frame per 1/rate.
    let t0 = got.blocks[0].start_unix_s;
    assert!((g.start_unix_s - (t0 + 300.0 / RATE)).abs() < 1e-9);
    assert!((g.end_unix_s - (t0 + 337.0 / RATE)).abs() < 1e-9);
    assert_eq!(d.stats().corrupt, 0);
    assert_eq!(got.frames(), 2000 - 37);
}

#[test]
fn garbage_before_the_first_header_is_skipped() {
    let cols = signal(3, 500, 10);
    let mut rng = Lcg(3);
    let mut bytes: Vec<u8> = (0..3000).map(|_| rng.below(256) as u8).collect();
    // Include lines that look like data (without a header yet they cannot be placed).
    bytes.extend_from_slice(b"\n17,1,2,3*0000\n");
    bytes.extend(encode(&cols, 100, 42));
    let (got, d) = decode(&bytes, 3, 7);
    assert_eq!(got.joined(), cols);
    assert_eq!(got.blocks[0].first_frame, 42);
    assert!(got.gaps.is_empty());
    assert_eq!(d.stats().corrupt, 0, "nothing is corrupt before sync");
    assert!(d.stats().skipped_bytes >= 3000);
}

#[test]
fn a_reader_joining_mid_stream_starts_at_the_next_header() {
    let cols = signal(3, 1000, 11);
    let bytes = encode(&cols, 250, 0);
    let ranges = lines(&bytes);
    // Join in the middle of frame 100's line; the next header is before frame 250.
    let join = ranges[101].start + 3;
    let (got, d) = decode(&bytes[join..], 3, 7);
    assert_eq!(got.blocks[0].first_frame, 250);
    assert_eq!(got.joined(), slice(&cols, 250, 1000));
    assert!(got.gaps.is_empty());
    assert_eq!(d.stats().corrupt, 0);
}

#[test]
fn the_sequence_number_wraps_at_2_pow_32() {
    let cols = signal(2, 40, 12);
    let first = u32::MAX - 9;
    let (got, _) = decode(&encode(&cols, 1000, first), 2, 5);
    assert!(got.gaps.is_empty(), "{:?}", got.gaps);
    assert_eq!(got.blocks[0].first_frame, u64::from(first));
    let last = got.blocks.last().expect("blocks");
    assert_eq!(
        last.first_frame + last.channels[0].len() as u64,
        u64::from(first) + 40
    );
    assert!(last.first_frame + 1 > 1 << 32);
    assert_eq!(got.joined(), cols);

    // A wrap with lines lost across it is a gap of the right size.
    let bytes = encode(&cols, 1000, first);
    let ranges = lines(&bytes);
    let mut cut = bytes[..ranges[6].start].to_vec(); // frames 0..=4 kept
    cut.extend_from_slice(&bytes[ranges[16].start..]); // frames 15.. kept
    let (got, _) = decode(&cut, 2, 5);
    assert_eq!(got.gaps.len(), 1);
    assert_eq!(got.gaps[0].first_frame, u64::from(first) + 5);
    assert_eq!(got.gaps[0].frames, 10);
}

#[test]
fn a_logger_restart_is_a_gap_of_unknown_size_and_indices_go_on() {
    let a = signal(2, 300, 13);
    let b = signal(2, 200, 14);
    let mut bytes = encode(&a, 100, 5000);
    bytes.extend(encode(&b, 100, 0));
    let (got, d) = decode(&bytes, 2, 64);
    assert_eq!(d.stats().restarts, 1);
    assert_eq!(got.gaps.len(), 1);
    assert_eq!(got.gaps[0].frames, 0);
    assert_eq!(got.gaps[0].first_frame, 5300);
    assert!(
        got.gaps[0].reason.contains("went back"),
        "{}",
        got.gaps[0].reason
    );
    let after = got
        .blocks
        .iter()
        .find(|b| b.first_frame >= 5300)
        .expect("after");
    assert_eq!(after.first_frame, 5300, "output indices never go back");
    assert_eq!(got.frames(), 500);
}

#[test]
fn a_header_that_disagrees_with_the_configuration_stops_decoding() {
    let cols = signal(3, 100, 15);
    let bytes = encode(&cols, 50, 0);
    // Configured for two channels: the three-channel stream is not read.
    let (got, d) = decode(&bytes, 2, 7);
    assert!(got.blocks.is_empty());
    assert_eq!(d.stats().mismatched_headers, 2);
    assert!(d
        .stats()
        .last_mismatch
        .as_deref()
        .is_some_and(|m| m.contains("tach,c1,c2")));
    // A different rate is refused too.
    let mut d = TextDecoder::new(layout(3, 2000.0));
    let got = feed(&bytes, 7, 0.0, |b, t, o| d.push(b, t, o));
    assert!(got.blocks.is_empty());
    assert_eq!(d.stats().mismatched_headers, 2);
}

#[test]
fn block_times_follow_the_stream_clock_not_the_arrival_jitter() {
    let cols = signal(2, 5120, 16);
    let bytes = encode(&cols, 2560, 0);
    let mut d = decoder(2);
    let mut out = Vec::new();
    let mut rng = Lcg(17);
    let t0 = 1.7e9;
    let mut sent = 0usize;
    for piece in bytes.chunks(1000) {
        sent += piece.len();
        // Arrival: the byte's share of the 2 s of data, plus up to 50 ms of jitter.
        let now = t0 + 2.0 * sent as f64 / bytes.len() as f64 + 0.05 * f64::from(rng.unit().abs());
        d.push(piece, now, &mut out);
    }
    let got = Collected::from_events(out);
    let anchor = got.blocks[0].start_unix_s;
    assert!((anchor - t0).abs() < 0.1);
    for b in &got.blocks {
        let want = anchor + b.first_frame as f64 / RATE;
        assert!(
            (b.start_unix_s - want).abs() < 1e-6,
            "{} vs {want}",
            b.start_unix_s
        );
    }
    assert_eq!(d.stats().clock_resets, 0);
}

#[test]
fn never_panics_on_noise() {
    let mut rng = Lcg(99);
    let good = encode(&signal(3, 200, 18), 20, 0);
    for round in 0..200 {
        let mut bytes = good.clone();
        // Flip, insert and delete bytes, and splice in sealed lines of junk.
        for _ in 0..rng.below(20) {
            let i = rng.below(bytes.len());
            match rng.below(3) {
                0 => bytes[i] = rng.below(256) as u8,
                1 => bytes.insert(i, rng.below(256) as u8),
                _ => {
                    bytes.remove(i);
                }
            }
        }
        for junk in [
            "#veer v1",
            "#veer v1 rate=x channels=",
            "1,2*",
            ",,,",
            "#veer v1 rate=2560 channels=tach,c1,c2 rate=-1",
        ] {
            let mut line = junk.as_bytes().to_vec();
            line.extend_from_slice(format!("*{:04X}\n", crc16(junk.as_bytes())).as_bytes());
            let at = rng.below(bytes.len());
            bytes.splice(at..at, line);
        }
        let mut d = decoder(3);
        let got = feed(&bytes, 1 + round % 50, 0.0, |b, t, o| d.push(b, t, o));
        got.assert_consistent();
    }
    // An endless line is dropped without growing.
    let mut d = decoder(3);
    let mut out = Vec::new();
    for _ in 0..100 {
        d.push(&[b'1'; 4096], 0.0, &mut out);
    }
    d.push(b"\n", 0.0, &mut out);
    d.push(&good, 0.0, &mut out);
    let got = Collected::from_events(out);
    assert_eq!(got.frames(), 200);
    assert!(d.stats().skipped_bytes >= 409_600);
}

#[test]
fn a_disconnect_drops_the_half_line_and_names_the_gap() {
    let cols = signal(2, 100, 19);
    let bytes = encode(&cols, 1000, 0);
    let ranges = lines(&bytes);
    let mut d = decoder(2);
    let mut out = Vec::new();
    // Up to the middle of frame 40's line, then the port goes.
    d.push(&bytes[..ranges[41].start + 4], 0.0, &mut out);
    d.note_disconnect("broken pipe");
    // After reconnecting, the logger is at frame 60.
    d.push(&bytes[ranges[61].start..], 0.0, &mut out);
    let got = Collected::from_events(out);
    assert_eq!(got.gaps.len(), 1);
    assert_eq!((got.gaps[0].first_frame, got.gaps[0].frames), (40, 20));
    assert_eq!(got.gaps[0].reason, "port closed: broken pipe");
    assert_eq!(d.stats().corrupt, 0);
    assert_eq!(got.frames(), 80);
}

#[test]
fn the_encoder_refuses_what_the_format_cannot_carry() {
    assert!(TextEncoder::new(&[], RATE).is_err());
    assert!(TextEncoder::new(&["a,b"], RATE).is_err());
    assert!(TextEncoder::new(&["x"], 0.0).is_err());
    assert!(TextEncoder::new(&["x"], f64::NAN).is_err());
    let mut enc = TextEncoder::new(&["x", "y"], RATE).expect("encoder");
    let short = [1.0f32];
    let long = [1.0f32, 2.0];
    assert!(enc.encode(&[&short, &long], &mut Vec::new()).is_err());
    assert!(enc.encode(&[&short], &mut Vec::new()).is_err());
}

#[test]
fn the_documented_example_decodes() {
    // The lines of docs/serial-format.md, checksums as printed there.
    let doc = b"#veer v1 rate=2560 channels=tach,x,y*E2EA\n\
                1234,0.52,12.7,-3.1*4696\n\
                1235,0.51,12.9,-3.0*06CA\n";
    let mut d = TextDecoder::new(crate::serial::StreamLayout {
        sample_rate: 2560.0,
        channels: vec!["tach".into(), "x".into(), "y".into()],
    });
    let got = feed(doc, 5, 0.0, |b, t, o| d.push(b, t, o));
    assert_eq!(d.stats().corrupt, 0);
    assert_eq!(got.blocks[0].first_frame, 1234);
    assert_eq!(
        got.joined(),
        vec![vec![0.52, 0.51], vec![12.7, 12.9], vec![-3.1, -3.0]]
    );
}
