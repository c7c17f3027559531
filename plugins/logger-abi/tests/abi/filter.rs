//! `veer filter`, the stdin/stdout form of the same engine: a piped recording gives the events of
//! `veer analyze`, and revolution lines leave while the input is still being written.

use crate::support::{fixture, veer_bin, ANALYZE_ARGS};
use serde_json::Value;
use std::io::{BufRead, BufReader, Write};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

fn filter() -> Command {
    let mut cmd = Command::new(veer_bin());
    // The analyze options, less the file: the same engine settings.
    cmd.arg("filter").args(ANALYZE_ARGS);
    cmd.stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    cmd
}

#[test]
fn a_piped_recording_gives_the_events_of_analyze() {
    let f = fixture();
    let mut child = filter().spawn().expect("veer filter starts");
    let csv = std::fs::read(&f.csv).expect("read the recording");
    let mut stdin = child.stdin.take().expect("stdin");
    let writer = std::thread::spawn(move || stdin.write_all(&csv).expect("write to the filter"));
    let out = child.wait_with_output().expect("veer filter ends");
    writer.join().expect("writer thread");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let lines: Vec<Value> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).expect("each line is JSON"))
        .collect();
    let events: Vec<Value> = lines
        .iter()
        .filter(|v| v["type"] == "event")
        .map(|v| {
            let mut v = v.clone();
            v.as_object_mut().expect("object").remove("type");
            v
        })
        .collect();
    assert_eq!(events, crate::support::events(&f.analysis));
    let revs = lines.iter().filter(|v| v["type"] == "revolution").count();
    assert!(revs > 1000, "{revs} revolution lines");
    assert!(lines
        .iter()
        .any(|v| v["type"] == "state" && v["to"] == "speeding-up"));
}

#[test]
fn revolution_lines_leave_while_the_input_is_still_streaming() {
    let f = fixture();
    let text = std::fs::read_to_string(&f.csv).expect("read the recording");
    // The first 10 s (slow roll and the start of the run-up), written 512 rows at a time.
    let rows: Vec<String> = text
        .lines()
        .take(1 + 10 * 4096)
        .map(str::to_string)
        .collect();
    let mut child = filter().spawn().expect("veer filter starts");
    let mut stdin = child.stdin.take().expect("stdin");
    let done = Arc::new(AtomicBool::new(false));
    let done_w = Arc::clone(&done);
    let writer = std::thread::spawn(move || {
        for chunk in rows.chunks(512) {
            let mut block = chunk.join("\n");
            block.push('\n');
            if stdin.write_all(block.as_bytes()).is_err() {
                break;
            }
            stdin.flush().expect("flush");
            std::thread::sleep(Duration::from_millis(25));
        }
        done_w.store(true, Ordering::SeqCst);
    });
    let stdout = child.stdout.take().expect("stdout");
    let mut first_revolution_while_writing = None;
    let mut lines = 0;
    for line in BufReader::new(stdout).lines() {
        let line = line.expect("a line");
        lines += 1;
        if first_revolution_while_writing.is_none() && line.contains("\"type\":\"revolution\"") {
            first_revolution_while_writing = Some(!done.load(Ordering::SeqCst));
        }
    }
    writer.join().expect("writer thread");
    assert!(child.wait().expect("exit").success());
    assert!(lines > 10, "{lines} lines");
    assert_eq!(
        first_revolution_while_writing,
        Some(true),
        "the first revolution line came only after the writer finished"
    );
}
