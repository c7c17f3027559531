//! Where alert changes go: the daemon's log, a JSON-lines file, a command.
//!
//! An output that fails (a full disk, a missing program, a hung script) is reported to the caller
//! and never stops the others or the daemon: an alert that reached the log but not a pager is still
//! better than a daemon that stopped watching. A command is run directly from its argument vector,
//! never through a shell, so nothing in an alert's text can be interpreted as shell syntax; the
//! alert's fields reach it as environment variables.

use super::time::rfc3339;
use super::{severity_name, AlertChange};
use crate::config::model::{Output, OutputKind, Severity};
use serde_json::json;
use std::path::Path;
use std::process::Stdio;
use std::time::Duration;

/// Longest piece of a failed command's stderr quoted in its error, characters.
const STDERR_QUOTE: usize = 200;

/// Sends one change to every output whose `min_severity` it reaches; returns one line per
/// output that failed.
///
/// A clear is filtered by the severity the alert had, so an output that got the alarm also gets
/// its clear.
pub(crate) async fn deliver(change: &AlertChange, outputs: &[Output]) -> Vec<String> {
    let mut errors = Vec::new();
    for output in outputs {
        if change.alert().severity < output.min_severity {
            continue;
        }
        let result = match &output.kind {
            OutputKind::Log => {
                log(change);
                Ok(())
            }
            OutputKind::Jsonl { path } => append_jsonl(change, path).await,
            OutputKind::Command { argv, timeout_s } => run_command(change, argv, *timeout_s).await,
        };
        if let Err(e) = result {
            errors.push(e);
        }
    }
    errors
}

/// The JSON document of one change, as written to a JSON-lines file.
pub(super) fn document(change: &AlertChange) -> serde_json::Value {
    let a = change.alert();
    json!({
        "event": change.event_name(),
        "machine": a.machine,
        "kind": a.kind.name(),
        "key": a.key,
        "severity": severity_name(a.severity),
        "time": rfc3339(a.time_s),
        "time_s": a.time_s,
        "message": a.message,
        "evidence": a.evidence,
    })
}

fn log(change: &AlertChange) {
    let a = change.alert();
    let evidence = a.evidence.to_string();
    let (event, kind, severity) = (
        change.event_name(),
        a.kind.name(),
        severity_name(a.severity),
    );
    match (change, a.severity) {
        (AlertChange::Cleared(_), _) => tracing::info!(
            machine = %a.machine, kind, key = %a.key, severity, event, time_s = a.time_s,
            evidence = %evidence, "{}", a.message
        ),
        (_, Severity::Alarm) => tracing::error!(
            machine = %a.machine, kind, key = %a.key, severity, event, time_s = a.time_s,
            evidence = %evidence, "{}", a.message
        ),
        (_, Severity::Warning) => tracing::warn!(
            machine = %a.machine, kind, key = %a.key, severity, event, time_s = a.time_s,
            evidence = %evidence, "{}", a.message
        ),
    }
}

async fn append_jsonl(change: &AlertChange, path: &Path) -> Result<(), String> {
    let mut line = document(change).to_string();
    line.push('\n');
    let path = path.to_path_buf();
    let shown = path.display().to_string();
    // A small blocking write, off the runtime's threads.
    tokio::task::spawn_blocking(move || append_line(&path, &line))
        .await
        .map_err(|e| format!("alert file {shown}: writer stopped: {e}"))?
}

fn append_line(path: &Path, line: &str) -> Result<(), String> {
    use std::io::Write;
    let fail =
        |what: &str, e: std::io::Error| format!("alert file {}: {what}: {e}", path.display());
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|e| fail("cannot create its folder", e))?;
    }
    let mut file = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .map_err(|e| fail("cannot open", e))?;
    // One write of the whole line: with O_APPEND, lines of concurrent writers do not interleave.
    file.write_all(line.as_bytes())
        .map_err(|e| fail("cannot write", e))
}

/// The environment a command receives: name and value of each variable.
pub(super) fn environment(change: &AlertChange) -> [(&'static str, String); 9] {
    let a = change.alert();
    [
        ("VEER_ALERT_EVENT", change.event_name().to_string()),
        ("VEER_ALERT_MACHINE", a.machine.clone()),
        ("VEER_ALERT_KIND", a.kind.name().to_string()),
        ("VEER_ALERT_KEY", a.key.clone()),
        ("VEER_ALERT_SEVERITY", severity_name(a.severity).to_string()),
        ("VEER_ALERT_TIME", rfc3339(a.time_s)),
        ("VEER_ALERT_TIME_S", format!("{}", a.time_s)),
        ("VEER_ALERT_MESSAGE", a.message.clone()),
        ("VEER_ALERT_EVIDENCE", a.evidence.to_string()),
    ]
}

async fn run_command(change: &AlertChange, argv: &[String], timeout_s: f64) -> Result<(), String> {
    let Some((program, args)) = argv.split_first() else {
        return Err("alert command: empty argument list".to_string());
    };
    let fail = |what: String| format!("alert command {program}: {what}");
    let timeout = Duration::try_from_secs_f64(timeout_s).unwrap_or(Duration::from_secs(30));
    let mut command = tokio::process::Command::new(program);
    command
        .args(args)
        .envs(environment(change))
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        // Dropping the wait on timeout kills the child; tokio reaps it.
        .kill_on_drop(true);
    let child = command
        .spawn()
        .map_err(|e| fail(format!("cannot start: {e}")))?;
    let output = match tokio::time::timeout(timeout, child.wait_with_output()).await {
        Ok(result) => result.map_err(|e| fail(format!("cannot wait for it: {e}")))?,
        Err(_) => {
            return Err(fail(format!(
                "did not finish within {timeout_s} s and was killed"
            )))
        }
    };
    if output.status.success() {
        return Ok(());
    }
    let stderr = String::from_utf8_lossy(&output.stderr);
    let last = stderr
        .lines()
        .rev()
        .find(|l| !l.trim().is_empty())
        .unwrap_or("");
    let quote: String = last.chars().take(STDERR_QUOTE).collect();
    Err(fail(if quote.is_empty() {
        format!("failed ({})", output.status)
    } else {
        format!("failed ({}): {quote}", output.status)
    }))
}
