//! Handles: small integers that name open trackers, so that a destroyed or made-up handle is an
//! error code instead of a use of freed memory.
//!
//! Handles are never reused within a process. Each tracker has its own lock, so calls on one
//! handle from several threads are serialised while different handles run in parallel; the table
//! lock is held only to look a handle up.

use crate::status::AbiError;
use crate::tracker::Tracker;
use std::cell::RefCell;
use std::collections::BTreeMap;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, MutexGuard, PoisonError};

static NEXT: AtomicU64 = AtomicU64::new(1);
static TABLE: Mutex<BTreeMap<u64, Arc<Mutex<Tracker>>>> = Mutex::new(BTreeMap::new());

thread_local! {
    static LAST_ERROR: RefCell<String> = const { RefCell::new(String::new()) };
}

fn table() -> MutexGuard<'static, BTreeMap<u64, Arc<Mutex<Tracker>>>> {
    // The table is only inserted into and removed from; a panic cannot leave it half-changed.
    TABLE.lock().unwrap_or_else(PoisonError::into_inner)
}

/// Registers a tracker and returns its handle (never 0).
pub(crate) fn insert(t: Tracker) -> u64 {
    let h = NEXT.fetch_add(1, Ordering::Relaxed);
    table().insert(h, Arc::new(Mutex::new(t)));
    h
}

/// The tracker of an open handle.
pub(crate) fn get(h: u64) -> Result<Arc<Mutex<Tracker>>, AbiError> {
    if h == 0 {
        return Err(AbiError::Handle("the handle is 0 (no tracker)".to_string()));
    }
    table().get(&h).cloned().ok_or_else(|| {
        AbiError::Handle(format!(
            "handle {h} is not open (destroyed, or never created)"
        ))
    })
}

/// Closes a handle; a call in progress on another thread finishes on its own reference.
pub(crate) fn remove(h: u64) -> Result<(), AbiError> {
    get(h)?;
    table().remove(&h);
    Ok(())
}

/// Records the message of a failed call for `veer_last_error(0, ...)` on this thread.
pub(crate) fn set_thread_error(msg: &str) {
    LAST_ERROR.with(|e| {
        let mut e = e.borrow_mut();
        e.clear();
        e.push_str(msg);
    });
}

/// The last failed call's message on this thread.
pub(crate) fn thread_error() -> String {
    LAST_ERROR.with(|e| e.borrow().clone())
}
