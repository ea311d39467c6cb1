//! The plot flags of `pondus fit` (the "Plots" group of `--help`) and their
//! checks: which plot files are asked for, their sizes, resolution and
//! options, and which flags need which plot.

use super::{PlotKind, PlotRequest};
use crate::cli::outputs::Target;
use clap::Args;
use pondus::error::{Error, Result};
use pondus::render::figure;
use std::path::PathBuf;

/// The plots and their settings.
#[derive(Debug, Args)]
#[command(next_help_heading = "Plots")]
pub struct PlotArgs {
    /// Draw a forest plot into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    pub forest: Option<PathBuf>,
    /// Order of the forest plot's rows: input, effect, precision, or a moderator's name.
    #[arg(long, value_name = "KEY")]
    pub sort: Option<String>,
    /// Title of the forest plot [default: what its rows show].
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Title of the forest plot's value axis [default: the reading scale in words, for example "Odds ratio (log scale)"].
    #[arg(long, value_name = "TEXT")]
    pub x_label: Option<String>,
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
        }
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
