//! Answers about the spread of true effects and about single studies: the
//! probability that a new study's true effect exceeds a value (`--beyond`),
//! and each study's shrunken (empirical-Bayes) estimate (`--shrink`).

use super::estimate::{AtValue, Interval};
use serde::Serialize;
use std::collections::BTreeMap;

/// The chance that a new study's true effect exceeds a value (`--beyond`).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Beyond {
    /// The value as given, on the reading scale.
    pub value: f64,
    /// The same value on the analysis scale (atanh for correlations, ln for ratios).
    pub value_analysis: f64,
    /// Degrees of freedom of the t distribution used (null: the normal), the
    /// same as the prediction interval's.
    pub df: Option<f64>,
    /// The probability at the average effect (the model without moderators).
    pub average: f64,
    /// The probability at each `--at` point, in the order of `predictions`.
    pub at: Vec<BeyondAt>,
}

/// The probability at one `--at` point.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct BeyondAt {
    /// The moderator values of the point.
    pub at: BTreeMap<String, AtValue>,
    /// The probability that a new study's true effect there exceeds the value.
    pub probability: f64,
}

/// A study's empirical-Bayes (shrunken) estimate of its own true effect.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct Shrunken {
    /// x_i'β̂ + B_i·(y_i − x_i'β̂), analysis scale.
    pub estimate: f64,
    /// Standard error of the estimate as a prediction of the true effect.
    pub se: f64,
    /// Interval estimate ∓ z·se (normal quantile at the model's level).
    #[serde(flatten)]
    pub ci: Interval,
    /// The weight on the study's own effect, B_i = τ̂²/(τ̂² + v_i) (0: all
    /// the way to the fitted value; 1: the observed effect unchanged).
    pub own_weight: f64,
    /// Estimate and interval on the reading scale (null when the same).
    pub reading: Option<ShrunkenReading>,
}

/// A shrunken estimate on the reading scale.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct ShrunkenReading {
    /// The estimate.
    pub estimate: f64,
    /// Its interval.
    #[serde(flatten)]
    pub ci: Interval,
}

/// Every subset of the candidate moderators ranked by AICc (`--all-subsets`).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ModelSet {
    /// The candidates: each moderator, then each product term (`a×b`).
    pub candidates: Vec<String>,
    /// Every model, best (smallest AICc) first.
    pub models: Vec<RankedModel>,
    /// Each candidate's summed Akaike weight, in candidate order.
    pub importance: Vec<Importance>,
    /// Model-averaged coefficients over all models, in the order of `coefficients`.
    pub averaged: Vec<AveragedCoefficient>,
}

/// One model of the set.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct RankedModel {
    /// Its candidates (empty: the intercept-only model).
    pub terms: Vec<String>,
    /// Parameters q: the coefficients and τ².
    pub parameters: usize,
    /// The full ML log-likelihood (with −(k/2)·ln 2π).
    pub log_likelihood: f64,
    /// −2ℓ + 2q + 2q(q + 1)/(k − q − 1).
    pub aicc: f64,
    /// AICc minus the smallest AICc.
    pub delta: f64,
    /// Akaike weight exp(−Δ/2)/Σ exp(−Δ/2).
    pub weight: f64,
}

/// A candidate's importance.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Importance {
    /// The moderator (or product term).
    pub moderator: String,
    /// The summed Akaike weight of the models that contain it (0 to 1).
    pub importance: f64,
}

/// A model-averaged coefficient.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct AveragedCoefficient {
    /// The term, as in `coefficients`.
    pub term: String,
    /// Σ weight × estimate over all models (0 in models without the term).
    pub estimate: f64,
    /// The unconditional standard error (Burnham & Anderson 2002, eq. 4.9).
    pub se: f64,
}
