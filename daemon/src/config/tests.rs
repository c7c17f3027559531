//! Tests of loading: the example plant, each kind of mistake, and path resolution.

use super::model::{CriticalOrigin, LogFormat, OutputKind, Severity, Source};
use super::*;
use std::path::PathBuf;
use veer_tracker::config::SlowRoll;
use veer_tracker::margin::MarginRule;
use veer_tracker::units::{Detection, SensorKind, Unit};

const EXAMPLE: &str = include_str!("../../../config-examples/tarnmoor.toml");

/// The smallest useful configuration; tests change one thing in it.
const MINIMAL: &str = r#"
database = "data/veer.db"
[[machine]]
id = "fan-2"
min_operating_rpm = 600
max_continuous_rpm = 1000
source = { kind = "folder", path = "incoming/fan-2" }
tach = { channel = "tach" }
sensors = [ { channel = "v", units = "mm/s" } ]
"#;

fn origin() -> PathBuf {
    PathBuf::from("/srv/plant/plant.toml")
}

fn ok(text: &str) -> Config {
    match parse(text, &origin()) {
        Ok(c) => c,
        Err(e) => panic!("expected a valid configuration, got: {e}"),
    }
}

/// The error for `text`, checked to be one line that starts with the file.
fn err(text: &str) -> String {
    let e = parse(text, &origin()).expect_err("the configuration should be refused");
    let msg = e.to_string();
    assert!(!msg.contains('\n'), "not one line: {msg:?}");
    assert!(
        msg.starts_with("/srv/plant/plant.toml"),
        "does not name the file: {msg}"
    );
    msg
}

/// MINIMAL with `from` replaced by `to` (which must occur).
fn edit(from: &str, to: &str) -> String {
    assert!(MINIMAL.contains(from), "`{from}` not in MINIMAL");
    MINIMAL.replacen(from, to, 1)
}

/// MINIMAL with lines added to its machine.
fn with(extra: &str) -> String {
    format!("{MINIMAL}{extra}\n")
}

#[test]
fn example_parses_and_every_engine_config_validates() {
    let cfg = parse(EXAMPLE, Path::new("/etc/veer/plant.toml")).expect("the example is valid");
    let ids: Vec<&str> = cfg.machines.iter().map(|m| m.id.as_str()).collect();
    assert_eq!(ids, ["tg-1", "comp-3", "fan-2"]);
    assert_eq!(cfg.database, Path::new("/etc/veer/veer.db"));
    for m in &cfg.machines {
        let e = m
            .engine_config()
            .expect("engine settings of the example are valid");
        e.validate().expect("and stay valid");
        assert_eq!(e.tach.ppr, m.tach.decoder.ppr);
        let names: Vec<&str> = e.channels.iter().map(|c| c.name.as_str()).collect();
        let sensors: Vec<&str> = m.sensors.iter().map(|s| s.channel.as_str()).collect();
        assert_eq!(names, sensors);
        let margins = e.margins.expect("a machine always has an operating range");
        assert_eq!(margins.range, m.operating_range());
        assert_eq!(margins.rule, m.margin_rule());
        assert!(m.tach.decoder.max_rpm > m.trip_rpm.unwrap_or(m.max_continuous_rpm));
        assert!(!m.alerts.outputs.is_empty());
    }
    let comp = cfg.machine("comp-3").expect("comp-3");
    assert_eq!(comp.margin_rule(), MarginRule::Api1996);
    assert_eq!(comp.tracking.orders, [1, 2, 3]);
    let fan = cfg.machine("fan-2").expect("fan-2");
    assert_eq!(fan.margin_rule(), MarginRule::Fixed { percent: 15.0 });
    match &fan.source {
        Source::Serial(s) => {
            assert_eq!(s.port, "/dev/ttyUSB0");
            assert_eq!(s.baud, 921_600);
            assert_eq!(s.channels, ["tach", "v"]);
        }
        other => panic!("fan-2 should stream on a serial line, not {other:?}"),
    }
    assert_eq!(fan.sensors[0].amplitude.detection, Detection::Rms);
    let tg = cfg.machine("tg-1").expect("tg-1");
    match &tg.source {
        Source::Folder(f) => {
            assert_eq!(f.path, Path::new("/etc/veer/incoming/tg-1"));
            assert_eq!(f.failed_dir, Path::new("/etc/veer/incoming/tg-1/failed"));
            assert_eq!(f.patterns, ["*.csv", "*.wav"]);
        }
        other => panic!("tg-1 should read a folder, not {other:?}"),
    }
    assert_eq!(
        tg.alerts.outputs[1].kind,
        OutputKind::Jsonl {
            path: PathBuf::from("/etc/veer/alerts.jsonl")
        }
    );
}

#[test]
fn example_describes_the_demo_plant() {
    let cfg = parse(EXAMPLE, Path::new("plant.toml")).expect("the example is valid");
    let demo = crate::plant::machines();
    assert_eq!(cfg.machines.len(), demo.len());
    for d in &demo {
        let m = cfg
            .machine(d.id)
            .unwrap_or_else(|| panic!("{} missing from the example", d.id));
        assert_eq!(m.name, d.name);
        assert_eq!(m.min_operating_rpm, d.min_operating_rpm, "{}", d.id);
        assert_eq!(m.max_continuous_rpm, d.max_continuous_rpm, "{}", d.id);
        let unit = Unit::parse(d.unit).expect("demo unit");
        assert_eq!(m.sensors.len(), d.channels.len(), "{}", d.id);
        for (s, c) in m.sensors.iter().zip(&d.channels) {
            assert_eq!(s.channel, c.name, "{}", d.id);
            assert_eq!(s.amplitude.unit, unit, "{}", d.id);
            assert_eq!(s.angle_deg, c.probe_angle_deg, "{} {}", d.id, c.name);
        }
        // The plausible tach window admits every speed the demo plays.
        let top = d.profile.iter().map(|p| p.1).fold(0.0, f64::max);
        let low = d.profile.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        assert!(
            m.tach.decoder.max_rpm > top,
            "{}: tach max_rpm below {top}",
            d.id
        );
        assert!(
            m.tach.decoder.min_rpm < low,
            "{}: tach min_rpm above {low}",
            d.id
        );
        // The design criticals are the simulated rotor's modes, with AF ≈ 1/(2ζ) for light
        // damping (REFERENCES §1.1: Q = 1/(2ζ)), rounded in the file to 0.1.
        let modes = &d.channels[0].modes;
        assert_eq!(m.criticals.len(), modes.len(), "{}", d.id);
        for (c, mode) in m.criticals.iter().zip(modes) {
            assert_eq!(c.rpm, mode.natural_rpm, "{}", d.id);
            assert_eq!(c.origin, CriticalOrigin::Design);
            let af = c.af.expect("design AF given");
            let q = 1.0 / (2.0 * mode.damping_ratio);
            assert!((af - q).abs() <= 0.051, "{}: AF {af} vs 1/(2ζ) = {q}", d.id);
        }
    }
}

#[test]
fn minimal_configuration_takes_the_defaults() {
    let cfg = ok(MINIMAL);
    let m = &cfg.machines[0];
    assert_eq!(m.name, "fan-2");
    assert_eq!(m.sensors[0].kind, SensorKind::Velocity);
    assert_eq!(m.sensors[0].scale, 1.0);
    assert_eq!(m.tracking.slow_roll, SlowRoll::Auto);
    assert_eq!(m.tracking.orders, [1, 2]);
    assert_eq!(m.margin_rule(), MarginRule::Api2005);
    assert_eq!(m.alerts.outputs.len(), 1);
    assert_eq!(m.alerts.outputs[0].kind, OutputKind::Log);
    assert_eq!(m.alerts.startup_multiplier, 2.0);
    assert!(m.alerts.estimate_critical);
    assert_eq!(m.alerts.estimate_window_s, 30.0);
    assert_eq!(m.alerts.estimate_trend_min, 60.0);
    assert_eq!(m.alerts.estimate_sigmas, 2.0);
    assert_eq!(cfg.daemon.log_format, LogFormat::Human);
    assert!(cfg.daemon.queues.blocks > 0);
    // The plausible tach window brackets the operating range.
    assert!(m.tach.decoder.min_rpm < m.min_operating_rpm);
    assert!(m.tach.decoder.max_rpm > m.max_continuous_rpm);
    m.engine_config().expect("valid");
}

#[test]
fn relative_paths_resolve_against_the_configuration_folder() {
    let text = edit(
        r#"source = { kind = "folder", path = "incoming/fan-2" }"#,
        r#"source = { kind = "folder", path = "incoming/fan-2", failed_dir = "/var/spool/bad" }"#,
    );
    let text = format!(
        "{text}[machine.alerts]\noutputs = [ {{ kind = \"jsonl\", path = \"../log/alerts.jsonl\" }}, \
         {{ kind = \"command\", argv = [\"bin/page\", \"--to\", \"ops\"] }}, \
         {{ kind = \"command\", argv = [\"logger\", \"-t\", \"veer\"], min_severity = \"alarm\" }} ]\n"
    );
    let cfg = ok(&text);
    assert_eq!(cfg.path, origin());
    assert_eq!(cfg.database, Path::new("/srv/plant/data/veer.db"));
    let m = &cfg.machines[0];
    match &m.source {
        Source::Folder(f) => {
            assert_eq!(f.path, Path::new("/srv/plant/incoming/fan-2"));
            // Absolute paths are kept as they are.
            assert_eq!(f.failed_dir, Path::new("/var/spool/bad"));
        }
        other => panic!("expected a folder source, got {other:?}"),
    }
    let kinds: Vec<&OutputKind> = m.alerts.outputs.iter().map(|o| &o.kind).collect();
    assert_eq!(
        kinds[0],
        &OutputKind::Jsonl {
            path: PathBuf::from("/srv/plant/../log/alerts.jsonl")
        }
    );
    match kinds[1] {
        OutputKind::Command { argv, .. } => assert_eq!(argv[0], "/srv/plant/bin/page"),
        other => panic!("expected a command, got {other:?}"),
    }
    match kinds[2] {
        // A bare program name is left for a PATH lookup.
        OutputKind::Command { argv, .. } => assert_eq!(argv, &["logger", "-t", "veer"]),
        other => panic!("expected a command, got {other:?}"),
    }
    assert_eq!(m.alerts.outputs[2].min_severity, Severity::Alarm);
    // A file given by a bare name resolves next to it (in the working folder).
    let cfg = parse(MINIMAL, Path::new("plant.toml")).expect("valid");
    assert_eq!(cfg.database, Path::new("data/veer.db"));
}

#[test]
fn service_layout_puts_every_file_under_the_state_directory() {
    // The substitutions the README gives for installing the example as /etc/veer/plant.toml.
    let text = EXAMPLE
        .replace("= \"veer.db\"", "= \"/var/lib/veer/veer.db\"")
        .replace("\"incoming/", "\"/var/lib/veer/incoming/")
        .replace("\"alerts.jsonl\"", "\"/var/lib/veer/alerts.jsonl\"");
    let cfg = parse(&text, Path::new("/etc/veer/plant.toml")).expect("valid");
    let state = Path::new("/var/lib/veer");
    assert!(cfg.database.starts_with(state));
    for m in &cfg.machines {
        if let Source::Folder(f) = &m.source {
            assert!(
                f.path.starts_with(state) && f.failed_dir.starts_with(state),
                "{}",
                m.id
            );
        }
        for o in &m.alerts.outputs {
            if let OutputKind::Jsonl { path } = &o.kind {
                assert!(path.starts_with(state), "{}: {}", m.id, path.display());
            }
        }
    }
}

#[test]
fn unknown_key_is_named_with_its_path() {
    let msg = err(&edit(
        "tach = { channel = \"tach\" }",
        "tach = { channel = \"tach\", pppr = 2 }",
    ));
    assert!(msg.contains("machine[0] (fan-2).tach.pppr"), "{msg}");
    assert!(msg.contains("unknown field `pppr`"), "{msg}");
    assert!(msg.contains("line 8"), "{msg}");
    // At the top and in a sub-table too.
    let msg = err(&format!("databse = \"x.db\"\n{MINIMAL}"));
    assert!(msg.contains("line 1") && msg.contains("databse"), "{msg}");
    let msg = err(&with("[machine.alerts]\nwarn_band = 5"));
    assert!(msg.contains("machine[0] (fan-2).alerts.warn_band"), "{msg}");
}

#[test]
fn unknown_key_inside_a_source_names_the_source() {
    let msg = err(&edit(
        "path = \"incoming/fan-2\"",
        "path = \"incoming/fan-2\", bauds = 9600",
    ));
    assert!(
        msg.contains("machine[0] (fan-2).source.bauds: unknown field"),
        "{msg}"
    );
    // A key of the other kind of source.
    let msg = err(&edit(
        "path = \"incoming/fan-2\"",
        "path = \"incoming/fan-2\", baud = 9600",
    ));
    assert!(
        msg.contains("source.baud: is not a setting of a folder source"),
        "{msg}"
    );
}

#[test]
fn wrong_type_is_named() {
    let msg = err(&edit(
        "min_operating_rpm = 600",
        "min_operating_rpm = \"600 rpm\"",
    ));
    assert!(
        msg.contains("machine[0] (fan-2).min_operating_rpm"),
        "{msg}"
    );
    assert!(msg.contains("line 5"), "{msg}");
    let msg = err(&with("[machine.tracking]\norders = [1, \"2X\"]"));
    assert!(
        msg.contains("machine[0] (fan-2).tracking.orders[1]"),
        "{msg}"
    );
}

#[test]
fn missing_required_key_is_named() {
    let msg = err(&edit("tach = { channel = \"tach\" }\n", ""));
    assert!(msg.contains("machine[0] (fan-2)"), "{msg}");
    assert!(msg.contains("missing field `tach`"), "{msg}");
    let msg = err(&edit("tach = { channel = \"tach\" }", "tach = { ppr = 1 }"));
    assert!(msg.contains("machine[0] (fan-2).tach"), "{msg}");
    assert!(msg.contains("missing field `channel`"), "{msg}");
}

#[test]
fn syntax_error_gives_line_and_column() {
    let msg = err(&edit("id = \"fan-2\"", "id = \"fan-2"));
    assert!(
        msg.starts_with("/srv/plant/plant.toml line 4, column "),
        "{msg}"
    );
    let msg = err("database = \"veer.db\"\ndatabase = \"other.db\"\n");
    assert!(
        msg.contains("line 2, column 1: duplicate key") && msg.contains("database"),
        "{msg}"
    );
    let msg = err(&with("[machine.tracking]\norders = [1, 2"));
    assert!(msg.contains("line 11, column 15: unclosed array"), "{msg}");
}

#[test]
fn duplicate_machine_id_is_refused() {
    let second = MINIMAL
        .replace("database = \"data/veer.db\"\n", "")
        .replace("incoming/fan-2", "incoming/other");
    let msg = err(&format!("{MINIMAL}{second}"));
    assert!(msg.contains("machine[1] (fan-2).id"), "{msg}");
    assert!(msg.contains("unique"), "{msg}");
    // Two machines reading one folder would each take the other's files.
    let second = MINIMAL
        .replace("database = \"data/veer.db\"\n", "")
        .replace("id = \"fan-2\"", "id = \"fan-3\"");
    let msg = err(&format!("{MINIMAL}{second}"));
    assert!(
        msg.contains("machine[1] (fan-3).source: an earlier machine"),
        "{msg}"
    );
}

#[test]
fn unsafe_machine_id_is_refused() {
    for id in ["Fan 2", "../etc", "", "-fan", "fan.2"] {
        let msg = err(&edit("id = \"fan-2\"", &format!("id = {id:?}")));
        assert!(msg.contains(".id: "), "{id}: {msg}");
    }
}

#[test]
fn bad_units_are_named() {
    let msg = err(&edit("units = \"mm/s\"", "units = \"furlong\""));
    assert!(msg.contains("machine[0] (fan-2).sensors[0].units"), "{msg}");
    assert!(msg.contains("furlong"), "{msg}");
    // A kind that contradicts the unit.
    let msg = err(&edit(
        "units = \"mm/s\"",
        "units = \"mm/s\", kind = \"displacement\"",
    ));
    assert!(msg.contains("sensors[0].units"), "{msg}");
    let msg = err(&edit(
        "units = \"mm/s\"",
        "units = \"mm/s\", detection = \"average\"",
    ));
    assert!(msg.contains("sensors[0].detection"), "{msg}");
}

#[test]
fn speed_range_must_be_in_order() {
    let msg = err(&edit(
        "max_continuous_rpm = 1000",
        "max_continuous_rpm = 600",
    ));
    assert!(
        msg.contains("machine[0] (fan-2).max_continuous_rpm"),
        "{msg}"
    );
    let msg = err(&edit(
        "max_continuous_rpm = 1000",
        "max_continuous_rpm = 1000\ntrip_rpm = 900",
    ));
    assert!(msg.contains("machine[0] (fan-2).trip_rpm"), "{msg}");
    let msg = err(&edit("min_operating_rpm = 600", "min_operating_rpm = 0"));
    assert!(msg.contains("min_operating_rpm"), "{msg}");
    let msg = err(&edit(
        "max_continuous_rpm = 1000",
        "max_continuous_rpm = nan",
    ));
    assert!(msg.contains("max_continuous_rpm"), "{msg}");
}

#[test]
fn bad_margin_rule_is_named() {
    let msg = err(&with("[machine.alerts]\nmargin = \"api-1066\""));
    assert!(msg.contains("machine[0] (fan-2).alerts.margin"), "{msg}");
    assert!(msg.contains("api-1066"), "{msg}");
    let msg = err(&with("[machine.alerts]\nmargin = 150"));
    assert!(msg.contains("alerts.margin"), "{msg}");
    // A number and the same number as text are the same rule.
    let a = ok(&with("[machine.alerts]\nmargin = 12.5"));
    let b = ok(&with("[machine.alerts]\nmargin = \"12.5%\""));
    assert_eq!(
        a.machines[0].margin_rule(),
        MarginRule::Fixed { percent: 12.5 }
    );
    assert_eq!(a.machines[0].margin_rule(), b.machines[0].margin_rule());
}

#[test]
fn bad_output_kind_is_named() {
    let msg = err(&with(
        "[machine.alerts]\noutputs = [ { kind = \"log\" }, { kind = \"email\", to = \"ops\" } ]",
    ));
    assert!(
        msg.contains("machine[0] (fan-2).alerts.outputs[1]"),
        "{msg}"
    );
    assert!(msg.contains("email"), "{msg}");
    let msg = err(&with(
        "[machine.alerts]\noutputs = [ { kind = \"command\", argv = [] } ]",
    ));
    assert!(msg.contains("alerts.outputs[0].argv"), "{msg}");
    let msg = err(&with(
        "[machine.alerts]\noutputs = [ { kind = \"jsonl\", path = 5 } ]",
    ));
    assert!(
        msg.contains("alerts.outputs[0].path: invalid type"),
        "{msg}"
    );
    let msg = err(&with(
        "[machine.alerts]\noutputs = [ { kind = \"jsonl\" } ]",
    ));
    assert!(msg.contains("alerts.outputs[0].path: missing"), "{msg}");
    let msg = err(&with("[machine.alerts]\noutputs = []"));
    assert!(msg.contains("alerts.outputs"), "{msg}");
}

#[test]
fn channels_must_be_distinct() {
    let msg = err(&edit("channel = \"v\"", "channel = \"tach\""));
    assert!(
        msg.contains("sensors[0].channel") && msg.contains("tach channel"),
        "{msg}"
    );
    let msg = err(&edit(
        "sensors = [ { channel = \"v\", units = \"mm/s\" } ]",
        "sensors = [ { channel = \"v\", units = \"mm/s\" }, { channel = \"v\", units = \"g\" } ]",
    ));
    assert!(msg.contains("sensors[1].channel"), "{msg}");
}

#[test]
fn serial_source_is_checked() {
    let serial = |s: &str| {
        edit(
            "source = { kind = \"folder\", path = \"incoming/fan-2\" }",
            s,
        )
    };
    let good = "source = { kind = \"serial\", port = \"/dev/ttyUSB0\", baud = 921600, sample_rate = 2560, channels = [\"tach\", \"v\"] }";
    ok(&serial(good));
    let msg = err(&serial(&good.replace("921600", "0")));
    assert!(msg.contains("source.baud"), "{msg}");
    let msg = err(&serial(&good.replace("[\"tach\", \"v\"]", "[\"tach\"]")));
    assert!(
        msg.contains("source.channels") && msg.contains("`v`"),
        "{msg}"
    );
    let msg = err(&serial(
        &good.replace("kind = \"serial\"", "kind = \"modem\""),
    ));
    assert!(
        msg.contains("machine[0] (fan-2).source") && msg.contains("modem"),
        "{msg}"
    );
    // 2X at 1000 r/min is 33.3 Hz: 50 Hz sampling is below its Nyquist rate (sampling theorem).
    let msg = err(&serial(&good.replace("2560", "50")));
    assert!(msg.contains("source.sample_rate"), "{msg}");
    let msg = err(&serial(&good.replace("baud = 921600", "baud = -9600")));
    assert!(msg.contains("source.baud: invalid value"), "{msg}");
    let msg = err(&serial(&good.replace("port = \"/dev/ttyUSB0\", ", "")));
    assert!(msg.contains("source.port: missing"), "{msg}");
}

#[test]
fn tach_settings_are_checked() {
    let tach = |t: &str| edit("tach = { channel = \"tach\" }", t);
    let msg = err(&tach("tach = { channel = \"tach\", ppr = 5000 }"));
    assert!(
        msg.ends_with("machine[0] (fan-2).tach.ppr: must be between 1 and 4096 (got 5000)"),
        "{msg}"
    );
    let msg = err(&tach(
        "tach = { channel = \"tach\", ppr = 60, gap_teeth = 59 }",
    ));
    assert!(msg.contains("tach.gap_teeth"), "{msg}");
    let msg = err(&tach("tach = { channel = \"tach\", trigger = 2.5 }"));
    assert!(msg.contains("tach.rearm"), "{msg}");
    let msg = err(&tach(
        "tach = { channel = \"tach\", trigger = 2.5, rearm = 3.0 }",
    ));
    assert!(msg.contains("tach.rearm") && msg.contains("below"), "{msg}");
    let falling = ok(&tach(
        "tach = { channel = \"tach\", edge = \"falling\", trigger = -8.0, rearm = -6.0 }",
    ));
    assert!(falling.machines[0].tach.decoder.levels.is_some());
    let msg = err(&tach("tach = { channel = \"tach\", max_rpm = 900 }"));
    assert!(msg.contains("tach.max_rpm"), "{msg}");
    let msg = err(&tach("tach = { channel = \"tach\", edge = \"up\" }"));
    assert!(msg.contains("tach.edge") && msg.contains("up"), "{msg}");
}

#[test]
fn criticals_are_checked() {
    let msg =
        err(&with("criticals = [ { rpm = 1210, af = 6.5 }, { rpm = -5 } ]").replace("\n\n", "\n"));
    assert!(msg.contains("criticals[1].rpm"), "{msg}");
    let msg = err(&edit(
        "sensors =",
        "criticals = [ { rpm = 1210, af = 0.5 } ]\nsensors =",
    ));
    assert!(msg.contains("criticals[0].af"), "{msg}");
    let cfg = ok(&edit(
        "sensors =",
        "criticals = [ { rpm = 1210 } ]\nsensors =",
    ));
    assert_eq!(cfg.machines[0].criticals[0].af, None);
}

#[test]
fn tracking_and_alert_values_are_checked() {
    let msg = err(&with(
        "[machine.tracking]\nslow_roll = { min_rpm = 300, max_rpm = 200 }",
    ));
    assert!(msg.contains("tracking.slow_roll"), "{msg}");
    let msg = err(&with("[machine.tracking]\nslow_roll = \"sometimes\""));
    assert!(
        msg.contains("tracking.slow_roll") && msg.contains("sometimes"),
        "{msg}"
    );
    let cfg = ok(&with(
        "[machine.tracking]\nslow_roll = { min_rpm = 150, max_rpm = 250 }\norder_map = false",
    ));
    let e = cfg.machines[0].engine_config().expect("valid");
    assert_eq!(
        e.slow_roll,
        SlowRoll::Window {
            min_rpm: 150.0,
            max_rpm: 250.0
        }
    );
    assert!(e.order_map.is_none());
    let msg = err(&with("[machine.tracking]\nbin_pct = 7"));
    assert!(msg.contains("tracking.bin_pct"), "{msg}");
    let msg = err(&with("[machine.alerts]\nwarn_band_pct = 60"));
    assert!(msg.contains("alerts.warn_band_pct"), "{msg}");
    let msg = err(&with("[machine.alerts]\nstartup_multiplier = 0.5"));
    assert!(msg.contains("alerts.startup_multiplier"), "{msg}");
    let msg = err(&with("[machine.alerts]\nestimate_window_s = 0.2"));
    assert!(msg.contains("alerts.estimate_window_s"), "{msg}");
    let msg = err(&with("[machine.alerts]\nestimate_trend_min = 0"));
    assert!(msg.contains("alerts.estimate_trend_min"), "{msg}");
    let msg = err(&with("[machine.alerts]\nestimate_sigmas = -1"));
    assert!(msg.contains("alerts.estimate_sigmas"), "{msg}");
    let msg = err(&with("[machine.alerts]\nestimate_critical = \"yes\""));
    assert!(msg.contains("estimate_critical"), "{msg}");
    let msg = err(&format!("{MINIMAL}[daemon]\nlog_format = \"xml\"\n"));
    assert!(
        msg.contains("daemon.log_format") && msg.contains("xml"),
        "{msg}"
    );
    let msg = err(&format!("{MINIMAL}[daemon]\nqueues = {{ blocks = 0 }}\n"));
    assert!(msg.contains("daemon.queues.blocks"), "{msg}");
}

#[test]
fn a_file_without_machines_is_refused() {
    let msg = err("database = \"veer.db\"\n");
    assert!(msg.contains("machine"), "{msg}");
}

#[test]
fn unreadable_file_names_the_file() {
    let dir = tempfile::tempdir().expect("temp dir");
    let missing = dir.path().join("nope.toml");
    let msg = load(&missing).expect_err("missing file").to_string();
    assert!(msg.contains("nope.toml") && !msg.contains('\n'), "{msg}");
    let path = dir.path().join("plant.toml");
    std::fs::write(&path, MINIMAL).expect("write");
    let cfg = load(&path).expect("valid file");
    assert_eq!(cfg.database, dir.path().join("data/veer.db"));
}
