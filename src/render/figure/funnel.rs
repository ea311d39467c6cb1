//! The funnel plot: each study's effect (or, with moderators, its residual)
//! against its standard error, the standard-error axis pointing down, the
//! pseudo-confidence region around the estimate (around 0 for residuals),
//! and optional significance contours around no effect.

use super::axis::ChartPage;
use super::palette::*;
use super::{
    measure_name, model_line, size, wrap, Align, Axis, Frame, Heading, PlotOptions, Scene,
};
use crate::effect::ReadingScale;
use crate::error::Result;
use crate::render::figure::scene::Rgb;
use crate::result::FitReport;
use crate::support::format as fmt;

/// The contour levels (two-sided p) and their fills, lightest first.
const CONTOURS: [(f64, Rgb, &str); 3] = [
    (0.10, Rgb(0xE4, 0xE7, 0xEB), "0.05 ≤ p < 0.10"),
    (0.05, Rgb(0xC5, 0xCA, 0xD2), "0.01 ≤ p < 0.05"),
    (0.01, Rgb(0x9A, 0xA1, 0xAC), "p < 0.01"),
];

/// What the funnel shows: each study's effect (or residual) and standard
/// error, the studies filled in by trim-and-fill, and the centre.
struct Funnel {
    /// Residuals (the model has moderators) instead of effects.
    residuals: bool,
    /// The x axis is a ratio on a log axis.
    ratio_axis: bool,
    /// The normal quantile of the confidence level.
    z: f64,
    /// The centre of the region: the average, or 0 for residuals.
    centre: f64,
    /// Each study's x value.
    xs: Vec<f64>,
    /// Each study's standard error.
    ses: Vec<f64>,
    /// Studies filled in by trim-and-fill: x and standard error.
    filled: Vec<(f64, f64)>,
}

impl Funnel {
    fn of(report: &FitReport) -> Funnel {
        let residuals = !report.model.moderators.is_empty();
        let studies = &report.studies;
        let xs: Vec<f64> = studies
            .iter()
            .map(|s| if residuals { s.residual } else { s.effect })
            .collect();
        let ses: Vec<f64> = studies.iter().map(|s| s.variance.sqrt()).collect();
        // Studies filled in by trim-and-fill (`--small-study`), drawn only on a
        // funnel of effects: trim-and-fill works on the model without moderators.
        let filled: Vec<(f64, f64)> = match (&report.small_study, residuals) {
            (Some(s), false) => s
                .trim_fill
                .filled_studies
                .iter()
                .map(|f| (f.effect, f.variance.sqrt()))
                .collect(),
            _ => Vec::new(),
        };
        Funnel {
            residuals,
            ratio_axis: report.measure.reading_scale == ReadingScale::Ratio && !residuals,
            z: crate::dist::normal_quantile(1.0 - (1.0 - report.model.level) / 2.0),
            centre: if residuals {
                0.0
            } else {
                report.average.mean.estimate
            },
            xs,
            ses,
            filled,
        }
    }
}

/// Builds the funnel plot.
///
/// # Errors
/// None at present beyond the shared drawing errors; the signature matches the other plots.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    let fu = Funnel::of(report);
    let (residuals, ratio_axis, z, centre) = (fu.residuals, fu.ratio_axis, fu.z, fu.centre);
    let k = super::text_scale(opts.font_size);
    let width = f64::from(opts.width.unwrap_or(820));
    let margin = 18.0;
    let title = if residuals {
        "Residuals against their standard error"
    } else {
        "Effects against their standard error"
    };
    let heading = Heading::new(report, title, (width, margin), k);
    let cap_lines: Vec<String> = caption(report, opts, &fu)
        .iter()
        .flat_map(|c| wrap(c, size::SMALL * k, width - 2.0 * margin))
        .collect();

    // x range: the studies, the region at the largest SE, and 0.
    let se_max = fu.ses.iter().copied().fold(0.0, f64::max) * 1.08;
    let ya = Axis::new(0.0, se_max, false, 6).snapped();
    let se_bottom = ya.hi;
    let all_x = || fu.xs.iter().copied().chain(fu.filled.iter().map(|f| f.0));
    let mut lo = all_x().fold(f64::INFINITY, f64::min);
    let mut hi = all_x().fold(f64::NEG_INFINITY, f64::max);
    lo = lo.min(centre - z * se_bottom).min(0.0);
    hi = hi.max(centre + z * se_bottom).max(0.0);
    let pad = 0.04 * (hi - lo).max(1e-6);
    let xa = Axis::new(lo - pad, hi + pad, ratio_axis, 8).snapped();
    let legend_rows = if opts.contours {
        legend_rows(width - 2.0 * margin, k)
    } else {
        Vec::new()
    };
    let legend_h = 24.0 * k * legend_rows.len() as f64;
    let page = ChartPage {
        plot: "funnel plot",
        width,
        height: opts.height,
        default_height: 640.0,
        margin,
        top: 92.0 * k + heading.extra(),
        bottom: (70.0 + 17.0 * cap_lines.len() as f64) * k + legend_h,
        min_left: 0.0,
        k,
    };
    let x_title = x_title(report, &fu);
    let (f, height) = Frame::in_page(&page, xa, ya, true, (&x_title, "standard error"))?;
    let mut sc = Scene::new(width as u32, height as u32);
    heading.draw(&mut sc);
    if opts.contours {
        contours(&mut sc, &f);
    } else {
        f.grid(&mut sc);
    }
    region(&mut sc, &f, &fu, opts.contours);
    points(&mut sc, &f, &fu);
    f.axes(&mut sc);
    let mut cy = f.below();
    if opts.contours {
        legend(&mut sc, &legend_rows, (margin, cy), k);
        cy += legend_h;
    }
    super::caption_scaled(&mut sc, &cap_lines, (margin, cy), k);
    Ok(sc)
}

/// The x axis title: the analysed effect, or its residual.
fn x_title(report: &FitReport, fu: &Funnel) -> String {
    let (residuals, ratio_axis) = (fu.residuals, fu.ratio_axis);
    let analysed = match report.measure.reading_scale {
        ReadingScale::Ratio => format!("log {}", measure_name(report)),
        ReadingScale::Correlation => format!("Fisher's z of {}", measure_name(report)),
        ReadingScale::Same => measure_name(report),
    };
    if residuals {
        format!("residual ({analysed}, effect minus the model's fitted value)")
    } else if ratio_axis {
        format!("{} (log scale)", measure_name(report))
    } else {
        analysed.clone()
    }
}

/// The caption's sentences (before wrapping).
fn caption(report: &FitReport, opts: &PlotOptions, fu: &Funnel) -> Vec<String> {
    let (residuals, ratio_axis, z) = (fu.residuals, fu.ratio_axis, fu.z);
    let lv = fmt::level_pct(report.model.level);
    let mut caption = vec![if residuals {
        format!(
            "● study residual; the model has moderators, so the funnel is centred on 0 (the fitted \
             value); dashed: the {lv} pseudo-confidence region 0 ± {:.2}·SE.",
            z
        )
    } else {
        format!(
            "● study; solid vertical line: the average; dotted: no effect; dashed: the {lv} \
             pseudo-confidence region average ± {:.2}·SE.",
            z
        )
    }];
    if opts.contours {
        caption.push(if residuals {
            "Shaded bands surround each study's fitted value, not no effect: where a residual \
             alone would differ significantly from the model's prediction (two-sided z test), \
             lighter to darker; the legend gives the p-value of each band."
                .into()
        } else {
            "Shaded bands: where a study alone would be significant against no effect (two-sided \
             z test), lighter to darker; the legend gives the p-value of each band."
                .into()
        });
    }
    if let Some(s) = &report.small_study {
        caption.push(if residuals {
            "Trim-and-fill's filled studies are not drawn: this funnel shows residuals of the \
             model with moderators, and trim-and-fill used the model without them."
                .to_string()
        } else {
            format!(
                "○ {} filled in by trim-and-fill (mirrored images, not observed data); average \
                 with them {:.3}.",
                if s.trim_fill.filled == 1 {
                    "study".to_string()
                } else {
                    format!("{} studies", s.trim_fill.filled)
                },
                match (&s.trim_fill.reading, ratio_axis) {
                    (Some(r), true) => r.estimate,
                    _ => s.trim_fill.estimate,
                }
            )
        });
    }
    caption.push(
        "Asymmetry can have many causes (small-study effects, heterogeneity, chance); it does \
         not by itself show publication bias."
            .into(),
    );
    caption.push(model_line(report));
    caption
}

/// The significance contours around no effect, as filled bands.
fn contours(sc: &mut Scene, f: &Frame) {
    let (top_se, bottom_se) = (f.ya.lo, f.ya.hi);
    // Each band: |x| between z_outer·se and z_inner·se on each side, as polygons.
    let zs: Vec<f64> = CONTOURS
        .iter()
        .map(|(p, _, _)| crate::dist::normal_quantile(1.0 - p / 2.0))
        .collect();
    for (c, (_, fill, _)) in CONTOURS.iter().enumerate() {
        let inner = zs[c];
        let outer = zs.get(c + 1).copied();
        for sign in [-1.0, 1.0] {
            let lim = if sign < 0.0 { f.xa.lo } else { f.xa.hi };
            // An edge x = sign·zq·se from the top to the bottom of the
            // frame, bent along the frame's side where it leaves it.
            let edge = |zq: Option<f64>| -> Vec<(f64, f64)> {
                match zq {
                    None => vec![(lim, top_se), (lim, bottom_se)],
                    Some(zq) => {
                        let x_bottom = sign * zq * bottom_se;
                        if x_bottom.abs() <= lim.abs() {
                            vec![(0.0, top_se), (x_bottom, bottom_se)]
                        } else {
                            let se_hit = lim.abs() / zq;
                            vec![(0.0, top_se), (lim, se_hit), (lim, bottom_se)]
                        }
                    }
                }
            };
            let mut pts = edge(Some(inner));
            pts.extend(edge(outer).into_iter().rev());
            let pts = pts.into_iter().map(|(x, se)| (f.x(x), f.y(se))).collect();
            sc.poly(pts, Some((*fill, 1.0)), None);
        }
    }
}

/// The pseudo-confidence region, the line at the centre and the dotted
/// line at no effect.
fn region(sc: &mut Scene, f: &Frame, fu: &Funnel, contours: bool) {
    let (residuals, z, centre) = (fu.residuals, fu.z, fu.centre);
    let clamp_x = |x: f64| x.clamp(f.xa.lo, f.xa.hi);
    let (top_se, bottom_se) = (f.ya.lo, f.ya.hi);
    // Pseudo-confidence region.
    let apex = (f.x(clamp_x(centre)), f.y(top_se));
    let left = (f.x(clamp_x(centre - z * bottom_se)), f.y(bottom_se));
    let right = (f.x(clamp_x(centre + z * bottom_se)), f.y(bottom_se));
    if !contours {
        sc.poly(vec![apex, left, right], Some((BAND, 1.0)), None);
    }
    sc.dashed(vec![left, apex, right], INK, 1, (6.0, 4.0));
    sc.line(
        vec![(apex.0, f.y(top_se)), (apex.0, f.y(bottom_se))],
        if residuals { INK } else { POOLED },
        2,
    );
    if !residuals && (f.xa.lo..=f.xa.hi).contains(&0.0) && centre != 0.0 {
        sc.dashed(
            vec![(f.x(0.0), f.y(top_se)), (f.x(0.0), f.y(bottom_se))],
            MUTED,
            1,
            (2.0, 3.0),
        );
    }
}

/// The studies (filled discs) and the filled-in studies (open circles).
fn points(sc: &mut Scene, f: &Frame, fu: &Funnel) {
    let clamp_x = |x: f64| x.clamp(f.xa.lo, f.xa.hi);
    for (x, se) in fu.xs.iter().zip(&fu.ses) {
        sc.circle(
            (f.x(clamp_x(*x)), f.y(*se)),
            4.5,
            Some((STUDY, 1.0)),
            Some((PAPER, 1)),
        );
    }
    for (x, se) in &fu.filled {
        sc.circle(
            (f.x(clamp_x(*x)), f.y(*se)),
            4.5,
            Some((PAPER, 1.0)),
            Some((STUDY, 2)),
        );
    }
}

/// The legend's entries: a swatch and p-value range per band, then the
/// white area's (None for no swatch).
fn legend_entries() -> Vec<(Option<Rgb>, &'static str)> {
    CONTOURS
        .iter()
        .map(|(_, fill, label)| (Some(*fill), *label))
        .chain([(None, "white: p ≥ 0.10")])
        .collect()
}

/// Width of an entry: a swatch entry's swatch, its text and the gap after it.
fn entry_width(e: &(Option<Rgb>, &str), k: f64) -> f64 {
    let text = super::scene::text_width(e.1, size::SMALL * k);
    match e.0 {
        Some(_) => 40.0 * k + text,
        None => text,
    }
}

/// The legend's entries (indices into [`legend_entries`]) in rows no wider than `max`.
fn legend_rows(max: f64, k: f64) -> Vec<Vec<usize>> {
    let mut rows: Vec<Vec<usize>> = vec![Vec::new()];
    let mut used = 0.0;
    for (i, e) in legend_entries().iter().enumerate() {
        let w = entry_width(e, k);
        let row = rows.last_mut().expect("one row at least");
        if !row.is_empty() && used + w > max {
            rows.push(vec![i]);
            used = w;
        } else {
            row.push(i);
            used += w;
        }
    }
    rows
}

/// The legend of the contours: one swatch and p-value range per band, in
/// `rows` 24 pixels apart (times `k`), the first centred at `cy`.
fn legend(sc: &mut Scene, rows: &[Vec<usize>], (margin, mut cy): (f64, f64), k: f64) {
    let entries = legend_entries();
    let small = size::SMALL * k;
    for row in rows {
        let mut x = margin;
        for &i in row {
            let e = entries[i];
            if let Some(fill) = e.0 {
                let (h, w) = (7.0 * k, 22.0 * k);
                sc.rect(x, cy - h, x + w, cy + h, fill);
                sc.poly(
                    vec![(x, cy - h), (x + w, cy - h), (x + w, cy + h), (x, cy + h)],
                    None,
                    Some((MUTED, 1)),
                );
                sc.text((x + 28.0 * k, cy), e.1, small, INK, Align::Left);
            } else {
                sc.text((x, cy), e.1, small, INK, Align::Left);
            }
            x += entry_width(&e, k);
        }
        cy += 24.0 * k;
    }
}
