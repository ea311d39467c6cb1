//! From a table and settings to a [`FitReport`]: the `pondus fit` job, as a
//! pipeline of stages, each in its own module with its own inputs and
//! outputs, in the order the work happens:
//!
//! 1. [`columns`]: read the requested columns;
//! 2. [`studies`]: collect the studies (effects, artifact corrections,
//!    moderator types, inclusion); the table ends here;
//! 3. [`design`]: build the design (product terms, scale check);
//! 4. [`estimate`]: fit the working model and the intercept-only model
//!    (a job that builds no per-study record and reads the design matrix
//!    no more hands the matrix to the fit: it ends here, see
//!    [`estimate::Keep`]);
//!    [`spread`]: with `--spread-by`, the location-scale model in its place;
//! 5. [`readout`]: `--at` predictions, subgroups, fitted lines;
//!    [`answers`]: `--beyond` and `--shrink`;
//! 6. [`clusters`]: what `--cluster` adds (variance components, clustering,
//!    robust inference);
//! 7. [`summarise`]: coefficients, moderator test, heterogeneity, average;
//! 8. [`interpret`]: probes, contrasts, regions, artifact record;
//! 9. [`diagnostics`]: robustness diagnostics (the design matrix ends here);
//! 10. [`messages`]: warnings, notes, cautions;
//! 11. [`assemble`]: the report, built once.
//!
//! Every stage may fail with a typed error; the first failing stage decides
//! the message.

pub mod answers;
pub mod assemble;
pub mod clusters;
pub mod columns;
pub mod design;
pub mod diagnostics;
pub mod estimate;
pub mod interpret;
pub mod messages;
pub mod readout;
pub mod route_messages;
pub mod settings;
pub mod spread;
pub mod studies;
pub mod summarise;

pub use messages::STUDIES_PER_TERM;
pub use readout::CURVE_POINTS;
pub use settings::{AnswerSettings, FitSettings, InterpretSettings, ProbeSpec};

use crate::error::{Error, Result};
use crate::result::FitReport;

/// Runs the analysis on CSV bytes from the source named `source`.
///
/// # Errors
/// Any input, usage, model or convergence error, with file, line and column where they apply.
pub fn run(settings: &FitSettings, source: &str, bytes: &[u8]) -> Result<FitReport> {
    run_with_progress(settings, source, bytes, &|_| {})
}

/// How much of the report a caller reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Detail {
    /// The whole report.
    #[default]
    Full,
    /// Everything but the per-study records ([`FitReport::studies`] is
    /// left empty; the excluded rows are kept), for a caller that shows
    /// nothing per study: the command line when it writes no output at
    /// all (`--quiet` without output files). Every check still runs; with
    /// shrunken estimates the records are built anyway (their numbers are
    /// checked).
    Summary,
}

/// [`run`], calling `progress` with the number of permuted arrangements of
/// each finished block of the permutation test (for a progress bar).
///
/// # Errors
/// As [`run`].
pub fn run_with_progress(
    settings: &FitSettings,
    source: &str,
    bytes: &[u8],
    progress: &(dyn Fn(u64) + Sync),
) -> Result<FitReport> {
    run_with_detail(settings, source, bytes, progress, Detail::Full)
}

/// [`run_with_progress`], building the report to `detail`.
///
/// # Errors
/// As [`run`].
pub fn run_with_detail(
    settings: &FitSettings,
    source: &str,
    bytes: &[u8],
    progress: &(dyn Fn(u64) + Sync),
    detail: Detail,
) -> Result<FitReport> {
    spread::check(settings)?;
    let (columns, sha256) = read_and_hash(settings, source, bytes);
    stages(settings, source, columns?, progress, sha256, detail)
}

/// [`run_with_detail`] on the CSV file, spreadsheet or Parquet file at
/// `path` (named `source` in messages): a CSV file is never held whole in
/// memory (one without quotes is read in pieces on all of rayon's threads,
/// any other as a stream, see [`crate::input::parse_table_file`]); its
/// SHA-256 is computed on a thread of its own, which reads the file again
/// while the table is read.
///
/// # Errors
/// As [`run`]; [`Error::Io`] when the file cannot be read.
pub fn run_file(
    settings: &FitSettings,
    source: &str,
    path: &std::path::Path,
    progress: &(dyn Fn(u64) + Sync),
    detail: Detail,
) -> Result<FitReport> {
    spread::check(settings)?;
    let (columns, sha256) = std::thread::scope(|scope| {
        let hash = scope.spawn(|| crate::support::hash::sha256_file(path));
        let columns = columns::read(settings, source, crate::input::TableBytes::File(path));
        let sha256 = hash
            .join()
            .unwrap_or_else(|_| crate::support::hash::sha256_file(path));
        (columns, sha256)
    });
    let columns = columns?;
    stages(settings, source, columns, progress, sha256?, detail)
}

/// [`run_with_detail`] on bytes it owns: they are freed as soon as the
/// table is read and hashed, so a large file is not held in memory while
/// the studies are collected and the model is fitted.
///
/// # Errors
/// As [`run`].
pub fn run_owned(
    settings: &FitSettings,
    source: &str,
    bytes: Vec<u8>,
    progress: &(dyn Fn(u64) + Sync),
    detail: Detail,
) -> Result<FitReport> {
    spread::check(settings)?;
    let (columns, sha256) = read_and_hash(settings, source, &bytes);
    drop(bytes);
    stages(settings, source, columns?, progress, sha256, detail)
}

/// Stage 1 with the input's SHA-256 (for the report's reproducibility
/// record) computed on a thread of its own while the table is read.
fn read_and_hash(
    settings: &FitSettings,
    source: &str,
    bytes: &[u8],
) -> (Result<columns::Columns>, String) {
    use crate::support::hash::sha256_hex;
    std::thread::scope(|scope| {
        let hash = scope.spawn(|| sha256_hex(bytes));
        let columns = columns::read(settings, source, crate::input::TableBytes::Memory(bytes));
        let sha256 = hash.join().unwrap_or_else(|_| sha256_hex(bytes));
        (columns, sha256)
    })
}

/// The stages of [`run_with_detail`] after the table is read; `sha256` is
/// the input's hash.
fn stages(
    settings: &FitSettings,
    source: &str,
    columns: columns::Columns,
    progress: &(dyn Fn(u64) + Sync),
    sha256: String,
    detail: Detail,
) -> Result<FitReport> {
    let mut studies = studies::collect(settings, source, columns)?;
    let mut design = design::build(settings, source, &studies)?;
    if detail == Detail::Summary && !settings.answers.shrink {
        // No per-study record will be built: the design now holds all
        // that later stages read of the numeric moderators.
        studies.release_numeric_moderators();
    }
    let keep = estimate::Keep::for_job(settings, detail);
    let (mut model, null_fit) = estimate::estimate(settings, source, &studies, &mut design, keep)?;
    let spread = spread::fit(settings, source, &studies, &design, &mut model)?;
    let readout = readout::read_out(settings, &design, &model, &studies)?;
    let answers = answers::answer(
        &settings.answers,
        settings.options.level,
        &design,
        &model,
        null_fit.as_ref(),
        &studies,
        &readout,
    )?;
    let clusters = clusters::additions(&settings.dependence, source, &design, &model, &studies)?;
    let robust = clusters.as_ref().and_then(|c| c.robust.as_ref());
    let summary = summarise::summarise(
        &design,
        &model.fit,
        null_fit,
        (robust, settings.options.level),
        studies.scale,
    );
    let interpretation = interpret::interpret(
        &design,
        &model.fit,
        &settings.interpret,
        studies.scale,
        &summary,
    )?;
    let artifacts = interpret::artifact_report(&settings.interpret.artifacts, &studies);
    let term_names: Vec<String> = design.terms.iter().map(|t| t.name.clone()).collect();
    let diagnostics = diagnostics::run(
        settings,
        source,
        design.x,
        design.p,
        &term_names,
        &model.fit,
        &studies,
        progress,
    )?;
    let messages = messages::collect(&messages::Inputs {
        settings,
        studies: &studies,
        model: &model,
        terms: &design.terms,
        readout: &readout,
        diagnostics: &diagnostics,
        artifacts: artifacts.is_some(),
        interpretation: &interpretation,
        clusters: clusters.as_ref(),
        moderator_test: summary.moderator_test.as_ref(),
        average: &summary.average,
        floored: summary.floored.as_ref(),
    });
    assemble::assemble(assemble::Parts {
        settings,
        source,
        sha256,
        detail,
        studies,
        terms: design.terms,
        moderators: design.moderators,
        interactions: design.interactions,
        model,
        summary,
        readout,
        interpretation,
        artifacts,
        diagnostics,
        messages,
        clusters,
        answers,
        spread,
    })
}

/// Prefixes a model error with the file it concerns.
fn in_file(source: &str, e: Error) -> Error {
    match e {
        Error::Model(m) => Error::Model(format!("{source}: {m}")),
        other => other,
    }
}
