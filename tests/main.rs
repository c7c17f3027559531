//! End-to-end tests of the veer binary.
