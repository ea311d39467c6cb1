//! Stage 5b of `fit`: the answers about single studies and new ones.
//! `--beyond`: the probability that a new study's true effect exceeds a
//! value, from the predictive distribution behind the prediction interval
//! (so the two always agree); `--shrink`: each study's empirical-Bayes
//! estimate of its own true effect; `--all-subsets`: every subset of the
//! moderators ranked by AICc.

use super::estimate::{Fitted, WorkingModel};
use super::readout::ReadOut;
use super::studies::Studies;
use super::AnswerSettings;
use crate::dist;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::model::design::Design;
use crate::model::{inference, shrink, subsets, ModelFit};
use crate::result::{
    AveragedCoefficient, Beyond, BeyondAt, Importance, Interval, ModelSet, RankedModel, Shrunken,
    ShrunkenReading,
};
use crate::support::flag::Flag;

/// What the answers add to the report.
#[derive(Debug, Clone, Default)]
pub struct Answers {
    /// `--beyond`.
    pub beyond: Option<Beyond>,
    /// `--shrink`: one per included study, in input order.
    pub shrunken: Option<Vec<Shrunken>>,
    /// `--all-subsets`.
    pub model_set: Option<ModelSet>,
}

/// The requested answers.
///
/// # Errors
/// [`Error::Usage`] for a `--beyond` value outside the reading scale's range
/// or `--shrink` under the three-level model.
pub fn answer(
    settings: &AnswerSettings,
    level: f64,
    design: &Design,
    model: &Fitted,
    null: Option<&ModelFit>,
    studies: &Studies,
    readout: &ReadOut,
) -> Result<Answers> {
    let scale = studies.scale;
    let beyond = match settings.beyond {
        Some(value) => Some(beyond(value, scale, &model.fit, null, readout)?),
        None => None,
    };
    let shrunken = if settings.shrink {
        Some(shrunken(level, design, model, studies)?)
    } else {
        None
    };
    let model_set = if settings.all_subsets {
        Some(model_set(level, design, model, studies)?)
    } else {
        None
    };
    Ok(Answers {
        beyond,
        shrunken,
        model_set,
    })
}

/// The value on the analysis scale: atanh of a correlation, ln of a ratio.
///
/// # Errors
/// [`Error::Usage`] for a correlation outside (−1, 1) or a ratio ≤ 0.
fn to_analysis(value: f64, scale: ReadingScale) -> Result<f64> {
    match scale {
        ReadingScale::Same => Ok(value),
        ReadingScale::Correlation if value.abs() < 1.0 => Ok(value.atanh()),
        ReadingScale::Correlation => Err(Error::usage(
            Flag::Beyond,
            format!(
                "{value} is not a correlation; results of this measure are read as correlations, \
                 so give a value between -1 and 1 (exclusive)"
            ),
        )),
        ReadingScale::Ratio if value > 0.0 => Ok(value.ln()),
        ReadingScale::Ratio => Err(Error::usage(
            Flag::Beyond,
            format!(
                "{value} is not a ratio; results of this measure are read as ratios, so give a \
                 value above 0 (1 means no effect)"
            ),
        )),
    }
}

/// P(new study's true effect > value) at the average and at each `--at` point.
///
/// # Formula
/// [`inference::PredictiveT::exceeds`] of the predictive distribution
/// [`inference::predictive`] (the one the prediction interval uses) at
/// the average effect (the intercept-only fit) and at each prediction point.
/// Where that distribution has fewer than 1 df (no prediction interval),
/// the probability is not given (NaN, shown as none).
fn beyond(
    value: f64,
    scale: ReadingScale,
    fit: &ModelFit,
    null: Option<&ModelFit>,
    readout: &ReadOut,
) -> Result<Beyond> {
    let c = to_analysis(value, scale)?;
    let base = null.unwrap_or(fit);
    let average = inference::predictive(base, &[1.0]);
    let at = readout
        .predictions
        .iter()
        .zip(&readout.prediction_rows)
        .map(|(p, x0)| BeyondAt {
            at: p.at.clone(),
            probability: inference::predictive(fit, x0).map_or(f64::NAN, |d| d.exceeds(c)),
        })
        .collect();
    Ok(Beyond {
        value,
        value_analysis: c,
        df: average.map(|d| d.df),
        average: average.map_or(f64::NAN, |d| d.exceeds(c)),
        at,
    })
}

/// The shrunken estimate of every included study.
///
/// # Errors
/// [`Error::Usage`] under the three-level model, whose study-level
/// estimates would need the cluster-level ones too.
fn shrunken(
    level: f64,
    design: &Design,
    model: &Fitted,
    studies: &Studies,
) -> Result<Vec<Shrunken>> {
    if let WorkingModel::ThreeLevel(_) = model.working {
        return Err(Error::usage(
            Flag::Shrink,
            format!(
                "shrunken estimates are not available for effects nested in clusters (the \
                 three-level model of {}); run without {} (or with {} 2) for shrunken estimates \
                 of independent effects",
                Flag::Cluster,
                Flag::Cluster,
                Flag::Levels
            ),
        ));
    }
    let fit = &model.fit;
    // The model-based (X'WX)⁻¹: the Knapp–Hartung scale is undone.
    let cov = match fit.kh_scale {
        Some(s2) if s2 > 0.0 => &fit.cov / s2,
        _ => fit.cov.clone(),
    };
    let tau2 = model
        .tau2_each
        .clone()
        .unwrap_or_else(|| vec![fit.tau2.estimate; studies.y.len()]);
    let values = shrink::shrink(
        &studies.y, &studies.v, &design.x, design.p, &fit.beta, &cov, &tau2,
    );
    let z = dist::normal_quantile(1.0 - (1.0 - level) / 2.0);
    let scale = studies.scale;
    Ok(values
        .into_iter()
        .map(|s| {
            let ci = Interval::new(s.estimate - z * s.se, s.estimate + z * s.se);
            Shrunken {
                estimate: s.estimate,
                se: s.se,
                ci,
                own_weight: s.own_weight,
                reading: (scale != ReadingScale::Same).then(|| ShrunkenReading {
                    estimate: scale.apply(s.estimate),
                    ci: ci.map(|x| scale.apply(x)),
                }),
            }
        })
        .collect())
}

/// Every subset of the moderators, ranked.
///
/// # Errors
/// [`Error::Usage`] with clustered effects, and the errors of
/// [`subsets::fit_all`].
fn model_set(level: f64, design: &Design, model: &Fitted, studies: &Studies) -> Result<ModelSet> {
    if model.working.clusters().is_some() {
        return Err(Error::usage(
            Flag::AllSubsets,
            format!(
                "ranks models of independent effects; it is not available with {}",
                Flag::Cluster
            ),
        ));
    }
    let cands = subsets::candidates(design);
    let fits = subsets::fit_all(&studies.y, &studies.v, design, level)?;
    let importance = subsets::importance(&fits, cands.len())
        .into_iter()
        .zip(&cands)
        .map(|(importance, c)| Importance {
            moderator: c.name.clone(),
            importance,
        })
        .collect();
    let averaged = subsets::averaged(&fits, design.p)
        .into_iter()
        .zip(&design.terms)
        .map(|((estimate, se), t)| AveragedCoefficient {
            term: t.name.clone(),
            estimate,
            se,
        })
        .collect();
    let models = fits
        .iter()
        .map(|f| RankedModel {
            terms: f.members.iter().map(|&c| cands[c].name.clone()).collect(),
            parameters: f.parameters,
            log_likelihood: f.log_likelihood,
            aicc: f.aicc,
            delta: f.delta,
            weight: f.weight,
        })
        .collect();
    Ok(ModelSet {
        candidates: cands.into_iter().map(|c| c.name).collect(),
        models,
        importance,
        averaged,
    })
}
