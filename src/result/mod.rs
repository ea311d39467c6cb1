//! The public result of `pondus fit` (and of `pondus sites`; that of
//! `pondus plan` is in [`plan`]): plain structs that every renderer and plot
//! reads. Their JSON form (field docs) is the stable schema.
//!
//! The groups of numbers that recur (intervals, tests, estimates with their
//! intervals) are small shared structs ([`Interval`], [`PredictionInterval`],
//! [`Test`], [`ContrastTest`], [`MeanEffect`]), written flat into their
//! owner's JSON object; every choice is an enum serialised to the same word
//! as its `id()` (and its `Display`).
//!
//! This module imports nothing above `effect` and `input`.

/// `Display` for choice enums: the word of their `id()`, as in the JSON.
macro_rules! display_by_id {
    ($($t:ty),* $(,)?) => {$(
        impl std::fmt::Display for $t {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.id())
            }
        }
    )*};
}

mod answers;
mod clusters;
mod diagnose;
mod estimate;
mod interpret;
mod model;
mod one_stage;
pub mod plan;
mod predict;
mod routes;
pub mod schema;
mod sensitivity;
mod sites;
mod spread;
mod study_list;
mod study_values;

pub use answers::*;
pub use clusters::*;
pub use diagnose::*;
pub use estimate::*;
pub use interpret::*;
pub use model::*;
pub use one_stage::*;
pub use predict::*;
pub use routes::*;
pub use sensitivity::*;
pub use sites::*;
pub use spread::*;
pub use study_list::{ModeratorColumn, StudyColumns, StudyList};

use crate::effect::route::Route;
use crate::effect::{Measure, ReadingScale};
use crate::input::Delimiter;
use serde::Serialize;
use std::collections::BTreeMap;

/// Everything `pondus fit` reports.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
    /// Which studies `average` pools when the model has moderators: those
    /// complete for the moderator model (omitted without moderators).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub average_basis: Option<AverageBasis>,
    /// The answer with the Knapp–Hartung factor floored at 1, present when a
    /// raw factor s² is below 1 and the inference is not `kh-floor` (omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub floored: Option<FlooredCheck>,
    /// Predicted effects at the `--at` values.
    pub predictions: Vec<Prediction>,
    // Kept column by column, written as an array of `Study` (see `StudyList`).
    /// One entry per included study, in input order.
    pub studies: StudyList,
    /// How the effects were obtained: one entry per route that any included
    /// study took (`studies[].computed_from`), in a fixed order.
    pub effects_obtained: Vec<RouteCount>,
    /// Per-level summaries of each categorical moderator, in moderator order.
    pub subgroups: Vec<Subgroups>,
    /// The fitted line with its bands along each numeric moderator, in moderator order.
    pub curves: Vec<Curve>,
    /// The fitted line along each numeric moderator at each level of each
    /// categorical moderator (numeric moderators first, then categorical ones,
    /// levels in order); omitted when the model lacks either kind.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub level_curves: Vec<LevelCurve>,
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
    /// The step-function selection model (`--selection`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub selection: Option<SelectionModel>,
    /// The average effect and each moderator coefficient unadjusted and under
    /// each adjustment for small-study effects and selection (with
    /// `--small-study` or `--selection`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sensitivity: Option<Sensitivity>,
    /// Cumulative meta-analysis, one step per study in the ordering column's order (`--cumulative-by`; omitted when not asked).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cumulative: Option<Vec<CumulativeStep>>,
    /// The cut-offs behind `influence[].flags` for this k and p, and the
    /// answer the shifts are measured from (with `--influence`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub influence_rules: Option<InfluenceRules>,
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
    /// The probability that a new study's true effect exceeds a value
    /// (`--beyond`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub beyond: Option<Beyond>,
    /// Every subset of the moderators ranked by AICc (`--all-subsets`;
    /// omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_set: Option<ModelSet>,
    /// The location-scale model: how the spread of the true effects depends
    /// on the `--spread-by` characteristics (omitted otherwise). `coefficients`
    /// then come from this model (Wald z), `tau2` and `heterogeneity` from
    /// the model with one τ².
    #[serde(skip_serializing_if = "Option::is_none")]
    pub spread: Option<Spread>,
}

/// Tool name and version.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ToolInfo {
    /// Always "pondus".
    pub name: String,
    /// The crate version.
    pub version: String,
}

/// Where the data came from.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct InputInfo {
    /// File name as given (`<stdin>` for standard input).
    pub file: String,
    /// Detected delimiter: "comma", "semicolon" or "tab"; "sheet" for a spreadsheet, "parquet" for a Parquet file.
    pub delimiter: Delimiter,
    /// The sheet read from a spreadsheet (omitted for CSV).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    /// Data rows read (blank rows not counted).
    pub rows: usize,
    /// Header of the column used for study labels (null: labels made from line numbers).
    pub label_column: Option<String>,
    /// SHA-256 of the input bytes exactly as read, lowercase hex (FIPS 180-4),
    /// so a reader can check that a result belongs to a file.
    pub sha256: String,
}

impl InputInfo {
    /// How a row of the input is named: `line 14` for CSV, `extraction row
    /// 14` for a spreadsheet (`line` holds the sheet's row number there).
    pub fn row_place(&self, line: u64) -> String {
        match &self.sheet {
            Some(name) => format!("{} row {line}", crate::input::sheet::quoted_name(name)),
            None => format!("line {line}"),
        }
    }

    /// The heading of a column of input row numbers: `line`, or `sheet row`
    /// for a spreadsheet.
    pub fn row_heading(&self) -> &'static str {
        if self.sheet.is_some() {
            "sheet row"
        } else {
            "line"
        }
    }
}

/// The effect measure.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct MeasureInfo {
    /// Command-line name, e.g. "r" or "log-or" ("r-corrected" after artifact corrections).
    pub id: MeasureId,
    /// What the analysed numbers are.
    pub description: String,
    /// How results are shown back: "same", "correlation" (tanh) or "ratio" (exp).
    pub reading_scale: ReadingScale,
    /// Name of the back-transformed quantity (null when the same).
    pub reading_name: Option<String>,
    /// The value of "no effect" on the analysis scale (always 0).
    pub null_value: f64,
}

/// What `measure.id` names: a measure of the command line, or the
/// artifact-corrected correlations (analysed on the r scale).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeasureId {
    /// A measure as chosen with `--measure`.
    Measure(Measure),
    /// Pearson correlations corrected for artifacts: "r-corrected".
    RCorrected,
}

impl MeasureId {
    /// The name used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            MeasureId::Measure(m) => m.id(),
            MeasureId::RCorrected => "r-corrected",
        }
    }
}

impl Serialize for MeasureId {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.id())
    }
}

/// Written by hand, as its `Serialize` is: a string, one of the measures'
/// ids or `r-corrected`.
impl schemars::JsonSchema for MeasureId {
    fn schema_name() -> std::borrow::Cow<'static, str> {
        "MeasureId".into()
    }

    fn json_schema(_: &mut schemars::SchemaGenerator) -> schemars::Schema {
        let ids: Vec<&str> = Measure::ALL
            .iter()
            .map(|m| MeasureId::Measure(*m))
            .chain([MeasureId::RCorrected])
            .map(MeasureId::id)
            .collect();
        schemars::json_schema!({
            "description": "The measure's command-line name, or \"r-corrected\" for \
                            artifact-corrected correlations.",
            "type": "string",
            "enum": ids,
        })
    }
}

display_by_id!(MeasureId);

/// Which studies the average effect of a moderator model pools.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct AverageBasis {
    /// Studies pooled: the k studies complete for the moderator model.
    pub studies: usize,
    /// Rows with a usable effect, whether or not their moderators are
    /// complete (`studies` plus the rows left out only for a missing
    /// moderator value).
    pub with_effect: usize,
}

/// A row left out of the model.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Excluded {
    /// Study label.
    pub study: String,
    /// Line in the file (for a spreadsheet, the sheet's row number).
    pub line: u64,
    /// Why it was left out.
    pub reason: String,
}

/// One included study.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Study {
    /// Label.
    pub study: String,
    /// Line in the file (for a spreadsheet, the sheet's row number).
    pub line: u64,
    /// Effect on the analysis scale.
    pub effect: f64,
    /// Sampling variance.
    pub variance: f64,
    /// The study's own confidence interval, effect ∓ z·√variance (normal
    /// quantile at the model's level).
    #[serde(flatten)]
    pub ci: Interval,
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
    /// The study's empirical-Bayes estimate of its own true effect
    /// (`--shrink`; omitted otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub shrunken: Option<Shrunken>,
    /// The group of reported numbers the effect was computed from ("means",
    /// "means-se", "t", "f", "p", "median-iqr", "median-range", "r",
    /// "counts", "ratio-ci", "log-se", "variance", "se", "ci", or a
    /// conversion: "r-to-d", "counts-to-d", "d-to-r").
    pub computed_from: Route,
    /// Cells of further columns of the study's row, keyed by the column's
    /// name as asked, each as written in the file (trimmed): the columns a
    /// plot shows or orders or groups the rows by (`--columns`,
    /// `--group-by`, `--sort` naming a column that is not a moderator).
    /// Omitted when none was asked for.
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub cells: BTreeMap<String, String>,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn json<T: Serialize>(v: T) -> String {
        serde_json::to_string(&v).unwrap()
    }

    /// Every choice enum serialises to the word of its `id()`.
    #[test]
    fn choice_enums_serialise_to_their_id() {
        fn check<T: Serialize + std::fmt::Display + Copy>(all: &[T]) {
            for v in all {
                assert_eq!(json(*v), format!("\"{v}\""));
            }
        }
        check(&[
            Tau2Method::Reml,
            Tau2Method::Ml,
            Tau2Method::Dl,
            Tau2Method::Pm,
            Tau2Method::He,
            Tau2Method::Sj,
            Tau2Method::None,
        ]);
        check(&[Inference::Kh, Inference::KhFloor, Inference::Z]);
        check(&[TestDistribution::F, TestDistribution::ChiSquare]);
        check(&[RobustTestMethod::Htz]);
        check(&[
            ProbePoint::Given,
            ProbePoint::MeanMinusSd,
            ProbePoint::Mean,
            ProbePoint::MeanPlusSd,
            ProbePoint::Level,
        ]);
        check(&[
            Region::Everywhere,
            Region::Nowhere,
            Region::Outside,
            Region::Inside,
            Region::Above,
            Region::Below,
        ]);
        check(&[
            QuantityKind::MeanEffect,
            QuantityKind::Slope,
            QuantityKind::LevelDifference,
        ]);
        check(&InfluenceFlag::ALL);
        check(&[
            ConclusionKind::ModeratorTest,
            ConclusionKind::Coefficient,
            ConclusionKind::Average,
        ]);
        check(&[Side::Left, Side::Right]);
        check(&[SortOrder::Numeric, SortOrder::Text]);
        check(&[Favoured::Positive, Favoured::Negative]);
        check(&[PetPeeseChoice::Pet, PetPeeseChoice::Peese]);
        check(&[
            Adjustment::Unadjusted,
            Adjustment::TrimAndFill,
            Adjustment::Pet,
            Adjustment::Peese,
            Adjustment::Selection,
        ]);
        check(&[
            Verdict::Holds,
            Verdict::Fades,
            Verdict::Reverses,
            Verdict::Appears,
            Verdict::NoneEither,
        ]);
        check(&[ClusterLevel::Between, ClusterLevel::Within]);
        check(&[ClusterModel::ThreeLevel, ClusterModel::TwoLevel]);
        check(&[SitesInputKind::Rows, SitesInputKind::Moments]);
        check(&[SeType::Classical, SeType::Hc3]);
        check(&[Delimiter::Comma, Delimiter::Semicolon, Delimiter::Tab]);
        for m in Measure::ALL {
            assert_eq!(json(m), format!("\"{}\"", m.id()));
            check(&[MeasureId::Measure(m)]);
        }
        check(&[MeasureId::RCorrected]);
        assert_eq!(json(Ending::TruncatedAtZero), "\"truncated-at-zero\"");
    }
}
