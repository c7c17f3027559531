//! Throughput benchmark (written below).
fn main() {}
