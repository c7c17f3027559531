//! Finding a channel from what the user typed: a header name, or a 0-based column index.
//!
//! Indices count the columns of the file as the user sees them (in a CSV with a leading time
//! column, the first channel is column 1), so a user reading the file in a spreadsheet or a
//! text editor can count along. A name always wins over an index, so a column named "2" is
//! found by its name.

use std::path::Path;

use super::DecodeError;

/// How many columns an error message lists before it summarises the rest.
const LISTED: usize = 20;

/// The channels of a recording and how the user can name them.
#[derive(Debug, Clone)]
pub(crate) struct Columns {
    /// Channel names, in file order (the time column left out).
    pub names: Vec<String>,
    /// For each channel, its column index in the file.
    pub file_index: Vec<usize>,
    /// The time column's index and name, if the file has one.
    pub time: Option<(usize, String)>,
}

impl Columns {
    /// Channels named only by their index (WAV, or a CSV without a header row).
    pub fn numbered(n: usize) -> Columns {
        Columns {
            names: (0..n).map(|i| i.to_string()).collect(),
            file_index: (0..n).collect(),
            time: None,
        }
    }

    /// The channel index for `col`: an exact name, else a name that differs only in case if
    /// just one does, else a column index.
    pub fn resolve(&self, path: &Path, col: &str) -> Result<usize, DecodeError> {
        let want = col.trim();
        let fail = |problem: String| DecodeError::NoColumn {
            path: path.to_path_buf(),
            column: col.to_string(),
            problem,
            available: self.available(),
        };
        let exact: Vec<usize> = (0..self.names.len())
            .filter(|&i| self.names[i] == want)
            .collect();
        match exact.as_slice() {
            [i] => return Ok(*i),
            [_, _, ..] => {
                return Err(fail(format!(
                    "more than one column is named '{want}' (use its index)"
                )))
            }
            [] => {}
        }
        if let Some((_, name)) = &self.time {
            if name.eq_ignore_ascii_case(want) {
                return Err(fail(format!(
                    "'{want}' is the time column, which gives the sample rate, not a channel"
                )));
            }
        }
        let folded: Vec<usize> = (0..self.names.len())
            .filter(|&i| self.names[i].eq_ignore_ascii_case(want))
            .collect();
        if let [i] = folded.as_slice() {
            return Ok(*i);
        }
        if let Ok(index) = want.parse::<usize>() {
            if let Some(i) = self.file_index.iter().position(|&f| f == index) {
                return Ok(i);
            }
            if matches!(self.time, Some((t, _)) if t == index) {
                return Err(fail(format!(
                    "column {index} is the time column, which gives the sample rate, not a channel"
                )));
            }
            return Err(fail(format!("no column {index}")));
        }
        Err(fail(format!("no column named '{want}'")))
    }

    /// The channels a user may ask for, as `'name' (index)`, shortened for wide files.
    pub fn available(&self) -> String {
        let mut parts: Vec<String> = self
            .names
            .iter()
            .zip(&self.file_index)
            .take(LISTED)
            .map(|(n, i)| {
                if n == &i.to_string() {
                    n.clone()
                } else {
                    format!("'{n}' ({i})")
                }
            })
            .collect();
        if self.names.len() > LISTED {
            parts.push(format!("and {} more", self.names.len() - LISTED));
        }
        if parts.is_empty() {
            "none".to_string()
        } else {
            parts.join(", ")
        }
    }

    /// The name to show for a channel in messages: its header name, or its index when the
    /// header left it blank.
    pub fn shown(&self, channel: usize) -> String {
        match self.names.get(channel) {
            Some(n) if !n.is_empty() => n.clone(),
            _ => self
                .file_index
                .get(channel)
                .map_or_else(|| channel.to_string(), |i| i.to_string()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn csv_like() -> Columns {
        Columns {
            names: vec![
                "tach".into(),
                "X".into(),
                "2".into(),
                "y".into(),
                "y".into(),
            ],
            file_index: vec![1, 2, 3, 4, 5],
            time: Some((0, "time".into())),
        }
    }

    #[test]
    fn by_name_case_and_index() {
        let c = csv_like();
        let p = Path::new("run.csv");
        assert_eq!(c.resolve(p, "tach").expect("name"), 0);
        assert_eq!(c.resolve(p, " tach ").expect("trimmed"), 0);
        assert_eq!(c.resolve(p, "x").expect("case-folded"), 1);
        // A name beats an index: column "2" is the channel named "2", not file column 2.
        assert_eq!(c.resolve(p, "2").expect("numeric name"), 2);
        // File column 1 is the first channel, because column 0 is the time.
        assert_eq!(c.resolve(p, "1").expect("index"), 0);
        assert_eq!(c.resolve(p, "5").expect("index of a duplicate"), 4);
    }

    #[test]
    fn errors_name_the_file_and_list_columns() {
        let c = csv_like();
        let p = Path::new("run.csv");
        for (col, needle) in [
            ("z", "no column named 'z'"),
            ("9", "no column 9"),
            ("0", "column 0 is the time column"),
            ("TIME", "'TIME' is the time column"),
            ("y", "more than one column is named 'y'"),
        ] {
            let msg = c.resolve(p, col).expect_err(col).to_string();
            assert!(msg.starts_with("run.csv: "), "{msg}");
            assert!(msg.contains(needle), "{msg}");
            assert!(
                msg.contains("'tach' (1), 'X' (2), '2' (3), 'y' (4), 'y' (5)"),
                "{msg}"
            );
            assert!(!msg.contains('\n'), "{msg}");
        }
    }

    #[test]
    fn numbered_channels_and_long_lists() {
        let c = Columns::numbered(30);
        let p = Path::new("a.wav");
        assert_eq!(c.resolve(p, "29").expect("index"), 29);
        let msg = c.resolve(p, "30").expect_err("out of range").to_string();
        assert!(msg.contains("0, 1, 2"), "{msg}");
        assert!(msg.contains("and 10 more"), "{msg}");
        assert_eq!(c.shown(3), "3");
    }
}
