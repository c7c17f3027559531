//! Ingest: from sources (files, streams) through a machine's engine to rows and observations.

pub(crate) mod convert;
pub(crate) mod health;
pub(crate) mod models;
pub(crate) mod runner;
pub(crate) mod targets;
pub(crate) mod types;
