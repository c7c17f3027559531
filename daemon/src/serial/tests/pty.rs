//! The serial source against pseudo-terminals.
//!
//! A pseudo-terminal pair stands in for the logger: the source opens the slave side as its port
//! and the test writes the logger's bytes into the master side. The pair comes from
//! `serialport::TTYPort::pair` (`posix_openpt`, `grantpt`, `unlockpt`, `ptsname` underneath),
//! which needs no `unsafe` here.
//!
//! A pseudo-terminal's slave path disappears with its master, so "the port goes away and comes
//! back" is played with a symlink: the source is given the link's path, the link first points at
//! one pair's slave, the test re-points it at a second pair's slave and then closes the first
//! master. The source sees its port fail, backs off, and reopens the same path, which is now the
//! new pair, the way a USB adapter that was pulled and replugged shows up under its old name.

use super::{layout, signal, slice, views, Collected};
use crate::config::model::{SerialFormat, SerialSource};
use crate::ingest::types::StreamEvent;
use crate::serial::frames::{FrameEncoder, SampleFormat};
use crate::serial::run_serial;
use crate::serial::text::TextEncoder;
use serialport::{SerialPort, TTYPort};
use std::io::Write;
use std::path::Path;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};
use tokio::sync::mpsc;
use tokio_util::sync::CancellationToken;

const RATE: f64 = 1000.0;

/// A pseudo-terminal: the master to write to, and the slave's path.
fn pty() -> (TTYPort, String) {
    let (mut master, slave) = TTYPort::pair().expect("pseudo-terminal");
    let path = slave.name().expect("slave path");
    // The source opens the path itself; this handle is not needed.
    drop(slave);
    master.set_timeout(Duration::from_secs(2)).expect("timeout");
    (master, path)
}

/// Points the symlink `link` at `target`, replacing it in one step.
fn point(link: &Path, target: &str) {
    let tmp = link.with_extension("new");
    let _ = std::fs::remove_file(&tmp);
    std::os::unix::fs::symlink(target, &tmp).expect("symlink");
    std::fs::rename(&tmp, link).expect("re-point symlink");
}

/// The source on its thread, reading `port`.
struct Running {
    rx: mpsc::Receiver<StreamEvent>,
    cancel: CancellationToken,
    thread: Option<JoinHandle<()>>,
}

impl Running {
    fn start(port: &Path, format: SerialFormat, channels: usize, max_s: f64) -> Running {
        let cfg = SerialSource {
            port: port.display().to_string(),
            baud: 115_200,
            format,
            sample_rate: RATE,
            channels: layout(channels, RATE).channels,
            reconnect_max_s: max_s,
        };
        let (tx, rx) = mpsc::channel(16);
        let cancel = CancellationToken::new();
        let c = cancel.clone();
        let thread = std::thread::spawn(move || run_serial(&cfg, tx, c));
        Running {
            rx,
            cancel,
            thread: Some(thread),
        }
    }

    /// The next event, waiting at most `secs`.
    fn next(&mut self, secs: f64) -> Option<StreamEvent> {
        let end = Instant::now() + Duration::from_secs_f64(secs);
        loop {
            match self.rx.try_recv() {
                Ok(ev) => return Some(ev),
                Err(mpsc::error::TryRecvError::Disconnected) => return None,
                Err(mpsc::error::TryRecvError::Empty) if Instant::now() >= end => return None,
                Err(mpsc::error::TryRecvError::Empty) => {
                    std::thread::sleep(Duration::from_millis(2))
                }
            }
        }
    }

    /// Collects blocks and gaps until `frames` frames have come, failing after `secs`.
    fn collect(&mut self, into: &mut Collected, frames: usize, secs: f64) {
        let end = Instant::now() + Duration::from_secs_f64(secs);
        while into.frames() < frames {
            let left = end.saturating_duration_since(Instant::now()).as_secs_f64();
            let ev = self
                .next(left)
                .unwrap_or_else(|| panic!("only {} of {frames} frames arrived", into.frames()));
            assert!(
                matches!(ev, StreamEvent::Block(_) | StreamEvent::Gap(_)),
                "unexpected {ev:?}"
            );
            into.add(ev);
        }
    }

    /// Cancels and checks that the thread ends promptly.
    fn stop(mut self) -> Duration {
        let t = Instant::now();
        self.cancel.cancel();
        let thread = self.thread.take().expect("thread");
        while !thread.is_finished() {
            assert!(t.elapsed() < Duration::from_secs(1), "source did not stop");
            std::thread::sleep(Duration::from_millis(5));
        }
        thread.join().expect("source thread");
        t.elapsed()
    }
}

/// Writes `bytes` to the master in pieces of `piece` bytes, on a thread of its own: the source
/// holds back when its channel is full (back-pressure), so the test must read while it writes.
fn write_pieces(mut master: TTYPort, bytes: Vec<u8>, piece: usize) -> JoinHandle<TTYPort> {
    std::thread::spawn(move || {
        for p in bytes.chunks(piece) {
            master.write_all(p).expect("write to the pseudo-terminal");
        }
        master
    })
}

#[test]
fn frames_survive_a_port_that_goes_away_and_comes_back() {
    let dir = tempfile::tempdir().expect("tempdir");
    let link = dir.path().join("ttyLOGGER");
    let (master, slave) = pty();
    point(&link, &slave);
    let mut src = Running::start(&link, SerialFormat::Frames, 2, 2.0);
    assert!(matches!(src.next(3.0), Some(StreamEvent::Connected { .. })));

    let cols = signal(2, 2000, 41);
    let mut enc = FrameEncoder::new(2, RATE, SampleFormat::F32)
        .expect("encoder")
        .with_packet_frames(10)
        .expect("size");
    let mut first = Vec::new();
    enc.encode(&views(&slice(&cols, 0, 1000)), &mut first)
        .expect("encode");
    let writer = write_pieces(master, first, 333);
    let mut got = Collected::default();
    src.collect(&mut got, 1000, 3.0);
    let master = writer.join().expect("writer");

    // The port goes away; a new one appears under the same name.
    let (master2, slave2) = pty();
    point(&link, &slave2);
    drop(master);
    match src.next(2.0) {
        Some(StreamEvent::Disconnected { retry_in_s, .. }) => assert_eq!(retry_in_s, 1.0),
        other => panic!("expected Disconnected, got {other:?}"),
    }
    assert!(matches!(src.next(3.0), Some(StreamEvent::Connected { .. })));

    // The logger went on meanwhile: frames 1000..1200 were sent while nobody listened.
    let mut lost = Vec::new();
    enc.encode(&views(&slice(&cols, 1000, 1200)), &mut lost)
        .expect("encode");
    let mut second = Vec::new();
    enc.encode(&views(&slice(&cols, 1200, 2000)), &mut second)
        .expect("encode");
    let writer = write_pieces(master2, second, 1000);
    src.collect(&mut got, 1800, 3.0);
    drop(writer.join().expect("writer"));

    got.assert_consistent();
    assert_eq!(got.gaps.len(), 1, "{:?}", got.gaps);
    let g = &got.gaps[0];
    assert_eq!((g.first_frame, g.frames), (1000, 200));
    assert!(g.reason.starts_with("port closed"), "{}", g.reason);
    let mut want = slice(&cols, 0, 1000);
    for (w, rest) in want.iter_mut().zip(slice(&cols, 1200, 2000)) {
        w.extend(rest);
    }
    assert_eq!(got.joined(), want);
    assert!(src.stop() < Duration::from_millis(500));
}

#[test]
fn text_arrives_through_a_pseudo_terminal() {
    let (master, slave) = pty();
    let mut src = Running::start(Path::new(&slave), SerialFormat::Text, 3, 2.0);
    assert!(matches!(src.next(3.0), Some(StreamEvent::Connected { .. })));
    let cols = signal(3, 3000, 42);
    let names = layout(3, RATE).channels;
    let names: Vec<&str> = names.iter().map(String::as_str).collect();
    let mut enc = TextEncoder::new(&names, RATE).expect("encoder");
    let mut bytes = Vec::new();
    enc.encode(&views(&cols), &mut bytes).expect("encode");
    let writer = write_pieces(master, bytes, 7);
    let mut got = Collected::default();
    src.collect(&mut got, 3000, 4.0);
    drop(writer.join().expect("writer"));
    assert!(got.gaps.is_empty());
    assert_eq!(got.joined(), cols);
    assert!(src.stop() < Duration::from_millis(500));
}

#[test]
fn a_missing_port_is_retried_with_doubling_waits() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut src = Running::start(&dir.path().join("nothing"), SerialFormat::Text, 1, 1.5);
    let mut waits = Vec::new();
    let t = Instant::now();
    for _ in 0..2 {
        match src.next(3.0) {
            Some(StreamEvent::Disconnected {
                retry_in_s, error, ..
            }) => {
                assert!(!error.is_empty());
                waits.push(retry_in_s);
            }
            other => panic!("expected Disconnected, got {other:?}"),
        }
    }
    // 1 s, then doubled but capped at reconnect_max_s.
    assert_eq!(waits, [1.0, 1.5]);
    assert!(t.elapsed() >= Duration::from_millis(950));
    // Cancelled in the middle of a wait, the source ends within a poll interval or two.
    assert!(src.stop() < Duration::from_millis(300));
}
