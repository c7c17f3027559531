//! The serial source: a pseudo-terminal stands in for the logger's line.
//!
//! The test writes the byte stream `veer simulate --serial` produces into the master side, with
//! a few bytes damaged and a chunk left out, and then plays a pulled and replugged adapter: the
//! port the daemon was given is a symlink, re-pointed at a second pseudo-terminal's slave before
//! the first master is closed, so the daemon's read fails and its reconnection finds the new one
//! under the old name.

use super::daemon::{Daemon, SPAWN};
use super::db;
use super::recordings;
use super::{fan_machine, write_config, FAN_CRITICAL_RPM};
use crate::support::{rel, Dir};
use serialport::{SerialPort, TTYPort};
use std::io::Write;
use std::path::Path;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};
use veer_storage::{CriticalOrigin, EventKind, IngestKind, IngestStatus, Store};

/// Slow roll, run-up through the critical, hold, coast-down through it again, slow roll: 110 s.
const PROFILE: &str = "0:150,5:150,45:1450,60:1450,100:150,110:150";
const SECONDS: f64 = 110.0;
const RATE: u32 = 2560;

/// Where the stream is damaged, as shares of its bytes (about shares of its time): three single
/// bytes during the hold at 1450 r/min, a chunk left out, and the port lost just before the
/// coast-down, with the logger sending on meanwhile.
const CORRUPT_AT: [f64; 3] = [0.47, 0.485, 0.50];
const DROP: (f64, f64) = (0.515, 0.525);
const UNPLUG: (f64, f64) = (0.535, 0.545);

/// A pseudo-terminal: the master to write to and the slave's path.
///
/// The pair's descriptors are not close-on-exec, so a daemon started meanwhile (by this test or
/// another one) would inherit them and keep the terminal open after the test closes its master;
/// the master is therefore replaced by a close-on-exec duplicate, under the spawn lock.
fn pty() -> (TTYPort, String) {
    let _spawning = SPAWN.lock().unwrap_or_else(|e| e.into_inner());
    let (inheritable, slave) = TTYPort::pair().expect("a pseudo-terminal");
    let path = slave.name().expect("the slave's path");
    // The daemon opens the path itself.
    drop(slave);
    let mut master = inheritable
        .try_clone_native()
        .expect("a close-on-exec master");
    drop(inheritable);
    // Writes block while the daemon holds back (its queues are full); allow for a slow build.
    master
        .set_timeout(Duration::from_secs(30))
        .expect("set the timeout");
    (master, path)
}

/// Points the symlink `link` at `target`, replacing it in one step.
fn point(link: &Path, target: &str) {
    let tmp = link.with_extension("new");
    let _ = std::fs::remove_file(&tmp);
    std::os::unix::fs::symlink(target, &tmp).expect("symlink");
    std::fs::rename(&tmp, link).expect("re-point the symlink");
}

/// Writes `bytes` into the master in pieces on a thread of its own, and hands the master back.
fn write_pieces(mut master: TTYPort, bytes: Vec<u8>) -> JoinHandle<TTYPort> {
    std::thread::spawn(move || {
        for piece in bytes.chunks(4096) {
            master
                .write_all(piece)
                .expect("write to the pseudo-terminal");
        }
        master.flush().expect("flush the pseudo-terminal");
        master
    })
}

/// Start offsets of the binary packets of a `frames` stream (docs/serial-format.md).
fn packet_starts(bytes: &[u8]) -> Vec<usize> {
    let mut starts = Vec::new();
    let mut at = 0;
    while at + 32 <= bytes.len() {
        assert_eq!(
            &bytes[at..at + 4],
            &[0xA7, 0x76, 0x65, 0x72],
            "sync word at {at}"
        );
        let format = bytes[at + 5];
        let channels = usize::from(u16::from_le_bytes([bytes[at + 6], bytes[at + 7]]));
        let frames = usize::from(u16::from_le_bytes([bytes[at + 8], bytes[at + 9]]));
        let (scales, size) = if format == 2 {
            (4 * channels, 2)
        } else {
            (0, 4)
        };
        starts.push(at);
        at += 32 + scales + frames * channels * size + 4;
    }
    assert_eq!(at, bytes.len(), "the stream ends with a whole packet");
    starts
}

/// The offset of one byte near share `at` of the stream whose change the reader must catch
/// as damage (a sample inside a packet, a digit inside a data line), with its new value.
fn damage_point(bytes: &[u8], format: &str, at: f64) -> (usize, u8) {
    let near = (bytes.len() as f64 * at) as usize;
    if format == "frames" {
        let starts = packet_starts(bytes);
        let p = starts[starts.partition_point(|&s| s < near)];
        // The fifth byte of the first sample.
        (p + 36, bytes[p + 36] ^ 0x40)
    } else {
        // The start of the next data line, then its last digit before the checksum.
        let mut line = near
            + bytes[near..]
                .iter()
                .position(|&b| b == b'\n')
                .expect("a line")
            + 1;
        while bytes[line] == b'#' {
            line += bytes[line..]
                .iter()
                .position(|&b| b == b'\n')
                .expect("a line")
                + 1;
        }
        let star = line
            + bytes[line..]
                .iter()
                .position(|&b| b == b'*')
                .expect("a checksum");
        let digit = (line..star)
            .rev()
            .find(|&i| bytes[i].is_ascii_digit())
            .expect("a digit");
        let new = if bytes[digit] == b'9' {
            b'1'
        } else {
            bytes[digit] + 1
        };
        (digit, new)
    }
}

fn serial_run_through_damage_and_a_replugged_port(format: &str) {
    let d = Dir::new();
    recordings::fan(&d, "stream.bin", PROFILE, RATE, 6, &["--serial", format]);
    let mut bytes = std::fs::read(d.join("stream.bin")).expect("read the stream");
    let frames_total = SECONDS * f64::from(RATE);
    let bytes_per_frame = bytes.len() as f64 / frames_total;
    for at in CORRUPT_AT {
        let (i, v) = damage_point(&bytes, format, at);
        bytes[i] = v;
    }
    let share = |s: f64| (bytes.len() as f64 * s) as usize;
    let (drop_a, drop_b) = (share(DROP.0), share(DROP.1));
    let (cut, resume) = (share(UNPLUG.0), share(UNPLUG.1));
    let mut first = bytes[..drop_a].to_vec();
    first.extend_from_slice(&bytes[drop_b..cut]);
    let second = bytes[resume..].to_vec();

    let link = d.join("ttyLOGGER");
    let (master, slave) = pty();
    point(&link, &slave);
    let source = format!(
        r#"{{ kind = "serial", port = "{}", baud = 115200, format = "{format}", sample_rate = {RATE}, channels = ["tach", "v"], reconnect_max_s = 4 }}"#,
        link.display()
    );
    let config = write_config(&d, &[fan_machine("fan-s", &source, "")]);
    let db = d.join("veer.db");
    let mut daemon = Daemon::start(&d, &config, "watch");
    daemon.wait_for_log("serial port open", 1, 20.0);

    let writer = write_pieces(master, first);
    let master = writer.join().expect("the first writer");
    // The three damaged bytes and the chunk left out are four gaps; once they are stored the
    // daemon has read past them.
    daemon.wait_for("four gaps", 60.0, || {
        let store = db::open(&db)?;
        let gaps = store.gaps("fan-s", f64::MIN).ok()?;
        (gaps.len() >= 4).then_some(())
    });

    // Unplugged and plugged in again: the new port appears under the same name.
    let (master2, slave2) = pty();
    point(&link, &slave2);
    drop(master);
    let unplugged = Instant::now();
    daemon.wait_for_log("serial port open", 2, 20.0);
    let back_after = unplugged.elapsed();
    let log = daemon.log();
    let lost = log
        .lines()
        .find(|l| l.contains("serial port lost"))
        .unwrap_or_else(|| panic!("no line about the lost port\n{}", daemon.shown()));
    assert!(
        lost.contains("retry_in_s=1.0") || lost.trim_end().ends_with("retry_in_s=1"),
        "the first retry is not after 1 s: {lost}"
    );
    // The first attempt comes after the 1 s back-off (less a poll interval of slack).
    assert!(
        back_after >= Duration::from_millis(900),
        "reconnected after {back_after:?}, before the back-off"
    );

    let writer = write_pieces(master2, second);
    let master2 = writer.join().expect("the second writer");
    daemon.wait_for("the coast-down event", 60.0, || {
        let store = db::open(&db)?;
        let events = store.events(Some("fan-s"), None).ok()?;
        events
            .iter()
            .any(|e| e.row.kind == EventKind::CoastDown)
            .then_some(())
    });
    daemon.terminate(20.0);
    drop(master2);

    let store = Store::open_read_only(&db).expect("open the database");
    let gaps = store.gaps("fan-s", f64::MIN).expect("gaps");
    let corrupt: Vec<_> = gaps.iter().filter(|g| g.row.corrupt_frames > 0).collect();
    assert!(corrupt.len() >= 3, "damaged bytes without gaps: {gaps:#?}");
    assert!(
        gaps.len() >= 5,
        "expected damage, drop and unplug gaps: {gaps:#?}"
    );
    // The chunk left out: its frames, give or take the packets or lines cut at its ends.
    let want = (drop_b - drop_a) as f64 / bytes_per_frame;
    assert!(
        gaps.iter()
            .any(|g| rel(g.row.dropped_frames as f64, want) < 0.25),
        "no gap of about {want:.0} frames: {gaps:#?}"
    );
    // While unplugged the logger sent on: at least those frames are missing after the unplug.
    let unplug = (resume - cut) as f64 / bytes_per_frame;
    assert!(
        gaps.iter()
            .any(|g| g.row.dropped_frames as f64 >= 0.8 * unplug),
        "no gap of at least {unplug:.0} frames after the unplug: {gaps:#?}"
    );

    let segments = db::ingests(&store);
    assert!(segments.len() >= 2, "{segments:#?}");
    for s in &segments {
        assert_eq!(s.kind, IngestKind::Stream, "{s:#?}");
        assert_eq!(s.status, IngestStatus::Done, "{s:#?}");
        assert_eq!(s.machine.as_deref(), Some("fan-s"));
    }
    let events = store.events(Some("fan-s"), None).expect("events");
    let up = events
        .iter()
        .find(|e| e.row.kind == EventKind::RunUp)
        .unwrap_or_else(|| panic!("no run-up stored: {events:#?}"));
    let down = events
        .iter()
        .find(|e| e.row.kind == EventKind::CoastDown)
        .unwrap_or_else(|| panic!("no coast-down stored: {events:#?}"));
    assert!(
        up.row.ingest_id.is_some() && down.row.ingest_id.is_some(),
        "events without their segment: {events:#?}"
    );
    assert_ne!(
        up.row.ingest_id, down.row.ingest_id,
        "the run-up (before the damage) and the coast-down (after the reconnect) are in one segment"
    );
    let crits = store.criticals("fan-s").expect("criticals");
    for e in [up, down] {
        let res = store.resonances(e.id).expect("resonances");
        // The simulated mode (see the folder test for the 0.6 % of the peak above it).
        assert!(
            res.iter()
                .any(|r| rel(r.row.speed_rpm, FAN_CRITICAL_RPM) < 0.02),
            "event {} ({:?}): no resonance within 2 % of {FAN_CRITICAL_RPM}: {res:#?}",
            e.id,
            e.row.kind
        );
        assert!(
            crits.iter().any(
                |c| c.row.origin == CriticalOrigin::Measured { event_id: e.id }
                    && rel(c.row.speed_rpm, FAN_CRITICAL_RPM) < 0.02
            ),
            "event {}: no measured critical: {crits:#?}",
            e.id
        );
    }
    assert_eq!(store.integrity_check().expect("integrity check"), ["ok"]);
}

#[test]
fn serial_frames_survive_damage_and_a_replugged_port() {
    serial_run_through_damage_and_a_replugged_port("frames");
}

#[test]
fn serial_text_survives_damage_and_a_replugged_port() {
    serial_run_through_damage_and_a_replugged_port("text");
}
