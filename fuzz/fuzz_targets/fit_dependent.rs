//! Arbitrary bytes as a CSV file through `fit` with `--cluster`: the two-
//! and three-level models, `--robust` (CR2) and categorical moderators. Any
//! outcome but a panic, a hang or a non-finite reported number is fine.
#![no_main]

use libfuzzer_sys::fuzz_target;

// Each target uses part of the shared module.
#[allow(dead_code)]
#[path = "common.rs"]
mod common;

fuzz_target!(|data: &[u8]| common::fit_dependent(data));
