//! The sensitivity ladder: one panel per quantity (the average effect, then
//! each moderator coefficient), one rung per adjustment. The interval as
//! fitted is a pale band behind every rung of its panel, so an adjusted
//! interval that leaves the band, or crosses the dotted line of no effect,
//! stands out; each rung's marker is coloured by what the adjustment does
//! to the conclusion, and the verdict is written at its right.

use super::palette::*;
use super::scene::text_width;
use super::scene::Rgb;
use super::{
    label_step, model_line, size, wrap, wrap_or_fit, Align, Axis, Heading, PlotOptions, Scene,
};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{Adjustment, FitReport, SensitivityQuantity, SensitivityRow, Verdict};
use crate::support::flag::Flag;

/// Height of one rung in pixels.
const RUNG: f64 = 24.0;
/// Room for a panel's title and its x axis.
const PANEL_EXTRA: f64 = 66.0;
/// Width of the rung labels at the left.
const LABEL_W: f64 = 130.0;
/// Below this span of log ratios (a factor of about 1.5) a panel of ratios
/// gets a linear axis.
const LOG_AXIS_MIN_SPAN: f64 = 0.4;
/// Width of the verdicts at the right.
const VERDICT_W: f64 = 170.0;

/// The colour and words of a verdict.
fn verdict_look(v: Option<Verdict>) -> (Rgb, &'static str) {
    match v {
        None => (INK, ""),
        Some(Verdict::Holds) => (FIT, "holds"),
        Some(Verdict::NoneEither) => (MUTED, "still no clear effect"),
        Some(Verdict::Fades) => (POOLED, "includes no effect"),
        Some(Verdict::Reverses) => (POOLED, "changes sign"),
        Some(Verdict::Appears) => (PREDICT, "appears only here"),
    }
}

/// How a panel's values are drawn: the row's plot-space values and whether
/// the axis is logarithmic (ratios).
fn plot_values(r: &SensitivityRow, ratio: bool) -> Option<(f64, f64, f64)> {
    if ratio {
        // Ratios: the analysis-scale logs on a log axis labelled as ratios.
        return Some((r.estimate?, r.ci.ci_low?, r.ci.ci_high?));
    }
    match r.reading {
        Some(rd) => Some((rd.estimate, rd.ci.ci_low, rd.ci.ci_high)),
        None => Some((r.estimate?, r.ci.ci_low?, r.ci.ci_high?)),
    }
}

/// Builds the sensitivity plot.
///
/// # Errors
/// [`Error::Usage`] naming `--sensitivity-plot` when the report has no
/// sensitivity view, or `--height` when the height leaves no room.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let Some(view) = &report.sensitivity else {
        return Err(Error::usage(
            Flag::SensitivityPlot,
            format!(
                "the plot shows the adjustments of {} or {}; add one of them",
                Flag::SmallStudy,
                Flag::Selection
            ),
        ));
    };
    let k = super::text_scale(opts.font_size);
    let margin = 18.0;
    let small = size::SMALL * k;
    // The rung labels and verdicts are measured at the text's size; the
    // plot area between them keeps at least 140 pixels.
    let widest = |texts: &mut dyn Iterator<Item = &str>| {
        texts.map(|t| text_width(t, small)).fold(0.0, f64::max)
    };
    let rows = || view.quantities.iter().flat_map(|q| &q.rows);
    let label_w = LABEL_W.max(widest(&mut rows().map(|r| r.adjustment.label())) + 14.0);
    let verdict_w = VERDICT_W.max(widest(&mut rows().map(|r| verdict_look(r.verdict).1)) + 16.0);
    let need_w = 2.0 * margin + label_w + verdict_w + 140.0;
    let width = match opts.width {
        Some(w) if f64::from(w) < need_w => {
            return Err(Error::usage(
                Flag::Width,
                format!(
                    "{w} pixels leave no room for the sensitivity plot{}; use at least {need_w:.0}",
                    if k == 1.0 {
                        String::new()
                    } else {
                        format!(" at this {}", Flag::FontSize)
                    }
                ),
            ))
        }
        Some(w) => f64::from(w),
        None => 860f64.max(need_w.ceil()),
    };
    let lay = Ladder {
        k,
        margin,
        x0: margin + label_w,
        x1: width - margin - verdict_w,
    };
    let heading = Heading::new(
        report,
        "Estimates under each adjustment for small-study effects and selection",
        (width, margin),
        k,
    );
    let cap: Vec<String> = caption(report)
        .iter()
        .flat_map(|c| wrap(c, small, width - 2.0 * margin))
        .collect();
    let titles: Vec<Vec<String>> = view
        .quantities
        .iter()
        .map(|q| {
            wrap_or_fit(
                &panel_title(report, q),
                size::LABEL * k,
                width - 2.0 * margin,
            )
        })
        .collect();
    let panels_h: f64 = view
        .quantities
        .iter()
        .zip(&titles)
        .map(|(q, t)| lay.panel_height(q, t.len()))
        .sum();
    let top = 78.0 * k + heading.extra();
    let need = top + panels_h + (20.0 + 17.0 * cap.len() as f64) * k;
    let height = match opts.height {
        Some(h) if f64::from(h) < need => {
            return Err(Error::usage(
                Flag::Height,
                format!(
                    "{h} pixels leave no room for the sensitivity plot; use at least {need:.0}"
                ),
            ))
        }
        Some(h) => f64::from(h),
        None => need.ceil(),
    };
    let mut sc = Scene::new(width as u32, height as u32);
    heading.draw(&mut sc);
    let mut y = top;
    for (q, t) in view.quantities.iter().zip(&titles) {
        y = lay.panel(&mut sc, report, q, t, y);
    }
    super::caption_scaled(&mut sc, &cap, (margin, y + 14.0 * k), k);
    Ok(sc)
}

/// The title of a panel.
fn panel_title(report: &FitReport, q: &SensitivityQuantity) -> String {
    let ratio = report.measure.reading_scale == ReadingScale::Ratio && q.rows[0].reading.is_some();
    if q.moderator {
        format!(
            "{}{}",
            q.quantity,
            if ratio {
                " (factor by which the ratio changes per unit)"
            } else {
                " (coefficient)"
            }
        )
    } else {
        format!("average effect ({})", super::measure_name(report))
    }
}

/// The horizontal layout of the panels and the text scale.
struct Ladder {
    k: f64,
    margin: f64,
    /// Left and right ends of the value axis.
    x0: f64,
    x1: f64,
}

impl Ladder {
    /// Height of a panel of `q` whose title has `title_lines` lines.
    fn panel_height(&self, q: &SensitivityQuantity, title_lines: usize) -> f64 {
        let k = self.k;
        (PANEL_EXTRA + RUNG * q.rows.len() as f64 + 17.0 * (title_lines - 1) as f64) * k
    }

    /// One panel with its title's lines `title`; returns the y below it.
    fn panel(
        &self,
        sc: &mut Scene,
        report: &FitReport,
        q: &SensitivityQuantity,
        title: &[String],
        y0: f64,
    ) -> f64 {
        let (k, x0, x1) = (self.k, self.x0, self.x1);
        let small = size::SMALL * k;
        let ratio =
            report.measure.reading_scale == ReadingScale::Ratio && q.rows[0].reading.is_some();
        let mut vals: Vec<Option<(f64, f64, f64)>> =
            q.rows.iter().map(|r| plot_values(r, ratio)).collect();
        let span = |vals: &[Option<(f64, f64, f64)>], null: f64| {
            vals.iter()
                .flatten()
                .fold((null, null), |(lo, hi), (_, a, b)| (lo.min(*a), hi.max(*b)))
        };
        let (lo, hi) = span(&vals, 0.0);
        // A narrow range of ratios (within a factor of about 1.5) reads better on
        // a linear axis of the ratios themselves: a log axis would have one tick.
        let log_axis = ratio && hi - lo > LOG_AXIS_MIN_SPAN;
        let null: f64 = if ratio && !log_axis { 1.0 } else { 0.0 };
        if ratio && !log_axis {
            for v in vals.iter_mut().flatten() {
                *v = (v.0.exp(), v.1.exp(), v.2.exp());
            }
        }
        let (lo, hi) = span(&vals, null);
        let pad = 0.05 * (hi - lo).max(1e-9);
        let xa = Axis::new(lo - pad, hi + pad, log_axis, 6).snapped();
        let px = |v: f64| x0 + (v - xa.lo) / (xa.hi - xa.lo) * (x1 - x0);
        let extra = 17.0 * k * (title.len() - 1) as f64;
        for (i, line) in title.iter().enumerate() {
            let y = y0 + 10.0 * k + 17.0 * k * i as f64;
            sc.text(
                (self.margin, y),
                line.clone(),
                size::LABEL * k,
                INK,
                Align::Left,
            );
        }
        let rows_top = y0 + 26.0 * k + extra;
        let rung = RUNG * k;
        let rows_bottom = rows_top + rung * q.rows.len() as f64;
        if let Some((_, a, b)) = vals[0] {
            sc.rect(px(a), rows_top, px(b), rows_bottom, BAND);
        }
        if (xa.lo..=xa.hi).contains(&null) {
            sc.dashed(
                vec![(px(null), rows_top), (px(null), rows_bottom)],
                MUTED,
                1,
                (2.0, 3.0),
            );
        }
        for (i, (row, v)) in q.rows.iter().zip(&vals).enumerate() {
            let cy = rows_top + rung * (i as f64 + 0.5);
            sc.text(
                (x0 - 10.0, cy),
                row.adjustment.label(),
                small,
                INK,
                Align::Right,
            );
            let (colour, words) = verdict_look(row.verdict);
            match v {
                Some((e, a, b)) => {
                    let clamp = |x: f64| px(x.clamp(xa.lo, xa.hi));
                    sc.line(vec![(clamp(*a), cy), (clamp(*b), cy)], colour, 2);
                    if row.adjustment == Adjustment::Unadjusted {
                        let c = clamp(*e);
                        sc.rect(c - 5.0, cy - 5.0, c + 5.0, cy + 5.0, INK);
                    } else {
                        sc.circle((clamp(*e), cy), 5.0, Some((colour, 1.0)), Some((PAPER, 1)));
                    }
                    sc.text((x1 + 12.0, cy), words, small, colour, Align::Left);
                }
                None => {
                    sc.text(
                        ((x0 + x1) / 2.0, cy),
                        "not available",
                        small,
                        MUTED,
                        Align::Center,
                    );
                }
            }
        }
        sc.line(vec![(x0, rows_bottom), (x1, rows_bottom)], INK, 1);
        let xs: Vec<f64> = xa.ticks.iter().map(|t| px(t.0)).collect();
        let step = label_step(&xs, &xa.ticks, small, true);
        for (i, ((_, label), x)) in xa.ticks.iter().zip(&xs).enumerate() {
            sc.line(vec![(*x, rows_bottom), (*x, rows_bottom + 5.0)], INK, 1);
            if i % step == 0 {
                sc.text(
                    (*x, rows_bottom + 5.0 + 10.0 * k),
                    label.clone(),
                    small,
                    INK,
                    Align::Center,
                );
            }
        }
        rows_bottom + (PANEL_EXTRA - 26.0) * k
    }
}

/// The caption's sentences (before wrapping).
fn caption(report: &FitReport) -> Vec<String> {
    let lv = crate::support::format::level_pct(report.model.level);
    vec![
        format!(
            "■ as fitted, with its {lv} interval as the pale band behind every rung; ● each \
             adjustment with its {lv} interval, coloured by what it does to the conclusion \
             (green: holds; orange: includes no effect or changes sign); dotted: no effect."
        ),
        "Sensitivity analyses under assumptions, not corrections; with few studies or large \
         heterogeneity they are unreliable, and asymmetry has causes other than publication bias."
            .into(),
        model_line(report),
    ]
}
