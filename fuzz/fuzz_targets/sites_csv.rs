//! Arbitrary bytes as participant rows through the streaming per-site
//! stage of `pondus sites` (reader, line counting, moments, per-site OLS):
//! any outcome but a panic, a hang or a non-finite reported number is fine.
#![no_main]

use libfuzzer_sys::fuzz_target;

// Each target uses part of the shared module.
#[allow(dead_code)]
#[path = "common.rs"]
mod common;

fuzz_target!(|data: &[u8]| common::sites_csv(data));
