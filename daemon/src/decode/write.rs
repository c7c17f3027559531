//! Streaming writers for recordings, used to save simulated runs and to test the readers.
//!
//! Both take blocks of samples as one slice per channel and never hold more than one block.
//! What they write, the readers of this module take back: CSV samples exactly (shortest
//! round-trip text), WAV float32 exactly, WAV PCM16 to within half a step of 1/32768 of the
//! full scale.

use std::fs::File;
use std::io::{BufWriter, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use super::error::{io_err, DecodeError};

/// Output buffer of the writers; large writes keep system calls rare.
const OUT_BUF: usize = 1 << 20;

/// Checks that a block has one slice per channel, all of one length; returns that length.
fn block_len(path: &Path, cols: &[&[f32]], channels: usize) -> Result<usize, DecodeError> {
    if cols.len() != channels {
        return Err(DecodeError::Usage {
            path: path.to_path_buf(),
            what: format!("{} columns given for {} channels", cols.len(), channels),
        });
    }
    let n = cols.first().map_or(0, |c| c.len());
    if cols.iter().any(|c| c.len() != n) {
        return Err(DecodeError::Usage {
            path: path.to_path_buf(),
            what: "columns of a block differ in length".into(),
        });
    }
    Ok(n)
}

/// The first sample of a block that is NaN or infinite, as an error.
fn check_finite(
    path: &Path,
    cols: &[&[f32]],
    first_frame: u64,
    name: impl Fn(usize) -> String,
) -> Result<(), DecodeError> {
    for (c, col) in cols.iter().enumerate() {
        if let Some(i) = col.iter().position(|v| !v.is_finite()) {
            return Err(DecodeError::NotFinite {
                path: path.to_path_buf(),
                frame: first_frame + i as u64,
                channel: name(c),
                value: col[i],
            });
        }
    }
    Ok(())
}

/// Writes a CSV recording: a header `time,<names>`, then one row per frame with the time in
/// seconds and each sample as the shortest text that reads back as the same `f32`.
///
/// Times are printed in fixed point to a millionth of the sample step (trailing zeros cut),
/// which keeps them on the reader's fast path and lets it recover the rate exactly.
#[derive(Debug)]
pub struct CsvWriter<W: Write> {
    path: PathBuf,
    out: W,
    names: Vec<String>,
    rate: f64,
    start: f64,
    frame: u64,
    decimals: u32,
    scale: f64,
    line: Vec<u8>,
}

impl CsvWriter<BufWriter<File>> {
    /// Creates (or replaces) the file at `path`.
    pub fn create(
        path: &Path,
        names: &[&str],
        sample_rate: f64,
        start_time_s: f64,
    ) -> Result<Self, DecodeError> {
        let file = File::create(path).map_err(io_err(path))?;
        CsvWriter::new(
            BufWriter::with_capacity(OUT_BUF, file),
            path,
            names,
            sample_rate,
            start_time_s,
        )
    }
}

impl<W: Write> CsvWriter<W> {
    /// Writes the header to `out`; `label` names the destination in error messages.
    pub fn new(
        mut out: W,
        label: &Path,
        names: &[&str],
        sample_rate: f64,
        start_time_s: f64,
    ) -> Result<Self, DecodeError> {
        if !(sample_rate.is_finite() && sample_rate > 0.0) {
            return Err(DecodeError::BadRate {
                path: label.to_path_buf(),
                rate: sample_rate,
            });
        }
        if !start_time_s.is_finite() {
            return Err(DecodeError::Usage {
                path: label.to_path_buf(),
                what: format!("start time {start_time_s} is not finite"),
            });
        }
        let mut header = String::from("time");
        for name in names {
            if name.contains(['\n', '\r']) {
                return Err(DecodeError::Usage {
                    path: label.to_path_buf(),
                    what: format!("column name {name:?} holds a line break"),
                });
            }
            header.push(',');
            if name.contains([',', '"', ';', '\t']) || name.trim() != *name {
                header.push('"');
                header.push_str(&name.replace('"', "\"\""));
                header.push('"');
            } else {
                header.push_str(name);
            }
        }
        header.push('\n');
        out.write_all(header.as_bytes()).map_err(io_err(label))?;
        // A millionth of a step: fine enough that the rate is recovered to about 1e-10.
        let step = 1.0 / sample_rate;
        let decimals = (-(step * 1e-6).log10()).ceil().clamp(0.0, 15.0) as u32;
        Ok(CsvWriter {
            path: label.to_path_buf(),
            out,
            names: names.iter().map(|s| s.to_string()).collect(),
            rate: sample_rate,
            start: start_time_s,
            frame: 0,
            decimals,
            scale: 10f64.powi(decimals as i32),
            line: Vec::with_capacity(OUT_BUF / 8),
        })
    }

    /// Appends a block: `cols[c][i]` is channel `c` at the block's frame `i`.
    pub fn write_frames(&mut self, cols: &[&[f32]]) -> Result<(), DecodeError> {
        let n = block_len(&self.path, cols, self.names.len())?;
        check_finite(&self.path, cols, self.frame, |c| self.names[c].clone())?;
        let mut ryu = ryu::Buffer::new();
        for i in 0..n {
            let t = self.start + (self.frame + i as u64) as f64 / self.rate;
            if !push_fixed(&mut self.line, t, self.decimals, self.scale) {
                self.line.extend_from_slice(ryu.format_finite(t).as_bytes());
            }
            for col in cols {
                self.line.push(b',');
                self.line
                    .extend_from_slice(ryu.format_finite(col[i]).as_bytes());
            }
            self.line.push(b'\n');
            if self.line.len() >= OUT_BUF / 8 - 4096 {
                self.out.write_all(&self.line).map_err(io_err(&self.path))?;
                self.line.clear();
            }
        }
        self.out.write_all(&self.line).map_err(io_err(&self.path))?;
        self.line.clear();
        self.frame += n as u64;
        Ok(())
    }

    /// Frames written so far.
    pub fn frames(&self) -> u64 {
        self.frame
    }

    /// Flushes and hands back the destination.
    pub fn finish(mut self) -> Result<W, DecodeError> {
        self.out.flush().map_err(io_err(&self.path))?;
        Ok(self.out)
    }
}

/// Appends `t` with `decimals` digits after the point, trailing zeros cut (one kept);
/// `false` if it is too large for exact fixed point, and nothing was written.
fn push_fixed(line: &mut Vec<u8>, t: f64, decimals: u32, scale: f64) -> bool {
    let scaled = (t * scale).round();
    // Below 2^53 every integer is exact, so the digits printed are the digits meant.
    if scaled.is_nan() || scaled.abs() >= 9.0e15 {
        return false;
    }
    let v = scaled.abs() as u64;
    let div = 10u64.pow(decimals);
    let (int, mut frac) = (v / div, v % div);
    if scaled < 0.0 {
        line.push(b'-');
    }
    push_u64(line, int);
    if decimals > 0 {
        line.push(b'.');
        let mut digits = decimals;
        while digits > 1 && frac % 10 == 0 {
            frac /= 10;
            digits -= 1;
        }
        let mut tmp = [b'0'; 20];
        for k in (0..digits as usize).rev() {
            tmp[k] = b'0' + (frac % 10) as u8;
            frac /= 10;
        }
        line.extend_from_slice(&tmp[..digits as usize]);
    }
    true
}

/// Appends the decimal digits of `v`.
fn push_u64(line: &mut Vec<u8>, mut v: u64) {
    let mut tmp = [0u8; 20];
    let mut k = tmp.len();
    loop {
        k -= 1;
        tmp[k] = b'0' + (v % 10) as u8;
        v /= 10;
        if v == 0 {
            break;
        }
    }
    line.extend_from_slice(&tmp[k..]);
}

/// How a [`WavWriter`] stores samples.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum WavFormat {
    /// IEEE float, samples stored as they are: exact, in any unit.
    Float32,
    /// 16-bit integers; `full_scale` is the sample value that maps to the integer limit, so a
    /// signal in µm or mm/s can use the 16 bits well. Values beyond it are clipped (counted by
    /// [`WavWriter::clipped`]); the reader gives back `value / full_scale`.
    Pcm16 {
        /// The value stored as 32768 (clipped to 32767).
        full_scale: f32,
    },
}

/// Writes a WAV recording, interleaving one block of channels at a time; the sizes in the
/// header are filled in by [`WavWriter::finish`].
#[derive(Debug)]
pub struct WavWriter<W: Write + Seek> {
    path: PathBuf,
    out: W,
    channels: usize,
    format: WavFormat,
    frame: u64,
    clipped: u64,
    buf: Vec<u8>,
    /// Offset of the `fact` chunk's frame count (float only).
    fact_at: Option<u64>,
    /// Offset of the data chunk's size field.
    data_size_at: u64,
}

impl WavWriter<BufWriter<File>> {
    /// Creates (or replaces) the file at `path`.
    pub fn create(
        path: &Path,
        channels: u16,
        sample_rate: u32,
        format: WavFormat,
    ) -> Result<Self, DecodeError> {
        let file = File::create(path).map_err(io_err(path))?;
        WavWriter::new(
            BufWriter::with_capacity(OUT_BUF, file),
            path,
            channels,
            sample_rate,
            format,
        )
    }
}

impl<W: Write + Seek> WavWriter<W> {
    /// Writes the header to `out`; `label` names the destination in error messages.
    pub fn new(
        mut out: W,
        label: &Path,
        channels: u16,
        sample_rate: u32,
        format: WavFormat,
    ) -> Result<Self, DecodeError> {
        let usage = |what: String| DecodeError::Usage {
            path: label.to_path_buf(),
            what,
        };
        if channels == 0 {
            return Err(usage("a WAV file needs at least one channel".into()));
        }
        if sample_rate == 0 {
            return Err(DecodeError::BadRate {
                path: label.to_path_buf(),
                rate: 0.0,
            });
        }
        if let WavFormat::Pcm16 { full_scale } = format {
            if !(full_scale.is_finite() && full_scale > 0.0) {
                return Err(usage(format!(
                    "full scale {full_scale} must be positive and finite"
                )));
            }
        }
        let (tag, bytes): (u16, u16) = match format {
            WavFormat::Float32 => (3, 4),
            WavFormat::Pcm16 { .. } => (1, 2),
        };
        let block = channels
            .checked_mul(bytes)
            .ok_or_else(|| usage(format!("{channels} channels are too many for WAV")))?;
        let mut h: Vec<u8> = Vec::with_capacity(64);
        h.extend_from_slice(b"RIFF\0\0\0\0WAVE");
        // Plain PCM has the 16-byte fmt chunk; non-PCM tags carry cbSize and a fact chunk
        // (Microsoft "Multimedia Programming Interface and Data Specifications 1.0", 1991).
        let float = tag == 3;
        h.extend_from_slice(b"fmt ");
        h.extend_from_slice(&(if float { 18u32 } else { 16 }).to_le_bytes());
        h.extend_from_slice(&tag.to_le_bytes());
        h.extend_from_slice(&channels.to_le_bytes());
        h.extend_from_slice(&sample_rate.to_le_bytes());
        h.extend_from_slice(&(sample_rate.saturating_mul(u32::from(block))).to_le_bytes());
        h.extend_from_slice(&block.to_le_bytes());
        h.extend_from_slice(&(bytes * 8).to_le_bytes());
        let mut fact_at = None;
        if float {
            h.extend_from_slice(&0u16.to_le_bytes());
            h.extend_from_slice(b"fact");
            h.extend_from_slice(&4u32.to_le_bytes());
            fact_at = Some(h.len() as u64);
            h.extend_from_slice(&0u32.to_le_bytes());
        }
        h.extend_from_slice(b"data");
        let data_size_at = h.len() as u64;
        h.extend_from_slice(&0u32.to_le_bytes());
        out.write_all(&h).map_err(io_err(label))?;
        Ok(WavWriter {
            path: label.to_path_buf(),
            out,
            channels: usize::from(channels),
            format,
            frame: 0,
            clipped: 0,
            buf: Vec::new(),
            fact_at,
            data_size_at,
        })
    }

    /// Appends a block: `cols[c][i]` is channel `c` at the block's frame `i`.
    pub fn write_frames(&mut self, cols: &[&[f32]]) -> Result<(), DecodeError> {
        let n = block_len(&self.path, cols, self.channels)?;
        check_finite(&self.path, cols, self.frame, |c| c.to_string())?;
        let bytes = match self.format {
            WavFormat::Float32 => 4,
            WavFormat::Pcm16 { .. } => 2,
        };
        let total = (self.frame + n as u64) * (self.channels * bytes) as u64;
        if total > u64::from(u32::MAX) - 64 {
            return Err(DecodeError::Usage {
                path: self.path.clone(),
                what: "more than 4 GiB of samples: too large for a WAV file".into(),
            });
        }
        self.buf.clear();
        self.buf.reserve(n * self.channels * bytes);
        match self.format {
            WavFormat::Float32 => {
                for i in 0..n {
                    for col in cols {
                        self.buf.extend_from_slice(&col[i].to_le_bytes());
                    }
                }
            }
            WavFormat::Pcm16 { full_scale } => {
                let k = 32768.0 / full_scale;
                for i in 0..n {
                    for col in cols {
                        let v = (col[i] * k).round();
                        let q = if v > 32767.0 {
                            self.clipped += 1;
                            32767
                        } else if v < -32768.0 {
                            self.clipped += 1;
                            -32768
                        } else {
                            v as i16
                        };
                        self.buf.extend_from_slice(&q.to_le_bytes());
                    }
                }
            }
        }
        self.out.write_all(&self.buf).map_err(io_err(&self.path))?;
        self.frame += n as u64;
        Ok(())
    }

    /// Frames written so far.
    pub fn frames(&self) -> u64 {
        self.frame
    }

    /// Samples that were beyond the PCM16 full scale and got clipped.
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Fills in the header's sizes, flushes, and hands back the destination.
    pub fn finish(mut self) -> Result<W, DecodeError> {
        let bytes = match self.format {
            WavFormat::Float32 => 4,
            WavFormat::Pcm16 { .. } => 2,
        };
        let data = self.frame * (self.channels * bytes) as u64;
        // The write limit keeps these below 4 GiB.
        let data32 = u32::try_from(data).unwrap_or(u32::MAX);
        let riff = u32::try_from(self.data_size_at + 4 - 8 + data).unwrap_or(u32::MAX);
        let frames32 = u32::try_from(self.frame).unwrap_or(u32::MAX);
        let path = self.path.clone();
        let e = io_err(&path);
        let mut patch = |at: u64, v: u32| -> std::io::Result<()> {
            self.out.seek(SeekFrom::Start(at))?;
            self.out.write_all(&v.to_le_bytes())
        };
        patch(4, riff).map_err(io_err(&path))?;
        if let Some(at) = self.fact_at {
            patch(at, frames32).map_err(io_err(&path))?;
        }
        patch(self.data_size_at, data32).map_err(io_err(&path))?;
        self.out.seek(SeekFrom::End(0)).map_err(io_err(&path))?;
        self.out.flush().map_err(e)?;
        Ok(self.out)
    }
}
