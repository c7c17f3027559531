//! C programs compiled against `veer.h` and the shared library: the results equal those of
//! `veer analyze` on the same recording, and misuse returns codes and messages, never a crash.

use crate::support::{compile_c, fixture, have, run_ok, temp, RATE};
use serde_json::Value;
use std::process::Command;

/// The events a `roundtrip … json` run printed, without their `type` key.
fn json_events(stdout: &str) -> Vec<Value> {
    stdout
        .lines()
        .filter(|l| l.starts_with('{'))
        .map(|l| serde_json::from_str::<Value>(l).expect("each line is JSON"))
        .filter(|v| v["type"] == "event")
        .map(|mut v| {
            v.as_object_mut().expect("an object").remove("type");
            v
        })
        .collect()
}

fn summary(stdout: &str) -> (u64, u64, u64) {
    let line = stdout
        .lines()
        .find(|l| l.starts_with("summary "))
        .expect("a summary line");
    let n = |key: &str| -> u64 {
        line.split_whitespace()
            .find_map(|w| w.strip_prefix(key))
            .and_then(|v| v.parse().ok())
            .expect("a count")
    };
    (n("revolutions="), n("states="), n("events="))
}

fn roundtrip(push: &str, poll: &str) -> String {
    let f = fixture();
    let tmp = temp();
    let exe = compile_c("roundtrip", tmp.path(), &[]);
    let out = run_ok(
        Command::new(exe)
            .arg(&f.config)
            .arg(&f.csv)
            .arg(RATE.to_string())
            .args([push, poll]),
    );
    String::from_utf8(out.stdout).expect("UTF-8 output")
}

#[test]
fn every_push_variant_finds_what_analyze_finds_to_the_last_digit() {
    let want = crate::support::events(&fixture().analysis);
    assert!(
        want.iter().any(|e| e["channels"][0]["resonances"]
            .as_array()
            .is_some_and(|r| !r.is_empty())),
        "the run-up should pass a critical: {want:?}"
    );
    for push in ["f32", "f64", "f32p", "f64p"] {
        let out = roundtrip(push, "json");
        let got = json_events(&out);
        assert_eq!(got, want, "{push}: events differ from veer analyze");
        let (revs, states, events) = summary(&out);
        assert!(revs > 1000, "{push}: {revs} revolution results");
        assert!(states >= 2, "{push}: {states} state changes");
        assert_eq!(events as usize, want.len());
    }
}

#[test]
fn the_result_structs_carry_the_same_criticals() {
    let want = crate::support::events(&fixture().analysis);
    let out = roundtrip("f32p", "struct");
    let got: Vec<&str> = out.lines().filter(|l| l.starts_with("critical ")).collect();
    let mut expected = Vec::new();
    for e in &want {
        for (ch, c) in e["channels"]
            .as_array()
            .expect("channels")
            .iter()
            .enumerate()
        {
            for r in c["resonances"].as_array().expect("resonances") {
                let m = &r["margin"];
                expected.push(format!(
                    "critical {ch} {:.1} {:.2} {:.4} {:.2} {:.2}",
                    r["speed_rpm"].as_f64().expect("speed"),
                    r["amplification_factor"].as_f64().expect("AF"),
                    r["damping_ratio"].as_f64().expect("damping"),
                    m["required_pct"].as_f64().expect("required"),
                    m["actual_pct"].as_f64().expect("actual"),
                ));
            }
        }
    }
    assert!(!expected.is_empty());
    assert_eq!(got, expected);
}

#[test]
fn misuse_returns_codes_and_messages() {
    let tmp = temp();
    let exe = compile_c("misuse", tmp.path(), &[]);
    let out = run_ok(&mut Command::new(exe));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("0 failure(s)"), "{text}");
    assert!(
        text.contains("unknown field `bogus`") || text.contains("bogus"),
        "the configuration error names the key: {text}"
    );
}

/// Valgrind's memcheck over the misuse program and a short run-up, where valgrind is installed.
#[test]
fn no_memory_errors_under_valgrind() {
    if !have("valgrind") {
        eprintln!("valgrind is not installed: memory check skipped");
        return;
    }
    let f = fixture();
    let tmp = temp();
    let short = crate::support::run_up_csv(tmp.path(), 1024, "0:300,1:300,6:7000");
    let vg = |args: Vec<std::ffi::OsString>| {
        run_ok(
            Command::new("valgrind")
                .args([
                    "--error-exitcode=1",
                    "--leak-check=full",
                    "--errors-for-leak-kinds=definite",
                    "-q",
                ])
                .args(args),
        )
    };
    let misuse = compile_c("misuse", tmp.path(), &[]);
    vg(vec![misuse.into()]);
    let rt = compile_c("roundtrip", tmp.path(), &[]);
    for (push, poll) in [("f32", "json"), ("f64p", "struct")] {
        vg(vec![
            rt.clone().into(),
            f.config.clone().into(),
            short.clone().into(),
            "1024".into(),
            push.into(),
            poll.into(),
        ]);
    }
}
