//! The plot flags of `pondus fit` (the "Plots" group of `--help`) and their
//! checks: which plot files are asked for, their sizes, resolution and
//! options, and which flags need which plot.

use super::{PlotKind, PlotRequest};
use crate::cli::outputs::Target;
use clap::Args;
use pondus::error::{Error, Result};
use pondus::render::figure;
use pondus::support::flag::Flag;
use std::path::PathBuf;

/// The plots and their settings.
#[derive(Debug, Args)]
#[command(next_help_heading = "Plots")]
pub struct PlotArgs {
    /// Draw a forest plot into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    pub forest: Option<PathBuf>,
    /// Order of the forest plot's rows: input, effect, precision, or any column's name (numbers ascending, text in alphabetical order, a categorical moderator's levels in their order).
    #[arg(long, value_name = "KEY")]
    pub sort: Option<String>,
    /// Title of the forest plot [default: what its rows show].
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Title of the forest plot's value axis [default: the reading scale in words, for example "Odds ratio (log scale)"].
    #[arg(long, value_name = "TEXT")]
    pub x_label: Option<String>,
    /// Columns of the data shown as text beside the forest plot's labels, as written in the file (for example n,year,country); headed by their names.
    #[arg(long, value_name = "COL,COL", value_delimiter = ',')]
    pub columns: Vec<String>,
    /// Group the forest plot's rows by this column, with a heading per group (a categorical moderator's groups also get their own averages), or none [default: the first categorical moderator].
    #[arg(long, value_name = "COL")]
    pub group_by: Option<String>,
    /// Size of every plot's ordinary text in points, the em at the figure's physical size of 96 pixels per inch (5 to 30): the forest plot's row text, the other plots' tick labels, legends and captions [default: about 8, smaller in a forest plot of many rows]. Titles, headers and axis titles keep their proportions to it, and the layout makes room.
    #[arg(long, value_name = "PT", allow_negative_numbers = true)]
    pub font_size: Option<f64>,
    /// Mark each study's fitted value (from the moderators) in the forest plot.
    #[arg(long)]
    pub show_fitted: bool,
    /// Draw a bubble plot (effect against a moderator, with the fitted line) into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    pub bubble: Option<PathBuf>,
    /// The moderator on the bubble plot's x axis [default: the first numeric one].
    #[arg(long, value_name = "NAME")]
    pub bubble_x: Option<String>,
    /// Draw a funnel plot (effect or residual against its standard error) into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    pub funnel: Option<PathBuf>,
    /// Shade the funnel plot's significance contours (p = 0.10, 0.05, 0.01).
    #[arg(long)]
    pub contours: bool,
    /// Draw the sensitivity plot (average effect and moderator coefficients under each adjustment; needs --small-study or --selection) into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub sensitivity_plot: Option<PathBuf>,
    /// Draw the influence plot (each study's move of the moderator coefficients, in standard errors, against its leverage, with the cut-offs; needs --influence) into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    pub influence_plot: Option<PathBuf>,
    /// Width of every plot in pixels [default: automatic].
    #[arg(long, value_name = "PIXELS")]
    pub width: Option<u32>,
    /// Height of every plot in pixels [default: automatic; a forest plot grows with its rows].
    #[arg(long, value_name = "PIXELS")]
    pub height: Option<u32>,
    /// Resolution of .png plots in dots per inch [default: 150]; 300 or 600 for print. Scales the whole figure; --width and --height stay in pixels at 96 per inch, which also fix a .pdf's page size.
    #[arg(long, value_name = "N")]
    pub dpi: Option<u32>,
}

impl PlotArgs {
    /// The requested plots with their flags, each format from its file's extension.
    ///
    /// # Errors
    /// [`Error::Usage`] for an extension other than .svg, .png or .pdf.
    pub fn requests(&self) -> Result<Vec<(&'static str, PlotRequest)>> {
        let mut plots = Vec::new();
        for (flag, kind, path) in [
            ("--forest", PlotKind::Forest, &self.forest),
            ("--bubble", PlotKind::Bubble, &self.bubble),
            ("--funnel", PlotKind::Funnel, &self.funnel),
            (
                "--sensitivity-plot",
                PlotKind::Sensitivity,
                &self.sensitivity_plot,
            ),
            (
                "--influence-plot",
                PlotKind::Influence,
                &self.influence_plot,
            ),
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
        Ok(plots)
    }

    /// Checks that each plot setting has its plot (`report`: an HTML page,
    /// which draws every plot, is requested).
    ///
    /// # Errors
    /// [`Error::Usage`] naming the setting and the plot to add.
    pub fn check_needs(&self, report: bool) -> Result<()> {
        needs(
            "--sort",
            self.sort.is_some(),
            "--forest",
            self.forest.is_some() || report,
        )?;
        let forest = self.forest.is_some() || report;
        needs("--columns", !self.columns.is_empty(), "--forest", forest)?;
        needs("--group-by", self.group_by.is_some(), "--forest", forest)?;
        let any_plot = forest
            || self.bubble.is_some()
            || self.funnel.is_some()
            || self.sensitivity_plot.is_some()
            || self.influence_plot.is_some();
        needs(
            "--font-size",
            self.font_size.is_some(),
            "--forest, --bubble, --funnel, --sensitivity-plot, --influence-plot or --report",
            any_plot,
        )?;
        check_font_size(self.font_size)?;
        for (n, c) in self.columns.iter().enumerate() {
            if c.trim().is_empty() {
                return Err(Error::usage(
                    "--columns",
                    "give column names separated by commas, without empty names (for example n,year)",
                ));
            }
            if self.columns[..n].contains(c) {
                return Err(Error::usage(
                    "--columns",
                    format!("'{c}' is given twice; name each column once"),
                ));
            }
        }
        if self
            .group_by
            .as_deref()
            .is_some_and(|g| g.trim().is_empty())
        {
            return Err(Error::usage(
                "--group-by",
                "give a column's name, or none for no groups",
            ));
        }
        for (flag, text) in [("--title", &self.title), ("--x-label", &self.x_label)] {
            needs(
                flag,
                text.is_some(),
                "--forest",
                self.forest.is_some() || report,
            )?;
            if let Some(t) = text {
                if t.trim().is_empty() || t.chars().any(char::is_control) {
                    return Err(Error::usage(
                        flag,
                        "give some text on one line (no line breaks or control characters)",
                    ));
                }
            }
        }
        needs(
            "--show-fitted",
            self.show_fitted,
            "--forest",
            self.forest.is_some() || report,
        )?;
        needs(
            "--bubble-x",
            self.bubble_x.is_some(),
            "--bubble",
            self.bubble.is_some() || report,
        )?;
        needs(
            "--contours",
            self.contours,
            "--funnel",
            self.funnel.is_some() || report,
        )
    }

    /// Checks `--width` and `--height`: given only with a plot (`any_plot`)
    /// and within [`figure::SIZE_RANGE`].
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag.
    pub fn check_size(&self, any_plot: bool) -> Result<()> {
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
        Ok(())
    }

    /// Checks `--dpi`: given only with a .png plot among `formats`, and
    /// within [`figure::DPI_RANGE`].
    ///
    /// # Errors
    /// [`Error::Usage`] naming `--dpi`.
    pub fn check_dpi(&self, formats: &[figure::Format]) -> Result<()> {
        check_dpi(self.dpi, formats)
    }

    /// The plot settings.
    pub fn options(&self) -> figure::PlotOptions {
        figure::PlotOptions {
            dpi: self.dpi.unwrap_or(figure::DEFAULT_DPI),
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
            title: self.title.clone(),
            x_label: self.x_label.clone(),
            columns: self.columns.clone(),
            group_by: self
                .group_by
                .as_deref()
                .map(figure::GroupBy::parse)
                .unwrap_or_default(),
            font_size: self.font_size,
        }
    }

    /// The columns the plots need carried from the data (each with the
    /// flag naming it): `--columns`, and the `--group-by` and `--sort`
    /// columns that are not among `moderators` (whose values the result
    /// holds already), each once.
    pub fn shown(&self, moderators: &[&str]) -> Vec<(String, Flag)> {
        let mut out: Vec<(String, Flag)> = self
            .columns
            .iter()
            .map(|c| (c.clone(), Flag::Columns))
            .collect();
        for (v, flag, words) in [
            (&self.group_by, Flag::GroupBy, &["none"][..]),
            (
                &self.sort,
                Flag::Sort,
                &["input", "effect", "precision"][..],
            ),
        ] {
            if let Some(v) = v {
                if !words.contains(&v.as_str())
                    && !moderators.contains(&v.as_str())
                    && !out.iter().any(|(c, _)| c == v)
                {
                    out.push((v.clone(), flag));
                }
            }
        }
        out
    }
}

/// Checks a `--dpi` value: only with a PNG among `formats`, within [`figure::DPI_RANGE`].
///
/// # Errors
/// [`Error::Usage`] naming `--dpi`.
pub fn check_dpi(dpi: Option<u32>, formats: &[figure::Format]) -> Result<()> {
    let Some(dpi) = dpi else {
        return Ok(());
    };
    if !formats.contains(&figure::Format::Png) {
        return Err(Error::usage(
            "--dpi",
            "sets the resolution of a .png plot, and no plot is a .png; an .svg or .pdf is \
             vector graphics, sharp at any size",
        ));
    }
    let (lo, hi) = figure::DPI_RANGE;
    if !(lo..=hi).contains(&dpi) {
        return Err(Error::usage(
            "--dpi",
            format!(
                "{dpi} dots per inch is outside {lo} to {hi}; journals commonly ask for 300 to 600"
            ),
        ));
    }
    Ok(())
}

/// Checks a `--font-size` value: within [`figure::FONT_PT_RANGE`] (which
/// also refuses NaN and infinities).
///
/// # Errors
/// [`Error::Usage`] naming `--font-size`.
pub fn check_font_size(font_size: Option<f64>) -> Result<()> {
    let Some(pt) = font_size else {
        return Ok(());
    };
    let (lo, hi) = figure::FONT_PT_RANGE;
    if !(lo..=hi).contains(&pt) {
        return Err(Error::usage(
            "--font-size",
            format!(
                "{pt} points is outside {lo} to {hi}; journals commonly ask for 7 to 12 point \
                 text at the printed size"
            ),
        ));
    }
    Ok(())
}

/// An error when a plot setting (`flag`, `given`) comes without its plot (`present`).
fn needs(flag: &str, given: bool, plot: &str, present: bool) -> Result<()> {
    if given && !present {
        Err(Error::usage(
            flag,
            format!("applies to a plot; add {plot} FILE.svg (or .png, .pdf)"),
        ))
    } else {
        Ok(())
    }
}
