//! From the file as written to the validated model: every check that needs more than a type.
//!
//! Checks run in file order and stop at the first mistake, naming its key, so that fixing the
//! file top to bottom converges. Folders are not required to exist (the daemon creates them), and
//! serial ports are not opened: a configuration can be checked on another machine than the one it
//! runs on.

use super::alerts::alerts;
use super::channels::{sensors, tach};
use super::check::{Checker, Result};
use super::key::KeyPath;
use super::model::{Config, Critical, DaemonSettings, Machine, QueueSizes, Source, Tracking};
use super::raw::{RawConfig, RawCritical, RawDaemon, RawMachine, RawSlowRoll, RawTracking};
use super::source::source;
use std::collections::HashSet;
use std::path::Path;
use veer_tracker::config::SlowRoll;

/// Longest machine id: ids become file names and database keys.
const MAX_ID_LEN: usize = 64;

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
        return Err(c.bad(
            &root.key("machine"),
            "no [[machine]] table: describe at least one machine",
        ));
    }
    let mut machines = Vec::with_capacity(raw.machines.len());
    let mut ids = HashSet::new();
    let mut folders = HashSet::new();
    let mut ports = HashSet::new();
    for (i, rm) in raw.machines.into_iter().enumerate() {
        let m = machine(&c, i, rm)?;
        let key = KeyPath::machine(i, &m.id);
        if !ids.insert(m.id.clone()) {
            return Err(c.bad(
                &key.key("id"),
                format!(
                    "`{}` is used by an earlier machine; ids must be unique",
                    m.id
                ),
            ));
        }
        let clash = match &m.source {
            Source::Folder(f) => !folders.insert(f.path.clone()),
            Source::Serial(s) => !ports.insert(s.port.clone()),
        };
        if clash {
            return Err(c.bad(
                &key.key("source"),
                "an earlier machine reads the same folder or port",
            ));
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
    c.above(
        &key.key("trend_interval_s"),
        d.trend_interval_s,
        0.0,
        86_400.0,
        "must be between 0 and 86400 s",
    )?;
    c.above(
        &key.key("trend_downsample_after_days"),
        d.trend_downsample_after_days,
        0.0,
        36_500.0,
        "must be a positive number of days",
    )?;
    c.above(
        &key.key("trend_bucket_min"),
        d.trend_bucket_min,
        0.0,
        10_080.0,
        "must be between 0 and 10080 minutes",
    )?;
    if d.trend_bucket_min * 60.0 < d.trend_interval_s {
        return Err(c.bad(
            &key.key("trend_bucket_min"),
            "must be at least trend_interval_s long, or a bucket holds no point",
        ));
    }
    let q = &d.queues;
    let qkey = key.key("queues");
    for (name, n) in [
        ("blocks", q.blocks),
        ("records", q.records),
        ("alerts", q.alerts),
    ] {
        if !(1..=1_000_000).contains(&n) {
            return Err(c.bad(
                &qkey.key(name),
                format!("must be between 1 and 1000000 (got {n})"),
            ));
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
        Some(n) if n.trim().is_empty() => {
            return Err(c.bad(
                &key.key("name"),
                "must not be empty (leave it out to use the id)",
            ))
        }
        Some(n) => n.trim().to_string(),
        None => m.id.clone(),
    };
    c.above(
        &key.key("min_operating_rpm"),
        m.min_operating_rpm,
        0.0,
        1e6,
        "must be a positive speed",
    )?;
    if !(m.max_continuous_rpm > m.min_operating_rpm && m.max_continuous_rpm <= 1e6) {
        return Err(c.bad(
            &key.key("max_continuous_rpm"),
            format!(
                "must be above min_operating_rpm ({} r/min; got {})",
                m.min_operating_rpm, m.max_continuous_rpm
            ),
        ));
    }
    if let Some(trip) = m.trip_rpm {
        if !(trip > m.max_continuous_rpm && trip <= 1e6) {
            return Err(c.bad(
                &key.key("trip_rpm"),
                format!(
                    "must be above max_continuous_rpm ({} r/min; got {trip})",
                    m.max_continuous_rpm
                ),
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

fn critical(c: &Checker, k: &KeyPath, r: &RawCritical) -> Result<Critical> {
    c.above(&k.key("rpm"), r.rpm, 0.0, 1e6, "must be a positive speed")?;
    if let Some(af) = r.af {
        // AF = Nc/(N2 − N1) is at least about 1 for any peak that has half-power points (API RP 684
        // definition, REFERENCES §1.1); a smaller figure is a typing mistake.
        c.within(
            &k.key("af"),
            af,
            1.0,
            1000.0,
            "must be at least 1 (leave it out when unknown)",
        )?;
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
            return Err(c.bad(
                &k.key("orders"),
                format!("orders are whole numbers from 1 to 64 (got {n})"),
            ));
        }
        if !seen.insert(n) {
            return Err(c.bad(&k.key("orders"), format!("{n} is listed twice")));
        }
    }
    if !(1..=10_000).contains(&t.revs_per_vector) {
        return Err(c.bad(
            &k.key("revs_per_vector"),
            format!("must be between 1 and 10000 (got {})", t.revs_per_vector),
        ));
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
    c.above(
        &k.key("bin_pct"),
        t.bin_pct,
        0.0,
        5.0,
        "must be above 0 and at most 5 percent",
    )?;
    Ok(Tracking {
        orders: t.orders.clone(),
        revs_per_vector: t.revs_per_vector,
        slow_roll,
        order_map: t.order_map,
        bin_pct: t.bin_pct,
    })
}
