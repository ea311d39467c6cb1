//! Arbitrary numeric tables (any f64 bit patterns, printed in full
//! precision) as effect/variance/moderator rows through the model with
//! every estimator: extreme magnitudes, subnormals, huge variance ratios,
//! ties, constant moderators.
#![no_main]

use libfuzzer_sys::fuzz_target;

// Each target uses part of the shared module.
#[allow(dead_code)]
#[path = "common.rs"]
mod common;

fuzz_target!(|data: &[u8]| common::fit_numbers(data));
