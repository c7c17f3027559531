//! Reading the daemon's database from outside, read-only, while it runs or after it stopped.

use std::collections::HashMap;
use std::path::Path;
use veer_storage::{IngestRow, IngestStatus, Store, Stored};

/// A read-only connection, or `None` while the daemon has not created (and migrated) the file.
pub fn open(db: &Path) -> Option<Store> {
    if !db.exists() {
        return None;
    }
    Store::open_read_only(db).ok()
}

/// Every ingest record, by id. The store reads them one id at a time; ids are SQLite rowids,
/// handed out in order and never reused here, so the scan stops after a run of missing ids.
pub fn ingests(store: &Store) -> Vec<Stored<IngestRow>> {
    let mut out = Vec::new();
    let mut misses = 0;
    let mut id = 1;
    while misses < 20 {
        match store.ingest(id).expect("read an ingest record") {
            Some(r) => {
                out.push(r);
                misses = 0;
            }
            None => misses += 1,
        }
        id += 1;
    }
    out
}

/// The file name of an ingest's source.
pub fn file_name(r: &IngestRow) -> String {
    Path::new(&r.source)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// The ingest records of the file named `name`.
pub fn of_file<'a>(all: &'a [Stored<IngestRow>], name: &str) -> Vec<&'a Stored<IngestRow>> {
    all.iter().filter(|r| file_name(r) == name).collect()
}

/// The one finished (done or failed) record of file `name`, once there is one.
pub fn finished(db: &Path, name: &str) -> Option<Stored<IngestRow>> {
    let store = open(db)?;
    ingests(&store)
        .into_iter()
        .find(|r| file_name(r) == name && r.status != IngestStatus::Pending)
}

/// Fails unless no content hash has more than one `done` record: the same data stored twice.
pub fn assert_each_hash_done_once(all: &[Stored<IngestRow>]) {
    let mut done: HashMap<&str, Vec<i64>> = HashMap::new();
    for r in all.iter().filter(|r| r.status == IngestStatus::Done) {
        done.entry(r.content_hash.as_str()).or_default().push(r.id);
    }
    for (hash, ids) in &done {
        assert_eq!(
            ids.len(),
            1,
            "content {hash} was ingested {} times (ingest ids {ids:?}): {all:#?}",
            ids.len()
        );
    }
}
