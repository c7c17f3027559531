//! The daemon as a child process: started in a test's folder with its output in files there,
//! stopped with SIGTERM (and a clean exit demanded) or killed with SIGKILL, and waited on with
//! deadlines rather than fixed sleeps.

use crate::support::Dir;
use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Output, Stdio};
use std::time::{Duration, Instant};

/// The binary under test.
const VEER: &str = env!("CARGO_BIN_EXE_veer");

/// How often a condition is polled.
const POLL: Duration = Duration::from_millis(50);

/// Log filter for the daemon: the default level, with the worker's machine-state lines, which
/// tell a test that an ingest is under way.
pub const LOG_WITH_STATES: &str = "info,veer::watch=debug";

/// Held while a daemon is spawned, and by anything that briefly holds file descriptors a child
/// must not inherit (a pseudo-terminal's master before it is made close-on-exec): a daemon that
/// inherited another test's master would keep that terminal open after the test closed it.
pub static SPAWN: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// A running `veer watch`.
pub struct Daemon {
    child: Option<Child>,
    stdout: PathBuf,
    stderr: PathBuf,
    started: Instant,
}

impl Daemon {
    /// Starts `veer watch --config CONFIG` in `dir` with the default log level; output goes to
    /// `NAME.stdout` and `NAME.stderr` in the folder.
    pub fn start(dir: &Dir, config: &Path, name: &str) -> Daemon {
        Daemon::start_with_log(dir, config, name, "info")
    }

    /// Like [`Daemon::start`] with the log filter `filter` (`VEER_LOG`).
    pub fn start_with_log(dir: &Dir, config: &Path, name: &str, filter: &str) -> Daemon {
        let stdout = dir.join(&format!("{name}.stdout"));
        let stderr = dir.join(&format!("{name}.stderr"));
        let out = File::create(&stdout).expect("create the daemon's stdout file");
        let err = File::create(&stderr).expect("create the daemon's stderr file");
        let _spawning = SPAWN.lock().unwrap_or_else(|e| e.into_inner());
        let child = Command::new(VEER)
            .arg("watch")
            .arg("--config")
            .arg(config)
            .current_dir(dir.path())
            .env("VEER_LOG", filter)
            .env("NO_COLOR", "1")
            .env_remove("RUST_LOG")
            .env_remove("RUST_BACKTRACE")
            .stdin(Stdio::null())
            .stdout(Stdio::from(out))
            .stderr(Stdio::from(err))
            .spawn()
            .expect("start veer watch");
        Daemon {
            child: Some(child),
            stdout,
            stderr,
            started: Instant::now(),
        }
    }

    /// The process id, as text for `kill`.
    pub fn pid(&self) -> String {
        self.child
            .as_ref()
            .map(|c| c.id().to_string())
            .expect("the daemon has not been stopped")
    }

    /// Everything the daemon has logged so far.
    pub fn log(&self) -> String {
        std::fs::read_to_string(&self.stderr).unwrap_or_default()
    }

    /// The daemon's log and stdout, for a failure message.
    pub fn shown(&self) -> String {
        let log = self.log();
        let lines: Vec<&str> = log.lines().collect();
        let tail = lines[lines.len().saturating_sub(80)..].join("\n");
        format!(
            "after {:.1} s; --- daemon stdout ---\n{}\n--- daemon log (last 80 lines) ---\n{tail}",
            self.started.elapsed().as_secs_f64(),
            std::fs::read_to_string(&self.stdout).unwrap_or_default()
        )
    }

    /// Fails the test if the daemon has exited.
    pub fn assert_running(&mut self) {
        let status = self
            .child
            .as_mut()
            .and_then(|c| c.try_wait().expect("poll the daemon"));
        if let Some(status) = status {
            panic!("the daemon exited early ({status})\n{}", self.shown());
        }
    }

    /// Polls `probe` until it gives a value, failing after `secs` or if the daemon exits.
    pub fn wait_for<T>(
        &mut self,
        what: &str,
        secs: f64,
        mut probe: impl FnMut() -> Option<T>,
    ) -> T {
        let end = Instant::now() + Duration::from_secs_f64(secs);
        loop {
            if let Some(v) = probe() {
                return v;
            }
            self.assert_running();
            if Instant::now() >= end {
                panic!(
                    "timed out after {secs} s waiting for {what}\n{}",
                    self.shown()
                );
            }
            std::thread::sleep(POLL);
        }
    }

    /// Waits until the log holds `needle` at least `times` times.
    pub fn wait_for_log(&mut self, needle: &str, times: usize, secs: f64) {
        let what = format!("{times} log line(s) with `{needle}`");
        let path = self.stderr.clone();
        self.wait_for(&what, secs, || {
            let log = std::fs::read_to_string(&path).unwrap_or_default();
            (log.matches(needle).count() >= times).then_some(())
        });
    }

    /// Sends SIGTERM and insists on a clean exit (status 0, no panic) within `secs`; returns
    /// how long the shutdown took.
    pub fn terminate(mut self, secs: f64) -> Duration {
        let pid = self.pid();
        let t = Instant::now();
        let sent = Command::new("kill")
            .arg("-TERM")
            .arg(&pid)
            .status()
            .expect("run kill");
        assert!(sent.success(), "kill -TERM {pid} failed");
        let status = self.wait_exit(secs);
        let took = t.elapsed();
        assert!(
            status.success(),
            "the daemon did not exit cleanly on SIGTERM ({status})\n{}",
            self.shown()
        );
        let log = self.log();
        assert!(
            !log.contains("panicked"),
            "the daemon panicked\n{}",
            self.shown()
        );
        took
    }

    /// SIGKILL: the daemon dies where it stands, as in a power cut or an OOM kill.
    pub fn kill_hard(mut self) {
        let pid = self.pid();
        let sent = Command::new("kill")
            .arg("-9")
            .arg(&pid)
            .status()
            .expect("run kill");
        assert!(sent.success(), "kill -9 {pid} failed");
        let status = self.wait_exit(10.0);
        assert!(
            !status.success(),
            "the daemon exited normally instead of being killed"
        );
    }

    /// Waits for the process to end; kills it and fails after `secs`.
    fn wait_exit(&mut self, secs: f64) -> ExitStatus {
        let mut child = self.child.take().expect("the daemon is running");
        let end = Instant::now() + Duration::from_secs_f64(secs);
        loop {
            if let Some(status) = child.try_wait().expect("poll the daemon") {
                return status;
            }
            if Instant::now() >= end {
                let _ = child.kill();
                let _ = child.wait();
                panic!("the daemon did not exit within {secs} s\n{}", self.shown());
            }
            std::thread::sleep(POLL);
        }
    }
}

impl Drop for Daemon {
    /// A test that fails half-way must not leave a daemon behind.
    fn drop(&mut self) {
        if let Some(mut child) = self.child.take() {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

/// Runs `veer ARGS` in `dir` to completion, failing (instead of hanging) if it runs longer than
/// `secs`: a configuration that is wrongly accepted would start a daemon that never ends.
pub fn run_bounded(dir: &Dir, args: &[&str], secs: f64) -> Output {
    let stem = format!("cmd-{}", args.join("-").replace(['/', '.', ' '], "_"));
    let out_path = dir.join(&format!("{stem}.stdout"));
    let err_path = dir.join(&format!("{stem}.stderr"));
    let mut child = Command::new(VEER)
        .args(args)
        .current_dir(dir.path())
        .env("NO_COLOR", "1")
        .env_remove("RUST_BACKTRACE")
        .env_remove("VEER_LOG")
        .env_remove("RUST_LOG")
        .stdin(Stdio::null())
        .stdout(Stdio::from(
            File::create(&out_path).expect("create a stdout file"),
        ))
        .stderr(Stdio::from(
            File::create(&err_path).expect("create a stderr file"),
        ))
        .spawn()
        .expect("start veer");
    let end = Instant::now() + Duration::from_secs_f64(secs);
    let status = loop {
        if let Some(s) = child.try_wait().expect("poll veer") {
            break s;
        }
        if Instant::now() >= end {
            let _ = child.kill();
            let _ = child.wait();
            panic!(
                "`veer {}` still ran after {secs} s\n{}",
                args.join(" "),
                std::fs::read_to_string(&err_path).unwrap_or_default()
            );
        }
        std::thread::sleep(POLL);
    };
    Output {
        status,
        stdout: std::fs::read(&out_path).unwrap_or_default(),
        stderr: std::fs::read(&err_path).unwrap_or_default(),
    }
}
