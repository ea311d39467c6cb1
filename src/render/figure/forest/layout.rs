//! The forest plot's layout: the rows, the value axis, the text columns,
//! the caption and the row height, computed before anything is drawn.

use super::columns::{text_columns, TextColumn};
use super::group::Grouping;
use crate::effect::route::Derivation;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::render::figure::scene::text_width;
use crate::render::figure::{
    decimals_for, effect_axis_title, measure_name, model_line, pt_of_size, size, size_of_pt, wrap,
    wrap_or_fit, Axis, Heading, PlotOptions,
};
use crate::result::{FitReport, LevelSummary, Tau2Method};
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// One row of the plot, top to bottom.
pub(super) enum Row<'a> {
    GroupHead(String),
    Study(usize),
    GroupAverage(&'a LevelSummary, f64),
    Overall,
    Predict,
    Gap,
}

/// The rows: the studies in `ordered` order (under a head per group, and
/// above the group's own average when it has one), then the overall
/// average and the prediction interval.
pub(super) fn rows<'a>(
    report: &FitReport,
    ordered: &[usize],
    group: Option<&Grouping<'a>>,
) -> Vec<Row<'a>> {
    let studies = &report.studies;
    let mut rows: Vec<Row> = Vec::new();
    match group {
        Some(g) => {
            let mut of = vec![usize::MAX; studies.len()];
            for (n, grp) in g.groups.iter().enumerate() {
                for &i in &grp.members {
                    of[i] = n;
                }
            }
            for (n, grp) in g.groups.iter().enumerate() {
                rows.push(Row::GroupHead(format!(
                    "{} = {}  (k = {})",
                    g.column,
                    grp.value,
                    grp.members.len()
                )));
                let mut w = 0.0;
                for &i in ordered.iter().filter(|&&i| of[i] == n) {
                    rows.push(Row::Study(i));
                    w += studies.weights()[i];
                }
                if let Some(lv) = grp.summary {
                    rows.push(Row::GroupAverage(lv, w));
                }
                rows.push(Row::Gap);
            }
        }
        None => rows.extend(ordered.iter().map(|&i| Row::Study(i))),
    }
    rows.push(Row::Overall);
    rows.push(Row::Predict);
    rows
}

/// Where things go: everything the drawing steps need.
pub(super) struct Forest<'a> {
    pub report: &'a FitReport,
    /// The rows' grouping (None: not grouped).
    pub group: Option<&'a Grouping<'a>>,
    /// The title (`--title`, or one saying what the rows are).
    pub title: String,
    /// The value axis title (`--x-label`, or the reading scale in words).
    pub x_label: String,
    pub show_fitted: bool,
    /// The value axis (plot space).
    pub axis: Axis,
    /// Page width in pixels.
    pub width: f64,
    /// Blank at the left and right.
    pub margin: f64,
    /// Text size of the column headers' reference (the largest row font, at least 12).
    pub fs_max: f64,
    /// Decimals of the "effect [CI]" column.
    pub dec: usize,
    /// Width of the "effect [CI]" column.
    pub ci_w: f64,
    /// Width of the weight column.
    pub weight_w: f64,
    /// Width of the label area (study names and the text columns).
    pub label_w: f64,
    /// The text columns after the names (`--columns`, the sort column).
    pub cols: Vec<TextColumn>,
    /// Width of the study names.
    pub name_w: f64,
    /// Left and right end of the plot area.
    pub px0: f64,
    /// Right end of the plot area.
    pub px1: f64,
    /// The confidence level as a percentage.
    pub lv: String,
    /// "Random-effects average" or "Common-effect average".
    pub pooled_name: &'static str,
    /// The caption, wrapped to the width.
    pub cap_lines: Vec<String>,
    /// Top of the first row.
    pub top: f64,
    /// How much taller than two lines the title and subtitle are.
    pub head_extra: f64,
    /// The value axis title's lines.
    pub x_lines: Vec<String>,
    /// Row height.
    pub rh: f64,
    /// Page height in pixels.
    pub height: u32,
    /// Text size in the rows.
    pub fs: f64,
    /// The rows' text size fixed by `--font-size`, in pixels.
    pub row_fs: Option<f64>,
    /// Scale of the other text and the vertical spacing (`--font-size`; 1 without).
    pub scale: f64,
    /// Each study's label on one or two lines (by index into the studies).
    pub label_lines: Vec<Vec<String>>,
    /// Top of each row, and the bottom of the last.
    row_top: Vec<f64>,
    /// Distance between the two lines of a two-line label.
    pub line_gap: f64,
    /// Number of rows.
    pub n_rows: usize,
    /// The largest study weight (the disc of that study is the largest).
    pub w_max: f64,
}

/// The value range (plot space) and the clip limits of long intervals.
pub(super) fn value_axis(report: &FitReport, group: Option<&Grouping>) -> Axis {
    let scale = report.measure.reading_scale;
    let tp = |y: f64| Axis::to_plot(scale, y);
    let studies = &report.studies;
    let avg = &report.average;
    let mut core: Vec<f64> = studies.iter().map(|s| tp(s.effect)).collect();
    // NaN ends: no prediction interval (too few studies), nothing to fit in.
    core.extend(
        [tp(avg.mean.pi.pi_low), tp(avg.mean.pi.pi_high), 0.0]
            .into_iter()
            .filter(|v| !v.is_nan()),
    );
    if let Some(g) = group {
        for lv in g.groups.iter().filter_map(|g| g.summary) {
            if let Some(p) = &lv.pooled {
                core.extend([tp(p.mean.ci.ci_low), tp(p.mean.ci.ci_high)]);
            }
        }
    }
    let cmin = core.iter().copied().fold(f64::INFINITY, f64::min);
    let cmax = core.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let span = (cmax - cmin).max(1e-6);
    // Intervals may reach 0.6 spans beyond the effects, or further when the
    // typical (median) interval is wider than that; longer ones are cut.
    let mut halves: Vec<f64> = studies
        .iter()
        .map(|s| (tp(s.ci.ci_high) - tp(s.ci.ci_low)) / 2.0)
        .collect();
    halves.sort_by(f64::total_cmp);
    let reach = (0.6 * span).max(1.2 * halves[halves.len() / 2]);
    let (mut lim_lo, mut lim_hi) = (cmin - reach, cmax + reach);
    if scale == ReadingScale::Correlation {
        lim_lo = lim_lo.max(-1.0);
        lim_hi = lim_hi.min(1.0);
    }
    let lo = studies
        .iter()
        .map(|s| tp(s.ci.ci_low))
        .fold(cmin, f64::min)
        .max(lim_lo);
    let hi = studies
        .iter()
        .map(|s| tp(s.ci.ci_high))
        .fold(cmax, f64::max)
        .min(lim_hi);
    Axis::new(lo, hi, scale == ReadingScale::Ratio, 7).snapped()
}

/// Row height from the number of rows when `--height` is not given.
fn auto_row_height(n_rows: usize) -> f64 {
    if n_rows <= 40 {
        24.0
    } else if n_rows <= 120 {
        19.0
    } else {
        15.0
    }
}

/// Text size for a row height.
fn font(rh: f64) -> f64 {
    (rh * 0.56).clamp(9.0, 13.5)
}

/// Decimals of the "effect [CI]" column: about three significant digits
/// over the studies' effects; for ratios 2, or 3 when a lower limit is below 0.095.
fn decimals(report: &FitReport) -> usize {
    let scale = report.measure.reading_scale;
    let studies = &report.studies;
    let show = |y: f64| scale.apply(y);
    let reading_values: Vec<f64> = studies.iter().map(|s| show(s.effect)).collect();
    let vmin = reading_values.iter().copied().fold(f64::INFINITY, f64::min);
    let vmax = reading_values
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    if scale == ReadingScale::Ratio {
        if studies.iter().any(|s| show(s.ci.ci_low) < 0.095) {
            3
        } else {
            2
        }
    } else {
        decimals_for((vmax - vmin).max(vmax.abs().max(vmin.abs()))).clamp(2, 4)
    }
}

impl<'a> Forest<'a> {
    /// Lays out the plot of `rows` on `axis`.
    ///
    /// # Errors
    /// [`Error::Usage`] naming `--width` when the columns leave less than
    /// 140 pixels for the plot area, or `--height` when a row would be
    /// lower than 4 pixels, or `--font-size` when its text does not fit the
    /// rows `--height` leaves.
    pub fn new(
        report: &'a FitReport,
        opts: &PlotOptions,
        group: Option<&'a Grouping<'a>>,
        rows: &[Row],
        axis: Axis,
    ) -> Result<Forest<'a>> {
        let n_rows = rows.len();
        // --font-size fixes the em of the rows' text (points at 96 pixels
        // per inch); everything else scales with it from the default row text,
        // rows included (a row is as high for its text as by default).
        let row_fs = opts.font_size.map(size_of_pt);
        let scale = row_fs.map_or(1.0, |f| f / font(24.0));
        let auto_rh = row_fs.map_or_else(|| auto_row_height(n_rows), |f| f / 0.56);
        let margin = 18.0;
        let fs_max = row_fs.unwrap_or_else(|| font(auto_rh).max(12.0));
        let cols = text_columns(
            report,
            (&opts.columns, &opts.sort),
            fs_max,
            fs_max.min(13.0 * scale),
        )?;
        let cols_w: f64 = cols.iter().map(|c| c.width).sum();
        // Without --width the page widens by the text columns, so the plot
        // area keeps its width, and with text larger than the default it
        // widens with the text, so the labels and the plot keep their shares.
        let width = opts
            .width
            .map_or(1000.0 * scale.max(1.0) + cols_w, f64::from);
        // The zeros are filled in by the steps below, in order: the
        // columns (which may widen the page), the heading's height, the
        // caption (which needs the axis limits), the row height (which needs
        // the caption's height).
        let title = opts.title.clone().unwrap_or_else(|| {
            if group.is_some_and(Grouping::averaged) {
                "Study effects, subgroup averages and the overall average".into()
            } else {
                "Study effects and their average".into()
            }
        });
        let mut f = Forest {
            report,
            group,
            title,
            x_label: opts
                .x_label
                .clone()
                .unwrap_or_else(|| effect_axis_title(report)),
            show_fitted: opts.show_fitted,
            axis,
            width,
            margin,
            fs_max,
            dec: decimals(report),
            ci_w: 0.0,
            weight_w: text_width("Weight", fs_max).max(text_width("100.0%", fs_max)) + 12.0,
            label_w: 0.0,
            name_w: (0.27 * (width - cols_w)).clamp(120.0, 340.0 * scale.max(1.0)),
            cols,
            px0: 0.0,
            px1: 0.0,
            lv: fmt::level_pct(report.model.level),
            pooled_name: if report.model.tau2_method == Tau2Method::None {
                "Common-effect average"
            } else {
                "Random-effects average"
            },
            cap_lines: Vec::new(),
            top: 0.0,
            head_extra: 0.0,
            x_lines: Vec::new(),
            rh: auto_rh,
            height: 0,
            fs: 0.0,
            row_fs,
            scale,
            label_lines: Vec::new(),
            row_top: Vec::new(),
            line_gap: 0.0,
            n_rows,
            w_max: report.studies.iter().map(|s| s.weight).fold(0.0, f64::max),
        };
        f.columns(opts.width.is_none())?;
        // Title, subtitle (wrapped to the final width) and column headers.
        f.head_extra = Heading::new(report, &f.title, (f.width, margin), scale).extra();
        f.top = 86.0 * scale + f.head_extra;
        f.x_lines = wrap_or_fit(
            &f.x_label,
            size::LABEL * scale,
            f.px1 - f.px0 + 2.0 * margin,
        );
        f.wrap_labels();
        f.cap_lines = f.caption();
        f.row_height(rows, opts.height)?;
        Ok(f)
    }

    /// The widths of the text columns and the plot area between them.
    fn columns(&mut self, auto_width: bool) -> Result<()> {
        let (report, fs_max, width, margin) = (self.report, self.fs_max, self.width, self.margin);
        self.ci_w = report
            .studies
            .iter()
            .map(|s| text_width(&self.ci_text(s.effect, s.ci.ci_low, s.ci.ci_high), fs_max))
            .fold(
                text_width(
                    &format!("{} [{} CI]", measure_name(report), self.lv),
                    fs_max,
                ),
                f64::max,
            )
            + 14.0;
        let cols_w: f64 = self.cols.iter().map(|c| c.width).sum();
        // The names give way (down to 100 pixels) before the plot area
        // shrinks below 140 pixels.
        let room = width - 2.0 * margin - self.weight_w - self.ci_w - 26.0 - 140.0 - cols_w;
        self.name_w = self.name_w.min(room).max(100.0);
        self.label_w = self.name_w + cols_w;
        self.px0 = margin + self.label_w + 14.0;
        self.px1 = width - margin - self.weight_w - self.ci_w - 12.0;
        if self.px1 - self.px0 < 140.0 && auto_width {
            // Without --width the page widens until the plot area keeps
            // 140 pixels (large --font-size text).
            self.width += 140.0 - (self.px1 - self.px0);
            self.px1 = self.width - margin - self.weight_w - self.ci_w - 12.0;
        }
        if self.px1 - self.px0 < 140.0 {
            let need = width + 140.0 - (self.px1 - self.px0);
            return Err(Error::usage(
                Flag::Width,
                format!(
                    "{width} pixels leave no room for the forest plot's columns; use at least {need:.0}"
                ),
            ));
        }
        Ok(())
    }

    /// The caption (wrapped to the width), which fixes the space at the bottom.
    fn caption(&self) -> Vec<String> {
        let (report, lv) = (self.report, &self.lv);
        let scale = report.measure.reading_scale;
        let mut caption = vec![
            format!(
                "● study estimate (area proportional to its weight in the fitted model) with its {lv} CI; \
                 ◆ {} and its {lv} CI; the dashed line with end bars is the {lv} prediction interval \
                 for the true effect of a new study.",
                self.pooled_name.to_lowercase()
            ),
            model_line(report),
        ];
        if let Some(g) = self.group {
            caption.push(if g.averaged() {
                format!(
                    "Rows are grouped by {}; each lighter ◇ averages that group's studies alone (with its own τ²).",
                    g.column
                )
            } else {
                format!(
                    "Rows are grouped by {} (no group averages: it is not a categorical moderator of the model).",
                    g.column
                )
            });
        }
        if self.show_fitted {
            caption.push("△ fitted value of the meta-regression for that study.".into());
        }
        caption.extend(super::band::caption(report, lv));
        if report.studies.iter().any(|s| s.shrunken.is_some()) {
            caption.push(super::shrunken::caption(lv));
        }
        if report
            .studies
            .iter()
            .any(|s| s.computed_from.derivation() != Derivation::Direct)
        {
            caption.push(
                "○ an effect approximated from medians or converted from another effect measure \
                 (see \"How each effect was obtained\"); same size rule as ●."
                    .into(),
            );
        }
        caption.push(format!(
            "Grey line: no effect ({}); dotted line: the average.",
            if scale == ReadingScale::Ratio {
                "ratio 1"
            } else {
                "0"
            }
        ));
        let clipped = report
            .studies
            .iter()
            .any(|s| self.tp(s.ci.ci_low) < self.axis.lo || self.tp(s.ci.ci_high) > self.axis.hi);
        if clipped {
            caption.push("◀ ▶ the interval continues beyond the axis.".into());
        }
        caption
            .iter()
            .flat_map(|c| wrap(c, size::SMALL * self.scale, self.width - 2.0 * self.margin))
            .collect()
    }

    /// The row height, the page height and each row's top: the rows share
    /// `--height`, or the page grows with them. A study whose label takes
    /// two lines gets a row taller by the distance between the lines.
    fn row_height(&mut self, rows: &[Row], height: Option<u32>) -> Result<()> {
        let (top, n_rows) = (self.top, self.n_rows);
        // Axis, its title, caption.
        let bottom =
            (62.0 + 17.0 * (self.cap_lines.len() + self.x_lines.len() - 1) as f64) * self.scale;
        let two = |r: &Row| matches!(r, Row::Study(i) if self.label_lines[*i].len() > 1);
        let n2 = rows.iter().filter(|r| two(r)).count() as f64;
        let n = n_rows as f64;
        // Lines of a two-line label are 1.2 text sizes apart; the text is
        // 0.56 of the row height unless --font-size fixes it.
        let (rh, height, gap) = match height {
            Some(h) => {
                let avail = f64::from(h) - top - bottom;
                let (rh, gap) = match self.row_fs {
                    Some(f) => ((avail - n2 * 1.2 * f) / n, 1.2 * f),
                    None => {
                        let rh = avail / (n + 0.672 * n2);
                        (rh, 0.672 * rh)
                    }
                };
                // Rows of at least 4 pixels, and 1.1 times --font-size's text.
                let min_rh = self.row_fs.map_or(4.0, |f| (1.1 * f).max(4.0));
                if rh < min_rh {
                    let gap = self.row_fs.map_or(0.672 * min_rh, |f| 1.2 * f);
                    let need = top + bottom + min_rh * n + gap * n2;
                    return Err(match self.row_fs {
                        None => Error::usage(
                            Flag::Height,
                            format!(
                                "{h} pixels are too few for {n_rows} rows; use at least {need:.0} \
                                 (or leave {} out for an automatic height)",
                                Flag::Height
                            ),
                        ),
                        Some(f) => Error::usage(
                            Flag::FontSize,
                            format!(
                                "text of {:.1} points needs rows of at least {min_rh:.0} pixels, \
                                 and {h} pixels of {} leave {:.1} for each of {n_rows} rows; use \
                                 a smaller size, at least {need:.0} pixels of {}, or leave {} out",
                                pt_of_size(f),
                                Flag::Height,
                                rh.max(0.0),
                                Flag::Height,
                                Flag::Height
                            ),
                        ),
                    });
                }
                (rh, h, gap)
            }
            None => {
                let gap = 1.2 * self.row_fs.unwrap_or_else(|| font(self.rh));
                let h = top + bottom + self.rh * n + gap * n2;
                (self.rh, h.ceil() as u32, gap)
            }
        };
        self.rh = rh;
        self.height = height;
        self.fs = self.row_fs.unwrap_or_else(|| font(rh));
        self.line_gap = gap;
        let mut y = top;
        self.row_top = Vec::with_capacity(rows.len() + 1);
        for r in rows {
            self.row_top.push(y);
            y += if two(r) { rh + gap } else { rh };
        }
        self.row_top.push(y);
        Ok(())
    }

    /// The lines of every study's label, wrapped to the names' width at
    /// the rows' text size (the automatic size when `--height` will change it).
    fn wrap_labels(&mut self) {
        let fs = self.row_fs.unwrap_or_else(|| font(self.rh));
        let max = self.name_w - self.indent();
        self.label_lines = self
            .report
            .studies
            .iter()
            .map(|s| super::labels::lines(&s.study, fs, max))
            .collect();
    }

    /// How far study labels are indented (under a group's heading).
    pub fn indent(&self) -> f64 {
        if self.group.is_some() {
            10.0
        } else {
            0.0
        }
    }

    /// Top of row `r` (`r` = the number of rows: the bottom of the last).
    pub fn row_top(&self, r: usize) -> f64 {
        self.row_top[r]
    }

    /// Vertical centre of row `r`.
    pub fn row_mid(&self, r: usize) -> f64 {
        (self.row_top[r] + self.row_top[r + 1]) / 2.0
    }

    /// An analysis-scale value in plot space.
    pub fn tp(&self, y: f64) -> f64 {
        Axis::to_plot(self.report.measure.reading_scale, y)
    }

    /// An analysis-scale value on the reading scale.
    pub fn show(&self, y: f64) -> f64 {
        self.report.measure.reading_scale.apply(y)
    }

    /// Pixel column of a plot-space value.
    pub fn x_of(&self, v: f64) -> f64 {
        self.px0 + (v - self.axis.lo) / (self.axis.hi - self.axis.lo) * (self.px1 - self.px0)
    }

    /// A plot-space value clipped to the axis.
    pub fn clip(&self, v: f64) -> f64 {
        v.clamp(self.axis.lo, self.axis.hi)
    }

    /// "effect [low, high]" on the reading scale.
    pub fn ci_text(&self, e: f64, l: f64, h: f64) -> String {
        let dec = self.dec;
        format!(
            "{} [{}, {}]",
            fmt::plot_num(self.show(e), dec),
            fmt::plot_num(self.show(l), dec),
            fmt::plot_num(self.show(h), dec)
        )
    }
}
