//! Streaming reader for CSV recordings: one header row, then one row per sample instant.
//!
//! The file is read in 1 MiB chunks and parsed in place, without building strings or checking
//! UTF-8 per field; only the columns asked for are converted (the others are skipped, though
//! every row's field count is still checked). A `time` column gives the sample rate; it must be
//! evenly spaced to within 1 %, judged against the resolution the file prints times with, so a
//! logger that rounds times to whole microseconds is still accepted.

use std::fs::File;
use std::path::{Path, PathBuf};

use super::columns::Columns;
use super::error::{io_err, DecodeError};
use super::float::{clean_field, is_pad, resolution};
use super::lines::{FillError, LineBuf, MAX_LINE};
use super::row::{blank_line, line_end, parse_row, RowError, Slot};

/// Header names (compared without case) that mark the time column.
const TIME_NAMES: [&str; 3] = ["time", "t", "time_s"];

/// How far the spacing of the time column may wander from its step, as a fraction of the step.
const SPACING_TOLERANCE: f64 = 0.01;

/// Rows looked at when the file is opened to measure the time step.
const PRESCAN_ROWS: usize = 100_000;

/// An open CSV recording being read front to back.
#[derive(Debug)]
pub(crate) struct CsvReader {
    path: PathBuf,
    lines: LineBuf,
    sep: u8,
    header: Vec<String>,
    columns: Columns,
    rate: f64,
    start_time: f64,
    /// Whether each row's time is checked against the step.
    check_time: bool,
    step: f64,
    tol: f64,
    prev_t: Option<f64>,
    /// Number of the last line consumed (the header is line 1).
    line: u64,
    hint: Option<u64>,
    plan: Vec<Slot>,
    plan_cols: Vec<usize>,
}

/// What the first rows tell.
struct Prescan {
    /// Data rows seen.
    rows: usize,
    /// Bytes they take.
    bytes: usize,
    /// The first row's time.
    first_time: Option<f64>,
    /// The time step, when there were two rows or more.
    scan: Option<TimeScan>,
}

/// The time column as measured from the first rows.
struct TimeScan {
    first: f64,
    step: f64,
    tol: f64,
    rate: f64,
}

impl CsvReader {
    /// Opens `path`, reads its header and measures the time step from the first rows.
    pub fn open(path: &Path, rate_override: Option<f64>) -> Result<CsvReader, DecodeError> {
        let file = File::open(path).map_err(io_err(path))?;
        let file_len = file.metadata().map(|m| m.len()).ok();
        let mut lines = LineBuf::new(file);
        let fill = |e: FillError, line: u64| fill_error(path, e, line);
        lines.want_lines(3).map_err(|e| fill(e, 1))?;
        let mut line = 0u64;
        // A byte-order mark is left by some spreadsheet exports; it is not part of the header.
        if lines.bytes()[lines.pos..].starts_with(b"\xEF\xBB\xBF") {
            lines.pos += 3;
        }
        // Blank lines before the header are tolerated.
        let header_at = loop {
            if lines.pos >= lines.complete {
                return Err(DecodeError::Empty {
                    path: path.to_path_buf(),
                });
            }
            line += 1;
            let b = lines.bytes();
            let end = line_end(b, lines.pos);
            if b[lines.pos..end]
                .iter()
                .all(|&c| is_pad(c, 0) || c == b'\r')
            {
                lines.pos = end + 1;
                lines.want_lines(3).map_err(|e| fill(e, line))?;
                continue;
            }
            break lines.pos;
        };
        let b = lines.bytes();
        let end = line_end(b, header_at);
        let header_bytes = &b[header_at..end];
        let sep = detect_separator(header_bytes);
        let fields = split_header(header_bytes, sep);
        let ncols = fields.len();
        // A first line made only of numbers is data: the file has no header, and its
        // columns are known by index alone.
        let headerless = fields.iter().all(|f| {
            let c = clean_field(f.as_bytes(), sep);
            std::str::from_utf8(&c)
                .ok()
                .and_then(|s| s.parse::<f64>().ok())
                .is_some_and(f64::is_finite)
        });
        let (header, columns) = if headerless {
            line -= 1;
            (
                (0..ncols).map(|i| i.to_string()).collect(),
                Columns::numbered(ncols),
            )
        } else {
            lines.pos = end + 1;
            let time = fields
                .iter()
                .position(|f| TIME_NAMES.iter().any(|t| f.eq_ignore_ascii_case(t)));
            let channels: Vec<usize> = (0..ncols).filter(|&i| Some(i) != time).collect();
            let columns = Columns {
                names: channels.iter().map(|&i| fields[i].clone()).collect(),
                file_index: channels,
                time: time.map(|t| (t, fields[t].clone())),
            };
            (fields, columns)
        };
        let data_start = lines.pos;
        let mut reader = CsvReader {
            path: path.to_path_buf(),
            lines,
            sep,
            header,
            columns,
            rate: 0.0,
            start_time: 0.0,
            check_time: false,
            step: 0.0,
            tol: 0.0,
            prev_t: None,
            line,
            hint: None,
            plan: Vec::new(),
            plan_cols: Vec::new(),
        };
        let Prescan {
            rows,
            bytes: row_bytes,
            first_time,
            scan,
        } = reader.prescan()?;
        if rows == 0 {
            return Err(DecodeError::NoData {
                path: path.to_path_buf(),
            });
        }
        if let Some(len) = file_len {
            let avg = row_bytes as f64 / rows as f64;
            let data = len.saturating_sub(data_start as u64) as f64;
            reader.hint = Some((data / avg).round() as u64);
        }
        match (rate_override, scan) {
            (Some(rate), _) => {
                reader.rate = rate;
                reader.start_time = first_time.unwrap_or(0.0);
            }
            (None, Some(scan)) => {
                reader.rate = scan.rate;
                reader.start_time = scan.first;
                reader.step = scan.step;
                reader.tol = scan.tol;
                reader.check_time = true;
            }
            (None, None) => {
                let reason = match &reader.columns.time {
                    Some((_, name)) => format!(
                        "the time column '{name}' has only one row, so it gives no time step"
                    ),
                    None if headerless => "the file has no header row, so no time column".into(),
                    None => format!(
                        "no time column (a column named {})",
                        TIME_NAMES.map(|t| format!("'{t}'")).join(", ")
                    ),
                };
                return Err(DecodeError::NoRate {
                    path: path.to_path_buf(),
                    reason,
                });
            }
        }
        if !(reader.rate.is_finite() && reader.rate > 0.0) {
            return Err(DecodeError::BadRate {
                path: path.to_path_buf(),
                rate: reader.rate,
            });
        }
        Ok(reader)
    }

    /// Looks at the rows already in the buffer, without consuming them: how many there are,
    /// their size, and the time step with the resolution the times are printed with.
    fn prescan(&self) -> Result<Prescan, DecodeError> {
        let ncols = self.header.len();
        let time_col = self.columns.time.as_ref().map(|(t, _)| *t);
        let plan: Vec<Slot> = (0..ncols)
            .map(|i| {
                if Some(i) == time_col {
                    Slot::Time
                } else {
                    Slot::Skip
                }
            })
            .collect();
        let b = self.lines.bytes();
        let start = self.lines.pos;
        let mut pos = start;
        let mut line = self.line;
        let mut times: Vec<(f64, u64)> = Vec::new();
        let mut qmin = f64::INFINITY;
        let mut rows = 0usize;
        while pos < b.len() && rows < PRESCAN_ROWS {
            line += 1;
            if let Some(next) = blank_line(b, pos, self.sep) {
                pos = next;
                continue;
            }
            let mut t = (0.0, 0);
            let next = parse_row(b, pos, self.sep, &plan, &mut [], &mut t)
                .map_err(|e| self.row_error(e, b, pos, line))?;
            if time_col.is_some() {
                times.push((t.0, line));
                if t.1 != i32::MIN {
                    qmin = qmin.min(resolution(t.1));
                }
            }
            rows += 1;
            pos = next;
        }
        let mut found = Prescan {
            rows,
            bytes: pos - start,
            first_time: times.first().map(|t| t.0),
            scan: None,
        };
        if times.len() < 2 {
            return Ok(found);
        }
        let (t0, _) = times[0];
        let (t1, line1) = times[1];
        if t1 <= t0 {
            return Err(DecodeError::TimeNotIncreasing {
                path: self.path.clone(),
                line: line1,
                prev_s: t0,
                next_s: t1,
            });
        }
        if !qmin.is_finite() {
            qmin = 0.0;
        }
        // Measure the step over the first evenly spaced run, so the rate is as exact as the
        // printed times allow; an uneven row is reported by the reading itself. Times printed
        // to a resolution q are each off by up to q/2, so steps may differ by up to q.
        let step0 = t1 - t0;
        let tol0 = SPACING_TOLERANCE * step0 + qmin;
        let mut last = 1;
        while last + 1 < times.len() {
            let d = times[last + 1].0 - times[last].0;
            if (d - step0).abs() > tol0 + rounding(times[last + 1].0) {
                break;
            }
            last += 1;
        }
        let span = times[last].0 - t0;
        let step = span / last as f64;
        // The jitter actually seen: times that are exact multiples of the step (a 1 kHz
        // logger printing milliseconds) have none, and then 1 % is all that is allowed.
        let jitter = times[..=last]
            .windows(2)
            .map(|w| ((w[1].0 - w[0].0) - step).abs())
            .fold(0.0, f64::max);
        let mut rate = 1.0 / step;
        // Loggers run at whole-hertz rates; when the printed times cannot tell the measured
        // rate from the nearest whole number, take the whole number.
        let uncertainty = (qmin + 2.0 * rounding(times[last].0)) / span;
        let whole = rate.round();
        if whole > 0.0
            && (rate - whole).abs() <= rate * uncertainty.max(1e-12)
            && uncertainty < 1e-3
        {
            rate = whole;
        }
        found.scan = Some(TimeScan {
            first: t0,
            step,
            tol: SPACING_TOLERANCE * step + qmin.min(2.0 * jitter),
            rate,
        });
        Ok(found)
    }

    /// The channels and how to name them.
    pub fn columns(&self) -> &Columns {
        &self.columns
    }

    /// Samples per second.
    pub fn sample_rate(&self) -> f64 {
        self.rate
    }

    /// Time of the first row, 0 without a time column.
    pub fn start_time_s(&self) -> f64 {
        self.start_time
    }

    /// Rows the file probably holds, from its size and the length of the first rows.
    pub fn frames_hint(&self) -> Option<u64> {
        self.hint
    }

    /// Reads up to `max_frames` rows; see `Recording::read_frames`.
    pub fn read_frames(
        &mut self,
        cols: &[usize],
        out: &mut [Vec<f32>],
        max_frames: usize,
    ) -> Result<usize, DecodeError> {
        self.set_plan(cols, out.len())?;
        for o in out.iter_mut() {
            o.clear();
        }
        let mut frames = 0;
        while frames < max_frames {
            if self.lines.pos >= self.lines.complete {
                let more = self
                    .lines
                    .refill()
                    .map_err(|e| fill_error(&self.path, e, self.line + 1))?;
                if !more {
                    break;
                }
            }
            frames += self.parse_rows(out, max_frames - frames)?;
        }
        // A column asked for twice is parsed once and copied.
        for k in 0..cols.len() {
            if let Some(f) = cols[..k].iter().position(|&c| c == cols[k]) {
                let (lo, hi) = out.split_at_mut(k);
                hi[0].extend_from_slice(&lo[f]);
            }
        }
        Ok(frames)
    }

    /// Parses rows from the buffer until it runs out of whole lines or `max` rows are read.
    fn parse_rows(&mut self, out: &mut [Vec<f32>], max: usize) -> Result<usize, DecodeError> {
        let b = self.lines.bytes();
        let end = b.len();
        let sep = self.sep;
        let mut pos = self.lines.pos;
        let mut line = self.line;
        let mut prev_t = self.prev_t;
        let mut rows = 0;
        let mut t = (0.0, 0);
        let result = loop {
            if rows == max || pos >= end {
                break Ok(rows);
            }
            line += 1;
            if let Some(next) = blank_line(b, pos, sep) {
                pos = next;
                continue;
            }
            let next = match parse_row(b, pos, sep, &self.plan, out, &mut t) {
                Ok(next) => next,
                Err(e) => break Err(self.row_error(e, b, pos, line)),
            };
            if self.check_time {
                if let Some(p) = prev_t {
                    let d = t.0 - p;
                    if (d - self.step).abs() > self.tol + rounding(t.0) {
                        break Err(DecodeError::UnevenTime {
                            path: self.path.clone(),
                            line,
                            step_s: d,
                            expected_s: self.step,
                        });
                    }
                }
                prev_t = Some(t.0);
            }
            pos = next;
            rows += 1;
        };
        // On an error, stop at the failing row, so reading again fails the same way.
        if result.is_err() {
            line -= 1;
        }
        self.lines.pos = pos;
        self.line = line;
        self.prev_t = prev_t;
        result
    }

    /// Turns the requested channels into a per-column plan (kept while the request repeats).
    fn set_plan(&mut self, cols: &[usize], outs: usize) -> Result<(), DecodeError> {
        if outs != cols.len() {
            return Err(DecodeError::Usage {
                path: self.path.clone(),
                what: format!("{} output buffers for {} columns", outs, cols.len()),
            });
        }
        if self.plan_cols == cols && !self.plan.is_empty() {
            return Ok(());
        }
        let ncols = self.header.len();
        let mut plan = vec![Slot::Skip; ncols];
        if let Some((t, _)) = self.columns.time {
            if self.check_time {
                plan[t] = Slot::Time;
            }
        }
        for (k, &c) in cols.iter().enumerate() {
            let Some(&raw) = self.columns.file_index.get(c) else {
                return Err(DecodeError::Usage {
                    path: self.path.clone(),
                    what: format!(
                        "channel {c} asked for, but the file has {}",
                        self.columns.names.len()
                    ),
                });
            };
            if plan[raw] == Slot::Skip {
                plan[raw] = Slot::Sample(k);
            }
        }
        self.plan = plan;
        self.plan_cols = cols.to_vec();
        Ok(())
    }

    /// Adds file, line and column to a row's error.
    fn row_error(&self, e: RowError, b: &[u8], pos: usize, line: u64) -> DecodeError {
        match e {
            RowError::Count => {
                let end = line_end(b, pos);
                let found = b[pos..end].iter().filter(|&&c| c == self.sep).count() + 1;
                DecodeError::FieldCount {
                    path: self.path.clone(),
                    line,
                    expected: self.header.len(),
                    found,
                }
            }
            RowError::Value(raw, problem) => DecodeError::BadValue {
                path: self.path.clone(),
                line,
                column: match self.header.get(raw) {
                    Some(n) if !n.is_empty() => n.clone(),
                    _ => raw.to_string(),
                },
                problem,
            },
        }
    }
}

/// How far apart two printed times may be from rounding alone (a few units in the last place).
#[inline(always)]
fn rounding(t: f64) -> f64 {
    4.0 * f64::EPSILON * t.abs()
}

/// Picks the separator the header uses most among `,`, `;` and tab (outside quotes).
fn detect_separator(header: &[u8]) -> u8 {
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for &c in header {
        match c {
            b'"' => quoted = !quoted,
            b',' if !quoted => counts[0] += 1,
            b';' if !quoted => counts[1] += 1,
            b'\t' if !quoted => counts[2] += 1,
            _ => {}
        }
    }
    let seps = [b',', b';', b'\t'];
    let mut best = 0;
    for k in 1..3 {
        if counts[k] > counts[best] {
            best = k;
        }
    }
    seps[best]
}

/// Splits the header row into trimmed names, honouring quotes (`"a, b"`, `"say ""hi"""`).
fn split_header(header: &[u8], sep: u8) -> Vec<String> {
    let text = String::from_utf8_lossy(header);
    let sep = char::from(sep);
    let mut names = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '"' if quoted && chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            '"' => quoted = !quoted,
            c if c == sep && !quoted => names.push(std::mem::take(&mut cur)),
            c => cur.push(c),
        }
    }
    names.push(cur);
    names
        .into_iter()
        .map(|n| n.trim_matches(|c: char| c.is_whitespace()).to_string())
        .collect()
}

/// Adds the file and line to a buffer failure.
fn fill_error(path: &Path, e: FillError, line: u64) -> DecodeError {
    match e {
        FillError::Io(error) => DecodeError::Io {
            path: path.to_path_buf(),
            error,
        },
        FillError::LineTooLong => DecodeError::Malformed {
            path: path.to_path_buf(),
            what: format!(
                "line {line} is longer than {} MiB: not a CSV recording",
                MAX_LINE >> 20
            ),
        },
    }
}
