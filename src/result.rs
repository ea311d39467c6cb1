//! The public result of `pondus fit`: plain structs that every renderer and
//! plot reads. Their JSON form (field docs below) is the stable schema.

use crate::effect::ReadingScale;
use crate::model::design::Moderator;
use serde::Serialize;
use std::collections::BTreeMap;

/// Everything `pondus fit` reports.
#[derive(Debug, Clone, Serialize)]
pub struct FitReport {
    /// Tool name and version.
    pub tool: ToolInfo,
    /// Where the data came from.
    pub input: InputInfo,
    /// The effect measure.
    pub measure: MeasureInfo,
    /// Number of studies used in the model.
    pub k: usize,
    /// Rows left out, with the reason, in file order.
    pub excluded: Vec<Excluded>,
    /// The model that was fitted.
    pub model: ModelInfo,
    /// Residual between-study variance.
    pub tau2: Tau2Report,
    /// Coefficients, intercept first, then the terms in the order given.
    pub coefficients: Vec<Coefficient>,
    /// Omnibus test of every moderator term (null without moderators).
    pub moderator_test: Option<ModeratorTest>,
    /// Residual heterogeneity.
    pub heterogeneity: Heterogeneity,
    /// The average effect from the same estimator with no moderators.
    pub average: Estimate,
    /// Predicted effects at the `--at` values.
    pub predictions: Vec<Prediction>,
    /// One entry per included study, in input order.
    pub studies: Vec<Study>,
    /// Per-level summaries of each categorical moderator, in moderator order.
    pub subgroups: Vec<Subgroups>,
    /// The fitted line with its bands along each numeric moderator, in moderator order.
    pub curves: Vec<Curve>,
    /// Things that may make a result unreliable.
    pub warnings: Vec<String>,
    /// How to read the results responsibly.
    pub cautions: Vec<String>,
    /// Adjustments and facts worth knowing (corrections applied, skipped blank rows, ...).
    pub notes: Vec<String>,
}

/// Tool name and version.
#[derive(Debug, Clone, Serialize)]
pub struct ToolInfo {
    /// Always "pondus".
    pub name: String,
    /// The crate version.
    pub version: String,
}

/// Where the data came from.
#[derive(Debug, Clone, Serialize)]
pub struct InputInfo {
    /// File name as given (`<stdin>` for standard input).
    pub file: String,
    /// Detected delimiter: "comma", "semicolon" or "tab".
    pub delimiter: String,
    /// Data rows read (blank rows not counted).
    pub rows: usize,
    /// Header of the column used for study labels (null: labels made from line numbers).
    pub label_column: Option<String>,
}

/// The effect measure.
#[derive(Debug, Clone, Serialize)]
pub struct MeasureInfo {
    /// Command-line name, e.g. "r" or "log-or".
    pub id: String,
    /// What the analysed numbers are.
    pub description: String,
    /// How results are shown back: "same", "correlation" (tanh) or "ratio" (exp).
    pub reading_scale: ReadingScale,
    /// Name of the back-transformed quantity (null when the same).
    pub reading_name: Option<String>,
    /// The value of "no effect" on the analysis scale (always 0).
    pub null_value: f64,
}

/// A row left out of the model.
#[derive(Debug, Clone, Serialize)]
pub struct Excluded {
    /// Study label.
    pub study: String,
    /// Line in the file.
    pub line: u64,
    /// Why it was left out.
    pub reason: String,
}

/// The model that was fitted.
#[derive(Debug, Clone, Serialize)]
pub struct ModelInfo {
    /// τ² estimator id ("reml", "ml", "dl", "pm", "he", "sj", "none").
    pub tau2_method: String,
    /// The estimator in words.
    pub tau2_description: String,
    /// "kh" or "z".
    pub inference: String,
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
    /// Knapp–Hartung scale factor s² (null under z).
    pub kh_scale: Option<f64>,
    /// Log-likelihood at the estimate for "ml", restricted log-likelihood for "reml" (else null).
    pub log_likelihood: Option<f64>,
}

/// Residual between-study variance.
#[derive(Debug, Clone, Serialize)]
pub struct Tau2Report {
    /// Estimator id.
    pub method: String,
    /// Estimate (≥ 0).
    pub estimate: f64,
    /// √τ², on the analysis scale.
    pub tau: f64,
    /// Q-profile lower limit (null for "none").
    pub ci_low: Option<f64>,
    /// Q-profile upper limit (null for "none").
    pub ci_high: Option<f64>,
    /// How the estimate was reached: "closed-form", "truncated-at-zero", "converged", "boundary", "fixed".
    pub ending: crate::model::tau2::Ending,
    /// Objective evaluations used by an iterative estimator.
    pub evaluations: u64,
}

/// One coefficient.
#[derive(Debug, Clone, Serialize)]
pub struct Coefficient {
    /// Term label.
    pub term: String,
    /// Estimate.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// Lower confidence limit.
    pub ci_low: f64,
    /// Upper confidence limit.
    pub ci_high: f64,
    /// t (kh) or z statistic.
    pub statistic: f64,
    /// Degrees of freedom of t (null under z).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
    /// For log-ratio measures, exp(estimate) and exp(CI): the ratio itself for
    /// the intercept, the factor by which the ratio changes for a moderator
    /// term (null for other measures).
    pub ratio: Option<RatioCoefficient>,
}

/// A log-ratio coefficient shown as a ratio.
#[derive(Debug, Clone, Serialize)]
pub struct RatioCoefficient {
    /// exp(estimate).
    pub estimate: f64,
    /// exp(ci_low).
    pub ci_low: f64,
    /// exp(ci_high).
    pub ci_high: f64,
}

/// The omnibus moderator test.
#[derive(Debug, Clone, Serialize)]
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
    pub distribution: String,
    /// Whether p < 1 − level.
    pub significant: bool,
    /// The plain answer in words.
    pub answer: String,
}

/// Residual heterogeneity.
#[derive(Debug, Clone, Serialize)]
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

/// An estimate with confidence and prediction intervals.
#[derive(Debug, Clone, Serialize)]
pub struct Estimate {
    /// Estimate on the analysis scale.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// Confidence interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval for a new study's true effect.
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
    /// The same on the reading scale (null when the same as analysed).
    pub reading: Option<Reading>,
}

/// Values on the reading scale (r or a ratio).
#[derive(Debug, Clone, Serialize)]
pub struct Reading {
    /// Estimate.
    pub estimate: f64,
    /// Confidence interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval.
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
}

/// A moderator value in a prediction: a number or a level.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(untagged)]
pub enum AtValue {
    /// A numeric moderator's value (original scale).
    Number(f64),
    /// A categorical moderator's level.
    Level(String),
}

/// A predicted effect at given moderator values.
#[derive(Debug, Clone, Serialize)]
pub struct Prediction {
    /// Moderator values.
    pub at: BTreeMap<String, AtValue>,
    /// Estimate on the analysis scale.
    pub estimate: f64,
    /// Standard error of the mean effect there.
    pub se: f64,
    /// Confidence interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval.
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
    /// The same on the reading scale.
    pub reading: Option<Reading>,
    /// Moderator values outside the range of the studies (extrapolation).
    pub outside_range: Vec<String>,
}

/// One included study.
#[derive(Debug, Clone, Serialize)]
pub struct Study {
    /// Label.
    pub study: String,
    /// Line in the file.
    pub line: u64,
    /// Effect on the analysis scale.
    pub effect: f64,
    /// Sampling variance.
    pub variance: f64,
    /// Lower end of the study's own confidence interval, effect − z·√variance
    /// (normal quantile at the model's level).
    pub ci_low: f64,
    /// Upper end of the study's own confidence interval.
    pub ci_high: f64,
    /// Share of the total weight, in percent.
    pub weight: f64,
    /// Fitted value x_i'β̂.
    pub fitted: f64,
    /// Residual effect − fitted.
    pub residual: f64,
    /// Standardised residual (null when undefined).
    pub std_residual: Option<f64>,
    /// The study's moderator values, in the order of `model.moderators`.
    pub moderators: Vec<AtValue>,
    /// An adjustment made to this study's data.
    pub note: Option<String>,
}

/// Per-level summaries of one categorical moderator (for grouped forest
/// plots and per-level bubble plots).
#[derive(Debug, Clone, Serialize)]
pub struct Subgroups {
    /// The moderator's name.
    pub moderator: String,
    /// Where the other moderators are held for `predicted`, in words (empty when there are none).
    pub held: String,
    /// One entry per level, in the order of the moderator's `levels`.
    pub levels: Vec<LevelSummary>,
}

/// One level of a categorical moderator.
#[derive(Debug, Clone, Serialize)]
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
#[derive(Debug, Clone, Serialize)]
pub struct Curve {
    /// The moderator's name.
    pub moderator: String,
    /// Where the other moderators are held, in words (empty when there are none).
    pub held: String,
    /// Predictions at evenly spaced values from the studies' minimum to maximum.
    pub points: Vec<CurvePoint>,
}

/// One point of a [`Curve`], on the analysis scale.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct CurvePoint {
    /// The moderator's value.
    pub x: f64,
    /// Predicted mean effect.
    pub estimate: f64,
    /// Confidence interval of the mean effect.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval for a new study's true effect.
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
}

/// The result of `pondus sites`: per-site effects from participant rows (or
/// from a per-site moments table), the join with the site table, and, with
/// `--fit`, the two second-stage answers.
#[derive(Debug, Clone, Serialize)]
pub struct SitesReport {
    /// Program name and version.
    pub tool: ToolInfo,
    /// What was read.
    pub input: SitesInput,
    /// The per-site regressions.
    pub model: SitesModel,
    /// One entry per site with an estimate, in site-id order (numeric when every id is a number).
    pub sites: Vec<SiteEffect>,
    /// Sites left out, with the reason.
    pub excluded: Vec<ExcludedSite>,
    /// The site-table join (null without `--info`).
    pub join: Option<SiteJoin>,
    /// Remarks about the data and the method.
    pub notes: Vec<String>,
    /// The second stage (null without `--fit`).
    pub stages: Option<TwoStage>,
}

/// What `pondus sites` read.
#[derive(Debug, Clone, Serialize)]
pub struct SitesInput {
    /// File name as given (`<stdin>` for standard input).
    pub file: String,
    /// "rows" (participant rows) or "moments" (a per-site moments table).
    pub kind: String,
    /// Detected delimiter: "comma", "semicolon" or "tab".
    pub delimiter: String,
    /// Data rows read (participants, or sites for a moments table).
    pub rows: u64,
    /// Rows left out because a needed numeric cell was empty or a missing mark.
    pub missing_rows: u64,
    /// Lines of the first of those rows.
    pub missing_lines: Vec<u64>,
    /// Passes over the file: 1, or 2 with HC3 standard errors.
    pub passes: u32,
}

/// The per-site models.
#[derive(Debug, Clone, Serialize)]
pub struct SitesModel {
    /// Column of the site ids.
    pub site: String,
    /// Predictor column (its slope is `slope`).
    pub x: String,
    /// Outcome column.
    pub y: String,
    /// Participant-level moderator column (null without `--w`).
    pub w: Option<String>,
    /// Covariate columns.
    pub covariates: Vec<String>,
    /// "classical" or "hc3".
    pub se_type: String,
    /// Whether x and w were centred at their site means in the product-term model.
    pub center_within: bool,
}

/// One site's estimates: the row of the effects file.
#[derive(Debug, Clone, Serialize)]
pub struct SiteEffect {
    /// Site id.
    pub study: String,
    /// Rows (participants) used.
    pub n: u64,
    /// OLS slope of y on x (adjusted for the covariates).
    pub slope: f64,
    /// Its standard error (classical or HC3, see `model.se_type`).
    pub se: f64,
    /// Pearson correlation of x and y (unadjusted).
    pub r: f64,
    /// Product-term coefficient b₃ of y = b₀ + b₁x + b₂w + b₃xw (+ covariates); null without `--w` or when that model cannot be fitted.
    pub interaction: Option<f64>,
    /// Its standard error.
    pub interaction_se: Option<f64>,
    /// Site mean of x.
    pub mean_x: f64,
    /// Site mean of w (null without `--w`).
    pub mean_w: Option<f64>,
    /// Why the product term is missing, when it is.
    pub note: Option<String>,
    /// Joined site characteristics, in `join.columns` order (empty text when the site has no row there).
    pub characteristics: Vec<String>,
}

/// A site without an estimate.
#[derive(Debug, Clone, Serialize)]
pub struct ExcludedSite {
    /// Site id.
    pub study: String,
    /// Rows the site had.
    pub n: u64,
    /// Why it was left out.
    pub reason: String,
}

/// The join with the site-characteristics table.
#[derive(Debug, Clone, Serialize)]
pub struct SiteJoin {
    /// The site table.
    pub file: String,
    /// Its id column.
    pub key: String,
    /// The characteristic columns appended to the effects.
    pub columns: Vec<String>,
    /// Sites with estimates but no row in the site table (kept, characteristics empty).
    pub without_info: Vec<String>,
    /// Site-table ids with no participant rows (or no estimate).
    pub info_only: Vec<String>,
}

/// Both second-stage answers of `pondus sites --fit`.
#[derive(Debug, Clone, Serialize)]
pub struct TwoStage {
    /// Random-effects pooling of the per-site product terms (within-site moderation; null without `--w`).
    pub within: Option<FitReport>,
    /// Meta-regression of the site slopes on the site mean of w (across-site moderation; null without `--w`).
    pub across: Option<FitReport>,
    /// Meta-regression of the site slopes on the `--moderator` site characteristics (null when none are given; the pooled slope when neither they nor `--w` are).
    pub characteristics: Option<FitReport>,
    /// Plain-language lines on what each answer is about.
    pub answers: Vec<String>,
    /// Cautions for reading the two stages together.
    pub cautions: Vec<String>,
}
