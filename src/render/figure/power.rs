//! The power curve of `pondus plan`: the power of the moderator test over
//! the number of sites (the report's table), with the target power as a
//! dashed line and the planned k marked.

use super::axis::ChartPage;
use super::scene::{text_width, Align, Scene};
use super::{encode, encode_inline, palette, size, wrap_or_fit, Axis, Format, Frame, PageFigure};
use crate::error::Result;
use crate::result::plan::{PlanReport, PlanTest};
use crate::support::flag::Flag;

/// The power curve over k (from the report's table) as SVG, PNG (at `dpi`)
/// or PDF, with the target power as a dashed line and the planned k marked;
/// `font_size` as `--font-size` ([`super::text_scale`]).
///
/// # Errors
/// Drawing errors.
pub fn plot(r: &PlanReport, format: Format, dpi: u32, font_size: Option<f64>) -> Result<Vec<u8>> {
    encode(&scene(r, font_size)?, format, dpi, Flag::Curve)
}

/// The power curve as an inline SVG figure for the HTML report.
///
/// # Errors
/// Drawing errors.
pub fn page_figure(r: &PlanReport, font_size: Option<f64>) -> Result<PageFigure> {
    Ok(PageFigure {
        kind: "power",
        title: "Power of the moderator test by number of sites".into(),
        description: format!(
            "Power curve: the power of the moderator test for 3 to {} sites, with the target \
             power as a dashed line and the planned {} sites marked.",
            r.table.last().map_or(r.k, |p| p.k),
            r.k
        ),
        svg: encode_inline(&scene(r, font_size)?),
    })
}

/// The power curve as a scene, its text sizes times
/// [`super::text_scale`]`(font_size)`: 720 × 460 pixels, taller when
/// larger text needs the room.
///
/// # Errors
/// [`crate::error::Error::Usage`] naming `--width` when text this large
/// leaves no room for the plot area (not at any accepted `--font-size`).
pub fn scene(r: &PlanReport, font_size: Option<f64>) -> Result<Scene> {
    let k = super::text_scale(font_size);
    let w = 720.0;
    let margin = 20.0;
    let fit = |text: &str, size: f64| wrap_or_fit(text, size, w - 2.0 * margin);
    let title = fit(
        "Power of the moderator test by number of sites",
        size::TITLE * k,
    );
    let subtitle = fit(
        match r.test {
            PlanTest::Z => "z test: exact power from the noncentral chi-square",
            PlanTest::Kh if r.simulation.is_some() || r.k_needed_simulated.is_some() => {
                "Knapp–Hartung test: curve from the noncentral F approximation; circles simulated"
            }
            PlanTest::Kh => {
                "Knapp–Hartung test: noncentral F approximation (a quick estimate, not simulated)"
            }
        },
        size::SMALL * k,
    );
    let title_lines = title.len();
    let head_extra = 24.0 * k * (title_lines - 1) as f64 + 17.0 * k * (subtitle.len() - 1) as f64;
    let kmin = r.table.first().map_or(3, |p| p.k) as f64;
    let kmax = r.table.last().map_or(10, |p| p.k) as f64;
    let xa = Axis::new(kmin, kmax, false, 8).snapped();
    let sims = simulated(r, (xa.lo, xa.hi));
    let key = key_text(&sims);
    let frame_at = |top: f64| {
        let page = ChartPage {
            plot: "power curve",
            width: w,
            height: None,
            default_height: 460.0,
            margin,
            top,
            bottom: 70.0 * k,
            min_left: 80.0,
            k,
        };
        Frame::in_page(
            &page,
            xa.clone(),
            Axis::new(0.0, 1.0, false, 5).snapped(),
            false,
            ("number of sites k", "power"),
        )
    };
    // The key shares the line of the y title when both fit, else it gets
    // lines of its own above it (wrapped to the width).
    let top = 90.0 * k + head_extra;
    let (mut frame, mut h) = frame_at(top)?;
    let small = size::SMALL * k;
    let beside =
        frame.x0 - 8.0 + text_width("power", size::LABEL * k) + 16.0 * k + text_width(&key, small)
            <= frame.x1;
    let key_lines = if beside {
        vec![key]
    } else {
        wrap_or_fit(&key, small, w - 2.0 * margin)
    };
    if !beside {
        (frame, h) = frame_at(top + 17.0 * k * key_lines.len() as f64)?;
    }
    let mut sc = Scene::new(w as u32, h as u32);
    sc.rect(0.0, 0.0, w, h, palette::PAPER);
    frame.grid(&mut sc);
    let mut y = 20.0 * k;
    for line in title {
        sc.text(
            (margin, y),
            line,
            size::TITLE * k,
            palette::INK,
            Align::Left,
        );
        y += 24.0 * k;
    }
    let mut y = 44.0 * k + 24.0 * k * (title_lines - 1) as f64;
    for line in subtitle {
        sc.text(
            (margin, y),
            line,
            size::SMALL * k,
            palette::MUTED,
            Align::Left,
        );
        y += 17.0 * k;
    }
    target_line(&mut sc, r, &frame, k);
    let pts: Vec<(f64, f64)> = r
        .table
        .iter()
        .map(|p| (frame.x(p.k as f64), frame.y(p.power)))
        .collect();
    sc.line(pts.clone(), palette::STUDY, 2);
    for p in pts {
        sc.circle(p, 3.5, Some((palette::STUDY, 1.0)), None);
    }
    let x = frame.x(r.k as f64);
    sc.dashed(
        vec![(x, frame.y0), (x, frame.y1)],
        palette::POOLED,
        1,
        (3.0, 3.0),
    );
    sc.text(
        (x + 4.0, frame.y1 - 12.0 * k),
        format!("planned k = {}", r.k),
        size::SMALL * k,
        palette::POOLED,
        Align::Left,
    );
    solved_and_simulated(&mut sc, r, &frame, &sims);
    let n = key_lines.len();
    for (i, line) in key_lines.into_iter().enumerate() {
        let (x, y, align) = if beside {
            (frame.x1, frame.y0 - 16.0 * k, Align::Right)
        } else {
            let up = 18.0 * k + 17.0 * k * (n - i) as f64;
            (margin, frame.y0 - up, Align::Left)
        };
        sc.text((x, y), line, small, palette::MUTED, align);
    }
    frame.axes(&mut sc);
    Ok(sc)
}

/// The dashed line at the target power and its label, `k` the text scale.
fn target_line(sc: &mut Scene, r: &PlanReport, frame: &Frame, k: f64) {
    if let Some(t) = r.target_power {
        let y = frame.y(t);
        sc.dashed(
            vec![(frame.x0, y), (frame.x1, y)],
            palette::MUTED,
            1,
            (6.0, 4.0),
        );
        // Power grows with k, so the curve usually runs below the target on
        // the left and above it on the right: the label goes where the line
        // is clear of the curve (left end when the curve starts below it).
        let starts_below = r.table.first().is_some_and(|p| p.power < t);
        let (at, align) = if starts_below {
            ((frame.x0 + 6.0 * k, y - 10.0 * k), Align::Left)
        } else {
            ((frame.x1, y - 10.0 * k), Align::Right)
        };
        sc.text(
            at,
            format!("target {t}"),
            size::SMALL * k,
            palette::MUTED,
            align,
        );
    }
}

/// The simulated powers inside the axis's range `lo..=hi` of k: k, power
/// and its Monte-Carlo standard error.
fn simulated(r: &PlanReport, (lo, hi): (f64, f64)) -> Vec<(usize, f64, f64)> {
    let mut sims: Vec<(usize, f64, f64)> = Vec::new();
    if let Some(s) = &r.simulation {
        sims.push((r.k, s.power, s.monte_carlo_se));
    }
    if let Some(sk) = &r.k_needed_simulated {
        sims.extend(
            sk.evaluated
                .iter()
                .map(|e| (e.k, e.power, e.monte_carlo_se)),
        );
    }
    sims.retain(|s| (lo..=hi).contains(&(s.0 as f64)));
    sims
}

/// The key above the plot.
fn key_text(sims: &[(usize, f64, f64)]) -> String {
    let mut key = "● curve: closed-form power by k".to_string();
    if !sims.is_empty() {
        key.push_str("   ○ simulated power (bar: ±1.96 Monte-Carlo SE)");
    }
    key
}

/// The solved k (a diamond on the target line) and the simulated powers
/// `sims` (open circles with ±1.96 Monte-Carlo SE bars).
fn solved_and_simulated(sc: &mut Scene, r: &PlanReport, frame: &Frame, sims: &[(usize, f64, f64)]) {
    let inside = |k: usize| (frame.xa.lo..=frame.xa.hi).contains(&(k as f64));
    for &(k, p, se) in sims {
        let x = frame.x(k as f64);
        let (lo, hi) = ((p - 1.96 * se).max(0.0), (p + 1.96 * se).min(1.0));
        sc.line(vec![(x, frame.y(lo)), (x, frame.y(hi))], palette::FIT, 2);
        sc.circle(
            (x, frame.y(p)),
            4.5,
            Some((palette::PAPER, 1.0)),
            Some((palette::FIT, 2)),
        );
    }
    if let (Some(kn), Some(t)) = (r.k_needed, r.target_power) {
        if inside(kn) {
            let (x, y) = (frame.x(kn as f64), frame.y(t));
            let d = 6.0;
            sc.poly(
                vec![(x - d, y), (x, y - d), (x + d, y), (x, y + d)],
                Some((palette::POOLED, 1.0)),
                Some((palette::INK, 1)),
            );
            // Below the line right of the marker; when that would run past
            // the plot's right edge (a solved k near the largest k shown),
            // above the line left of it, where the rising curve is below the
            // line, unless the target's label (left end, above) is in the way.
            let k = frame.k;
            let label = format!("k needed = {kn}");
            let sz = size::SMALL * k;
            let w = text_width(&label, sz);
            let target_end = frame.x0 + 6.0 * k + text_width(&format!("target {t}"), sz);
            let (at, align) = if x + 9.0 + w <= frame.x1 {
                ((x + 9.0, y + 12.0 * k), Align::Left)
            } else if x - 9.0 - w > target_end + 6.0 * k {
                ((x - 9.0, y - 10.0 * k), Align::Right)
            } else {
                ((x - 9.0, y + 12.0 * k), Align::Right)
            };
            sc.text(at, label, sz, palette::POOLED, align);
        }
    }
}
