//! Turns decoded frames into blocks and gaps, with the stream clock that dates them.
//!
//! Both formats number their frames, so the assembler only has to compare each frame's index
//! with the one it expects: equal continues the block, higher is a gap of exactly that many
//! frames, lower means the logger started counting again. Times come from a clock anchored at the
//! first frame's arrival and advanced by index / rate, because arrival times jitter with the
//! operating system's buffering while the logger's sample clock does not.

use super::{DecodeStats, StreamLayout, MAX_BLOCK_FRAMES};
use crate::ingest::types::{Gap, SampleBlock, StreamEvent};

/// How far ahead of its arrival a frame's stream time may be, s. Samples cannot arrive before
/// they were taken, so more than this means the logger's clock runs fast or the host clock was
/// set back: the clock is re-anchored.
const MAX_AHEAD_S: f64 = 1.0;

/// How far behind its arrival a frame's stream time may fall, s, before the clock is
/// re-anchored. Large, because data delayed in buffers also falls behind and must keep its true
/// time; a logger clock 50 ppm slow takes more than two days to drift this far.
const MAX_BEHIND_S: f64 = 10.0;

/// Collects frames into [`SampleBlock`]s and reports [`Gap`]s.
#[derive(Debug)]
pub(super) struct Assembler {
    /// Samples per second.
    rate: f64,
    /// Channels per frame.
    channels: usize,
    /// Next stream index expected (the logger's numbering), once a frame has arrived.
    next: Option<u64>,
    /// Added (wrapping) to a stream index to give the output index; changes when the logger
    /// restarts its count, so that output indices never go back.
    offset: u64,
    /// Output index and Unix time the clock is anchored at.
    anchor: Option<(u64, f64)>,
    /// The block being filled.
    pending: Option<SampleBlock>,
    /// Lines or packets dropped since the last good frame; given to the next gap.
    corrupt_since_good: u64,
    /// Why data stopped, if known (a port that closed), for the next gap.
    cause: Option<String>,
    /// Counters.
    pub(super) stats: DecodeStats,
}

impl Assembler {
    /// An assembler for `layout`.
    pub(super) fn new(layout: &StreamLayout) -> Assembler {
        Assembler {
            rate: layout.sample_rate,
            channels: layout.channels.len(),
            next: None,
            offset: 0,
            anchor: None,
            pending: None,
            corrupt_since_good: 0,
            cause: None,
            stats: DecodeStats::default(),
        }
    }

    /// Counts a dropped line or packet.
    pub(super) fn note_corrupt(&mut self) {
        self.corrupt_since_good += 1;
        self.stats.corrupt += 1;
    }

    /// Records why data stopped, for the gap found when it resumes.
    pub(super) fn note_cause(&mut self, cause: String) {
        self.cause = Some(cause);
    }

    /// The Unix time of output frame `index` by the stream clock.
    fn time_of(&self, index: u64) -> f64 {
        match self.anchor {
            Some((at, t)) => t + (i128::from(index) - i128::from(at)) as f64 / self.rate,
            None => 0.0,
        }
    }

    /// Adds `frames` consecutive frames starting at stream index `index`, which arrived at
    /// `now`; `sample(f, c)` gives channel `c` of the run's frame `f`.
    pub(super) fn push_frames(
        &mut self,
        index: u64,
        frames: usize,
        now: f64,
        out: &mut Vec<StreamEvent>,
        mut sample: impl FnMut(usize, usize) -> f32,
    ) {
        if frames == 0 {
            return;
        }
        let Some(first) = self.start_run(index, frames as u64, now, out) else {
            return;
        };
        for f in 0..frames {
            // Wrapping: indices come off the wire, and no value of theirs may panic here.
            let block = self.block_for(first.wrapping_add(f as u64), out);
            for (c, col) in block.channels.iter_mut().enumerate() {
                col.push(sample(f, c));
            }
        }
        self.stats.frames += frames as u64;
        self.next = Some(index.wrapping_add(frames as u64));
    }

    /// Checks the run of `frames` frames starting at stream index `index` against the expected
    /// one, reporting a gap or a restart; returns the run's first output index, or `None` for a
    /// repeat of the run just before.
    fn start_run(
        &mut self,
        index: u64,
        frames: u64,
        now: f64,
        out: &mut Vec<StreamEvent>,
    ) -> Option<u64> {
        match self.next {
            None => {
                self.offset = 0;
                self.anchor = Some((index, now));
            }
            Some(next) if index == next => {}
            Some(next) if index > next => {
                self.flush(out);
                let first = next.wrapping_add(self.offset);
                let lost = index - next;
                let reason = match self.cause.take() {
                    Some(cause) => cause,
                    None if self.corrupt_since_good > 0 => "checksum mismatch".to_string(),
                    None => "sequence jump".to_string(),
                };
                out.push(StreamEvent::Gap(Gap {
                    first_frame: first,
                    frames: lost,
                    start_unix_s: self.time_of(first),
                    end_unix_s: self.time_of(first.wrapping_add(lost)),
                    corrupt: self.corrupt_since_good,
                    reason,
                }));
            }
            Some(next) if index.wrapping_add(frames) == next => {
                // The same frames again (a repeated line or packet): nothing new.
                self.stats.duplicates += 1;
                return None;
            }
            Some(next) => {
                self.flush(out);
                self.stats.restarts += 1;
                let first = next.wrapping_add(self.offset);
                let mut reason = format!("frame index went back from {next} to {index}");
                if let Some(cause) = self.cause.take() {
                    reason = format!("{cause}; {reason}");
                }
                out.push(StreamEvent::Gap(Gap {
                    first_frame: first,
                    frames: 0,
                    start_unix_s: self.time_of(first),
                    end_unix_s: now,
                    corrupt: self.corrupt_since_good,
                    reason,
                }));
                self.offset = first.wrapping_sub(index);
                self.anchor = Some((first, now));
            }
        }
        self.corrupt_since_good = 0;
        self.cause = None;
        let first = index.wrapping_add(self.offset);
        let lag = now - self.time_of(first);
        if !(-MAX_AHEAD_S..=MAX_BEHIND_S).contains(&lag) {
            self.flush(out);
            self.anchor = Some((first, now));
            self.stats.clock_resets += 1;
        }
        Some(first)
    }

    /// The pending block, ending at `out_index` and with room for one more frame (a full one is
    /// sent first).
    fn block_for(&mut self, out_index: u64, out: &mut Vec<StreamEvent>) -> &mut SampleBlock {
        let full = self
            .pending
            .as_ref()
            .is_some_and(|b| b.channels.first().map_or(0, Vec::len) >= MAX_BLOCK_FRAMES);
        if full {
            self.flush(out);
        }
        let start_unix_s = self.time_of(out_index);
        let (rate, channels) = (self.rate, self.channels);
        self.pending.get_or_insert_with(|| SampleBlock {
            first_frame: out_index,
            sample_rate: rate,
            start_unix_s,
            channels: vec![Vec::with_capacity(256); channels],
        })
    }

    /// Sends the pending block, if any.
    pub(super) fn flush(&mut self, out: &mut Vec<StreamEvent>) {
        if let Some(block) = self.pending.take() {
            if block.channels.first().is_some_and(|c| !c.is_empty()) {
                out.push(StreamEvent::Block(block));
            }
        }
    }
}
