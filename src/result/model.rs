//! The fitted model in the report: its description (estimator, inference,
//! moderators), τ², the coefficients, the omnibus moderator test and the
//! residual heterogeneity, with the choice enums they use.

use super::estimate::{ContrastTest, Interval, RatioCoefficient};
use serde::Serialize;

/// Which τ² estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum Tau2Method {
    /// Restricted maximum likelihood.
    Reml,
    /// Maximum likelihood.
    Ml,
    /// DerSimonian–Laird (generalised method of moments).
    Dl,
    /// Paule–Mandel.
    Pm,
    /// Hedges' OLS-based moment estimator.
    He,
    /// Sidik–Jonkman.
    Sj,
    /// τ² fixed at 0 (common-effect model).
    None,
}

impl Tau2Method {
    /// The command-line name.
    pub fn id(self) -> &'static str {
        match self {
            Tau2Method::Reml => "reml",
            Tau2Method::Ml => "ml",
            Tau2Method::Dl => "dl",
            Tau2Method::Pm => "pm",
            Tau2Method::He => "he",
            Tau2Method::Sj => "sj",
            Tau2Method::None => "none",
        }
    }

    /// The estimator in words.
    pub fn describe(self) -> &'static str {
        match self {
            Tau2Method::Reml => "restricted maximum likelihood (REML)",
            Tau2Method::Ml => "maximum likelihood (ML)",
            Tau2Method::Dl => "DerSimonian–Laird moments",
            Tau2Method::Pm => "Paule–Mandel",
            Tau2Method::He => "Hedges' OLS-based moments",
            Tau2Method::Sj => "Sidik–Jonkman",
            Tau2Method::None => "none (common-effect model, τ² = 0)",
        }
    }
}

/// How coefficients are tested.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Inference {
    /// Knapp & Hartung (2003): t and F with the covariance scaled by the
    /// weighted residual mean square.
    Kh,
    /// Knapp–Hartung with the scale factor floored at 1, max(1, s²), so its
    /// standard errors are never smaller than the model-based ones (Röver,
    /// Knapp & Friede 2015, *BMC Med. Res. Methodol.* 15:99; Jackson, Law,
    /// Rücker & Schwarzer 2017, *Stat. Med.* 36:3923).
    KhFloor,
    /// Wald tests with the normal and chi-square distributions.
    Z,
}

impl Inference {
    /// The command-line name.
    pub fn id(self) -> &'static str {
        match self {
            Inference::Kh => "kh",
            Inference::KhFloor => "kh-floor",
            Inference::Z => "z",
        }
    }

    /// Whether tests use t and F (Knapp–Hartung, floored or not) rather
    /// than the normal and chi-square.
    pub fn uses_t(self) -> bool {
        matches!(self, Inference::Kh | Inference::KhFloor)
    }

    /// The method in words.
    pub fn describe(self) -> &'static str {
        match self {
            Inference::Kh => "Knapp–Hartung t and F tests",
            Inference::KhFloor => "Knapp–Hartung t and F tests with the scale factor floored at 1",
            Inference::Z => "Wald z and chi-square tests",
        }
    }
}

/// How the τ² estimate was reached.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Ending {
    /// A closed-form estimate, positive.
    ClosedForm,
    /// A closed-form estimate that was negative and set to 0.
    TruncatedAtZero,
    /// The root search converged inside (0, ∞).
    Converged,
    /// The maximum (or root) lies on the boundary τ² = 0.
    Boundary,
    /// Fixed by the user's choice of model.
    Fixed,
}

/// The kind of a moderator, as found in the data.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
#[serde(tag = "type", rename_all = "lowercase")]
pub enum ModeratorKind {
    /// A number per study.
    Numeric {
        /// Mean over the included studies.
        mean: f64,
        /// SD over the included studies (divisor k − 1).
        sd: f64,
        /// Smallest included value.
        min: f64,
        /// Largest included value.
        max: f64,
        /// Whether the mean was subtracted before fitting.
        centered: bool,
        /// The value subtracted before fitting (`--center`: the mean over the
        /// included studies); omitted when not centred.
        #[serde(skip_serializing_if = "Option::is_none")]
        centered_at: Option<f64>,
    },
    /// A label per study, dummy-coded against a reference level.
    Categorical {
        /// Levels in sorted order.
        levels: Vec<String>,
        /// Studies per level, in the order of `levels`.
        counts: Vec<usize>,
        /// The reference level.
        reference: String,
    },
}

/// A moderator as used in the model.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
pub struct Moderator {
    /// Column header.
    pub name: String,
    /// Numeric or categorical, with its summary.
    pub kind: ModeratorKind,
}

/// The model that was fitted.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ModelInfo {
    /// τ² estimator id ("reml", "ml", "dl", "pm", "he", "sj", "none").
    pub tau2_method: Tau2Method,
    /// The estimator in words.
    pub tau2_description: String,
    /// "kh" or "z".
    pub inference: Inference,
    /// The inference method in words.
    pub inference_description: String,
    /// Confidence level of every interval.
    pub level: f64,
    /// Term labels in coefficient order.
    pub terms: Vec<String>,
    /// Moderators with their type and summary.
    pub moderators: Vec<Moderator>,
    /// Product terms as moderator-name pairs.
    pub interactions: Vec<[String; 2]>,
    /// Knapp–Hartung scale factor applied: s² under kh, max(1, s²) under
    /// kh-floor (null under z).
    pub kh_scale: Option<f64>,
    /// The raw factor s² = Q(τ̂²)/(k − p) of this model, under every inference.
    pub scale_factor: f64,
    /// Log-likelihood at the estimate for "ml", restricted log-likelihood for "reml" (else null).
    pub log_likelihood: Option<f64>,
}

/// Residual between-study variance.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Tau2Report {
    /// Estimator id.
    pub method: Tau2Method,
    /// Estimate (≥ 0).
    pub estimate: f64,
    /// √τ², on the analysis scale.
    pub tau: f64,
    /// Q-profile limits `ci_low`, `ci_high` (null for "none").
    #[serde(flatten)]
    pub ci: Interval<Option<f64>>,
    /// How the estimate was reached: "closed-form", "truncated-at-zero", "converged", "boundary", "fixed".
    pub ending: Ending,
    /// Objective evaluations used by an iterative estimator.
    pub evaluations: u64,
}

/// One coefficient.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Coefficient {
    /// Term label.
    pub term: String,
    /// Estimate, standard error, confidence interval, and the t (kh) or z
    /// test with its df (null under z) and two-sided p-value.
    #[serde(flatten)]
    pub contrast: ContrastTest,
    /// For log-ratio measures, exp(estimate) and exp(CI): the ratio itself for
    /// the intercept, the factor by which the ratio changes for a moderator
    /// term (null for other measures).
    pub ratio: Option<RatioCoefficient>,
    /// Cluster-robust (CR2) standard error (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_se: Option<f64>,
    /// Satterthwaite degrees of freedom of the robust t test (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_df: Option<f64>,
    /// Two-sided p-value of the robust t test (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_p: Option<f64>,
    /// The interval of the robust t test: estimate ± t(robust_df) × robust_se
    /// at the confidence level (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_ci: Option<Interval>,
}

/// The reference distribution of the omnibus moderator test.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
pub enum TestDistribution {
    /// F (kh, and the robust test).
    #[serde(rename = "F")]
    F,
    /// Chi-square (z).
    #[serde(rename = "chi-square")]
    ChiSquare,
}

impl TestDistribution {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            TestDistribution::F => "F",
            TestDistribution::ChiSquare => "chi-square",
        }
    }
}

/// A moderator test other than the model-based one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
pub enum RobustTestMethod {
    /// The CR2 approximate Hotelling T² test (`--robust`).
    #[serde(rename = "CR2 approximate Hotelling T² (HTZ)")]
    Htz,
}

impl RobustTestMethod {
    /// The words used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            RobustTestMethod::Htz => "CR2 approximate Hotelling T² (HTZ)",
        }
    }
}

/// The omnibus moderator test.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ModeratorTest {
    /// F (kh) or chi-square (z).
    pub statistic: f64,
    /// Numerator df.
    pub df1: f64,
    /// Denominator df (null under z).
    pub df2: Option<f64>,
    /// p-value.
    pub p: f64,
    /// "F" or "chi-square".
    pub distribution: TestDistribution,
    /// Whether p < 1 − level.
    pub significant: bool,
    /// The plain answer in words.
    pub answer: String,
    /// The test used when it is not the model-based one: "CR2 approximate Hotelling T² (HTZ)"
    /// under `--robust` (omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub method: Option<RobustTestMethod>,
}

/// The answer with the Knapp–Hartung scale factor floored at 1 (what
/// `--inference kh-floor` gives), reported beside the chosen answer whenever
/// a raw factor s² is below 1, under any inference.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
pub struct FlooredCheck {
    /// Raw factor s² of the model with moderators (null without moderators).
    pub scale_factor: Option<f64>,
    /// Raw factor s² of the intercept-only model behind the average effect.
    pub scale_factor_average: f64,
    /// The moderator test with the floored factor (null without moderators
    /// or when the model's own factor is at least 1).
    pub moderator_test: Option<FlooredTest>,
    /// The average effect with the floored factor (null when the factor of
    /// its model is at least 1).
    pub average: Option<FlooredAverage>,
    /// Whether the floored answer reaches a different conclusion at
    /// α = 1 − level: the moderator test crossing α, or the average's
    /// interval including 0 where the chosen one excluded it (or the reverse).
    pub conclusion_differs: bool,
}

/// The moderator test under the floored factor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct FlooredTest {
    /// F statistic.
    pub statistic: f64,
    /// Numerator df.
    pub df1: f64,
    /// Denominator df.
    pub df2: f64,
    /// p-value.
    pub p: f64,
    /// Whether p < 1 − level.
    pub significant: bool,
}

/// The average effect under the floored factor (analysis scale).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct FlooredAverage {
    /// Standard error with the floored factor.
    pub se: f64,
    /// Its confidence interval.
    #[serde(flatten)]
    pub ci: Interval,
    /// Two-sided p of the average against 0.
    pub p: f64,
}

/// Residual heterogeneity.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Heterogeneity {
    /// Cochran's Q on the residuals with common-effect weights.
    pub q: f64,
    /// Its df, k − p.
    pub df: f64,
    /// Its chi-square p-value.
    pub p: f64,
    /// I² as a fraction: τ²/(τ² + ṽ) (0 for "none", whose τ² is fixed at 0).
    pub i2: f64,
    /// H² = 1/(1 − I²).
    pub h2: f64,
    /// Share of τ² explained by the moderators, in [0, 1] (null without moderators or when τ²₀ = 0).
    pub r2: Option<f64>,
    /// τ² of the same estimator with no moderators.
    pub tau2_without_moderators: f64,
    /// Typical within-study variance ṽ = (k − p)/tr P₀.
    pub typical_variance: f64,
}

display_by_id!(Tau2Method, Inference, TestDistribution, RobustTestMethod);
