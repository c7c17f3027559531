//! One CSV data row at a time, parsed in place in the read buffer.
//!
//! The region handed in always ends with `\n`, so these loops stop at a line's end without
//! checking for the end of the buffer; fields go through the fast decimal path and fall back
//! to the standard library only for unusual text.

use super::error::ValueProblem;
use super::float::{clean_field, fast_field, is_pad, narrow};

/// What to do with one column of a row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Slot {
    /// Not asked for: only its separator is found.
    Skip,
    /// Converted and pushed to this output buffer.
    Sample(usize),
    /// The time column.
    Time,
}

/// Why a row could not be read, before file and line are added.
#[derive(Debug)]
pub(crate) enum RowError {
    /// The row has a different number of fields (counted again by the caller).
    Count,
    /// This column's field is bad.
    Value(usize, ValueProblem),
}

/// Index of the `\n` ending the line that starts at `pos`.
pub(crate) fn line_end(b: &[u8], pos: usize) -> usize {
    b[pos..]
        .iter()
        .position(|&c| c == b'\n')
        .map_or(b.len(), |p| pos + p)
}

/// If the line at `pos` is blank, where the next line starts.
#[inline(always)]
pub(crate) fn blank_line(b: &[u8], pos: usize, sep: u8) -> Option<usize> {
    let mut i = pos;
    loop {
        let c = *b.get(i)?;
        if c == b'\n' {
            return Some(i + 1);
        }
        if !(is_pad(c, sep) || c == b'\r') {
            return None;
        }
        i += 1;
    }
}

/// Index of the separator or `\n` that ends the field starting at `i`.
#[inline(always)]
pub(crate) fn field_end(b: &[u8], mut i: usize, sep: u8) -> usize {
    while let Some(&c) = b.get(i) {
        if c == sep || c == b'\n' {
            break;
        }
        i += 1;
    }
    i
}

/// Parses one row starting at `pos` by `plan`; returns where the next line starts. `t` gets
/// the time and the power of ten of its last digit (`i32::MIN` when not known).
#[inline(always)]
pub(crate) fn parse_row(
    b: &[u8],
    pos: usize,
    sep: u8,
    plan: &[Slot],
    out: &mut [Vec<f32>],
    t: &mut (f64, i32),
) -> Result<usize, RowError> {
    let mut i = pos;
    let last = plan.len() - 1;
    for (j, slot) in plan.iter().enumerate() {
        match *slot {
            Slot::Skip => i = field_end(b, i, sep),
            Slot::Sample(k) => {
                // The fast path tops out near 9e37, inside the float range, so its results
                // need no range check.
                let (v, end) = match fast_field(b, i, sep) {
                    Some(f) => match narrow(f.value) {
                        Some(v) => (v, f.end),
                        None => slow_f32(b, i, sep).map_err(|p| RowError::Value(j, p))?,
                    },
                    None => slow_f32(b, i, sep).map_err(|p| RowError::Value(j, p))?,
                };
                if let Some(o) = out.get_mut(k) {
                    o.push(v);
                }
                i = end;
            }
            Slot::Time => match fast_field(b, i, sep) {
                Some(f) => {
                    *t = (f.value, f.exp10);
                    i = f.end;
                }
                None => {
                    let end = field_end(b, i, sep);
                    let v =
                        slow_parse::<f64>(&b[i..end], sep).map_err(|p| RowError::Value(j, p))?;
                    *t = (v, i32::MIN);
                    i = end;
                }
            },
        }
        let c = b.get(i).copied().unwrap_or(b'\n');
        if j < last {
            if c != sep {
                return Err(RowError::Count);
            }
        } else if c != b'\n' {
            return Err(RowError::Count);
        }
        i += 1;
    }
    Ok(i)
}

/// The slow path for a sample field; returns the value and where the field ends.
#[cold]
fn slow_f32(b: &[u8], i: usize, sep: u8) -> Result<(f32, usize), ValueProblem> {
    let end = field_end(b, i, sep);
    Ok((slow_parse::<f32>(&b[i..end], sep)?, end))
}

/// A number the standard library accepts, cleaned of quotes and padding, that is finite.
#[cold]
pub(crate) fn slow_parse<T>(raw: &[u8], sep: u8) -> Result<T, ValueProblem>
where
    T: std::str::FromStr + Copy + Into<f64>,
{
    let s = clean_field(raw, sep);
    if s.is_empty() {
        return Err(ValueProblem::Empty);
    }
    let shown = || ValueProblem::shown(&s);
    let text = std::str::from_utf8(&s).map_err(|_| ValueProblem::NotANumber(shown()))?;
    match text.parse::<T>() {
        Ok(v) if v.into().is_finite() => Ok(v),
        Ok(_) => Err(ValueProblem::NotFinite(shown())),
        Err(_) => Err(ValueProblem::NotANumber(shown())),
    }
}
