//! The forest plot: one row per study, subgroup and overall averages, the
//! prediction interval on its own dashed row.
//!
//! Layout, left to right: label column, plot area, "effect [CI]" column,
//! weight column. Rows are 24, 19 or 15 pixels high depending on how many
//! there are (or share `--height`); labels are shortened with an ellipsis to
//! their column, so they never reach the plot area.

use super::palette::*;
use super::scene::{fit_text, text_width};
use super::{
    decimals_for, measure_name, model_line, size, Align, Axis, PlotOptions, Scene, SortKey,
};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{AtValue, Estimate, FitReport, LevelSummary, ModeratorKind};
use crate::support::format as fmt;

/// The most studies a forest plot draws (one row each).
pub const MAX_STUDIES: usize = 20_000;

enum Row<'a> {
    GroupHead(String),
    Study(usize),
    GroupAverage(&'a LevelSummary, f64),
    Overall,
    Predict,
    Gap,
}

/// Study indices in the requested order (stable: ties keep input order).
fn order(report: &FitReport, sort: &SortKey) -> Result<Vec<usize>> {
    let mut idx: Vec<usize> = (0..report.studies.len()).collect();
    let s = &report.studies;
    match sort {
        SortKey::Input => {}
        SortKey::Effect => idx.sort_by(|&a, &b| s[a].effect.total_cmp(&s[b].effect)),
        SortKey::Precision => idx.sort_by(|&a, &b| s[a].variance.total_cmp(&s[b].variance)),
        SortKey::Moderator(name) => {
            let Some(j) = report.model.moderators.iter().position(|m| &m.name == name) else {
                let names: Vec<&str> = report
                    .model
                    .moderators
                    .iter()
                    .map(|m| m.name.as_str())
                    .collect();
                return Err(Error::usage(
                    "--sort",
                    format!(
                        "'{name}' is not effect, precision, input or a moderator of this model{}",
                        if names.is_empty() {
                            String::new()
                        } else {
                            format!(" (moderators: {})", names.join(", "))
                        }
                    ),
                ));
            };
            let key = |i: usize| match &s[i].moderators[j] {
                AtValue::Number(x) => (0usize, *x, String::new()),
                AtValue::Level(l) => {
                    let pos = match &report.model.moderators[j].kind {
                        ModeratorKind::Categorical { levels, .. } => {
                            levels.iter().position(|x| x == l).unwrap_or(0)
                        }
                        _ => 0,
                    };
                    (pos, 0.0, l.clone())
                }
            };
            idx.sort_by(|&a, &b| {
                let (ka, kb) = (key(a), key(b));
                ka.0.cmp(&kb.0)
                    .then(ka.1.total_cmp(&kb.1))
                    .then(ka.2.cmp(&kb.2))
            });
        }
    }
    Ok(idx)
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
        if !line.is_empty() && text_width(&candidate, size) > max {
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

/// Builds the forest plot.
///
/// # Errors
/// [`Error::Usage`] for `--sort` naming no moderator, `--show-fitted`
/// without moderators, or a width too small for the columns.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let scale = report.measure.reading_scale;
    let tp = |y: f64| Axis::to_plot(scale, y);
    let show = |y: f64| scale.apply(y);
    if opts.show_fitted && report.model.moderators.is_empty() {
        return Err(Error::usage(
            "--show-fitted",
            "the model has no moderators, so every fitted value is the average; add --moderator",
        ));
    }
    let studies = &report.studies;
    if studies.len() > MAX_STUDIES {
        return Err(Error::usage(
            "--forest",
            format!(
                "{} studies are too many rows for a forest plot (at most {MAX_STUDIES}); a funnel \
                 or bubble plot shows them all",
                studies.len()
            ),
        ));
    }
    let ordered = order(report, &opts.sort)?;

    // Rows, grouped by the first categorical moderator.
    let group = report
        .model
        .moderators
        .iter()
        .enumerate()
        .find_map(|(j, m)| {
            matches!(m.kind, ModeratorKind::Categorical { .. })
                .then(|| {
                    report
                        .subgroups
                        .iter()
                        .find(|g| g.moderator == m.name)
                        .map(|g| (j, g))
                })
                .flatten()
        });
    let mut rows: Vec<Row> = Vec::new();
    match group {
        Some((j, g)) => {
            for lv in &g.levels {
                rows.push(Row::GroupHead(format!(
                    "{} = {}  (k = {})",
                    g.moderator, lv.level, lv.k
                )));
                let mut w = 0.0;
                for &i in &ordered {
                    if matches!(&studies[i].moderators[j], AtValue::Level(l) if *l == lv.level) {
                        rows.push(Row::Study(i));
                        w += studies[i].weight;
                    }
                }
                rows.push(Row::GroupAverage(lv, w));
                rows.push(Row::Gap);
            }
        }
        None => rows.extend(ordered.iter().map(|&i| Row::Study(i))),
    }
    rows.push(Row::Overall);
    rows.push(Row::Predict);

    // Value range (plot space) and the clip limits of long intervals.
    let avg = &report.average;
    let mut core: Vec<f64> = studies.iter().map(|s| tp(s.effect)).collect();
    core.extend([tp(avg.mean.pi.pi_low), tp(avg.mean.pi.pi_high), 0.0]);
    if let Some((_, g)) = group {
        for lv in &g.levels {
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
    let axis = Axis::new(lo, hi, scale == ReadingScale::Ratio, 7).snapped();

    // Text columns.
    let n_rows = rows.len();
    let width = f64::from(opts.width.unwrap_or(1000));
    let auto_rh = if n_rows <= 40 {
        24.0
    } else if n_rows <= 120 {
        19.0
    } else {
        15.0
    };
    let font = |rh: f64| (rh * 0.56).clamp(9.0, 13.5);
    let reading_values: Vec<f64> = studies.iter().map(|s| show(s.effect)).collect();
    let vmin = reading_values.iter().copied().fold(f64::INFINITY, f64::min);
    let vmax = reading_values
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let dec = if scale == ReadingScale::Ratio {
        if studies.iter().any(|s| show(s.ci.ci_low) < 0.095) {
            3
        } else {
            2
        }
    } else {
        decimals_for((vmax - vmin).max(vmax.abs().max(vmin.abs()))).clamp(2, 4)
    };
    let ci_text = |e: f64, l: f64, h: f64| {
        format!(
            "{} [{}, {}]",
            fmt::plot_num(show(e), dec),
            fmt::plot_num(show(l), dec),
            fmt::plot_num(show(h), dec)
        )
    };
    let margin = 18.0;
    let fs_max = font(auto_rh).max(12.0);
    let ci_w = studies
        .iter()
        .map(|s| text_width(&ci_text(s.effect, s.ci.ci_low, s.ci.ci_high), fs_max))
        .fold(
            text_width(
                &format!(
                    "{} [{} CI]",
                    measure_name(report),
                    fmt::level_pct(report.model.level)
                ),
                fs_max,
            ),
            f64::max,
        )
        + 14.0;
    let weight_w = text_width("Weight", fs_max).max(text_width("100.0%", fs_max)) + 12.0;
    let label_w = (0.27 * width).clamp(120.0, 340.0);
    // Sorting by a moderator shows its values in a column after the labels.
    let sort_col = match &opts.sort {
        SortKey::Moderator(name) => report
            .model
            .moderators
            .iter()
            .position(|m| &m.name == name)
            .map(|j| {
                let values: Vec<String> = studies
                    .iter()
                    .map(|s| match &s.moderators[j] {
                        AtValue::Number(x) => {
                            let t = fmt::plot_num(*x, 3);
                            if t.contains('.') {
                                t.trim_end_matches('0').trim_end_matches('.').to_string()
                            } else {
                                t
                            }
                        }
                        AtValue::Level(l) => l.clone(),
                    })
                    .collect();
                let head = fit_text(name, fs_max.min(13.0), 0.4 * label_w);
                let w = values
                    .iter()
                    .map(|v| text_width(v, fs_max))
                    .fold(text_width(&head, fs_max.min(13.0)), f64::max)
                    .min(0.4 * label_w);
                (head, values, w + 12.0)
            }),
        _ => None,
    };
    let name_w = label_w - sort_col.as_ref().map_or(0.0, |c| c.2);
    let px0 = margin + label_w + 14.0;
    let px1 = width - margin - weight_w - ci_w - 12.0;
    if px1 - px0 < 140.0 {
        let need = width + 140.0 - (px1 - px0);
        return Err(Error::usage(
            "--width",
            format!(
                "{width} pixels leave no room for the forest plot's columns; use at least {need:.0}"
            ),
        ));
    }
    let x_of = |v: f64| px0 + (v - axis.lo) / (axis.hi - axis.lo) * (px1 - px0);

    // Caption (wrapped to the width), which fixes the space at the bottom.
    let lv = fmt::level_pct(report.model.level);
    let pooled_name = if report.model.tau2_method == crate::result::Tau2Method::None {
        "Common-effect average"
    } else {
        "Random-effects average"
    };
    let mut caption = vec![
        format!(
            "● study estimate (area proportional to its weight in the fitted model) with its {lv} CI; \
             ◆ {} and its {lv} CI; the dashed line with end bars is the {lv} prediction interval \
             for the true effect of a new study.",
            pooled_name.to_lowercase()
        ),
        model_line(report),
    ];
    if let Some((_, g)) = group {
        caption.push(format!(
            "Rows are grouped by {}; each lighter ◇ averages that group's studies alone (with its own τ²).",
            g.moderator
        ));
    }
    if opts.show_fitted {
        caption.push("△ fitted value of the meta-regression for that study.".into());
    }
    caption.push(format!(
        "Grey line: no effect ({}); dotted line: the average.",
        if scale == ReadingScale::Ratio {
            "ratio 1"
        } else {
            "0"
        }
    ));
    let clipped = studies
        .iter()
        .any(|s| tp(s.ci.ci_low) < axis.lo || tp(s.ci.ci_high) > axis.hi);
    if clipped {
        caption.push("◀ ▶ the interval continues beyond the axis.".into());
    }
    let cap_lines: Vec<String> = caption
        .iter()
        .flat_map(|c| wrap(c, size::SMALL, width - 2.0 * margin))
        .collect();

    let top = 86.0; // title, subtitle, column headers
    let bottom = 62.0 + 17.0 * cap_lines.len() as f64; // axis + caption
    let (rh, height) = match opts.height {
        Some(h) => {
            let rh = (f64::from(h) - top - bottom) / n_rows as f64;
            if rh < 4.0 {
                return Err(Error::usage(
                    "--height",
                    format!(
                        "{h} pixels are too few for {n_rows} rows; use at least {:.0} (or leave \
                         --height out for an automatic height)",
                        top + bottom + 4.0 * n_rows as f64
                    ),
                ));
            }
            (rh, h)
        }
        None => (
            auto_rh,
            (top + bottom + auto_rh * n_rows as f64).ceil() as u32,
        ),
    };
    let fs = font(rh);
    let mut sc = Scene::new(width as u32, height);

    // Title and headers.
    let title = if group.is_some() {
        "Study effects, subgroup averages and the overall average"
    } else {
        "Study effects and their average"
    };
    super::heading(&mut sc, report, title, width, margin);
    let hy = 70.0;
    let head = fs_max.min(13.0);
    sc.text((margin, hy), "Study", head, INK, Align::Left);
    if let Some((name, _, _)) = &sort_col {
        sc.text(
            (margin + label_w, hy),
            name.clone(),
            head,
            INK,
            Align::Right,
        );
    }
    sc.text(
        (width - margin - weight_w - 10.0, hy),
        format!("{} [{} CI]", measure_name(report), lv),
        head,
        INK,
        Align::Right,
    );
    sc.text((width - margin, hy), "Weight", head, INK, Align::Right);
    sc.line(
        vec![(margin, top - 4.0), (width - margin, top - 4.0)],
        INK,
        1,
    );

    let rows_bottom = top + rh * n_rows as f64;
    // Bands first (behind everything).
    let mut band = false;
    for (r, row) in rows.iter().enumerate() {
        if let Row::Study(_) = row {
            if band {
                let y = top + rh * r as f64;
                sc.rect(margin, y, width - margin, y + rh, BAND);
            }
            band = !band;
        } else {
            band = false;
        }
    }
    // No-effect line.
    let x_null = x_of(0.0);
    if (axis.lo..=axis.hi).contains(&0.0) {
        sc.line(
            vec![(x_null, top - 2.0), (x_null, rows_bottom + 4.0)],
            GUIDE,
            1,
        );
    }
    // Dotted guide at the average.
    if (axis.lo..=axis.hi).contains(&tp(avg.mean.estimate)) {
        let x = x_of(tp(avg.mean.estimate));
        sc.dashed(vec![(x, top), (x, rows_bottom)], POOLED, 1, (1.5, 4.0));
    }

    let w_max = studies.iter().map(|s| s.weight).fold(0.0, f64::max);
    let r_max = (rh * 0.46).max(2.0);
    let label_size = fs;
    let clip = |v: f64| v.clamp(axis.lo, axis.hi);
    let diamond = |sc: &mut Scene, e: &Estimate, y: f64, fill: (_, f64), outline: u32| {
        let (a, b, c) = (
            x_of(clip(tp(e.mean.ci.ci_low))),
            x_of(clip(tp(e.mean.estimate))),
            x_of(clip(tp(e.mean.ci.ci_high))),
        );
        let hd = (rh * 0.36).max(2.5);
        // A very narrow interval stays visible as a diamond 3 pixels wide.
        let (a, c) = (a.min(b - 1.5), c.max(b + 1.5));
        sc.poly(
            vec![(a, y), (b, y - hd), (c, y), (b, y + hd)],
            Some(fill),
            Some((INK, outline)),
        );
    };
    for (r, row) in rows.iter().enumerate() {
        let y = top + rh * (r as f64 + 0.5);
        match row {
            Row::Gap => {}
            Row::GroupHead(text) => {
                sc.text(
                    (margin, y),
                    fit_text(text, fs + 0.5, px0 - margin - 8.0 + ci_w),
                    fs + 0.5,
                    INK,
                    Align::Left,
                );
            }
            Row::Study(i) => {
                let s = &studies[*i];
                let indent = if group.is_some() { 10.0 } else { 0.0 };
                sc.text(
                    (margin + indent, y),
                    fit_text(&s.study, label_size, name_w - indent),
                    label_size,
                    INK,
                    Align::Left,
                );
                if let Some((_, values, w)) = &sort_col {
                    sc.text(
                        (margin + label_w, y),
                        fit_text(&values[*i], label_size, w - 12.0),
                        label_size,
                        MUTED,
                        Align::Right,
                    );
                }
                let (l, h) = (tp(s.ci.ci_low), tp(s.ci.ci_high));
                let (xl, xh) = (x_of(clip(l)), x_of(clip(h)));
                let cap = (rh * 0.18).max(1.5);
                let mut path = Vec::new();
                if l >= axis.lo {
                    path.extend([(xl, y - cap), (xl, y + cap)]);
                }
                path.push((xl, y));
                path.push((xh, y));
                if h <= axis.hi {
                    path.extend([(xh, y - cap), (xh, y + cap)]);
                }
                sc.line(path, STUDY, 1);
                let arrow = (rh * 0.22).max(2.5);
                if l < axis.lo {
                    sc.poly(
                        vec![
                            (xl - 2.0, y),
                            (xl + arrow, y - arrow),
                            (xl + arrow, y + arrow),
                        ],
                        Some((STUDY, 1.0)),
                        None,
                    );
                }
                if h > axis.hi {
                    sc.poly(
                        vec![
                            (xh + 2.0, y),
                            (xh - arrow, y - arrow),
                            (xh - arrow, y + arrow),
                        ],
                        Some((STUDY, 1.0)),
                        None,
                    );
                }
                let e = tp(s.effect);
                if (axis.lo..=axis.hi).contains(&e) {
                    let r = (r_max * (s.weight / w_max).sqrt()).max(1.5);
                    sc.circle((x_of(e), y), r, Some((STUDY, 1.0)), None);
                }
                if opts.show_fitted {
                    let f = tp(s.fitted);
                    if (axis.lo..=axis.hi).contains(&f) {
                        let t = (rh * 0.3).max(3.0);
                        let x = x_of(f);
                        sc.poly(
                            vec![(x, y - t), (x + t, y + 0.8 * t), (x - t, y + 0.8 * t)],
                            Some((PAPER, 0.6)),
                            Some((FIT, 2)),
                        );
                    }
                }
                sc.text(
                    (width - margin - weight_w - 10.0, y),
                    ci_text(s.effect, s.ci.ci_low, s.ci.ci_high),
                    label_size,
                    INK,
                    Align::Right,
                );
                sc.text(
                    (width - margin, y),
                    format!("{:.1}%", s.weight),
                    label_size,
                    INK,
                    Align::Right,
                );
            }
            Row::GroupAverage(lvl, w) => {
                let indent = 10.0;
                sc.text(
                    (margin + indent, y),
                    fit_text(
                        &format!("Average of {} ({} studies)", lvl.level, lvl.k),
                        label_size,
                        label_w - indent,
                    ),
                    label_size,
                    INK,
                    Align::Left,
                );
                match &lvl.pooled {
                    Some(p) => {
                        diamond(&mut sc, p, y, (GROUP, 0.45), 1);
                        sc.text(
                            (width - margin - weight_w - 10.0, y),
                            ci_text(p.mean.estimate, p.mean.ci.ci_low, p.mean.ci.ci_high),
                            label_size,
                            INK,
                            Align::Right,
                        );
                    }
                    None => sc.text(
                        (width - margin - weight_w - 10.0, y),
                        "one study: no average",
                        label_size,
                        MUTED,
                        Align::Right,
                    ),
                }
                sc.text(
                    (width - margin, y),
                    format!("{w:.1}%"),
                    label_size,
                    MUTED,
                    Align::Right,
                );
            }
            Row::Overall => {
                let y0 = top + rh * r as f64;
                sc.line(vec![(margin, y0), (width - margin, y0)], GUIDE, 1);
                sc.text(
                    (margin, y),
                    fit_text(
                        &format!("{pooled_name} (k = {})", report.k),
                        label_size,
                        label_w,
                    ),
                    label_size,
                    INK,
                    Align::Left,
                );
                diamond(&mut sc, avg, y, (POOLED, 1.0), 2);
                sc.text(
                    (width - margin - weight_w - 10.0, y),
                    ci_text(avg.mean.estimate, avg.mean.ci.ci_low, avg.mean.ci.ci_high),
                    label_size,
                    INK,
                    Align::Right,
                );
                sc.text((width - margin, y), "100%", label_size, INK, Align::Right);
            }
            Row::Predict => {
                sc.text(
                    (margin, y),
                    fit_text(&format!("Prediction interval ({lv})"), label_size, label_w),
                    label_size,
                    INK,
                    Align::Left,
                );
                let (a, b) = (
                    x_of(clip(tp(avg.mean.pi.pi_low))),
                    x_of(clip(tp(avg.mean.pi.pi_high))),
                );
                let bar = (rh * 0.3).max(2.0);
                sc.dashed(vec![(a, y), (b, y)], PREDICT, 3, (7.0, 4.0));
                sc.line(vec![(a, y - bar), (a, y + bar)], PREDICT, 3);
                sc.line(vec![(b, y - bar), (b, y + bar)], PREDICT, 3);
                sc.text(
                    (width - margin - weight_w - 10.0, y),
                    format!(
                        "[{}, {}]",
                        fmt::plot_num(show(avg.mean.pi.pi_low), dec),
                        fmt::plot_num(show(avg.mean.pi.pi_high), dec)
                    ),
                    label_size,
                    INK,
                    Align::Right,
                );
            }
        }
    }

    // The axis.
    let ay = rows_bottom + 6.0;
    sc.line(vec![(px0, ay), (px1, ay)], INK, 1);
    for (v, label) in &axis.ticks {
        let x = x_of(*v);
        sc.line(vec![(x, ay), (x, ay + 5.0)], INK, 1);
        sc.text(
            (x, ay + 15.0),
            label.clone(),
            size::SMALL,
            INK,
            Align::Center,
        );
    }
    sc.text(
        ((px0 + px1) / 2.0, ay + 36.0),
        effect_axis_title(report),
        size::LABEL,
        INK,
        Align::Center,
    );
    let mut cy = ay + 62.0;
    for line in cap_lines {
        sc.text((margin, cy), line, size::SMALL, MUTED, Align::Left);
        cy += 17.0;
    }
    Ok(sc)
}
