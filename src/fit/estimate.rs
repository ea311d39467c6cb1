//! Stage 4 of `fit`: estimate. The working model (the usual two-level
//! random-effects model, or the three-level model of effects nested in
//! clusters, see [`crate::model::multilevel`]) is fitted to the design, and
//! the intercept-only (null) model under the same working model, which gives
//! the average effect and the τ² without moderators.

use super::studies::Studies;
use super::{in_file, FitSettings};
use crate::error::{Error, Result};
use crate::model::design::Design;
use crate::model::multilevel::{self, Clusters, Levels, ThreeLevel};
use crate::model::{self, FitOptions, ModelFit};
use crate::support::flag::Flag;

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

/// Fits the model, and the intercept-only model when there are moderators
/// (None without: the model is then its own null model).
///
/// # Errors
/// [`Error::Model`] for a missing cluster id or a fit whose Knapp–Hartung
/// standard errors would be 0; the errors of [`model::fit_parts`] and
/// [`multilevel::fit`].
pub fn estimate(
    settings: &FitSettings,
    source: &str,
    studies: &Studies,
    design: &Design,
) -> Result<(Fitted, Option<ModelFit>)> {
    let clusters = match &studies.cluster_ids {
        Some(ids) => Some(clusters(ids, (&studies.lines, &studies.places), source)?),
        None => None,
    };
    let levels = settings.dependence.levels;
    let options = settings.options;
    let (y, v) = (&studies.y, &studies.v);
    let (fit, three) = fit_working(
        y,
        v,
        &design.x,
        design.p,
        clusters.as_ref(),
        levels,
        options,
        true,
    )
    .map_err(|e| in_file(source, e))?;
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
    let null = if design.p == 1 {
        None
    } else {
        let ones = vec![1.0; y.len()];
        let cl = working.clusters();
        let (null, _) = fit_working(y, v, &ones, 1, cl, levels, options, false)
            .map_err(|e| in_file(source, e))?;
        Some(null)
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
    (lines, places): (&[u64], &crate::input::Places),
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
            places.cell(lines[first], header),
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

/// The model under the dependence settings: the usual fit without clusters
/// or with `--levels 2`, the three-level fit otherwise.
///
/// # Errors
/// As [`model::fit_parts`] and [`multilevel::fit`].
#[allow(clippy::too_many_arguments)]
fn fit_working(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    clusters: Option<&Clusters>,
    levels: Levels,
    options: FitOptions,
    with_ci: bool,
) -> Result<(ModelFit, Option<ThreeLevel>)> {
    match clusters {
        Some(cl) if levels == Levels::Three => {
            let (f, t) = multilevel::fit(y, v, x, p, cl, options, with_ci)?;
            Ok((f, Some(t)))
        }
        _ => Ok((model::fit_parts(y, v, x, p, options, with_ci)?, None)),
    }
}
