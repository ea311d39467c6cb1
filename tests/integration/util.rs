//! Helpers shared by the integration tests.

use pondus::effect::{ColumnMap, Measure};
use pondus::fit::{run, FitSettings};
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::result::FitReport;
use std::path::PathBuf;

/// Path of a file in the repository.
pub fn repo(path: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(path)
}

/// Settings for a plain fit.
pub fn settings(
    measure: Measure,
    moderators: &[&str],
    method: Tau2Method,
    inference: Inference,
) -> FitSettings {
    FitSettings {
        measure,
        columns: ColumnMap::default(),
        label: ("study".into(), false),
        moderators: moderators
            .iter()
            .map(|m| ModeratorSpec {
                name: m.to_string(),
                categorical: false,
                reference: None,
                center: false,
            })
            .collect(),
        interactions: vec![],
        options: FitOptions {
            method,
            inference,
            level: 0.95,
        },
        predictions: vec![],
        interpret: Default::default(),
        diagnostics: Default::default(),
        dependence: Default::default(),
        answers: Default::default(),
    }
}

/// Runs the library on CSV text.
pub fn fit_text(s: &FitSettings, csv: &str) -> FitReport {
    run(s, "test.csv", csv.as_bytes()).unwrap_or_else(|e| panic!("fit failed: {e}"))
}

/// Asserts |a − b| ≤ rel·|b| + abs.
#[track_caller]
pub fn close(what: &str, a: f64, b: f64, rel: f64, abs: f64) {
    assert!(
        (a - b).abs() <= rel * b.abs() + abs,
        "{what}: got {a:.17e}, expected {b:.17e} (diff {:.3e})",
        a - b
    );
}

/// Uniform draws in [0, 1) from a 64-bit linear congruential generator
/// seeded with `seed` (Knuth's MMIX multiplier and increment; the top 53
/// bits of the state): the seeded invented tables of the tests.
pub fn uniform_draws(seed: u64) -> impl FnMut() -> f64 {
    let mut state = seed;
    move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((state >> 11) as f64) / ((1u64 << 53) as f64)
    }
}
