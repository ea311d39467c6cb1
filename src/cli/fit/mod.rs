//! `pondus fit`: read a table of per-study effects, fit the model, and write
//! every requested output. The flags come in groups (one clap struct each,
//! flattened into [`FitArgs`] in the order `--help` lists them); each group
//! checks its own flags, and [`FitArgs::check`] checks them in that order.

mod answers;
pub(crate) mod groups;
mod plots;
pub(crate) use groups::{check_dpi, check_font_size};
mod reading;

use groups::{
    ClusterArgs, DiagnosticArgs, InputArgs, InterpretationArgs, ModelArgs, OutputArgs, PlotArgs,
    ReportArgs,
};

use answers::AnswerArgs;

use super::outputs::{self, Outputs, Target};
use super::{invocation, stream_json, with_progress};
use clap::Args;
use pondus::error::Result;
use pondus::fit::{self, AnswerSettings, FitSettings};
use pondus::input::Source;
use pondus::render;
use pondus::render::figure;

/// Options of `pondus fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// The input file, its measure and columns.
    #[command(flatten)]
    pub input: InputArgs,
    /// The model: moderators, estimator, tests, predictions.
    #[command(flatten)]
    pub model: ModelArgs,
    /// The JSON result and the per-study table.
    #[command(flatten)]
    pub output: OutputArgs,
    /// The plots and their settings.
    #[command(flatten)]
    pub plots: PlotArgs,
    /// The terminal report and the HTML page.
    #[command(flatten)]
    pub report: ReportArgs,
    /// Probes, level comparisons, regions and artifact corrections.
    #[command(flatten)]
    pub interpretation: InterpretationArgs,
    /// Robustness checks.
    #[command(flatten)]
    pub diagnostics: DiagnosticArgs,
    /// Dependent effects nested in clusters.
    #[command(flatten)]
    pub clusters: ClusterArgs,
    /// Shrunken estimates and the chance of exceeding a value.
    #[command(flatten)]
    pub answers: AnswerArgs,
}

/// The plots `fit` draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotKind {
    /// `--forest`.
    Forest,
    /// `--bubble`.
    Bubble,
    /// `--funnel`.
    Funnel,
    /// `--sensitivity-plot`.
    Sensitivity,
    /// `--influence-plot`.
    Influence,
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

impl FitArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`pondus::Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<FitRun> {
        let (measure, columns) = self.input.columns()?;
        let model = self.model.check()?;
        let moderator_names: Vec<&str> = model.moderators.iter().map(|m| m.name.as_str()).collect();
        let columns = columns.with_shown(self.plots.shown(&moderator_names));
        let source = Source::from_arg(&self.input.file);
        let (json, table) = self.output.targets();
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some(t) = &table {
            outs.push(("--table", t));
        }
        let plots = self.plots.requests()?;
        if self.plots.sensitivity_plot.is_some()
            && !self.diagnostics.small_study
            && self.diagnostics.selection.is_none()
        {
            return Err(pondus::Error::usage(
                "--sensitivity-plot",
                "draws the adjustments of --small-study or --selection; add one of them",
            ));
        }
        if self.plots.influence_plot.is_some() && !self.diagnostics.influence {
            return Err(pondus::Error::usage(
                "--influence-plot",
                "draws the influence view of --influence; add --influence",
            ));
        }
        self.plots.check_needs(self.report.report.is_some())?;
        let report = self.report.target()?;
        self.plots
            .check_size(!plots.is_empty() || report.is_some())?;
        let formats: Vec<figure::Format> = plots.iter().map(|(_, p)| p.format).collect();
        self.plots.check_dpi(&formats)?;
        if let Some(name) = &self.plots.bubble_x {
            self.model.known("--bubble-x", name)?;
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
                    self.input.label.clone().unwrap_or_else(|| "study".into()),
                    self.input.label.is_some(),
                ),
                moderators: model.moderators,
                interactions: model.interactions,
                options: model.options,
                predictions: model.predictions,
                interpret: self.interpretation.check(&self.model, self.input.measure)?,
                diagnostics: self.diagnostics.check(&self.model)?,
                dependence: self.clusters.check(&self.diagnostics)?,
                answers: AnswerSettings {
                    spread_by: model.spread_by,
                    ..self.answers.check()?
                },
            },
            json,
            table,
            plots: plots.into_iter().map(|(_, p)| p).collect(),
            plot_options: self.plots.options(),
            text: !self.report.quiet && !to_stdout,
            report,
            invocation: invocation(),
        })
    }
}

/// Runs a checked `fit`: read, analyse, write every requested output.
///
/// # Errors
/// Any library error.
pub fn run_fit(run: &FitRun) -> Result<()> {
    // A regular file is read by the library in pieces (a CSV file is never
    // held whole); standard input, pipes and the like are read whole here.
    let bytes = match &run.source {
        Source::File(p) if p.is_file() => {
            run.source.check_opens()?;
            None
        }
        _ => Some(run.source.read_all()?),
    };
    // Nothing is written or printed (`--quiet` without outputs): the
    // per-study records would never be read.
    let nothing_shown = run.json.is_none()
        && run.table.is_none()
        && run.plots.is_empty()
        && run.report.is_none()
        && !run.text;
    let detail = if nothing_shown {
        fit::Detail::Summary
    } else {
        fit::Detail::Full
    };
    let report = with_progress(
        run.settings
            .diagnostics
            .permutations
            .map(|p| p.permutations as u64),
        "permuting {bar:30} {pos}/{len} arrangements ({eta})",
        |tick| match (bytes, &run.source) {
            (None, Source::File(path)) => {
                fit::run_file(&run.settings, &run.source.name(), path, tick, detail)
            }
            (bytes, _) => fit::run_owned(
                &run.settings,
                &run.source.name(),
                bytes.unwrap_or_default(),
                tick,
                detail,
            ),
        },
    )?;
    // Every output is rendered before any is placed (see `Outputs`: the
    // streamed ones into their temporary files), so an output the model
    // cannot support leaves no partial set behind.
    let mut drawn = Vec::with_capacity(run.plots.len());
    for p in &run.plots {
        let o = &run.plot_options;
        let (flag, bytes) = match p.kind {
            PlotKind::Forest => ("--forest", figure::forest_plot(&report, o, p.format)?),
            PlotKind::Bubble => ("--bubble", figure::bubble_plot(&report, o, p.format)?),
            PlotKind::Funnel => ("--funnel", figure::funnel_plot(&report, o, p.format)?),
            PlotKind::Sensitivity => (
                "--sensitivity-plot",
                figure::sensitivity_plot(&report, o, p.format)?,
            ),
            PlotKind::Influence => (
                "--influence-plot",
                figure::influence_plot(&report, o, p.format)?,
            ),
        };
        drawn.push((flag, &p.target, bytes));
    }
    let mut out = Outputs::new();
    // The JSON document and the per-study table grow with the studies:
    // they are written straight into their temporary files.
    if let Some(t) = &run.json {
        out.add_streamed("--json", t, |w| stream_json(&report, w));
    }
    if let Some(t) = &run.table {
        out.add_streamed("--table", t, |w| render::table::write(&report, w));
    }
    for (flag, target, bytes) in drawn {
        out.add(flag, target, bytes);
    }
    if let Some(t) = &run.report {
        let (figures, figure_notes) = figure::page_figures(&report, &run.plot_options)?;
        let prov = render::html::Provenance {
            command: run.invocation.clone(),
            version: report.tool.version.clone(),
            input_sha256: Some(report.input.sha256.clone()),
            seed: report.permutation.as_ref().and_then(|p| p.seed),
        };
        out.add(
            "--report",
            t,
            render::html::fit_page(&report, &figures, &figure_notes, &prov),
        );
    }
    if run.text {
        out.print(render::text::render_at(
            &report,
            crate::cli::style::text_width(),
        ));
    }
    out.write()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;
    use pondus::error::Error;

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
