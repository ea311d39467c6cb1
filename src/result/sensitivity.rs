//! Publication bias as a sensitivity analysis: the step-function selection
//! model (`--selection`), PET and PEESE (in `--small-study`), and the view
//! that sets the average effect and each moderator coefficient side by side
//! unadjusted and under each adjustment.

use super::estimate::{ContrastTest, Interval};
use super::model::Coefficient;
use serde::Serialize;

/// The direction of effect that the selection favours (`--favoured`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum Favoured {
    /// Positive effects are the "significant" ones: p_i = 1 − Φ(y_i/√v_i).
    #[default]
    Positive,
    /// Negative effects are: p_i = Φ(y_i/√v_i).
    Negative,
}

impl Favoured {
    /// The word used in the JSON and on the command line.
    pub fn id(self) -> &'static str {
        match self {
            Favoured::Positive => "positive",
            Favoured::Negative => "negative",
        }
    }
}

/// The step-function selection model (`--selection`; Vevea & Hedges 1995).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SelectionModel {
    /// The one-sided p-value cut points, ascending.
    pub cutpoints: Vec<f64>,
    /// The favoured direction of the one-sided p-values.
    pub favoured: Favoured,
    /// One entry per p-value interval, in order; the first is the reference
    /// (weight 1, no standard error).
    pub weights: Vec<SelectionWeight>,
    /// τ² of the selection model (maximum likelihood).
    pub tau2: f64,
    /// Its standard error from the observed information (null when τ² is 0).
    pub tau2_se: Option<f64>,
    /// Coefficients of the selection model, intercept first, in model order;
    /// z tests and intervals from the observed information.
    pub coefficients: Vec<Coefficient>,
    /// Likelihood-ratio test against the same model with every weight 1.
    pub test: LikelihoodRatio,
    /// Maximised log-likelihood of the selection model.
    pub log_likelihood: f64,
    /// Maximised log-likelihood of the same model without selection (all weights 1).
    pub log_likelihood_unselected: f64,
    /// Newton iterations of the fit.
    pub iterations: usize,
    /// Whether `--selection-force` let intervals with fewer than 3 studies through.
    pub forced: bool,
}

/// The weight of one p-value interval.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SelectionWeight {
    /// Lower end of the one-sided p interval (inclusive).
    pub from: f64,
    /// Upper end (exclusive; 1 for the last interval).
    pub to: f64,
    /// Studies whose one-sided p falls in the interval.
    pub studies: usize,
    /// Estimated weight: the probability of publication relative to the first interval.
    pub estimate: f64,
    /// Standard error ω̂·se(ln ω̂) (null for the first interval).
    pub se: Option<f64>,
    /// Lower confidence limit exp(ln ω̂ − z·se(ln ω̂)) (null for the first interval).
    pub ci_low: Option<f64>,
    /// Upper confidence limit (null for the first interval).
    pub ci_high: Option<f64>,
}

/// A likelihood-ratio test.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct LikelihoodRatio {
    /// 2(ℓ₁ − ℓ₀).
    pub statistic: f64,
    /// Degrees of freedom (the number of cut points).
    pub df: f64,
    /// Upper-tail chi-square p-value.
    pub p: f64,
}

/// One meta-regression of PET or PEESE: the intercept (the effect of a
/// study with no sampling error) and the slope on the standard error (PET)
/// or the variance (PEESE), each with a t test on k − p − 1 df.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct PrecisionRegression {
    /// The intercept (with moderators: at every moderator 0, the model's reference).
    pub intercept: ContrastTest,
    /// The coefficient of the standard error (PET) or the variance (PEESE).
    pub slope: ContrastTest,
    /// The moderator coefficients, in model order after the intercept (empty without moderators).
    pub moderators: Vec<ContrastTest>,
    /// The multiplicative dispersion φ = Q/(k − p − 1).
    pub dispersion: f64,
}

/// Which of PET and PEESE the conditional estimate takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum PetPeeseChoice {
    /// PET's intercept (its test did not reject 0 at two-sided α = 0.10).
    Pet,
    /// PEESE's intercept (PET's intercept differs from 0 at two-sided α = 0.10).
    Peese,
}

impl PetPeeseChoice {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            PetPeeseChoice::Pet => "pet",
            PetPeeseChoice::Peese => "peese",
        }
    }
}

/// The conditional PET-PEESE estimate (Stanley & Doucouliagos 2014).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ConditionalEstimate {
    /// Which intercept was used.
    pub used: PetPeeseChoice,
    /// That intercept with its test.
    #[serde(flatten)]
    pub estimate: ContrastTest,
}

/// An adjustment (a row of the sensitivity view).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Adjustment {
    /// The model as fitted.
    Unadjusted,
    /// Trim-and-fill (average effect only).
    TrimAndFill,
    /// PET's intercept.
    Pet,
    /// PEESE's intercept.
    Peese,
    /// The selection model.
    Selection,
}

impl Adjustment {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            Adjustment::Unadjusted => "unadjusted",
            Adjustment::TrimAndFill => "trim-and-fill",
            Adjustment::Pet => "pet",
            Adjustment::Peese => "peese",
            Adjustment::Selection => "selection",
        }
    }

    /// How the row is labelled in the table and the plot.
    pub fn label(self) -> &'static str {
        match self {
            Adjustment::Unadjusted => "as fitted",
            Adjustment::TrimAndFill => "trim-and-fill",
            Adjustment::Pet => "PET",
            Adjustment::Peese => "PEESE",
            Adjustment::Selection => "selection model",
        }
    }
}

/// What an adjustment does to the unadjusted conclusion about a quantity
/// (significance at the model's level, and sign).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Different from 0 before and after, with the same sign.
    Holds,
    /// Different from 0 before; after, the interval includes 0.
    Fades,
    /// Different from 0 before and after, with the opposite sign.
    Reverses,
    /// Not different from 0 before; different after.
    Appears,
    /// Not different from 0 before or after.
    NoneEither,
}

impl Verdict {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            Verdict::Holds => "holds",
            Verdict::Fades => "fades",
            Verdict::Reverses => "reverses",
            Verdict::Appears => "appears",
            Verdict::NoneEither => "none-either",
        }
    }
}

/// One row of the sensitivity view.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SensitivityRow {
    /// The adjustment.
    pub adjustment: Adjustment,
    /// Estimate on the analysis scale (null when this adjustment does not give one).
    pub estimate: Option<f64>,
    /// Its confidence interval at the model's level.
    #[serde(flatten)]
    pub ci: Interval<Option<f64>>,
    /// Two-sided p of its test against 0 (null when not given).
    pub p: Option<f64>,
    /// Estimate and interval on the reading scale (null when it is the analysis scale).
    pub reading: Option<ReadingRow>,
    /// What the adjustment does to the unadjusted conclusion (null for the unadjusted row and missing rows).
    pub verdict: Option<Verdict>,
    /// Why the row has no estimate (null when it has one).
    pub missing: Option<String>,
}

/// A row's estimate and interval on the reading scale.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct ReadingRow {
    /// Estimate.
    pub estimate: f64,
    /// Interval.
    #[serde(flatten)]
    pub ci: Interval,
}

/// One quantity of the sensitivity view: the average effect or a moderator coefficient.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SensitivityQuantity {
    /// "average effect" or the coefficient's term label.
    pub quantity: String,
    /// Whether this is a moderator coefficient (else the average effect).
    pub moderator: bool,
    /// The rows: unadjusted first, then each adjustment computed.
    pub rows: Vec<SensitivityRow>,
}

/// The sensitivity view (with `--small-study` or `--selection`).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Sensitivity {
    /// The average effect first, then each moderator coefficient in model order.
    pub quantities: Vec<SensitivityQuantity>,
    /// Plain sentences: whether the conclusion about the average effect and
    /// each moderator survives each adjustment.
    pub answer: Vec<String>,
    /// How to read the view.
    pub cautions: Vec<String>,
}

display_by_id!(Favoured, PetPeeseChoice, Adjustment, Verdict);
