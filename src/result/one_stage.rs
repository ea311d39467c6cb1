//! The result of `pondus sites --one-stage`: the linear mixed model of all
//! participant rows with a fixed intercept per site and a random x slope.

use super::Interval;
use serde::Serialize;

/// A fixed effect of the one-stage model with its z test.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct ZTerm {
    /// The REML (generalised least squares) estimate β̂ = (X'V̂⁻¹X)⁻¹X'V̂⁻¹y.
    pub estimate: f64,
    /// Its standard error √[(X'V̂⁻¹X)⁻¹]ᵢᵢ at the REML variances.
    pub se: f64,
    /// estimate ± z·se, z the normal quantile at the confidence level.
    #[serde(flatten)]
    pub ci: Interval,
    /// z = estimate / se.
    pub statistic: f64,
    /// Two-sided normal p-value.
    pub p: f64,
}

/// A named fixed effect (a covariate, or x times a site characteristic).
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
pub struct NamedZTerm {
    /// The covariate's or the site characteristic's column.
    pub name: String,
    /// The estimate and its test.
    #[serde(flatten)]
    pub term: ZTerm,
}

/// A variance component with its profile-likelihood interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct ProfiledVariance {
    /// The REML estimate.
    pub estimate: f64,
    /// The values whose profile restricted log-likelihood is within half the χ²₁ quantile at the confidence level of its maximum.
    #[serde(flatten)]
    pub ci: Interval,
}

/// The two variance components.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct OneStageVariance {
    /// τ², the variance of the site-specific x slopes u_j around the fixed part.
    pub slope: ProfiledVariance,
    /// σ², the variance of the participant-level errors e_ij.
    pub residual: ProfiledVariance,
}

/// How the search for τ² ended.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct OneStageSearch {
    /// Whether τ̂² = 0: the restricted likelihood is largest at the boundary (its derivative there, `score_at_zero`, is not positive).
    pub at_boundary: bool,
    /// The derivative of the profile restricted log-likelihood in γ = τ²/σ² at γ = 0 (positive: it rises away from 0).
    pub score_at_zero: f64,
    /// Evaluations of the restricted likelihood in the search (the intervals not counted).
    pub evaluations: u64,
}

/// The one-stage model y_ij = α_j + β₁x + β₂(w − w̄_j) + β₃x(w − w̄_j) + β₄x·w̄_j (+ covariates, + x·s_j) + u_j·x + e_ij, fitted by REML from per-site sufficient statistics.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct OneStage {
    /// The model, written out with the column names.
    pub model: String,
    /// Sites in the model (every site with rows).
    pub sites: usize,
    /// Participant rows in the model.
    pub rows: u64,
    /// Confidence level of the intervals.
    pub level: f64,
    /// β₁: the x slope of a participant at the site mean of w in a site whose mean w (and every characteristic) is 0; without w and characteristics the average slope.
    pub slope: ZTerm,
    /// β₂: the within-site association of w (centred at the site mean) with y where x = 0 (null without `--w`).
    pub w_within: Option<ZTerm>,
    /// β₃: the within-site interaction: change of the x slope per unit of a participant's w relative to the site mean (null without `--w`).
    pub within_interaction: Option<ZTerm>,
    /// β₄: the across-site interaction: change of the x slope per unit of the site mean of w (null without `--w`).
    pub across_interaction: Option<ZTerm>,
    /// The covariates' coefficients.
    pub covariates: Vec<NamedZTerm>,
    /// Change of the x slope per unit of each site characteristic (`--moderator`).
    pub characteristics: Vec<NamedZTerm>,
    /// τ² (random slope) and σ² (residual), each with its profile-likelihood interval.
    pub variance: OneStageVariance,
    /// How the search for τ² ended.
    pub search: OneStageSearch,
    /// What the answers mean, and how they compare with the two-stage answers (with `--fit`).
    pub answers: Vec<String>,
    /// Remarks about the fit.
    pub notes: Vec<String>,
    /// Cautions for reading the model.
    pub cautions: Vec<String>,
}
