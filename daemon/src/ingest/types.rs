//! Messages between the sources and the per-machine engine: blocks of samples, gaps, and the
//! state of a connection.

/// A stretch of consecutive frames from one source, one vector per channel in the source's order.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct SampleBlock {
    /// Index of the first frame, counted from the start of the stream (or file); a jump from the
    /// previous block's end is a gap.
    pub first_frame: u64,
    /// Samples per second per channel.
    pub sample_rate: f64,
    /// Unix time (s, UTC) of the first frame.
    pub start_unix_s: f64,
    /// The samples: `channels[c][i]` is channel `c` at frame `first_frame + i`.
    pub channels: Vec<Vec<f32>>,
}

/// Frames that should have arrived and did not, or arrived damaged.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Gap {
    /// First missing frame index.
    pub first_frame: u64,
    /// Frames missing (0 when unknown, e.g. a port that went away).
    pub frames: u64,
    /// Unix time (s) at which the gap starts.
    pub start_unix_s: f64,
    /// Unix time (s) at which data resumed (or was last known missing).
    pub end_unix_s: f64,
    /// Damaged frames or lines dropped within the gap.
    pub corrupt: u64,
    /// Why, in plain words ("checksum mismatch", "sequence jump", "port closed: ...").
    pub reason: String,
}

/// What a streaming source reports.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum StreamEvent {
    /// The port is open and being read.
    Connected {
        /// The port's path.
        port: String,
    },
    /// The port went away or could not be opened; the source retries with back-off.
    Disconnected {
        /// The port's path.
        port: String,
        /// What the system said.
        error: String,
        /// Seconds until the next attempt.
        retry_in_s: f64,
    },
    /// Samples.
    Block(SampleBlock),
    /// Missing or damaged data.
    Gap(Gap),
}
