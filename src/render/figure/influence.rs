//! The influence plot (`--influence-plot FILE`): how far leaving each study
//! out moves the answer, against how much pull the study has. The y axis is
//! the largest move of a moderator coefficient in its standard errors (of
//! the average when the model has none), the x axis the leverage; the
//! dashed lines are the two cut-offs of the influence view, and the quiet
//! corner inside both is shaded. Flagged studies are drawn in the accent
//! colour and named.

use super::axis::ChartPage;
use super::palette::*;
use super::{model_line, size, wrap, Align, Axis, Frame, Heading, PlotOptions, Scene};
use crate::error::{Error, Result};
use crate::result::FitReport;
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// One study's point: its label, leverage, signed move in standard errors,
/// the term moved most and whether it meets a flag.
struct Point {
    label: String,
    leverage: f64,
    shift: f64,
    flagged: bool,
}

/// Builds the influence plot.
///
/// # Errors
/// [`Error::Usage`] naming `--influence-plot` when the report has no
/// influence view, and naming `--height` when the figure has no room.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let (Some(inf), Some(rules)) = (&report.influence, &report.influence_rules) else {
        return Err(Error::usage(
            Flag::InfluencePlot,
            format!("draws the influence view; add {}", Flag::Influence),
        ));
    };
    let has_mods = report.model.terms.len() > 1;
    let points: Vec<Point> = inf
        .iter()
        .filter_map(|s| {
            let (_, shift) = s.largest_shift(has_mods)?;
            Some(Point {
                label: s.study.clone(),
                leverage: s.leverage,
                shift,
                flagged: !s.flags.is_empty(),
            })
        })
        .collect();
    let k = super::text_scale(opts.font_size);
    let width = f64::from(opts.width.unwrap_or(820));
    let margin = 18.0;
    let title = if has_mods {
        "How far each study moves the moderator coefficients, against its pull"
    } else {
        "How far each study moves the average, against its pull"
    };
    let heading = Heading::new(report, title, (width, margin), k);
    let cap_lines: Vec<String> = caption(report, inf.len() - points.len())
        .iter()
        .flat_map(|c| wrap(c, size::SMALL * k, width - 2.0 * margin))
        .collect();
    let cut_y = rules.coefficient_shift_se;
    let cut_x = rules.leverage;
    let x_hi = points.iter().map(|p| p.leverage).fold(cut_x, f64::max) * 1.12;
    let y_hi = points.iter().map(|p| p.shift.abs()).fold(cut_y, f64::max) * 1.15;
    let xa = Axis::new(0.0, x_hi, false, 6).snapped();
    let ya = Axis::new(-y_hi, y_hi, false, 6).snapped();
    let page = ChartPage {
        plot: "influence plot",
        width,
        height: opts.height,
        default_height: 620.0,
        margin,
        top: 92.0 * k + heading.extra(),
        bottom: (70.0 + 17.0 * cap_lines.len() as f64) * k,
        min_left: 0.0,
        k,
    };
    let y_title = if has_mods {
        "largest move of a moderator coefficient when left out (standard errors)"
    } else {
        "move of the average when left out (standard errors)"
    };
    let titles = ("leverage (pull on its own fitted value)", y_title);
    let (f, height) = Frame::in_page(&page, xa, ya, false, titles)?;
    let mut sc = Scene::new(width as u32, height as u32);
    heading.draw(&mut sc);
    f.grid(&mut sc);
    // The quiet corner: little pull and little move.
    sc.rect(
        f.x(0.0_f64.max(f.xa.lo)),
        f.y(cut_y.min(f.ya.hi)),
        f.x(cut_x.min(f.xa.hi)),
        f.y((-cut_y).max(f.ya.lo)),
        BAND,
    );
    sc.line(
        vec![(f.x(f.xa.lo), f.y(0.0)), (f.x(f.xa.hi), f.y(0.0))],
        GUIDE,
        1,
    );
    for y in [cut_y, -cut_y] {
        sc.dashed(
            vec![(f.x(f.xa.lo), f.y(y)), (f.x(f.xa.hi), f.y(y))],
            MUTED,
            1,
            (6.0, 4.0),
        );
    }
    sc.dashed(
        vec![(f.x(cut_x), f.y(f.ya.lo)), (f.x(cut_x), f.y(f.ya.hi))],
        MUTED,
        1,
        (6.0, 4.0),
    );
    for p in points.iter().filter(|p| !p.flagged) {
        sc.circle(
            (f.x(p.leverage), f.y(p.shift)),
            4.5,
            Some((STUDY, 0.85)),
            Some((PAPER, 1)),
        );
    }
    let flagged: Vec<&Point> = points.iter().filter(|p| p.flagged).collect();
    flagged_points(&mut sc, &f, &flagged, margin);
    f.axes(&mut sc);
    super::caption_scaled(&mut sc, &cap_lines, (margin, f.below()), k);
    Ok(sc)
}

/// The flagged studies `flagged`: each a diamond with its name beside it, to
/// the right when it fits inside the plot area, else to the left, moved up
/// or down by up to six lines (with a leader to its point) when that place
/// is taken by a name already placed; a name too long for its side is shortened
/// keeping both ends.
fn flagged_points(sc: &mut Scene, f: &Frame, flagged: &[&Point], margin: f64) {
    let small = size::SMALL * f.k;
    let line = super::font::em(small) * 1.3;
    let mut placed: Vec<(f64, f64, f64, f64)> = Vec::new();
    for p in flagged {
        let at = (f.x(p.leverage), f.y(p.shift));
        sc.poly(
            vec![
                (at.0, at.1 - 6.5),
                (at.0 + 6.5, at.1),
                (at.0, at.1 + 6.5),
                (at.0 - 6.5, at.1),
            ],
            Some((POOLED, 1.0)),
            Some((PAPER, 1)),
        );
        // At most 180 pixels (times the text scale), and no wider than the
        // room on the wider side of the point.
        let room = (f.x1 - at.0).max(at.0 - margin) - 10.0;
        let label = super::scene::fit_middle(&p.label, small, (180.0 * f.k).min(room));
        let w = super::scene::text_width(&label, small);
        let right = at.0 + 10.0 + w < f.x1;
        let sides: &[bool] = if right { &[true, false] } else { &[false] };
        let box_at = |right: bool, dy: f64| {
            let (x0, x1) = if right {
                (at.0 + 10.0, at.0 + 10.0 + w)
            } else {
                (at.0 - 10.0 - w, at.0 - 10.0)
            };
            let y = at.1 + dy;
            (x0, y - line / 2.0, x1, y + line / 2.0)
        };
        let free = |b: (f64, f64, f64, f64)| {
            b.0 >= margin
                && b.1 >= f.y0
                && b.3 <= f.y1
                && placed
                    .iter()
                    .all(|q| b.2 <= q.0 || q.2 <= b.0 || b.3 <= q.1 || q.3 <= b.1)
        };
        // Up and down by up to six lines, nearest first.
        let choice = (0..13)
            .map(|i: i32| f64::from(if i % 2 == 1 { -(i + 1) / 2 } else { i / 2 }))
            .flat_map(|d| sides.iter().map(move |&r| (r, d * line)))
            .find(|&(r, dy)| free(box_at(r, dy)))
            .unwrap_or((right, 0.0));
        let (r, dy) = choice;
        let b = box_at(r, dy);
        placed.push(b);
        let (x, align) = if r {
            (b.0, Align::Left)
        } else {
            (b.2, Align::Right)
        };
        if dy != 0.0 {
            let end = if r { b.0 - 2.0 } else { b.2 + 2.0 };
            sc.line(vec![at, (end, at.1 + dy)], MUTED, 1);
        }
        sc.text((x, at.1 + dy), label, small, INK, align);
    }
}

/// The caption's sentences (before wrapping).
fn caption(report: &FitReport, without_refit: usize) -> Vec<String> {
    let Some(rules) = &report.influence_rules else {
        return Vec::new();
    };
    let k = report.influence.as_ref().map_or(0, Vec::len);
    let p = report.model.terms.len();
    let what = if p > 1 {
        "the moderator coefficient it moves most, in that coefficient's standard errors"
    } else {
        "the average, in its standard error"
    };
    let mut lines = vec![
        format!(
            "Each point is a study: up, how far leaving it out moves {what} (positive: the \
             coefficient rises without it); across, its leverage."
        ),
        format!(
            "Dashed lines: a move of ±2/√k = ±{} standard errors (the size-adjusted cut-off of \
             Belsley, Kuh & Welsch 1980) and leverage 2p/k = {} (twice the average leverage, \
             Hoaglin & Welsch 1978; k = {k}, p = {p}). The shaded corner holds studies inside \
             both.",
            fmt::plot_num(rules.coefficient_shift_se, 3),
            fmt::plot_num(rules.leverage, 3)
        ),
        "◆ named: a study that meets any flag of the influence view (it moves a coefficient or \
         has high leverage as above, has an unusual effect, or reverses a conclusion when left \
         out); ● the others. A flagged study deserves a second look, not removal."
            .into(),
    ];
    if without_refit > 0 {
        lines.push(format!(
            "{without_refit} {} without an answer when left out {} not drawn.",
            if without_refit == 1 {
                "study"
            } else {
                "studies"
            },
            if without_refit == 1 { "is" } else { "are" }
        ));
    }
    lines.push(model_line(report));
    lines
}
