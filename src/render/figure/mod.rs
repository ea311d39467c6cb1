//! Plots of a [`FitReport`]: forest, bubble and funnel plots as SVG or PNG.
//!
//! Every plot is drawn from the public result only. Each plot module builds
//! a [`Scene`] (shapes in pixel coordinates, backend-independent); [`encode`]
//! draws the scene with plotters into SVG text or PNG bytes. Text uses the
//! bundled DejaVu Sans (`assets/fonts/`, Bitstream Vera licence with
//! public-domain DejaVu changes), so PNG text looks the same on every
//! machine; SVG names the family `DejaVu Sans, sans-serif`.

mod axis;
pub mod bubble;
pub mod forest;
pub mod funnel;
pub mod power;
mod regions;
pub mod scene;
pub mod sensitivity;

pub(crate) use axis::{Axis, Frame};
pub use scene::{Align, Scene};

use crate::effect::{Measure, ReadingScale};
use crate::error::{Error, Result};
use crate::result::{FitReport, Inference, MeasureId, Tau2Method};
use crate::support::flag::Flag;
use crate::support::format as fmt;
use std::path::Path;

/// The bundled font (DejaVu Sans; licence in `assets/fonts/LICENSE-DejaVu.txt`).
pub static FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");

/// The output format of a plot.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Scalable vector graphics (text).
    Svg,
    /// Portable network graphics (RGB).
    Png,
}

impl Format {
    /// The format named by a path's extension (`.svg` or `.png`, any case).
    ///
    /// # Errors
    /// [`Error::Usage`] naming `flag` for standard output or any other extension.
    pub fn from_path(flag: &str, path: &Path) -> Result<Format> {
        if path.as_os_str() == "-" {
            return Err(Error::usage(
                flag,
                "a plot needs a file path ending in .svg or .png, not standard output ('-')",
            ));
        }
        let ext = path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase());
        match ext.as_deref() {
            Some("svg") => Ok(Format::Svg),
            Some("png") => Ok(Format::Png),
            _ => Err(Error::usage(
                flag,
                format!(
                    "'{}': the plot format follows the file extension; use .svg or .png",
                    path.display()
                ),
            )),
        }
    }
}

/// How the rows of a forest plot are ordered.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub enum SortKey {
    /// As in the input file.
    #[default]
    Input,
    /// By effect, smallest first.
    Effect,
    /// Most precise (smallest variance) first.
    Precision,
    /// By a moderator's value (numbers ascending, levels in their order).
    Moderator(String),
}

impl SortKey {
    /// Parses `effect`, `precision`, `input` or a moderator name.
    pub fn parse(text: &str) -> SortKey {
        match text {
            "input" => SortKey::Input,
            "effect" => SortKey::Effect,
            "precision" => SortKey::Precision,
            name => SortKey::Moderator(name.to_string()),
        }
    }
}

/// Options shared by the plots.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PlotOptions {
    /// Width in pixels (None: automatic).
    pub width: Option<u32>,
    /// Height in pixels (None: automatic, growing with the rows of a forest plot).
    pub height: Option<u32>,
    /// Row order of the forest plot.
    pub sort: SortKey,
    /// Show each study's fitted value in the forest plot.
    pub show_fitted: bool,
    /// The moderator on the x axis of the bubble plot (None: the first numeric one).
    pub bubble_x: Option<String>,
    /// Draw significance contours in the funnel plot.
    pub contours: bool,
}

/// Smallest and largest accepted width or height in pixels.
pub const SIZE_RANGE: (u32, u32) = (200, 30_000);

/// Draws a scene as SVG text or PNG bytes.
///
/// # Errors
/// [`Error::Io`] (action "drawing") when plotters or the PNG encoder fails;
/// [`Error::Usage`] for a PNG of more than [`scene::MAX_PNG_PIXELS`] pixels.
pub fn encode(scene: &Scene, format: Format) -> Result<Vec<u8>> {
    scene::encode(scene, format, Flag::Width)
}

/// Renders the forest plot of `report`.
///
/// # Errors
/// [`Error::Usage`] for an option the model cannot support; drawing errors.
pub fn forest_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    scene::encode(&forest::scene(report, opts)?, format, Flag::Forest)
}

/// Renders the bubble plot of `report`.
///
/// # Errors
/// [`Error::Usage`] naming `--bubble` or `--bubble-x` when the model has no
/// moderator to draw against; drawing errors.
pub fn bubble_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    scene::encode(&bubble::scene(report, opts)?, format, Flag::Bubble)
}

/// Renders the funnel plot of `report`.
///
/// # Errors
/// Drawing errors.
pub fn funnel_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    scene::encode(&funnel::scene(report, opts)?, format, Flag::Funnel)
}

/// Renders the sensitivity plot of `report` (with `--small-study` or `--selection`).
///
/// # Errors
/// [`Error::Usage`] when the report has no sensitivity view; drawing errors.
pub fn sensitivity_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    scene::encode(
        &sensitivity::scene(report, opts)?,
        format,
        Flag::SensitivityPlot,
    )
}

/// One picture for a page (the HTML report): inline SVG markup and words
/// describing it for readers who cannot see it.
#[derive(Debug, Clone)]
pub struct PageFigure {
    /// Which plot ("forest", "bubble", "funnel" or "sensitivity").
    pub kind: &'static str,
    /// A short title.
    pub title: String,
    /// What the picture shows, in words (used as its accessible description).
    pub description: String,
    /// The SVG element, without XML declaration or namespace attribute.
    pub svg: String,
}

/// The forest, bubble (when the model has a moderator) and funnel plots of
/// `report` as inline SVG for a page. A plot the model cannot support is left
/// out with the reason in the returned notes.
///
/// # Errors
/// Drawing errors.
pub fn page_figures(
    report: &FitReport,
    opts: &PlotOptions,
) -> Result<(Vec<PageFigure>, Vec<String>)> {
    let mut figures = Vec::new();
    let mut notes = Vec::new();
    let k = report.k;
    let measure = &report.measure.description;
    // The page shows a forest plot when it can; with more studies than a
    // forest plot holds, the page says so (the funnel shows them all)
    // rather than failing in the name of --forest, which was not given.
    if report.studies.len() > forest::MAX_STUDIES {
        notes.push(format!(
            "No forest plot: {} studies are more rows than a forest plot holds (at most {}); the \
             funnel plot below shows every study.",
            report.studies.len(),
            forest::MAX_STUDIES
        ));
    } else {
        figures.push(PageFigure {
            kind: "forest",
            title: "Forest plot".into(),
            description: format!(
                "Forest plot: each of the {k} studies' effects ({measure}) with its confidence \
                 interval, marker size by weight, and the pooled result at the bottom."
            ),
            svg: scene::encode_inline(&forest::scene(report, opts)?)?,
        });
    }
    match bubble::scene(report, opts) {
        Ok(sc) => {
            let name = opts
                .bubble_x
                .clone()
                .or_else(|| {
                    report
                        .model
                        .moderators
                        .iter()
                        .find(|m| matches!(m.kind, crate::result::ModeratorKind::Numeric { .. }))
                        .or(report.model.moderators.first())
                        .map(|m| m.name.clone())
                })
                .unwrap_or_default();
            figures.push(PageFigure {
                kind: "bubble",
                title: format!("Effect against {name}"),
                description: format!(
                    "Bubble plot: each study's effect against its value of {name}, circle area by \
                     weight, with the fitted meta-regression and its bands."
                ),
                svg: scene::encode_inline(&sc)?,
            });
        }
        Err(Error::Usage { message, .. }) => notes.push(format!("No bubble plot: {message}.")),
        Err(e) => return Err(e),
    }
    figures.push(PageFigure {
        kind: "funnel",
        title: "Funnel plot".into(),
        description: format!(
            "Funnel plot: each study's {} against its standard error, with the dashed \
             pseudo-confidence region where studies would fall from sampling error alone.",
            if report.model.moderators.is_empty() {
                "effect"
            } else {
                "residual from the model"
            }
        ),
        svg: scene::encode_inline(&funnel::scene(report, opts)?)?,
    });
    if report.sensitivity.is_some() {
        figures.push(PageFigure {
            kind: "sensitivity",
            title: "Estimates under each adjustment".into(),
            description: "Sensitivity plot: the average effect and each moderator coefficient as \
                          fitted and under each adjustment for small-study effects and selection, \
                          each with its confidence interval; the fitted interval is a pale band \
                          behind each panel."
                .into(),
            svg: scene::encode_inline(&sensitivity::scene(report, opts)?)?,
        });
    }
    Ok((figures, notes))
}

// ------------------------------------------------------------- shared look

/// The title (shortened to fit) and the subtitle naming the measure and the
/// input file, at the top left of every plot.
pub(crate) fn heading(sc: &mut Scene, report: &FitReport, title: &str, width: f64, margin: f64) {
    let fit = |text: &str, size: f64| scene::fit_text(text, size, width - 2.0 * margin);
    sc.text(
        (margin, 20.0),
        fit(title, size::TITLE),
        size::TITLE,
        palette::INK,
        Align::Left,
    );
    sc.text(
        (margin, 44.0),
        fit(
            &format!("{} · {}", report.measure.description, report.input.file),
            size::SMALL,
        ),
        size::SMALL,
        palette::MUTED,
        Align::Left,
    );
}

/// The palette (Okabe & Ito's colour-blind-safe set, plus greys). Every
/// meaning also has a shape or line style, so no information is carried by
/// colour alone.
pub(crate) mod palette {
    use plotters::style::RGBColor;
    /// Text and axes.
    pub const INK: RGBColor = RGBColor(0x22, 0x27, 0x33);
    /// Secondary text.
    pub const MUTED: RGBColor = RGBColor(0x5C, 0x63, 0x70);
    /// Grid and guide lines.
    pub const GUIDE: RGBColor = RGBColor(0xB4, 0xB9, 0xC2);
    /// Zebra band behind alternate rows.
    pub const BAND: RGBColor = RGBColor(0xF1, 0xF3, 0xF6);
    /// Studies (discs).
    pub const STUDY: RGBColor = RGBColor(0x00, 0x72, 0xB2);
    /// The overall estimate (diamond).
    pub const POOLED: RGBColor = RGBColor(0xD5, 0x5E, 0x00);
    /// Subgroup estimates (outlined diamonds).
    pub const GROUP: RGBColor = RGBColor(0xE6, 0x9F, 0x00);
    /// Prediction intervals (dashed).
    pub const PREDICT: RGBColor = RGBColor(0xCC, 0x79, 0xA7);
    /// Fitted values and the regression line.
    pub const FIT: RGBColor = RGBColor(0x00, 0x9E, 0x73);
    /// Background.
    pub const PAPER: RGBColor = RGBColor(0xFF, 0xFF, 0xFF);
}

/// Text sizes in plotters units (pixels of the line height).
pub(crate) mod size {
    /// Title.
    pub const TITLE: f64 = 19.0;
    /// Subtitle, axis titles.
    pub const LABEL: f64 = 14.0;
    /// Tick labels, captions.
    pub const SMALL: f64 = 12.5;
}

/// Splits `text` into lines no wider than `max` pixels.
pub(crate) fn wrap(text: &str, size: f64, max: f64) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if !line.is_empty() && scene::text_width(&candidate, size) > max {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// The axis title of an effect axis on the reading scale.
pub(crate) fn effect_axis_title(report: &FitReport) -> String {
    let name = measure_name(report);
    match report.measure.reading_scale {
        ReadingScale::Ratio => format!("{name} (log scale)"),
        ReadingScale::Correlation => format!("{name} (analysed as Fisher's z)"),
        ReadingScale::Same => name,
    }
}

/// Draws caption lines at the left margin, 17 pixels apart, the first at `cy`.
pub(crate) fn caption(sc: &mut Scene, lines: &[String], margin: f64, mut cy: f64) {
    for line in lines {
        sc.text(
            (margin, cy),
            line.clone(),
            size::SMALL,
            palette::MUTED,
            Align::Left,
        );
        cy += 17.0;
    }
}

/// Decimals that show values spread over `span` with about three significant digits.
pub(crate) fn decimals_for(span: f64) -> usize {
    if !(span.is_finite() && span > 0.0) {
        return 2;
    }
    (1.0 - span.log10().floor()).clamp(1.0, 5.0) as usize
}

/// What the effect is called on its reading scale, for axis titles.
pub(crate) fn measure_name(report: &FitReport) -> String {
    if let Some(r) = &report.measure.reading_name {
        return r.clone();
    }
    match report.measure.id {
        MeasureId::Measure(Measure::Smd) => "Hedges' g".into(),
        MeasureId::Measure(Measure::RiskDiff) => "risk difference".into(),
        MeasureId::Measure(Measure::Slope) => "slope".into(),
        _ => "effect".into(),
    }
}

/// The caption line describing the model (estimator, τ², inference).
pub(crate) fn model_line(report: &FitReport) -> String {
    let method = match report.model.tau2_method {
        Tau2Method::None => "common-effect model (τ² = 0)".to_string(),
        m => format!(
            "τ² = {} ({})",
            fmt::plot_num(
                report.tau2.estimate,
                decimals_for(report.tau2.estimate).max(3)
            ),
            m.id().to_uppercase()
        ),
    };
    let inference = if report.model.inference == Inference::Kh {
        "Knapp–Hartung intervals"
    } else {
        "z-based intervals"
    };
    let residual = if report.model.moderators.is_empty() {
        ""
    } else {
        "residual "
    };
    let mut line = format!(
        "k = {} · {residual}{method} · {residual}I² = {:.0}% · {inference}",
        report.k,
        100.0 * report.heterogeneity.i2
    );
    match report.excluded.len() {
        0 => {}
        1 => line.push_str(" · 1 row left out (see the report)"),
        n => line.push_str(&format!(" · {n} rows left out (see the report)")),
    }
    line
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_use_a_true_minus() {
        assert_eq!(fmt::plot_num(-0.25, 2), "\u{2212}0.25");
        assert_eq!(fmt::plot_num(-0.001, 2), "0.00");
        assert_eq!(fmt::plot_num(1.5, 1), "1.5");
    }

    #[test]
    fn format_follows_the_extension() {
        assert_eq!(
            Format::from_path("--forest", Path::new("a/b.SVG")).unwrap(),
            Format::Svg
        );
        assert_eq!(
            Format::from_path("--forest", Path::new("b.png")).unwrap(),
            Format::Png
        );
        let e = Format::from_path("--forest", Path::new("b.pdf")).unwrap_err();
        assert!(e.to_string().contains("--forest") && e.to_string().contains(".svg"));
        assert!(Format::from_path("--forest", Path::new("-")).is_err());
    }
}
