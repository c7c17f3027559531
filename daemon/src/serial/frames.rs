//! The `frames` serial format: binary little-endian packets behind a sync word.
//!
//! ```text
//! offset  size   field
//!      0     4   sync word A7 76 65 72
//!      4     1   version (1)
//!      5     1   sample format: 1 = f32, 2 = i16
//!      6     2   channels C (u16)
//!      8     2   frames in this packet N (u16, 1..=4096)
//!     10     2   reserved, 0
//!     12     4   packet sequence (u32, wraps)
//!     16     8   index of the packet's first frame (u64)
//!     24     8   sample rate, Hz (f64)
//!     32   4*C   i16 only: per-channel scale (f32), value = raw * scale
//!      …  N*C*s  samples, interleaved by frame (s = 4 for f32, 2 for i16)
//!      …     4   CRC-32 of every byte from offset 4 to the end of the samples
//! ```
//!
//! A reader looks for the sync word, checks the header against the configured layout, waits for
//! the whole packet and checks the CRC. A packet that fails is dropped and the search resumes one
//! byte after its sync word, so damage costs that packet and nothing after it. Since a packet
//! holds at most 4096 frames, a damaged length delays the stream by at most that many frames.

use super::blocks::Assembler;
use super::{check_columns, DecodeStats, EncodeError, StreamLayout};
use crate::ingest::types::StreamEvent;

/// The four bytes that start every packet.
pub(crate) const SYNC: [u8; 4] = [0xA7, 0x76, 0x65, 0x72];

/// The format version this reader speaks.
pub(crate) const VERSION: u8 = 1;

/// Bytes of the fixed header, sync word included.
pub(crate) const HEADER_LEN: usize = 32;

/// Most frames in one packet.
pub(crate) const MAX_PACKET_FRAMES: usize = 4096;

/// Most channels in one packet.
pub(crate) const MAX_FRAME_CHANNELS: usize = 256;

/// Code of f32 samples in the header.
const FORMAT_F32: u8 = 1;
/// Code of i16 samples in the header.
const FORMAT_I16: u8 = 2;

/// How samples are stored in a packet.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum SampleFormat {
    /// IEEE 754 single precision: exact, 4 bytes a sample.
    F32,
    /// Signed 16-bit integers times a scale per channel: half the bytes, for loggers whose
    /// converters are 16-bit anyway.
    I16 {
        /// Value of one count, per channel.
        scales: Vec<f32>,
    },
}

/// A packet's fixed header, as read.
#[derive(Clone, Copy, Debug)]
struct Header {
    format: u8,
    channels: usize,
    frames: usize,
    seq: u32,
    first: u64,
    rate: f64,
}

impl Header {
    /// Reads the fixed header at the start of `b` (at least [`HEADER_LEN`] bytes, sync first);
    /// `None` when it cannot be a v1 header.
    fn read(b: &[u8]) -> Option<Header> {
        let h = Header {
            format: *b.get(5)?,
            channels: usize::from(u16::from_le_bytes(b.get(6..8)?.try_into().ok()?)),
            frames: usize::from(u16::from_le_bytes(b.get(8..10)?.try_into().ok()?)),
            seq: u32::from_le_bytes(b.get(12..16)?.try_into().ok()?),
            first: u64::from_le_bytes(b.get(16..24)?.try_into().ok()?),
            rate: f64::from_le_bytes(b.get(24..32)?.try_into().ok()?),
        };
        let plausible = *b.get(4)? == VERSION
            && matches!(h.format, FORMAT_F32 | FORMAT_I16)
            && (1..=MAX_FRAME_CHANNELS).contains(&h.channels)
            && (1..=MAX_PACKET_FRAMES).contains(&h.frames)
            && b.get(10..12)? == [0, 0]
            && h.rate > 0.0
            && h.rate.is_finite()
            && h.first.checked_add(h.frames as u64).is_some();
        plausible.then_some(h)
    }

    /// Bytes per sample.
    fn sample_bytes(&self) -> usize {
        if self.format == FORMAT_I16 {
            2
        } else {
            4
        }
    }

    /// Offset of the samples.
    fn payload_at(&self) -> usize {
        HEADER_LEN
            + if self.format == FORMAT_I16 {
                4 * self.channels
            } else {
                0
            }
    }

    /// Length of the whole packet, CRC included.
    fn packet_len(&self) -> usize {
        self.payload_at() + self.frames * self.channels * self.sample_bytes() + 4
    }
}

/// Decodes the `frames` format.
#[derive(Debug)]
pub(crate) struct FrameDecoder {
    /// What the configuration expects.
    layout: StreamLayout,
    /// Bytes not yet used: an incomplete packet, or a tail that may hold the start of a sync word.
    buf: Vec<u8>,
    /// Sequence number of the last good packet.
    last_seq: Option<u32>,
    /// A good packet has been read.
    synced: bool,
    /// Scales of the packet being decoded (kept to avoid allocating per packet).
    scales: Vec<f32>,
    /// Blocks, gaps and the clock.
    asm: Assembler,
}

impl FrameDecoder {
    /// A decoder expecting `layout`.
    pub(crate) fn new(layout: StreamLayout) -> FrameDecoder {
        FrameDecoder {
            asm: Assembler::new(&layout),
            scales: Vec::with_capacity(layout.channels.len()),
            layout,
            buf: Vec::new(),
            last_seq: None,
            synced: false,
        }
    }

    /// Decodes `bytes` that arrived at `now_unix_s` (Unix seconds), appending blocks and gaps to
    /// `out`. Whatever frames arrived are sent before returning; an incomplete packet waits for
    /// the next push. Any bytes are accepted.
    pub(crate) fn push(&mut self, bytes: &[u8], now_unix_s: f64, out: &mut Vec<StreamEvent>) {
        self.buf.extend_from_slice(bytes);
        let mut pos = 0;
        loop {
            let Some(at) = find_sync(&self.buf[pos..]).map(|i| pos + i) else {
                // Keep a tail that may be the start of a sync word split between reads.
                let keep = (SYNC.len() - 1).min(self.buf.len() - pos);
                self.asm.stats.skipped_bytes += (self.buf.len() - pos - keep) as u64;
                pos = self.buf.len() - keep;
                break;
            };
            self.asm.stats.skipped_bytes += (at - pos) as u64;
            pos = at;
            let Some(fixed) = self.buf.get(at..at + HEADER_LEN) else {
                break;
            };
            let Some(h) = Header::read(fixed) else {
                self.asm.stats.skipped_bytes += 1;
                pos = at + 1;
                continue;
            };
            let len = h.packet_len();
            let Some(packet) = self.buf.get(at..at + len) else {
                break;
            };
            let (body, crc) = packet.split_at(len - 4);
            let sent = u32::from_le_bytes([crc[0], crc[1], crc[2], crc[3]]);
            if crc32fast::hash(&body[SYNC.len()..]) != sent {
                if self.synced {
                    self.asm.note_corrupt();
                }
                self.asm.stats.skipped_bytes += 1;
                pos = at + 1;
                continue;
            }
            pos = at + len;
            self.synced = true;
            let packet = std::mem::take(&mut self.buf);
            self.packet(&h, &packet[at..at + len], now_unix_s, out);
            self.buf = packet;
        }
        self.buf.drain(..pos);
        self.asm.flush(out);
    }

    /// Forgets an incomplete packet: the port closed, and what follows starts elsewhere.
    pub(crate) fn note_disconnect(&mut self, error: &str) {
        self.asm.stats.skipped_bytes += self.buf.len() as u64;
        self.buf.clear();
        self.asm.note_cause(format!("port closed: {error}"));
    }

    /// The counters so far.
    pub(crate) fn stats(&self) -> &DecodeStats {
        &self.asm.stats
    }

    /// Decodes one packet whose CRC is good.
    fn packet(&mut self, h: &Header, packet: &[u8], now: f64, out: &mut Vec<StreamEvent>) {
        if h.channels != self.layout.channels.len() || !self.layout.rate_matches(h.rate) {
            self.asm.stats.mismatched_headers += 1;
            self.asm.stats.last_mismatch = Some(format!(
                "logger sends {} channels at {} Hz; configured {} channels at {} Hz",
                h.channels,
                h.rate,
                self.layout.channels.len(),
                self.layout.sample_rate
            ));
            return;
        }
        self.last_seq = Some(h.seq);
        let payload = &packet[h.payload_at()..packet.len() - 4];
        let nch = h.channels;
        if h.format == FORMAT_I16 {
            self.scales.clear();
            self.scales.extend(
                packet[HEADER_LEN..h.payload_at()]
                    .chunks_exact(4)
                    .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]])),
            );
            let scales = &self.scales;
            self.asm.push_frames(h.first, h.frames, now, out, |f, c| {
                let at = 2 * (f * nch + c);
                f32::from(i16::from_le_bytes([payload[at], payload[at + 1]])) * scales[c]
            });
        } else {
            self.asm.push_frames(h.first, h.frames, now, out, |f, c| {
                let at = 4 * (f * nch + c);
                f32::from_le_bytes([
                    payload[at],
                    payload[at + 1],
                    payload[at + 2],
                    payload[at + 3],
                ])
            });
        }
    }

    /// Sequence number of the last good packet, if any. Gaps are measured by frame index, which
    /// does not wrap; the sequence number is for people reading a capture.
    pub(crate) fn last_seq(&self) -> Option<u32> {
        self.last_seq
    }
}

/// Position of the first sync word in `b`.
fn find_sync(b: &[u8]) -> Option<usize> {
    let mut from = 0;
    while let Some(i) = b.get(from..)?.iter().position(|&x| x == SYNC[0]) {
        let at = from + i;
        match b.get(at..at + SYNC.len()) {
            Some(w) if w == SYNC => return Some(at),
            Some(_) => from = at + 1,
            // A partial sync word at the very end: the caller keeps it for the next read.
            None => return None,
        }
    }
    None
}

/// Writes the `frames` format: what a logger sends, for tests and `veer simulate --serial
/// frames`.
#[derive(Debug)]
pub(crate) struct FrameEncoder {
    /// Samples per second.
    rate: f64,
    /// Channels per frame.
    channels: usize,
    /// Storage of the samples.
    format: SampleFormat,
    /// Frames per packet.
    packet_frames: usize,
    /// Sequence number of the next packet.
    seq: u32,
    /// Index of the next frame.
    next_index: u64,
    /// Samples clipped to the i16 range so far.
    clipped: u64,
}

impl FrameEncoder {
    /// An encoder of `channels` channels at `sample_rate`, packing about 10 ms of frames into a
    /// packet (1 to 4096).
    pub(crate) fn new(
        channels: usize,
        sample_rate: f64,
        format: SampleFormat,
    ) -> Result<FrameEncoder, EncodeError> {
        if channels == 0 || channels > MAX_FRAME_CHANNELS {
            return Err(EncodeError::ChannelCount {
                count: channels,
                max: MAX_FRAME_CHANNELS,
            });
        }
        if !(sample_rate > 0.0 && sample_rate.is_finite()) {
            return Err(EncodeError::Rate { rate: sample_rate });
        }
        if let SampleFormat::I16 { scales } = &format {
            if scales.len() != channels {
                return Err(EncodeError::Columns {
                    expected: channels,
                    got: scales.len(),
                });
            }
            if let Some((channel, &scale)) = scales
                .iter()
                .enumerate()
                .find(|(_, s)| !(**s > 0.0 && s.is_finite()))
            {
                return Err(EncodeError::Scale { channel, scale });
            }
        }
        let packet_frames = ((sample_rate / 100.0).round() as usize).clamp(1, MAX_PACKET_FRAMES);
        Ok(FrameEncoder {
            rate: sample_rate,
            channels,
            format,
            packet_frames,
            seq: 0,
            next_index: 0,
            clipped: 0,
        })
    }

    /// Puts `frames` frames (1 to 4096) into each packet.
    pub(crate) fn with_packet_frames(mut self, frames: usize) -> Result<FrameEncoder, EncodeError> {
        if !(1..=MAX_PACKET_FRAMES).contains(&frames) {
            return Err(EncodeError::PacketFrames {
                frames,
                max: MAX_PACKET_FRAMES,
            });
        }
        self.packet_frames = frames;
        Ok(self)
    }

    /// Starts at packet sequence `seq` and frame index `index` (a logger running a while).
    pub(crate) fn with_start(mut self, seq: u32, index: u64) -> FrameEncoder {
        self.seq = seq;
        self.next_index = index;
        self
    }

    /// Samples clipped to the i16 range so far.
    pub(crate) fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Appends packets holding the frames of `cols` (one column per channel) to `out`; the last
    /// packet may be short.
    pub(crate) fn encode(&mut self, cols: &[&[f32]], out: &mut Vec<u8>) -> Result<(), EncodeError> {
        let n = check_columns(cols, self.channels)?;
        let mut start = 0;
        while start < n {
            let frames = self.packet_frames.min(n - start);
            self.packet(cols, start, frames, out);
            start += frames;
        }
        Ok(())
    }

    /// Appends one packet of `frames` frames from `start`.
    fn packet(&mut self, cols: &[&[f32]], start: usize, frames: usize, out: &mut Vec<u8>) {
        let begin = out.len();
        out.extend_from_slice(&SYNC);
        out.push(VERSION);
        out.push(match self.format {
            SampleFormat::F32 => FORMAT_F32,
            SampleFormat::I16 { .. } => FORMAT_I16,
        });
        // Both fit: checked in `new` and `with_packet_frames`.
        out.extend_from_slice(&(self.channels as u16).to_le_bytes());
        out.extend_from_slice(&(frames as u16).to_le_bytes());
        out.extend_from_slice(&[0, 0]);
        out.extend_from_slice(&self.seq.to_le_bytes());
        out.extend_from_slice(&self.next_index.to_le_bytes());
        out.extend_from_slice(&self.rate.to_le_bytes());
        match &self.format {
            SampleFormat::F32 => {
                for i in start..start + frames {
                    for col in cols {
                        out.extend_from_slice(&col[i].to_le_bytes());
                    }
                }
            }
            SampleFormat::I16 { scales } => {
                for s in scales {
                    out.extend_from_slice(&s.to_le_bytes());
                }
                for i in start..start + frames {
                    for (col, s) in cols.iter().zip(scales) {
                        let counts = (col[i] / s).round();
                        let clamped = counts.clamp(f32::from(i16::MIN), f32::from(i16::MAX));
                        if clamped != counts {
                            self.clipped += 1;
                        }
                        // NaN becomes 0 in the cast, which is as good as any count.
                        out.extend_from_slice(&(clamped as i16).to_le_bytes());
                    }
                }
            }
        }
        let crc = crc32fast::hash(&out[begin + SYNC.len()..]);
        out.extend_from_slice(&crc.to_le_bytes());
        self.seq = self.seq.wrapping_add(1);
        self.next_index = self.next_index.wrapping_add(frames as u64);
    }
}
