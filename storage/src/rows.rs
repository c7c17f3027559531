//! Plain row types: what the daemon hands in and what readers get back.
//!
//! They hold plain numbers and words, not the engine's types, so that this crate does not depend on
//! the tracker: the daemon converts engine results into these rows. Times are unix seconds (UTC),
//! speeds r/min, and every vector is an amplitude with a phase lag (see [`Polar`]).

use std::ops::Deref;

use crate::kinds::{AlertState, EventKind, IngestKind, IngestStatus, Series, Severity};

/// A row as stored, with the id the database gave it.
///
/// Dereferences to the row, so `stored.kind` reads the row's field.
#[derive(Clone, Debug, PartialEq)]
pub struct Stored<T> {
    /// The row's id (its `id` or `rowid` column).
    pub id: i64,
    /// The row.
    pub row: T,
}

impl<T> Deref for Stored<T> {
    type Target = T;
    fn deref(&self) -> &T {
        &self.row
    }
}

/// An nX vector as users read it: amplitude and phase lag.
///
/// The phase lag is the shaft angle from the reference pulse to the next positive peak of the nX
/// signal, in degrees, `0 <= phase_deg < 360`. In complex form the vector is
/// `amplitude · e^{−j·phase_deg}`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Polar {
    /// Amplitude, in the channel's units.
    pub amplitude: f64,
    /// Phase lag, degrees, 0 to 360.
    pub phase_deg: f64,
}

impl Polar {
    /// The vector as (real, imaginary) parts, `amplitude · e^{−j·phase}`: the form in which vectors
    /// can be averaged.
    pub fn to_re_im(self) -> (f64, f64) {
        let (s, c) = (-self.phase_deg.to_radians()).sin_cos();
        (self.amplitude * c, self.amplitude * s)
    }

    /// The vector with the parts `re + j·im`, its lag wrapped into `0..360`.
    pub fn from_re_im(re: f64, im: f64) -> Self {
        let lag = (-im.atan2(re)).to_degrees().rem_euclid(360.0);
        // rem_euclid can give 360.0 for a tiny negative input; keep the range half-open.
        let phase_deg = if lag >= 360.0 { 0.0 } else { lag };
        Self {
            amplitude: re.hypot(im),
            phase_deg,
        }
    }
}

/// A monitored machine, as configured.
#[derive(Clone, Debug, PartialEq)]
pub struct MachineRow {
    /// The configuration's machine id, e.g. `fan-2`; the key every other table refers to.
    pub id: String,
    /// Human-readable name.
    pub name: String,
    /// Lowest speed of the operating range, r/min.
    pub min_operating_rpm: Option<f64>,
    /// Maximum continuous speed, r/min.
    pub max_continuous_rpm: Option<f64>,
    /// Trip speed, r/min.
    pub trip_rpm: Option<f64>,
}

/// A sensor channel of a machine, as configured.
#[derive(Clone, Debug, PartialEq)]
pub struct SensorRow {
    /// Machine id.
    pub machine: String,
    /// Channel name, as in the data source.
    pub channel: String,
    /// `displacement`, `velocity`, `acceleration` or `tach`; free text so a new kind needs no
    /// migration.
    pub kind: String,
    /// Units of the channel's amplitudes, e.g. `um pk-pk`, `mm/s rms`.
    pub units: String,
    /// Mounting angle, degrees, where known.
    pub angle_deg: Option<f64>,
}

/// The start of an ingest: a file or stream segment about to be processed.
#[derive(Clone, Debug, PartialEq)]
pub struct NewIngest {
    /// Machine the data belongs to, when known.
    pub machine: Option<String>,
    /// File or stream segment.
    pub kind: IngestKind,
    /// Where it came from: the file's path, or the port name.
    pub source: String,
    /// Hash of the content, in any stable text form (hex of a digest): how a file seen before is
    /// recognised whatever its name.
    pub content_hash: String,
    /// Size in bytes, when known.
    pub bytes: Option<u64>,
    /// When processing started.
    pub started_at: f64,
}

/// An ingest record: one file or stream segment and what became of it.
#[derive(Clone, Debug, PartialEq)]
pub struct IngestRow {
    /// Machine the data belongs to, when known.
    pub machine: Option<String>,
    /// File or stream segment.
    pub kind: IngestKind,
    /// The file's path or the port name.
    pub source: String,
    /// Hash of the content.
    pub content_hash: String,
    /// Size in bytes, when known.
    pub bytes: Option<u64>,
    /// How far processing got.
    pub status: IngestStatus,
    /// Why it failed, for `failed`.
    pub error: Option<String>,
    /// When processing started.
    pub started_at: f64,
    /// When processing finished.
    pub finished_at: Option<f64>,
    /// Time of the first sample in the data, when known.
    pub data_start: Option<f64>,
    /// Time of the last sample in the data, when known.
    pub data_end: Option<f64>,
}

/// The slow-roll (runout) vector subtracted from a channel's 1X response in an event.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SlowRoll {
    /// The mean 1X vector over the slow-roll speeds.
    pub vector: Polar,
    /// Lowest speed it was taken at, r/min.
    pub min_rpm: f64,
    /// Highest speed it was taken at, r/min.
    pub max_rpm: f64,
    /// Number of vectors averaged.
    pub points: u64,
}

/// One channel of an event: its units and slow-roll vector.
#[derive(Clone, Debug, PartialEq)]
pub struct EventChannelRow {
    /// Channel name.
    pub channel: String,
    /// Units of the channel's amplitudes in this event, frozen with the event so that a later
    /// configuration change does not relabel old data.
    pub units: String,
    /// The runout vector subtracted, if any.
    pub slow_roll: Option<SlowRoll>,
}

/// A run-up or coast-down.
#[derive(Clone, Debug, PartialEq)]
pub struct EventRow {
    /// Machine id.
    pub machine: String,
    /// The ingest record of the data it was found in, if any.
    pub ingest_id: Option<i64>,
    /// Direction.
    pub kind: EventKind,
    /// Start time.
    pub start_time: f64,
    /// End time.
    pub end_time: f64,
    /// Speed at the start, r/min.
    pub speed_start_rpm: f64,
    /// Speed at the end, r/min.
    pub speed_end_rpm: f64,
    /// Mean sweep rate, r/min per second (negative on a coast-down).
    pub sweep_rate_rpm_s: f64,
    /// Vectors (revolutions or blocks) that went into the event.
    pub vector_count: u64,
    /// The channels, with their units.
    pub channels: Vec<EventChannelRow>,
}

/// One point of an nX response through an event: the Bode and polar data.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VectorPoint {
    /// Time of the vector.
    pub time: f64,
    /// Speed, r/min.
    pub speed_rpm: f64,
    /// The vector.
    pub vector: Polar,
}

/// The vectors of one channel, order and series of an event, in speed-sweep order.
#[derive(Clone, Debug, PartialEq)]
pub struct VectorTrace {
    /// Channel name.
    pub channel: String,
    /// The order n of nX (1 for 1X).
    pub order: u32,
    /// Measured or slow-roll compensated.
    pub series: Series,
    /// The points, in the order they were inserted.
    pub points: Vec<VectorPoint>,
}

/// One order spectrum of an order map: the amplitudes of orders `0, order_step, 2·order_step, …`.
#[derive(Clone, Debug, PartialEq)]
pub struct OrderMapRow {
    /// Channel name.
    pub channel: String,
    /// Time of the spectrum (mid-block).
    pub time: f64,
    /// Mean speed over the block, r/min.
    pub speed_rpm: f64,
    /// Order spacing of the bins.
    pub order_step: f64,
    /// Peak amplitude of each order bin, in the channel's units. Stored as a BLOB of little-endian
    /// f32, four bytes a bin.
    pub amplitudes: Vec<f32>,
}

/// An identified resonance (critical speed) in one channel of an event.
#[derive(Clone, Debug, PartialEq)]
pub struct ResonanceRow {
    /// Channel name.
    pub channel: String,
    /// The order n of the response it was found in (1 for 1X).
    pub order: u32,
    /// Speed of the amplitude peak, r/min: the critical speed.
    pub speed_rpm: f64,
    /// Amplitude at the peak, channel units.
    pub peak_amplitude: f64,
    /// Phase lag at the peak, degrees.
    pub phase_deg: f64,
    /// Change of phase lag through the resonance, degrees (about 90 on a clean mode).
    pub phase_change_deg: f64,
    /// Lower half-power speed, r/min.
    pub n1_rpm: Option<f64>,
    /// Upper half-power speed, r/min.
    pub n2_rpm: Option<f64>,
    /// Amplification factor, Nc/(N2 − N1).
    pub amplification_factor: Option<f64>,
    /// Damping ratio.
    pub damping_ratio: Option<f64>,
    /// A broad, well damped response rather than a sharp critical.
    pub heavily_damped: bool,
    /// Natural speed of the fitted mode, r/min, when the fit converged.
    pub natural_rpm: Option<f64>,
    /// Separation margin required for it, percent.
    pub required_margin_pct: Option<f64>,
    /// Separation margin it has from the operating range, percent (negative inside the range).
    pub actual_margin_pct: Option<f64>,
    /// The margin judgement, in the daemon's words.
    pub margin_verdict: Option<String>,
}

/// Where a critical-speed value comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum CriticalOrigin {
    /// A design value from the configuration: `design`.
    Design,
    /// Measured in an event: `measured`, with the event's id.
    Measured {
        /// The event it was measured in.
        event_id: i64,
    },
}

/// One value of a machine's critical-speed table.
///
/// The table keeps history: a new value of a mode is a new row with a later `valid_from`, and the
/// current value of a mode is its row with the latest `valid_from`.
#[derive(Clone, Debug, PartialEq)]
pub struct CriticalRow {
    /// Machine id.
    pub machine: String,
    /// Which critical: 1 for the first (lowest), 2 for the second, …
    pub mode: u32,
    /// Design or measured.
    pub origin: CriticalOrigin,
    /// Channel it was measured on, for measured values.
    pub channel: Option<String>,
    /// Critical speed, r/min.
    pub speed_rpm: f64,
    /// Amplification factor.
    pub amplification_factor: Option<f64>,
    /// Damping ratio.
    pub damping_ratio: Option<f64>,
    /// From when the value holds.
    pub valid_from: f64,
}

/// One steady-state trend point of a channel.
///
/// Raw rows have `samples = 1`; a row made by downsampling holds the vector mean of `samples` raw
/// rows, with the range of their overall levels.
#[derive(Clone, Debug, PartialEq)]
pub struct TrendRow {
    /// Machine id.
    pub machine: String,
    /// Channel name.
    pub channel: String,
    /// Time of the point.
    pub time: f64,
    /// Speed, r/min.
    pub speed_rpm: f64,
    /// The 1X vector.
    pub x1: Polar,
    /// The 2X vector, where tracked.
    pub x2: Option<Polar>,
    /// Overall vibration level, channel units.
    pub overall: Option<f64>,
    /// Lowest overall level among the rows averaged into this one (`None` on a raw row).
    pub overall_min: Option<f64>,
    /// Highest overall level among the rows averaged into this one (`None` on a raw row).
    pub overall_max: Option<f64>,
    /// Number of raw rows this row stands for.
    pub samples: u64,
}

/// An alert with its evidence.
#[derive(Clone, Debug, PartialEq)]
pub struct AlertRow {
    /// Machine id.
    pub machine: String,
    /// What the alert is about, in the daemon's words (e.g. `running-speed-margin`).
    pub kind: String,
    /// `warning` or `alarm`.
    pub severity: Severity,
    /// When it was raised.
    pub opened_at: f64,
    /// When it was cleared; `None` while open.
    pub closed_at: Option<f64>,
    /// One line for people.
    pub message: String,
    /// The evidence as JSON text (checked with SQLite's `json_valid`).
    pub evidence: Option<String>,
    /// The event that raised it, if any.
    pub event_id: Option<i64>,
}

impl AlertRow {
    /// Open until it has a closing time.
    pub fn state(&self) -> AlertState {
        if self.closed_at.is_some() {
            AlertState::Closed
        } else {
            AlertState::Open
        }
    }
}

/// A gap in a stream: frames dropped or corrupt between two times.
#[derive(Clone, Debug, PartialEq)]
pub struct GapRow {
    /// Machine id.
    pub machine: String,
    /// The ingest record of the stream segment, if any.
    pub ingest_id: Option<i64>,
    /// The port or file the stream came from.
    pub source: String,
    /// Time of the last good data before the gap.
    pub start_time: f64,
    /// Time of the first good data after the gap.
    pub end_time: f64,
    /// Frames missing (by sequence number).
    pub dropped_frames: u64,
    /// Frames received but refused (bad checksum, bad length).
    pub corrupt_frames: u64,
}

/// A change of a sensor's health.
#[derive(Clone, Debug, PartialEq)]
pub struct HealthRow {
    /// Machine id.
    pub machine: String,
    /// Channel name; `None` for the machine's data source as a whole.
    pub channel: Option<String>,
    /// When the change was seen.
    pub time: f64,
    /// The condition, in the daemon's words (e.g. `tach-lost`, `clipping`, `flat`).
    pub condition: String,
    /// Whether the condition has cleared (`true`) or has begun (`false`).
    pub healthy: bool,
    /// More detail for people.
    pub detail: Option<String>,
}

/// A live estimate of a critical speed, from data that is not a full run-up or coast-down.
///
/// The fields after `informative` say how the estimate was made, so a reader can judge it without
/// the data: they are `None` on rows written before they existed.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EstimateRow {
    /// The critical-table row being estimated.
    pub critical_id: i64,
    /// Time of the estimate (the middle of its window).
    pub time: f64,
    /// Estimated critical speed (the 1X amplitude peak, as the critical-table rows are), r/min.
    pub estimate_rpm: f64,
    /// Uncertainty (one standard deviation), r/min.
    pub uncertainty_rpm: Option<f64>,
    /// Whether the data constrained the estimate at all (a flat speed gives no information).
    pub informative: bool,
    /// Channel whose 1X vector the estimate was made from.
    pub channel: Option<String>,
    /// Mean running speed over the window, r/min.
    pub speed_rpm: Option<f64>,
    /// Estimated natural speed of the mode (90° of lag), r/min.
    pub natural_rpm: Option<f64>,
    /// Running speed over natural speed.
    pub speed_ratio: Option<f64>,
    /// What the estimate rests on: `phase`, `phase-and-amplitude`, `slope` or `locus`.
    pub method: Option<String>,
    /// Why the estimate is not informative (`not-steady`, `outside-model`, `off-locus`,
    /// `too-far-from-resonance`, `too-noisy`); `None` when it is.
    pub reason: Option<String>,
    /// What the window says changed since the model's event: `none`, `natural-speed`, `unbalance`.
    pub change: Option<String>,
    /// Distance of the window's vector from the model's locus, relative to the vector's size.
    pub locus_residual: Option<f64>,
    /// Revolutions averaged.
    pub revolutions: Option<u64>,
}

/// The single-mode model of a measured critical, from its event's fit: what live estimates of
/// that critical are made with, kept so that they can carry on after a restart.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelRow {
    /// The critical-table row it models.
    pub critical_id: i64,
    /// The name its live estimates and their alerts go by (`x:1`): kept by the models of the same
    /// mode from event to event, which an event's mode numbers are not (a run-up that misses the
    /// first mode numbers the second 1).
    pub track: String,
    /// Natural speed of the mode when it was fitted, r/min.
    pub natural_rpm: f64,
    /// Damping ratio.
    pub damping_ratio: f64,
    /// The mode's unbalance vector (its lag is the mode's lag well below the critical).
    pub modal: Polar,
    /// The fit's constant vector (residual runout, tails of other modes).
    pub background: Polar,
    /// The slow-roll vector subtracted before the fit.
    pub slow_roll: Polar,
    /// Rms of the fit's residual over its model's peak amplitude.
    pub fit_residual: Option<f64>,
}

/// What a downsampling pass did.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct DownsampleStats {
    /// Buckets that held more than one row and were merged into one.
    pub buckets_merged: u64,
    /// Rows deleted (the merged rows replace them: `rows_deleted − buckets_merged` fewer rows).
    pub rows_deleted: u64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polar_round_trip_keeps_lag_convention() {
        // A lag of 90° is a vector pointing along −j: the signal peaks a quarter turn after the
        // pulse (the phasor convention of the module doc).
        let (re, im) = Polar {
            amplitude: 2.0,
            phase_deg: 90.0,
        }
        .to_re_im();
        assert!(re.abs() < 1e-12 && (im + 2.0).abs() < 1e-12, "{re} {im}");
        for lag in [0.0, 0.5, 45.0, 179.0, 181.0, 270.0, 359.5] {
            let (re, im) = Polar {
                amplitude: 3.0,
                phase_deg: lag,
            }
            .to_re_im();
            let back = Polar::from_re_im(re, im);
            assert!((back.amplitude - 3.0).abs() < 1e-12);
            assert!(
                (back.phase_deg - lag).abs() < 1e-9,
                "{lag} -> {}",
                back.phase_deg
            );
        }
        let tiny = Polar::from_re_im(1.0, 1e-300);
        assert!((0.0..360.0).contains(&tiny.phase_deg));
    }
}
