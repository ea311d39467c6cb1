//! The flag groups of `pondus fit`, one clap struct each, and the check of
//! each group's flags. [`super::FitArgs`] flattens them in this order, which
//! is the order `pondus fit --help` lists the flags in.

use super::reading::EffectScaleArg;
use crate::cli::outputs::Target;
use crate::cli::{report_target, InferenceArg, Tau2Arg};
use clap::{Args, ValueEnum};
use pondus::effect::Measure;
use pondus::error::{Error, Result};
use pondus::model::design::ModeratorSpec;
use pondus::model::{FitOptions, Inference};
use std::collections::BTreeMap;
use std::path::PathBuf;

/// Effect measures as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum MeasureArg {
    /// Precomputed `effect` with `variance`, `se`, or `ci_low`+`ci_high` (see --ci-level).
    Effect,
    /// Pearson `r` (or `t`, or `p` and `sign`) and `n`, analysed as Fisher's z.
    R,
    /// Regression `t`, `n` and `covariates`, as a partial r on Fisher's z.
    PartialR,
    /// Unstandardised `slope` and its `se`.
    Slope,
    /// Hedges' g from group means and SDs, SEs, t, F, p or medians (`pondus columns`).
    Smd,
    /// Log odds ratio from the counts, `or` with its limits, or `log_or` with `se`.
    LogOr,
    /// Log risk ratio from the counts, `rr` with its limits, or `log_rr` with `se`.
    LogRr,
    /// Risk difference from the same counts.
    RiskDiff,
}

impl From<MeasureArg> for Measure {
    fn from(m: MeasureArg) -> Self {
        match m {
            MeasureArg::Effect => Measure::Effect,
            MeasureArg::R => Measure::R,
            MeasureArg::PartialR => Measure::PartialR,
            MeasureArg::Slope => Measure::Slope,
            MeasureArg::Smd => Measure::Smd,
            MeasureArg::LogOr => Measure::LogOr,
            MeasureArg::LogRr => Measure::LogRr,
            MeasureArg::RiskDiff => Measure::RiskDiff,
        }
    }
}

/// Splits `NAME=VALUE`, both sides trimmed and non-empty.
pub(super) fn split_pair<'a>(flag: &str, text: &'a str, what: &str) -> Result<(&'a str, &'a str)> {
    match text.split_once('=') {
        Some((a, b)) if !a.trim().is_empty() && !b.trim().is_empty() => Ok((a.trim(), b.trim())),
        _ => Err(Error::usage(
            flag,
            format!("'{text}' is not of the form {what}"),
        )),
    }
}

/// The input: the file, its measure and the columns read.
#[derive(Debug, Args)]
#[command(next_help_heading = "Input")]
pub struct InputArgs {
    /// CSV file (or .xlsx, .xlsm, .xls, .ods spreadsheet) with a header row and one row per
    /// study ('-' reads CSV from standard input).
    #[arg(help_heading = None)]
    pub file: PathBuf,
    /// The sheet of a spreadsheet FILE to read [default: the first sheet].
    #[arg(long, value_name = "NAME")]
    pub sheet: Option<String>,
    /// The decimal mark of the numbers in FILE: ',' or '.' [default: '.', or ',' when a
    /// semicolon- or tab-separated file has unambiguous decimal commas].
    #[arg(long, value_name = "MARK", value_parser = crate::cli::parse_decimal)]
    pub decimal: Option<pondus::input::number::DecimalMark>,
    /// How each row becomes an effect and its sampling variance.
    #[arg(long, value_enum, default_value_t = MeasureArg::Effect)]
    pub measure: MeasureArg,
    /// Read a measure input from another column, e.g. `--col n=sample_size` (repeatable).
    #[arg(long = "col", value_name = "ROLE=HEADER")]
    pub col: Vec<String>,
    /// Column with the study labels [default: study].
    #[arg(long, value_name = "HEADER")]
    pub label: Option<String>,
    /// Confidence level of the reported limits (`ci_low`, `ci_high`) [default: 0.95].
    #[arg(long, value_name = "LEVEL")]
    pub ci_level: Option<f64>,
    /// Scale of precomputed effects and limits: `log` says they are ratios, to be logged.
    #[arg(long, value_enum, default_value_t = EffectScaleArg::Analysis)]
    pub effect_scale: EffectScaleArg,
    /// Convert rows of another family: r or event counts to d for smd, group comparisons to r for r.
    #[arg(long)]
    pub convert: bool,
}

/// The model: moderators and their coding, the estimator, the tests, predictions.
#[derive(Debug, Args)]
#[command(next_help_heading = "Model")]
pub struct ModelArgs {
    /// A study-level characteristic to test (repeatable; numeric unless its values are text).
    #[arg(long = "moderator", value_name = "NAME")]
    pub moderators: Vec<String>,
    /// Treat this moderator as categorical even if its values are numbers (repeatable).
    #[arg(long, value_name = "NAME")]
    pub categorical: Vec<String>,
    /// Reference level of a categorical moderator [default: first in sorted order] (repeatable).
    #[arg(long, value_name = "NAME=LEVEL")]
    pub reference: Vec<String>,
    /// Add the product term of two moderators (repeatable).
    #[arg(long, value_name = "A,B")]
    pub interaction: Vec<String>,
    /// Subtract the studies' mean from a numeric moderator before fitting (repeatable).
    #[arg(long, value_name = "NAME")]
    pub center: Vec<String>,
    /// Let the spread of the true effects (ln τ²) depend on this characteristic: the location-scale model, REML or ML, Wald z tests (repeatable; numeric or categorical, coded like moderators).
    #[arg(long = "spread-by", value_name = "NAME")]
    pub spread_by: Vec<String>,
    /// Estimator of the between-study variance τ².
    #[arg(long, value_enum, default_value_t = Tau2Arg::Reml)]
    pub tau2: Tau2Arg,
    /// Tests and intervals for the coefficients [default: kh; z with --spread-by].
    #[arg(long, value_enum)]
    pub inference: Option<InferenceArg>,
    /// Confidence level of every interval.
    #[arg(long, default_value_t = 0.95)]
    pub level: f64,
    /// Predict the effect at these moderator values, e.g. `--at dose=10,arm=b` (repeatable).
    #[arg(long, value_name = "NAME=VALUE,...")]
    pub at: Vec<String>,
}

/// The checked model flags.
#[derive(Debug, Clone)]
pub struct CheckedModel {
    /// The moderators with their coding.
    pub moderators: Vec<ModeratorSpec>,
    /// Product terms, as pairs of moderator names.
    pub interactions: Vec<(String, String)>,
    /// Estimator, tests and level.
    pub options: FitOptions,
    /// Points to predict at, as (name, value) pairs.
    pub predictions: Vec<Vec<(String, String)>>,
    /// The `--spread-by` characteristics with their coding.
    pub spread_by: Vec<ModeratorSpec>,
}

impl ModelArgs {
    /// An error unless `name` is given with `--moderator` or `--spread-by`
    /// (the flags that code a column: `--categorical`, `--reference`, `--center`).
    ///
    /// # Errors
    /// [`Error::Usage`] on `flag`, telling to add the moderator.
    fn known_coded(&self, flag: &str, name: &str) -> Result<()> {
        if self.spread_by.iter().any(|m| m == name) {
            Ok(())
        } else {
            self.known(flag, name)
        }
    }

    /// An error unless `name` is given with `--moderator`.
    ///
    /// # Errors
    /// [`Error::Usage`] on `flag`, telling to add the moderator.
    pub fn known(&self, flag: &str, name: &str) -> Result<()> {
        if self.moderators.iter().any(|m| m == name) {
            Ok(())
        } else {
            Err(Error::usage(
                flag,
                format!("'{name}' is not a moderator; add --moderator {name} first"),
            ))
        }
    }

    /// Checks the level, the moderators and their coding, the interactions
    /// and the prediction points, in that order.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<CheckedModel> {
        if !(self.level > 0.0 && self.level < 1.0) {
            let hint = if self.level >= 50.0 && self.level < 100.0 {
                format!("; give a fraction, e.g. --level {}", self.level / 100.0)
            } else {
                String::new()
            };
            return Err(Error::usage(
                "--level",
                format!("must lie between 0 and 1{hint}"),
            ));
        }
        let mut seen = std::collections::HashSet::new();
        for m in &self.moderators {
            if !seen.insert(m.as_str()) {
                return Err(Error::usage("--moderator", format!("'{m}' is given twice")));
            }
        }
        let mut references = BTreeMap::new();
        for r in &self.reference {
            let (name, level) = split_pair("--reference", r, "NAME=LEVEL")?;
            self.known_coded("--reference", name)?;
            if let Some(before) = references.insert(name.to_string(), level.to_string()) {
                return Err(Error::usage(
                    "--reference",
                    format!(
                        "'{name}' is given two reference levels ('{before}' and '{level}'); give one"
                    ),
                ));
            }
        }
        for n in &self.categorical {
            self.known_coded("--categorical", n)?;
        }
        for n in &self.center {
            self.known_coded("--center", n)?;
        }
        let mut seen = std::collections::HashSet::new();
        for m in &self.spread_by {
            if !seen.insert(m.as_str()) {
                return Err(Error::usage("--spread-by", format!("'{m}' is given twice")));
            }
        }
        let spec = |name: &String| ModeratorSpec {
            name: name.clone(),
            categorical: self.categorical.contains(name) || references.contains_key(name),
            reference: references.get(name).cloned(),
            center: self.center.contains(name),
        };
        let moderators = self.moderators.iter().map(spec).collect();
        let spread_by = self.spread_by.iter().map(spec).collect();
        let mut interactions = Vec::new();
        for i in &self.interaction {
            let parts: Vec<&str> = i.split(',').map(str::trim).collect();
            if parts.len() != 2 || parts.iter().any(|p| p.is_empty()) {
                return Err(Error::usage(
                    "--interaction",
                    format!("'{i}' must name two moderators separated by a comma, e.g. --interaction dose,arm"),
                ));
            }
            interactions.push((parts[0].to_string(), parts[1].to_string()));
        }
        let mut predictions = Vec::new();
        for a in &self.at {
            let mut point = Vec::new();
            for part in a.split(',') {
                let (n, v) = split_pair("--at", part, "NAME=VALUE,NAME=VALUE,...")?;
                if let Some((_, before)) = point.iter().find(|(m, _)| m == n) {
                    return Err(Error::usage(
                        "--at",
                        format!(
                            "'{a}' gives '{n}' twice ('{n}={before}' and '{n}={v}'); give each \
                             moderator once per point (repeat --at for another point)"
                        ),
                    ));
                }
                point.push((n.to_string(), v.to_string()));
            }
            predictions.push(point);
        }
        Ok(CheckedModel {
            moderators,
            interactions,
            options: FitOptions {
                method: self.tau2.into(),
                inference: match self.inference {
                    Some(i) => i.into(),
                    None if self.spread_by.is_empty() => Inference::Kh,
                    None => Inference::Z,
                },
                level: self.level,
            },
            predictions,
            spread_by,
        })
    }
}

/// The JSON result and the per-study table.
#[derive(Debug, Args)]
#[command(next_help_heading = "Output files")]
pub struct OutputArgs {
    /// Write the full result as JSON ('-' for standard output).
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Write one CSV row per input row: effect, weight, fitted value, residuals, exclusions.
    #[arg(long, value_name = "PATH")]
    pub table: Option<PathBuf>,
}

impl OutputArgs {
    /// The `--json` and `--table` targets.
    pub fn targets(&self) -> (Option<Target>, Option<Target>) {
        (
            self.json.as_deref().map(Target::from_arg),
            self.table.as_deref().map(Target::from_arg),
        )
    }
}

pub use super::plots::{check_dpi, check_font_size, PlotArgs};

/// The terminal report and the HTML page.
#[derive(Debug, Args)]
#[command(next_help_heading = "Terminal report and HTML page")]
pub struct ReportArgs {
    /// Do not print the terminal report.
    #[arg(long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (tables, plots, cautions, how to reproduce) into this .html file ('-' for standard output).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

impl ReportArgs {
    /// The `--report` target.
    ///
    /// # Errors
    /// [`Error::Usage`] unless it is `-` or ends in .html or .htm.
    pub fn target(&self) -> Result<Option<Target>> {
        self.report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()
    }
}

/// Reading the model: probes, level comparisons, regions of significance,
/// and the artifact corrections of correlations.
#[derive(Debug, Args)]
#[command(next_help_heading = "Reading the model")]
pub struct InterpretationArgs {
    /// Read the model at values of a moderator: `--probe dose=10,20`; alone, a numeric moderator's mean and mean ± 1 SD, a categorical one's every level (repeatable).
    #[arg(long, value_name = "NAME[=V,...]")]
    pub probe: Vec<String>,
    /// Pairwise differences between the levels of the probed (else every) categorical moderator, with tests.
    #[arg(long)]
    pub compare_levels: bool,
    /// Johnson–Neyman regions of significance along every numeric moderator (and for simple slopes).
    #[arg(long)]
    pub regions: bool,
    /// Correct each r for the unreliability of x, with its reliability from this column (--measure r).
    #[arg(long, value_name = "COL")]
    pub reliability_x: Option<String>,
    /// Correct each r for the unreliability of y, with its reliability from this column (--measure r).
    #[arg(long, value_name = "COL")]
    pub reliability_y: Option<String>,
    /// Correct each r for direct range restriction on x (Thorndike Case II); u = restricted SD / unrestricted SD from this column (--measure r).
    #[arg(long, value_name = "COL")]
    pub range_ratio: Option<String>,
}

/// Robustness checks of the fitted model.
#[derive(Debug, Args)]
#[command(next_help_heading = "Robustness checks")]
pub struct DiagnosticArgs {
    /// Refit without each study in turn: the average, coefficients, τ², I² and the moderator test's p; flag removals that reverse a conclusion (the test crossing α, a coefficient's interval crossing 0).
    #[arg(long)]
    pub loo: bool,
    /// How far each study moves the answer (average, coefficients, moderator test), how unusual it is and its leverage, flagged by named textbook rules.
    #[arg(long)]
    pub influence: bool,
    /// Permutation test of the moderators with N random permutations (all arrangements when there are at most N).
    #[arg(long, value_name = "N")]
    pub permutations: Option<usize>,
    /// Seed of the permutations [default: 1]; the result does not depend on the number of threads.
    #[arg(long, value_name = "S")]
    pub seed: Option<u64>,
    /// Small-study effects: regression test for funnel-plot asymmetry, rank-correlation test, trim-and-fill.
    #[arg(long)]
    pub small_study: bool,
    /// Cumulative meta-analysis, adding the studies in the order of this column (numbers ascending; text in code-point order).
    #[arg(long, value_name = "COL")]
    pub cumulative_by: Option<String>,
    /// Step-function selection model with these one-sided p-value cut points, ascending in (0, 1): `--selection 0.025` or `0.025,0.5`; fitted by ML with the moderators.
    #[arg(long, value_name = "CUTS")]
    pub selection: Option<String>,
    /// With --selection: the direction whose one-sided p-values are small [default: positive].
    #[arg(long, value_enum, value_name = "DIR")]
    pub favoured: Option<FavouredArg>,
    /// With --selection: fit even when an interval holds only 1 or 2 studies (an empty interval is always refused).
    #[arg(long)]
    pub selection_force: bool,
}

/// The favoured direction of `--favoured`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum FavouredArg {
    /// Positive effects give small one-sided p-values.
    Positive,
    /// Negative effects give small one-sided p-values.
    Negative,
}

/// Dependent effects nested in clusters.
#[derive(Debug, Args)]
#[command(next_help_heading = "Several effects per study")]
pub struct ClusterArgs {
    /// Effects sharing a value of this column are nested in one cluster (a study, lab or site): fits the three-level model.
    #[arg(long, value_name = "COL")]
    pub cluster: Option<String>,
    /// With --cluster: 3 (default) fits the three-level model, 2 the usual model with effects treated as independent (for --robust).
    #[arg(long, value_name = "N")]
    pub levels: Option<u8>,
    /// With --cluster: cluster-robust (CR2) standard errors, Satterthwaite df and the approximate Hotelling T² moderator test.
    #[arg(long)]
    pub robust: bool,
}

impl InterpretationArgs {
    /// The checked `--probe`, `--compare-levels`, `--regions` and artifact
    /// settings; probes name moderators of `model`, and the artifact
    /// corrections need `measure` r.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(
        &self,
        model: &ModelArgs,
        measure: MeasureArg,
    ) -> Result<pondus::fit::InterpretSettings> {
        use pondus::fit::{InterpretSettings, ProbeSpec};
        let mut probes = Vec::new();
        for p in &self.probe {
            let (name, values) = match p.split_once('=') {
                None => (p.trim(), None),
                Some((n, v)) => {
                    let vals: Vec<String> = v.split(',').map(|x| x.trim().to_string()).collect();
                    if n.trim().is_empty() || vals.iter().any(|x| x.is_empty()) {
                        return Err(Error::usage(
                            "--probe",
                            format!("'{p}' is not of the form NAME or NAME=V1,V2,..."),
                        ));
                    }
                    (n.trim(), Some(vals))
                }
            };
            if name.is_empty() {
                return Err(Error::usage(
                    "--probe",
                    "give a moderator name, e.g. --probe dose",
                ));
            }
            model.known("--probe", name)?;
            probes.push(ProbeSpec {
                name: name.to_string(),
                values,
            });
        }
        let artifacts = pondus::effect::artifact::ArtifactSettings {
            reliability_x: self.reliability_x.clone(),
            reliability_y: self.reliability_y.clone(),
            range_ratio: self.range_ratio.clone(),
        };
        if artifacts.any() && measure != MeasureArg::R {
            let flag = artifacts.columns()[0].0;
            return Err(Error::usage(
                flag,
                "artifact corrections apply to Pearson correlations; use --measure r",
            ));
        }
        Ok(InterpretSettings {
            probes,
            compare_levels: self.compare_levels,
            regions: self.regions,
            artifacts,
        })
    }
}

/// Most permutations `--permutations` accepts.
pub const MAX_PERMUTATIONS: usize = 10_000_000;

impl ClusterArgs {
    /// The checked dependent-effects flags (`--cluster`, `--levels`, `--robust`);
    /// the robustness checks of `diagnostics` treat the effects as independent
    /// and are refused with `--cluster`.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(
        &self,
        diagnostics: &DiagnosticArgs,
    ) -> Result<pondus::model::multilevel::Dependence> {
        use pondus::model::multilevel::{Dependence, Levels};
        let Some(col) = &self.cluster else {
            if self.robust {
                return Err(Error::usage(
                    "--robust",
                    "clusters the standard errors on a column; add --cluster COL (the column of study, lab or site ids)",
                ));
            }
            if self.levels.is_some() {
                return Err(Error::usage(
                    "--levels",
                    "applies with --cluster COL; add it",
                ));
            }
            return Ok(Dependence::default());
        };
        if col.trim().is_empty() {
            return Err(Error::usage(
                "--cluster",
                "give the header of the column with the cluster ids, e.g. --cluster paper",
            ));
        }
        let levels = match self.levels {
            None | Some(3) => Levels::Three,
            Some(2) if self.robust => Levels::Two,
            Some(2) => return Err(Error::usage(
                "--levels",
                "2 ignores the nesting in the model; it is offered only with --robust, which then \
                     accounts for it. Add --robust, or use --levels 3",
            )),
            Some(n) => {
                return Err(Error::usage(
                    "--levels",
                    format!("{n} is not offered; give 2 or 3"),
                ))
            }
        };
        let unsupported = [
            (diagnostics.loo, "--loo"),
            (diagnostics.influence, "--influence"),
            (diagnostics.permutations.is_some(), "--permutations"),
            (diagnostics.small_study, "--small-study"),
            (diagnostics.cumulative_by.is_some(), "--cumulative-by"),
            (diagnostics.selection.is_some(), "--selection"),
        ];
        if let Some((_, flag)) = unsupported.iter().find(|(on, _)| *on) {
            return Err(Error::usage(
                *flag,
                "not available with --cluster (it treats the effects as independent); \
                 run it without --cluster, or leave it out",
            ));
        }
        Ok(Dependence {
            cluster: Some(col.clone()),
            levels,
            robust: self.robust,
        })
    }
}

impl DiagnosticArgs {
    /// The checked diagnostic flags; the permutation test needs a moderator in `model`.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self, model: &ModelArgs) -> Result<pondus::diagnose::DiagnoseSettings> {
        use pondus::diagnose::{DiagnoseSettings, PermutationSettings};
        let permutations = match (self.permutations, self.seed) {
            (None, Some(_)) => return Err(Error::usage(
                "--seed",
                "applies to the permutation test; add --permutations N (e.g. --permutations 999)",
            )),
            (None, None) => None,
            (Some(0), _) => {
                return Err(Error::usage(
                    "--permutations",
                    "0 permutations test nothing; give at least 1 (999 or more is usual)",
                ))
            }
            (Some(n), _) if n > MAX_PERMUTATIONS => {
                return Err(Error::usage(
                    "--permutations",
                    format!("{n} is more than {MAX_PERMUTATIONS}; give fewer"),
                ))
            }
            (Some(n), seed) => {
                if model.moderators.is_empty() {
                    return Err(Error::usage(
                        "--permutations",
                        "permutes the moderators, and the model has none; add --moderator NAME",
                    ));
                }
                Some(PermutationSettings {
                    permutations: n,
                    seed: seed.unwrap_or(1),
                })
            }
        };
        if let Some(c) = &self.cumulative_by {
            if c.trim().is_empty() {
                return Err(Error::usage(
                    "--cumulative-by",
                    "give the header of the column that orders the studies, e.g. --cumulative-by year",
                ));
            }
        }
        Ok(DiagnoseSettings {
            loo: self.loo,
            influence: self.influence,
            permutations,
            small_study: self.small_study,
            cumulative_by: self.cumulative_by.clone(),
            selection: self.selection_settings()?,
        })
    }

    /// The checked `--selection`, `--favoured` and `--selection-force`.
    ///
    /// # Errors
    /// [`Error::Usage`] for bad cut points, or the companions without `--selection`.
    fn selection_settings(&self) -> Result<Option<pondus::diagnose::selection::SelectionSettings>> {
        use pondus::diagnose::selection::{parse_cuts, SelectionSettings};
        use pondus::result::Favoured;
        let Some(text) = &self.selection else {
            if self.favoured.is_some() {
                return Err(Error::usage(
                    "--favoured",
                    "applies to the selection model; add --selection CUTS (e.g. --selection 0.025)",
                ));
            }
            if self.selection_force {
                return Err(Error::usage(
                    "--selection-force",
                    "applies to the selection model; add --selection CUTS (e.g. --selection 0.025)",
                ));
            }
            return Ok(None);
        };
        Ok(Some(SelectionSettings {
            cuts: parse_cuts(text)?,
            favoured: match self.favoured {
                Some(FavouredArg::Negative) => Favoured::Negative,
                _ => Favoured::Positive,
            },
            force: self.selection_force,
        }))
    }
}
