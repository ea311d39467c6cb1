//! Drawing the bubble plot's contents: the studies' markers and the fitted
//! lines or values, along a numeric axis or in columns (the levels of a
//! categorical moderator, or the values 0 and 1).

use super::super::marks::{self, LevelMark};
use super::super::palette::*;
use super::super::scene::{fit_middle, Rgb};
use super::super::{size, Align, Axis, Frame, Scene};
use super::View;
use crate::result::{AtValue, CurvePoint, FitReport};

/// A fitted value drawn in a column: estimate, CI, PI (None: not drawn) and
/// the level's mark (None: the plain diamond).
struct ColumnFit {
    estimate: f64,
    ci: (f64, f64),
    pi: Option<(f64, f64)>,
    mark: Option<LevelMark>,
}

impl ColumnFit {
    /// The fitted value at a point of a line.
    fn at(p: &CurvePoint, pi: bool, mark: Option<LevelMark>) -> ColumnFit {
        ColumnFit {
            estimate: p.estimate,
            ci: (p.ci.ci_low, p.ci.ci_high),
            pi: (pi && !p.pi.pi_low.is_nan()).then_some((p.pi.pi_low, p.pi.pi_high)),
            mark,
        }
    }
}

/// The studies' bubbles in a frame, and what drawing them needs.
pub(super) struct Bubbles<'a> {
    report: &'a FitReport,
    view: &'a View<'a>,
    pub(super) f: Frame,
    /// The largest bubble's radius.
    r_max: f64,
    /// The largest study weight.
    w_max: f64,
    /// Study indices, heaviest first (largest bubbles first, so small ones stay visible on top).
    by_weight: Vec<usize>,
}

impl<'a> Bubbles<'a> {
    pub(super) fn new(report: &'a FitReport, view: &'a View<'a>, f: Frame) -> Bubbles<'a> {
        let studies = &report.studies;
        let w_max = studies.iter().map(|s| s.weight).fold(0.0, f64::max);
        let r_max = ((f.y1 - f.y0).min(f.x1 - f.x0) * 0.045).clamp(8.0, 30.0);
        let mut by_weight: Vec<usize> = (0..studies.len()).collect();
        by_weight.sort_by(|&a, &b| studies.weights()[b].total_cmp(&studies.weights()[a]));
        Bubbles {
            report,
            view,
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

    /// Study `i`'s marker at pixel column `x`: a disc, or its level's mark.
    fn study(&self, sc: &mut Scene, i: usize, x: f64) {
        let s = &self.report.studies.get(i);
        let (c, r) = ((x, self.row(s.effect)), self.radius(s.weight));
        let level = self
            .view
            .split
            .as_ref()
            .and_then(|sp| sp.level_of(self.report, i));
        match level {
            Some(l) => {
                let m = marks::MARKS[l];
                marks::draw(sc, m.shape, c, r, Some((m.color, 0.3)), Some((m.color, 2)));
            }
            None => sc.circle(c, r, Some((STUDY, 0.35)), Some((STUDY, 1))),
        }
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

    /// The shaded confidence band of a line.
    fn ci_band(&self, sc: &mut Scene, points: &[CurvePoint], color: Rgb, alpha: f64) {
        let f = &self.f;
        let mut band: Vec<(f64, f64)> = points
            .iter()
            .map(|p| (f.x(p.x), self.row(p.ci.ci_high)))
            .collect();
        band.extend(
            points
                .iter()
                .rev()
                .map(|p| (f.x(p.x), self.row(p.ci.ci_low))),
        );
        sc.poly(band, Some((color, alpha)), None);
    }

    /// The fitted line through `points`.
    fn line(&self, points: &[CurvePoint]) -> Vec<(f64, f64)> {
        points
            .iter()
            .map(|p| (self.f.x(p.x), self.row(p.estimate)))
            .collect()
    }

    /// A numeric moderator: the region of significance, the confidence
    /// band, the prediction band, the bubbles and the fitted line (one line
    /// and band per level when the studies are marked by level).
    pub(super) fn along_numbers(&self, sc: &mut Scene) {
        let (report, f, j) = (self.report, &self.f, self.view.j);
        let name = &report.model.moderators[j].name;
        let curve = report.curves.iter().find(|c| &c.moderator == name);
        super::super::regions::shade(sc, f, report, name);
        if let Some(split) = &self.view.split {
            for (l, c) in split.curves.iter().enumerate() {
                self.ci_band(sc, &c.points, marks::MARKS[l].color, 0.12);
            }
        } else if let Some(c) = curve {
            self.ci_band(sc, &c.points, FIT, 0.2);
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
            let AtValue::Number(x) = report.studies.moderator(i, j) else {
                continue;
            };
            self.band_bar(sc, i, f.x(x));
            self.study(sc, i, f.x(x));
        }
        if let Some(split) = &self.view.split {
            for (l, c) in split.curves.iter().enumerate() {
                let m = marks::MARKS[l];
                match m.dash {
                    None => sc.line(self.line(&c.points), m.color, 3),
                    Some(d) => sc.dashed(self.line(&c.points), m.color, 3, d),
                }
            }
        } else if let Some(c) = curve {
            sc.line(self.line(&c.points), FIT, 3);
        }
    }

    /// A numeric moderator holding only 0 and 1: two columns of studies,
    /// with the fitted value at each (per level when marked by level).
    pub(super) fn two_values(&self, sc: &mut Scene) {
        let (report, j) = (self.report, self.view.j);
        let name = &report.model.moderators[j].name;
        let curve = report.curves.iter().find(|c| &c.moderator == name);
        let pi = report.spread.is_none();
        for (col, end) in [(0usize, false), (1, true)] {
            let pick = |pts: &'a [CurvePoint]| if end { pts.last() } else { pts.first() };
            let fits: Vec<ColumnFit> = match &self.view.split {
                Some(split) => split
                    .curves
                    .iter()
                    .enumerate()
                    .filter_map(|(l, c)| {
                        pick(&c.points).map(|p| ColumnFit::at(p, false, Some(marks::MARKS[l])))
                    })
                    .collect(),
                None => curve
                    .and_then(|c| pick(&c.points))
                    .map(|p| ColumnFit::at(p, pi, None))
                    .into_iter()
                    .collect(),
            };
            let value = col as f64;
            let members: Vec<usize> = self
                .by_weight
                .iter()
                .copied()
                .filter(
                    |&i| matches!(report.studies.moderator(i, j), AtValue::Number(x) if x == value),
                )
                .collect();
            let label = format!("{name} = {col} (k = {})", members.len());
            self.column(sc, col, &label, &members, &fits);
        }
    }

    /// A categorical moderator: each level's bubbles side by side, with the
    /// level's predicted effect, confidence and prediction interval.
    pub(super) fn by_level(&self, sc: &mut Scene, levels: &[String]) {
        let (report, j) = (self.report, self.view.j);
        let name = &report.model.moderators[j].name;
        let group = report.subgroups.iter().find(|g| &g.moderator == name);
        for (l, level) in levels.iter().enumerate() {
            let members: Vec<usize> = self
                .by_weight
                .iter()
                .copied()
                .filter(
                    |&i| matches!(&report.studies.moderator(i, j), AtValue::Level(v) if v == level),
                )
                .collect();
            let fits: Vec<ColumnFit> = group
                .and_then(|g| g.levels.iter().find(|x| &x.level == level))
                .map(|lvl| {
                    let p = &lvl.predicted.mean;
                    ColumnFit {
                        estimate: p.estimate,
                        ci: (p.ci.ci_low, p.ci.ci_high),
                        pi: (!p.pi.pi_low.is_nan() && report.spread.is_none())
                            .then_some((p.pi.pi_low, p.pi.pi_high)),
                        mark: None,
                    }
                })
                .into_iter()
                .collect();
            let label = format!("{level} (k = {})", members.len());
            self.column(sc, l, &label, &members, &fits);
        }
    }

    /// Column `col`: its studies spread in the left part, its label below
    /// the axis, and its fitted values side by side in the right part.
    fn column(
        &self,
        sc: &mut Scene,
        col: usize,
        label: &str,
        members: &[usize],
        fits: &[ColumnFit],
    ) {
        let f = &self.f;
        let band_w = (f.x(1.0) - f.x(0.0)).abs();
        let cx = f.x(col as f64);
        for (n, &i) in members.iter().enumerate() {
            // Deterministic spread: golden-ratio offsets in the left part of the band.
            let off = ((n as f64 * 0.618_034).fract() - 0.5) * 0.34 * band_w;
            self.band_bar(sc, i, cx - 0.12 * band_w + off);
            self.study(sc, i, cx - 0.12 * band_w + off);
        }
        // Each column's label keeps to its column (both ends kept when shortened).
        let small = size::SMALL * f.k;
        let label = fit_middle(label, small, band_w - 6.0);
        sc.text(
            (cx, f.y1 + 5.0 + 10.0 * f.k),
            label,
            small,
            INK,
            Align::Center,
        );
        let gap = (0.2 * band_w / fits.len().max(1) as f64).min(28.0);
        for (n, fit) in fits.iter().enumerate() {
            let x = cx + 0.24 * band_w + gap * (n as f64 - (fits.len() as f64 - 1.0) / 2.0);
            self.column_fit(sc, x, fit);
        }
    }

    /// One fitted value at pixel column `x`: the dashed PI bar, the CI bar
    /// and the estimate (a diamond, or the level's mark filled).
    fn column_fit(&self, sc: &mut Scene, x: f64, fit: &ColumnFit) {
        if let Some((lo, hi)) = fit.pi {
            let (pl, ph) = (self.row(lo), self.row(hi));
            sc.dashed(vec![(x + 10.0, pl), (x + 10.0, ph)], PREDICT, 2, (6.0, 4.0));
            sc.line(vec![(x + 5.0, pl), (x + 15.0, pl)], PREDICT, 2);
            sc.line(vec![(x + 5.0, ph), (x + 15.0, ph)], PREDICT, 2);
        }
        let (cl, ch) = (self.row(fit.ci.0), self.row(fit.ci.1));
        let color = fit.mark.map_or(FIT, |m| m.color);
        sc.line(
            vec![
                (x - 5.0, cl),
                (x + 5.0, cl),
                (x, cl),
                (x, ch),
                (x - 5.0, ch),
                (x + 5.0, ch),
            ],
            color,
            3,
        );
        let y = self.row(fit.estimate);
        match fit.mark {
            Some(m) => marks::draw(
                sc,
                m.shape,
                (x, y),
                7.0,
                Some((m.color, 1.0)),
                Some((INK, 1)),
            ),
            None => sc.poly(
                vec![(x - 8.0, y), (x, y - 8.0), (x + 8.0, y), (x, y + 8.0)],
                Some((FIT, 1.0)),
                Some((INK, 1)),
            ),
        }
    }
}
