//! Tests of the C interface from the outside: the header against the exports, C programs built
//! with the system's C compiler against the shared library, the same through Python's ctypes, and
//! the results against `veer analyze` on the same recording.

mod c_programs;
mod filter;
mod header;
mod python;
mod support;
