//! The diagnostics in the report: leave-one-out refits, influence measures,
//! the permutation test, small-study effects and the cumulative meta-analysis.

use super::estimate::{AtValue, Interval, RatioCoefficient};
use serde::Serialize;

/// An influence cut-off that a study exceeds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Cutoff {
    /// |DFFITS| above its cut-off.
    Dffits,
    /// Cook's distance above its cut-off.
    CooksDistance,
    /// Hat value above its cut-off.
    Hat,
    /// |rstudent| above the normal critical value.
    Rstudent,
}

impl Cutoff {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            Cutoff::Dffits => "dffits",
            Cutoff::CooksDistance => "cooks_distance",
            Cutoff::Hat => "hat",
            Cutoff::Rstudent => "rstudent",
        }
    }
}

/// The side of the funnel on which trim-and-fill sought missing studies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// Below the pooled effect.
    Left,
    /// Above the pooled effect.
    Right,
}

impl Side {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            Side::Left => "left",
            Side::Right => "right",
        }
    }
}

/// How the ordering column of the cumulative meta-analysis was sorted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SortOrder {
    /// As numbers, ascending.
    Numeric,
    /// By Unicode code points, ascending.
    Text,
}

impl SortOrder {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            SortOrder::Numeric => "numeric",
            SortOrder::Text => "text",
        }
    }
}

/// One leave-one-out refit (`--loo`): the model fitted without one study,
/// with the same estimator, inference and level.
#[derive(Debug, Clone, Serialize)]
pub struct LeaveOneOut {
    /// The study left out.
    pub study: String,
    /// Its line in the file.
    pub line: u64,
    /// Coefficient estimates without it, in model order (`model.terms`); empty when the refit failed.
    pub coefficients: Vec<f64>,
    /// τ² without it (null when the refit failed).
    pub tau2: Option<f64>,
    /// I² (a fraction) without it (null when the refit failed).
    pub i2: Option<f64>,
    /// p of the omnibus moderator test without it, from the same inference
    /// (null without moderators or when the refit failed).
    pub moderator_p: Option<f64>,
    /// p of the average effect's test without it (models without moderators; else null).
    pub average_p: Option<f64>,
    /// Whether leaving it out changes the sign of a moderator coefficient
    /// (of the average effect when there are no moderators).
    pub sign_changed: bool,
    /// Whether leaving it out moves the tested p (moderator test, or the
    /// average effect without moderators) across 1 − level.
    pub significance_changed: bool,
    /// Why the refit has no answer (null when it has one).
    pub problem: Option<String>,
}

/// Influence measures of one study (`--influence`; Viechtbauer & Cheung 2010).
#[derive(Debug, Clone, Serialize)]
pub struct Influence {
    /// The study.
    pub study: String,
    /// Its line in the file.
    pub line: u64,
    /// Externally studentised residual (y_i − x_i'β̂₍₋ᵢ₎)/√(v_i + τ̂²₍₋ᵢ₎ + x_i'V₍₋ᵢ₎x_i).
    pub rstudent: Option<f64>,
    /// DFFITS: (ŷ_i − ŷ_i₍₋ᵢ₎)/√(h_i(τ̂²₍₋ᵢ₎ + v_i)).
    pub dffits: Option<f64>,
    /// Cook's distance (β̂ − β̂₍₋ᵢ₎)'V⁻¹(β̂ − β̂₍₋ᵢ₎).
    pub cooks_distance: Option<f64>,
    /// Covariance ratio det V₍₋ᵢ₎ / det V.
    pub cov_ratio: Option<f64>,
    /// Hat value (leverage) h_i = w_i x_i'(X'WX)⁻¹x_i of the full fit.
    pub hat: f64,
    /// τ² when the study is left out.
    pub tau2_deleted: Option<f64>,
    /// Residual heterogeneity Q (common-effect weights) when the study is left out.
    pub q_deleted: Option<f64>,
    /// Whether any influence cut-off fired (DFFITS, Cook's distance, hat value).
    pub influential: bool,
    /// The cut-offs that fired: "dffits", "cooks_distance", "hat" (and
    /// "rstudent" for a residual beyond the normal critical value, which alone
    /// does not make a study influential).
    pub exceeded: Vec<Cutoff>,
    /// Why the measures that need a refit are null (null when they are given).
    pub problem: Option<String>,
}

/// The cut-offs used for [`Influence::influential`], for this k and p.
#[derive(Debug, Clone, Serialize)]
pub struct InfluenceCutoffs {
    /// |DFFITS| above 3√(p/(k − p)).
    pub dffits: f64,
    /// Cook's distance above the median of χ²(p).
    pub cooks_distance: f64,
    /// Hat value above 3p/k.
    pub hat: f64,
    /// |rstudent| above the normal critical value at the model's level.
    pub rstudent: f64,
}

/// The permutation test of the moderators (`--permutations`; Higgins & Thompson 2004).
#[derive(Debug, Clone, Serialize)]
pub struct Permutation {
    /// Arrangements evaluated (random permutations, or every distinct
    /// arrangement when `exact`), the observed one included under `exact`.
    pub permutations: usize,
    /// Seed of the random permutations (null under `exact`, which uses none).
    pub seed: Option<u64>,
    /// Whether every distinct arrangement of the moderator rows was enumerated.
    pub exact: bool,
    /// Number of distinct arrangements of the moderator rows (null when above 10¹⁸).
    pub arrangements: Option<f64>,
    /// Permutation p of the omnibus moderator test: (b + 1)/(N + 1) with b the
    /// random arrangements at least as extreme as the observed one; under
    /// `exact`, the share of all arrangements at least as extreme.
    pub moderator_p: f64,
    /// Permutation p of each coefficient's two-sided test, in model order
    /// (null for the intercept, which permuting the moderators does not test).
    pub coefficient_p: Vec<Option<f64>>,
    /// Arrangements whose refit failed (left out of the counts).
    pub failed: usize,
}

/// Small-study effects (`--small-study`).
#[derive(Debug, Clone, Serialize)]
pub struct SmallStudy {
    /// Regression test for funnel-plot asymmetry (Egger et al. 1997).
    pub asymmetry_test: AsymmetryTest,
    /// Rank-correlation test (Begg & Mazumdar 1994).
    pub rank_test: RankTest,
    /// Trim-and-fill on the model without moderators (Duval & Tweedie 2000).
    pub trim_fill: TrimFill,
    /// PET: weighted regression of the effects on their standard errors
    /// (with the moderators when given; Stanley & Doucouliagos 2014).
    pub pet: super::PrecisionRegression,
    /// PEESE: the same on their sampling variances.
    pub peese: super::PrecisionRegression,
    /// PEESE's intercept when PET's differs from 0 at two-sided α = 0.10, else PET's.
    pub conditional: super::ConditionalEstimate,
    /// How to read these results.
    pub cautions: Vec<String>,
}

/// The regression test for funnel-plot asymmetry.
#[derive(Debug, Clone, Serialize)]
pub struct AsymmetryTest {
    /// t statistic of the standard-error coefficient.
    pub statistic: f64,
    /// Its degrees of freedom, k − p − 1.
    pub df: f64,
    /// Two-sided p-value.
    pub p: f64,
    /// The standard-error coefficient (positive: smaller studies show larger effects).
    pub slope: f64,
    /// Its standard error (with the multiplicative dispersion).
    pub se: f64,
    /// Whether the moderators were in the regression.
    pub with_moderators: bool,
}

/// The rank-correlation test.
#[derive(Debug, Clone, Serialize)]
pub struct RankTest {
    /// Kendall's τ_b between the standardised deviates and the sampling variances.
    pub tau: f64,
    /// Two-sided p-value from the normal approximation (variance corrected for ties).
    pub p: f64,
}

/// Trim-and-fill.
#[derive(Debug, Clone, Serialize)]
pub struct TrimFill {
    /// Number of studies filled in (the L0 estimate).
    pub filled: usize,
    /// Side on which studies were sought as missing: "left" or "right".
    pub side: Side,
    /// Average effect of the observed and filled studies (analysis scale).
    pub estimate: f64,
    /// Its confidence interval.
    #[serde(flatten)]
    pub ci: Interval,
    /// The average effect of the observed studies alone (same model), for comparison.
    pub estimate_observed: f64,
    /// Iterations of the trimming until the number of missing studies settled.
    pub iterations: usize,
    /// The filled (mirrored) studies: effect and sampling variance.
    pub filled_studies: Vec<FilledStudy>,
    /// Estimate and CI on the reading scale (null when the same).
    pub reading: Option<RatioCoefficient>,
}

/// A study filled in by trim-and-fill.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct FilledStudy {
    /// Mirrored effect 2θ̂ − y_i (analysis scale).
    pub effect: f64,
    /// Sampling variance (that of the mirrored study).
    pub variance: f64,
}

/// How the cumulative meta-analysis was ordered.
#[derive(Debug, Clone, Serialize)]
pub struct CumulativeOrder {
    /// The ordering column.
    pub column: String,
    /// "numeric" (sorted as numbers, ascending) or "text" (sorted by Unicode
    /// code points, ascending); ties keep file order.
    pub order: SortOrder,
}

/// One step of the cumulative meta-analysis (`--cumulative-by`): the average
/// effect of the studies so far, from the model without moderators.
#[derive(Debug, Clone, Serialize)]
pub struct CumulativeStep {
    /// The study added at this step.
    pub study: String,
    /// Its ordering value.
    pub value: AtValue,
    /// Studies pooled so far.
    pub k: usize,
    /// Average effect (null when the fit has no answer).
    pub estimate: Option<f64>,
    /// Its standard error.
    pub se: Option<f64>,
    /// Its confidence interval.
    #[serde(flatten)]
    pub ci: Interval<Option<f64>>,
    /// Two-sided p of the average effect.
    pub p: Option<f64>,
    /// τ² so far (null at the first step, where it is not estimable).
    pub tau2: Option<f64>,
    /// I² so far (a fraction; null at the first step).
    pub i2: Option<f64>,
}

display_by_id!(Cutoff, Side, SortOrder);
