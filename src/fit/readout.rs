//! Stage 5 of `fit`: read the fitted model out at chosen moderator values:
//! the `--at` predictions, per-level summaries of categorical moderators,
//! and the fitted line along each numeric moderator.

use super::estimate::{Fitted, WorkingModel};
use super::studies::Studies;
use super::summarise::estimate;
use super::FitSettings;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::model::design::{self, Design, ModeratorKind, RawModerator, Value};
use crate::model::{self, inference, FitOptions, ModelFit};
use crate::result::{
    AtValue, Curve, CurvePoint, Interval, LevelCurve, LevelSummary, Prediction, PredictionInterval,
    Subgroups,
};
use crate::support::flag::Flag;
use crate::support::format as fmt;
use std::collections::BTreeMap;

/// Number of points of each fitted line in [`crate::result::FitReport::curves`].
pub const CURVE_POINTS: usize = 61;

/// What the model says at chosen values.
#[derive(Debug, Clone)]
pub struct ReadOut {
    /// The `--at` predictions, in the order given.
    pub predictions: Vec<Prediction>,
    /// The design row of each prediction, in the same order (for answers
    /// read off the predictive distribution there, such as `--beyond`).
    pub prediction_rows: Vec<Vec<f64>>,
    /// Per-level summaries of each categorical moderator.
    pub subgroups: Vec<Subgroups>,
    /// The fitted line along each numeric moderator.
    pub curves: Vec<Curve>,
    /// The fitted line along each numeric moderator at each level of each
    /// categorical moderator.
    pub level_curves: Vec<LevelCurve>,
}

/// Predictions, subgroups and curves of the fitted model.
///
/// # Errors
/// [`Error::Usage`] for an `--at` without moderators, naming a moderator
/// that is not in the model, leaving one out, or giving a non-number for a
/// numeric one; the errors of [`design::design_row`].
pub fn read_out(
    settings: &FitSettings,
    design: &Design,
    model: &Fitted,
    studies: &Studies,
) -> Result<ReadOut> {
    let scale = studies.scale;
    let mut predictions = Vec::new();
    let mut prediction_rows = Vec::new();
    for spec in &settings.predictions {
        let (p, x0) = prediction(design, &model.fit, spec, scale)?;
        predictions.push(p);
        prediction_rows.push(x0);
    }
    // Clustered effects are not independent: no per-level pooled fits then.
    let pooled = match model.working {
        WorkingModel::Independent => Some(settings.options),
        WorkingModel::TwoLevel(_) | WorkingModel::ThreeLevel(_) => None,
    };
    Ok(ReadOut {
        predictions,
        prediction_rows,
        subgroups: subgroups(design, &model.fit, studies, pooled, scale)?,
        curves: curves(design, &model.fit)?,
        level_curves: level_curves(design, &model.fit)?,
    })
}

fn prediction(
    design: &Design,
    fit: &ModelFit,
    spec: &[(String, String)],
    scale: ReadingScale,
) -> Result<(Prediction, Vec<f64>)> {
    if design.moderators.is_empty() {
        return Err(Error::usage(
            Flag::At,
            format!(
                "the model has no moderators; the average effect and its prediction interval are \
                 reported without {}",
                Flag::At
            ),
        ));
    }
    let given: BTreeMap<&str, &str> = spec.iter().map(|(n, v)| (n.as_str(), v.as_str())).collect();
    for name in given.keys() {
        if !design.moderators.iter().any(|m| m.name == *name) {
            let names: Vec<&str> = design.moderators.iter().map(|m| m.name.as_str()).collect();
            return Err(Error::usage(
                Flag::At,
                format!(
                    "'{name}' is not a moderator of this model; the moderators are: {}",
                    names.join(", ")
                ),
            ));
        }
    }
    let mut values = Vec::new();
    let mut at = BTreeMap::new();
    let mut outside = Vec::new();
    for m in &design.moderators {
        let Some(text) = given.get(m.name.as_str()) else {
            return Err(Error::usage(
                Flag::At,
                format!(
                    "give a value for every moderator; '{}' is missing (for example {} {}=<value>,...)",
                    m.name,
                    Flag::At,
                    m.name
                ),
            ));
        };
        match &m.kind {
            ModeratorKind::Numeric { min, max, .. } => {
                let x: f64 = text
                    .trim()
                    .parse()
                    .ok()
                    .filter(|x: &f64| x.is_finite())
                    .ok_or_else(|| {
                        Error::usage(
                            Flag::At,
                            format!(
                                "'{text}' is not a number (moderator '{}' is numeric)",
                                m.name
                            ),
                        )
                    })?;
                // Far outside the studies' range the prediction's variance
                // x'Cov x overflows: say so rather than "did not converge".
                let span = (max - min).abs().max(min.abs()).max(max.abs());
                if (x.abs() - span) > 1e50 * span {
                    return Err(Error::usage(
                        Flag::At,
                        format!(
                            "{}={text} is more than 1e50 times the studies' range ({min} to \
                             {max}) away; a prediction there leaves the range of floating-point \
                             numbers and says nothing about these studies",
                            m.name
                        ),
                    ));
                }
                if x < *min || x > *max {
                    outside.push(format!("{} = {x} (studies: {min} to {max})", m.name));
                }
                values.push(Value::Number(x));
                at.insert(m.name.clone(), AtValue::Number(x));
            }
            ModeratorKind::Categorical { .. } => {
                values.push(Value::Label(text.trim().to_string()));
                at.insert(m.name.clone(), AtValue::Level(text.trim().to_string()));
            }
        }
    }
    let x0 = design::design_row(&design.moderators, &design.interactions, &values)?;
    let p = inference::predict(fit, &x0);
    Ok((
        Prediction {
            at,
            mean: p.mean_effect(),
            reading: p.reading(scale),
            outside_range: outside,
        },
        x0,
    ))
}

/// Where a moderator that is not being varied is held.
#[derive(Debug, Clone, Copy)]
pub(super) enum HeldAt<'a> {
    /// A numeric moderator at its mean.
    Mean(f64),
    /// A categorical moderator at its reference level.
    Reference(&'a str),
}

/// The values at which the moderators are held for a line, a per-level
/// prediction or a probe: numeric ones at their means, categorical ones at
/// their reference levels; and, by name, where those not in `except` are held
/// (for the words, [`held_grouped`] and [`held_listed`]).
pub(super) fn held<'a>(
    design: &'a Design,
    except: &[usize],
) -> (Vec<Value>, Vec<(&'a str, HeldAt<'a>)>) {
    let mut values = Vec::new();
    let mut named = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let at = match &m.kind {
            ModeratorKind::Numeric { mean, .. } => {
                values.push(Value::Number(*mean));
                HeldAt::Mean(*mean)
            }
            ModeratorKind::Categorical { reference, .. } => {
                values.push(Value::Label(reference.clone()));
                HeldAt::Reference(reference)
            }
        };
        if !except.contains(&j) {
            named.push((m.name.as_str(), at));
        }
    }
    (values, named)
}

/// Where the other moderators are held, numeric ones first: "at the mean of
/// x = 1.5; at the reference level g = a" (lines and per-level predictions).
fn held_grouped(named: &[(&str, HeldAt<'_>)]) -> String {
    let mut numeric = Vec::new();
    let mut categorical = Vec::new();
    for (name, at) in named {
        match at {
            HeldAt::Mean(mean) => numeric.push(format!("{name} = {}", fmt::short(*mean))),
            HeldAt::Reference(level) => categorical.push(format!("{name} = {level}")),
        }
    }
    let mut parts = Vec::new();
    if !numeric.is_empty() {
        parts.push(format!("at the mean of {}", numeric.join(", ")));
    }
    if !categorical.is_empty() {
        parts.push(format!("at the reference level {}", categorical.join(", ")));
    }
    parts.join("; ")
}

/// Where the other moderators are held, in moderator order: "x at its mean
/// 1.5, g at its reference level a" (probes, contrasts and regions).
pub(super) fn held_listed(named: &[(&str, HeldAt<'_>)]) -> String {
    named
        .iter()
        .map(|(name, at)| match at {
            HeldAt::Mean(mean) => format!("{name} at its mean {}", fmt::short(*mean)),
            HeldAt::Reference(level) => format!("{name} at its reference level {level}"),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// Per-level summaries of every categorical moderator.
///
/// # Formula
/// `pooled`: the intercept-only random-effects model fitted to the level's
/// studies alone, with the main model's τ² estimator, inference and level
/// (its own τ²); left out (None) when `pooled` is None, as for clustered
/// effects. `predicted`: x0'β̂ of the main model at the level, the other
/// moderators held as in [`held`], with [`inference::predict`].
fn subgroups(
    design: &Design,
    fit: &ModelFit,
    studies: &Studies,
    pooled: Option<FitOptions>,
    scale: ReadingScale,
) -> Result<Vec<Subgroups>> {
    let mut out = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let (ModeratorKind::Categorical { levels, counts, .. }, RawModerator::Text(cells)) =
            (&m.kind, &studies.raw[j])
        else {
            continue;
        };
        let (mut values, named) = held(design, &[j]);
        // Each level's studies, in file order, found by the rows' codes
        // in one sweep.
        let mut own_studies = vec![(Vec::new(), Vec::new()); levels.len()];
        if pooled.is_some() {
            let by_code = cells.positions(levels);
            for (pos, i) in studies.included.iter().enumerate() {
                if let Some(l) = cells.code(i).and_then(|c| by_code[c]) {
                    own_studies[l].0.push(studies.y[pos]);
                    own_studies[l].1.push(studies.v[pos]);
                }
            }
        }
        // The levels' own fits side by side (each the same whatever the
        // number of threads).
        let owns: Vec<_> = {
            use rayon::prelude::*;
            own_studies
                .par_iter()
                .map(|(yl, vl)| pooled.and_then(|options| level_fit(yl, vl, options)))
                .collect()
        };
        let mut summaries = Vec::new();
        for ((level, &count), own) in levels.iter().zip(counts).zip(owns) {
            values[j] = Value::Label(level.clone());
            let x0 = design::design_row(&design.moderators, &design.interactions, &values)?;
            summaries.push(LevelSummary {
                level: level.clone(),
                k: count,
                pooled: own.map(|(p, _)| estimate(p, scale)),
                tau2: own.map(|(_, t)| t),
                predicted: estimate(inference::predict(fit, &x0), scale),
            });
        }
        out.push(Subgroups {
            moderator: m.name.clone(),
            held: held_grouped(&named),
            levels: summaries,
        });
    }
    Ok(out)
}

/// The intercept-only model of one level's studies: its pooled effect and
/// τ², or None with fewer than 2 studies or when the fit fails or is degenerate.
fn level_fit(
    y: &[f64],
    v: &[f64],
    options: FitOptions,
) -> Option<(inference::PredictionInference, f64)> {
    if y.len() < 2 {
        return None;
    }
    // Its summary numbers only: no per-study arrays, no copy of the ones.
    let ones = vec![1.0; y.len()];
    model::fit_summary(y, v, std::borrow::Cow::Borrowed(&ones), 1, options, false)
        .ok()
        .filter(|f| f.kh_scale != Some(0.0))
        .map(|f| (inference::predict(&f, &[1.0]), f.tau2.estimate))
        .filter(|(p, _)| p.se.is_finite() && !p.pi_low.is_infinite())
}

/// The fitted line along every numeric moderator: [`CURVE_POINTS`]
/// predictions ([`inference::predict`]) evenly spaced from the studies'
/// minimum to maximum, the other moderators held as in [`held`].
fn curves(design: &Design, fit: &ModelFit) -> Result<Vec<Curve>> {
    let mut out = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let ModeratorKind::Numeric { min, max, .. } = m.kind else {
            continue;
        };
        let (mut values, named) = held(design, &[j]);
        let points = line_points(design, fit, &mut values, j, (min, max))?;
        out.push(Curve {
            moderator: m.name.clone(),
            held: held_grouped(&named),
            points,
        });
    }
    Ok(out)
}

/// [`CURVE_POINTS`] predictions evenly spaced from `range.0` to `range.1`
/// of numeric moderator `j`, the others at `values`.
fn line_points(
    design: &Design,
    fit: &ModelFit,
    values: &mut [Value],
    j: usize,
    (min, max): (f64, f64),
) -> Result<Vec<CurvePoint>> {
    let mut points = Vec::with_capacity(CURVE_POINTS);
    for s in 0..CURVE_POINTS {
        let x = min + (max - min) * s as f64 / (CURVE_POINTS - 1) as f64;
        values[j] = Value::Number(x);
        let x0 = design::design_row(&design.moderators, &design.interactions, values)?;
        let p = inference::predict(fit, &x0);
        points.push(CurvePoint {
            x,
            estimate: p.estimate,
            ci: Interval::new(p.ci_low, p.ci_high),
            pi: PredictionInterval::new(p.pi_low, p.pi_high),
        });
    }
    Ok(points)
}

/// The fitted line along every numeric moderator at every level of every
/// categorical moderator: as in [`curves`], with the categorical moderator
/// set to the level instead of its reference (with an interaction between
/// the two, the lines have their own slopes).
fn level_curves(design: &Design, fit: &ModelFit) -> Result<Vec<LevelCurve>> {
    let mut out = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let ModeratorKind::Numeric { min, max, .. } = m.kind else {
            continue;
        };
        for (g, by) in design.moderators.iter().enumerate() {
            let ModeratorKind::Categorical { levels, .. } = &by.kind else {
                continue;
            };
            let (mut values, named) = held(design, &[j, g]);
            for level in levels {
                values[g] = Value::Label(level.clone());
                out.push(LevelCurve {
                    moderator: m.name.clone(),
                    by: by.name.clone(),
                    level: level.clone(),
                    held: held_grouped(&named),
                    points: line_points(design, fit, &mut values, j, (min, max))?,
                });
            }
        }
    }
    Ok(out)
}
