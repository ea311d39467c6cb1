//! The diagnostics in the report: leave-one-out refits, influence measures,
//! the permutation test, small-study effects and the cumulative meta-analysis.

use super::estimate::{AtValue, Interval, RatioCoefficient};
use serde::Serialize;

/// A rule of the influence view that a study meets.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum InfluenceFlag {
    /// Leaving it out reverses a conclusion (the rule of `--loo`).
    ChangesConclusion,
    /// It moves a coefficient by more than the size-adjusted cut-off
    /// 2/√k standard errors (Belsley, Kuh & Welsch 1980).
    MovesCoefficient,
    /// Its standardised deleted residual is beyond the Bonferroni critical
    /// value of the outlier test (Cook & Weisberg 1982).
    UnusualEffect,
    /// Its leverage is above twice the average leverage, 2p/k (Belsley,
    /// Kuh & Welsch 1980; Hoaglin & Welsch 1978).
    HighLeverage,
}

impl InfluenceFlag {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            InfluenceFlag::ChangesConclusion => "changes_conclusion",
            InfluenceFlag::MovesCoefficient => "moves_coefficient",
            InfluenceFlag::UnusualEffect => "unusual_effect",
            InfluenceFlag::HighLeverage => "high_leverage",
        }
    }

    /// Every flag, in the order the report lists them.
    pub const ALL: [InfluenceFlag; 4] = [
        InfluenceFlag::ChangesConclusion,
        InfluenceFlag::MovesCoefficient,
        InfluenceFlag::UnusualEffect,
        InfluenceFlag::HighLeverage,
    ];
}

/// The side of the funnel on which trim-and-fill sought missing studies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
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

/// What kind of conclusion a removal reverses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum ConclusionKind {
    /// The omnibus moderator test (p < α or not).
    ModeratorTest,
    /// A moderator coefficient (its interval excludes 0 or not).
    Coefficient,
    /// The average effect of a model without moderators (its interval excludes 0 or not).
    Average,
}

impl ConclusionKind {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            ConclusionKind::ModeratorTest => "moderator_test",
            ConclusionKind::Coefficient => "coefficient",
            ConclusionKind::Average => "average",
        }
    }
}

/// One conclusion that leaving a study out reverses.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ConclusionChange {
    /// "moderator_test", "coefficient" or "average".
    pub kind: ConclusionKind,
    /// The coefficient's term (null for the moderator test and the average).
    pub term: Option<String>,
    /// With every study: the test's p below α, or the interval excluding 0.
    pub significant_with: bool,
    /// The same without the study.
    pub significant_without: bool,
}

/// One leave-one-out refit (`--loo`): the model fitted without one study,
/// with the same estimator, inference and level.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct LeaveOneOut {
    /// The study left out.
    pub study: String,
    /// Its line in the file.
    pub line: u64,
    /// Coefficient estimates without it, in model order (`model.terms`); empty when the refit failed.
    pub coefficients: Vec<f64>,
    /// The average effect without it (same estimator, no moderators, the
    /// rows of the moderator model less this one), analysis scale (null when
    /// the refit failed).
    pub average: Option<f64>,
    /// The same on the reading scale (r from Fisher z, a ratio from a log
    /// ratio); null when the measure is read as analysed.
    pub average_reading: Option<f64>,
    /// τ² without it (null when the refit failed).
    pub tau2: Option<f64>,
    /// I² (a fraction) without it (null when the refit failed).
    pub i2: Option<f64>,
    /// p of the omnibus moderator test without it, from the same inference
    /// (null without moderators or when the refit failed).
    pub moderator_p: Option<f64>,
    /// p of the average effect's test without it (models without moderators; else null).
    pub average_p: Option<f64>,
    /// The conclusions that leaving it out reverses: the moderator test
    /// crossing α, a moderator coefficient whose interval excluded 0 no
    /// longer doing so or the reverse (without moderators: the average's
    /// interval). Empty when no conclusion changes.
    pub changes: Vec<ConclusionChange>,
    /// Why the refit has no answer (null when it has one).
    pub problem: Option<String>,
}

/// How much one study moves the answer, how unusual it is and how much
/// pull it has (`--influence`).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Influence {
    /// The study.
    pub study: String,
    /// Its line in the file.
    pub line: u64,
    /// The average effect without it (same estimator, no moderators, the
    /// rows of the moderator model less this one), analysis scale.
    pub average_without: Option<f64>,
    /// How far leaving it out moves the average: μ̂₍₋ᵢ₎ − μ̂, analysis scale.
    pub average_shift: Option<f64>,
    /// The same on the reading scale, g(μ̂₍₋ᵢ₎) − g(μ̂) with g = tanh (r) or
    /// exp (a ratio); null when the measure is read as analysed.
    pub average_shift_reading: Option<f64>,
    /// How far leaving it out moves each coefficient, β̂ⱼ₍₋ᵢ₎ − β̂ⱼ, in model
    /// order (empty when the refit failed).
    pub coefficient_shifts: Vec<f64>,
    /// The same in standard errors of the full fit as reported,
    /// (β̂ⱼ₍₋ᵢ₎ − β̂ⱼ)/SE(β̂ⱼ).
    pub coefficient_shifts_se: Vec<f64>,
    /// p of the moderator test without it (null without moderators or when
    /// the refit failed); `influence_rules.moderator_p` has it with every study.
    pub moderator_p_without: Option<f64>,
    /// The conclusions leaving it out reverses (as in `leave_one_out`).
    pub changes: Vec<ConclusionChange>,
    /// Standardised deleted residual: its effect against the model fitted
    /// without it, (y_i − x_i'β̂₍₋ᵢ₎)/√(v_i + τ̂²₍₋ᵢ₎ + x_i'V₍₋ᵢ₎x_i).
    pub deleted_residual: Option<f64>,
    /// Leverage (its pull on its own fitted value): h_i = w_i x_i'(X'WX)⁻¹x_i of the full fit.
    pub leverage: f64,
    /// The rules it meets: "changes_conclusion", "moves_coefficient",
    /// "unusual_effect", "high_leverage" (`influence_rules` has the cut-offs).
    pub flags: Vec<InfluenceFlag>,
    /// Why the quantities that need a refit are null (null when they are given).
    pub problem: Option<String>,
}

impl Influence {
    /// The coefficient that leaving the study out moves most in standard
    /// errors: its index in model order and the signed shift. With
    /// `moderators` the intercept is passed over (the moderator coefficients
    /// are the answer); None when the refit failed.
    pub fn largest_shift(&self, moderators: bool) -> Option<(usize, f64)> {
        self.coefficient_shifts_se
            .iter()
            .copied()
            .enumerate()
            .skip(usize::from(moderators))
            .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
    }
}

/// The cut-offs of the influence flags for this k and p, and the answer
/// with every study that the shifts are measured from.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct InfluenceRules {
    /// `moves_coefficient`: |shift| above 2/√k standard errors, the
    /// size-adjusted cut-off of Belsley, Kuh & Welsch (1980, Regression
    /// Diagnostics, §2.1, from memory). Without moderators it applies to the
    /// average, with them to the moderator coefficients.
    pub coefficient_shift_se: f64,
    /// `unusual_effect`: |deleted residual| above z at 1 − α/(2k), the
    /// Bonferroni-adjusted outlier test (Cook & Weisberg 1982, Residuals and
    /// Influence in Regression, §2.2, from memory).
    pub deleted_residual: f64,
    /// `high_leverage`: leverage above 2p/k, twice the average leverage
    /// (Hoaglin & Welsch 1978; Belsley, Kuh & Welsch 1980).
    pub leverage: f64,
    /// The average effect with every study (analysis scale), from the same
    /// fit as the shifts.
    pub average: f64,
    /// Its value on the reading scale (null when read as analysed).
    pub average_reading: Option<f64>,
    /// The moderator test's p with every study (null without moderators).
    pub moderator_p: Option<f64>,
}

/// The permutation test of the moderators (`--permutations`; Higgins & Thompson 2004).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct RankTest {
    /// Kendall's τ_b between the standardised deviates and the sampling variances.
    pub tau: f64,
    /// Two-sided p-value from the normal approximation (variance corrected for ties).
    pub p: f64,
}

/// Trim-and-fill.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct FilledStudy {
    /// Mirrored effect 2θ̂ − y_i (analysis scale).
    pub effect: f64,
    /// Sampling variance (that of the mirrored study).
    pub variance: f64,
}

/// How the cumulative meta-analysis was ordered.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct CumulativeOrder {
    /// The ordering column.
    pub column: String,
    /// "numeric" (sorted as numbers, ascending) or "text" (sorted by Unicode
    /// code points, ascending); ties keep file order.
    pub order: SortOrder,
}

/// One step of the cumulative meta-analysis (`--cumulative-by`): the average
/// effect of the studies so far, from the model without moderators.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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

display_by_id!(InfluenceFlag, Side, SortOrder, ConclusionKind);
