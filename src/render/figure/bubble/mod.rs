//! The bubble plot: each study's effect against a moderator, bubble area
//! proportional to its weight, with the fitted meta-regression line, its
//! confidence band (shaded) and prediction band (dashed lines). For a
//! categorical moderator, or a numeric one holding only 0 and 1: the
//! studies of each level (value) side by side, with the predicted effect
//! there, its confidence interval and prediction interval.
//!
//! When the model also has a categorical moderator of at most
//! 5 levels (`marks.rs`) beside the numeric one on the x
//! axis, its levels are told apart by marker shape, colour and line style
//! (see `marks.rs`), with a legend, and the fitted line is drawn per level
//! (the report's `level_curves`).

mod draw;
mod legend;

use super::axis::ChartPage;
use super::marks;
use super::{decimals_for, effect_axis_title, model_line, size, wrap, Axis, Frame, PlotOptions};
use super::{palette::GUIDE, Heading, Scene};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{AtValue, FitReport, LevelCurve, ModeratorKind};
use crate::support::flag::Flag;
use crate::support::format as fmt;
use draw::Bubbles;

/// What the plot shows: the moderator on the x axis and how.
struct View<'a> {
    /// The moderator on the x axis.
    j: usize,
    /// The x moderator is numeric and every study's value is 0 or 1 (both
    /// present): drawn as two columns rather than a continuous axis.
    binary: bool,
    /// The categorical moderator whose levels the marks tell apart, with its
    /// levels and the fitted line at each (in level order).
    split: Option<Split<'a>>,
}

/// A categorical moderator shown by marks.
struct Split<'a> {
    /// Its index among the moderators.
    g: usize,
    /// Its name.
    name: &'a str,
    /// Its levels with their study counts.
    levels: Vec<(&'a str, usize)>,
    /// The fitted line along the x moderator at each level.
    curves: Vec<&'a LevelCurve>,
}

impl Split<'_> {
    /// The index of study `i`'s level.
    fn level_of(&self, report: &FitReport, i: usize) -> Option<usize> {
        match &report.studies.moderator(i, self.g) {
            AtValue::Level(v) => self.levels.iter().position(|(l, _)| l == v),
            AtValue::Number(_) => None,
        }
    }
}

/// Builds the bubble plot.
///
/// # Errors
/// [`Error::Usage`] naming `--bubble` when the model has no moderator, or
/// `--bubble-x` when it names none of the model's moderators; naming
/// `--height` when the height leaves no room for the plot.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let view = view(report, moderator(report, opts)?);
    let j = view.j;
    let k = super::text_scale(opts.font_size);
    let width = f64::from(opts.width.unwrap_or(900));
    let name = &report.model.moderators[j].name;

    // Heading, caption and legend first: their heights fix the plot area.
    let margin = 18.0;
    let heading = Heading::new(report, &format!("Effect by {name}"), (width, margin), k);
    let cap_lines: Vec<String> = caption(report, &view)
        .iter()
        .flat_map(|c| wrap(c, size::SMALL * k, width - 2.0 * margin))
        .collect();
    let legend_rows = view
        .split
        .as_ref()
        .map_or(Vec::new(), |s| legend::rows(s, width - 2.0 * margin, k));
    let legend_y = 70.0 * k + heading.extra();
    let top = 92.0 * k + heading.extra() + 20.0 * k * legend_rows.len() as f64;
    let page = ChartPage {
        plot: "bubble plot",
        width,
        height: opts.height,
        default_height: 620.0,
        margin,
        top,
        bottom: (70.0 + 17.0 * cap_lines.len() as f64) * k,
        min_left: 0.0,
        k,
    };
    let (xa, ya) = (x_axis(report, &view), y_axis(report, &view));
    let y_title = effect_axis_title(report);
    let (f, height) = Frame::in_page(&page, xa, ya, false, (name, &y_title))?;
    let mut sc = Scene::new(width as u32, height as u32);
    heading.draw(&mut sc);
    if let Some(s) = &view.split {
        legend::draw(
            &mut sc,
            s,
            &legend_rows,
            (margin, legend_y),
            k,
            width - 2.0 * margin,
        );
    }
    f.grid(&mut sc);
    if (f.ya.lo..=f.ya.hi).contains(&0.0) {
        let y = f.y(0.0);
        sc.dashed(vec![(f.x0, y), (f.x1, y)], GUIDE, 1, (4.0, 4.0));
    }
    let bubbles = Bubbles::new(report, &view, f);
    match &report.model.moderators[j].kind {
        ModeratorKind::Numeric { .. } if view.binary => bubbles.two_values(&mut sc),
        ModeratorKind::Numeric { .. } => bubbles.along_numbers(&mut sc),
        ModeratorKind::Categorical { levels, .. } => bubbles.by_level(&mut sc, levels),
    }
    let f = &bubbles.f;
    f.axes(&mut sc);
    super::caption_scaled(&mut sc, &cap_lines, (margin, f.below()), k);
    Ok(sc)
}

/// The categorical moderator whose levels mark the studies of the bubble
/// plot of `report` (None when there is none, or the plot cannot be drawn).
pub(crate) fn marked_by<'a>(report: &'a FitReport, opts: &PlotOptions) -> Option<&'a str> {
    let j = moderator(report, opts).ok()?;
    view(report, j).split.map(|s| s.name)
}

/// The view of moderator `j`: whether it holds only 0 and 1, and the
/// categorical moderator its studies are marked by (the first with 2 to
/// [`marks::LEVELS`] levels that has fitted lines along `j`).
fn view(report: &FitReport, j: usize) -> View<'_> {
    let mods = &report.model.moderators;
    let binary = match mods[j].kind {
        ModeratorKind::Numeric { min, max, .. } => {
            min == 0.0
                && max == 1.0
                && report
                    .studies
                    .iter()
                    .all(|s| matches!(s.moderators[j], AtValue::Number(x) if x == 0.0 || x == 1.0))
        }
        ModeratorKind::Categorical { .. } => false,
    };
    let split = mods.iter().enumerate().find_map(|(g, m)| {
        let ModeratorKind::Categorical { levels, counts, .. } = &m.kind else {
            return None;
        };
        let curves: Vec<&LevelCurve> = report
            .level_curves
            .iter()
            .filter(|c| c.moderator == mods[j].name && c.by == m.name)
            .collect();
        (g != j && (2..=marks::LEVELS).contains(&levels.len()) && curves.len() == levels.len())
            .then(|| Split {
                g,
                name: &m.name,
                levels: levels
                    .iter()
                    .map(String::as_str)
                    .zip(counts.iter().copied())
                    .collect(),
                curves,
            })
    });
    View { j, binary, split }
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
fn caption(report: &FitReport, view: &View<'_>) -> Vec<String> {
    let m = &report.model.moderators[view.j];
    let name = &m.name;
    let lv = fmt::level_pct(report.model.level);
    let numeric = matches!(m.kind, ModeratorKind::Numeric { .. });
    let continuous = numeric && !view.binary;
    let curve = report.curves.iter().find(|c| &c.moderator == name);
    let held = match &view.split {
        Some(s) => s.curves[0].held.clone(),
        None if numeric => curve.map(|c| c.held.clone()).unwrap_or_default(),
        None => report
            .subgroups
            .iter()
            .find(|g| &g.moderator == name)
            .map(|g| g.held.clone())
            .unwrap_or_default(),
    };
    let study = match &view.split {
        Some(s) => format!(
            "Marker: a study, its shape and colour its level of {} (legend), its area proportional \
             to its weight",
            s.name
        ),
        None => "○ study (area proportional to its weight)".to_string(),
    };
    let at = if view.binary { "value" } else { "level" };
    let fitted = match (&view.split, continuous) {
        (Some(_), true) => {
            format!("lines: the fitted mean effect at each level; shaded: its {lv} confidence band")
        }
        (None, true) => format!("solid line: fitted mean effect; shaded: its {lv} confidence band"),
        (Some(_), false) => format!(
            "filled marker with bar: the fitted mean effect of each level at each value, with its \
             {lv} CI"
        ),
        (None, false) => {
            format!("◆ the model's predicted mean effect for the {at} with its {lv} CI (solid bar)")
        }
    };
    let mut caption = Vec::new();
    let pi_drawn = report.spread.is_none() && view.split.is_none();
    if let Some(s) = &report.spread {
        caption.push(format!(
            "{study}; {fitted}; pale bar through a study: the {lv} band for a new study's true \
             effect with that study's characteristics, from its own τ², which depends on {} \
             (location-scale model).",
            s.spread_by.join(", ")
        ));
    } else if view.split.is_some() {
        caption.push(format!(
            "{study}; {fitted}. Each level's {lv} prediction band is in the JSON output \
             (level_curves)."
        ));
    } else if continuous {
        caption.push(format!(
            "{study}; {fitted}; dashed lines: {lv} prediction band for a new study's true effect."
        ));
    } else {
        caption.push(format!(
            "{study}; {fitted}; dashed bar: {lv} prediction interval."
        ));
    }
    if numeric && report.model.interactions.is_empty() {
        caption.extend(slope_line(report, name, view.binary));
    }
    if !held.is_empty() {
        caption.push(format!("Other moderators are held {held}."));
    }
    if continuous {
        if let Some(region) = super::regions::caption(report, name, &lv) {
            caption.push(region);
            // The region belongs to the main line, whose level is not drawn alone.
            if let (Some(_), Some(c)) = (&view.split, curve) {
                caption.push(format!("The region is that of the line {}.", c.held));
            }
        }
    }
    if report.tau2.estimate == 0.0 && pi_drawn {
        caption.push(
            "τ² is estimated as 0, so the prediction band coincides with the confidence band."
                .into(),
        );
    }
    caption.push(model_line(report));
    caption
}

/// The coefficient of numeric moderator `name` in words (None when the
/// report has no such coefficient).
fn slope_line(report: &FitReport, name: &str, binary: bool) -> Option<String> {
    let c = report.coefficients.iter().find(|c| c.term == name)?;
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
    let change = if binary {
        format!("from {name} = 0 to {name} = 1")
    } else {
        format!("per unit of {name}")
    };
    Some(format!(
        "Change in the analysed effect {change}: {} [{}, {}]{ratio}, p {}.",
        fmt::plot_num(c.contrast.estimate, d),
        fmt::plot_num(c.contrast.ci.ci_low, d),
        fmt::plot_num(c.contrast.ci.ci_high, d),
        fmt::p(c.contrast.test.p)
    ))
}

/// The y axis (plot space): the studies, 0, and the drawn bands or intervals.
fn y_axis(report: &FitReport, view: &View<'_>) -> Axis {
    let scale = report.measure.reading_scale;
    let tp = |y: f64| Axis::to_plot(scale, y);
    let name = &report.model.moderators[view.j].name;
    let numeric = matches!(
        report.model.moderators[view.j].kind,
        ModeratorKind::Numeric { .. }
    );
    let curve = report.curves.iter().find(|c| &c.moderator == name);
    let mut ys: Vec<f64> = report.studies.iter().map(|s| tp(s.effect)).collect();
    ys.push(0.0);
    if let Some(s) = &report.spread {
        // Under the location-scale model the bands are each study's own.
        for b in &s.studies {
            ys.extend([tp(b.pi_low), tp(b.pi_high)]);
        }
    }
    if let Some(split) = &view.split {
        for p in split.curves.iter().flat_map(|c| &c.points) {
            ys.extend([tp(p.ci.ci_low), tp(p.ci.ci_high)]);
        }
    } else if report.spread.is_none() && numeric {
        for p in curve.iter().flat_map(|c| &c.points) {
            ys.extend([tp(p.pi.pi_low), tp(p.pi.pi_high)]);
        }
    } else if let Some(g) = report
        .subgroups
        .iter()
        .find(|g| &g.moderator == name && report.spread.is_none())
    {
        for l in &g.levels {
            ys.extend([
                tp(l.predicted.mean.pi.pi_low),
                tp(l.predicted.mean.pi.pi_high),
            ]);
        }
    }
    ys.retain(|y| y.is_finite());
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

/// The x axis: the moderator's range, or one column per level (or per
/// value 0 and 1), without ticks.
fn x_axis(report: &FitReport, view: &View<'_>) -> Axis {
    match &report.model.moderators[view.j].kind {
        ModeratorKind::Numeric { min, max, .. } if !view.binary => {
            let pad = 0.04 * (max - min);
            Axis::new(min - pad, max + pad, false, 8).snapped()
        }
        kind => {
            let n = match kind {
                ModeratorKind::Categorical { levels, .. } => levels.len(),
                ModeratorKind::Numeric { .. } => 2,
            };
            Axis {
                lo: -0.5,
                hi: n as f64 - 0.5,
                ticks: Vec::new(),
            }
        }
    }
}
