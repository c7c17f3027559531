//! The serial source: reads a port on its own thread, decodes, and reconnects when it goes away.
//!
//! The port API blocks, so the source is a plain thread rather than a task. It reads with a
//! 100 ms timeout, which is also how often it looks at the cancellation token. Events go out with
//! `blocking_send` on a bounded channel: when the engine falls behind, the reader waits and the
//! port's own buffer takes the slack, instead of memory growing here.
//!
//! One decoder lives for the whole run. When the port fails, its half-read line or packet is
//! dropped, but its frame count and stream clock carry on, so the frames a logger sent while the
//! cable was out show up as one gap of the right size once data resumes.

use super::{Decoder, StreamLayout};
use crate::config::model::SerialSource;
use crate::ingest::types::StreamEvent;
use std::io::ErrorKind;
use std::time::{Duration, SystemTime, UNIX_EPOCH};
use tokio::sync::mpsc::Sender;
use tokio_util::sync::CancellationToken;

/// Read timeout, and so the longest the source goes without looking at the cancel token.
const POLL: Duration = Duration::from_millis(100);

/// First wait before reopening a port, s; doubled after each failure up to the configured cap.
const FIRST_RETRY_S: f64 = 1.0;

/// Bytes read at a time: about 10 ms at 921 600 baud, so a read never holds much latency.
const READ_BUF: usize = 16 * 1024;

/// Reads the serial port of `cfg` until `cancel` fires or the receiver of `tx` goes away.
///
/// Sends [`StreamEvent::Connected`] when the port opens, blocks and gaps as they are decoded, and
/// [`StreamEvent::Disconnected`] with the time to the next attempt whenever opening or reading
/// fails. Run it on a thread of its own: it blocks.
pub(crate) fn run_serial(cfg: &SerialSource, tx: Sender<StreamEvent>, cancel: CancellationToken) {
    let layout = StreamLayout {
        sample_rate: cfg.sample_rate,
        channels: cfg.channels.clone(),
    };
    let mut decoder = Decoder::new(cfg.format, layout);
    let cap = if cfg.reconnect_max_s.is_finite() && cfg.reconnect_max_s > 0.0 {
        cfg.reconnect_max_s
    } else {
        FIRST_RETRY_S
    };
    let mut retry_s = FIRST_RETRY_S.min(cap);
    while !cancel.is_cancelled() {
        let error = match serialport::new(&cfg.port, cfg.baud).timeout(POLL).open() {
            Ok(mut port) => {
                if tx
                    .blocking_send(StreamEvent::Connected {
                        port: cfg.port.clone(),
                    })
                    .is_err()
                {
                    return;
                }
                let ended = read_port(&mut *port, cfg, &mut decoder, &tx, &cancel);
                match ended {
                    ReadEnd::Stop => return,
                    ReadEnd::Failed { error, got_data } => {
                        if got_data {
                            retry_s = FIRST_RETRY_S.min(cap);
                        }
                        error
                    }
                }
            }
            Err(e) => e.to_string(),
        };
        decoder.note_disconnect(&error);
        let event = StreamEvent::Disconnected {
            port: cfg.port.clone(),
            error,
            retry_in_s: retry_s,
        };
        if tx.blocking_send(event).is_err() || !sleep_unless_cancelled(retry_s, &cancel) {
            return;
        }
        retry_s = (retry_s * 2.0).min(cap);
    }
}

/// How a connection ended.
enum ReadEnd {
    /// Cancelled, or nobody listens any more: the source ends.
    Stop,
    /// The port failed; retry.
    Failed {
        /// What the system said.
        error: String,
        /// Whether any bytes came in on this connection (a port that opens and fails at once
        /// keeps backing off; one that worked a while retries quickly).
        got_data: bool,
    },
}

/// Reads and decodes until the port fails or the source must stop.
fn read_port(
    port: &mut dyn serialport::SerialPort,
    cfg: &SerialSource,
    decoder: &mut Decoder,
    tx: &Sender<StreamEvent>,
    cancel: &CancellationToken,
) -> ReadEnd {
    let mut buf = vec![0u8; READ_BUF];
    let mut events = Vec::new();
    let mut got_data = false;
    let mut seen = decoder.stats().clone();
    loop {
        if cancel.is_cancelled() {
            return ReadEnd::Stop;
        }
        let n = match port.read(&mut buf) {
            Ok(0) => {
                return ReadEnd::Failed {
                    error: "end of stream".to_string(),
                    got_data,
                }
            }
            Ok(n) => n,
            Err(e) if matches!(e.kind(), ErrorKind::TimedOut | ErrorKind::Interrupted) => continue,
            Err(e) => {
                return ReadEnd::Failed {
                    error: e.to_string(),
                    got_data,
                }
            }
        };
        got_data = true;
        decoder.push(&buf[..n], now_unix_s(), &mut events);
        log_news(cfg, &mut seen, decoder);
        for ev in events.drain(..) {
            if tx.blocking_send(ev).is_err() {
                return ReadEnd::Stop;
            }
        }
    }
}

/// Logs what the decoder's counters say that gaps do not: a logger set up differently from the
/// configuration, and restarts of its count.
fn log_news(cfg: &SerialSource, seen: &mut super::DecodeStats, decoder: &Decoder) {
    let now = decoder.stats();
    if now.mismatched_headers > seen.mismatched_headers && now.last_mismatch != seen.last_mismatch {
        tracing::warn!(
            port = %cfg.port,
            detail = now.last_mismatch.as_deref().unwrap_or(""),
            "serial stream does not match the configuration; its data is ignored"
        );
    }
    if now.restarts > seen.restarts {
        tracing::info!(port = %cfg.port, "logger restarted its frame count");
    }
    if now != seen {
        seen.clone_from(now);
    }
}

/// Waits `seconds`, looking at the token every [`POLL`]; false when cancelled.
fn sleep_unless_cancelled(seconds: f64, cancel: &CancellationToken) -> bool {
    // A day at most: also keeps the conversion from panicking on a huge configured cap.
    let seconds = if seconds > 0.0 {
        seconds.min(86_400.0)
    } else {
        0.0
    };
    let end = std::time::Instant::now() + Duration::from_secs_f64(seconds);
    loop {
        if cancel.is_cancelled() {
            return false;
        }
        let now = std::time::Instant::now();
        if now >= end {
            return true;
        }
        std::thread::sleep(POLL.min(end - now));
    }
}

/// The wall clock, Unix seconds.
fn now_unix_s() -> f64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}
