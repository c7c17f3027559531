//! veer's order-tracking engine behind a small, versioned C interface, so that a data logger's
//! host program (C, C++, Python through ctypes, or any environment with a C call interface) can
//! run it on the samples it already acquires.
//!
//! The design, from the outside in:
//!
//! - [`exports`]: the `extern "C"` functions of `include/veer.h`. Every body runs inside
//!   `catch_unwind`; errors are negative status codes ([`status`]) plus a message kept per handle
//!   and per thread.
//! - `registry`: handles are integers looked up in a table, never pointers, so a destroyed or
//!   made-up handle is an error code rather than a use of freed memory; each tracker has its own
//!   lock.
//! - `raw`: the only module with `unsafe` blocks, turning the caller's pointers into slices,
//!   strings and output places after checking null, alignment and size.
//! - [`tracker`]: safe Rust: the engine started at the first block, breaks in the timestamps, the
//!   queue of results. [`config`] reads the configuration string (a machine's section of the
//!   daemon's TOML file); [`structs`] and [`json`] give the results their two shapes.
//!
//! The library keeps no pointer passed to it after a call returns and never calls back.

pub mod config;
pub mod exports;
pub mod json;
mod raw;
mod registry;
pub mod status;
pub mod structs;
pub mod tracker;

pub use exports::{VeerHandle, VEER_ABI_VERSION_MAJOR, VEER_ABI_VERSION_MINOR};
pub use tracker::Tracker;
