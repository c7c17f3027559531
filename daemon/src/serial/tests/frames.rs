//! The frames format.

use super::{feed, layout, signal, slice, views, Collected, Lcg};
use crate::serial::frames::{FrameDecoder, FrameEncoder, SampleFormat, HEADER_LEN, SYNC};
use crate::serial::MAX_BLOCK_FRAMES;

const RATE: f64 = 25_600.0;

fn encoder(channels: usize, packet: usize) -> FrameEncoder {
    FrameEncoder::new(channels, RATE, SampleFormat::F32)
        .expect("encoder")
        .with_packet_frames(packet)
        .expect("packet size")
}

fn encode(enc: &mut FrameEncoder, cols: &[Vec<f32>]) -> Vec<u8> {
    let mut out = Vec::new();
    enc.encode(&views(cols), &mut out).expect("encode");
    out
}

fn decode(bytes: &[u8], channels: usize, chunk: usize) -> (Collected, FrameDecoder) {
    let mut d = FrameDecoder::new(layout(channels, RATE));
    let got = feed(bytes, chunk, 1000.0, |b, t, o| d.push(b, t, o));
    got.assert_consistent();
    (got, d)
}

/// Length of an f32 packet.
fn packet_len(channels: usize, frames: usize) -> usize {
    HEADER_LEN + 4 * channels * frames + 4
}

/// `cols` without frames `from..to`.
fn without(cols: &[Vec<f32>], from: usize, to: usize) -> Vec<Vec<f32>> {
    let mut want = slice(cols, 0, from);
    for (w, rest) in want.iter_mut().zip(slice(cols, to, cols[0].len())) {
        w.extend(rest);
    }
    want
}

#[test]
fn crc32_matches_the_catalogue_check_value() {
    // Check value of CRC-32/ISO-HDLC over "123456789": 0xCBF43926 (Greg Cook, "Catalogue of
    // parametrised CRC algorithms", CRC-32/ISO-HDLC, the CRC of zlib and Ethernet).
    assert_eq!(crc32fast::hash(b"123456789"), 0xCBF4_3926);
}

#[test]
fn a_packet_is_laid_out_as_documented() {
    let mut enc = FrameEncoder::new(2, 1000.0, SampleFormat::F32)
        .expect("encoder")
        .with_start(7, 0x0102_0304_0506_0708);
    let bytes = encode(&mut enc, &[vec![1.5, -2.0], vec![0.25, 8.0]]);
    // Built by hand from the table in frames.rs and docs/serial-format.md.
    let mut want = vec![0xA7, 0x76, 0x65, 0x72, 1, 1, 2, 0, 2, 0, 0, 0, 7, 0, 0, 0];
    want.extend_from_slice(&[8, 7, 6, 5, 4, 3, 2, 1]);
    want.extend_from_slice(&1000.0f64.to_le_bytes());
    for v in [1.5f32, 0.25, -2.0, 8.0] {
        want.extend_from_slice(&v.to_le_bytes());
    }
    let crc = crc32fast::hash(&want[4..]);
    want.extend_from_slice(&crc.to_le_bytes());
    assert_eq!(bytes, want);
}

#[test]
fn round_trip_in_any_chunk_size() {
    let cols = signal(3, 20_000, 21);
    let bytes = encode(&mut encoder(3, 256), &cols);
    for chunk in [1, 7, 4096, bytes.len()] {
        let (got, d) = decode(&bytes, 3, chunk);
        assert_eq!(got.joined(), cols, "chunk {chunk}");
        assert!(got.gaps.is_empty());
        assert_eq!(got.blocks[0].first_frame, 0);
        assert_eq!(d.stats().corrupt, 0);
        assert_eq!(d.stats().skipped_bytes, 0);
        assert!(got
            .blocks
            .iter()
            .all(|b| b.channels[0].len() <= MAX_BLOCK_FRAMES));
        if chunk == bytes.len() {
            // One push: blocks are filled to the limit.
            assert_eq!(got.blocks[0].channels[0].len(), MAX_BLOCK_FRAMES);
        }
    }
}

#[test]
fn i16_samples_come_back_scaled() {
    let cols = signal(2, 3000, 22);
    // Channel 0 spans ±0.01, channel 1 ±1; one count is 1/30000 of that, and some samples of
    // channel 1 are pushed past full scale to be clipped.
    let scales = vec![0.01 / 30_000.0, 1.0 / 30_000.0];
    let mut loud = cols.clone();
    loud[1][5] = 2.0;
    let mut enc = FrameEncoder::new(
        2,
        RATE,
        SampleFormat::I16 {
            scales: scales.clone(),
        },
    )
    .expect("encoder")
    .with_packet_frames(100)
    .expect("size");
    let bytes = encode(&mut enc, &loud);
    assert_eq!(enc.clipped(), 1);
    assert_eq!(bytes.len(), 30 * (HEADER_LEN + 8 + 2 * 2 * 100 + 4));
    let (got, _) = decode(&bytes, 2, 7);
    let back = got.joined();
    for (c, (b, a)) in back.iter().zip(&loud).enumerate() {
        for (i, (x, y)) in b.iter().zip(a).enumerate() {
            let want = (y / scales[c]).round().clamp(-32768.0, 32767.0) * scales[c];
            assert_eq!(*x, want, "channel {c} frame {i}");
            if !(c == 1 && i == 5) {
                // Half a count, plus f32 rounding of the product.
                assert!(
                    (x - y).abs() <= 0.5 * scales[c] + 1e-6 * y.abs(),
                    "{c} {i}: {x} {y}"
                );
            }
        }
    }
}

#[test]
fn a_damaged_byte_drops_one_packet_and_leaves_a_gap_of_its_frames() {
    let cols = signal(2, 1000, 23);
    let mut bytes = encode(&mut encoder(2, 50), &cols);
    let len = packet_len(2, 50);
    // Damage one sample byte of packet 7 (frames 350..400).
    bytes[7 * len + HEADER_LEN + 13] ^= 0x40;
    for chunk in [1, 7, 4096] {
        let (got, d) = decode(&bytes, 2, chunk);
        assert_eq!(got.gaps.len(), 1);
        let g = &got.gaps[0];
        assert_eq!((g.first_frame, g.frames, g.corrupt), (350, 50, 1));
        assert_eq!(g.reason, "checksum mismatch");
        assert_eq!(d.stats().corrupt, 1);
        assert_eq!(got.joined(), without(&cols, 350, 400));
    }
    // Damage to a header field (the frame count) costs that packet only, too.
    let mut bytes = encode(&mut encoder(2, 50), &cols);
    bytes[3 * len + 8] = 0x10;
    let (got, _) = decode(&bytes, 2, 7);
    assert_eq!(got.gaps.len(), 1);
    assert_eq!((got.gaps[0].first_frame, got.gaps[0].frames), (150, 50));
    assert_eq!(got.joined(), without(&cols, 150, 200));
}

#[test]
fn a_deleted_packet_is_a_gap_of_its_frames() {
    let cols = signal(3, 2000, 24);
    let bytes = encode(&mut encoder(3, 64), &cols);
    let len = packet_len(3, 64);
    let mut cut = bytes[..10 * len].to_vec();
    cut.extend_from_slice(&bytes[12 * len..]);
    let (got, d) = decode(&cut, 3, 4096);
    assert_eq!(got.gaps.len(), 1);
    let g = &got.gaps[0];
    assert_eq!((g.first_frame, g.frames, g.corrupt), (640, 128, 0));
    assert_eq!(g.reason, "sequence jump");
    let t0 = got.blocks[0].start_unix_s;
    assert!((g.start_unix_s - (t0 + 640.0 / RATE)).abs() < 1e-9);
    assert!((g.end_unix_s - (t0 + 768.0 / RATE)).abs() < 1e-9);
    assert_eq!(d.stats().corrupt, 0);
    assert_eq!(got.joined(), without(&cols, 640, 768));
}

#[test]
fn garbage_before_the_first_sync_is_skipped() {
    let cols = signal(2, 500, 25);
    let mut rng = Lcg(26);
    let mut bytes: Vec<u8> = (0..5000).map(|_| rng.below(256) as u8).collect();
    // Sync words followed by nonsense, and a header that is cut short by the real stream.
    for _ in 0..20 {
        let at = rng.below(bytes.len());
        bytes.splice(at..at, SYNC);
    }
    bytes.extend_from_slice(&SYNC);
    bytes.extend_from_slice(&[1, 1, 2, 0, 10]);
    let garbage = bytes.len();
    bytes.extend(encode(&mut encoder(2, 50).with_start(9, 12_345), &cols));
    let (got, d) = decode(&bytes, 2, 7);
    assert_eq!(got.joined(), cols);
    assert_eq!(got.blocks[0].first_frame, 12_345);
    assert!(got.gaps.is_empty());
    assert_eq!(d.stats().corrupt, 0, "nothing is corrupt before sync");
    assert_eq!(d.stats().skipped_bytes, garbage as u64);
}

#[test]
fn a_reader_joining_mid_stream_starts_at_the_next_sync_word() {
    let cols = signal(2, 1000, 27);
    let bytes = encode(&mut encoder(2, 100), &cols);
    let len = packet_len(2, 100);
    let (got, d) = decode(&bytes[4 * len + 17..], 2, 7);
    assert_eq!(got.blocks[0].first_frame, 500);
    assert_eq!(got.joined(), slice(&cols, 500, 1000));
    assert!(got.gaps.is_empty());
    assert_eq!(d.stats().corrupt, 0);
}

#[test]
fn the_packet_sequence_wraps_at_2_pow_32() {
    let cols = signal(2, 600, 28);
    let mut enc = encoder(2, 100).with_start(u32::MAX - 2, 1 << 33);
    let bytes = encode(&mut enc, &cols);
    let (got, d) = decode(&bytes, 2, 7);
    assert!(got.gaps.is_empty());
    assert_eq!(got.blocks[0].first_frame, 1 << 33);
    assert_eq!(got.joined(), cols);
    assert_eq!(d.last_seq(), Some(2), "six packets from 2^32 - 3 end at 2");
}

#[test]
fn a_repeated_packet_is_ignored_and_a_restart_is_a_gap() {
    let cols = signal(2, 300, 29);
    let bytes = encode(&mut encoder(2, 100), &cols);
    let len = packet_len(2, 100);
    let mut twice = bytes[..2 * len].to_vec();
    twice.extend_from_slice(&bytes[len..]);
    let (got, d) = decode(&twice, 2, 7);
    assert_eq!(d.stats().duplicates, 1);
    assert_eq!(got.joined(), cols);
    assert!(got.gaps.is_empty());

    let mut restarted = bytes.clone();
    restarted.extend(encode(&mut encoder(2, 100), &cols));
    let (got, d) = decode(&restarted, 2, 7);
    assert_eq!(d.stats().restarts, 1);
    assert_eq!(got.gaps.len(), 1);
    assert_eq!((got.gaps[0].first_frame, got.gaps[0].frames), (300, 0));
    assert_eq!(got.frames(), 600);
}

#[test]
fn packets_of_another_layout_are_not_decoded() {
    let cols = signal(3, 300, 30);
    let bytes = encode(&mut encoder(3, 100), &cols);
    let (got, d) = decode(&bytes, 2, 7);
    assert!(got.blocks.is_empty());
    assert_eq!(d.stats().mismatched_headers, 3);
    assert_eq!(d.stats().corrupt, 0);
}

#[test]
fn never_panics_on_noise() {
    let mut rng = Lcg(31);
    let good = encode(&mut encoder(2, 20), &signal(2, 400, 32));
    for round in 0..300 {
        let mut bytes = good.clone();
        for _ in 0..rng.below(30) {
            let i = rng.below(bytes.len());
            match rng.below(4) {
                0 => bytes[i] = rng.below(256) as u8,
                1 => bytes.insert(i, rng.below(256) as u8),
                2 => bytes.splice(i..i, SYNC).for_each(drop),
                _ => {
                    bytes.remove(i);
                }
            }
        }
        let mut d = FrameDecoder::new(layout(2, RATE));
        let got = feed(&bytes, 1 + round % 61, 0.0, |b, t, o| d.push(b, t, o));
        got.assert_consistent();
        assert!(got.frames() <= 400);
    }
}

#[test]
fn the_encoder_refuses_what_the_format_cannot_carry() {
    assert!(FrameEncoder::new(0, RATE, SampleFormat::F32).is_err());
    assert!(FrameEncoder::new(257, RATE, SampleFormat::F32).is_err());
    assert!(FrameEncoder::new(1, -1.0, SampleFormat::F32).is_err());
    let bad = SampleFormat::I16 { scales: vec![0.0] };
    assert!(FrameEncoder::new(1, RATE, bad).is_err());
    let short = SampleFormat::I16 { scales: vec![1.0] };
    assert!(FrameEncoder::new(2, RATE, short).is_err());
    assert!(encoder(1, 1).with_packet_frames(4097).is_err());
    assert!(encoder(1, 1).with_packet_frames(0).is_err());
}

#[test]
fn the_documented_example_decodes() {
    // The hex dump of docs/serial-format.md.
    let doc = "A7 76 65 72 01 01 02 00 02 00 00 00 07 00 00 00 \
               E8 03 00 00 00 00 00 00 00 00 00 00 00 00 D9 40 \
               00 00 C0 3F 00 00 80 3E 00 00 00 C0 00 00 00 41 \
               D2 A6 8E 6E";
    let bytes: Vec<u8> = doc
        .split_whitespace()
        .map(|h| u8::from_str_radix(h, 16).expect("hex"))
        .collect();
    let (got, d) = decode(&bytes, 2, 3);
    assert_eq!(d.stats().corrupt, 0);
    assert_eq!(d.last_seq(), Some(7));
    assert_eq!(got.blocks[0].first_frame, 1000);
    assert_eq!(got.joined(), vec![vec![1.5, -2.0], vec![0.25, 8.0]]);
    let mut enc = FrameEncoder::new(2, RATE, SampleFormat::F32)
        .expect("encoder")
        .with_start(7, 1000);
    assert_eq!(encode(&mut enc, &[vec![1.5, -2.0], vec![0.25, 8.0]]), bytes);
}

#[test]
fn indices_at_the_end_of_the_u64_range_do_not_panic() {
    let cols = signal(2, 40, 33);
    let mut bytes = encode(&mut encoder(2, 10), &cols);
    // A jump to just below 2^64: of the packets from 2^64 - 16, the one that would run past the
    // end is refused as implausible. Then one ending exactly at 2^64 - 1 (behind the last one
    // taken: a restart), and the count starting again at 0 (another).
    bytes.extend(encode(
        &mut encoder(2, 10).with_start(0, u64::MAX - 15),
        &slice(&cols, 0, 20),
    ));
    bytes.extend(encode(
        &mut encoder(2, 10).with_start(0, u64::MAX - 10),
        &slice(&cols, 0, 10),
    ));
    bytes.extend(encode(&mut encoder(2, 10), &cols));
    let mut d = FrameDecoder::new(layout(2, RATE));
    let got = feed(&bytes, 7, 0.0, |b, t, o| d.push(b, t, o));
    assert_eq!(got.frames(), 40 + 10 + 10 + 40);
    assert_eq!(d.stats().restarts, 2);
    got.assert_consistent();
}
