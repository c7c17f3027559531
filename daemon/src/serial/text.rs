//! The `text` serial format: one checksummed ASCII line per frame, behind a header line.
//!
//! ```text
//! #veer v1 rate=2560 channels=tach,x,y*E2EA
//! 1234,0.52,12.7,-3.1*4696
//! ```
//!
//! Every line ends in `*` and four hex digits: the CRC-16 ([`super::crc16`]) of the bytes before
//! the `*`. Data lines start with a sequence number (decimal `u32`, wrapping) and carry one value
//! per channel. The header is repeated so that a reader joining mid-stream can check the channels
//! and start; data lines before the first matching header are skipped.

use super::blocks::Assembler;
use super::crc16::crc16;
use super::{check_columns, valid_channel_name, DecodeStats, EncodeError, StreamLayout};
use crate::ingest::types::StreamEvent;

/// Longest line kept, bytes: a line without an end in this many bytes is noise, and dropping it
/// keeps memory bounded whatever arrives.
const MAX_LINE: usize = 64 * 1024;

/// Most channels a text line carries.
pub(crate) const MAX_TEXT_CHANNELS: usize = 256;

/// The protocol version this reader speaks.
const VERSION: &str = "v1";

/// Decodes the `text` format.
#[derive(Debug)]
pub(crate) struct TextDecoder {
    /// What the configuration expects.
    layout: StreamLayout,
    /// The incomplete line carried over from the last push.
    line: Vec<u8>,
    /// The current line passed [`MAX_LINE`]: ignore it up to its end.
    overlong: bool,
    /// A header matching the layout has been seen.
    synced: bool,
    /// Sequence number of the last good data line.
    last_seq: Option<u32>,
    /// Its unwrapped index.
    index: u64,
    /// Values of the line being parsed (kept to avoid allocating per line).
    values: Vec<f32>,
    /// Blocks, gaps and the clock.
    asm: Assembler,
}

impl TextDecoder {
    /// A decoder expecting `layout`.
    pub(crate) fn new(layout: StreamLayout) -> TextDecoder {
        TextDecoder {
            asm: Assembler::new(&layout),
            values: Vec::with_capacity(layout.channels.len()),
            layout,
            line: Vec::new(),
            overlong: false,
            synced: false,
            last_seq: None,
            index: 0,
        }
    }

    /// Decodes `bytes` that arrived at `now_unix_s` (Unix seconds), appending blocks and gaps to
    /// `out`. Whatever frames arrived are sent before returning, so latency stays at one read;
    /// an incomplete last line waits for the next push. Any bytes are accepted.
    pub(crate) fn push(&mut self, bytes: &[u8], now_unix_s: f64, out: &mut Vec<StreamEvent>) {
        let mut rest = bytes;
        while let Some(end) = rest.iter().position(|&b| b == b'\n') {
            let (head, tail) = rest.split_at(end);
            rest = tail.get(1..).unwrap_or_default();
            if self.line.is_empty() && !self.overlong {
                self.line_done(head, now_unix_s, out);
            } else {
                self.append(head);
                let line = std::mem::take(&mut self.line);
                if self.overlong {
                    self.overlong = false;
                    self.dropped_line(line.len());
                } else {
                    self.line_done(&line, now_unix_s, out);
                }
                self.line = line;
                self.line.clear();
            }
        }
        self.append(rest);
        self.asm.flush(out);
    }

    /// Forgets the incomplete line: the port closed, and what follows belongs to a later line.
    pub(crate) fn note_disconnect(&mut self, error: &str) {
        if !self.line.is_empty() || self.overlong {
            self.asm.stats.skipped_bytes += self.line.len() as u64;
        }
        self.line.clear();
        self.overlong = false;
        self.asm.note_cause(format!("port closed: {error}"));
    }

    /// The counters so far.
    pub(crate) fn stats(&self) -> &DecodeStats {
        &self.asm.stats
    }

    /// Adds bytes to the incomplete line, giving up on a line that grows too long.
    fn append(&mut self, bytes: &[u8]) {
        if self.overlong {
            self.asm.stats.skipped_bytes += bytes.len() as u64;
        } else if self.line.len() + bytes.len() > MAX_LINE {
            self.asm.stats.skipped_bytes += (self.line.len() + bytes.len()) as u64;
            self.line.clear();
            self.overlong = true;
        } else {
            self.line.extend_from_slice(bytes);
        }
    }

    /// Counts a line that cannot be used: damaged once synced, skipped before.
    fn dropped_line(&mut self, len: usize) {
        if self.synced {
            self.asm.note_corrupt();
        } else {
            self.asm.stats.skipped_bytes += len as u64 + 1;
        }
    }

    /// Handles one complete line (without its `\n`).
    fn line_done(&mut self, line: &[u8], now: f64, out: &mut Vec<StreamEvent>) {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        if line.is_empty() {
            return;
        }
        let Some(body) = checked_body(line) else {
            self.dropped_line(line.len());
            return;
        };
        if body.first() == Some(&b'#') {
            self.header(body);
            return;
        }
        if !self.synced {
            self.asm.stats.skipped_bytes += line.len() as u64 + 1;
            return;
        }
        match self.parse_values(body) {
            Some(seq) => self.take_frame(seq, now, out),
            None => self.asm.note_corrupt(),
        }
    }

    /// Parses a header line's body; syncs when it matches the layout.
    fn header(&mut self, body: &[u8]) {
        let Ok(text) = std::str::from_utf8(body) else {
            self.dropped_line(body.len());
            return;
        };
        match parse_header(text) {
            Some((rate, channels)) => {
                let names_match = channels.len() == self.layout.channels.len()
                    && channels
                        .iter()
                        .zip(&self.layout.channels)
                        .all(|(a, b)| a == b);
                if names_match && self.layout.rate_matches(rate) {
                    self.synced = true;
                } else {
                    self.synced = false;
                    self.asm.stats.mismatched_headers += 1;
                    self.asm.stats.last_mismatch = Some(format!(
                        "logger sends rate={rate} channels={}; configured rate={} channels={}",
                        channels.join(","),
                        self.layout.sample_rate,
                        self.layout.channels.join(",")
                    ));
                }
            }
            // A checksummed line starting with `#` that is not a v1 header: a later version or
            // a comment; not ours to read.
            None => self.dropped_line(body.len()),
        }
    }
}

impl TextDecoder {
    /// Parses `seq,v1,...,vn` into `self.values`; the sequence number, or `None` when malformed.
    fn parse_values(&mut self, body: &[u8]) -> Option<u32> {
        self.values.clear();
        let text = std::str::from_utf8(body).ok()?;
        let mut fields = text.split(',');
        let seq = fields.next()?.parse::<u32>().ok()?;
        let want = self.layout.channels.len();
        for field in fields {
            if self.values.len() == want {
                return None;
            }
            self.values.push(field.parse::<f32>().ok()?);
        }
        (self.values.len() == want).then_some(seq)
    }

    /// Places a good data line in the stream by its sequence number.
    fn take_frame(&mut self, seq: u32, now: f64, out: &mut Vec<StreamEvent>) {
        match self.last_seq {
            None => self.index = u64::from(seq),
            Some(last) => {
                let step = seq.wrapping_sub(last);
                if step < 1 << 31 {
                    // Forward (also across the wrap from 2^32 - 1 to 0).
                    self.index = self.index.wrapping_add(u64::from(step));
                } else {
                    // Backward: the logger started counting again; the assembler sees the
                    // lower index and reports the restart.
                    self.index = u64::from(seq);
                }
            }
        }
        self.last_seq = Some(seq);
        let values = &self.values;
        self.asm
            .push_frames(self.index, 1, now, out, |_, c| values[c]);
    }
}

/// The part of `line` before `*XXXX` when the checksum matches.
fn checked_body(line: &[u8]) -> Option<&[u8]> {
    let star = line.len().checked_sub(5)?;
    let (body, tail) = line.split_at(star);
    if tail.first() != Some(&b'*') {
        return None;
    }
    let hex = std::str::from_utf8(tail.get(1..)?).ok()?;
    if !hex.bytes().all(|b| b.is_ascii_hexdigit()) {
        return None;
    }
    let sum = u16::from_str_radix(hex, 16).ok()?;
    (crc16(body) == sum).then_some(body)
}

/// Parses a header body, `#veer v1 rate=R channels=a,b,c`, into rate and channel names. Keys it
/// does not know are ignored, so that later writers can add some.
fn parse_header(text: &str) -> Option<(f64, Vec<&str>)> {
    let mut words = text.split(' ').filter(|w| !w.is_empty());
    if words.next()? != "#veer" || words.next()? != VERSION {
        return None;
    }
    let (mut rate, mut channels) = (None, None);
    for word in words {
        match word.split_once('=') {
            Some(("rate", v)) => rate = v.parse::<f64>().ok().filter(|r| *r > 0.0 && r.is_finite()),
            Some(("channels", v)) => channels = Some(v.split(',').collect::<Vec<_>>()),
            _ => {}
        }
    }
    Some((rate?, channels?))
}

/// Writes the `text` format: what a logger sends, for tests and `veer simulate --serial text`.
#[derive(Debug)]
pub(crate) struct TextEncoder {
    /// The header line, with its checksum and `\n`.
    header: Vec<u8>,
    /// Channels per line.
    channels: usize,
    /// Sequence number of the next line.
    seq: u32,
    /// Lines between headers.
    header_every: u64,
    /// Lines since the last header, `None` before the first.
    since_header: Option<u64>,
    /// Line being built.
    line: Vec<u8>,
}

impl TextEncoder {
    /// An encoder for `channels` at `sample_rate`, repeating the header once per second of
    /// data and starting at sequence number 0.
    pub(crate) fn new(channels: &[&str], sample_rate: f64) -> Result<TextEncoder, EncodeError> {
        if channels.is_empty() || channels.len() > MAX_TEXT_CHANNELS {
            return Err(EncodeError::ChannelCount {
                count: channels.len(),
                max: MAX_TEXT_CHANNELS,
            });
        }
        if !(sample_rate > 0.0 && sample_rate.is_finite()) {
            return Err(EncodeError::Rate { rate: sample_rate });
        }
        if let Some(bad) = channels.iter().find(|c| !valid_channel_name(c)) {
            return Err(EncodeError::ChannelName {
                name: (*bad).to_string(),
            });
        }
        let mut header = format!(
            "#veer {VERSION} rate={sample_rate} channels={}",
            channels.join(",")
        )
        .into_bytes();
        seal(&mut header);
        Ok(TextEncoder {
            header,
            channels: channels.len(),
            seq: 0,
            header_every: (sample_rate.ceil() as u64).max(1),
            since_header: None,
            line: Vec::with_capacity(32 * channels.len()),
        })
    }

    /// Repeats the header every `lines` lines (at least 1).
    pub(crate) fn with_header_every(mut self, lines: u64) -> TextEncoder {
        self.header_every = lines.max(1);
        self
    }

    /// Starts at sequence number `seq` (a logger that has been running a while).
    pub(crate) fn with_first_seq(mut self, seq: u32) -> TextEncoder {
        self.seq = seq;
        self
    }

    /// The header line, with checksum and line end.
    pub(crate) fn header(&self) -> &[u8] {
        &self.header
    }

    /// Leaves out `frames` sequence numbers, as a logger whose lines were lost would.
    pub(crate) fn skip(&mut self, frames: u64) {
        self.seq = self.seq.wrapping_add(frames as u32);
    }

    /// Appends the lines of the frames in `cols` (one column per channel) to `out`, with a
    /// header first and then every `header_every` lines.
    pub(crate) fn encode(&mut self, cols: &[&[f32]], out: &mut Vec<u8>) -> Result<(), EncodeError> {
        let n = check_columns(cols, self.channels)?;
        let mut ryu = ryu::Buffer::new();
        for i in 0..n {
            if self.since_header.is_none_or(|k| k >= self.header_every) {
                out.extend_from_slice(&self.header);
                self.since_header = Some(0);
            }
            self.line.clear();
            self.line
                .extend_from_slice(itoa_u32(self.seq, &mut [0u8; 10]));
            for col in cols {
                self.line.push(b',');
                self.line.extend_from_slice(ryu.format(col[i]).as_bytes());
            }
            seal(&mut self.line);
            out.extend_from_slice(&self.line);
            self.seq = self.seq.wrapping_add(1);
            self.since_header = self.since_header.map(|k| k + 1);
        }
        Ok(())
    }
}

/// Appends `*XXXX\n` (the body's CRC-16 in hex) to a line body.
fn seal(body: &mut Vec<u8>) {
    const HEX: &[u8; 16] = b"0123456789ABCDEF";
    let sum = crc16(body);
    body.push(b'*');
    for shift in [12, 8, 4, 0] {
        body.push(HEX[usize::from((sum >> shift) & 0xF)]);
    }
    body.push(b'\n');
}

/// `n` in decimal, written into `buf`.
fn itoa_u32(mut n: u32, buf: &mut [u8; 10]) -> &[u8] {
    let mut i = buf.len();
    loop {
        i -= 1;
        buf[i] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    &buf[i..]
}
