//! The Python ctypes test script, run against the shared library and the shared fixture.

use crate::support::{crate_dir, fixture, have, run_ok, shared_lib};
use std::process::Command;

#[test]
fn python_ctypes_finds_what_analyze_finds() {
    if !have("python3") {
        eprintln!("python3 is not installed: ctypes test skipped");
        return;
    }
    let f = fixture();
    let analysis = f.dir.join("analysis.json");
    std::fs::write(&analysis, f.analysis.to_string()).expect("write the analysis");
    let out = run_ok(
        Command::new("python3")
            .arg(crate_dir().join("tests/python/test_ctypes.py"))
            .arg(shared_lib())
            .arg(&f.config)
            .arg(&f.csv)
            .arg(&analysis),
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("equal to veer analyze"), "{text}");
}
