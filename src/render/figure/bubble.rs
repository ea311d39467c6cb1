//! The bubble plot: each study's effect against a moderator, bubble area
//! proportional to its weight, with the fitted meta-regression line, its
//! confidence band (shaded) and prediction band (dashed lines). For a
//! categorical moderator: the studies of each level side by side, with the
//! level's predicted effect, its confidence interval and prediction interval.

use super::palette::*;
use super::{
    decimals_for, effect_axis_title, model_line, size, wrap, Align, Axis, Frame, PlotOptions, Scene,
};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{AtValue, CurvePoint, FitReport, ModeratorKind};
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// Builds the bubble plot.
///
/// # Errors
/// [`Error::Usage`] naming `--bubble` when the model has no moderator, or
/// `--bubble-x` when it names none of the model's moderators.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let j = moderator(report, opts)?;
    let width = f64::from(opts.width.unwrap_or(900));
    let height = f64::from(opts.height.unwrap_or(620));
    let name = &report.model.moderators[j].name;

    // Caption first: its height fixes the plot area.
    let margin = 18.0;
    let cap_lines: Vec<String> = caption(report, j)
        .iter()
        .flat_map(|c| wrap(c, size::SMALL, width - 2.0 * margin))
        .collect();
    let top = 92.0;
    let bottom = 70.0 + 17.0 * cap_lines.len() as f64;
    if height - top - bottom < 120.0 {
        return Err(Error::usage(
            Flag::Height,
            format!(
                "{height} pixels leave no room for the bubble plot; use at least {:.0}",
                top + bottom + 120.0
            ),
        ));
    }
    let (xa, ya) = (x_axis(report, j), y_axis(report, j));
    let f = Frame::in_page(width, height, margin, top, bottom, xa, ya, false);
    let mut sc = Scene::new(width as u32, height as u32);
    super::heading(&mut sc, report, &format!("Effect by {name}"), width, margin);
    f.grid(&mut sc);
    if (f.ya.lo..=f.ya.hi).contains(&0.0) {
        let y = f.y(0.0);
        sc.dashed(vec![(f.x0, y), (f.x1, y)], GUIDE, 1, (4.0, 4.0));
    }
    let bubbles = Bubbles::new(report, j, f);
    match &report.model.moderators[j].kind {
        ModeratorKind::Numeric { .. } => bubbles.along_numbers(&mut sc),
        ModeratorKind::Categorical { levels, .. } => bubbles.by_level(&mut sc, levels),
    }
    let f = &bubbles.f;
    f.axes(&mut sc, name, &effect_axis_title(report));
    super::caption(&mut sc, &cap_lines, margin, f.y1 + 64.0);
    Ok(sc)
}

/// The moderator on the x axis: `--bubble-x`, else the first numeric one,
/// else the first.
fn moderator(report: &FitReport, opts: &PlotOptions) -> Result<usize> {
    let mods = &report.model.moderators;
    if mods.is_empty() {
        return Err(Error::usage(
            Flag::Bubble,
            format!(
                "a bubble plot draws the effect against a moderator, and this model has none; add \
                 {} NAME (a numeric one for a fitted line)",
                Flag::Moderator
            ),
        ));
    }
    Ok(match &opts.bubble_x {
        Some(name) => mods.iter().position(|m| &m.name == name).ok_or_else(|| {
            Error::usage(
                Flag::BubbleX,
                format!(
                    "'{name}' is not a moderator of this model; the moderators are: {}",
                    mods.iter()
                        .map(|m| m.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })?,
        None => mods
            .iter()
            .position(|m| matches!(m.kind, ModeratorKind::Numeric { .. }))
            .unwrap_or(0),
    })
}

/// The caption's sentences (before wrapping).
fn caption(report: &FitReport, j: usize) -> Vec<String> {
    let m = &report.model.moderators[j];
    let name = &m.name;
    let lv = fmt::level_pct(report.model.level);
    let mut caption = Vec::new();
    let numeric = matches!(m.kind, ModeratorKind::Numeric { .. });
    let curve = report.curves.iter().find(|c| &c.moderator == name);
    let held = if numeric {
        curve.map(|c| c.held.clone()).unwrap_or_default()
    } else {
        report
            .subgroups
            .iter()
            .find(|g| &g.moderator == name)
            .map(|g| g.held.clone())
            .unwrap_or_default()
    };
    let bars = report.spread.as_ref().map(|s| {
        format!(
            "pale bar through a study: the {lv} band for a new study's true effect with that \
             study's characteristics, from its own τ², which depends on {} (location-scale model).",
            s.spread_by.join(", ")
        )
    });
    if let Some(bars) = &bars {
        let level = if numeric {
            format!("solid line: fitted mean effect; shaded: its {lv} confidence band")
        } else {
            format!(
                "◆ the model's predicted mean effect for the level with its {lv} CI (solid bar)"
            )
        };
        caption.push(format!(
            "○ study (area proportional to its weight); {level}; {bars}"
        ));
    } else if numeric {
        caption.push(format!(
            "○ study (area proportional to its weight); solid line: fitted mean effect; shaded: \
             its {lv} confidence band; dashed lines: {lv} prediction band for a new study's true effect."
        ));
    }
    if numeric {
        if report.model.interactions.is_empty() {
            if let Some(c) = report.coefficients.iter().find(|c| &c.term == name) {
                let d = decimals_for(c.contrast.ci.ci_high - c.contrast.ci.ci_low).max(2);
                let ratio = match &c.ratio {
                    Some(r) => format!(
                        " (the ratio is multiplied by {} [{}, {}])",
                        fmt::plot_num(r.estimate, d.max(3)),
                        fmt::plot_num(r.ci.ci_low, d.max(3)),
                        fmt::plot_num(r.ci.ci_high, d.max(3))
                    ),
                    None => String::new(),
                };
                caption.push(format!(
                    "Change in the analysed effect per unit of {name}: {} [{}, {}]{ratio}, p {}.",
                    fmt::plot_num(c.contrast.estimate, d),
                    fmt::plot_num(c.contrast.ci.ci_low, d),
                    fmt::plot_num(c.contrast.ci.ci_high, d),
                    crate::support::format::p(c.contrast.test.p)
                ));
            }
        }
    } else if bars.is_none() {
        caption.push(format!(
            "○ study (area proportional to its weight); ◆ the model's predicted mean effect for \
             the level with its {lv} CI (solid bar); dashed bar: {lv} prediction interval."
        ));
    }
    if !held.is_empty() {
        caption.push(format!("Other moderators are held {held}."));
    }
    if numeric {
        caption.extend(super::regions::caption(report, name, &lv));
    }
    if report.tau2.estimate == 0.0 && bars.is_none() {
        caption.push(
            "τ² is estimated as 0, so the prediction band coincides with the confidence band."
                .into(),
        );
    }
    caption.push(model_line(report));
    caption
}

/// The y axis (plot space): the studies, the prediction band or intervals, and 0.
fn y_axis(report: &FitReport, j: usize) -> Axis {
    let scale = report.measure.reading_scale;
    let tp = |y: f64| Axis::to_plot(scale, y);
    let studies = &report.studies;
    let name = &report.model.moderators[j].name;
    let numeric = matches!(
        report.model.moderators[j].kind,
        ModeratorKind::Numeric { .. }
    );
    let curve = report.curves.iter().find(|c| &c.moderator == name);
    let mut ys: Vec<f64> = studies.iter().map(|s| tp(s.effect)).collect();
    ys.push(0.0);
    if let Some(s) = &report.spread {
        // Under the location-scale model the bands are each study's own.
        for b in &s.studies {
            ys.extend([tp(b.pi_low), tp(b.pi_high)]);
        }
    } else if numeric {
        if let Some(c) = curve {
            for p in &c.points {
                ys.extend([tp(p.pi.pi_low), tp(p.pi.pi_high)]);
            }
        }
    } else if let Some(g) = report.subgroups.iter().find(|g| &g.moderator == name) {
        for l in &g.levels {
            ys.extend([
                tp(l.predicted.mean.pi.pi_low),
                tp(l.predicted.mean.pi.pi_high),
            ]);
        }
    }
    let ymin = ys.iter().copied().fold(f64::INFINITY, f64::min);
    let ymax = ys.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let pad = 0.05 * (ymax - ymin).max(1e-6);
    let (mut lo, mut hi) = (ymin - pad, ymax + pad);
    if scale == ReadingScale::Correlation {
        lo = lo.max(-1.0);
        hi = hi.min(1.0);
    }
    Axis::new(lo, hi, scale == ReadingScale::Ratio, 7).snapped()
}

/// The x axis: the moderator's range, or one band per level.
fn x_axis(report: &FitReport, j: usize) -> Axis {
    match &report.model.moderators[j].kind {
        ModeratorKind::Numeric { min, max, .. } => {
            let pad = 0.04 * (max - min);
            Axis::new(min - pad, max + pad, false, 8).snapped()
        }
        ModeratorKind::Categorical { levels, .. } => Axis {
            lo: -0.5,
            hi: levels.len() as f64 - 0.5,
            ticks: Vec::new(),
        },
    }
}

/// The studies' bubbles in a frame, and what drawing them needs.
struct Bubbles<'a> {
    report: &'a FitReport,
    /// The moderator on the x axis.
    j: usize,
    f: Frame,
    /// The largest bubble's radius.
    r_max: f64,
    /// The largest study weight.
    w_max: f64,
    /// Study indices, heaviest first (largest bubbles first, so small ones stay visible on top).
    by_weight: Vec<usize>,
}

impl<'a> Bubbles<'a> {
    fn new(report: &'a FitReport, j: usize, f: Frame) -> Bubbles<'a> {
        let studies = &report.studies;
        let w_max = studies.iter().map(|s| s.weight).fold(0.0, f64::max);
        let r_max = ((f.y1 - f.y0).min(f.x1 - f.x0) * 0.045).clamp(8.0, 30.0);
        let mut by_weight: Vec<usize> = (0..studies.len()).collect();
        by_weight.sort_by(|&a, &b| studies[b].weight.total_cmp(&studies[a].weight));
        Bubbles {
            report,
            j,
            f,
            r_max,
            w_max,
            by_weight,
        }
    }

    /// An analysis-scale value in plot space.
    fn tp(&self, y: f64) -> f64 {
        Axis::to_plot(self.report.measure.reading_scale, y)
    }

    /// Pixel row of an analysis-scale value, clamped to the frame.
    fn row(&self, y: f64) -> f64 {
        self.f.y(self.tp(y).clamp(self.f.ya.lo, self.f.ya.hi))
    }

    /// A bubble's radius: area proportional to the weight.
    fn radius(&self, w: f64) -> f64 {
        (self.r_max * (w / self.w_max).sqrt()).max(2.0)
    }

    /// The pale vertical bar of study `i`'s band at pixel column `x`
    /// (`--spread-by`; nothing otherwise), with end ticks.
    fn band_bar(&self, sc: &mut Scene, i: usize, x: f64) {
        let Some(b) = self.report.spread.as_ref().and_then(|s| s.studies.get(i)) else {
            return;
        };
        let (lo, hi) = (self.row(b.pi_low), self.row(b.pi_high));
        let w = 3.0;
        sc.poly(
            vec![(x - w, lo), (x + w, lo), (x + w, hi), (x - w, hi)],
            Some((PREDICT, 0.3)),
            None,
        );
        for y in [lo, hi] {
            sc.line(vec![(x - w - 2.0, y), (x + w + 2.0, y)], PREDICT, 1);
        }
    }

    /// A numeric moderator: the region of significance, the confidence
    /// band, the prediction band, the bubbles and the fitted line.
    fn along_numbers(&self, sc: &mut Scene) {
        let (report, f, j) = (self.report, &self.f, self.j);
        let name = &report.model.moderators[j].name;
        let studies = &report.studies;
        let curve = report.curves.iter().find(|c| &c.moderator == name);
        super::regions::shade(sc, f, report, name);
        if let Some(c) = curve {
            let upper: Vec<(f64, f64)> = c
                .points
                .iter()
                .map(|p| (f.x(p.x), self.row(p.ci.ci_high)))
                .collect();
            let mut band = upper.clone();
            band.extend(
                c.points
                    .iter()
                    .rev()
                    .map(|p| (f.x(p.x), self.row(p.ci.ci_low))),
            );
            sc.poly(band, Some((FIT, 0.2)), None);
            // One τ² for all: not drawn when the spread depends on characteristics.
            let has_pi = report.spread.is_none() && c.points.iter().all(|p| !p.pi.pi_low.is_nan());
            for pick in [|p: &CurvePoint| p.pi.pi_low, |p: &CurvePoint| p.pi.pi_high] {
                if !has_pi {
                    break;
                }
                let line: Vec<(f64, f64)> = c
                    .points
                    .iter()
                    .map(|p| (f.x(p.x), self.row(pick(p))))
                    .collect();
                sc.dashed(line, PREDICT, 2, (8.0, 5.0));
            }
        }
        for &i in &self.by_weight {
            let s = &studies[i];
            let AtValue::Number(x) = s.moderators[j] else {
                continue;
            };
            self.band_bar(sc, i, f.x(x));
            sc.circle(
                (f.x(x), self.row(s.effect)),
                self.radius(s.weight),
                Some((STUDY, 0.35)),
                Some((STUDY, 1)),
            );
        }
        if let Some(c) = curve {
            let line: Vec<(f64, f64)> = c
                .points
                .iter()
                .map(|p| (f.x(p.x), self.row(p.estimate)))
                .collect();
            sc.line(line, FIT, 3);
        }
    }

    /// A categorical moderator: each level's bubbles side by side, with the
    /// level's predicted effect, confidence and prediction interval.
    fn by_level(&self, sc: &mut Scene, levels: &[String]) {
        let (report, f, j) = (self.report, &self.f, self.j);
        let name = &report.model.moderators[j].name;
        let studies = &report.studies;
        let group = report.subgroups.iter().find(|g| &g.moderator == name);
        let band_w = (f.x(1.0) - f.x(0.0)).abs();
        for (l, level) in levels.iter().enumerate() {
            let cx = f.x(l as f64);
            let members: Vec<usize> = self
                .by_weight
                .iter()
                .copied()
                .filter(|&i| matches!(&studies[i].moderators[j], AtValue::Level(v) if v == level))
                .collect();
            for (n, &i) in members.iter().enumerate() {
                let s = &studies[i];
                // Deterministic spread: golden-ratio offsets in the left part of the band.
                let off = ((n as f64 * 0.618_034).fract() - 0.5) * 0.34 * band_w;
                self.band_bar(sc, i, cx - 0.12 * band_w + off);
                sc.circle(
                    (cx - 0.12 * band_w + off, self.row(s.effect)),
                    self.radius(s.weight),
                    Some((STUDY, 0.35)),
                    Some((STUDY, 1)),
                );
            }
            let k = members.len();
            sc.text(
                (cx, f.y1 + 15.0),
                format!("{level} (k = {k})"),
                size::SMALL,
                INK,
                Align::Center,
            );
            if let Some(lvl) = group.and_then(|g| g.levels.iter().find(|x| &x.level == level)) {
                let p = &lvl.predicted;
                let x = cx + 0.24 * band_w;
                if !p.mean.pi.pi_low.is_nan() && report.spread.is_none() {
                    let (pl, ph) = (self.row(p.mean.pi.pi_low), self.row(p.mean.pi.pi_high));
                    sc.dashed(vec![(x + 10.0, pl), (x + 10.0, ph)], PREDICT, 2, (6.0, 4.0));
                    sc.line(vec![(x + 5.0, pl), (x + 15.0, pl)], PREDICT, 2);
                    sc.line(vec![(x + 5.0, ph), (x + 15.0, ph)], PREDICT, 2);
                }
                let (cl, ch) = (self.row(p.mean.ci.ci_low), self.row(p.mean.ci.ci_high));
                sc.line(
                    vec![
                        (x - 5.0, cl),
                        (x + 5.0, cl),
                        (x, cl),
                        (x, ch),
                        (x - 5.0, ch),
                        (x + 5.0, ch),
                    ],
                    FIT,
                    3,
                );
                let y = self.row(p.mean.estimate);
                sc.poly(
                    vec![(x - 8.0, y), (x, y - 8.0), (x + 8.0, y), (x, y + 8.0)],
                    Some((FIT, 1.0)),
                    Some((INK, 1)),
                );
            }
        }
    }
}
