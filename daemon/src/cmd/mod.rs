//! One module per subcommand.

mod analyze;
mod demo;
mod filter;
mod plant_demo;
mod review;
mod simulate;
mod status;
mod watch;

use crate::cli::{Cli, Command};
use anyhow::Result;

/// Runs the parsed command.
pub(crate) fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Analyze(a) => analyze::run(a),
        Command::Filter(a) => filter::run(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Watch(a) => watch::run(a),
        Command::Status(a) => status::run(a),
        Command::Events(a) => review::events(a),
        Command::Show(a) => review::show(a),
        Command::Plot(a) => review::plot(a),
        Command::Report(a) => review::report(a),
        Command::Margins(a) => review::margins(a),
    }
}

/// Writes to stdout; a reader that went away (`veer … | head`) ends the output quietly instead of
/// being an error.
pub(crate) fn print_out(text: &str) -> Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(anyhow::anyhow!("stdout: {e}")),
    }
}

/// Peak resident memory of this process, MiB, where the system reports it (Linux).
pub(crate) fn peak_memory_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib / 1024.0)
}
