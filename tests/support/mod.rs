//! Running the real `veer` binary in a temporary folder, and the assertions every theme shares.
//!
//! Each test gets its own [`Dir`], so tests run in parallel without seeing each other's files,
//! and a failing assertion prints the command's whole stdout and stderr: an end-to-end failure
//! is only useful if it says what the binary actually printed.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use tempfile::TempDir;

/// The binary under test, built by cargo for this test target.
const VEER: &str = env!("CARGO_BIN_EXE_veer");

/// Runs `veer ARGS` with `dir` as the working folder, so file names in messages stay short.
pub fn veer(args: &[&str], dir: &Path) -> Output {
    Command::new(VEER)
        .args(args)
        .current_dir(dir)
        // Keep the messages plain and stable whatever the caller's environment.
        .env("NO_COLOR", "1")
        .env_remove("RUST_BACKTRACE")
        .output()
        .expect("the veer binary runs")
}

/// A temporary folder that is removed when the test ends.
pub struct Dir {
    tmp: TempDir,
}

impl Dir {
    /// A fresh, empty folder.
    pub fn new() -> Dir {
        Dir {
            tmp: tempfile::Builder::new()
                .prefix("veer-e2e-")
                .tempdir()
                .expect("a temporary folder"),
        }
    }

    /// The folder itself.
    pub fn path(&self) -> &Path {
        self.tmp.path()
    }

    /// A path inside the folder.
    pub fn join(&self, name: &str) -> PathBuf {
        self.tmp.path().join(name)
    }

    /// Writes a file into the folder and returns its path.
    pub fn write(&self, name: &str, contents: &[u8]) -> PathBuf {
        let p = self.join(name);
        std::fs::write(&p, contents).expect("write a test file");
        p
    }

    /// Runs `veer ARGS` in this folder.
    pub fn veer(&self, args: &[&str]) -> Output {
        veer(args, self.path())
    }

    /// Runs `veer simulate --out NAME ARGS...` and insists it worked.
    pub fn simulate(&self, out: &str, args: &[&str]) {
        let mut all = vec!["simulate", "--out", out];
        all.extend_from_slice(args);
        let o = self.veer(&all);
        success(&o, &all);
        assert!(self.join(out).is_file(), "simulate did not write {out}");
    }

    /// Runs `veer ARGS...` (an analysis with `--json`), insists it worked, and parses stdout.
    pub fn json(&self, args: &[&str]) -> Value {
        let o = self.veer(args);
        let stdout = success(&o, args);
        serde_json::from_str(&stdout).unwrap_or_else(|e| {
            panic!(
                "`veer {}`: stdout is not JSON ({e}):\n{stdout}",
                args.join(" ")
            )
        })
    }
}

/// Both streams of a finished command, for failure messages.
pub fn shown(o: &Output) -> String {
    format!(
        "exit status: {}\n--- stdout ---\n{}\n--- stderr ---\n{}",
        o.status,
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// Asserts the command exited 0 without a panic and returns its stdout.
pub fn success(o: &Output, args: &[&str]) -> String {
    assert!(
        o.status.success(),
        "`veer {}` failed\n{}",
        args.join(" "),
        shown(o)
    );
    assert_no_panic(o);
    String::from_utf8(o.stdout.clone()).expect("stdout is UTF-8")
}

/// Asserts neither stream carries the text of a Rust panic.
pub fn assert_no_panic(o: &Output) {
    let all = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        !all.contains("panicked"),
        "the binary panicked\n{}",
        shown(o)
    );
    assert!(
        !all.contains("RUST_BACKTRACE"),
        "the binary panicked\n{}",
        shown(o)
    );
}

/// Asserts the command failed with a non-zero exit code, said so in exactly one non-empty line
/// on stderr and nothing on stdout, without a panic; returns that line.
pub fn one_error_line(o: &Output) -> String {
    assert!(!o.status.success(), "expected a failure\n{}", shown(o));
    assert!(
        o.status.code().is_some(),
        "killed by a signal instead of exiting\n{}",
        shown(o)
    );
    assert_no_panic(o);
    let stderr = String::from_utf8_lossy(&o.stderr);
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(
        lines.len(),
        1,
        "expected exactly one line on stderr\n{}",
        shown(o)
    );
    let line = lines[0].trim();
    assert!(!line.is_empty(), "the error line is blank\n{}", shown(o));
    assert!(
        o.stdout.is_empty(),
        "a failure printed on stdout\n{}",
        shown(o)
    );
    line.to_string()
}

/// Like [`one_error_line`], and the line must hold every one of `needles` and must not say the
/// same thing twice in a row (a cause repeated by error chaining reads as noise).
pub fn error_naming(o: &Output, needles: &[&str]) -> String {
    let line = one_error_line(o);
    for n in needles {
        assert!(
            line.contains(n),
            "the error line does not mention `{n}`: {line}"
        );
    }
    let parts: Vec<&str> = line.split(": ").map(str::trim).collect();
    for w in parts.windows(2) {
        assert_ne!(w[0], w[1], "the error line repeats itself: {line}");
    }
    line
}

/// The number at `v[key]`, or a failure naming the key and what was there.
pub fn num(v: &Value, key: &str) -> f64 {
    v.get(key)
        .and_then(Value::as_f64)
        .unwrap_or_else(|| panic!("`{key}` is missing or not a number in {v}"))
}

/// The array at `v[key]`, or a failure naming the key.
pub fn arr<'a>(v: &'a Value, key: &str) -> &'a Vec<Value> {
    v.get(key)
        .and_then(Value::as_array)
        .unwrap_or_else(|| panic!("`{key}` is missing or not an array in {v}"))
}

/// The string at `v[key]`, or a failure naming the key.
pub fn text<'a>(v: &'a Value, key: &str) -> &'a str {
    v.get(key)
        .and_then(Value::as_str)
        .unwrap_or_else(|| panic!("`{key}` is missing or not a string in {v}"))
}

/// The number at `v[key]` if it is one; `None` if it is null; a failure if it is missing or
/// anything else.
pub fn num_or_null(v: &Value, key: &str) -> Option<f64> {
    match v.get(key) {
        Some(Value::Null) => None,
        Some(x) if x.is_number() => x.as_f64(),
        other => panic!("`{key}` must be a number or null, found {other:?} in {v}"),
    }
}

/// |a − b| / |b|.
pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}
