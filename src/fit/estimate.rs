//! Stage 4 of `fit`: estimate. The working model (the usual two-level
//! random-effects model, or the three-level model of effects nested in
//! clusters, see [`crate::model::multilevel`]) is fitted to the design, and
//! the intercept-only (null) model under the same working model, which gives
//! the average effect and the τ² without moderators.

use super::studies::Studies;
use super::{in_file, Detail, FitSettings};
use crate::error::{Error, Result};
use crate::model::design::Design;
use crate::model::multilevel::{self, Clusters, Levels, ThreeLevel};
use crate::model::{self, FitOptions, ModelFit};
use crate::support::flag::Flag;
use std::borrow::Cow;

/// The working model: how the effects are assumed to depend on each other.
#[derive(Debug, Clone)]
pub enum WorkingModel {
    /// Independent effects: the usual random-effects model (no `--cluster`).
    Independent,
    /// `--cluster` with `--levels 2`: the usual model; the clusters serve
    /// the cluster-robust inference only.
    TwoLevel(Clusters),
    /// `--cluster`: effects nested in clusters, with between- and
    /// within-cluster variance components.
    ThreeLevel(Box<ThreeLevel>),
}

impl WorkingModel {
    /// The clusters, when the effects are clustered.
    pub fn clusters(&self) -> Option<&Clusters> {
        match self {
            WorkingModel::Independent => None,
            WorkingModel::TwoLevel(cl) => Some(cl),
            WorkingModel::ThreeLevel(t) => Some(&t.clusters),
        }
    }
}

/// The fitted model and its working model.
#[derive(Debug, Clone)]
pub struct Fitted {
    /// Coefficients, covariance, τ² (the sum of both components under the
    /// three-level model), weights and residuals.
    pub fit: ModelFit,
    /// The working model, with what it adds to the fit.
    pub working: WorkingModel,
    /// The raw Knapp–Hartung factor s² of the intercept-only model behind
    /// the average (the model's own without moderators).
    pub null_scale_factor: f64,
    /// Each study's τ̂_i² under the location-scale model (`--spread-by`,
    /// set by [`super::spread::fit`]); None: one τ² for all.
    pub tau2_each: Option<Vec<f64>>,
}

/// What the stages after the estimate read of the working fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Keep {
    /// The design matrix and the fit's per-study arrays (weights, fitted
    /// values, standardised residuals): the per-study records, the
    /// diagnostics, `--cluster`, `--spread-by`, `--shrink` and
    /// `--all-subsets` read them.
    Everything,
    /// Only the fit's summary numbers: the design matrix is handed to the
    /// fit, standardised in place there and freed (`design.x` is left
    /// empty), and no per-study array is computed.
    Summary,
}

impl Keep {
    /// What a job reads after the estimate: [`Keep::Summary`] when it builds
    /// no per-study record ([`Detail::Summary`]) and asks for nothing that
    /// reads the design matrix again (the readers are listed at
    /// [`Keep::Everything`]); the predictions, subgroups, fitted lines and
    /// probes read the design's terms and moderators only.
    pub fn for_job(settings: &FitSettings, detail: Detail) -> Keep {
        let answers = &settings.answers;
        let summary_only = detail == Detail::Summary
            && !answers.shrink
            && !answers.all_subsets
            && answers.spread_by.is_empty()
            && settings.dependence.cluster.is_none()
            && !settings.diagnostics.any();
        if summary_only {
            Keep::Summary
        } else {
            Keep::Everything
        }
    }
}

/// Fits the model, and the intercept-only model when there are moderators
/// (None without: the model is then its own null model). Under
/// [`Keep::Summary`] the design matrix is moved into the fit and
/// `design.x` is left empty. The intercept-only model keeps only its
/// summary numbers (its per-study arrays are empty: nothing reads them).
///
/// # Errors
/// [`Error::Model`] for a missing cluster id or a fit whose Knapp–Hartung
/// standard errors would be 0; the errors of [`model::fit_parts`] and
/// [`multilevel::fit`].
pub fn estimate(
    settings: &FitSettings,
    source: &str,
    studies: &Studies,
    design: &mut Design,
    keep: Keep,
) -> Result<(Fitted, Option<ModelFit>)> {
    let clusters = match &studies.cluster_ids {
        Some(ids) => Some(clusters(ids, (&studies.lines, &studies.places), source)?),
        None => None,
    };
    let levels = settings.dependence.levels;
    let options = settings.options;
    let (y, v) = (&studies.y, &studies.v);
    let p = design.p;
    let mut working_fit = || match (keep, &clusters) {
        (Keep::Summary, None) => {
            let x = Cow::Owned(std::mem::take(&mut design.x));
            // What the standardisation reads of these rows, made beside
            // the rank check: the rows are not read again.
            let swept = design.swept.take();
            model::fit_summary_swept(y, v, x, p, options, true, swept).map(|f| (f, None))
        }
        _ => fit_working(y, v, &design.x, p, clusters.as_ref(), levels, options),
    };
    // Without clusters the intercept-only model needs nothing from the
    // working one, so the two are fitted side by side (each pass of each
    // is shared among the threads too; the numbers are the same).
    let (working_fit, early_null) = if p > 1 && clusters.is_none() {
        let (w, n) = rayon::join(working_fit, || null_fit(y, v, None, levels, options));
        (w, Some(n))
    } else {
        (working_fit(), None)
    };
    let (fit, three) = working_fit.map_err(|e| in_file(source, e))?;
    if fit.kh_scale == Some(0.0) {
        return Err(Error::Model(format!(
            "{source}: the model fits every effect exactly (residual Q = 0 up to rounding, for \
             example because all effects are identical or lie exactly on the moderators' line), so the Knapp–Hartung standard errors would be 0. Use \
             {} z, which does not scale by the residual variation",
            Flag::Inference
        )));
    }
    let working = match (three, clusters) {
        (Some(t), _) => WorkingModel::ThreeLevel(Box::new(t)),
        (None, Some(cl)) => WorkingModel::TwoLevel(cl),
        (None, None) => WorkingModel::Independent,
    };
    let null = match early_null {
        Some(n) => Some(n.map_err(|e| in_file(source, e))?),
        None if p == 1 => None,
        None => Some(
            null_fit(y, v, working.clusters(), levels, options).map_err(|e| in_file(source, e))?,
        ),
    };
    let null_scale_factor = null.as_ref().unwrap_or(&fit).scale_factor;
    Ok((
        Fitted {
            fit,
            working,
            null_scale_factor,
            tau2_each: None,
        },
        null,
    ))
}

/// Clusters of the studies, from their ids.
///
/// # Errors
/// [`Error::Model`] naming the file, line and column of the first study
/// with a missing id (empty or a missing-value mark).
fn clusters(
    ids: &(String, Vec<String>),
    (lines, places): (&crate::input::Lines, &crate::input::Places),
    source: &str,
) -> Result<Clusters> {
    let (header, ids) = ids;
    let missing: Vec<usize> = (0..ids.len())
        .filter(|&i| crate::input::number::is_missing(&ids[i]))
        .collect();
    if let Some(&first) = missing.first() {
        return Err(Error::Model(format!(
            "{source}: {}: the cluster id is missing ({} effect{} without \
             one). Every effect in the model needs the id of its study, lab or site; fill it in \
             (an effect that is alone in its cluster gets an id of its own) and run again",
            places.cell(lines.get(first), header),
            missing.len(),
            if missing.len() == 1 { "" } else { "s" }
        )));
    }
    let clusters = Clusters::from_ids(ids);
    if clusters.m() < 2 {
        return Err(Error::Model(format!(
            "{source}: all {} effects carry the same id ('{}') in column '{header}', so they form \
             one cluster: no variance between clusters can be estimated and no cluster-robust \
             standard error computed from one cluster. Check the column given to {}, or leave it \
             out to treat the effects as independent",
            ids.len(),
            ids.first().map(String::as_str).unwrap_or_default(),
            crate::support::flag::Flag::Cluster
        )));
    }
    Ok(clusters)
}

/// The intercept-only model under the same working model, its summary
/// numbers only: the usual fit needs no per-study array and no copy of its
/// column of ones; the three-level fit's per-study arrays are dropped.
///
/// # Errors
/// As [`model::fit_summary`] and [`multilevel::fit`].
fn null_fit(
    y: &[f64],
    v: &[f64],
    clusters: Option<&Clusters>,
    levels: Levels,
    options: FitOptions,
) -> Result<ModelFit> {
    let ones = vec![1.0; y.len()];
    match clusters {
        Some(cl) if levels == Levels::Three => {
            let (mut f, _) = multilevel::fit(y, v, &ones, 1, cl, options, false)?;
            f.weights = Vec::new();
            f.fitted = Vec::new();
            f.std_resid = Vec::new();
            Ok(f)
        }
        _ => model::fit_summary(y, v, Cow::Borrowed(&ones), 1, options, false),
    }
}

/// The model under the dependence settings, with the τ² interval and the
/// per-study arrays: the usual fit without clusters or with `--levels 2`,
/// the three-level fit otherwise.
///
/// # Errors
/// As [`model::fit_parts`] and [`multilevel::fit`].
fn fit_working(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    clusters: Option<&Clusters>,
    levels: Levels,
    options: FitOptions,
) -> Result<(ModelFit, Option<ThreeLevel>)> {
    match clusters {
        Some(cl) if levels == Levels::Three => {
            let (f, t) = multilevel::fit(y, v, x, p, cl, options, true)?;
            Ok((f, Some(t)))
        }
        _ => Ok((model::fit_parts(y, v, x, p, options, true)?, None)),
    }
}
