//! What the fitted model predicts: effects at the `--at` values, per-level
//! summaries of the categorical moderators, and the fitted line along each
//! numeric moderator.

use super::estimate::{AtValue, Estimate, Interval, MeanEffect, PredictionInterval, Reading};
use serde::Serialize;
use std::collections::BTreeMap;

/// A predicted effect at given moderator values.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Prediction {
    /// Moderator values.
    pub at: BTreeMap<String, AtValue>,
    /// Estimate, standard error of the mean effect there, confidence and
    /// prediction intervals (analysis scale).
    #[serde(flatten)]
    pub mean: MeanEffect,
    /// The same on the reading scale.
    pub reading: Option<Reading>,
    /// Moderator values outside the range of the studies (extrapolation).
    pub outside_range: Vec<String>,
}

/// Per-level summaries of one categorical moderator (for grouped forest
/// plots and per-level bubble plots).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Subgroups {
    /// The moderator's name.
    pub moderator: String,
    /// Where the other moderators are held for `predicted`, in words (empty when there are none).
    pub held: String,
    /// One entry per level, in the order of the moderator's `levels`.
    pub levels: Vec<LevelSummary>,
}

/// One level of a categorical moderator.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct LevelSummary {
    /// The level.
    pub level: String,
    /// Included studies at this level.
    pub k: usize,
    /// A separate random-effects average of this level's studies alone (same
    /// τ² estimator, inference and level as the main model; null when the
    /// level has fewer than 2 studies or that fit has no answer).
    pub pooled: Option<Estimate>,
    /// τ² of that separate fit (null with `pooled`).
    pub tau2: Option<f64>,
    /// The main model's predicted mean effect at this level, with the other
    /// numeric moderators at their means and the other categorical moderators
    /// at their reference levels. Its prediction interval uses the model's τ².
    pub predicted: Estimate,
}

/// The fitted meta-regression line along one numeric moderator.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Curve {
    /// The moderator's name.
    pub moderator: String,
    /// Where the other moderators are held, in words (empty when there are none).
    pub held: String,
    /// Predictions at evenly spaced values from the studies' minimum to maximum.
    pub points: Vec<CurvePoint>,
}

/// One point of a [`Curve`], on the analysis scale.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct CurvePoint {
    /// The moderator's value.
    pub x: f64,
    /// Predicted mean effect.
    pub estimate: f64,
    /// Confidence interval of the mean effect.
    #[serde(flatten)]
    pub ci: Interval,
    /// Prediction interval for a new study's true effect.
    #[serde(flatten)]
    pub pi: PredictionInterval,
}

/// The fitted line along one numeric moderator at one level of a
/// categorical moderator (one per level, for each pair of a numeric and a
/// categorical moderator): the bubble plot draws a line per level.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct LevelCurve {
    /// The numeric moderator along the line.
    pub moderator: String,
    /// The categorical moderator whose level is fixed.
    pub by: String,
    /// The level.
    pub level: String,
    /// Where the remaining moderators are held, in words (empty when there are none).
    pub held: String,
    /// Predictions at the same values as the moderator's [`Curve`].
    pub points: Vec<CurvePoint>,
}
