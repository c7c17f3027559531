//! The command line, declared with clap's derive.

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

/// veer: finds critical speeds in run-ups and coast-downs and checks each machine's separation
/// margins. veer advises; it is not a machinery protection system.
#[derive(Debug, Parser)]
#[command(name = "veer", version, about, long_about = None)]
pub(crate) struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub(crate) enum Command {
    /// Simulate a machine of the demo plant through a run-up and coast-down and analyse it.
    Demo(DemoArgs),
    /// Analyse a recording (CSV or WAV): events, critical speeds, AF, damping and margins.
    Analyze(AnalyzeArgs),
    /// Read samples on stdin (CSV rows or a serial line format) and write results as JSON lines.
    Filter(FilterArgs),
    /// Write a synthetic recording (CSV or WAV) of a simulated machine.
    Simulate(SimulateArgs),
    /// Run the watch daemon: ingest every machine's folder or serial line, store, raise alerts.
    Watch(WatchArgs),
    /// Machines, current speed, margins to their criticals, open alerts, last data.
    Status(StatusArgs),
    /// The stored run-ups and coast-downs, one line each.
    Events(EventsArgs),
    /// One event in detail: each critical with AF, damping, margins and the 1X vector at speed.
    Show(ShowArgs),
    /// Draws an event as an SVG plot: Bode, polar or order map.
    Plot(PlotArgs),
    /// Writes one self-contained HTML review of an event, optionally against a baseline event.
    Report(ReportArgs),
    /// A machine's criticals with their history and margins, and recommended alarm settings.
    Margins(MarginsArgs),
}

#[derive(Debug, Args)]
pub(crate) struct WatchArgs {
    /// The plant configuration (TOML).
    #[arg(long)]
    pub config: PathBuf,
    /// Log as JSON lines instead of readable text.
    #[arg(long)]
    pub log_json: bool,
}

/// Where stored data is read from: a configuration (which names the database) or the database.
#[derive(Debug, Args, Clone)]
pub(crate) struct DbArgs {
    /// The plant configuration (TOML); the database it names is read.
    #[arg(long, conflicts_with = "db")]
    pub config: Option<PathBuf>,
    /// The database itself.
    #[arg(long)]
    pub db: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub(crate) struct StatusArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Which edge of the tach pulse counts.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub(crate) enum EdgeArg {
    /// The signal rising through the trigger level.
    Rising,
    /// The signal falling through the trigger level.
    Falling,
}

/// Options that shape the analysis, shared by `analyze` and `demo`.
#[derive(Debug, Args, Clone)]
pub(crate) struct TrackArgs {
    /// Tach pulses per revolution (tooth positions, counting a gap's missing teeth).
    #[arg(long, default_value_t = 1)]
    pub ppr: u32,
    /// Teeth missing on purpose at the reference (1 for a 60-1 wheel).
    #[arg(long, default_value_t = 0)]
    pub gap_teeth: u32,
    /// Which tach edge marks a pulse.
    #[arg(long, value_enum, default_value_t = EdgeArg::Rising)]
    pub edge: EdgeArg,
    /// Fixed tach trigger level (otherwise learnt from the signal).
    #[arg(long)]
    pub tach_level: Option<f32>,
    /// Lowest plausible speed, r/min.
    #[arg(long, default_value_t = 30.0)]
    pub min_speed: f64,
    /// Highest plausible speed, r/min.
    #[arg(long, default_value_t = 60_000.0)]
    pub max_speed: f64,
    /// Unit of the vibration channels after --scale: um, mil, mm/s, in/s, g, m/s2 (one, or one per channel).
    #[arg(long, default_value = "um", value_delimiter = ',')]
    pub units: Vec<String>,
    /// How amplitudes are stated: pk-pk, pk or rms (default: the trade's usual one for the unit).
    #[arg(long)]
    pub detection: Option<String>,
    /// Engineering units per file unit (one, or one per channel).
    #[arg(long, default_value = "1", value_delimiter = ',')]
    pub scale: Vec<f64>,
    /// Orders to compute as vectors.
    #[arg(long, default_value = "1,2", value_delimiter = ',')]
    pub orders: Vec<u32>,
    /// Revolutions per vector.
    #[arg(long, default_value_t = 1)]
    pub revs_per_vector: u32,
    /// Slow-roll compensation: auto, off, or a speed window MIN:MAX in r/min.
    #[arg(long, default_value = "auto")]
    pub slow_roll: String,
    /// Operating range MIN:MAX in r/min (minimum operating speed : maximum continuous speed), to judge margins.
    #[arg(long)]
    pub range: Option<String>,
    /// Margin rule: api (API 684 2nd ed. / API 617 7th ed.), api-1996 (the older edition), or a percentage.
    #[arg(long, default_value = "api")]
    pub margin: String,
    /// Warning band, points before the required margin.
    #[arg(long, default_value_t = 5.0)]
    pub warn_band: f64,
    /// Skip the order map (order spectra).
    #[arg(long)]
    pub no_order_map: bool,
}

#[derive(Debug, Args)]
pub(crate) struct AnalyzeArgs {
    /// The recording: CSV with a header row, or WAV.
    pub file: PathBuf,
    /// Tach column: header name or 0-based index.
    #[arg(long)]
    pub tach: String,
    /// Vibration columns: names or 0-based indices, comma separated.
    #[arg(long, value_delimiter = ',', required = true)]
    pub vib: Vec<String>,
    /// Sample rate, Hz (when the CSV has no time column, or to override the file).
    #[arg(long)]
    pub rate: Option<f64>,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Print throughput figures (time, samples/s, MB/s, peak memory) on stderr.
    #[arg(long)]
    pub bench: bool,
    #[command(flatten)]
    pub track: TrackArgs,
}

#[derive(Debug, Args)]
pub(crate) struct SimulateArgs {
    /// Output file; the format follows the extension (.csv or .wav).
    #[arg(long, short, required_unless_present = "list")]
    pub out: Option<PathBuf>,
    /// Machine of the demo plant to simulate (see `veer simulate --list`).
    #[arg(long, default_value = "comp-3")]
    pub machine: String,
    /// List the machines and exit.
    #[arg(long)]
    pub list: bool,
    /// Speed profile as TIME:RPM breakpoints, e.g. 0:300,10:300,70:4500,80:4500,160:0.
    #[arg(long)]
    pub profile: Option<String>,
    /// Sample rate, Hz.
    #[arg(long, default_value_t = 25_600.0)]
    pub rate: f64,
    /// Tach pulses per revolution.
    #[arg(long)]
    pub ppr: Option<u32>,
    /// Tach teeth missing at the reference (a 60-1 wheel: --ppr 60 --gap-teeth 1).
    #[arg(long, default_value_t = 0)]
    pub gap_teeth: u32,
    /// R.m.s. jitter of the tach edges, µs.
    #[arg(long, default_value_t = 0.0)]
    pub jitter_us: f64,
    /// Noise r.m.s. added to every vibration channel, channel units.
    #[arg(long)]
    pub noise: Option<f64>,
    /// 1X runout amplitude (peak), channel units.
    #[arg(long)]
    pub runout: Option<f64>,
    /// A stray fixed-frequency tone HZ:AMPLITUDE added to every channel.
    #[arg(long)]
    pub tone: Option<String>,
    /// Seed of noise and jitter.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// WAV sample format: f32 or pcm16.
    #[arg(long, default_value = "f32")]
    pub wav_format: String,
    /// For pcm16 WAV: the sample value stored as full scale (values beyond are clipped).
    #[arg(long, default_value_t = 1000.0)]
    pub full_scale: f32,
    /// Write the byte stream a data logger would send on a serial line instead of a CSV or WAV
    /// file: `text` lines or binary `frames` (see docs/serial-format.md), whatever the extension.
    #[arg(long, value_parser = ["text", "frames"])]
    pub serial: Option<String>,
    /// Replicate the machine's first vibration channel into N channels named ch01..chNN, their
    /// probes spread 360/N degrees apart and each with its own noise, to simulate a machine with
    /// many sensors (load and throughput tests of the daemon).
    #[arg(long, value_parser = clap::value_parser!(u16).range(1..=255))]
    pub channels: Option<u16>,
    /// Natural speed of the first mode of every channel, r/min, in place of the machine's: puts
    /// its critical where a test wants it (e.g. 1885 on fan-2, 1.30 times its 1450 r/min).
    #[arg(long, value_name = "RPM")]
    pub natural_rpm: Option<f64>,
    /// Let the natural speed of every mode of every channel move linearly in time over the
    /// recording, to P percent away from its starting value at the end of the speed profile
    /// (negative: it falls, as when a bearing wears or a support loosens). The damping ratio
    /// stays the same, so the critical speed drifts with it.
    #[arg(long, value_name = "P", allow_negative_numbers = true)]
    pub natural_drift_pct: Option<f64>,
    /// Turn the heavy spot of every mode by DEG degrees (against rotation) at SECONDS into the
    /// recording, e.g. 30@120, with the eccentricity unchanged: a piece thrown, a deposit
    /// shifted. The 1X lag moves by about DEG once the mode has settled.
    #[arg(long, value_name = "DEG@SECONDS", allow_hyphen_values = true)]
    pub unbalance_turn: Option<String>,
}

#[derive(Debug, Args)]
pub(crate) struct DemoArgs {
    /// Analyse only this machine of the demo plant (tg-1, comp-3, fan-2). Without it, tg-1 is
    /// analysed and then the whole plant runs through the daemon.
    #[arg(long)]
    pub machine: Option<String>,
    /// Folder for the plant's configuration, recordings and database (default: a new folder
    /// under the system's temporary folder).
    #[arg(long)]
    pub dir: Option<std::path::PathBuf>,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `veer events`.
#[derive(Debug, Args)]
pub(crate) struct EventsArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// Only this machine's events.
    #[arg(long)]
    pub machine: Option<String>,
    /// Only events starting at or after this time: YYYY-MM-DD or an RFC 3339 time (UTC).
    #[arg(long)]
    pub since: Option<String>,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `veer show`.
#[derive(Debug, Args)]
pub(crate) struct ShowArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// The event id (see `veer events`).
    pub event: i64,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Which plot `veer plot` draws.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub(crate) enum PlotKind {
    /// 1X amplitude and phase lag against speed.
    Bode,
    /// The compensated 1X vector as speed changes.
    Polar,
    /// Order-spectrum amplitude over speed, as a colour map.
    OrderMap,
}

/// Arguments of `veer plot`.
#[derive(Debug, Args)]
pub(crate) struct PlotArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// The event id (see `veer events`).
    pub event: i64,
    /// Which plot.
    #[arg(long, value_enum)]
    pub kind: PlotKind,
    /// Only this channel (default: every channel of the event, one panel each).
    #[arg(long)]
    pub channel: Option<String>,
    /// The SVG file to write.
    #[arg(long)]
    pub out: PathBuf,
}

/// Arguments of `veer report`.
#[derive(Debug, Args)]
pub(crate) struct ReportArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// The event id (see `veer events`).
    pub event: i64,
    /// An earlier event of the same machine to compare with.
    #[arg(long)]
    pub baseline: Option<i64>,
    /// The HTML file to write.
    #[arg(long)]
    pub out: PathBuf,
}

/// Arguments of `veer margins`.
#[derive(Debug, Args)]
pub(crate) struct MarginsArgs {
    #[command(flatten)]
    pub source: DbArgs,
    /// The machine id.
    pub machine: String,
    /// Casing-vibration zone table for velocity channels (ISO 10816-3 / 20816-3 Annex A): machine
    /// group and support, g1-rigid, g1-flexible, g2-rigid or g2-flexible.
    #[arg(long, default_value = "g2-rigid", value_parser = ["g1-rigid", "g1-flexible", "g2-rigid", "g2-flexible"])]
    pub zones: String,
    /// Print one JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Also write the live critical-speed estimates over time as an SVG plot to this file.
    #[arg(long)]
    pub plot: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub(crate) struct FilterArgs {
    /// What stdin carries: csv (a header row, then one row per sample instant), or veer's serial
    /// line formats text or frames (see docs/serial-format.md).
    #[arg(long, default_value = "csv", value_parser = ["csv", "text", "frames"])]
    pub format: String,
    /// Tach column: header name or 0-based index (serial formats: a name from --channels).
    #[arg(long)]
    pub tach: String,
    /// Vibration columns: names or 0-based indices, comma separated.
    #[arg(long, value_delimiter = ',', required = true)]
    pub vib: Vec<String>,
    /// Sample rate, Hz (needed for CSV without a time column, and for the serial formats).
    #[arg(long)]
    pub rate: Option<f64>,
    /// Serial formats: the channel names in the order the logger sends them.
    #[arg(long, value_delimiter = ',')]
    pub channels: Vec<String>,
    /// Leave out the per-revolution lines (state changes and events only).
    #[arg(long)]
    pub no_revolutions: bool,
    #[command(flatten)]
    pub track: TrackArgs,
}
