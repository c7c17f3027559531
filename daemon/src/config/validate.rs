//! From the file as written to the validated model: every check that needs more than a type.
//!
//! Checks run in file order and stop at the first mistake, naming its key, so that fixing the
//! file top to bottom converges. Folders are not required to exist (the daemon creates them), and
//! serial ports are not opened: a configuration can be checked on another machine than the one it
//! runs on.

use super::error::ConfigError;
use super::key::KeyPath;
use super::model::{
    Alerts, Config, Critical, DaemonSettings, FolderSource, Machine, Output, OutputKind, QueueSizes,
    SerialSource, Sensor, Source, Tach, Tracking,
};
use super::raw::{
    RawAlerts, RawConfig, RawCritical, RawDaemon, RawEdge, RawKind, RawMachine, RawOutput,
    RawSensor, RawSlowRoll, RawSource, RawTach, RawTracking,
};
use std::collections::HashSet;
use std::path::{Path, PathBuf};
use veer_tracker::config::SlowRoll;
use veer_tracker::margin::MarginRule;
use veer_tracker::tach::{Edge, TachConfig, TachLevels};
use veer_tracker::units::{Amplitude, Detection, SensorKind, Unit};

/// Longest machine id: ids become file names and database keys.
const MAX_ID_LEN: usize = 64;

/// Default upper end of the plausible tach speed, as a multiple of the highest speed the machine
/// is specified to reach (trip, else MCS): room for an overspeed test, yet tight enough that a
/// doubled pulse cannot pass for a real speed.
const TACH_MAX_FACTOR: f64 = 1.5;

/// The context every check needs: which file, and the folder relative paths start from.
struct Checker<'a> {
    file: &'a Path,
    base: PathBuf,
}

type Result<T> = std::result::Result<T, ConfigError>;

impl Checker<'_> {
    fn bad(&self, key: &KeyPath, reason: impl Into<String>) -> ConfigError {
        ConfigError::Invalid {
            file: self.file.to_path_buf(),
            key: key.clone(),
            reason: reason.into(),
        }
    }

    /// A path from the file, resolved against the configuration file's folder.
    fn resolve(&self, key: &KeyPath, text: &str) -> Result<PathBuf> {
        if text.trim().is_empty() {
            return Err(self.bad(key, "must not be empty"));
        }
        let p = Path::new(text);
        Ok(if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.base.join(p)
        })
    }

    /// `lo < v ≤ hi` (also refuses NaN and infinities).
    fn above(&self, key: &KeyPath, v: f64, lo: f64, hi: f64, reason: &str) -> Result<()> {
        if v > lo && v <= hi {
            Ok(())
        } else {
            Err(self.bad(key, format!("{reason} (got {v})")))
        }
    }

    /// `lo ≤ v ≤ hi` (also refuses NaN and infinities).
    fn within(&self, key: &KeyPath, v: f64, lo: f64, hi: f64, reason: &str) -> Result<()> {
        if v >= lo && v <= hi {
            Ok(())
        } else {
            Err(self.bad(key, format!("{reason} (got {v})")))
        }
    }
}

/// Validates a whole file read from `origin`.
pub(super) fn config(raw: RawConfig, origin: &Path) -> Result<Config> {
    let c = Checker {
        file: origin,
        base: origin.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    let root = KeyPath::root();
    let database = c.resolve(&root.key("database"), &raw.database)?;
    let daemon = daemon(&c, &raw.daemon)?;
    if raw.machines.is_empty() {
        return Err(c.bad(&root.key("machine"), "no [[machine]] table: describe at least one machine"));
    }
    let mut machines = Vec::with_capacity(raw.machines.len());
    let mut ids = HashSet::new();
    let mut folders = HashSet::new();
    let mut ports = HashSet::new();
    for (i, rm) in raw.machines.into_iter().enumerate() {
        let m = machine(&c, i, rm)?;
        let key = KeyPath::machine(i, &m.id);
        if !ids.insert(m.id.clone()) {
            return Err(c.bad(&key.key("id"), format!("`{}` is used by an earlier machine; ids must be unique", m.id)));
        }
        let clash = match &m.source {
            Source::Folder(f) => !folders.insert(f.path.clone()),
            Source::Serial(s) => !ports.insert(s.port.clone()),
        };
        if clash {
            return Err(c.bad(&key.key("source"), "an earlier machine reads the same folder or port"));
        }
        // The engine's own checks, so that `engine_config` cannot fail on a loaded configuration.
        m.engine_config()?;
        machines.push(m);
    }
    Ok(Config {
        path: origin.to_path_buf(),
        database,
        daemon,
        machines,
    })
}

fn daemon(c: &Checker, d: &RawDaemon) -> Result<DaemonSettings> {
    let key = KeyPath::root().key("daemon");
    c.above(&key.key("trend_interval_s"), d.trend_interval_s, 0.0, 86_400.0, "must be between 0 and 86400 s")?;
    c.above(
        &key.key("trend_downsample_after_days"),
        d.trend_downsample_after_days,
        0.0,
        36_500.0,
        "must be a positive number of days",
    )?;
    c.above(&key.key("trend_bucket_min"), d.trend_bucket_min, 0.0, 10_080.0, "must be between 0 and 10080 minutes")?;
    if d.trend_bucket_min * 60.0 < d.trend_interval_s {
        return Err(c.bad(&key.key("trend_bucket_min"), "must be at least trend_interval_s long, or a bucket holds no point"));
    }
    let q = &d.queues;
    let qkey = key.key("queues");
    for (name, n) in [("blocks", q.blocks), ("records", q.records), ("alerts", q.alerts)] {
        if !(1..=1_000_000).contains(&n) {
            return Err(c.bad(&qkey.key(name), format!("must be between 1 and 1000000 (got {n})")));
        }
    }
    Ok(DaemonSettings {
        log_format: d.log_format,
        trend_interval_s: d.trend_interval_s,
        trend_downsample_after_days: d.trend_downsample_after_days,
        trend_bucket_min: d.trend_bucket_min,
        queues: QueueSizes {
            blocks: q.blocks,
            records: q.records,
            alerts: q.alerts,
        },
    })
}

/// Whether an id is safe as a file name, a database key and a command-line argument.
fn id_is_safe(id: &str) -> bool {
    let mut chars = id.chars();
    let first_ok = chars
        .next()
        .is_some_and(|c| c.is_ascii_lowercase() || c.is_ascii_digit());
    first_ok
        && id.len() <= MAX_ID_LEN
        && id
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-' || c == '_')
}

fn machine(c: &Checker, index: usize, m: RawMachine) -> Result<Machine> {
    let key = KeyPath::machine(index, &m.id);
    if !id_is_safe(&m.id) {
        return Err(c.bad(
            &key.key("id"),
            format!("`{}` is not a usable id: use 1 to {MAX_ID_LEN} of a-z, 0-9, - and _, starting with a letter or digit", m.id.escape_debug()),
        ));
    }
    let name = match m.name {
        Some(n) if n.trim().is_empty() => return Err(c.bad(&key.key("name"), "must not be empty (leave it out to use the id)")),
        Some(n) => n.trim().to_string(),
        None => m.id.clone(),
    };
    c.above(&key.key("min_operating_rpm"), m.min_operating_rpm, 0.0, 1e6, "must be a positive speed")?;
    if !(m.max_continuous_rpm > m.min_operating_rpm && m.max_continuous_rpm <= 1e6) {
        return Err(c.bad(
            &key.key("max_continuous_rpm"),
            format!("must be above min_operating_rpm ({} r/min; got {})", m.min_operating_rpm, m.max_continuous_rpm),
        ));
    }
    if let Some(trip) = m.trip_rpm {
        if !(trip > m.max_continuous_rpm && trip <= 1e6) {
            return Err(c.bad(
                &key.key("trip_rpm"),
                format!("must be above max_continuous_rpm ({} r/min; got {trip})", m.max_continuous_rpm),
            ));
        }
    }
    let top_rpm = m.trip_rpm.unwrap_or(m.max_continuous_rpm);
    let tach = tach(c, &key.key("tach"), &m.tach, m.min_operating_rpm, top_rpm)?;
    let sensors = sensors(c, &key.key("sensors"), &m.sensors, &tach.channel)?;
    let criticals = m
        .criticals
        .iter()
        .enumerate()
        .map(|(i, r)| critical(c, &key.key("criticals").index(i), r))
        .collect::<Result<Vec<_>>>()?;
    let tracking = tracking(c, &key.key("tracking"), &m.tracking, m.min_operating_rpm)?;
    let source = source(c, &key, m.source, &tach, &sensors, &tracking, top_rpm)?;
    let alerts = alerts(c, &key.key("alerts"), m.alerts)?;
    Ok(Machine {
        id: m.id,
        name,
        min_operating_rpm: m.min_operating_rpm,
        max_continuous_rpm: m.max_continuous_rpm,
        trip_rpm: m.trip_rpm,
        source,
        tach,
        sensors,
        criticals,
        tracking,
        alerts,
        file: c.file.to_path_buf(),
        index,
    })
}

fn channel_name(c: &Checker, key: &KeyPath, name: &str) -> Result<String> {
    let n = name.trim();
    if n.is_empty() {
        return Err(c.bad(key, "must name a channel"));
    }
    Ok(n.to_string())
}

fn tach(c: &Checker, key: &KeyPath, t: &RawTach, min_operating: f64, top_rpm: f64) -> Result<Tach> {
    let channel = channel_name(c, &key.key("channel"), &t.channel)?;
    if !(1..=4096).contains(&t.ppr) {
        return Err(c.bad(&key.key("ppr"), format!("must be between 1 and 4096 (got {})", t.ppr)));
    }
    if t.gap_teeth > 0 && (t.ppr < 4 || t.gap_teeth > t.ppr - 3) {
        return Err(c.bad(&key.key("gap_teeth"), "must leave at least 3 teeth on the wheel (ppr counts the missing teeth too)"));
    }
    let edge = match t.edge {
        RawEdge::Rising => Edge::Rising,
        RawEdge::Falling => Edge::Falling,
    };
    let levels = match (t.trigger, t.rearm) {
        (None, None) => None,
        (Some(_), None) => return Err(c.bad(&key.key("rearm"), "give rearm with trigger (or neither, to learn the levels)")),
        (None, Some(_)) => return Err(c.bad(&key.key("trigger"), "give trigger with rearm (or neither, to learn the levels)")),
        (Some(trigger), Some(rearm)) => {
            if !(trigger.is_finite() && rearm.is_finite()) {
                return Err(c.bad(&key.key("trigger"), "trigger and rearm must be finite"));
            }
            let ok = match edge {
                Edge::Rising => rearm < trigger,
                Edge::Falling => rearm > trigger,
            };
            if !ok {
                let side = if edge == Edge::Rising { "below" } else { "above" };
                return Err(c.bad(&key.key("rearm"), format!("must be {side} trigger for a {edge:?} edge (the signal passes it before the next pulse)").to_lowercase()));
            }
            Some(TachLevels { trigger, rearm })
        }
    };
    let defaults = TachConfig::default();
    let hysteresis = t.hysteresis.unwrap_or(defaults.hysteresis);
    if !(hysteresis > 0.0 && hysteresis < 0.5) {
        return Err(c.bad(&key.key("hysteresis"), format!("must be between 0 and 0.5 of the signal span (got {hysteresis})")));
    }
    let min_rpm = t.min_rpm.unwrap_or(defaults.min_rpm.min(0.5 * min_operating));
    if !(min_rpm > 0.0 && min_rpm < min_operating) {
        return Err(c.bad(&key.key("min_rpm"), format!("must be a positive speed below min_operating_rpm ({min_operating} r/min; got {min_rpm})")));
    }
    let max_rpm = t.max_rpm.unwrap_or(TACH_MAX_FACTOR * top_rpm);
    if !(max_rpm > top_rpm && max_rpm.is_finite()) {
        return Err(c.bad(
            &key.key("max_rpm"),
            format!("must be above the highest speed the machine reaches ({top_rpm} r/min, trip or else max continuous; got {max_rpm})"),
        ));
    }
    Ok(Tach {
        channel,
        decoder: TachConfig {
            ppr: t.ppr,
            gap_teeth: t.gap_teeth,
            edge,
            levels,
            hysteresis,
            min_rpm,
            max_rpm,
            ..defaults
        },
    })
}

fn sensors(c: &Checker, key: &KeyPath, list: &[RawSensor], tach_channel: &str) -> Result<Vec<Sensor>> {
    if list.is_empty() {
        return Err(c.bad(key, "list at least one vibration sensor"));
    }
    let mut seen = HashSet::new();
    let mut out = Vec::with_capacity(list.len());
    for (i, s) in list.iter().enumerate() {
        let k = key.index(i);
        let channel = channel_name(c, &k.key("channel"), &s.channel)?;
        if channel == tach_channel {
            return Err(c.bad(&k.key("channel"), format!("`{channel}` is the tach channel")));
        }
        if !seen.insert(channel.clone()) {
            return Err(c.bad(&k.key("channel"), format!("`{channel}` is listed twice")));
        }
        out.push(sensor(c, &k, s, channel)?);
    }
    Ok(out)
}

fn sensor(c: &Checker, k: &KeyPath, s: &RawSensor, channel: String) -> Result<Sensor> {
    let unit = Unit::parse(&s.units).map_err(|e| c.bad(&k.key("units"), e.to_string()))?;
    let kind = match s.kind {
        None => unit.kind(),
        Some(raw) => {
            let kind = match raw {
                RawKind::Displacement => SensorKind::Displacement,
                RawKind::Velocity => SensorKind::Velocity,
                RawKind::Acceleration => SensorKind::Acceleration,
            };
            if kind != unit.kind() {
                return Err(c.bad(&k.key("units"), format!("`{}` is a {:?} unit, but kind is {:?}", s.units, unit.kind(), kind).to_lowercase()));
            }
            kind
        }
    };
    let detection = match &s.detection {
        None => unit.usual_detection(),
        Some(d) => Detection::parse(d).map_err(|e| c.bad(&k.key("detection"), e.to_string()))?,
    };
    if !(s.scale.is_finite() && s.scale != 0.0) {
        return Err(c.bad(&k.key("scale"), format!("must be a finite, non-zero factor (got {})", s.scale)));
    }
    c.within(&k.key("angle_deg"), s.angle_deg, -360.0, 360.0, "must be between -360 and 360 degrees")?;
    for (name, level) in [("warning_1x", s.warning_1x), ("alarm_1x", s.alarm_1x)] {
        if let Some(v) = level {
            c.above(&k.key(name), v, 0.0, f64::MAX, "must be a positive amplitude")?;
        }
    }
    if let (Some(w), Some(a)) = (s.warning_1x, s.alarm_1x) {
        if !(a > w) {
            return Err(c.bad(&k.key("alarm_1x"), format!("must be above warning_1x ({w}; got {a})")));
        }
    }
    Ok(Sensor {
        channel,
        kind,
        amplitude: Amplitude { unit, detection },
        scale: s.scale,
        angle_deg: s.angle_deg,
        warning_1x: s.warning_1x,
        alarm_1x: s.alarm_1x,
    })
}

fn critical(c: &Checker, k: &KeyPath, r: &RawCritical) -> Result<Critical> {
    c.above(&k.key("rpm"), r.rpm, 0.0, 1e6, "must be a positive speed")?;
    if let Some(af) = r.af {
        // AF = Nc/(N2 − N1) is at least about 1 for any peak that has half-power points (API RP 684
        // definition, REFERENCES §1.1); a smaller figure is a typing mistake.
        c.within(&k.key("af"), af, 1.0, 1000.0, "must be at least 1 (leave it out when unknown)")?;
    }
    Ok(Critical {
        rpm: r.rpm,
        af: r.af,
        origin: r.origin,
        note: r.note.clone(),
    })
}

fn tracking(c: &Checker, k: &KeyPath, t: &RawTracking, min_operating: f64) -> Result<Tracking> {
    if t.orders.is_empty() || t.orders.len() > 16 {
        return Err(c.bad(&k.key("orders"), "list 1 to 16 orders"));
    }
    let mut seen = HashSet::new();
    for &n in &t.orders {
        if n == 0 || n > 64 {
            return Err(c.bad(&k.key("orders"), format!("orders are whole numbers from 1 to 64 (got {n})")));
        }
        if !seen.insert(n) {
            return Err(c.bad(&k.key("orders"), format!("{n} is listed twice")));
        }
    }
    if !(1..=10_000).contains(&t.revs_per_vector) {
        return Err(c.bad(&k.key("revs_per_vector"), format!("must be between 1 and 10000 (got {})", t.revs_per_vector)));
    }
    let slow_roll = match t.slow_roll {
        RawSlowRoll::Auto => SlowRoll::Auto,
        RawSlowRoll::Off => SlowRoll::Off,
        RawSlowRoll::Window { min_rpm, max_rpm } => {
            if !(min_rpm >= 0.0 && max_rpm > min_rpm && max_rpm < min_operating) {
                return Err(c.bad(
                    &k.key("slow_roll"),
                    format!("window needs 0 <= min_rpm < max_rpm < min_operating_rpm ({min_operating}; got {min_rpm} to {max_rpm})"),
                ));
            }
            SlowRoll::Window { min_rpm, max_rpm }
        }
    };
    c.above(&k.key("bin_pct"), t.bin_pct, 0.0, 5.0, "must be above 0 and at most 5 percent")?;
    Ok(Tracking {
        orders: t.orders.clone(),
        revs_per_vector: t.revs_per_vector,
        slow_roll,
        order_map: t.order_map,
        bin_pct: t.bin_pct,
    })
}

/// The highest tracked order's frequency at the top speed must lie below the Nyquist frequency
/// (sampling theorem; common practice asks more, but less than 2 samples per cycle cannot work).
fn check_rate(c: &Checker, key: &KeyPath, rate: f64, tracking: &Tracking, top_rpm: f64) -> Result<()> {
    let top_order = tracking.orders.iter().copied().max().unwrap_or(1);
    let f = f64::from(top_order) * top_rpm / 60.0;
    if !(rate > 2.0 * f) {
        return Err(c.bad(
            key,
            format!("{rate} Hz is too slow: {top_order}X at {top_rpm} r/min is {f:.1} Hz, which needs more than {:.1} Hz", 2.0 * f),
        ));
    }
    Ok(())
}

fn source(
    c: &Checker,
    machine: &KeyPath,
    s: RawSource,
    tach: &Tach,
    sensors: &[Sensor],
    tracking: &Tracking,
    top_rpm: f64,
) -> Result<Source> {
    let k = machine.key("source");
    match s {
        RawSource::Folder(f) => {
            let path = c.resolve(&k.key("path"), &f.path)?;
            let mut patterns = Vec::new();
            for p in f.pattern.split(',').map(str::trim) {
                if p.is_empty() || p.contains('/') || p.contains('\\') {
                    return Err(c.bad(&k.key("pattern"), format!("`{}`: give file-name patterns separated by commas, such as \"*.csv,*.wav\"", f.pattern.escape_debug())));
                }
                patterns.push(p.to_string());
            }
            if let Some(rate) = f.sample_rate {
                c.above(&k.key("sample_rate"), rate, 0.0, 1e9, "must be a positive rate in Hz")?;
                check_rate(c, &k.key("sample_rate"), rate, tracking, top_rpm)?;
            }
            c.within(&k.key("settle_s"), f.settle_s, 0.0, 3600.0, "must be between 0 and 3600 s")?;
            let failed_dir = match &f.failed_dir {
                Some(d) => c.resolve(&k.key("failed_dir"), d)?,
                None => path.join("failed"),
            };
            if failed_dir == path {
                return Err(c.bad(&k.key("failed_dir"), "must differ from the watched folder, or a bad file would be read again"));
            }
            Ok(Source::Folder(FolderSource {
                path,
                patterns,
                sample_rate: f.sample_rate,
                settle_s: f.settle_s,
                failed_dir,
            }))
        }
        RawSource::Serial(s) => {
            if s.port.trim().is_empty() {
                return Err(c.bad(&k.key("port"), "must name the serial port, such as /dev/ttyUSB0"));
            }
            if s.baud == 0 {
                return Err(c.bad(&k.key("baud"), "must be a positive line speed"));
            }
            c.above(&k.key("sample_rate"), s.sample_rate, 0.0, 1e9, "must be a positive rate in Hz")?;
            check_rate(c, &k.key("sample_rate"), s.sample_rate, tracking, top_rpm)?;
            c.within(&k.key("reconnect_max_s"), s.reconnect_max_s, 1.0, 3600.0, "must be between 1 and 3600 s")?;
            let mut channels = Vec::with_capacity(s.channels.len());
            for (i, name) in s.channels.iter().enumerate() {
                let n = channel_name(c, &k.key("channels").index(i), name)?;
                if channels.contains(&n) {
                    return Err(c.bad(&k.key("channels").index(i), format!("`{n}` is listed twice")));
                }
                channels.push(n);
            }
            let needed = std::iter::once(&tach.channel).chain(sensors.iter().map(|s| &s.channel));
            for name in needed {
                if !channels.contains(name) {
                    return Err(c.bad(&k.key("channels"), format!("does not list `{name}`, which the tach or a sensor reads")));
                }
            }
            Ok(Source::Serial(SerialSource {
                port: s.port.trim().to_string(),
                baud: s.baud,
                format: s.format,
                sample_rate: s.sample_rate,
                channels,
                reconnect_max_s: s.reconnect_max_s,
            }))
        }
    }
}

fn alerts(c: &Checker, k: &KeyPath, a: RawAlerts) -> Result<Alerts> {
    let margin = MarginRule::parse(&a.margin.0).map_err(|e| c.bad(&k.key("margin"), e.to_string()))?;
    c.within(&k.key("warn_band_pct"), a.warn_band_pct, 0.0, 49.9, "must be between 0 and 50 points")?;
    c.within(&k.key("drift_horizon_min"), a.drift_horizon_min, 0.0, 525_600.0, "must be 0 (off) or a positive number of minutes")?;
    c.above(&k.key("drift_window_min"), a.drift_window_min, 0.0, 525_600.0, "must be a positive number of minutes")?;
    c.within(&k.key("delay_s"), a.delay_s, 0.0, 86_400.0, "must be between 0 and 86400 s")?;
    c.within(&k.key("hysteresis_pct"), a.hysteresis_pct, 0.0, 20.0, "must be between 0 and 20 points")?;
    c.above(&k.key("critical_shift_pct"), a.critical_shift_pct, 0.0, 50.0, "must be above 0 and at most 50 percent")?;
    // API 670 Annex I: usually 2× or 3× (REFERENCES §1.4); 1 turns it off, above 10 is a mistake.
    c.within(&k.key("startup_multiplier"), a.startup_multiplier, 1.0, 10.0, "must be between 1 (off) and 10")?;
    if a.outputs.is_empty() {
        return Err(c.bad(&k.key("outputs"), "list at least one output, such as { kind = \"log\" }"));
    }
    let mut outputs = Vec::with_capacity(a.outputs.len());
    for (i, o) in a.outputs.into_iter().enumerate() {
        outputs.push(output(c, &k.key("outputs").index(i), o)?);
    }
    Ok(Alerts {
        margin,
        warn_band_pct: a.warn_band_pct,
        drift_horizon_min: a.drift_horizon_min,
        drift_window_min: a.drift_window_min,
        delay_s: a.delay_s,
        hysteresis_pct: a.hysteresis_pct,
        critical_shift_pct: a.critical_shift_pct,
        startup_multiplier: a.startup_multiplier,
        outputs,
    })
}

fn output(c: &Checker, k: &KeyPath, o: RawOutput) -> Result<Output> {
    Ok(match o {
        RawOutput::Log(l) => Output {
            kind: OutputKind::Log,
            min_severity: l.min_severity,
        },
        RawOutput::Jsonl(j) => Output {
            kind: OutputKind::Jsonl {
                path: c.resolve(&k.key("path"), &j.path)?,
            },
            min_severity: j.min_severity,
        },
        RawOutput::Command(cmd) => {
            let mut argv = cmd.argv;
            let Some(program) = argv.first_mut() else {
                return Err(c.bad(&k.key("argv"), "must give at least the program to run"));
            };
            if program.trim().is_empty() {
                return Err(c.bad(&k.key("argv").index(0), "must name the program to run"));
            }
            // A relative path with a separator is the site's own script beside the configuration;
            // a bare name is left for a `PATH` lookup, as a shell would do.
            if program.contains('/') && Path::new(program.as_str()).is_relative() {
                *program = c.base.join(program.as_str()).to_string_lossy().into_owned();
            }
            c.above(&k.key("timeout_s"), cmd.timeout_s, 0.0, 3600.0, "must be between 0 and 3600 s")?;
            Output {
                kind: OutputKind::Command {
                    argv,
                    timeout_s: cmd.timeout_s,
                },
                min_severity: cmd.min_severity,
            }
        }
    })
}
