//! Tests that run the `pondus` binary.
