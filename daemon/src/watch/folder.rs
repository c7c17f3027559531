//! The folder source: capture files dropped into a watched folder.
//!
//! A file is taken once it is complete. veer relies on either of two signs, whichever comes first:
//! the writer closing the file after writing (inotify's close-after-write), or the file being
//! renamed into the folder (the safe way for a logger to publish a file). As a fallback for writers
//! that do neither visibly (network shares), a file whose size and modification time have not
//! changed for `settle_s` seconds is taken too. Hidden names (`.name`) and temporary ones
//! (`*.tmp`, `*.part`, `*.partial`, `*~`) are ignored until renamed. Files already in the folder
//! when the daemon starts are taken as well; the content hash in the database makes sure each is
//! processed once, across restarts.

use notify::event::{AccessKind, AccessMode, ModifyKind, RenameMode};
use notify::{EventKind, RecursiveMode, Watcher};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime};
use tokio::sync::mpsc;
use tokio_util::sync::CancellationToken;

use crate::config::model::FolderSource;

/// Whether a file name is one veer should read: not hidden or temporary, and matching a pattern.
pub(crate) fn wanted(path: &Path, patterns: &[String]) -> bool {
    let Some(name) = path.file_name().and_then(|n| n.to_str()) else {
        return false;
    };
    if name.starts_with('.')
        || name.ends_with(".tmp")
        || name.ends_with(".part")
        || name.ends_with(".partial")
        || name.ends_with('~')
    {
        return false;
    }
    patterns.is_empty() || patterns.iter().any(|p| glob_match(p, name))
}

/// `*` and `?` wildcards, case-insensitive (file systems of loggers often are).
fn glob_match(pattern: &str, name: &str) -> bool {
    fn go(p: &[char], n: &[char]) -> bool {
        match (p.first(), n.first()) {
            (None, None) => true,
            (Some('*'), _) => go(&p[1..], n) || (!n.is_empty() && go(p, &n[1..])),
            (Some('?'), Some(_)) => go(&p[1..], &n[1..]),
            (Some(a), Some(b)) => a.eq_ignore_ascii_case(b) && go(&p[1..], &n[1..]),
            _ => false,
        }
    }
    let p: Vec<char> = pattern.chars().collect();
    let n: Vec<char> = name.chars().collect();
    go(&p, &n)
}

/// Size and modification time, to tell when a file stops changing.
fn stamp(path: &Path) -> Option<(u64, SystemTime)> {
    let m = std::fs::metadata(path).ok()?;
    if !m.is_file() {
        return None;
    }
    Some((m.len(), m.modified().ok()?))
}

/// Watches the folder and sends each complete file's path once per appearance. Returns when
/// cancelled. Problems (the folder cannot be watched) are logged and retried.
pub(crate) async fn run(
    machine: String,
    cfg: FolderSource,
    tx: mpsc::Sender<PathBuf>,
    cancel: CancellationToken,
) {
    if let Err(e) = std::fs::create_dir_all(&cfg.path) {
        tracing::error!(machine, folder = %cfg.path.display(), error = %e, "cannot create the watched folder");
    }
    let (ev_tx, mut ev_rx) = mpsc::channel::<notify::Result<notify::Event>>(1024);
    let mut watcher = match notify::recommended_watcher(move |res| {
        // The callback runs on notify's own thread; a full queue drops nothing because the
        // settle scan below finds any file whose event was lost.
        let _ = ev_tx.try_send(res);
    }) {
        Ok(w) => Some(w),
        Err(e) => {
            tracing::error!(machine, error = %e, "cannot start watching; falling back to scanning");
            None
        }
    };
    if let Some(w) = watcher.as_mut() {
        if let Err(e) = w.watch(&cfg.path, RecursiveMode::NonRecursive) {
            tracing::error!(machine, folder = %cfg.path.display(), error = %e, "cannot watch the folder; scanning instead");
        }
    }
    // Files seen but not yet known complete: path -> (last stamp, since when unchanged).
    let mut pending: HashMap<PathBuf, ((u64, SystemTime), Instant)> = HashMap::new();
    // Files already sent, with the stamp they had: sent again only if they change.
    let mut sent: HashMap<PathBuf, (u64, SystemTime)> = HashMap::new();
    let settle = Duration::from_secs_f64(cfg.settle_s.max(0.0));
    let mut scan = tokio::time::interval(Duration::from_secs(1));
    scan.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let mut first = true;
    loop {
        tokio::select! {
            _ = cancel.cancelled() => break,
            ev = ev_rx.recv() => {
                let Some(ev) = ev else { break };
                let Ok(ev) = ev else { continue };
                let complete = matches!(
                    ev.kind,
                    EventKind::Access(AccessKind::Close(AccessMode::Write))
                        | EventKind::Modify(ModifyKind::Name(RenameMode::To))
                        | EventKind::Modify(ModifyKind::Name(RenameMode::Both))
                );
                for path in ev.paths {
                    if !wanted(&path, &cfg.patterns) {
                        continue;
                    }
                    let Some(st) = stamp(&path) else { continue };
                    if complete {
                        pending.remove(&path);
                        if sent.get(&path) != Some(&st) {
                            sent.insert(path.clone(), st);
                            if tx.send(path).await.is_err() {
                                return;
                            }
                        }
                    } else {
                        pending.entry(path).or_insert((st, Instant::now()));
                    }
                }
            }
            _ = scan.tick() => {
                // Start-up listing, then a slow scan that catches writers whose events we missed.
                if let Ok(rd) = std::fs::read_dir(&cfg.path) {
                    let mut paths: Vec<PathBuf> = rd.filter_map(|e| e.ok().map(|e| e.path())).collect();
                    paths.sort();
                    for path in paths {
                        if !wanted(&path, &cfg.patterns) || sent.contains_key(&path) {
                            continue;
                        }
                        if let Some(st) = stamp(&path) {
                            if first {
                                // Present at start-up: complete unless it is still changing.
                                pending.insert(path, (st, Instant::now() - settle));
                            } else {
                                pending.entry(path).or_insert((st, Instant::now()));
                            }
                        }
                    }
                }
                first = false;
                let mut ready = Vec::new();
                pending.retain(|path, (st, since)| {
                    match stamp(path) {
                        None => false,
                        Some(now) if now != *st => {
                            *st = now;
                            *since = Instant::now();
                            true
                        }
                        Some(_) if since.elapsed() >= settle => {
                            ready.push((path.clone(), *st));
                            false
                        }
                        Some(_) => true,
                    }
                });
                for (path, st) in ready {
                    if sent.get(&path) != Some(&st) {
                        sent.insert(path.clone(), st);
                        if tx.send(path).await.is_err() {
                            return;
                        }
                    }
                }
                // Forget files that were moved away (done, or set aside as failed).
                sent.retain(|p, _| p.exists());
            }
        }
    }
    drop(watcher);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_and_patterns() {
        let pats = vec!["*.csv".to_string(), "*.WAV".to_string()];
        assert!(wanted(Path::new("/x/run_01.csv"), &pats));
        assert!(wanted(Path::new("/x/run_01.wav"), &pats));
        assert!(!wanted(Path::new("/x/.run_01.csv"), &pats));
        assert!(!wanted(Path::new("/x/run_01.csv.part"), &pats));
        assert!(!wanted(Path::new("/x/run_01.txt"), &pats));
        assert!(glob_match("tg-1_??.csv", "tg-1_07.csv"));
        assert!(!glob_match("tg-1_??.csv", "tg-1_7.csv"));
    }
}
