//! The validated configuration: what the rest of the daemon reads.
//!
//! Every value here has been checked and put in its working form (paths resolved against the
//! configuration file's folder, units and margin rules parsed, tach settings in the engine's own
//! struct), so no other part of the daemon parses text from the file or re-checks a range.

use serde::Deserialize;
use std::path::PathBuf;
use veer_tracker::config::SlowRoll;
use veer_tracker::margin::MarginRule;
use veer_tracker::tach::TachConfig;
use veer_tracker::units::{Amplitude, SensorKind};

/// A loaded, validated configuration.
#[derive(Clone, Debug)]
pub(crate) struct Config {
    /// The configuration file, as given.
    pub path: PathBuf,
    /// The SQLite database, resolved against the configuration file's folder.
    pub database: PathBuf,
    /// Settings of the daemon itself.
    pub daemon: DaemonSettings,
    /// The machines, in file order.
    pub machines: Vec<Machine>,
}

impl Config {
    /// The machine with this id.
    pub fn machine(&self, id: &str) -> Option<&Machine> {
        self.machines.iter().find(|m| m.id == id)
    }
}

/// How the daemon writes its log.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(crate) enum LogFormat {
    /// Readable lines, for a terminal or the journal.
    #[default]
    Human,
    /// One JSON object per line, for a log collector.
    Json,
}

/// `[daemon]`: settings that are not about one machine.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct DaemonSettings {
    /// Log format.
    pub log_format: LogFormat,
    /// Time between stored trend points (speed, nX) at steady running, s. Sweeps are stored per
    /// speed bin whatever this is.
    pub trend_interval_s: f64,
    /// Age after which trend points are merged into buckets, days: recent data at full detail,
    /// years of history in bounded space.
    pub trend_downsample_after_days: f64,
    /// Width of those buckets, minutes.
    pub trend_bucket_min: f64,
    /// Capacities of the bounded queues between tasks.
    pub queues: QueueSizes,
}

/// Capacities of the bounded channels between the daemon's tasks. Bounded so that a slow stage
/// pushes back on its source rather than growing memory without limit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct QueueSizes {
    /// Sample blocks from each source to its machine's engine.
    pub blocks: usize,
    /// Results from the engines to the storage writer.
    pub records: usize,
    /// Alerts to the outputs.
    pub alerts: usize,
}

/// One monitored machine.
#[derive(Clone, Debug)]
pub(crate) struct Machine {
    /// Short id, used in file names, the database and the command line: `[a-z0-9_-]`.
    pub id: String,
    /// Name for reports (the id when none is given).
    pub name: String,
    /// Minimum operating speed, r/min.
    pub min_operating_rpm: f64,
    /// Maximum continuous speed (MCS), r/min.
    pub max_continuous_rpm: f64,
    /// Trip speed, r/min, if known (reports show it; veer never trips anything).
    pub trip_rpm: Option<f64>,
    /// Where the samples come from.
    pub source: Source,
    /// The tach channel and how to decode it.
    pub tach: Tach,
    /// Vibration channels.
    pub sensors: Vec<Sensor>,
    /// Critical speeds known from design or test; measured ones are added by the daemon.
    pub criticals: Vec<Critical>,
    /// Order-tracking settings.
    pub tracking: Tracking,
    /// Alert rules and outputs.
    pub alerts: Alerts,
    /// Where the machine was read from, for errors found later (in `engine_config`).
    pub(super) file: PathBuf,
    /// Index in the file's `[[machine]]` array.
    pub(super) index: usize,
}

/// Where a machine's samples come from.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum Source {
    /// Capture files (CSV or WAV) dropped into a folder.
    Folder(FolderSource),
    /// A data logger streaming on a serial line.
    Serial(SerialSource),
}

/// A watched folder.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct FolderSource {
    /// The folder, resolved against the configuration file's folder. Not required to exist: the
    /// daemon creates it.
    pub path: PathBuf,
    /// File-name patterns (`*` and `?` wildcards) of the files to read; others are ignored.
    pub patterns: Vec<String>,
    /// Sample rate to assume, Hz, for CSV files without a `time` column; `None` to require one.
    pub sample_rate: Option<f64>,
    /// How long a file must stay unchanged before it is read, s: covers writers that do not close
    /// the file in one go.
    pub settle_s: f64,
    /// Where files that cannot be decoded are moved, so that they are neither lost nor retried.
    pub failed_dir: PathBuf,
}

/// How a logger frames its samples on the serial line.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(crate) enum SerialFormat {
    /// One line of comma-separated numbers per sample instant.
    #[default]
    Text,
    /// Binary frames.
    Frames,
}

/// A serial line.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct SerialSource {
    /// The port, e.g. `/dev/ttyUSB0`.
    pub port: String,
    /// Line speed, baud.
    pub baud: u32,
    /// Framing.
    pub format: SerialFormat,
    /// Samples per second per channel, Hz.
    pub sample_rate: f64,
    /// Names of the channels in the order the logger sends them.
    pub channels: Vec<String>,
    /// Longest wait between reconnection attempts, s (the wait doubles from 1 s up to this).
    pub reconnect_max_s: f64,
}

/// The tach channel and its decoder settings.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Tach {
    /// Channel name in the recording or the serial channel list.
    pub channel: String,
    /// The engine's tach settings, validated.
    pub decoder: TachConfig,
}

/// A vibration channel.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Sensor {
    /// Channel name in the recording or the serial channel list.
    pub channel: String,
    /// What the sensor measures (agrees with the unit).
    pub kind: SensorKind,
    /// Unit and detection amplitudes are stated in.
    pub amplitude: Amplitude,
    /// Engineering units per input unit.
    pub scale: f64,
    /// Mounting angle, degrees in the direction of rotation from the reference mark.
    pub angle_deg: f64,
    /// 1X amplitude that raises a warning, in the channel's unit and detection.
    pub warning_1x: Option<f64>,
    /// 1X amplitude that raises an alarm, in the channel's unit and detection.
    pub alarm_1x: Option<f64>,
}

/// Where a configured critical speed comes from.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum CriticalOrigin {
    /// A rotordynamic analysis or the machine builder's data.
    #[default]
    Design,
    /// The builder's shop test.
    ShopTest,
    /// Measured on site before veer watched the machine.
    Measured,
}

impl CriticalOrigin {
    /// The name as written in the file and stored.
    pub fn name(self) -> &'static str {
        match self {
            CriticalOrigin::Design => "design",
            CriticalOrigin::ShopTest => "shop-test",
            CriticalOrigin::Measured => "measured",
        }
    }
}

/// A known critical speed.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Critical {
    /// Speed, r/min.
    pub rpm: f64,
    /// Amplification factor, if known; without it an API rule asks its largest margin.
    pub af: Option<f64>,
    /// Where the figure comes from.
    pub origin: CriticalOrigin,
    /// Free text (mode, report reference).
    pub note: Option<String>,
}

/// Order-tracking settings of one machine.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Tracking {
    /// Whole-number orders tracked (1 for 1X, ...).
    pub orders: Vec<u32>,
    /// Revolutions per vector.
    pub revs_per_vector: u32,
    /// Slow-roll compensation.
    pub slow_roll: SlowRoll,
    /// Whether order spectra (the order map) are computed.
    pub order_map: bool,
    /// Width of the speed bins of an event's response, percent of speed.
    pub bin_pct: f64,
}

/// Alert severities, in rising order.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(crate) enum Severity {
    /// Attention needed soon.
    #[default]
    Warning,
    /// Attention needed now.
    Alarm,
}

/// Where alerts go.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum OutputKind {
    /// The daemon's log.
    Log,
    /// One JSON document per line appended to a file (resolved against the configuration folder).
    Jsonl {
        /// The file.
        path: PathBuf,
    },
    /// A program run directly, without a shell, for each alert.
    Command {
        /// Program and arguments; a relative program path with a `/` is resolved against the
        /// configuration folder, a bare name is looked up on `PATH`.
        argv: Vec<String>,
        /// Time after which the program is killed, s.
        timeout_s: f64,
    },
}

/// One alert output.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Output {
    /// Where the alerts go.
    pub kind: OutputKind,
    /// Least severity sent to it.
    pub min_severity: Severity,
}

/// Alert rules of one machine.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Alerts {
    /// The separation-margin rule.
    pub margin: MarginRule,
    /// Points before the required margin at which a warning is given.
    pub warn_band_pct: f64,
    /// Alert when the trend would breach the margin within this time, minutes (0: off).
    pub drift_horizon_min: f64,
    /// Length of the history the drift is fitted over, minutes.
    pub drift_window_min: f64,
    /// How long a condition must last before it is alerted, s.
    pub delay_s: f64,
    /// Points a margin must recover beyond its threshold before an alert clears.
    pub hysteresis_pct: f64,
    /// Alert when a measured critical moves this far from its design or baseline speed, percent.
    pub critical_shift_pct: f64,
    /// Factor on the 1X warning and alarm levels while the machine speeds up or slows down below
    /// its minimum operating speed, i.e. while it passes its criticals (1: no change).
    pub startup_multiplier: f64,
    /// Estimate each measured critical at steady speed from the 1X vector, between run-ups.
    pub estimate_critical: bool,
    /// Length of one estimate's averaging window, s.
    pub estimate_window_s: f64,
    /// History the estimated critical's trend is fitted over, minutes.
    pub estimate_trend_min: f64,
    /// Standard deviations by which an estimate is moved towards the range before it is held to
    /// the margin.
    pub estimate_sigmas: f64,
    /// Where alerts go.
    pub outputs: Vec<Output>,
}
