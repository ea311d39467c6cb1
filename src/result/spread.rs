//! The spread of the true effects as an answer in itself (`--spread-by`):
//! the location-scale model's coefficients on the log τ² scale, the
//! likelihood-ratio test against one τ², the τ² at telling values of each
//! spread term, and each study's own τ² and prediction band.

use super::estimate::Interval;
use super::Tau2Method;
use serde::Serialize;

/// The location-scale model's answer about the spread (`--spread-by`).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Spread {
    /// The characteristics named with `--spread-by`, in the order given.
    pub spread_by: Vec<String>,
    /// The estimator of the location-scale fit (`reml` or `ml`).
    pub method: Tau2Method,
    /// ln τ_i² = z_i'α: the coefficients α, intercept first (Wald z tests).
    pub coefficients: Vec<SpreadCoefficient>,
    /// Likelihood-ratio test of every spread term against the same model
    /// with one τ² (same estimator): statistic 2(ℓ₁ − ℓ₀), χ² on `df`.
    pub test: SpreadTest,
    /// τ² (and τ) at each level of a categorical spread term, or at the mean
    /// and ±1 SD of a numeric one, the other spread terms at their study means.
    pub tau2_by: Vec<Tau2At>,
    /// The (restricted) log-likelihood of the location-scale model,
    /// constants included (comparable with the one-τ² model's).
    pub log_likelihood: f64,
    /// The (restricted) log-likelihood of the model with one τ².
    pub log_likelihood_one_tau2: f64,
    /// Scoring and Newton iterations of the fit.
    pub iterations: usize,
    /// Each included study's τ̂_i² and its band for a new study like it, in input order.
    pub studies: Vec<SpreadStudy>,
}

/// One coefficient of ln τ² (log τ² scale).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SpreadCoefficient {
    /// `intercept`, a numeric term's name, or `name=level` of a dummy.
    pub term: String,
    /// α̂_j.
    pub estimate: f64,
    /// From the inverse observed information of the (restricted) log-likelihood.
    pub se: f64,
    /// Wald interval α̂_j ∓ z·se.
    #[serde(flatten)]
    pub ci: Interval,
    /// z = α̂_j / se.
    pub statistic: f64,
    /// Two-sided normal p.
    pub p: f64,
}

/// The likelihood-ratio test of the spread terms.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct SpreadTest {
    /// 2(ℓ_location-scale − ℓ_one τ²).
    pub statistic: f64,
    /// The number of spread coefficients besides the intercept.
    pub df: usize,
    /// Upper χ² tail.
    pub p: f64,
}

/// τ² at one value of one spread term.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Tau2At {
    /// The spread term (the column's name).
    pub term: String,
    /// The level (categorical) or `mean`, `mean-1sd`, `mean+1sd` (numeric).
    pub at: String,
    /// The numeric value for a numeric term (null for a level).
    pub value: Option<f64>,
    /// exp(z₀'α̂).
    pub tau2: f64,
    /// √τ².
    pub tau: f64,
    /// Wald interval of τ², exp(z₀'α̂ ∓ z·√(z₀'Cov(α̂)z₀)).
    #[serde(flatten)]
    pub ci: Interval,
}

/// A study under the location-scale model.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SpreadStudy {
    /// The study's label.
    pub study: String,
    /// τ̂_i² = exp(z_i'α̂).
    pub tau2: f64,
    /// x_i'β̂.
    pub fitted: f64,
    /// The band for a new study's true effect with this study's
    /// characteristics: x_i'β̂ ∓ z·√(τ̂_i² + x_i'Cov(β̂)x_i) (analysis scale).
    pub pi_low: f64,
    /// Upper end of that band.
    pub pi_high: f64,
}
