//! Command-line definitions (clap derive) and the checked settings built from them.

use crate::analysis::{self, FitSettings};
use crate::effect::{ColumnMap, Measure};
use crate::error::{Error, Result};
use crate::input::Source;
use crate::model::design::ModeratorSpec;
use crate::model::tau2::Tau2Method;
use crate::model::{FitOptions, Inference};
use crate::output::{self, Target};
use crate::plot;
use crate::report;
use clap::{Args, Parser, Subcommand, ValueEnum};
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
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Pool per-study effects and test whether study characteristics (moderators) change them.
    Fit(FitArgs),
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
}

/// A plot kind.
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
    pub format: plot::Format,
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
    pub plot_options: plot::PlotOptions,
    /// Whether to print the terminal report.
    pub text: bool,
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
            overrides.insert(role.to_string(), header.to_string());
        }
        let columns = ColumnMap::new(measure, overrides)?;
        if !(self.level > 0.0 && self.level < 1.0) {
            let hint = if self.level > 1.0 && self.level < 100.0 {
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
                        format: plot::Format::from_path(flag, p)?,
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
            self.forest.is_some(),
        )?;
        needs(
            "--show-fitted",
            self.show_fitted,
            "--forest",
            self.forest.is_some(),
        )?;
        needs(
            "--bubble-x",
            self.bubble_x.is_some(),
            "--bubble",
            self.bubble.is_some(),
        )?;
        needs(
            "--contours",
            self.contours,
            "--funnel",
            self.funnel.is_some(),
        )?;
        let any_plot = !plots.is_empty();
        for (flag, v) in [("--width", self.width), ("--height", self.height)] {
            needs(
                flag,
                v.is_some(),
                "--forest, --bubble or --funnel",
                any_plot,
            )?;
            if let Some(v) = v {
                let (lo, hi) = plot::SIZE_RANGE;
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
        let input_path = match &source {
            Source::File(p) => Some(p.as_path()),
            Source::Stdin => None,
        };
        output::check_targets(input_path, &outs)?;
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
            },
            json,
            table,
            plots: plots.into_iter().map(|(_, p)| p).collect(),
            plot_options: plot::PlotOptions {
                width: self.width,
                height: self.height,
                sort: self
                    .sort
                    .as_deref()
                    .map(plot::SortKey::parse)
                    .unwrap_or_default(),
                show_fitted: self.show_fitted,
                bubble_x: self.bubble_x.clone(),
                contours: self.contours,
            },
            text: !self.quiet && !to_stdout,
        })
    }
}

/// Runs a checked `fit`: read, analyse, write every requested output.
///
/// # Errors
/// Any library error.
pub fn run_fit(run: &FitRun) -> Result<()> {
    let bytes = run.source.read_all()?;
    let report = analysis::run(&run.settings, &run.source.name(), &bytes)?;
    // Every plot is drawn before anything is written, so a plot the model
    // cannot support leaves no partial set of outputs behind.
    let mut drawn = Vec::with_capacity(run.plots.len());
    for p in &run.plots {
        let o = &run.plot_options;
        let bytes = match p.kind {
            PlotKind::Forest => plot::forest_plot(&report, o, p.format)?,
            PlotKind::Bubble => plot::bubble_plot(&report, o, p.format)?,
            PlotKind::Funnel => plot::funnel_plot(&report, o, p.format)?,
        };
        drawn.push((&p.target, bytes));
    }
    if let Some(t) = &run.json {
        let mut buf = Vec::new();
        report::json::write(&report, &mut buf).map_err(|e| io_err("JSON", e))?;
        output::emit(t, &buf)?;
    }
    if let Some(t) = &run.table {
        let mut buf = Vec::new();
        report::table::write(&report, &mut buf).map_err(|e| io_err("table", e))?;
        output::emit(t, &buf)?;
    }
    for (target, bytes) in drawn {
        output::emit(target, &bytes)?;
    }
    if run.text {
        output::emit(&Target::Stdout, report::text::render(&report).as_bytes())?;
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
        let Command::Fit(a) = Cli::try_parse_from(v).unwrap().command;
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
        assert_eq!(p.plots[1].format, plot::Format::Png);
        assert_eq!(p.plot_options.sort, plot::SortKey::Precision);
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
