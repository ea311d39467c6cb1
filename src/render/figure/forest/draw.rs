//! Drawing the laid-out forest plot: the header, the backdrop (bands and
//! guides), each kind of row, the axis and the caption, in that order.

use super::columns::GAP;
use super::layout::{Forest, Row};
use crate::effect::route::Derivation;
use crate::render::figure::palette::*;
use crate::render::figure::scene::Rgb;
use crate::render::figure::scene::{fit_middle, fit_text};
use crate::render::figure::{
    caption_scaled, label_step, measure_name, size, Align, Heading, Scene,
};
use crate::result::{Estimate, LevelSummary, Study};
use crate::support::format as fmt;

impl Forest<'_> {
    /// Draws the plot.
    pub(super) fn draw(&self, rows: &[Row]) -> Scene {
        let mut sc = Scene::new(self.width as u32, self.height);
        self.header(&mut sc);
        self.backdrop(&mut sc, rows);
        for (r, row) in rows.iter().enumerate() {
            let y = self.row_mid(r);
            match row {
                Row::Gap => {}
                Row::GroupHead(text) => {
                    let fs = self.fs + 0.5 * self.scale;
                    sc.text(
                        (self.margin, y),
                        fit_text(text, fs, self.px0 - self.margin - 8.0 + self.ci_w),
                        fs,
                        INK,
                        Align::Left,
                    );
                }
                Row::Study(i) => self.study(&mut sc, *i, y),
                Row::GroupAverage(lvl, w) => self.group_average(&mut sc, lvl, *w, y),
                Row::Overall => self.overall(&mut sc, r, y),
                Row::Predict => self.predict(&mut sc, y),
            }
        }
        self.axis_and_caption(&mut sc);
        sc
    }

    /// Bottom of the last row.
    fn rows_bottom(&self) -> f64 {
        self.row_top(self.n_rows)
    }

    /// Right edge of the "effect [CI]" column.
    fn ci_right(&self) -> f64 {
        self.width - self.margin - self.weight_w - 10.0
    }

    /// Title, subtitle and the column headers.
    fn header(&self, sc: &mut Scene) {
        let (margin, width) = (self.margin, self.width);
        Heading::new(self.report, &self.title, (width, margin), self.scale).draw(sc);
        let hy = 70.0 * self.scale + self.head_extra;
        let head = self.fs_max.min(13.0 * self.scale);
        sc.text((margin, hy), "Study", head, INK, Align::Left);
        let mut x = margin + self.name_w;
        for col in &self.cols {
            let (at, align) = if col.right {
                (x + col.width, Align::Right)
            } else {
                (x + GAP, Align::Left)
            };
            sc.text((at, hy), col.head.clone(), head, INK, align);
            x += col.width;
        }
        sc.text(
            (self.ci_right(), hy),
            format!("{} [{} CI]", measure_name(self.report), self.lv),
            head,
            INK,
            Align::Right,
        );
        sc.text((width - margin, hy), "Weight", head, INK, Align::Right);
        sc.line(
            vec![(margin, self.top - 4.0), (width - margin, self.top - 4.0)],
            INK,
            1,
        );
    }

    /// Zebra bands behind alternate study rows, the no-effect line and the
    /// dotted guide at the average (behind everything else).
    fn backdrop(&self, sc: &mut Scene, rows: &[Row]) {
        let (top, axis) = (self.top, &self.axis);
        let rows_bottom = self.rows_bottom();
        let mut band = false;
        for (r, row) in rows.iter().enumerate() {
            if let Row::Study(_) = row {
                if band {
                    let (y0, y1) = (self.row_top(r), self.row_top(r + 1));
                    sc.rect(self.margin, y0, self.width - self.margin, y1, BAND);
                }
                band = !band;
            } else {
                band = false;
            }
        }
        let x_null = self.x_of(0.0);
        if (axis.lo..=axis.hi).contains(&0.0) {
            sc.line(
                vec![(x_null, top - 2.0), (x_null, rows_bottom + 4.0)],
                GUIDE,
                1,
            );
        }
        let avg = self.tp(self.report.average.mean.estimate);
        if (axis.lo..=axis.hi).contains(&avg) {
            let x = self.x_of(avg);
            sc.dashed(vec![(x, top), (x, rows_bottom)], POOLED, 1, (1.5, 4.0));
        }
    }

    /// A diamond from the lower to the upper limit of `e`'s interval.
    fn diamond(&self, sc: &mut Scene, e: &Estimate, y: f64, fill: (Rgb, f64), outline: u32) {
        let (a, b, c) = (
            self.x_of(self.clip(self.tp(e.mean.ci.ci_low))),
            self.x_of(self.clip(self.tp(e.mean.estimate))),
            self.x_of(self.clip(self.tp(e.mean.ci.ci_high))),
        );
        let hd = (self.rh * 0.36).max(2.5);
        // A very narrow interval stays visible as a diamond 3 pixels wide.
        let (a, c) = (a.min(b - 1.5), c.max(b + 1.5));
        sc.poly(
            vec![(a, y), (b, y - hd), (c, y), (b, y + hd)],
            Some(fill),
            Some((INK, outline)),
        );
    }

    /// A study's row: label, sort value, interval, marker, fitted value,
    /// "effect [CI]" and weight.
    fn study(&self, sc: &mut Scene, i: usize, y: f64) {
        let s = &self.report.studies.get(i);
        let (margin, fs) = (self.margin, self.fs);
        let indent = self.indent();
        let lines = &self.label_lines[i];
        let first = y - self.line_gap / 2.0 * (lines.len() - 1) as f64;
        for (n, line) in lines.iter().enumerate() {
            sc.text(
                (margin + indent, first + self.line_gap * n as f64),
                fit_middle(line, fs, self.name_w - indent),
                fs,
                INK,
                Align::Left,
            );
        }
        let mut x = margin + self.name_w;
        for col in &self.cols {
            let (at, align) = if col.right {
                (x + col.width, Align::Right)
            } else {
                (x + GAP, Align::Left)
            };
            let ink = if col.muted { MUTED } else { INK };
            sc.text(
                (at, y),
                // Half a pixel of slack: the width was measured on these very cells.
                fit_text(&col.values[i], fs, col.width - GAP + 0.5),
                fs,
                ink,
                align,
            );
            x += col.width;
        }
        self.band_bar(sc, i, y);
        self.study_marks(sc, s, y);
        self.shrunken_marks(sc, s, y);
        sc.text(
            (self.ci_right(), y),
            self.ci_text(s.effect, s.ci.ci_low, s.ci.ci_high),
            fs,
            INK,
            Align::Right,
        );
        sc.text(
            (self.width - margin, y),
            format!("{:.1}%", s.weight),
            fs,
            INK,
            Align::Right,
        );
    }

    /// A study's interval (with end bars, or an arrow where it is cut),
    /// its disc sized by weight, and its fitted value.
    fn study_marks(&self, sc: &mut Scene, s: &Study, y: f64) {
        let (axis, rh) = (&self.axis, self.rh);
        let (l, h) = (self.tp(s.ci.ci_low), self.tp(s.ci.ci_high));
        let (xl, xh) = (self.x_of(self.clip(l)), self.x_of(self.clip(h)));
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
        let e = self.tp(s.effect);
        if (axis.lo..=axis.hi).contains(&e) {
            let r_max = (rh * 0.46).max(2.0);
            let r = (r_max * (s.weight / self.w_max).sqrt()).max(1.5);
            self.study_marker(sc, s, (self.x_of(e), y), r);
        }
        if self.show_fitted {
            let f = self.tp(s.fitted);
            if (axis.lo..=axis.hi).contains(&f) {
                let t = (rh * 0.3).max(3.0);
                let x = self.x_of(f);
                sc.poly(
                    vec![(x, y - t), (x + t, y + 0.8 * t), (x - t, y + 0.8 * t)],
                    Some((PAPER, 0.6)),
                    Some((FIT, 2)),
                );
            }
        }
    }

    /// A study's marker at `at`, of radius `r` (its area follows the
    /// study's weight). One place for the marker's look, so a kind of study
    /// can be given a marker of its own.
    fn study_marker(&self, sc: &mut Scene, s: &Study, at: (f64, f64), r: f64) {
        if s.computed_from.derivation() == Derivation::Direct {
            sc.circle(at, r, Some((STUDY, 1.0)), None);
        } else {
            // Approximated or converted: a ring of the same size (the open
            // square is the shrunken estimate's marker).
            sc.circle(at, (r - 1.0).max(1.0), Some((PAPER, 1.0)), Some((STUDY, 2)));
        }
    }

    /// A level's own average (a lighter diamond) and its studies' total weight.
    fn group_average(&self, sc: &mut Scene, lvl: &LevelSummary, w: f64, y: f64) {
        let (margin, fs) = (self.margin, self.fs);
        let indent = 10.0;
        sc.text(
            (margin + indent, y),
            fit_text(
                &format!("Average of {} ({} studies)", lvl.level, lvl.k),
                fs,
                self.label_w - indent,
            ),
            fs,
            INK,
            Align::Left,
        );
        match &lvl.pooled {
            Some(p) => {
                self.diamond(sc, p, y, (GROUP, 0.45), 1);
                sc.text(
                    (self.ci_right(), y),
                    self.ci_text(p.mean.estimate, p.mean.ci.ci_low, p.mean.ci.ci_high),
                    fs,
                    INK,
                    Align::Right,
                );
            }
            None => sc.text(
                (self.ci_right(), y),
                "one study: no average",
                fs,
                MUTED,
                Align::Right,
            ),
        }
        sc.text(
            (self.width - margin, y),
            format!("{w:.1}%"),
            fs,
            MUTED,
            Align::Right,
        );
    }

    /// The overall average, under a rule, as a diamond.
    fn overall(&self, sc: &mut Scene, r: usize, y: f64) {
        let (margin, fs, width) = (self.margin, self.fs, self.width);
        let (report, avg) = (self.report, &self.report.average);
        let y0 = self.row_top(r);
        sc.line(vec![(margin, y0), (width - margin, y0)], GUIDE, 1);
        sc.text(
            (margin, y),
            fit_text(
                &format!("{} (k = {})", self.pooled_name, report.k),
                fs,
                self.label_w,
            ),
            fs,
            INK,
            Align::Left,
        );
        self.diamond(sc, avg, y, (POOLED, 1.0), 2);
        sc.text(
            (self.ci_right(), y),
            self.ci_text(avg.mean.estimate, avg.mean.ci.ci_low, avg.mean.ci.ci_high),
            fs,
            INK,
            Align::Right,
        );
        sc.text((width - margin, y), "100%", fs, INK, Align::Right);
    }

    /// The prediction interval as a dashed line with end bars.
    fn predict(&self, sc: &mut Scene, y: f64) {
        let (fs, avg) = (self.fs, &self.report.average);
        sc.text(
            (self.margin, y),
            fit_text(
                &format!("Prediction interval ({})", self.lv),
                fs,
                self.label_w,
            ),
            fs,
            INK,
            Align::Left,
        );
        if avg.mean.pi.pi_low.is_nan() {
            sc.text(
                (self.ci_right(), y),
                "none (too few studies)".to_string(),
                fs,
                INK,
                Align::Right,
            );
            return;
        }
        let (a, b) = (
            self.x_of(self.clip(self.tp(avg.mean.pi.pi_low))),
            self.x_of(self.clip(self.tp(avg.mean.pi.pi_high))),
        );
        let bar = (self.rh * 0.3).max(2.0);
        sc.dashed(vec![(a, y), (b, y)], PREDICT, 3, (7.0, 4.0));
        sc.line(vec![(a, y - bar), (a, y + bar)], PREDICT, 3);
        sc.line(vec![(b, y - bar), (b, y + bar)], PREDICT, 3);
        sc.text(
            (self.ci_right(), y),
            format!(
                "[{}, {}]",
                fmt::plot_num(self.show(avg.mean.pi.pi_low), self.dec),
                fmt::plot_num(self.show(avg.mean.pi.pi_high), self.dec)
            ),
            fs,
            INK,
            Align::Right,
        );
    }

    /// The value axis with its ticks and title, then the caption.
    fn axis_and_caption(&self, sc: &mut Scene) {
        let (px0, px1, k) = (self.px0, self.px1, self.scale);
        let (small, label) = (size::SMALL * k, size::LABEL * k);
        let ay = self.rows_bottom() + 6.0;
        sc.line(vec![(px0, ay), (px1, ay)], INK, 1);
        let xs: Vec<f64> = self.axis.ticks.iter().map(|t| self.x_of(t.0)).collect();
        let step = label_step(&xs, &self.axis.ticks, small, true);
        for (i, ((_, text), x)) in self.axis.ticks.iter().zip(&xs).enumerate() {
            sc.line(vec![(*x, ay), (*x, ay + 5.0 * k)], INK, 1);
            if i % step == 0 {
                sc.text((*x, ay + 15.0 * k), text.clone(), small, INK, Align::Center);
            }
        }
        for (i, line) in self.x_lines.iter().enumerate() {
            let y = ay + 36.0 * k + 17.0 * k * i as f64;
            sc.text(
                ((px0 + px1) / 2.0, y),
                line.clone(),
                label,
                INK,
                Align::Center,
            );
        }
        let extra = 17.0 * k * (self.x_lines.len() - 1) as f64;
        caption_scaled(sc, &self.cap_lines, (self.margin, ay + 62.0 * k + extra), k);
    }
}
