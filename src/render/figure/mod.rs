//! Plots of a [`FitReport`]: forest, bubble and funnel plots as SVG, PNG or PDF.
//!
//! Every plot is drawn from the public result only. Each plot module builds
//! a [`Scene`] (shapes in CSS pixels, sub-pixel precision); `svg.rs` writes
//! it as SVG, and `export.rs` makes the PNG (rasterised by resvg at the
//! requested dpi) and the PDF (converted by svg2pdf) from that same SVG, so
//! the three formats agree. Text uses the bundled DejaVu Sans
//! (`assets/fonts/`, Bitstream Vera licence with public-domain DejaVu
//! changes); an SVG embeds the subset of it that its text uses (`font.rs`).

mod axis;
pub mod bubble;
pub mod export;
pub mod font;
pub mod forest;
pub mod funnel;
pub mod influence;
mod marks;
pub mod power;
mod regions;
pub mod scene;
pub mod sensitivity;
mod svg;
#[cfg(test)]
mod typeset_tests;

pub(crate) use axis::{label_step, Axis, Frame};
pub use scene::{Align, Scene};

use crate::effect::{Measure, ReadingScale};
use crate::error::{Error, Result};
use crate::result::{FitReport, MeasureId, Tau2Method};
use crate::support::flag::Flag;
use crate::support::format as fmt;
use std::path::Path;

pub use font::FONT;

/// The output format of a plot.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Scalable vector graphics (text).
    Svg,
    /// Portable network graphics (RGB), rasterised at the requested dpi.
    Png,
    /// Portable document format: one vector page of the figure's physical size.
    Pdf,
}

impl Format {
    /// The format named by a path's extension (`.svg`, `.png` or `.pdf`, any case).
    ///
    /// # Errors
    /// [`Error::Usage`] naming `flag` for standard output or any other extension.
    pub fn from_path(flag: &str, path: &Path) -> Result<Format> {
        if path.as_os_str() == "-" {
            return Err(Error::usage(
                flag,
                "a plot needs a file path ending in .svg, .png or .pdf, not standard output ('-')",
            ));
        }
        let ext = path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase());
        match ext.as_deref() {
            Some("svg") => Ok(Format::Svg),
            Some("png") => Ok(Format::Png),
            Some("pdf") => Ok(Format::Pdf),
            _ => Err(Error::usage(
                flag,
                format!(
                    "'{}': the plot format follows the file extension; use .svg, .png or .pdf",
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
    /// By a moderator's value (numbers ascending, levels in their order) or
    /// by another column of the data carried in each study's
    /// [`cells`](crate::result::Study::cells) (numbers ascending when every
    /// cell is a number, else text in alphabetical order; empty cells last).
    Column(String),
}

impl SortKey {
    /// Parses `effect`, `precision`, `input` or a column's name.
    pub fn parse(text: &str) -> SortKey {
        match text {
            "input" => SortKey::Input,
            "effect" => SortKey::Effect,
            "precision" => SortKey::Precision,
            name => SortKey::Column(name.to_string()),
        }
    }
}

/// How the rows of a forest plot are grouped.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub enum GroupBy {
    /// By the first categorical moderator, with each level's own average.
    #[default]
    Auto,
    /// Not grouped.
    Off,
    /// By a column: a categorical moderator (with each level's own average)
    /// or any column carried in each study's
    /// [`cells`](crate::result::Study::cells).
    Column(String),
}

impl GroupBy {
    /// Parses `none` or a column's name.
    pub fn parse(text: &str) -> GroupBy {
        match text {
            "none" => GroupBy::Off,
            name => GroupBy::Column(name.to_string()),
        }
    }
}

/// Options shared by the plots.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotOptions {
    /// Resolution of a PNG in dots per inch (the figure is scaled by `dpi / 96`).
    pub dpi: u32,
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
    /// The forest plot's title (None: a title saying what the rows are).
    pub title: Option<String>,
    /// The forest plot's value-axis title (None: the reading scale in words).
    pub x_label: Option<String>,
    /// Columns of the data drawn as text columns beside the forest plot's
    /// labels (each carried in the studies' [`cells`](crate::result::Study::cells)).
    pub columns: Vec<String>,
    /// How the forest plot's rows are grouped.
    pub group_by: GroupBy,
    /// Size of every figure's ordinary text in points, the em at the
    /// figure's physical size (None: the default sizes; see [`text_scale`]):
    /// the forest plot's row text, the other figures' tick labels, legends
    /// and captions. Titles, axis titles and headers keep their proportions
    /// to it, and the layouts make room for it.
    pub font_size: Option<f64>,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            dpi: DEFAULT_DPI,
            width: None,
            height: None,
            sort: SortKey::default(),
            show_fitted: false,
            bubble_x: None,
            contours: false,
            title: None,
            x_label: None,
            columns: Vec::new(),
            group_by: GroupBy::Auto,
            font_size: None,
        }
    }
}

/// Smallest and largest accepted width or height in pixels.
pub const SIZE_RANGE: (u32, u32) = (200, 30_000);

/// The PNG resolution when `--dpi` is not given (150: sharp on screens and
/// in draft prints; journals commonly ask for 300 to 600).
pub const DEFAULT_DPI: u32 = 150;

/// Smallest and largest accepted `--font-size`, in points.
pub const FONT_PT_RANGE: (f64, f64) = (5.0, 30.0);

/// Smallest and largest accepted `--dpi`.
pub const DPI_RANGE: (u32, u32) = (36, 1200);

/// Writes a scene as SVG text, PNG bytes (at `dpi`) or PDF bytes.
///
/// # Errors
/// [`Error::Io`] (action "drawing") when rasterising, converting or
/// encoding fails; [`Error::Usage`] naming `flag` for a PNG of more than
/// [`export::MAX_PNG_PIXELS`] pixels.
pub fn encode(scene: &Scene, format: Format, dpi: u32, flag: Flag) -> Result<Vec<u8>> {
    match format {
        Format::Svg => Ok(svg::standalone(scene)?.into_bytes()),
        // The PNG is drawn strip by strip from the scene's SVG, each strip
        // from the elements that reach it (see `export::png`).
        Format::Png => export::png(scene, dpi, flag),
        Format::Pdf => export::pdf(&svg::standalone(scene)?),
    }
}

/// A scene as an `<svg>` element for an HTML page (no font: the page embeds
/// it once for all its text and pictures, see [`font::font_face_rule`]).
pub fn encode_inline(scene: &Scene) -> String {
    svg::inline(scene)
}

/// Renders the forest plot of `report`.
///
/// # Errors
/// [`Error::Usage`] for an option the model cannot support; drawing errors.
pub fn forest_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    encode(
        &forest::scene(report, opts)?,
        format,
        opts.dpi,
        Flag::Forest,
    )
}

/// Renders the bubble plot of `report`.
///
/// # Errors
/// [`Error::Usage`] naming `--bubble` or `--bubble-x` when the model has no
/// moderator to draw against; drawing errors.
pub fn bubble_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    encode(
        &bubble::scene(report, opts)?,
        format,
        opts.dpi,
        Flag::Bubble,
    )
}

/// Renders the funnel plot of `report`.
///
/// # Errors
/// Drawing errors.
pub fn funnel_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    encode(
        &funnel::scene(report, opts)?,
        format,
        opts.dpi,
        Flag::Funnel,
    )
}

/// Renders the sensitivity plot of `report` (with `--small-study` or `--selection`).
///
/// # Errors
/// [`Error::Usage`] when the report has no sensitivity view; drawing errors.
pub fn sensitivity_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    encode(
        &sensitivity::scene(report, opts)?,
        format,
        opts.dpi,
        Flag::SensitivityPlot,
    )
}

/// Renders the influence plot of `report` (with `--influence`).
///
/// # Errors
/// [`Error::Usage`] when the report has no influence view; drawing errors.
pub fn influence_plot(report: &FitReport, opts: &PlotOptions, format: Format) -> Result<Vec<u8>> {
    encode(
        &influence::scene(report, opts)?,
        format,
        opts.dpi,
        Flag::InfluencePlot,
    )
}

/// One picture for a page (the HTML report): inline SVG markup and words
/// describing it for readers who cannot see it.
#[derive(Debug, Clone)]
pub struct PageFigure {
    /// Which plot ("forest", "bubble", "funnel", "sensitivity" or "influence").
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
            svg: encode_inline(&forest::scene(report, opts)?),
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
                description: match bubble::marked_by(report, opts) {
                    Some(by) => format!(
                        "Bubble plot: each study's effect against its value of {name}, marker area \
                         by weight and marker shape by its level of {by} (see the legend), with \
                         the fitted meta-regression at each level and its confidence band."
                    ),
                    None => format!(
                        "Bubble plot: each study's effect against its value of {name}, circle area \
                         by weight, with the fitted meta-regression and its bands."
                    ),
                },
                svg: encode_inline(&sc),
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
        svg: encode_inline(&funnel::scene(report, opts)?),
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
            svg: encode_inline(&sensitivity::scene(report, opts)?),
        });
    }
    if report.influence.is_some() {
        figures.push(PageFigure {
            kind: "influence",
            title: "How far each study moves the answer".into(),
            description: "Influence plot: for each study, how far leaving it out moves the \
                          moderator coefficients (the average without moderators), in standard \
                          errors, against its leverage; dashed lines mark the cut-offs and the \
                          flagged studies are named."
                .into(),
            svg: encode_inline(&influence::scene(report, opts)?),
        });
    }
    Ok((figures, notes))
}

// ------------------------------------------------------------- shared look

/// The title and the subtitle naming the measure and the input file, at
/// the top left of every plot, each wrapped to the page's width (a title
/// line every 24 pixels, a subtitle line every 17, times the text scale).
pub(crate) struct Heading {
    title: Vec<String>,
    subtitle: Vec<String>,
    margin: f64,
    k: f64,
}

impl Heading {
    /// The heading of a page `width` wide with side margins `margin`, its
    /// text sizes and positions times `k` ([`text_scale`]).
    pub(crate) fn new(
        report: &FitReport,
        title: &str,
        (width, margin): (f64, f64),
        k: f64,
    ) -> Heading {
        let max = width - 2.0 * margin;
        let subtitle = format!("{} · {}", report.measure.description, report.input.file);
        Heading {
            title: wrap_or_fit(title, size::TITLE * k, max),
            subtitle: wrap_or_fit(&subtitle, size::SMALL * k, max),
            margin,
            k,
        }
    }

    /// How much taller than one title line and one subtitle line it is.
    pub(crate) fn extra(&self) -> f64 {
        let k = self.k;
        24.0 * k * (self.title.len() - 1) as f64 + 17.0 * k * (self.subtitle.len() - 1) as f64
    }

    /// Draws it.
    pub(crate) fn draw(&self, sc: &mut Scene) {
        let (k, margin) = (self.k, self.margin);
        let mut y = 20.0 * k;
        for line in &self.title {
            sc.text(
                (margin, y),
                line.clone(),
                size::TITLE * k,
                palette::INK,
                Align::Left,
            );
            y += 24.0 * k;
        }
        let mut y = 44.0 * k + 24.0 * k * (self.title.len() - 1) as f64;
        for line in &self.subtitle {
            sc.text(
                (margin, y),
                line.clone(),
                size::SMALL * k,
                palette::MUTED,
                Align::Left,
            );
            y += 17.0 * k;
        }
    }
}

/// `text` wrapped to lines no wider than `max` at `size`, a word wider
/// than `max` shortened in the middle (keeping both ends, such as a file
/// path's folder and name); at least one line.
pub(crate) fn wrap_or_fit(text: &str, size: f64, max: f64) -> Vec<String> {
    let mut lines: Vec<String> = wrap(text, size, max)
        .into_iter()
        .map(|l| scene::fit_middle(&l, size, max))
        .collect();
    if lines.is_empty() {
        lines.push(String::new());
    }
    lines
}

/// The em of the figures' ordinary text (tick labels, legends, captions)
/// when `--font-size` is not given, in points: `size::SMALL` / 1.24
/// pixels at 96 pixels per inch, 72 points per inch, so 7.56 points.
pub const DEFAULT_TEXT_PT: f64 = size::SMALL / 1.24 * 72.0 / 96.0;

/// The factor by which a figure's text sizes (and the room around its
/// text) are multiplied for `--font-size PT`: PT is the em, in points at
/// the figure's physical size, of its ordinary text (the forest plot's row
/// text, the other figures' tick labels, legends and captions), so the
/// factor is PT / [`DEFAULT_TEXT_PT`]; 1 without `--font-size`.
pub fn text_scale(font_size: Option<f64>) -> f64 {
    font_size.map_or(1.0, |pt| pt / DEFAULT_TEXT_PT)
}

/// The scene text size (a line height in pixels; the em is `size / 1.24`,
/// see [`font::em`]) of text whose em is `pt` points at 96 pixels per inch.
pub(crate) fn size_of_pt(pt: f64) -> f64 {
    pt * export::CSS_DPI / 72.0 * 1.24
}

/// The em in points of text of scene size `size` (inverse of [`size_of_pt`]).
pub(crate) fn pt_of_size(size: f64) -> f64 {
    size / 1.24 * 72.0 / export::CSS_DPI
}

/// The palette (Okabe & Ito's colour-blind-safe set, plus greys). Every
/// meaning also has a shape or line style, so no information is carried by
/// colour alone.
pub(crate) mod palette {
    use super::scene::Rgb;
    /// Text and axes.
    pub const INK: Rgb = Rgb(0x22, 0x27, 0x33);
    /// Secondary text.
    pub const MUTED: Rgb = Rgb(0x5C, 0x63, 0x70);
    /// Grid and guide lines.
    pub const GUIDE: Rgb = Rgb(0xB4, 0xB9, 0xC2);
    /// Zebra band behind alternate rows.
    pub const BAND: Rgb = Rgb(0xF1, 0xF3, 0xF6);
    /// Studies (discs).
    pub const STUDY: Rgb = Rgb(0x00, 0x72, 0xB2);
    /// The overall estimate (diamond).
    pub const POOLED: Rgb = Rgb(0xD5, 0x5E, 0x00);
    /// Subgroup estimates (outlined diamonds).
    pub const GROUP: Rgb = Rgb(0xE6, 0x9F, 0x00);
    /// Prediction intervals (dashed).
    pub const PREDICT: Rgb = Rgb(0xCC, 0x79, 0xA7);
    /// Fitted values and the regression line.
    pub const FIT: Rgb = Rgb(0x00, 0x9E, 0x73);
    /// Background.
    pub const PAPER: Rgb = Rgb(0xFF, 0xFF, 0xFF);
}

/// Text sizes as line heights in pixels (the em is `size / 1.24`, see [`font::em`]).
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

/// The axis title of an effect axis on the reading scale, in words: what
/// the numbers on the axis are ("Correlation (r)", "Odds ratio (log
/// scale)", "Standardised mean difference (Hedges' g)").
pub(crate) fn effect_axis_title(report: &FitReport) -> String {
    let words = match report.measure.id {
        MeasureId::Measure(Measure::R) => "Correlation (r)".to_string(),
        MeasureId::Measure(Measure::PartialR) => "Partial correlation (partial r)".to_string(),
        MeasureId::Measure(Measure::Smd) => "Standardised mean difference (Hedges' g)".to_string(),
        MeasureId::Measure(Measure::RiskDiff) => "Risk difference".to_string(),
        MeasureId::Measure(Measure::Slope) => "Regression slope".to_string(),
        _ => capitalised(&measure_name(report)),
    };
    match report.measure.reading_scale {
        ReadingScale::Ratio => format!("{words} (log scale)"),
        _ => words,
    }
}

/// `text` with its first letter in capitals.
fn capitalised(text: &str) -> String {
    let mut chars = text.chars();
    match chars.next() {
        Some(c) => c.to_uppercase().chain(chars).collect(),
        None => String::new(),
    }
}

/// [`caption`] with its text size and line spacing times `scale` (`--font-size`).
pub(crate) fn caption_scaled(
    sc: &mut Scene,
    lines: &[String],
    (margin, mut cy): (f64, f64),
    scale: f64,
) {
    for line in lines {
        sc.text(
            (margin, cy),
            line.clone(),
            size::SMALL * scale,
            palette::MUTED,
            Align::Left,
        );
        cy += 17.0 * scale;
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
    let inference = if report.model.inference.uses_t() {
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
        assert_eq!(
            Format::from_path("--forest", Path::new("b.Pdf")).unwrap(),
            Format::Pdf
        );
        let e = Format::from_path("--forest", Path::new("b.jpg")).unwrap_err();
        assert!(e.to_string().contains("--forest") && e.to_string().contains(".svg"));
        assert!(Format::from_path("--forest", Path::new("-")).is_err());
    }
}
