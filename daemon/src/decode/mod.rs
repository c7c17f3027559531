//! Reading and writing recordings: CSV and WAV files of a tachometer and vibration channels.
//!
//! A [`Recording`] is an open file read front to back in blocks of frames (one sample of every
//! channel at one instant), with memory bounded by a 1 MiB read buffer whatever the file's
//! length, so an hour of multi-channel data costs no more memory than a second of it. Only the
//! channels asked for are converted. Errors are [`DecodeError`]s whose message is one line
//! naming the file (and for CSV the line and column), ready to print.
//!
//! The writers ([`CsvWriter`], [`WavWriter`]) produce files this reader takes back exactly,
//! for simulated recordings and for tests.

// The command line is wired to these readers in a later step.
#![allow(dead_code)]

mod columns;
mod csv;
mod error;
mod float;
mod lines;
mod row;
mod wav;
mod write;

#[cfg(test)]
mod tests;

use std::fs::File;
use std::io::Read;
use std::path::Path;

// Until the command line uses them, the re-exports count as unused in this binary crate.
#[allow(unused_imports)]
pub use error::{DecodeError, ValueProblem};
#[allow(unused_imports)]
pub use wav::Encoding;
#[allow(unused_imports)]
pub use write::{CsvWriter, WavFormat, WavWriter};

/// The two file kinds a recording can come in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Text, one header row, one row per sample instant.
    Csv,
    /// RIFF/WAVE (or RF64) audio-style container.
    Wav,
}

impl Format {
    /// The format from the extension (`.csv`, `.txt`, `.tsv`, `.wav`, `.wave`), or failing that
    /// from the first bytes (`RIFF` or `RF64` mean WAV, anything else is taken as CSV), so a
    /// file dropped in with an odd name still opens.
    pub fn detect(path: &Path) -> Result<Format, DecodeError> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("csv" | "txt" | "tsv") => return Ok(Format::Csv),
            Some("wav" | "wave") => return Ok(Format::Wav),
            _ => {}
        }
        let mut magic = [0u8; 4];
        let mut file = File::open(path).map_err(error::io_err(path))?;
        let mut got = 0;
        while got < 4 {
            match file.read(&mut magic[got..]) {
                Ok(0) => break,
                Ok(n) => got += n,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(error::io_err(path)(e)),
            }
        }
        Ok(if &magic[..got] == b"RIFF" || &magic[..got] == b"RF64" {
            Format::Wav
        } else {
            Format::Csv
        })
    }
}

/// The reader behind a recording.
#[derive(Debug)]
enum Reader {
    Csv(csv::CsvReader),
    Wav(wav::WavReader),
}

/// An open recording, read front to back.
///
/// Channels are asked for by the index that [`Recording::resolve`] gives; frames come out as
/// one `Vec<f32>` per requested channel, so callers can feed the tracker without reshaping.
#[derive(Debug)]
pub struct Recording {
    format: Format,
    reader: Reader,
    path: std::path::PathBuf,
}

impl Recording {
    /// Opens a CSV or WAV recording and reads its header.
    ///
    /// `rate_override` (the `--rate` option) wins over the file: over a WAV header's rate, and
    /// over a CSV time column, which then only gives the start time and is not checked for
    /// even spacing (that is how a user gets past a time column printed too coarsely).
    pub fn open(path: &Path, rate_override: Option<f64>) -> Result<Recording, DecodeError> {
        if let Some(rate) = rate_override {
            if !(rate.is_finite() && rate > 0.0) {
                return Err(DecodeError::BadRate {
                    path: path.to_path_buf(),
                    rate,
                });
            }
        }
        let format = Format::detect(path)?;
        let reader = match format {
            Format::Csv => Reader::Csv(csv::CsvReader::open(path, rate_override)?),
            Format::Wav => Reader::Wav(wav::WavReader::open(path, rate_override)?),
        };
        Ok(Recording {
            format,
            reader,
            path: path.to_path_buf(),
        })
    }

    /// Which kind of file this is.
    pub fn format(&self) -> Format {
        self.format
    }

    /// The file, as given to [`Recording::open`].
    pub fn path(&self) -> &Path {
        &self.path
    }

    fn columns(&self) -> &columns::Columns {
        match &self.reader {
            Reader::Csv(r) => r.columns(),
            Reader::Wav(r) => r.columns(),
        }
    }

    /// The channels' names in file order: CSV header names without the time column (a CSV
    /// without a header, and WAV, have "0", "1", ...).
    pub fn channel_names(&self) -> &[String] {
        &self.columns().names
    }

    /// The channel a user named: by header name (exact, else ignoring case if that is
    /// unambiguous), else by 0-based column index counted over the file's columns as they
    /// appear (a leading CSV time column is column 0, so the first channel is then "1").
    /// The error names the file and lists what is there.
    pub fn resolve(&self, col: &str) -> Result<usize, DecodeError> {
        self.columns().resolve(&self.path, col)
    }

    /// The name to show for a channel in messages and reports.
    pub fn channel_label(&self, channel: usize) -> String {
        self.columns().shown(channel)
    }

    /// Samples per second of every channel.
    pub fn sample_rate(&self) -> f64 {
        match &self.reader {
            Reader::Csv(r) => r.sample_rate(),
            Reader::Wav(r) => r.sample_rate(),
        }
    }

    /// Time of the first frame in seconds: a CSV's first `time` value, else 0.
    pub fn start_time_s(&self) -> f64 {
        match &self.reader {
            Reader::Csv(r) => r.start_time_s(),
            Reader::Wav(_) => 0.0,
        }
    }

    /// Reads the next frames: clears each `out[i]` and fills it with channel `cols[i]`, at
    /// most `max_frames` of them. Returns how many frames were read, 0 at the end.
    ///
    /// After an error the recording stays at the failing row or frame; reading again gives
    /// the same error. A truncated WAV delivers every whole frame present first, and the call
    /// after the last one returns [`DecodeError::Truncated`].
    pub fn read_frames(
        &mut self,
        cols: &[usize],
        out: &mut [Vec<f32>],
        max_frames: usize,
    ) -> Result<usize, DecodeError> {
        match &mut self.reader {
            Reader::Csv(r) => r.read_frames(cols, out, max_frames),
            Reader::Wav(r) => r.read_frames(cols, out, max_frames),
        }
    }

    /// How many frames the file holds: exact for WAV (the frames present), an estimate from
    /// the file size and the first rows for CSV (for progress, not for allocation).
    pub fn frames_hint(&self) -> Option<u64> {
        match &self.reader {
            Reader::Csv(r) => r.frames_hint(),
            Reader::Wav(r) => r.frames_hint(),
        }
    }

    /// How a WAV file stores its samples (`None` for CSV).
    pub fn wav_encoding(&self) -> Option<Encoding> {
        match &self.reader {
            Reader::Csv(_) => None,
            Reader::Wav(r) => Some(r.encoding()),
        }
    }
}
