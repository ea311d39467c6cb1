//! What `--probe`, `--compare-levels` and `--regions` add to the report
//! (conditional effects, simple slopes, level contrasts, regions of
//! significance, the change of picture), and the artifact corrections.

use super::estimate::{AtValue, ContrastTest, Estimate, MeanEffect, Reading, Test};
use serde::Serialize;

/// What `--probe`, `--compare-levels` and `--regions` report: the model read
/// at chosen moderator values (see docs/interpretation.md).
#[derive(Debug, Clone, Default, Serialize, schemars::JsonSchema)]
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

/// Where a probed value comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
pub enum ProbePoint {
    /// Given on the command line.
    #[serde(rename = "given")]
    Given,
    /// One SD below the mean of a numeric moderator.
    #[serde(rename = "mean − 1 SD")]
    MeanMinusSd,
    /// The mean of a numeric moderator.
    #[serde(rename = "mean")]
    Mean,
    /// One SD above the mean of a numeric moderator.
    #[serde(rename = "mean + 1 SD")]
    MeanPlusSd,
    /// A level of a categorical moderator.
    #[serde(rename = "level")]
    Level,
}

impl ProbePoint {
    /// The words used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            ProbePoint::Given => "given",
            ProbePoint::MeanMinusSd => "mean − 1 SD",
            ProbePoint::Mean => "mean",
            ProbePoint::MeanPlusSd => "mean + 1 SD",
            ProbePoint::Level => "level",
        }
    }
}

/// The predicted mean effect at one value of one moderator.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ConditionalEffect {
    /// The probed moderator.
    pub moderator: String,
    /// Its value: a number or a level.
    pub at: AtValue,
    /// Where the value comes from: "given", "mean − 1 SD", "mean", "mean + 1 SD" or "level".
    pub point: ProbePoint,
    /// Where the other moderators are held, in words (empty when there are none).
    pub held: String,
    /// Predicted mean effect x0'β̂ (analysis scale), its standard error
    /// √(x0' Cov x0), the confidence interval of the mean effect, and the
    /// prediction interval for a new study's true effect, with the model's residual τ².
    #[serde(flatten)]
    pub mean: MeanEffect,
    /// t (kh) or z statistic of the test that the mean effect there is 0,
    /// its df (null under z) and two-sided p-value.
    #[serde(flatten)]
    pub test: Test,
    /// The same on the reading scale (null when the same as analysed).
    pub reading: Option<Reading>,
    /// Whether the value lies outside the studies' range (extrapolation).
    pub outside_range: bool,
}

/// The conditional effect of one moderator at a value of another it interacts with.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SimpleSlope {
    /// What changes: a numeric moderator's name (the slope per unit), or
    /// "NAME: LEVEL − REFERENCE" for a level of a categorical moderator.
    pub of: String,
    /// The kind of `of`, the one to read it by (a moderator's name can
    /// contain ':'): "slope" (the per-unit slope of the numeric moderator
    /// named by `of`) or "level_difference" (a level of a categorical
    /// moderator minus its reference); never "mean_effect".
    pub quantity_kind: QuantityKind,
    /// The probed moderator it is conditional on.
    pub moderator: String,
    /// The probed moderator's value.
    pub at: AtValue,
    /// Where the value comes from (as in [`ConditionalEffect::point`]).
    pub point: ProbePoint,
    /// Where the remaining moderators are held, in words.
    pub held: String,
    /// The slope or difference with its test.
    pub test: ContrastTest,
}

/// The difference between two levels of a categorical moderator.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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

/// Where the Johnson–Neyman inequality holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum Region {
    /// Significant for every value.
    Everywhere,
    /// Significant for no value.
    Nowhere,
    /// Significant below the first bound and above the second.
    Outside,
    /// Significant between the two bounds.
    Inside,
    /// Significant above the single bound.
    Above,
    /// Significant below the single bound.
    Below,
}

impl Region {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            Region::Everywhere => "everywhere",
            Region::Nowhere => "nowhere",
            Region::Outside => "outside",
            Region::Inside => "inside",
            Region::Above => "above",
            Region::Below => "below",
        }
    }
}

/// What kind of quantity a region of significance or a simple slope is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum QuantityKind {
    /// The conditional mean effect (regions only).
    MeanEffect,
    /// The slope (per unit) of a numeric moderator in a product term with
    /// the moderator along which the region runs.
    Slope,
    /// The difference between a level of a categorical moderator in a
    /// product term and its reference level.
    LevelDifference,
}

impl QuantityKind {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            QuantityKind::MeanEffect => "mean_effect",
            QuantityKind::Slope => "slope",
            QuantityKind::LevelDifference => "level_difference",
        }
    }
}

/// A Johnson–Neyman region of significance along one numeric moderator.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct RegionOfSignificance {
    /// The numeric moderator along which the quantity changes.
    pub moderator: String,
    /// What is tested: "effect" (the conditional mean effect), or the simple
    /// slope / level difference, as in [`SimpleSlope::of`].
    pub quantity: String,
    /// The kind of `quantity`, the one to read it by (a moderator's name
    /// can be "effect" or contain ':'): "mean_effect" (the conditional mean
    /// effect), "slope" (the per-unit slope of the numeric moderator named
    /// by `quantity`) or "level_difference" (a level of a categorical
    /// moderator minus its reference, `quantity` being
    /// "NAME: LEVEL − REFERENCE").
    pub quantity_kind: QuantityKind,
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
    pub significant: Region,
    /// Smallest value of the moderator among the studies.
    pub observed_min: f64,
    /// Largest value.
    pub observed_max: f64,
    /// The Johnson–Neyman values that lie within [observed_min, observed_max].
    pub observed_bounds: Vec<f64>,
    /// Within the observed range: "everywhere", "nowhere", "outside" or
    /// "inside" the observed bounds, or "above"/"below" a single one.
    pub observed_region: Region,
    /// The parts of [observed_min, observed_max] where the interval excludes 0.
    pub observed_significant: Vec<[f64; 2]>,
    /// The region in words, over all values and within the observed range.
    pub words: String,
}

/// How the picture changes once the moderators are in the model.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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

display_by_id!(ProbePoint, Region, QuantityKind);
