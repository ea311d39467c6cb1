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
