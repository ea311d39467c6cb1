//! The checked settings of one `fit` job: what the command line (or a
//! library caller) asks the pipeline in [`crate::fit`] to do.

use crate::diagnose::DiagnoseSettings;
use crate::effect::artifact::ArtifactSettings;
use crate::effect::{ColumnMap, Measure};
use crate::model::design::ModeratorSpec;
use crate::model::multilevel::Dependence;
use crate::model::FitOptions;

/// Checked settings of one `fit` job (the library's view; the CLI builds them).
#[derive(Debug, Clone)]
pub struct FitSettings {
    /// Effect measure.
    pub measure: Measure,
    /// Role-to-header overrides.
    pub columns: ColumnMap,
    /// Label column header, and whether the user named it (then it must exist).
    pub label: (String, bool),
    /// Moderators in the order given.
    pub moderators: Vec<ModeratorSpec>,
    /// Product terms, by moderator name.
    pub interactions: Vec<(String, String)>,
    /// Estimator, inference, level.
    pub options: FitOptions,
    /// Prediction points: (moderator name, value text) lists.
    pub predictions: Vec<Vec<(String, String)>>,
    /// Conditional effects, level contrasts, regions of significance and
    /// artifact corrections (see [`crate::model::probe`], [`crate::effect::artifact`]).
    pub interpret: InterpretSettings,
    /// Robustness diagnostics to add (leave-one-out, influence, permutation
    /// test, small-study effects, cumulative meta-analysis).
    pub diagnostics: DiagnoseSettings,
    /// Dependent effects: cluster column, three-level model, robust inference
    /// (see [`crate::model::multilevel`]); none by default.
    pub dependence: Dependence,
    /// Shrunken estimates and the chance of exceeding a value; none by default.
    pub answers: AnswerSettings,
}

/// One `--probe` request: a moderator and, optionally, the values to read it at.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeSpec {
    /// The moderator's name.
    pub name: String,
    /// The values as typed (None: the default points).
    pub values: Option<Vec<String>>,
}

/// Settings of the interpretation and artifact-correction pieces of `fit`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct InterpretSettings {
    /// `--probe` requests, in the order given.
    pub probes: Vec<ProbeSpec>,
    /// `--compare-levels`: pairwise contrasts between levels.
    pub compare_levels: bool,
    /// `--regions`: Johnson–Neyman regions of significance.
    pub regions: bool,
    /// Artifact corrections of correlations.
    pub artifacts: ArtifactSettings,
}

impl InterpretSettings {
    /// Whether any interpretation output was asked for.
    pub fn any(&self) -> bool {
        !self.probes.is_empty() || self.compare_levels || self.regions
    }
}

/// Settings of the answers about heterogeneity and single studies
/// (`--shrink`, `--beyond`, `--all-subsets`, `--spread-by`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AnswerSettings {
    /// `--shrink`: each study's empirical-Bayes estimate of its own true effect.
    pub shrink: bool,
    /// `--beyond`: the value (reading scale) whose chance of being exceeded
    /// by a new study's true effect is reported.
    pub beyond: Option<f64>,
    /// `--all-subsets`: rank every subset of the moderators by AICc.
    pub all_subsets: bool,
    /// `--spread-by`: the characteristics the spread of the true effects
    /// depends on (the location-scale model, see
    /// [`crate::model::location_scale`]), coded like moderators; none by default.
    pub spread_by: Vec<ModeratorSpec>,
}
