//! The review commands (`events`, `show`, `plot`, `report`, `margins`) against a real database:
//! one `veer demo --dir` run, shared by every test here, fills it through the daemon with the
//! demo plant's run-ups and coast-downs; each test then queries it.

mod estimates;
mod margins;
mod plots;
mod report;
mod show;
mod svg;

use crate::support::{success, veer};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// The demo plant's folder: configuration, recordings, database.
pub struct Plant {
    pub dir: PathBuf,
}

impl Plant {
    /// `--db` of the demo database, with a command in front.
    pub fn db_args<'a>(&'a self, args: &[&'a str]) -> Vec<String> {
        let mut v: Vec<String> = args.iter().map(|s| s.to_string()).collect();
        v.push("--db".into());
        v.push(self.dir.join("veer.db").display().to_string());
        v
    }

    /// `--config` of the demo plant, with a command in front.
    pub fn cfg_args<'a>(&'a self, args: &[&'a str]) -> Vec<String> {
        let mut v: Vec<String> = args.iter().map(|s| s.to_string()).collect();
        v.push("--config".into());
        v.push(self.dir.join("plant.toml").display().to_string());
        v
    }

    /// Runs veer, insists it worked, returns stdout.
    pub fn run(&self, args: &[String]) -> String {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        let o = veer(&a, &self.dir);
        success(&o, &a)
    }

    /// Runs veer with `--json`, parsed.
    pub fn json(&self, args: &[String]) -> Value {
        let out = self.run(args);
        serde_json::from_str(&out).unwrap_or_else(|e| panic!("not JSON ({e}):\n{out}"))
    }

    /// The events of one machine and kind.
    pub fn event_id(&self, machine: &str, kind: &str) -> i64 {
        let doc = self.json(&self.db_args(&["events", "--json", "--machine", machine]));
        doc["events"]
            .as_array()
            .expect("events")
            .iter()
            .find(|e| e["kind"] == kind)
            .and_then(|e| e["id"].as_i64())
            .unwrap_or_else(|| panic!("no {kind} of {machine}: {doc}"))
    }

    /// The machine's recording in the demo folder.
    pub fn recording(&self, machine: &str) -> PathBuf {
        let folder = self.dir.join("incoming").join(machine);
        std::fs::read_dir(&folder)
            .expect("recording folder")
            .filter_map(|e| e.ok().map(|e| e.path()))
            .find(|p| p.extension().is_some_and(|x| x == "wav"))
            .expect("a recording")
    }
}

/// The shared demo plant, simulated once per test run (a fresh folder in cargo's test temp).
pub fn plant() -> &'static Plant {
    static PLANT: OnceLock<Plant> = OnceLock::new();
    PLANT.get_or_init(|| {
        let dir = Path::new(env!("CARGO_TARGET_TMPDIR"))
            .join(format!("review-demo-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let parent = dir.parent().expect("a parent").to_path_buf();
        let d = dir.display().to_string();
        let o = veer(&["demo", "--dir", &d], &parent);
        success(&o, &["demo", "--dir", &d]);
        Plant { dir }
    })
}
