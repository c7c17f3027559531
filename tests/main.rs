//! End-to-end tests of the veer binary: each runs the real `veer` command in a temporary folder
//! against real files and checks what it prints, the way a user or an outside script sees it.

mod analyze;
mod bad_input;
mod demo;
mod review;
mod simulate;
mod support;
mod watch;
