//! Command-line definitions (clap derive) and the checked settings built from them.

pub mod outputs;

use clap::{Args, Parser, Subcommand, ValueEnum};
use outputs::Target;
use pondus::effect::{ColumnMap, Measure};
use pondus::error::{Error, Result};
use pondus::fit::{self, FitSettings};
use pondus::input::Source;
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::plan::{
    self,
    report::{PlanRequest, SolveFor},
    ModeratorDesign, Plan, PlanMeasure, PlanTest,
};
use pondus::render;
use pondus::render::figure;
use std::collections::BTreeMap;
use std::path::PathBuf;

/// pondus: random-effects meta-analysis and meta-regression with moderators.
#[derive(Debug, Parser)]
#[command(name = "pondus", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
// `fit` has many flags; the enum is built once per run, so its size does not matter.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Pool per-study effects and test whether study characteristics (moderators) change them.
    Fit(FitArgs),
    /// Plan a study: the power of a moderator test before the data exist, and the sites needed.
    Plan(PlanArgs),
    /// Per-site regressions from participant rows of many sites, streamed; the effects file for `fit`.
    Sites(SitesArgs),
    /// Print a SQL query that computes the per-site moments inside a database (for `sites --moments`).
    Sql(SqlArgs),
}

/// Effect measures as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum MeasureArg {
    /// Precomputed `effect` with `variance`, `se`, or `ci_low`+`ci_high` (95%).
    Effect,
    /// Pearson `r` and `n`, analysed as Fisher's z.
    R,
    /// Regression `t`, `n` and `covariates`, as a partial r on Fisher's z.
    PartialR,
    /// Unstandardised `slope` and its `se`.
    Slope,
    /// Hedges' g from treat_/ctrl_ `mean`, `sd` and `n`.
    Smd,
    /// Log odds ratio from `treat_events`, `treat_n`, `ctrl_events`, `ctrl_n`.
    LogOr,
    /// Log risk ratio from the same counts.
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

/// τ² estimators as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Tau2Arg {
    /// Restricted maximum likelihood (default).
    Reml,
    /// Maximum likelihood.
    Ml,
    /// DerSimonian–Laird (method of moments).
    Dl,
    /// Paule–Mandel.
    Pm,
    /// Hedges' OLS-based moments.
    He,
    /// Sidik–Jonkman.
    Sj,
    /// No between-study variance (common-effect model).
    None,
}

impl From<Tau2Arg> for Tau2Method {
    fn from(t: Tau2Arg) -> Self {
        match t {
            Tau2Arg::Reml => Tau2Method::Reml,
            Tau2Arg::Ml => Tau2Method::Ml,
            Tau2Arg::Dl => Tau2Method::Dl,
            Tau2Arg::Pm => Tau2Method::Pm,
            Tau2Arg::He => Tau2Method::He,
            Tau2Arg::Sj => Tau2Method::Sj,
            Tau2Arg::None => Tau2Method::None,
        }
    }
}

/// Test distributions as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum InferenceArg {
    /// Knapp–Hartung t and F (default; holds its error rate better with few studies).
    Kh,
    /// Wald z and chi-square.
    Z,
}

/// Options of `pondus fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// CSV file with a header row and one row per study ('-' reads standard input).
    pub file: PathBuf,
    /// How each row becomes an effect and its sampling variance.
    #[arg(long, value_enum, default_value_t = MeasureArg::Effect)]
    pub measure: MeasureArg,
    /// Read a measure input from another column, e.g. `--col n=sample_size` (repeatable).
    #[arg(long = "col", value_name = "ROLE=HEADER")]
    pub col: Vec<String>,
    /// Column with the study labels [default: study].
    #[arg(long, value_name = "HEADER")]
    pub label: Option<String>,
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
    /// Estimator of the between-study variance τ².
    #[arg(long, value_enum, default_value_t = Tau2Arg::Reml)]
    pub tau2: Tau2Arg,
    /// Tests and intervals for the coefficients.
    #[arg(long, value_enum, default_value_t = InferenceArg::Kh)]
    pub inference: InferenceArg,
    /// Confidence level of every interval.
    #[arg(long, default_value_t = 0.95)]
    pub level: f64,
    /// Predict the effect at these moderator values, e.g. `--at dose=10,arm=b` (repeatable).
    #[arg(long, value_name = "NAME=VALUE,...")]
    pub at: Vec<String>,
    /// Write the full result as JSON ('-' for standard output).
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Write one CSV row per input row: effect, weight, fitted value, residuals, exclusions.
    #[arg(long, value_name = "PATH")]
    pub table: Option<PathBuf>,
    /// Draw a forest plot into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub forest: Option<PathBuf>,
    /// Order of the forest plot's rows: input, effect, precision, or a moderator's name.
    #[arg(long, value_name = "KEY")]
    pub sort: Option<String>,
    /// Mark each study's fitted value (from the moderators) in the forest plot.
    #[arg(long)]
    pub show_fitted: bool,
    /// Draw a bubble plot (effect against a moderator, with the fitted line) into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub bubble: Option<PathBuf>,
    /// The moderator on the bubble plot's x axis [default: the first numeric one].
    #[arg(long, value_name = "NAME")]
    pub bubble_x: Option<String>,
    /// Draw a funnel plot (effect or residual against its standard error) into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub funnel: Option<PathBuf>,
    /// Shade the funnel plot's significance contours (p = 0.10, 0.05, 0.01).
    #[arg(long)]
    pub contours: bool,
    /// Width of every plot in pixels [default: automatic].
    #[arg(long, value_name = "PIXELS")]
    pub width: Option<u32>,
    /// Height of every plot in pixels [default: automatic; a forest plot grows with its rows].
    #[arg(long, value_name = "PIXELS")]
    pub height: Option<u32>,
    /// Do not print the terminal report.
    #[arg(long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (tables, plots, cautions, how to reproduce) into this .html file ('-' for standard output).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
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
    /// Refit without each study in turn: coefficients, τ², I² and the moderator test's p; flag removals that change a sign or the significance.
    #[arg(long)]
    pub loo: bool,
    /// Influence measures per study (studentised residuals, DFFITS, Cook's distance, covariance ratio, hat values) with their cut-offs.
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

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotKind {
    /// `--forest`.
    Forest,
    /// `--bubble`.
    Bubble,
    /// `--funnel`.
    Funnel,
}

/// One requested plot.
#[derive(Debug, Clone)]
pub struct PlotRequest {
    /// Which plot.
    pub kind: PlotKind,
    /// Where it goes (always a file).
    pub target: Target,
    /// SVG or PNG, from the extension.
    pub format: figure::Format,
}

fn split_pair<'a>(flag: &str, text: &'a str, what: &str) -> Result<(&'a str, &'a str)> {
    match text.split_once('=') {
        Some((a, b)) if !a.trim().is_empty() && !b.trim().is_empty() => Ok((a.trim(), b.trim())),
        _ => Err(Error::usage(
            flag,
            format!("'{text}' is not of the form {what}"),
        )),
    }
}

/// Checked settings of a `fit` run.
#[derive(Debug, Clone)]
pub struct FitRun {
    /// Where the data come from.
    pub source: Source,
    /// The analysis settings.
    pub settings: FitSettings,
    /// JSON output.
    pub json: Option<Target>,
    /// Per-study CSV output.
    pub table: Option<Target>,
    /// Plots to draw.
    pub plots: Vec<PlotRequest>,
    /// Plot settings.
    pub plot_options: figure::PlotOptions,
    /// Whether to print the terminal report.
    pub text: bool,
    /// The HTML report's target.
    pub report: Option<Target>,
    /// The command line, quoted for a shell (for the report's reproducibility block).
    pub invocation: String,
}

/// A `--report` target: standard output or a path ending in `.html` or `.htm`.
fn report_target(flag: &str, path: &std::path::Path) -> Result<Target> {
    if path.as_os_str() == "-" {
        return Ok(Target::Stdout);
    }
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    match ext.as_deref() {
        Some("html") | Some("htm") => Ok(Target::from_arg(path)),
        _ => Err(Error::usage(
            flag,
            format!(
                "'{}': the report is an HTML page; give a file name ending in .html (or '-' for standard output)",
                path.display()
            ),
        )),
    }
}

/// This process's command line quoted for a POSIX shell, the program shown
/// as `pondus` (its path on this machine says nothing about the analysis).
pub fn invocation() -> String {
    let mut parts = vec!["pondus".to_string()];
    parts.extend(
        std::env::args_os()
            .skip(1)
            .map(|a| shell_quote(&a.to_string_lossy())),
    );
    parts.join(" ")
}

/// Quotes one word for a POSIX shell: unchanged when it is made of safe
/// characters only, otherwise in single quotes with `'` written as `'\''`.
pub fn shell_quote(word: &str) -> String {
    let safe = !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_-./=,:+@%".contains(c));
    if safe {
        word.to_string()
    } else {
        format!("'{}'", word.replace('\'', "'\\''"))
    }
}

impl FitArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<FitRun> {
        let measure: Measure = self.measure.into();
        let mut overrides = BTreeMap::new();
        for c in &self.col {
            let (role, header) = split_pair("--col", c, "ROLE=HEADER")?;
            if let Some(before) = overrides.insert(role.to_string(), header.to_string()) {
                return Err(Error::usage(
                    "--col",
                    format!(
                        "the role '{role}' is given twice ('{role}={before}' and '{c}'); give each role once"
                    ),
                ));
            }
        }
        let columns = ColumnMap::new(measure, overrides)?;
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
        let known = |flag: &str, name: &str| -> Result<()> {
            if self.moderators.iter().any(|m| m == name) {
                Ok(())
            } else {
                Err(Error::usage(
                    flag,
                    format!("'{name}' is not a moderator; add --moderator {name} first"),
                ))
            }
        };
        let mut references = BTreeMap::new();
        for r in &self.reference {
            let (name, level) = split_pair("--reference", r, "NAME=LEVEL")?;
            known("--reference", name)?;
            references.insert(name.to_string(), level.to_string());
        }
        for n in &self.categorical {
            known("--categorical", n)?;
        }
        for n in &self.center {
            known("--center", n)?;
        }
        let moderators = self
            .moderators
            .iter()
            .map(|name| ModeratorSpec {
                name: name.clone(),
                categorical: self.categorical.contains(name) || references.contains_key(name),
                reference: references.get(name).cloned(),
                center: self.center.contains(name),
            })
            .collect();
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
                point.push((n.to_string(), v.to_string()));
            }
            predictions.push(point);
        }
        let source = Source::from_arg(&self.file);
        let json = self.json.as_deref().map(Target::from_arg);
        let table = self.table.as_deref().map(Target::from_arg);
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some(t) = &table {
            outs.push(("--table", t));
        }
        let mut plots = Vec::new();
        for (flag, kind, path) in [
            ("--forest", PlotKind::Forest, &self.forest),
            ("--bubble", PlotKind::Bubble, &self.bubble),
            ("--funnel", PlotKind::Funnel, &self.funnel),
        ] {
            if let Some(p) = path {
                plots.push((
                    flag,
                    PlotRequest {
                        kind,
                        target: Target::from_arg(p),
                        format: figure::Format::from_path(flag, p)?,
                    },
                ));
            }
        }
        let needs = |flag: &str, given: bool, plot: &str, present: bool| -> Result<()> {
            if given && !present {
                Err(Error::usage(
                    flag,
                    format!("applies to a plot; add {plot} FILE.svg (or .png)"),
                ))
            } else {
                Ok(())
            }
        };
        needs(
            "--sort",
            self.sort.is_some(),
            "--forest",
            self.forest.is_some() || self.report.is_some(),
        )?;
        needs(
            "--show-fitted",
            self.show_fitted,
            "--forest",
            self.forest.is_some() || self.report.is_some(),
        )?;
        needs(
            "--bubble-x",
            self.bubble_x.is_some(),
            "--bubble",
            self.bubble.is_some() || self.report.is_some(),
        )?;
        needs(
            "--contours",
            self.contours,
            "--funnel",
            self.funnel.is_some() || self.report.is_some(),
        )?;
        let report = self
            .report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()?;
        let any_plot = !plots.is_empty() || report.is_some();
        for (flag, v) in [("--width", self.width), ("--height", self.height)] {
            needs(
                flag,
                v.is_some(),
                "--forest, --bubble, --funnel or --report",
                any_plot,
            )?;
            if let Some(v) = v {
                let (lo, hi) = figure::SIZE_RANGE;
                if !(lo..=hi).contains(&v) {
                    return Err(Error::usage(
                        flag,
                        format!("{v} pixels is outside {lo} to {hi}"),
                    ));
                }
            }
        }
        if let Some(name) = &self.bubble_x {
            known("--bubble-x", name)?;
        }
        for (flag, p) in &plots {
            outs.push((flag, &p.target));
        }
        if let Some(t) = &report {
            outs.push(("--report", t));
        }
        let input_path = match &source {
            Source::File(p) => Some(p.as_path()),
            Source::Stdin => None,
        };
        outputs::check_targets(input_path, &outs)?;
        let to_stdout = outs.iter().any(|(_, t)| **t == Target::Stdout);
        Ok(FitRun {
            source,
            settings: FitSettings {
                measure,
                columns,
                label: (
                    self.label.clone().unwrap_or_else(|| "study".into()),
                    self.label.is_some(),
                ),
                moderators,
                interactions,
                options: FitOptions {
                    method: self.tau2.into(),
                    inference: match self.inference {
                        InferenceArg::Kh => Inference::Kh,
                        InferenceArg::Z => Inference::Z,
                    },
                    level: self.level,
                },
                predictions,
                interpret: self.interpret_settings()?,
                diagnostics: self.diagnostics()?,
                dependence: self.dependence()?,
            },
            json,
            table,
            plots: plots.into_iter().map(|(_, p)| p).collect(),
            plot_options: figure::PlotOptions {
                width: self.width,
                height: self.height,
                sort: self
                    .sort
                    .as_deref()
                    .map(figure::SortKey::parse)
                    .unwrap_or_default(),
                show_fitted: self.show_fitted,
                bubble_x: self.bubble_x.clone(),
                contours: self.contours,
            },
            text: !self.quiet && !to_stdout,
            report,
            invocation: invocation(),
        })
    }
}

impl FitArgs {
    /// The checked `--probe`, `--compare-levels`, `--regions` and artifact settings.
    fn interpret_settings(&self) -> Result<pondus::fit::InterpretSettings> {
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
            if !self.moderators.iter().any(|m| m == name) {
                return Err(Error::usage(
                    "--probe",
                    format!("'{name}' is not a moderator; add --moderator {name} first"),
                ));
            }
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
        if artifacts.any() && self.measure != MeasureArg::R {
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

impl FitArgs {
    /// The checked dependent-effects flags (`--cluster`, `--levels`, `--robust`).
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    fn dependence(&self) -> Result<pondus::model::multilevel::Dependence> {
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
            (self.loo, "--loo"),
            (self.influence, "--influence"),
            (self.permutations.is_some(), "--permutations"),
            (self.small_study, "--small-study"),
            (self.cumulative_by.is_some(), "--cumulative-by"),
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

    /// The checked diagnostic flags.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    fn diagnostics(&self) -> Result<pondus::diagnose::DiagnoseSettings> {
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
                if self.moderators.is_empty() {
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
        })
    }
}

/// Runs a checked `fit`: read, analyse, write every requested output.
///
/// # Errors
/// Any library error.
pub fn run_fit(run: &FitRun) -> Result<()> {
    use std::io::IsTerminal;
    let bytes = run.source.read_all()?;
    let bar = match run.settings.diagnostics.permutations {
        Some(p) if std::io::stderr().is_terminal() => {
            let bar = indicatif::ProgressBar::new(p.permutations as u64);
            bar.set_style(
                indicatif::ProgressStyle::with_template(
                    "permuting {bar:30} {pos}/{len} arrangements ({eta})",
                )
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            Some(bar)
        }
        _ => None,
    };
    let tick = |n: u64| {
        if let Some(b) = &bar {
            b.inc(n);
        }
    };
    let report = fit::run_with_progress(&run.settings, &run.source.name(), &bytes, &tick);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let report = report?;
    // Every plot is drawn before anything is written, so a plot the model
    // cannot support leaves no partial set of outputs behind.
    let mut drawn = Vec::with_capacity(run.plots.len());
    for p in &run.plots {
        let o = &run.plot_options;
        let bytes = match p.kind {
            PlotKind::Forest => figure::forest_plot(&report, o, p.format)?,
            PlotKind::Bubble => figure::bubble_plot(&report, o, p.format)?,
            PlotKind::Funnel => figure::funnel_plot(&report, o, p.format)?,
        };
        drawn.push((&p.target, bytes));
    }
    if let Some(t) = &run.json {
        let mut buf = Vec::new();
        render::json::write(&report, &mut buf).map_err(|e| io_err("JSON", e))?;
        outputs::emit(t, &buf)?;
    }
    if let Some(t) = &run.table {
        let mut buf = Vec::new();
        render::table::write(&report, &mut buf).map_err(|e| io_err("table", e))?;
        outputs::emit(t, &buf)?;
    }
    let page = match &run.report {
        Some(t) => {
            let (figures, figure_notes) = figure::page_figures(&report, &run.plot_options)?;
            let prov = render::html::Provenance {
                command: run.invocation.clone(),
                version: report.tool.version.clone(),
                input_sha256: Some(report.input.sha256.clone()),
                seed: report.permutation.as_ref().and_then(|p| p.seed),
            };
            Some((
                t,
                render::html::fit_page(&report, &figures, &figure_notes, &prov),
            ))
        }
        None => None,
    };
    for (target, bytes) in drawn {
        outputs::emit(target, &bytes)?;
    }
    if let Some((t, page)) = page {
        outputs::emit(t, page.as_bytes())?;
    }
    if run.text {
        outputs::emit(&Target::Stdout, render::text::render(&report).as_bytes())?;
    }
    Ok(())
}

/// Measures of `pondus plan`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlanMeasureArg {
    /// Correlations, analysed as Fisher's z (variance 1/(n − 3)); needs --n.
    R,
    /// Hedges' g, two equal groups of n/2, g = 0 for planning (variance 4/n); needs --n.
    Smd,
    /// Unstandardised slopes; needs --variance (the planned se²).
    Slope,
    /// A generic effect; needs --variance (the planned within-study variance).
    Effect,
}

/// Tests of `pondus plan`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlanTestArg {
    /// Knapp–Hartung t test after REML (default, as in `pondus fit`): power by simulation.
    Kh,
    /// Wald z test: exact power from the noncentral chi-square.
    Z,
}

/// What `pondus plan --target-power` solves for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SolveArg {
    /// The number of sites.
    K,
    /// The participants per site, at the planned number of sites (r and smd only).
    N,
}

/// Options of `pondus plan`.
#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("design").required(true).args(["moderator_sd", "share", "moderator_values"])))]
pub struct PlanArgs {
    /// The effect measure of the planned analysis.
    #[arg(long, value_enum)]
    pub measure: PlanMeasureArg,
    /// Planned number of sites.
    #[arg(long, value_name = "K")]
    pub k: usize,
    /// Planned participants per site (r and smd), or a comma-separated list of site sizes (repeated in order up to k).
    #[arg(long, value_name = "N[,N...]")]
    pub n: Option<String>,
    /// Planned within-site sampling variance (slope and effect; required for them).
    #[arg(long, value_name = "V")]
    pub variance: Option<f64>,
    /// Assumed residual between-site variance τ² (analysis scale).
    #[arg(long, value_name = "T")]
    pub tau2: f64,
    /// SD across sites of a numeric moderator (divisor k − 1).
    #[arg(long, value_name = "S")]
    pub moderator_sd: Option<f64>,
    /// Share of sites in the second level of a two-level moderator.
    #[arg(long, value_name = "P")]
    pub share: Option<f64>,
    /// File of planned moderator values, one number per line (a first non-numeric line is a header); repeated in order when k differs.
    #[arg(long, value_name = "FILE")]
    pub moderator_values: Option<PathBuf>,
    /// Moderator coefficient to detect, on the analysis scale (Fisher z for r, g for smd).
    #[arg(long, value_name = "B", allow_negative_numbers = true)]
    pub moderator_effect: f64,
    /// Two-sided significance level.
    #[arg(long, default_value_t = 0.05, allow_negative_numbers = true)]
    pub alpha: f64,
    /// The moderator test.
    #[arg(long, value_enum, default_value_t = PlanTestArg::Kh)]
    pub test: PlanTestArg,
    /// Solve for the smallest k (or n, with --solve n) reaching this power.
    #[arg(long, value_name = "POWER", allow_negative_numbers = true)]
    pub target_power: Option<f64>,
    /// What --target-power solves for.
    #[arg(long, value_enum, default_value_t = SolveArg::K)]
    pub solve: SolveArg,
    /// Largest number of sites searched.
    #[arg(long, default_value_t = 1000)]
    pub max_k: usize,
    /// Largest per-site n searched with --solve n.
    #[arg(long, default_value_t = 100_000.0)]
    pub max_n: f64,
    /// Simulate N data sets under the planned design, fit each by REML with the chosen test, and show the realised rejection rate beside the analytic power (--test kh always simulates, default 2000; also confirms the k needed).
    #[arg(long = "simulate", visible_alias = "simulations", value_name = "N")]
    pub simulate: Option<usize>,
    /// Seed of the simulation [default: 1]; the result does not depend on the number of threads.
    #[arg(long, value_name = "S")]
    pub seed: Option<u64>,
    /// Draw the power curve over k into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub curve: Option<PathBuf>,
    /// Write the result as JSON ('-' for standard output).
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Do not print the terminal report.
    #[arg(long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (assumptions, power table, curve, cautions) into this .html file ('-' for standard output).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Checked settings of a `plan` run.
#[derive(Debug, Clone)]
pub struct PlanRun {
    /// The computation.
    pub request: PlanRequest,
    /// JSON output.
    pub json: Option<Target>,
    /// Power curve output and its format.
    pub curve: Option<(Target, figure::Format)>,
    /// Whether to print the terminal report.
    pub text: bool,
    /// The HTML report's target.
    pub report: Option<Target>,
    /// The command line, quoted for a shell.
    pub invocation: String,
}

/// Simulated data sets for `--test kh` without `--simulate`.
pub const PLAN_DEFAULT_SIMULATIONS: usize = 2000;

/// Largest k accepted by `--k` and `--max-k`.
pub const PLAN_MAX_K: usize = 100_000;

impl PlanArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<PlanRun> {
        let finite = |flag: &str, v: f64, ok: bool, what: &str| -> Result<()> {
            if v.is_finite() && ok {
                Ok(())
            } else {
                Err(Error::usage(flag, format!("{v} is not valid: {what}")))
            }
        };
        let uses_n = matches!(self.measure, PlanMeasureArg::R | PlanMeasureArg::Smd);
        let name = format!("{:?}", self.measure).to_lowercase();
        let measure = if uses_n {
            if self.variance.is_some() {
                return Err(Error::usage(
                    "--variance",
                    format!("applies to --measure slope or effect; for {name} the variance follows from --n"),
                ));
            }
            match self.measure {
                PlanMeasureArg::R => PlanMeasure::R,
                _ => PlanMeasure::Smd,
            }
        } else {
            let Some(v) = self.variance else {
                return Err(Error::usage(
                    "--variance",
                    format!("--measure {name} needs the planned within-site sampling variance, e.g. --variance 0.01"),
                ));
            };
            finite("--variance", v, v > 0.0, "give a positive variance")?;
            if self.n.is_some() {
                return Err(Error::usage(
                    "--n",
                    format!("applies to --measure r or smd; for {name} give --variance"),
                ));
            }
            match self.measure {
                PlanMeasureArg::Slope => PlanMeasure::Slope { variance: v },
                _ => PlanMeasure::Effect { variance: v },
            }
        };
        let mut n_list = Vec::new();
        if let Some(text) = &self.n {
            for part in text.split(',') {
                let part = part.trim();
                let n: f64 = part.parse().map_err(|_| {
                    Error::usage(
                        "--n",
                        format!("'{part}' is not a number; give e.g. --n 60 or --n 40,60,80"),
                    )
                })?;
                finite(
                    "--n",
                    n,
                    (4.0..=1e9).contains(&n),
                    "participants per site must be at least 4 (and at most 1e9)",
                )?;
                n_list.push(n);
            }
        }
        let (n, n_sites) = match (uses_n, n_list.len()) {
            (true, 0) => {
                return Err(Error::usage(
                    "--n",
                    format!(
                        "--measure {name} needs the planned participants per site, e.g. --n 60"
                    ),
                ))
            }
            (true, 1) => (n_list[0], None),
            (true, _) => (f64::NAN, Some(n_list)),
            (false, _) => (f64::NAN, None),
        };
        if n_sites.is_some() && self.solve == SolveArg::N {
            return Err(Error::usage(
                "--solve",
                "n solves for one common site size; give a single --n with --solve n",
            ));
        }
        if !(3..=PLAN_MAX_K).contains(&self.k) {
            return Err(Error::usage(
                "--k",
                format!(
                    "{} sites: give 3 to {PLAN_MAX_K} (a moderator test needs at least 3)",
                    self.k
                ),
            ));
        }
        if !(3..=PLAN_MAX_K).contains(&self.max_k) {
            return Err(Error::usage("--max-k", format!("give 3 to {PLAN_MAX_K}")));
        }
        finite(
            "--tau2",
            self.tau2,
            self.tau2 >= 0.0,
            "τ² is a variance, 0 or more",
        )?;
        finite(
            "--moderator-effect",
            self.moderator_effect,
            true,
            "give a finite number",
        )?;
        finite(
            "--alpha",
            self.alpha,
            self.alpha > 0.0 && self.alpha <= 0.5,
            "give a level between 0 and 0.5, e.g. --alpha 0.05",
        )?;
        let design = match (self.moderator_sd, self.share, &self.moderator_values) {
            (Some(sd), None, None) => {
                finite("--moderator-sd", sd, sd > 0.0, "give a positive SD")?;
                ModeratorDesign::Numeric { sd }
            }
            (None, Some(share), None) => {
                finite("--share", share, share > 0.0 && share < 1.0, "give a share between 0 and 1, e.g. --share 0.5")?;
                ModeratorDesign::TwoLevel { share }
            }
            (None, None, Some(path)) => ModeratorDesign::Values(read_moderator_values(path)?),
            _ => {
                return Err(Error::usage(
                    "--moderator-sd",
                    "give one of --moderator-sd (numeric moderator), --share (two-level moderator) or --moderator-values FILE",
                ))
            }
        };
        if let Some(t) = self.target_power {
            finite(
                "--target-power",
                t,
                t > self.alpha && t < 1.0,
                "give a power above --alpha and below 1, e.g. --target-power 0.8",
            )?;
        } else if self.solve == SolveArg::N {
            return Err(Error::usage("--solve", "applies with --target-power"));
        }
        if self.solve == SolveArg::N && !uses_n {
            return Err(Error::usage(
                "--solve",
                format!(
                    "n applies to --measure r or smd; for {name} the variance is given directly"
                ),
            ));
        }
        finite("--max-n", self.max_n, self.max_n >= 4.0, "give at least 4")?;
        let test = match self.test {
            PlanTestArg::Z => PlanTest::Z,
            PlanTestArg::Kh => PlanTest::Kh,
        };
        if test == PlanTest::Z && self.simulate.is_none() && self.seed.is_some() {
            return Err(Error::usage(
                "--seed",
                "applies with --simulate N (or --test kh); the z test's analytic power needs no seed",
            ));
        }
        let simulations = match (test, self.simulate) {
            (_, Some(n)) => Some(n),
            (PlanTest::Kh, None) => Some(PLAN_DEFAULT_SIMULATIONS),
            (PlanTest::Z, None) => None,
        };
        if let Some(n) = simulations {
            if !(100..=1_000_000).contains(&n) {
                return Err(Error::usage(
                    "--simulate",
                    format!("{n} data sets: give 100 to 1000000"),
                ));
            }
        }
        let json = self.json.as_deref().map(Target::from_arg);
        let curve = match &self.curve {
            Some(p) => Some((
                Target::from_arg(p),
                figure::Format::from_path("--curve", p)?,
            )),
            None => None,
        };
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some((c, _)) = &curve {
            outs.push(("--curve", c));
        }
        let report = self
            .report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()?;
        if let Some(r) = &report {
            outs.push(("--report", r));
        }
        outputs::check_targets(self.moderator_values.as_deref(), &outs)?;
        let plan = Plan {
            measure,
            k: self.k,
            n,
            n_sites,
            tau2: self.tau2,
            design,
            beta: self.moderator_effect,
            alpha: self.alpha,
            test,
        };
        if plan.information().is_none() {
            return Err(match &plan.design {
                ModeratorDesign::Values(_) => Error::usage(
                    "--moderator-values",
                    format!("the planned values do not vary across the first {} sites; give at least two different values", self.k),
                ),
                _ => Error::usage(
                    "--share",
                    format!("with k = {} sites a share of {} leaves a level without sites; choose a share between 1/k and 1 − 1/k", self.k, self.share.unwrap_or(f64::NAN)),
                ),
            });
        }
        Ok(PlanRun {
            request: PlanRequest {
                plan,
                target_power: self.target_power,
                solve: match self.solve {
                    SolveArg::K => SolveFor::K,
                    SolveArg::N => SolveFor::N,
                },
                max_k: self.max_k,
                max_n: self.max_n,
                simulations,
                seed: self.seed.unwrap_or(1),
            },
            text: !self.quiet && json != Some(Target::Stdout) && report != Some(Target::Stdout),
            json,
            curve,
            report,
            invocation: invocation(),
        })
    }
}

/// Reads planned moderator values: one number per line, blank lines
/// skipped, a first line that is not a number taken as a header.
fn read_moderator_values(path: &std::path::Path) -> Result<Vec<f64>> {
    const FLAG: &str = "--moderator-values";
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        path: path.display().to_string(),
        action: "reading",
        source,
    })?;
    let mut values = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let cell = line.trim().trim_start_matches('\u{feff}').trim();
        if cell.is_empty() {
            continue;
        }
        match cell.parse::<f64>() {
            Ok(v) if v.is_finite() => values.push(v),
            _ if i == 0 => {}
            _ => {
                return Err(Error::usage(
                    FLAG,
                    format!(
                        "{}, line {}: '{cell}' is not a finite number; give one number per line",
                        path.display(),
                        i + 1
                    ),
                ))
            }
        }
    }
    if values.len() < 2 {
        return Err(Error::usage(
            FLAG,
            format!(
                "{}: needs at least two planned values, found {}",
                path.display(),
                values.len()
            ),
        ));
    }
    Ok(values)
}

/// Runs a checked `plan`: compute, draw, write.
///
/// # Errors
/// Any library error.
pub fn run_plan(run: &PlanRun) -> Result<()> {
    use std::io::IsTerminal;
    let req = &run.request;
    let bar = match req.simulations {
        Some(n) if std::io::stderr().is_terminal() => {
            let confirm = req.plan.test == PlanTest::Kh
                && req.target_power.is_some()
                && req.solve == SolveFor::K;
            let rounds = 1 + if confirm { plan::MAX_SIMULATED_K } else { 0 };
            let bar = indicatif::ProgressBar::new((n * rounds) as u64);
            bar.set_style(
                indicatif::ProgressStyle::with_template(
                    "simulating {bar:30} {pos}/{len} data sets ({eta})",
                )
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            Some(bar)
        }
        _ => None,
    };
    let tick = |n: u64| {
        if let Some(b) = &bar {
            b.inc(n);
        }
    };
    let report = plan::report::build_with_progress(req, &tick);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let report = report?;
    let curve = match &run.curve {
        Some((t, f)) => Some((t, plan::report::curve_plot(&report, *f)?)),
        None => None,
    };
    if let Some(t) = &run.json {
        let mut buf = serde_json::to_vec_pretty(&report)
            .map_err(|e| io_err("JSON", std::io::Error::other(e)))?;
        buf.push(b'\n');
        outputs::emit(t, &buf)?;
    }
    let page = match &run.report {
        Some(t) => {
            let figure = plan::report::curve_figure(&report)?;
            let prov = render::html::Provenance {
                command: run.invocation.clone(),
                version: env!("CARGO_PKG_VERSION").to_string(),
                input_sha256: None,
                seed: report.simulation.map(|s| s.seed),
            };
            Some((t, render::html::plan_page(&report, Some(&figure), &prov)))
        }
        None => None,
    };
    if let Some((t, bytes)) = curve {
        outputs::emit(t, &bytes)?;
    }
    if let Some((t, page)) = page {
        outputs::emit(t, page.as_bytes())?;
    }
    if run.text {
        outputs::emit(
            &Target::Stdout,
            plan::report::render_text(&report).as_bytes(),
        )?;
    }
    Ok(())
}

fn io_err(what: &str, source: std::io::Error) -> Error {
    Error::Io {
        path: format!("<{what} output>"),
        action: "rendering",
        source,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn clap_definition_is_consistent() {
        Cli::command().debug_assert();
    }

    fn args(extra: &[&str]) -> Result<FitRun> {
        let mut v = vec!["pondus", "fit", "in.csv"];
        v.extend_from_slice(extra);
        let Command::Fit(a) = Cli::try_parse_from(v).unwrap().command else {
            panic!("parsed as fit")
        };
        a.check()
    }

    #[test]
    fn checked_settings() {
        let r = args(&[
            "--moderator",
            "dose",
            "--moderator",
            "arm",
            "--reference",
            "arm=b",
            "--center",
            "dose",
        ])
        .unwrap();
        let m = &r.settings.moderators;
        assert!(m[1].categorical && m[1].reference.as_deref() == Some("b"));
        assert!(m[0].center && !m[0].categorical);
        assert!(r.text);
        let e = args(&["--level", "95"]).unwrap_err().to_string();
        assert!(e.contains("--level 0.95"), "{e}");
        assert!(args(&["--reference", "arm=b"])
            .unwrap_err()
            .to_string()
            .contains("add --moderator arm"));
        assert!(args(&["--moderator", "a", "--interaction", "a"]).is_err());
        assert!(args(&["--col", "nope=x", "--measure", "r"]).is_err());
        assert!(args(&["--at", "dose"]).is_err());
        assert!(args(&["--json", "in.csv"]).is_err());
        let p = args(&[
            "--forest",
            "f.svg",
            "--funnel",
            "u.PNG",
            "--sort",
            "precision",
            "--contours",
            "--width",
            "800",
        ])
        .unwrap();
        assert_eq!(p.plots.len(), 2);
        assert_eq!(p.plots[1].format, figure::Format::Png);
        assert_eq!(p.plot_options.sort, figure::SortKey::Precision);
        assert_eq!(p.plot_options.width, Some(800));
        assert!(p.plot_options.contours && !p.plot_options.show_fitted);
        for bad in [
            &["--forest", "f.jpg"][..],
            &["--forest", "-"],
            &["--bubble-x", "dose"],
            &["--show-fitted"],
            &["--width", "800"],
            &["--forest", "f.svg", "--height", "50"],
            &["--forest", "f.svg", "--funnel", "f.svg"],
            &["--bubble", "b.svg", "--bubble-x", "dose"],
        ] {
            assert!(
                matches!(args(bad), Err(Error::Usage { .. })),
                "{bad:?} is refused"
            );
        }
        assert!(!args(&["--json", "-"]).unwrap().text);
    }
}

/// Options of `pondus sites`.
#[derive(Debug, Args)]
pub struct SitesArgs {
    /// CSV file of participant rows: a site id, x, y and optional w and covariates ('-' reads standard input).
    #[arg(required_unless_present = "moments", conflicts_with = "moments")]
    pub file: Option<PathBuf>,
    /// Column of the site ids.
    #[arg(long, value_name = "COL", required_unless_present = "moments")]
    pub site: Option<String>,
    /// Column of the predictor whose slope each site estimates.
    #[arg(long, value_name = "COL", required_unless_present = "moments")]
    pub x: Option<String>,
    /// Column of the outcome.
    #[arg(long, value_name = "COL", required_unless_present = "moments")]
    pub y: Option<String>,
    /// Column of a participant-level moderator: adds the product term x·w in each site.
    #[arg(long, value_name = "COL")]
    pub w: Option<String>,
    /// A covariate to adjust for in every site's regression (repeatable).
    #[arg(long = "covariate", value_name = "COL")]
    pub covariates: Vec<String>,
    /// Read a per-site moments table (the result of `pondus sql`'s query) instead of participant rows.
    #[arg(long, value_name = "MOMENTS.csv", conflicts_with_all = ["site", "x", "y", "w", "covariates", "robust", "center_within"])]
    pub moments: Option<PathBuf>,
    /// CSV file of site characteristics, one row per site, joined by site id.
    #[arg(long, value_name = "SITES.csv")]
    pub info: Option<PathBuf>,
    /// Id column of the --info table [default: the --site column's name, or 'site' with --moments].
    #[arg(long, value_name = "COL", requires = "info")]
    pub info_key: Option<String>,
    /// Write the per-site effects (readable by `pondus fit --measure slope`) here ('-' for standard output).
    #[arg(long, value_name = "EFFECTS.csv")]
    pub out: Option<PathBuf>,
    /// HC3 standard errors instead of classical ones (reads the file a second time; not for standard input).
    #[arg(long)]
    pub robust: bool,
    /// Centre x and w at their site means in the product-term model (same product term, better conditioning).
    #[arg(long, requires = "w")]
    pub center_within: bool,
    /// Also run the second stage: pooled product term (within sites) beside the slope-on-mean-w meta-regression (across sites).
    #[arg(long)]
    pub fit: bool,
    /// A site characteristic (a column of --info) to regress the site slopes on (repeatable; with --fit).
    #[arg(long = "moderator", value_name = "NAME", requires = "fit")]
    pub moderators: Vec<String>,
    /// Estimator of the between-site variance τ² in the second stage.
    #[arg(long, value_enum, default_value_t = Tau2Arg::Reml, requires = "fit")]
    pub tau2: Tau2Arg,
    /// Tests and intervals of the second stage.
    #[arg(long, value_enum, default_value_t = InferenceArg::Kh, requires = "fit")]
    pub inference: InferenceArg,
    /// Confidence level of the second stage's intervals.
    #[arg(long, default_value_t = 0.95, requires = "fit")]
    pub level: f64,
    /// Write the whole result (sites, exclusions, join, second stage) as JSON ('-' for standard output).
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Do not print the terminal summary.
    #[arg(long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (sites, exclusions, join, both stages, plots, cautions) into this .html file ('-' for standard output).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Where `pondus sites` reads from.
#[derive(Debug, Clone)]
pub enum SitesInputArg {
    /// Participant rows.
    Rows(Source),
    /// A moments table.
    Moments(PathBuf),
}

/// Checked settings of a `sites` run.
#[derive(Debug, Clone)]
pub struct SitesRun {
    /// The input.
    pub input: SitesInputArg,
    /// First-stage settings.
    pub settings: pondus::sites::SitesSettings,
    /// Site table and its id column.
    pub info: Option<(PathBuf, String)>,
    /// Effects file.
    pub out: Option<Target>,
    /// JSON output.
    pub json: Option<Target>,
    /// Second stage: options and site characteristics.
    pub fit: Option<(FitOptions, Vec<ModeratorSpec>)>,
    /// Whether to print the terminal summary.
    pub text: bool,
    /// The HTML report's target.
    pub report: Option<Target>,
    /// The command line, quoted for a shell.
    pub invocation: String,
}

impl SitesArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<SitesRun> {
        let input = match (&self.moments, &self.file) {
            (Some(m), _) => SitesInputArg::Moments(m.clone()),
            (None, Some(f)) => SitesInputArg::Rows(Source::from_arg(f)),
            (None, None) => {
                return Err(Error::usage(
                    "FILE",
                    "give the participant rows file, or --moments MOMENTS.csv",
                ))
            }
        };
        let name = |flag: &str, v: &Option<String>| -> Result<String> {
            match v.as_deref().map(str::trim) {
                Some(s) if !s.is_empty() => Ok(s.to_string()),
                _ if self.moments.is_some() => Ok(String::new()),
                _ => Err(Error::usage(flag, "give a column name")),
            }
        };
        let site = name("--site", &self.site)?;
        let x = name("--x", &self.x)?;
        let y = name("--y", &self.y)?;
        let mut used: Vec<(&str, &str)> = vec![("--site", &site), ("--x", &x), ("--y", &y)];
        if let Some(w) = &self.w {
            used.push(("--w", w));
        }
        for c in &self.covariates {
            used.push(("--covariate", c));
        }
        if self.moments.is_none() {
            for (i, (flag, col)) in used.iter().enumerate() {
                if let Some((other, _)) = used[..i].iter().find(|(_, c)| c == col) {
                    return Err(Error::usage(
                        *flag,
                        format!("column '{col}' is already given to {other}; each role needs its own column"),
                    ));
                }
            }
        }
        if !(self.level > 0.0 && self.level < 1.0) {
            return Err(Error::usage(
                "--level",
                "must lie between 0 and 1, e.g. 0.95",
            ));
        }
        if !self.moderators.is_empty() && self.info.is_none() {
            return Err(Error::usage(
                "--moderator",
                "site characteristics come from the site table; add --info SITES.csv",
            ));
        }
        let out = self.out.as_deref().map(Target::from_arg);
        let json = self.json.as_deref().map(Target::from_arg);
        let report = self
            .report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()?;
        if out.is_none() && json.is_none() && report.is_none() && !self.fit {
            return Err(Error::usage(
                "--out",
                "nothing to do: add --out EFFECTS.csv (and/or --fit, --json)",
            ));
        }
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(o) = &out {
            outs.push(("--out", o));
        }
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some(r) = &report {
            outs.push(("--report", r));
        }
        let input_path = match &input {
            SitesInputArg::Rows(Source::File(p)) => Some(p.as_path()),
            SitesInputArg::Rows(Source::Stdin) => None,
            SitesInputArg::Moments(p) => Some(p.as_path()),
        };
        outputs::check_targets(input_path, &outs)?;
        if let Some(info) = &self.info {
            outputs::check_targets(Some(info.as_path()), &outs)?;
        }
        let to_stdout = outs.iter().any(|(_, t)| **t == Target::Stdout);
        let info_key = self.info_key.clone().unwrap_or_else(|| {
            if self.moments.is_some() {
                "site".into()
            } else {
                site.clone()
            }
        });
        Ok(SitesRun {
            input,
            settings: pondus::sites::SitesSettings {
                site,
                x,
                y,
                w: self.w.clone(),
                covariates: self.covariates.clone(),
                robust: self.robust,
                center_within: self.center_within,
            },
            info: self.info.clone().map(|p| (p, info_key)),
            out,
            json,
            fit: self.fit.then(|| {
                (
                    FitOptions {
                        method: self.tau2.into(),
                        inference: match self.inference {
                            InferenceArg::Kh => Inference::Kh,
                            InferenceArg::Z => Inference::Z,
                        },
                        level: self.level,
                    },
                    self.moderators
                        .iter()
                        .map(|m| ModeratorSpec {
                            name: m.clone(),
                            categorical: false,
                            reference: None,
                            center: false,
                        })
                        .collect(),
                )
            }),
            text: !self.quiet && !to_stdout,
            report,
            invocation: invocation(),
        })
    }
}

/// Runs a checked `sites`: summarise, estimate, join, second stage, write.
///
/// # Errors
/// Any library error.
pub fn run_sites(run: &SitesRun) -> Result<()> {
    use pondus::sites::{self, RowInput};
    let mut report = match &run.input {
        SitesInputArg::Rows(Source::File(p)) => {
            sites::from_rows(&p.display().to_string(), RowInput::File(p), &run.settings)?
        }
        SitesInputArg::Rows(Source::Stdin) => sites::from_rows(
            "<stdin>",
            RowInput::Stream(Box::new(std::io::stdin().lock())),
            &run.settings,
        )?,
        SitesInputArg::Moments(p) => {
            let src = Source::File(p.clone());
            sites::from_moments(&src.name(), &src.read_all()?, &run.settings)?
        }
    };
    if let Some((path, key)) = &run.info {
        let src = Source::File(path.clone());
        sites::join::join(&mut report, &src.name(), &src.read_all()?, key)?;
    }
    if let Some((options, chars)) = &run.fit {
        report.stages = Some(sites::stages::run(&report, *options, chars)?);
    }
    if let Some(t) = &run.out {
        outputs::emit(t, &sites::effects_bytes(&report))?;
    }
    if let Some(t) = &run.json {
        let mut buf = serde_json::to_vec_pretty(&report)
            .map_err(|e| io_err("JSON", std::io::Error::other(e)))?;
        buf.push(b'\n');
        outputs::emit(t, &buf)?;
    }
    if let Some(t) = &run.report {
        let input_sha256 = match &run.input {
            SitesInputArg::Rows(Source::File(p)) | SitesInputArg::Moments(p) => {
                Some(pondus::sites::sha256_file(p)?)
            }
            SitesInputArg::Rows(Source::Stdin) => None,
        };
        let source = match &report.stages {
            Some(st) => st.characteristics.as_ref().or(st.across.as_ref()),
            None => None,
        };
        let (figures, figure_notes) = match source {
            Some(fit) => figure::page_figures(fit, &figure::PlotOptions::default())?,
            None => (Vec::new(), Vec::new()),
        };
        let prov = render::html::Provenance {
            command: run.invocation.clone(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            input_sha256,
            seed: None,
        };
        outputs::emit(
            t,
            render::html::sites_page(&report, &figures, &figure_notes, &prov).as_bytes(),
        )?;
    }
    if run.text {
        outputs::emit(&Target::Stdout, render::sites::render(&report).as_bytes())?;
    }
    Ok(())
}

/// Options of `pondus sql`.
#[derive(Debug, Args)]
pub struct SqlArgs {
    /// Table or view holding the participant rows (dots separate schema parts).
    #[arg(long, value_name = "NAME")]
    pub table: String,
    /// Column of the site ids.
    #[arg(long, value_name = "COL")]
    pub site: String,
    /// Column of the predictor.
    #[arg(long, value_name = "COL")]
    pub x: String,
    /// Column of the outcome.
    #[arg(long, value_name = "COL")]
    pub y: String,
    /// Column of a participant-level moderator (adds the x·w moments).
    #[arg(long, value_name = "COL")]
    pub w: Option<String>,
    /// A covariate column (repeatable).
    #[arg(long = "covariate", value_name = "COL")]
    pub covariates: Vec<String>,
}

impl SqlArgs {
    /// The query text.
    ///
    /// # Errors
    /// [`Error::Usage`] for an unusable name.
    pub fn query(&self) -> Result<String> {
        pondus::sites::sql::query(&pondus::sites::sql::QuerySpec {
            table: self.table.clone(),
            site: self.site.clone(),
            x: self.x.clone(),
            y: self.y.clone(),
            w: self.w.clone(),
            covariates: self.covariates.clone(),
        })
    }
}
