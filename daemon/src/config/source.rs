//! Where a machine's samples come from: a watched folder or a serial line.

use super::check::{channel_name, refuse_others, required, Checker, Result};
use super::key::KeyPath;
use super::model::{FolderSource, Sensor, SerialSource, Source, Tach, Tracking};
use super::raw::{
    RawSource, RawSourceKind, DEFAULT_PATTERN, DEFAULT_RECONNECT_MAX_S, DEFAULT_SETTLE_S,
};

/// The highest tracked order's frequency at the top speed must lie below the Nyquist frequency
/// (sampling theorem; common practice asks more, but less than 2 samples per cycle cannot work).
fn check_rate(
    c: &Checker,
    key: &KeyPath,
    rate: f64,
    tracking: &Tracking,
    top_rpm: f64,
) -> Result<()> {
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

/// Checks the source against its kind, and the sample rate against the fastest tracked order.
pub(super) fn source(
    c: &Checker,
    machine: &KeyPath,
    s: RawSource,
    tach: &Tach,
    sensors: &[Sensor],
    tracking: &Tracking,
    top_rpm: f64,
) -> Result<Source> {
    let k = machine.key("source");
    match s.kind {
        RawSourceKind::Folder => {
            let what = "folder source";
            refuse_others(
                c,
                &k,
                what,
                &[
                    ("port", s.port.is_some()),
                    ("baud", s.baud.is_some()),
                    ("format", s.format.is_some()),
                    ("channels", s.channels.is_some()),
                    ("reconnect_max_s", s.reconnect_max_s.is_some()),
                ],
            )?;
            let path = c.resolve(&k.key("path"), &required(c, &k, "path", s.path, what)?)?;
            let pattern = s.pattern.unwrap_or_else(|| DEFAULT_PATTERN.to_string());
            let mut patterns = Vec::new();
            for p in pattern.split(',').map(str::trim) {
                if p.is_empty() || p.contains('/') || p.contains('\\') {
                    return Err(c.bad(
                        &k.key("pattern"),
                        format!("`{}`: give file-name patterns separated by commas, such as \"*.csv,*.wav\"", pattern.escape_debug()),
                    ));
                }
                patterns.push(p.to_string());
            }
            if let Some(rate) = s.sample_rate {
                c.above(
                    &k.key("sample_rate"),
                    rate,
                    0.0,
                    1e9,
                    "must be a positive rate in Hz",
                )?;
                check_rate(c, &k.key("sample_rate"), rate, tracking, top_rpm)?;
            }
            let settle_s = s.settle_s.unwrap_or(DEFAULT_SETTLE_S);
            c.within(
                &k.key("settle_s"),
                settle_s,
                0.0,
                3600.0,
                "must be between 0 and 3600 s",
            )?;
            let failed_dir = match &s.failed_dir {
                Some(d) => c.resolve(&k.key("failed_dir"), d)?,
                None => path.join("failed"),
            };
            if failed_dir == path {
                return Err(c.bad(
                    &k.key("failed_dir"),
                    "must differ from the watched folder, or a bad file would be read again",
                ));
            }
            Ok(Source::Folder(FolderSource {
                path,
                patterns,
                sample_rate: s.sample_rate,
                settle_s,
                failed_dir,
            }))
        }
        RawSourceKind::Serial => {
            let what = "serial source";
            refuse_others(
                c,
                &k,
                what,
                &[
                    ("path", s.path.is_some()),
                    ("pattern", s.pattern.is_some()),
                    ("settle_s", s.settle_s.is_some()),
                    ("failed_dir", s.failed_dir.is_some()),
                ],
            )?;
            let port = required(c, &k, "port", s.port, what)?;
            if port.trim().is_empty() {
                return Err(c.bad(
                    &k.key("port"),
                    "must name the serial port, such as /dev/ttyUSB0",
                ));
            }
            let baud = required(c, &k, "baud", s.baud, what)?;
            if baud == 0 {
                return Err(c.bad(&k.key("baud"), "must be a positive line speed"));
            }
            let sample_rate = required(c, &k, "sample_rate", s.sample_rate, what)?;
            c.above(
                &k.key("sample_rate"),
                sample_rate,
                0.0,
                1e9,
                "must be a positive rate in Hz",
            )?;
            check_rate(c, &k.key("sample_rate"), sample_rate, tracking, top_rpm)?;
            let reconnect_max_s = s.reconnect_max_s.unwrap_or(DEFAULT_RECONNECT_MAX_S);
            c.within(
                &k.key("reconnect_max_s"),
                reconnect_max_s,
                1.0,
                3600.0,
                "must be between 1 and 3600 s",
            )?;
            let listed = required(c, &k, "channels", s.channels, what)?;
            let mut channels = Vec::with_capacity(listed.len());
            for (i, name) in listed.iter().enumerate() {
                let n = channel_name(c, &k.key("channels").index(i), name)?;
                if channels.contains(&n) {
                    return Err(c.bad(
                        &k.key("channels").index(i),
                        format!("`{n}` is listed twice"),
                    ));
                }
                channels.push(n);
            }
            let needed = std::iter::once(&tach.channel).chain(sensors.iter().map(|s| &s.channel));
            for name in needed {
                if !channels.contains(name) {
                    return Err(c.bad(
                        &k.key("channels"),
                        format!("does not list `{name}`, which the tach or a sensor reads"),
                    ));
                }
            }
            Ok(Source::Serial(SerialSource {
                port: port.trim().to_string(),
                baud,
                format: s.format.unwrap_or_default(),
                sample_rate,
                channels,
                reconnect_max_s,
            }))
        }
    }
}
