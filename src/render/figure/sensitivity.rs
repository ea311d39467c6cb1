//! The sensitivity ladder: one panel per quantity (the average effect, then
//! each moderator coefficient), one rung per adjustment. The interval as
//! fitted is a pale band behind every rung of its panel, so an adjusted
//! interval that leaves the band, or crosses the dotted line of no effect,
//! stands out; each rung's marker is coloured by what the adjustment does
//! to the conclusion, and the verdict is written at its right.

use super::palette::*;
use super::{model_line, size, wrap, Align, Axis, PlotOptions, Scene};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{Adjustment, FitReport, SensitivityQuantity, SensitivityRow, Verdict};
use crate::support::flag::Flag;
use plotters::style::RGBColor;

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
fn verdict_look(v: Option<Verdict>) -> (RGBColor, &'static str) {
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
    let width = f64::from(opts.width.unwrap_or(860));
    let margin = 18.0;
    let cap: Vec<String> = caption(report)
        .iter()
        .flat_map(|c| wrap(c, size::SMALL, width - 2.0 * margin))
        .collect();
    let panels_h: f64 = view
        .quantities
        .iter()
        .map(|q| PANEL_EXTRA + RUNG * q.rows.len() as f64)
        .sum();
    let top = 78.0;
    let need = top + panels_h + 20.0 + 17.0 * cap.len() as f64;
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
    super::heading(
        &mut sc,
        report,
        "Estimates under each adjustment for small-study effects and selection",
        width,
        margin,
    );
    let mut y = top;
    for q in &view.quantities {
        y = panel(&mut sc, report, q, y, width, margin);
    }
    super::caption(&mut sc, &cap, margin, y + 14.0);
    Ok(sc)
}

/// One panel; returns the y below it.
fn panel(
    sc: &mut Scene,
    report: &FitReport,
    q: &SensitivityQuantity,
    y0: f64,
    width: f64,
    margin: f64,
) -> f64 {
    let ratio = report.measure.reading_scale == ReadingScale::Ratio && q.rows[0].reading.is_some();
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
    let (x0, x1) = (margin + LABEL_W, width - margin - VERDICT_W);
    let px = |v: f64| x0 + (v - xa.lo) / (xa.hi - xa.lo) * (x1 - x0);
    let title = if q.moderator {
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
    };
    sc.text((margin, y0 + 10.0), title, size::LABEL, INK, Align::Left);
    let rows_top = y0 + 26.0;
    let rows_bottom = rows_top + RUNG * q.rows.len() as f64;
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
        let cy = rows_top + RUNG * (i as f64 + 0.5);
        sc.text(
            (x0 - 10.0, cy),
            row.adjustment.label(),
            size::SMALL,
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
                sc.text((x1 + 12.0, cy), words, size::SMALL, colour, Align::Left);
            }
            None => {
                sc.text(
                    ((x0 + x1) / 2.0, cy),
                    "not available",
                    size::SMALL,
                    MUTED,
                    Align::Center,
                );
            }
        }
    }
    sc.line(vec![(x0, rows_bottom), (x1, rows_bottom)], INK, 1);
    for (v, label) in &xa.ticks {
        let x = px(*v);
        sc.line(vec![(x, rows_bottom), (x, rows_bottom + 5.0)], INK, 1);
        sc.text(
            (x, rows_bottom + 15.0),
            label.clone(),
            size::SMALL,
            INK,
            Align::Center,
        );
    }
    rows_bottom + PANEL_EXTRA - 26.0
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
