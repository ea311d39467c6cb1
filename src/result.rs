//! The public result of `pondus fit`: plain structs that every renderer and
//! plot reads. Their JSON form (field docs below) is the stable schema.

pub mod plan;

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
    /// Conditional effects, simple slopes, level contrasts and regions of
    /// significance (empty lists without --probe / --compare-levels / --regions).
    #[serde(flatten)]
    pub interpretation: Interpretation,
    /// Artifact corrections of the correlations (null without --reliability-x,
    /// --reliability-y or --range-ratio).
    pub artifacts: Option<ArtifactReport>,
    /// Leave-one-out refits, one per included study in input order (`--loo`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub leave_one_out: Option<Vec<LeaveOneOut>>,
    /// Influence measures, one per included study in input order (`--influence`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub influence: Option<Vec<Influence>>,
    /// Permutation test of the moderators (`--permutations`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub permutation: Option<Permutation>,
    /// Small-study effects: regression and rank tests, trim-and-fill (`--small-study`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub small_study: Option<SmallStudy>,
    /// Cumulative meta-analysis, one step per study in the ordering column's order (`--cumulative-by`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cumulative: Option<Vec<CumulativeStep>>,
    /// The cut-offs behind `influence[].influential` for this k and p (with `--influence`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub influence_cutoffs: Option<InfluenceCutoffs>,
    /// How `cumulative` was ordered (with `--cumulative-by`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cumulative_order: Option<CumulativeOrder>,
    /// Variance components of the three-level model (`--cluster`; omitted otherwise).
    /// `tau2` then holds their sum σ²_between + σ²_within.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub variance_components: Option<Vec<VarianceComponent>>,
    /// Clusters, per-level heterogeneity, likelihood-ratio tests and moderator
    /// levels (`--cluster`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub clustering: Option<ClusterReport>,
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
    /// SHA-256 of the input bytes exactly as read, lowercase hex (FIPS 180-4),
    /// so a reader can check that a result belongs to a file.
    pub sha256: String,
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
    /// Cluster-robust (CR2) standard error (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_se: Option<f64>,
    /// Satterthwaite degrees of freedom of the robust t test (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_df: Option<f64>,
    /// Two-sided p-value of the robust t test (`--robust`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub robust_p: Option<f64>,
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
    /// The test used when it is not the model-based one: "CR2 approximate Hotelling T² (HTZ)"
    /// under `--robust` (omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub method: Option<String>,
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

/// What `--probe`, `--compare-levels` and `--regions` report: the model read
/// at chosen moderator values (see docs/interpretation.md).
#[derive(Debug, Clone, Default, Serialize)]
pub struct Interpretation {
    /// Predicted mean effect at each probed value of each probed moderator.
    pub conditional_effects: Vec<ConditionalEffect>,
    /// In a model with a product term: the conditional effect (slope of a
    /// numeric moderator, or difference of a level from the reference) of the
    /// probed moderator's partner at each probed value (simple slopes).
    pub simple_slopes: Vec<SimpleSlope>,
    /// Pairwise differences between the levels of each compared categorical moderator.
    pub level_contrasts: Vec<LevelContrast>,
    /// Johnson–Neyman regions of significance.
    pub regions_of_significance: Vec<RegionOfSignificance>,
    /// The pooled effect and τ² without moderators beside the conditional
    /// effects and residual τ² with them (null when nothing was probed).
    pub picture: Option<PictureChange>,
}

/// The predicted mean effect at one value of one moderator.
#[derive(Debug, Clone, Serialize)]
pub struct ConditionalEffect {
    /// The probed moderator.
    pub moderator: String,
    /// Its value: a number or a level.
    pub at: AtValue,
    /// Where the value comes from: "given", "mean − 1 SD", "mean", "mean + 1 SD" or "level".
    pub point: String,
    /// Where the other moderators are held, in words (empty when there are none).
    pub held: String,
    /// Predicted mean effect x0'β̂ (analysis scale).
    pub estimate: f64,
    /// Its standard error √(x0' Cov x0).
    pub se: f64,
    /// Confidence interval of the mean effect.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval for a new study's true effect, with the model's residual τ².
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
    /// t (kh) or z statistic of the test that the mean effect there is 0.
    pub statistic: f64,
    /// Degrees of freedom of t (null under z).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
    /// The same on the reading scale (null when the same as analysed).
    pub reading: Option<Reading>,
    /// Whether the value lies outside the studies' range (extrapolation).
    pub outside_range: bool,
}

/// A linear contrast c'β̂ with its test (no prediction interval).
#[derive(Debug, Clone, Serialize)]
pub struct ContrastTest {
    /// Estimate c'β̂ (analysis scale).
    pub estimate: f64,
    /// Standard error √(c' Cov c).
    pub se: f64,
    /// Confidence interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// t (kh) or z statistic.
    pub statistic: f64,
    /// Degrees of freedom of t (null under z).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
}

/// The conditional effect of one moderator at a value of another it interacts with.
#[derive(Debug, Clone, Serialize)]
pub struct SimpleSlope {
    /// What changes: a numeric moderator's name (the slope per unit), or
    /// "NAME: LEVEL − REFERENCE" for a level of a categorical moderator.
    pub of: String,
    /// The probed moderator it is conditional on.
    pub moderator: String,
    /// The probed moderator's value.
    pub at: AtValue,
    /// Where the value comes from (as in [`ConditionalEffect::point`]).
    pub point: String,
    /// Where the remaining moderators are held, in words.
    pub held: String,
    /// The slope or difference with its test.
    pub test: ContrastTest,
}

/// The difference between two levels of a categorical moderator.
#[derive(Debug, Clone, Serialize)]
pub struct LevelContrast {
    /// The moderator.
    pub moderator: String,
    /// The level subtracted from.
    pub level: String,
    /// The level subtracted.
    pub minus: String,
    /// Where the other moderators are held, in words.
    pub held: String,
    /// The difference with its test.
    pub test: ContrastTest,
    /// Holm's step-down adjusted p over all pairs of this moderator.
    pub p_holm: f64,
}

/// A Johnson–Neyman region of significance along one numeric moderator.
#[derive(Debug, Clone, Serialize)]
pub struct RegionOfSignificance {
    /// The numeric moderator along which the quantity changes.
    pub moderator: String,
    /// What is tested: "effect" (the conditional mean effect), or the simple
    /// slope / level difference, as in [`SimpleSlope::of`].
    pub quantity: String,
    /// Where the other moderators are held, in words.
    pub held: String,
    /// The Johnson–Neyman values over the whole real line, where the
    /// confidence interval of the quantity just touches 0 (zero, one or two,
    /// ascending). A straight line crosses 0 somewhere, so over the whole line
    /// "everywhere" arises only when the quantity does not change with the
    /// moderator at all; the observed range is what `observed_region` describes.
    pub bounds: Vec<f64>,
    /// Where the interval excludes 0: "outside" or "inside" the bounds,
    /// "everywhere", "nowhere"; "above" or "below" the single bound when the
    /// quantity's slope along the moderator is exactly on the edge of significance.
    pub significant: String,
    /// Smallest value of the moderator among the studies.
    pub observed_min: f64,
    /// Largest value.
    pub observed_max: f64,
    /// The Johnson–Neyman values that lie within [observed_min, observed_max].
    pub observed_bounds: Vec<f64>,
    /// Within the observed range: "everywhere", "nowhere", "outside" or
    /// "inside" the observed bounds, or "above"/"below" a single one.
    pub observed_region: String,
    /// The parts of [observed_min, observed_max] where the interval excludes 0.
    pub observed_significant: Vec<[f64; 2]>,
    /// The region in words, over all values and within the observed range.
    pub words: String,
}

/// How the picture changes once the moderators are in the model.
#[derive(Debug, Clone, Serialize)]
pub struct PictureChange {
    /// Pooled effect without moderators.
    pub pooled: Estimate,
    /// τ² without moderators.
    pub tau2_without: f64,
    /// Residual τ² with the moderators.
    pub tau2_with: f64,
    /// Share of τ² the moderators account for (as in `heterogeneity.r2`).
    pub r2: Option<f64>,
    /// Smallest conditional effect estimate.
    pub conditional_min: f64,
    /// Largest conditional effect estimate.
    pub conditional_max: f64,
    /// Whether the conditional estimates take both signs.
    pub sign_changes: bool,
    /// The comparison in words.
    pub words: String,
}

/// Hunter–Schmidt artifact corrections applied to the correlations.
#[derive(Debug, Clone, Serialize)]
pub struct ArtifactReport {
    /// Which corrections were applied, in the order applied.
    pub corrections: Vec<String>,
    /// The formulas in words (and their source).
    pub method: String,
    /// Per included study, in the order of `studies`.
    pub studies: Vec<ArtifactStudy>,
    /// Mean observed r and mean corrected r (unweighted) over the included studies.
    pub mean_observed_r: f64,
    /// Unweighted mean corrected r.
    pub mean_corrected_r: f64,
}

/// One study's artifact correction.
#[derive(Debug, Clone, Serialize)]
pub struct ArtifactStudy {
    /// Label.
    pub study: String,
    /// Observed correlation.
    pub observed_r: f64,
    /// Corrected correlation (the analysed effect).
    pub corrected_r: f64,
    /// Sampling variance of the observed r, (1 − r²)²/(n − 1).
    pub observed_variance: f64,
    /// Sampling variance of the corrected r (the analysed variance).
    pub corrected_variance: f64,
    /// The factor dr_c/dr by which the standard error is multiplied.
    pub se_factor: f64,
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
    pub exceeded: Vec<String>,
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
    pub side: String,
    /// Average effect of the observed and filled studies (analysis scale).
    pub estimate: f64,
    /// Its lower confidence limit.
    pub ci_low: f64,
    /// Its upper confidence limit.
    pub ci_high: f64,
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
    pub order: String,
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
    /// Lower confidence limit.
    pub ci_low: Option<f64>,
    /// Upper confidence limit.
    pub ci_high: Option<f64>,
    /// Two-sided p of the average effect.
    pub p: Option<f64>,
    /// τ² so far (null at the first step, where it is not estimable).
    pub tau2: Option<f64>,
    /// I² so far (a fraction; null at the first step).
    pub i2: Option<f64>,
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

/// One variance component of the three-level model.
#[derive(Debug, Clone, Serialize)]
pub struct VarianceComponent {
    /// "between" (σ² of the cluster effects) or "within" (σ² of the effects within a cluster).
    pub level: String,
    /// REML or ML estimate (≥ 0).
    pub estimate: f64,
    /// Lower end of the profile-likelihood interval at `model.level` (0 when it reaches the boundary).
    pub ci_low: Option<f64>,
    /// Upper end of the profile-likelihood interval.
    pub ci_high: Option<f64>,
    /// Share of the total variance σ²_b + σ²_w + ṽ at this level, in [0, 1]
    /// (ṽ the typical sampling variance of `heterogeneity.typical_variance`).
    pub i2: f64,
}

/// What the cluster structure adds to the report.
#[derive(Debug, Clone, Serialize)]
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
    pub model: String,
    /// Likelihood-ratio tests of each variance component = 0 (three-level model only).
    pub lr_tests: Vec<ComponentTest>,
    /// The level at which each non-intercept term varies.
    pub moderator_levels: Vec<TermLevel>,
    /// Under `--robust`: how the robust inference was done, in words (null otherwise).
    pub robust: Option<String>,
}

/// A likelihood-ratio test that one variance component is 0.
#[derive(Debug, Clone, Serialize)]
pub struct ComponentTest {
    /// "within" (against the model without σ²_within) or "between" (against
    /// the usual two-level model with independent effects).
    pub component: String,
    /// 2(ℓ̂ − ℓ̂₀), with REML or ML as fitted.
    pub statistic: f64,
    /// The maximised log-likelihood without the component.
    pub log_likelihood_without: f64,
    /// p from the 50:50 mixture of χ²₀ and χ²₁.
    pub p: f64,
}

/// The level at which a design term varies.
#[derive(Debug, Clone, Serialize)]
pub struct TermLevel {
    /// Term label, as in `coefficients`.
    pub term: String,
    /// "between" (constant within every cluster) or "within" (varies inside some cluster).
    pub level: String,
}
