//! Arbitrary numeric tables (any f64 bit patterns, printed in full
//! precision) as effect/variance/moderator rows through the model with
//! every estimator: extreme magnitudes, subnormals, huge variance ratios,
//! ties, constant moderators.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "common.rs"]
mod common;

fuzz_target!(|data: &[u8]| {
    let Some((&sel, rest)) = data.split_first() else {
        return;
    };
    let mut csv = String::from("study,effect,variance,m\n");
    for (i, row) in rest.chunks_exact(24).take(200).enumerate() {
        let f = |j: usize| f64::from_le_bytes(row[8 * j..8 * j + 8].try_into().unwrap());
        csv.push_str(&format!("s{i},{:e},{:e},{:e}\n", f(0), f(1), f(2)));
    }
    for moderators in [&[][..], &["m"][..]] {
        let s = common::settings(pondus::effect::Measure::Effect, sel, moderators);
        if let Ok(report) = pondus::analysis::run(&s, "fuzz.csv", csv.as_bytes()) {
            common::assert_finite(&report);
        }
    }
});
