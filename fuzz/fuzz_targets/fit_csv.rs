//! Arbitrary bytes as a CSV file through the whole `fit` job: reading,
//! every measure's effect computation, design coding and the model. Any
//! outcome but a panic, a hang or a non-finite reported number is fine.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "common.rs"]
mod common;

fuzz_target!(|data: &[u8]| {
    let Some((&sel, csv)) = data.split_first() else {
        return;
    };
    let measure = common::MEASURES[(sel as usize >> 3) % common::MEASURES.len()];
    for moderators in [&[][..], &["m"][..], &["m", "g"][..]] {
        let s = common::settings(measure, sel, moderators);
        if let Ok(report) = pondus::analysis::run(&s, "fuzz.csv", csv) {
            common::assert_finite(&report);
        }
    }
});
