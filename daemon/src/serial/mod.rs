#![allow(dead_code)]
//! Samples from a data logger on a serial line, in veer's own two line formats.
//!
//! A logger sends either `text` (ASCII lines with a sequence number and a checksum each, for low
//! rates and for reading by eye) or `frames` (binary little-endian packets behind a sync word,
//! for high rates). docs/serial-format.md gives the byte layouts. Both carry a frame index, so a
//! reader can tell exactly how many frames a damaged line, a dropped packet or a pulled cable cost,
//! and both can be joined mid-stream: text at the next header line, frames at the next sync word.
//!
//! The decoders ([`TextDecoder`], [`FrameDecoder`]) and encoders ([`text::TextEncoder`],
//! [`frames::FrameEncoder`]) are pure: bytes in, [`StreamEvent`]s out, no I/O and no clock of their own, so
//! they are tested byte by byte. [`run_serial`] is the only part that touches a port: it reads on
//! a thread of its own (the port API blocks), feeds one decoder whose state survives reconnects,
//! and sends the events on a bounded channel so that a slow engine holds the reader back instead
//! of letting memory grow.

mod blocks;
mod crc16;
pub(crate) mod frames;
mod source;
pub(crate) mod text;

#[cfg(test)]
mod tests;

pub(crate) use source::run_serial;

use frames::FrameDecoder;
use text::TextDecoder;

use crate::config::model::SerialFormat;
use crate::ingest::types::StreamEvent;

/// Most frames in one [`crate::ingest::types::SampleBlock`]: enough to keep the per-block cost
/// small at high rates, few enough that a block is a fraction of a second at 25.6 kHz.
pub(crate) const MAX_BLOCK_FRAMES: usize = 4096;

/// What the configuration says the logger sends; headers that disagree are not decoded, since
/// samples in the wrong channel order would be analysed as the wrong sensor.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct StreamLayout {
    /// Samples per second per channel, Hz.
    pub sample_rate: f64,
    /// Channel names in the logger's order.
    pub channels: Vec<String>,
}

impl StreamLayout {
    /// Whether a rate announced by the logger is the configured one (to a part in 10^9, so that
    /// a rate printed in decimal and read back still matches).
    pub(crate) fn rate_matches(&self, rate: f64) -> bool {
        (rate - self.sample_rate).abs() <= 1e-9 * self.sample_rate.abs()
    }
}

/// Counters of what a decoder saw, for the log and the status display. Gaps report the frames
/// lost; these say why and how often.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub(crate) struct DecodeStats {
    /// Frames delivered in blocks.
    pub frames: u64,
    /// Lines or packets that failed their checksum or did not parse, after the stream was synced.
    pub corrupt: u64,
    /// Bytes skipped while looking for the next header line or sync word.
    pub skipped_bytes: u64,
    /// Headers (text header lines, or packets with a good CRC) whose rate or channels differ from
    /// the configuration.
    pub mismatched_headers: u64,
    /// What the last mismatched header said, for the log.
    pub last_mismatch: Option<String>,
    /// Times the frame index went backwards (the logger restarted its count).
    pub restarts: u64,
    /// Lines or packets received twice (same index), ignored.
    pub duplicates: u64,
    /// Times the stream clock was re-anchored because it had drifted from the arrival times.
    pub clock_resets: u64,
}

/// One decoder of either format, as the serial source holds it.
#[derive(Debug)]
pub(crate) enum Decoder {
    /// `text` lines.
    Text(TextDecoder),
    /// Binary `frames` packets.
    Frames(FrameDecoder),
}

impl Decoder {
    /// A decoder of `format` expecting `layout`.
    pub(crate) fn new(format: SerialFormat, layout: StreamLayout) -> Decoder {
        match format {
            SerialFormat::Text => Decoder::Text(TextDecoder::new(layout)),
            SerialFormat::Frames => Decoder::Frames(FrameDecoder::new(layout)),
        }
    }

    /// Decodes bytes that arrived at `now_unix_s`; see [`TextDecoder::push`].
    pub(crate) fn push(&mut self, bytes: &[u8], now_unix_s: f64, out: &mut Vec<StreamEvent>) {
        match self {
            Decoder::Text(d) => d.push(bytes, now_unix_s, out),
            Decoder::Frames(d) => d.push(bytes, now_unix_s, out),
        }
    }

    /// Tells the decoder that the port went away: a partly received line or packet cannot be
    /// completed by bytes from a later connection, and the gap found when data resumes is put
    /// down to `error`.
    pub(crate) fn note_disconnect(&mut self, error: &str) {
        match self {
            Decoder::Text(d) => d.note_disconnect(error),
            Decoder::Frames(d) => d.note_disconnect(error),
        }
    }

    /// The counters so far.
    pub(crate) fn stats(&self) -> &DecodeStats {
        match self {
            Decoder::Text(d) => d.stats(),
            Decoder::Frames(d) => d.stats(),
        }
    }
}

/// Why an encoder refused its settings or its input.
#[derive(Debug, thiserror::Error, PartialEq)]
#[non_exhaustive]
pub(crate) enum EncodeError {
    /// No channels, or more than the format carries.
    #[error("{count} channels: the serial formats carry 1 to {max}")]
    ChannelCount {
        /// Channels asked for.
        count: usize,
        /// Most the format carries.
        max: usize,
    },
    /// A rate that is not a positive finite number.
    #[error("sample rate {rate} Hz is not a positive number")]
    Rate {
        /// The rate.
        rate: f64,
    },
    /// A channel name the text header cannot carry.
    #[error("channel name `{name}`: use letters, digits, `_`, `-` or `.`")]
    ChannelName {
        /// The name.
        name: String,
    },
    /// An i16 scale that is zero, negative or not finite.
    #[error("channel {channel}: scale {scale} is not a positive number")]
    Scale {
        /// 0-based channel.
        channel: usize,
        /// The scale.
        scale: f32,
    },
    /// Frames per packet outside 1..=4096.
    #[error("{frames} frames per packet: use 1 to {max}")]
    PacketFrames {
        /// Frames asked for.
        frames: usize,
        /// Most allowed.
        max: usize,
    },
    /// Columns of different lengths, or not one per channel.
    #[error("expected {expected} columns of equal length, got {got} columns")]
    Columns {
        /// Channels of the encoder.
        expected: usize,
        /// Columns given.
        got: usize,
    },
}

/// Characters allowed in a channel name on the wire: no separators of the text format.
pub(crate) fn valid_channel_name(name: &str) -> bool {
    !name.is_empty()
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'_' | b'-' | b'.'))
}

/// Checks that `cols` has one column per channel, all of one length; returns that length.
pub(crate) fn check_columns(cols: &[&[f32]], channels: usize) -> Result<usize, EncodeError> {
    let n = cols.first().map_or(0, |c| c.len());
    if cols.len() != channels || cols.iter().any(|c| c.len() != n) {
        return Err(EncodeError::Columns {
            expected: channels,
            got: cols.len(),
        });
    }
    Ok(n)
}
