//! A bounded read buffer that hands out whole lines, for the CSV reader.
//!
//! Reading in large chunks keeps system calls rare; keeping only whole lines in view lets the
//! field parser run without checking for the end of the buffer inside a field: every region
//! it sees ends with `\n` (one is added after a last line that lacks it).

use std::fs::File;
use std::io::Read;

/// Bytes read per refill: large enough that system calls cost nothing, small enough to stay in
/// the second-level cache while the lines are parsed.
pub(crate) const CHUNK: usize = 1 << 20;

/// The longest line accepted; a longer one means the file is not a CSV recording.
pub(crate) const MAX_LINE: usize = 16 << 20;

/// Whole lines of a file, a chunk at a time.
#[derive(Debug)]
pub(crate) struct LineBuf {
    file: File,
    buf: Vec<u8>,
    /// First byte not yet consumed.
    pub pos: usize,
    /// End of the last whole line in `buf` (just after its `\n`).
    pub complete: usize,
    /// End of the bytes read.
    end: usize,
    eof: bool,
}

/// Why a refill failed.
#[derive(Debug)]
pub(crate) enum FillError {
    /// The operating system refused the read.
    Io(std::io::Error),
    /// No `\n` within [`MAX_LINE`] bytes.
    LineTooLong,
}

impl LineBuf {
    /// Wraps an open file; nothing is read yet.
    pub fn new(file: File) -> LineBuf {
        LineBuf {
            file,
            buf: vec![0; CHUNK],
            pos: 0,
            complete: 0,
            end: 0,
            eof: false,
        }
    }

    /// The bytes read so far that form whole lines, from the start of the buffer (index with
    /// `pos` and `complete`).
    pub fn bytes(&self) -> &[u8] {
        &self.buf[..self.complete]
    }

    /// Keeps the unconsumed bytes, reads more, and makes at least one more whole line
    /// available unless the file has ended. Returns `false` at the end of the file.
    pub fn refill(&mut self) -> Result<bool, FillError> {
        if self.pos > 0 {
            self.buf.copy_within(self.pos..self.end, 0);
            self.end -= self.pos;
            self.complete -= self.pos;
            self.pos = 0;
        }
        let had = self.complete;
        while !self.eof {
            if self.end == self.buf.len() {
                if self.complete > had {
                    break;
                }
                self.grow()?;
            }
            self.read_more()?;
        }
        Ok(self.pos < self.complete)
    }

    /// Makes sure at least `n` whole lines after `pos` are in view, or the file has ended,
    /// growing the buffer if needed (used at open, to look at the first rows). Lines so long
    /// that `n` do not fit in [`MAX_LINE`] bytes get two.
    pub fn want_lines(&mut self, n: usize) -> Result<(), FillError> {
        loop {
            let have = self.buf[self.pos..self.complete]
                .iter()
                .filter(|&&c| c == b'\n')
                .count();
            if have >= n || self.eof {
                return Ok(());
            }
            if self.end == self.buf.len() {
                // Very long rows: settle for the header and one row rather than fail.
                if self.buf.len() >= MAX_LINE && have >= 2.min(n) {
                    return Ok(());
                }
                self.grow()?;
            }
            self.read_more()?;
        }
    }

    /// Doubles the buffer for a line longer than it, up to [`MAX_LINE`].
    fn grow(&mut self) -> Result<(), FillError> {
        if self.buf.len() >= MAX_LINE {
            return Err(FillError::LineTooLong);
        }
        let grown = self.buf.len() * 2;
        self.buf.resize(grown, 0);
        Ok(())
    }

    /// Reads once more into the free tail without moving anything.
    fn read_more(&mut self) -> Result<(), FillError> {
        let n = loop {
            match self.file.read(&mut self.buf[self.end..]) {
                Ok(n) => break n,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(FillError::Io(e)),
            }
        };
        if n == 0 {
            self.eof = true;
            if self.end > self.complete && self.buf[self.end - 1] != b'\n' {
                if self.end == self.buf.len() {
                    self.buf.push(0);
                }
                self.buf[self.end] = b'\n';
                self.end += 1;
            }
        } else {
            self.end += n;
        }
        if let Some(p) = self.buf[self.complete..self.end]
            .iter()
            .rposition(|&c| c == b'\n')
        {
            self.complete += p + 1;
        }
        Ok(())
    }
}
