//! Stage 9 of `fit`: the robustness diagnostics asked for (`--loo`,
//! `--influence`, `--permutations`, `--small-study`, `--cumulative-by`),
//! computed by [`crate::diagnose`]. This is the last stage that reads the
//! design matrix: it takes it and drops it when it ends.

use super::studies::Studies;
use super::{in_file, FitSettings};
use crate::diagnose::{self, ModelData, OrderColumn, Outputs};
use crate::error::Result;
use crate::model::ModelFit;

/// Runs the diagnostics of `settings` on the fitted model (nothing when none
/// is asked for). `x` is the k × p design matrix; `progress` is called with
/// the number of permuted arrangements of each finished block of the
/// permutation test.
///
/// # Errors
/// The errors of [`diagnose::run`], with the file named.
#[allow(clippy::too_many_arguments)]
pub fn run(
    settings: &FitSettings,
    source: &str,
    x: Vec<f64>,
    p: usize,
    terms: &[String],
    fit: &ModelFit,
    studies: &Studies,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Outputs> {
    if !settings.diagnostics.any() {
        return Ok(Outputs::default());
    }
    let data = ModelData {
        y: &studies.y,
        v: &studies.v,
        x: &x,
        p,
        options: settings.options,
    };
    let lines = studies.lines.to_vec();
    let order = studies.order.as_ref().map(|(header, cells)| OrderColumn {
        header: header.clone(),
        cells: cells.clone(),
        lines: lines.clone(),
        places: studies.places.clone(),
    });
    diagnose::run(
        &settings.diagnostics,
        &data,
        fit,
        &studies.labels.to_vec(),
        terms,
        &lines,
        order.as_ref(),
        studies.scale,
        source,
        progress,
    )
    .map_err(|e| in_file(source, e))
}
