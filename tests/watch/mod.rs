//! The watch daemon end to end: the real `veer watch` runs as a child process in a temporary
//! folder, fed through its folder and serial sources the way a logger feeds it, and the tests
//! read what it stored through a read-only connection, while it runs and after it stopped, as
//! `veer status` or a user's own SQL would.
//!
//! Every recording is the demo plant's cooling tower fan (`veer simulate --machine fan-2`): one
//! velocity channel and a first critical simulated at 1210 r/min with damping ratio 0.077, at
//! 2560 Hz so that minutes of data take a second or two to analyse in a debug build.

mod alerts;
mod bad_config;
mod crash;
mod daemon;
mod db;
mod estimates;
mod folder;
mod recordings;
mod serial;
mod status;

use crate::support::Dir;
use std::path::PathBuf;

/// The simulated fan's first critical, r/min: the natural speed of its mode in the demo plant.
pub const FAN_CRITICAL_RPM: f64 = 1210.0;

/// The simulated fan's damping ratio.
pub const FAN_ZETA: f64 = 0.077;

/// One fan machine of a configuration: its operating range 600 to 1000 r/min, the design
/// critical at 1210 r/min (AF 6.5), the given `source` table and `[machine.alerts]` lines.
pub fn fan_machine(id: &str, source: &str, alerts: &str) -> String {
    format!(
        r#"
[[machine]]
id = "{id}"
name = "Cooling fan {id}"
min_operating_rpm = 600
max_continuous_rpm = 1000
source = {source}
tach = {{ channel = "tach", ppr = 1, max_rpm = 2000 }}
sensors = [ {{ channel = "v", kind = "velocity", units = "mm/s" }} ]
criticals = [ {{ rpm = 1210, af = 6.5, origin = "design" }} ]
[machine.alerts]
{alerts}
"#
    )
}

/// Writes `plant.toml` into `dir` with the database `veer.db` beside it, `[daemon]` settings
/// for short recordings, and `machines`; returns its absolute path.
pub fn write_config(dir: &Dir, machines: &[String]) -> PathBuf {
    let mut text = String::from("database = \"veer.db\"\n\n[daemon]\ntrend_interval_s = 2\n");
    for m in machines {
        text.push_str(m);
    }
    dir.write("plant.toml", text.as_bytes())
}
