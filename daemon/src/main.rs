//! The `veer` command.

mod decode;

fn main() {}
