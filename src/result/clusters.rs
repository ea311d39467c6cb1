//! What the cluster structure (`--cluster`) adds to the report: variance
//! components, per-level tests and the level of each moderator term.

use super::estimate::Interval;
use serde::Serialize;

/// A level of the three-level model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum ClusterLevel {
    /// Between clusters.
    Between,
    /// Within a cluster.
    Within,
}

impl ClusterLevel {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            ClusterLevel::Between => "between",
            ClusterLevel::Within => "within",
        }
    }
}

/// The working model of clustered effects.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum ClusterModel {
    /// Cluster effects and effects within clusters.
    ThreeLevel,
    /// Independent effects (the usual random-effects model).
    TwoLevel,
}

impl ClusterModel {
    /// The words used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            ClusterModel::ThreeLevel => "three-level",
            ClusterModel::TwoLevel => "two-level",
        }
    }
}

/// One variance component of the three-level model.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct VarianceComponent {
    /// "between" (σ² of the cluster effects) or "within" (σ² of the effects within a cluster).
    pub level: ClusterLevel,
    /// REML or ML estimate (≥ 0).
    pub estimate: f64,
    /// Lower (`ci_low`) and upper (`ci_high`) end of the profile-likelihood
    /// interval at `model.level` (the lower end 0 when it reaches the boundary).
    #[serde(flatten)]
    pub ci: Interval<Option<f64>>,
    /// Share of the total variance σ²_b + σ²_w + ṽ at this level, in [0, 1]
    /// (ṽ the typical sampling variance of `heterogeneity.typical_variance`).
    pub i2: f64,
}

/// What the cluster structure adds to the report.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ClusterReport {
    /// The cluster column's header.
    pub column: String,
    /// Number of clusters.
    pub clusters: usize,
    /// Clusters with a single effect.
    pub single_effect_clusters: usize,
    /// Largest number of effects in one cluster.
    pub max_cluster_size: usize,
    /// "three-level" or "two-level" (the working model).
    pub model: ClusterModel,
    /// Likelihood-ratio tests of each variance component = 0 (three-level model only).
    pub lr_tests: Vec<ComponentTest>,
    /// The level at which each non-intercept term varies.
    pub moderator_levels: Vec<TermLevel>,
    /// Under `--robust`: how the robust inference was done, in words (null otherwise).
    pub robust: Option<String>,
}

/// A likelihood-ratio test that one variance component is 0.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ComponentTest {
    /// "within" (against the model without σ²_within) or "between" (against
    /// the usual two-level model with independent effects).
    pub component: ClusterLevel,
    /// 2(ℓ̂ − ℓ̂₀), with REML or ML as fitted.
    pub statistic: f64,
    /// The maximised log-likelihood without the component.
    pub log_likelihood_without: f64,
    /// p from the 50:50 mixture of χ²₀ and χ²₁.
    pub p: f64,
}

/// The level at which a design term varies.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct TermLevel {
    /// Term label, as in `coefficients`.
    pub term: String,
    /// "between" (constant within every cluster) or "within" (varies inside some cluster).
    pub level: ClusterLevel,
}

display_by_id!(ClusterLevel, ClusterModel);
