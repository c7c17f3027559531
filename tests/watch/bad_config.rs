//! A bad configuration stops `veer watch` (and `veer status`) before anything starts, with one
//! line naming the file and the key.

use super::daemon::run_bounded;
use super::fan_machine;
use crate::support::{error_naming, Dir};

/// A valid configuration with one folder machine.
fn good() -> String {
    format!(
        "database = \"veer.db\"\n{}",
        fan_machine(
            "fan-2",
            r#"{ kind = "folder", path = "incoming/fan-2" }"#,
            "margin = \"api\""
        )
    )
}

/// `good()` with `from` replaced by `to` (which must occur).
fn edit(from: &str, to: &str) -> String {
    let g = good();
    assert!(g.contains(from), "`{from}` not in the configuration");
    g.replacen(from, to, 1)
}

#[test]
fn watch_and_status_refuse_each_kind_of_mistake_in_one_line() {
    let d = Dir::new();
    // The unedited file is accepted: status gets as far as looking for the database.
    d.write("good.toml", good().as_bytes());
    let o = run_bounded(&d, &["status", "--config", "good.toml"], 20.0);
    error_naming(&o, &["no database yet"]);

    let second = fan_machine(
        "fan-2",
        r#"{ kind = "folder", path = "incoming/other" }"#,
        "",
    );
    let cases: Vec<(&str, String, Vec<&str>)> = vec![
        (
            "unknown-key.toml",
            edit("ppr = 1,", "ppr = 1, pppr = 2,"),
            vec!["tach.pppr", "unknown field"],
        ),
        (
            "wrong-type.toml",
            edit("min_operating_rpm = 600", "min_operating_rpm = \"600 rpm\""),
            vec!["min_operating_rpm", "line 6"],
        ),
        (
            "bad-units.toml",
            edit("units = \"mm/s\"", "units = \"furlong\""),
            vec!["sensors[0].units", "furlong"],
        ),
        (
            "equal-speeds.toml",
            edit("max_continuous_rpm = 1000", "max_continuous_rpm = 600"),
            vec!["max_continuous_rpm"],
        ),
        (
            "min-above-max.toml",
            edit("min_operating_rpm = 600", "min_operating_rpm = 1200"),
            vec!["max_continuous_rpm"],
        ),
        (
            "duplicate-id.toml",
            format!("{}{second}", good()),
            vec!["machine[1]", ".id", "fan-2"],
        ),
        (
            "syntax.toml",
            edit("id = \"fan-2\"", "id = \"fan-2"),
            vec!["line 4"],
        ),
    ];
    for (file, text, needles) in &cases {
        d.write(file, text.as_bytes());
        let mut want = vec![*file];
        want.extend(needles.iter().copied());
        for cmd in ["watch", "status"] {
            let o = run_bounded(&d, &[cmd, "--config", file], 20.0);
            let line = error_naming(&o, &want);
            assert!(
                line.starts_with("veer: error: "),
                "`veer {cmd} --config {file}`: {line}"
            );
        }
    }
    // Nothing was started: no database was created.
    assert!(!d.join("veer.db").exists());
}
