//! Finding the built library and the `veer` binary, compiling C programs, simulating recordings.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

/// This crate's folder.
pub fn crate_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The target profile folder the test runs from (`target/debug` or `target/release`): the test
/// binary lives in its `deps` folder, next to the shared library cargo built with it.
pub fn profile_dir() -> PathBuf {
    let exe = std::env::current_exe().expect("the test binary's path");
    let deps = exe.parent().expect("deps folder");
    deps.parent().expect("profile folder").to_path_buf()
}

/// The folder holding `libveer_abi.so` (and `.a`): `deps`, where cargo rebuilds the library's
/// every crate type along with the tests (the copy one level up is refreshed only by a plain
/// build of the crate, so it may be stale).
pub fn lib_dir() -> PathBuf {
    let deps = profile_dir().join("deps");
    assert!(
        deps.join("libveer_abi.so").exists(),
        "no libveer_abi.so in {} (built with the tests as the crate's cdylib)",
        deps.display()
    );
    deps
}

/// The shared library's path.
pub fn shared_lib() -> PathBuf {
    lib_dir().join("libveer_abi.so")
}

/// The `veer` binary of the workspace, brought up to date on first use (a no-op when the
/// workspace's own test build has just made it).
pub fn veer_bin() -> &'static Path {
    static BIN: OnceLock<PathBuf> = OnceLock::new();
    BIN.get_or_init(|| {
        let bin = profile_dir().join("veer");
        {
            let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".to_string());
            let mut cmd = Command::new(cargo);
            cmd.args(["build", "--quiet", "-p", "veer", "--bin", "veer"])
                .current_dir(crate_dir());
            if profile_dir().file_name().is_some_and(|n| n == "release") {
                cmd.arg("--release");
            }
            let target = profile_dir().parent().expect("target dir").to_path_buf();
            cmd.env("CARGO_TARGET_DIR", target);
            let out = cmd.output().expect("cargo runs");
            assert!(
                out.status.success(),
                "building veer failed:\n{}",
                String::from_utf8_lossy(&out.stderr)
            );
        }
        bin
    })
}

/// Runs a command and insists on success, printing everything it said otherwise.
pub fn run_ok(cmd: &mut Command) -> Output {
    let out = cmd.output().expect("the command starts");
    assert!(
        out.status.success(),
        "{cmd:?} failed ({}):\n--- stdout\n{}\n--- stderr\n{}",
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Compiles `tests/c/NAME.c` against the header and the shared library into `dir`.
pub fn compile_c(name: &str, dir: &Path, extra: &[&str]) -> PathBuf {
    let src = crate_dir().join("tests/c").join(format!("{name}.c"));
    let exe = dir.join(name);
    let lib = lib_dir();
    let mut cmd = Command::new(std::env::var("CC").unwrap_or_else(|_| "cc".to_string()));
    cmd.arg("-std=c99")
        .args(["-Wall", "-Wextra", "-Werror", "-O1", "-g"])
        .args(extra)
        .arg("-I")
        .arg(crate_dir().join("include"))
        .arg(&src)
        .arg("-o")
        .arg(&exe)
        .arg(format!("-L{}", lib.display()))
        // DT_RPATH (not RUNPATH): searched before LD_LIBRARY_PATH, which cargo points at the
        // profile folder and its possibly stale copy of the library.
        .arg(format!("-Wl,--disable-new-dtags,-rpath,{}", lib.display()))
        .args(["-lveer_abi", "-lm"]);
    run_ok(&mut cmd);
    exe
}

/// Whether a program is on the PATH.
pub fn have(program: &str) -> bool {
    Command::new(program)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

/// The configuration string of the simulated compressor, lined up with `veer analyze`'s options
/// in [`ANALYZE_ARGS`] so that both give the engine the same settings.
pub const CONFIG: &str = r#"
min_operating_rpm = 5200
max_continuous_rpm = 6800
tach = { channel = "tach", ppr = 1, min_rpm = 30, max_rpm = 60000 }
sensors = [
  { channel = "x", kind = "displacement", units = "um", angle_deg = 45 },
  { channel = "y", kind = "displacement", units = "um", angle_deg = 135 },
]
[tracking]
orders = [1, 2]
[alerts]
margin = "api"
warn_band_pct = 5
"#;

/// `veer analyze` options giving the same engine settings as [`CONFIG`].
pub const ANALYZE_ARGS: &[&str] = &[
    "--tach",
    "tach",
    "--vib",
    "x,y",
    "--range",
    "5200:6800",
    "--margin",
    "api",
    "--warn-band",
    "5",
    "--min-speed",
    "30",
    "--max-speed",
    "60000",
    "--orders",
    "1,2",
];

/// A simulated run-up of the demo compressor through its first critical (near 2900 r/min),
/// written by `veer simulate` into `dir`.
pub fn run_up_csv(dir: &Path, rate: u32, profile: &str) -> PathBuf {
    let csv = dir.join("run-up.csv");
    run_ok(
        Command::new(veer_bin())
            .args([
                "simulate",
                "--machine",
                "comp-3",
                "--rate",
                &rate.to_string(),
            ])
            .args(["--profile", profile, "--out"])
            .arg(&csv),
    );
    csv
}

/// `veer analyze --json` of a recording.
pub fn analyze(csv: &Path) -> serde_json::Value {
    let out = run_ok(
        Command::new(veer_bin())
            .arg("analyze")
            .arg(csv)
            .args(ANALYZE_ARGS)
            .arg("--json"),
    );
    serde_json::from_slice(&out.stdout).expect("analyze prints JSON")
}

/// The events of an analysis, in order.
pub fn events(doc: &serde_json::Value) -> Vec<serde_json::Value> {
    doc["events"].as_array().expect("an events array").clone()
}

/// A temporary folder.
pub fn temp() -> tempfile::TempDir {
    tempfile::Builder::new()
        .prefix("veer-abi-")
        .tempdir()
        .expect("a temporary folder")
}

/// Sample rate of the shared run-up, Hz.
pub const RATE: u32 = 4096;

/// The shared recording and its analysis, made once per test run in the target folder.
pub struct Fixture {
    /// The folder holding the files.
    pub dir: PathBuf,
    /// The recording.
    pub csv: PathBuf,
    /// The configuration string, as a file.
    pub config: PathBuf,
    /// `veer analyze --json` of the recording.
    pub analysis: serde_json::Value,
}

/// The shared fixture: a 40 s run-up from slow roll to above the operating range.
pub fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let dir = profile_dir()
            .join("abi-fixture")
            .join(std::process::id().to_string());
        std::fs::create_dir_all(&dir).expect("fixture folder");
        let csv = run_up_csv(&dir, RATE, "0:300,4:300,34:7000,40:7000");
        let config = dir.join("machine.toml");
        std::fs::write(&config, CONFIG).expect("write the configuration");
        let analysis = analyze(&csv);
        Fixture {
            dir,
            csv,
            config,
            analysis,
        }
    })
}

/// Compiles a C program given as text (against the header only) into `dir`.
pub fn compile_c_source(name: &str, source: &str, dir: &Path) -> PathBuf {
    let src = dir.join(format!("{name}.c"));
    std::fs::write(&src, source).expect("write the C source");
    let exe = dir.join(name);
    run_ok(
        Command::new(std::env::var("CC").unwrap_or_else(|_| "cc".to_string()))
            .args(["-std=c99", "-Wall", "-Werror", "-I"])
            .arg(crate_dir().join("include"))
            .arg(&src)
            .arg("-o")
            .arg(&exe),
    );
    exe
}
