//! Integration tests of veer-storage on real SQLite files in temporary folders.

mod store;
