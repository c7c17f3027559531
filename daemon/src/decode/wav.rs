//! Streaming reader for WAV recordings (RIFF and RF64), any channel count.
//!
//! Decoded: integer PCM of 8, 16, 24 and 32 bits and IEEE float of 32 and 64 bits, in the plain
//! format tags or in `WAVE_FORMAT_EXTENSIBLE`. Integer samples are scaled by the size of their
//! container to [-1, 1): a 16-bit value `v` becomes `v / 32768`, 24-bit `v / 2^23`, 32-bit
//! `v / 2^31`, and unsigned 8-bit `(v - 128) / 128`. Extensible files with fewer valid bits than
//! their container (20 bits in 24) hold the sample left-justified, so the same scale applies.
//! Floats pass through unchanged (64-bit ones rounded to 32) and must be finite.
//!
//! Reading goes a chunk of whole frames at a time into a 1 MiB buffer, and only the channels
//! asked for are converted.

use std::fs::File;
use std::io::{ErrorKind, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use super::columns::Columns;
use super::error::{io_err, DecodeError};
use super::lines::CHUNK;

/// How samples are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Encoding {
    /// Unsigned 8-bit, offset 128.
    U8,
    /// Signed 16-bit little-endian.
    I16,
    /// Signed 24-bit little-endian, packed in 3 bytes.
    I24,
    /// Signed 32-bit little-endian.
    I32,
    /// IEEE 754 single.
    F32,
    /// IEEE 754 double.
    F64,
}

impl Encoding {
    /// Bytes one sample takes in a frame.
    pub fn bytes(self) -> usize {
        match self {
            Encoding::U8 => 1,
            Encoding::I16 => 2,
            Encoding::I24 => 3,
            Encoding::I32 | Encoding::F32 => 4,
            Encoding::F64 => 8,
        }
    }
}

/// The tail that every `WAVE_FORMAT_EXTENSIBLE` sub-format GUID shares after its format code
/// (the KSDATAFORMAT_SUBTYPE_* family; Microsoft "WAVEFORMATEXTENSIBLE" documentation).
const GUID_TAIL: [u8; 14] = [
    0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
];

/// An open WAV recording being read front to back.
#[derive(Debug)]
pub(crate) struct WavReader {
    path: PathBuf,
    file: File,
    columns: Columns,
    channels: usize,
    rate: f64,
    encoding: Encoding,
    block: usize,
    /// Frames the data chunk header announces.
    frames_declared: u64,
    /// Whole frames present in the file.
    frames_present: u64,
    /// Next frame to read.
    frame: u64,
    buf: Vec<u8>,
}

/// The parts of the `fmt ` chunk that decide decoding.
struct Fmt {
    channels: usize,
    rate: u32,
    encoding: Encoding,
    block: usize,
}

impl WavReader {
    /// Opens `path` and reads its header up to the start of the samples.
    pub fn open(path: &Path, rate_override: Option<f64>) -> Result<WavReader, DecodeError> {
        let mut file = File::open(path).map_err(io_err(path))?;
        let file_len = file.metadata().map_err(io_err(path))?.len();
        let bad = |what: &str| DecodeError::Malformed {
            path: path.to_path_buf(),
            what: format!("not a readable WAV file: {what}"),
        };
        let mut riff = [0u8; 12];
        read_all(&mut file, &mut riff)
            .map_err(io_err(path))?
            .then_some(())
            .ok_or_else(|| bad("shorter than a RIFF header"))?;
        let rf64 = match &riff[0..4] {
            b"RIFF" => false,
            b"RF64" => true,
            _ => return Err(bad("no RIFF header")),
        };
        if &riff[8..12] != b"WAVE" {
            return Err(bad("RIFF file of another kind than WAVE"));
        }
        let mut fmt: Option<Fmt> = None;
        let mut data: Option<(u64, u64)> = None;
        let mut ds64_data: Option<u64> = None;
        loop {
            let mut head = [0u8; 8];
            if !read_all(&mut file, &mut head).map_err(io_err(path))? {
                break;
            }
            let id = [head[0], head[1], head[2], head[3]];
            let size = u64::from(u32::from_le_bytes([head[4], head[5], head[6], head[7]]));
            let at = file.stream_position().map_err(io_err(path))?;
            match &id {
                b"fmt " => {
                    let mut body = vec![0u8; size.min(64) as usize];
                    if !read_all(&mut file, &mut body).map_err(io_err(path))? {
                        return Err(bad("fmt chunk cut short"));
                    }
                    fmt = Some(parse_fmt(path, &body)?);
                }
                b"ds64" if rf64 => {
                    let mut body = [0u8; 24];
                    if !read_all(&mut file, &mut body).map_err(io_err(path))? {
                        return Err(bad("ds64 chunk cut short"));
                    }
                    let mut d = [0u8; 8];
                    d.copy_from_slice(&body[8..16]);
                    ds64_data = Some(u64::from_le_bytes(d));
                }
                b"data" => {
                    let size = match ds64_data {
                        Some(s) if rf64 && size == 0xFFFF_FFFF => s,
                        _ => size,
                    };
                    data = Some((at, size));
                    if fmt.is_some() {
                        break;
                    }
                }
                _ => {}
            }
            // Chunks are padded to an even length (Microsoft/IBM RIFF specification, 1991).
            let next = at.saturating_add(size).saturating_add(size & 1);
            if next >= file_len {
                break;
            }
            file.seek(SeekFrom::Start(next)).map_err(io_err(path))?;
        }
        let fmt = fmt.ok_or_else(|| bad("no fmt chunk"))?;
        let (data_at, data_size) = data.ok_or_else(|| bad("no data chunk"))?;
        file.seek(SeekFrom::Start(data_at)).map_err(io_err(path))?;
        let block = fmt.block as u64;
        let present = data_size.min(file_len.saturating_sub(data_at));
        let rate = rate_override.unwrap_or(f64::from(fmt.rate));
        if !(rate.is_finite() && rate > 0.0) {
            return Err(DecodeError::BadRate {
                path: path.to_path_buf(),
                rate,
            });
        }
        Ok(WavReader {
            path: path.to_path_buf(),
            file,
            columns: Columns::numbered(fmt.channels),
            channels: fmt.channels,
            rate,
            encoding: fmt.encoding,
            block: fmt.block,
            frames_declared: data_size / block,
            frames_present: present / block,
            frame: 0,
            buf: vec![0; CHUNK.max(fmt.block) / fmt.block * fmt.block],
        })
    }

    /// The channels, named "0" to "n-1".
    pub fn columns(&self) -> &Columns {
        &self.columns
    }

    /// Samples per second, from the header unless overridden.
    pub fn sample_rate(&self) -> f64 {
        self.rate
    }

    /// Frames that will be delivered: exact, from the header and the file's size.
    pub fn frames_hint(&self) -> Option<u64> {
        Some(self.frames_present)
    }

    /// How the samples are stored.
    pub fn encoding(&self) -> Encoding {
        self.encoding
    }

    /// Reads up to `max_frames` frames; see `Recording::read_frames`.
    pub fn read_frames(
        &mut self,
        cols: &[usize],
        out: &mut [Vec<f32>],
        max_frames: usize,
    ) -> Result<usize, DecodeError> {
        if out.len() != cols.len() {
            return Err(DecodeError::Usage {
                path: self.path.clone(),
                what: format!("{} output buffers for {} columns", out.len(), cols.len()),
            });
        }
        if let Some(&c) = cols.iter().find(|&&c| c >= self.channels) {
            return Err(DecodeError::Usage {
                path: self.path.clone(),
                what: format!("channel {c} asked for, but the file has {}", self.channels),
            });
        }
        for o in out.iter_mut() {
            o.clear();
        }
        let left = self.frames_present - self.frame;
        let want = left.min(max_frames as u64) as usize;
        if want == 0 && max_frames > 0 && self.frames_present < self.frames_declared {
            return Err(DecodeError::Truncated {
                path: self.path.clone(),
                expected: self.frames_declared,
                found: self.frames_present,
            });
        }
        let per_read = self.buf.len() / self.block;
        let mut done = 0;
        while done < want {
            let n = (want - done).min(per_read);
            let raw = &mut self.buf[..n * self.block];
            self.file.read_exact(raw).map_err(io_err(&self.path))?;
            for (k, &c) in cols.iter().enumerate() {
                let from = out[k].len();
                decode_channel(self.encoding, raw, self.block, c, &mut out[k]);
                if matches!(self.encoding, Encoding::F32 | Encoding::F64) {
                    if let Some(i) = out[k][from..].iter().position(|v| !v.is_finite()) {
                        return Err(DecodeError::NotFinite {
                            path: self.path.clone(),
                            frame: self.frame + i as u64,
                            channel: c.to_string(),
                            value: out[k][from + i],
                        });
                    }
                }
            }
            self.frame += n as u64;
            done += n;
        }
        Ok(done)
    }
}

/// Appends channel `ch` of every frame in `raw` to `out`, converted to f32.
///
/// Each arm is one tight loop over whole frames with a fixed offset, which the compiler turns
/// into straight-line loads and multiplies.
fn decode_channel(enc: Encoding, raw: &[u8], block: usize, ch: usize, out: &mut Vec<f32>) {
    let off = ch * enc.bytes();
    let frames = raw.chunks_exact(block);
    match enc {
        Encoding::U8 => out.extend(frames.map(|f| (f32::from(f[off]) - 128.0) * (1.0 / 128.0))),
        Encoding::I16 => out.extend(frames.map(|f| {
            let s = &f[off..off + 2];
            f32::from(i16::from_le_bytes([s[0], s[1]])) * (1.0 / 32768.0)
        })),
        Encoding::I24 => out.extend(frames.map(|f| {
            let s = &f[off..off + 3];
            // The three bytes go to the top of an i32, so the sign comes along.
            i32::from_le_bytes([0, s[0], s[1], s[2]]) as f32 * (1.0 / 2_147_483_648.0)
        })),
        Encoding::I32 => out.extend(frames.map(|f| {
            let s = &f[off..off + 4];
            i32::from_le_bytes([s[0], s[1], s[2], s[3]]) as f32 * (1.0 / 2_147_483_648.0)
        })),
        Encoding::F32 => out.extend(frames.map(|f| {
            let s = &f[off..off + 4];
            f32::from_le_bytes([s[0], s[1], s[2], s[3]])
        })),
        Encoding::F64 => out.extend(frames.map(|f| {
            let s = &f[off..off + 8];
            f64::from_le_bytes([s[0], s[1], s[2], s[3], s[4], s[5], s[6], s[7]]) as f32
        })),
    }
}

/// Reads the `fmt ` chunk body into what decoding needs.
fn parse_fmt(path: &Path, body: &[u8]) -> Result<Fmt, DecodeError> {
    let bad = |what: String| DecodeError::Malformed {
        path: path.to_path_buf(),
        what,
    };
    if body.len() < 16 {
        return Err(bad(format!("fmt chunk of {} bytes, 16 needed", body.len())));
    }
    let u16_at = |i: usize| u16::from_le_bytes([body[i], body[i + 1]]);
    let mut tag = u16_at(0);
    let channels = usize::from(u16_at(2));
    let rate = u32::from_le_bytes([body[4], body[5], body[6], body[7]]);
    let block = usize::from(u16_at(12));
    let bits = u16_at(14);
    if tag == 0xFFFE {
        if body.len() < 40 {
            return Err(bad(
                "WAVE_FORMAT_EXTENSIBLE fmt chunk shorter than 40 bytes".into(),
            ));
        }
        if body[26..40] != GUID_TAIL {
            return Err(DecodeError::Unsupported {
                path: path.to_path_buf(),
                what: "extensible sub-format that is neither PCM nor IEEE float".into(),
            });
        }
        tag = u16_at(24);
    }
    if channels == 0 {
        return Err(bad("fmt chunk gives 0 channels".into()));
    }
    if block == 0 || block % channels != 0 {
        return Err(bad(format!(
            "block size {block} bytes does not fit {channels} channels"
        )));
    }
    let container = block / channels;
    let encoding = match (tag, container) {
        (1, 1) => Encoding::U8,
        (1, 2) => Encoding::I16,
        (1, 3) => Encoding::I24,
        (1, 4) => Encoding::I32,
        (3, 4) => Encoding::F32,
        (3, 8) => Encoding::F64,
        (1 | 3, _) => {
            return Err(DecodeError::Unsupported {
                path: path.to_path_buf(),
                what: format!(
                    "{} with {}-byte samples",
                    if tag == 1 { "PCM" } else { "float" },
                    container
                ),
            })
        }
        (other, _) => {
            let name = match other {
                2 => " (ADPCM)",
                6 => " (A-law)",
                7 => " (mu-law)",
                0x55 => " (MP3)",
                _ => "",
            };
            return Err(DecodeError::Unsupported {
                path: path.to_path_buf(),
                what: format!("format tag 0x{other:04X}{name}; PCM or IEEE float needed"),
            });
        }
    };
    if usize::from(bits) > container * 8 || bits == 0 {
        return Err(bad(format!(
            "{bits} bits per sample do not fit {container}-byte samples"
        )));
    }
    Ok(Fmt {
        channels,
        rate,
        encoding,
        block,
    })
}

/// Fills `buf` completely; `false` if the file ended first.
fn read_all(file: &mut File, buf: &mut [u8]) -> std::io::Result<bool> {
    match file.read_exact(buf) {
        Ok(()) => Ok(true),
        Err(e) if e.kind() == ErrorKind::UnexpectedEof => Ok(false),
        Err(e) => Err(e),
    }
}
