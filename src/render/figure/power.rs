//! The power curve of `pondus plan`: the power of the moderator test over
//! the number of sites (the report's table), with the target power as a
//! dashed line and the planned k marked.

use super::scene::{fit_text, Align, Scene};
use super::{encode, encode_inline, palette, size, Axis, Format, Frame, PageFigure};
use crate::error::Result;
use crate::result::plan::{PlanReport, PlanTest};
use crate::support::flag::Flag;

/// The power curve over k (from the report's table) as SVG, PNG (at `dpi`)
/// or PDF, with the target power as a dashed line and the planned k marked.
///
/// # Errors
/// Drawing errors.
pub fn plot(r: &PlanReport, format: Format, dpi: u32) -> Result<Vec<u8>> {
    encode(&scene(r), format, dpi, Flag::Curve)
}

/// The power curve as an inline SVG figure for the HTML report.
///
/// # Errors
/// Drawing errors.
pub fn page_figure(r: &PlanReport) -> Result<PageFigure> {
    Ok(PageFigure {
        kind: "power",
        title: "Power of the moderator test by number of sites".into(),
        description: format!(
            "Power curve: the power of the moderator test for 3 to {} sites, with the target \
             power as a dashed line and the planned {} sites marked.",
            r.table.last().map_or(r.k, |p| p.k),
            r.k
        ),
        svg: encode_inline(&scene(r)),
    })
}

/// The power curve as a scene.
pub fn scene(r: &PlanReport) -> Scene {
    let (w, h) = (720u32, 460u32);
    let mut sc = Scene::new(w, h);
    sc.rect(0.0, 0.0, w as f64, h as f64, palette::PAPER);
    let kmin = r.table.first().map_or(3, |p| p.k) as f64;
    let kmax = r.table.last().map_or(10, |p| p.k) as f64;
    let frame = Frame {
        x0: 80.0,
        y0: 90.0,
        x1: w as f64 - 30.0,
        y1: h as f64 - 70.0,
        xa: Axis::new(kmin, kmax, false, 8).snapped(),
        ya: Axis::new(0.0, 1.0, false, 5).snapped(),
        y_down: false,
    };
    frame.grid(&mut sc);
    let fit = |text: &str, size: f64| fit_text(text, size, w as f64 - 2.0 * 20.0);
    sc.text(
        (20.0, 20.0),
        fit(
            "Power of the moderator test by number of sites",
            size::TITLE,
        ),
        size::TITLE,
        palette::INK,
        Align::Left,
    );
    sc.text(
        (20.0, 44.0),
        fit(
            match r.test {
                PlanTest::Z => "z test: exact power from the noncentral chi-square",
                PlanTest::Kh if r.simulation.is_some() || r.k_needed_simulated.is_some() => {
                    "Knapp–Hartung test: curve from the noncentral F approximation; circles simulated"
                }
                PlanTest::Kh => {
                    "Knapp–Hartung test: noncentral F approximation (a quick estimate, not simulated)"
                }
            },
            size::SMALL,
        ),
        size::SMALL,
        palette::MUTED,
        Align::Left,
    );
    if let Some(t) = r.target_power {
        let y = frame.y(t);
        sc.dashed(
            vec![(frame.x0, y), (frame.x1, y)],
            palette::MUTED,
            1,
            (6.0, 4.0),
        );
        sc.text(
            (frame.x1, y - 10.0),
            format!("target {t}"),
            size::SMALL,
            palette::MUTED,
            Align::Right,
        );
    }
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
        (x + 4.0, frame.y1 - 12.0),
        format!("planned k = {}", r.k),
        size::SMALL,
        palette::POOLED,
        Align::Left,
    );
    solved_and_simulated(&mut sc, r, &frame);
    frame.axes(&mut sc, "number of sites k", "power");
    sc
}

/// The solved k (a diamond on the target line) and the simulated powers
/// (open circles with ±1.96 Monte-Carlo SE bars), with a key when there are any.
fn solved_and_simulated(sc: &mut Scene, r: &PlanReport, frame: &Frame) {
    let inside = |k: usize| (frame.xa.lo..=frame.xa.hi).contains(&(k as f64));
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
    sims.retain(|s| inside(s.0));
    for &(k, p, se) in &sims {
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
            sc.text(
                (x + 9.0, y + 12.0),
                format!("k needed = {kn}"),
                size::SMALL,
                palette::POOLED,
                Align::Left,
            );
        }
    }
    let key_y = frame.y0 - 16.0;
    let mut key = "● curve: closed-form power by k".to_string();
    if !sims.is_empty() {
        key.push_str("   ○ simulated power (bar: ±1.96 Monte-Carlo SE)");
    }
    sc.text(
        (frame.x1, key_y),
        key,
        size::SMALL,
        palette::MUTED,
        Align::Right,
    );
}
