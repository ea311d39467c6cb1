//! Value axes (a range in plot space with nicely spaced ticks, linear or
//! logarithmic) and the rectangular frame of a chart with its grid, axis
//! lines, tick labels and titles.

use super::palette;
use super::scene::{self, Align, Scene};
use super::size;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// A value axis: a data range in plot space and its ticks.
#[derive(Debug, Clone)]
pub(crate) struct Axis {
    /// Lower end (plot space).
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
    /// Ticks: position in plot space and label.
    pub ticks: Vec<(f64, String)>,
}

impl Axis {
    /// Maps an analysis-scale value to plot space: tanh for correlations,
    /// unchanged otherwise (ratios stay logs on a log axis).
    pub fn to_plot(scale: ReadingScale, y: f64) -> f64 {
        match scale {
            ReadingScale::Correlation => y.tanh(),
            _ => y,
        }
    }

    /// An axis covering `lo..hi` (plot space) with about `target` ticks.
    pub fn new(lo: f64, hi: f64, log: bool, target: usize) -> Axis {
        let (mut lo, mut hi) = if lo.is_finite() && hi.is_finite() {
            (lo.min(hi), lo.max(hi))
        } else {
            (-1.0, 1.0)
        };
        if hi - lo < 1e-12 {
            let pad = if lo.abs() > 0.0 { lo.abs() * 0.1 } else { 0.1 };
            lo -= pad;
            hi += pad;
        }
        let ticks = if log {
            log_ticks(lo, hi, target)
        } else {
            linear_ticks(lo, hi, target)
        };
        Axis { lo, hi, ticks }
    }

    /// Extends the range to its outer ticks (only when they are close).
    pub fn snapped(mut self) -> Axis {
        if let (Some(first), Some(last)) = (self.ticks.first(), self.ticks.last()) {
            let span = self.hi - self.lo;
            if first.0 < self.lo && self.lo - first.0 < 0.15 * span {
                self.lo = first.0;
            }
            if last.0 - self.hi > 0.0 && last.0 - self.hi < 0.15 * span {
                self.hi = last.0;
            }
        }
        let (lo, hi) = (self.lo - 1e-9, self.hi + 1e-9);
        self.ticks.retain(|t| t.0 >= lo && t.0 <= hi);
        self
    }
}

fn nice_step(span: f64, target: usize) -> f64 {
    let raw = span / target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let f = raw / mag;
    let nice = if f < 1.5 {
        1.0
    } else if f < 3.0 {
        2.0
    } else if f < 7.0 {
        5.0
    } else {
        10.0
    };
    nice * mag
}

fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<(f64, String)> {
    let step = nice_step(hi - lo, target);
    let decimals = (-(step.log10().floor())).max(0.0) as usize;
    let first = (lo / step).floor() as i64;
    let last = (hi / step).ceil() as i64;
    (first..=last)
        .map(|i| {
            let x = i as f64 * step;
            (x, fmt::plot_num(x, decimals))
        })
        .collect()
}

/// Ticks on a log axis at 1, 2, 5 × powers of ten (or only powers of ten
/// for wide ranges), labelled with the ratio itself.
fn log_ticks(lo: f64, hi: f64, target: usize) -> Vec<(f64, String)> {
    let decades = (hi - lo) / std::f64::consts::LN_10;
    let mantissas: &[f64] = if decades > 4.0 {
        &[1.0]
    } else if decades > 2.5 {
        &[1.0, 3.0]
    } else if decades > 0.6 {
        &[1.0, 2.0, 5.0]
    } else {
        &[1.0, 1.25, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0]
    };
    let mut out = Vec::new();
    let e0 = (lo / std::f64::consts::LN_10).floor() as i32 - 1;
    let e1 = (hi / std::f64::consts::LN_10).ceil() as i32 + 1;
    for e in e0..=e1 {
        for m in mantissas {
            let v = m * 10f64.powi(e);
            let x = v.ln();
            let decimals = if v >= 1.0 {
                if (v - v.round()).abs() < 1e-9 {
                    0
                } else {
                    2
                }
            } else {
                (-(v.log10().floor()) as usize) + usize::from(m.fract() != 0.0)
            };
            let label = format!("{v:.decimals$}");
            out.push((x, label));
        }
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    // Thin to about the target count, always keeping 1.
    // Ticks just beyond the ends are kept too, so that `snapped` can extend to them.
    let reach = 0.15 * (hi - lo);
    let inside: Vec<(f64, String)> = out
        .into_iter()
        .filter(|t| t.0 >= lo - reach && t.0 <= hi + reach)
        .collect();
    if inside.len() <= target + 2 {
        return inside;
    }
    let keep = inside.len().div_ceil(target);
    inside
        .into_iter()
        .enumerate()
        .filter(|(i, t)| i % keep == 0 || t.0.abs() < 1e-12)
        .map(|(_, t)| t)
        .collect()
}

/// The page around a chart's plot area: its size, what is reserved above
/// and below the plot area, and the text scale.
pub(crate) struct ChartPage {
    /// The plot's name in messages ("bubble plot").
    pub plot: &'static str,
    /// Width in pixels.
    pub width: f64,
    /// `--height` (None: `default_height`, taller when larger text needs
    /// the room: the plot area keeps half of it).
    pub height: Option<u32>,
    /// The height without `--height`.
    pub default_height: f64,
    /// Margin at the sides.
    pub margin: f64,
    /// Room above the plot area (title, legend, one line of y title).
    pub top: f64,
    /// Room below it (tick labels, one line of x title, caption).
    pub bottom: f64,
    /// The smallest left edge of the plot area (0: from the tick labels).
    pub min_left: f64,
    /// Text scale ([`super::text_scale`]).
    pub k: f64,
}

/// The smallest plot area drawn, in pixels (height, width).
const MIN_PLOT: (f64, f64) = (120.0, 140.0);

/// A rectangular chart area with an x and a y axis.
pub(crate) struct Frame {
    /// Left edge in pixels.
    pub x0: f64,
    /// Top edge.
    pub y0: f64,
    /// Right edge.
    pub x1: f64,
    /// Bottom edge.
    pub y1: f64,
    /// Horizontal axis.
    pub xa: Axis,
    /// Vertical axis.
    pub ya: Axis,
    /// Whether the y axis grows downwards (the funnel plot's standard error).
    pub y_down: bool,
    /// Text scale.
    pub k: f64,
    /// The page's width (tick labels stay inside it).
    page_width: f64,
    /// The x axis title's lines.
    x_title: Vec<String>,
    /// The y axis title's lines.
    y_title: Vec<String>,
}

impl Frame {
    /// The plot area of `page` and the page's height: `margin` at the
    /// sides, `top` and `bottom` reserved, room on the left for the widest
    /// y tick label, and room for the axis titles (`titles`: x, y), which
    /// wrap onto more lines when too wide.
    ///
    /// # Errors
    /// [`Error::Usage`] naming `--height` or `--width` when the page leaves
    /// less than 120 × 140 pixels for the plot area (naming `--font-size`
    /// too when it is given).
    pub(crate) fn in_page(
        page: &ChartPage,
        xa: Axis,
        ya: Axis,
        y_down: bool,
        (x_title, y_title): (&str, &str),
    ) -> Result<(Frame, f64)> {
        let k = page.k;
        let y_label_w = ya
            .ticks
            .iter()
            .map(|t| scene::text_width(&t.1, size::SMALL * k))
            .fold(0.0, f64::max);
        let x0 = (page.margin + y_label_w + 14.0).max(page.min_left);
        let x1 = page.width - page.margin - 10.0;
        let larger = if k == 1.0 {
            String::new()
        } else {
            format!(" at this {}", Flag::FontSize)
        };
        if x1 - x0 < MIN_PLOT.1 {
            return Err(Error::usage(
                Flag::Width,
                format!(
                    "{} pixels leave no room for the {}{larger}; use at least {:.0}",
                    page.width,
                    page.plot,
                    page.width + MIN_PLOT.1 - (x1 - x0)
                ),
            ));
        }
        let x_title = super::wrap_or_fit(x_title, size::LABEL * k, x1 - x0);
        let y_title = super::wrap_or_fit(y_title, size::LABEL * k, x1 + 10.0 - (x0 - 8.0));
        let line = 17.0 * k;
        let top = page.top + line * (y_title.len() - 1) as f64;
        let bottom = page.bottom + line * (x_title.len() - 1) as f64;
        let need = top + bottom + MIN_PLOT.0;
        let height = match page.height {
            Some(h) if f64::from(h) < need => {
                return Err(Error::usage(
                    Flag::Height,
                    format!(
                        "{h} pixels leave no room for the {}{larger}; use at least {need:.0}",
                        page.plot
                    ),
                ))
            }
            Some(h) => f64::from(h),
            // Larger text: the page grows so that the plot area keeps at
            // least half the default page's height.
            None => {
                let plot = if k > 1.0 {
                    0.5 * page.default_height
                } else {
                    0.0
                };
                page.default_height
                    .max(need)
                    .max(top + bottom + plot)
                    .ceil()
            }
        };
        let frame = Frame {
            x0,
            y0: top,
            x1,
            y1: height - bottom,
            xa,
            ya,
            y_down,
            k,
            page_width: page.width,
            x_title,
            y_title,
        };
        Ok((frame, height))
    }

    /// Where the room below the plot area (after the tick labels and the
    /// x title) begins: the legend or caption starts here.
    pub fn below(&self) -> f64 {
        self.y1 + 64.0 * self.k + 17.0 * self.k * (self.x_title.len() - 1) as f64
    }

    /// Pixel column of an x value (plot space).
    pub fn x(&self, v: f64) -> f64 {
        self.x0 + (v - self.xa.lo) / (self.xa.hi - self.xa.lo) * (self.x1 - self.x0)
    }

    /// Pixel row of a y value (plot space).
    pub fn y(&self, v: f64) -> f64 {
        let t = (v - self.ya.lo) / (self.ya.hi - self.ya.lo);
        if self.y_down {
            self.y0 + t * (self.y1 - self.y0)
        } else {
            self.y1 - t * (self.y1 - self.y0)
        }
    }

    /// Light grid lines at the y ticks.
    pub fn grid(&self, sc: &mut Scene) {
        for (v, _) in &self.ya.ticks {
            let y = self.y(*v);
            sc.line(vec![(self.x0, y), (self.x1, y)], palette::BAND, 1);
        }
    }

    /// Axis lines, ticks, tick labels and titles (the y title sits above
    /// the axis, horizontally; a title of several lines grows away from
    /// the plot area).
    pub fn axes(&self, sc: &mut Scene) {
        use palette::INK;
        let (k, small) = (self.k, size::SMALL * self.k);
        sc.line(vec![(self.x0, self.y1), (self.x1, self.y1)], INK, 1);
        sc.line(vec![(self.x0, self.y0), (self.x0, self.y1)], INK, 1);
        let xs: Vec<f64> = self.xa.ticks.iter().map(|t| self.x(t.0)).collect();
        let x_step = label_step(&xs, &self.xa.ticks, small, true);
        for (i, ((_, label), x)) in self.xa.ticks.iter().zip(&xs).enumerate() {
            sc.line(vec![(*x, self.y1), (*x, self.y1 + 5.0)], INK, 1);
            if i % x_step == 0 {
                // A label at the right end moves left to stay on the page.
                let half = scene::text_width(label, small) / 2.0;
                let x = x.min(self.page_width - half - 2.0);
                sc.text(
                    (x, self.y1 + 5.0 + 10.0 * k),
                    label.clone(),
                    small,
                    INK,
                    Align::Center,
                );
            }
        }
        let ys: Vec<f64> = self.ya.ticks.iter().map(|t| self.y(t.0)).collect();
        let y_step = label_step(&ys, &self.ya.ticks, small, false);
        for (i, ((_, label), y)) in self.ya.ticks.iter().zip(&ys).enumerate() {
            sc.line(vec![(self.x0 - 5.0, *y), (self.x0, *y)], INK, 1);
            if i % y_step == 0 {
                sc.text((self.x0 - 8.0, *y), label.clone(), small, INK, Align::Right);
            }
        }
        let line = 17.0 * k;
        for (i, t) in self.x_title.iter().enumerate() {
            sc.text(
                (
                    (self.x0 + self.x1) / 2.0,
                    self.y1 + 5.0 + 33.0 * k + line * i as f64,
                ),
                t.clone(),
                size::LABEL * k,
                INK,
                Align::Center,
            );
        }
        let n = self.y_title.len();
        for (i, t) in self.y_title.iter().enumerate() {
            sc.text(
                (
                    self.x0 - 8.0,
                    self.y0 - 18.0 * k - line * (n - 1 - i) as f64,
                ),
                t.clone(),
                size::LABEL * k,
                INK,
                Align::Left,
            );
        }
    }
}

/// Every how many ticks a label is shown so that no two shown labels
/// overlap: along the axis (`horizontal`: label widths plus an 8-pixel gap;
/// otherwise the line height) at pixel positions `at`. 1 when all fit.
pub(crate) fn label_step(
    at: &[f64],
    ticks: &[(f64, String)],
    size: f64,
    horizontal: bool,
) -> usize {
    let extent = |i: usize| {
        if horizontal {
            scene::text_width(&ticks[i].1, size)
        } else {
            super::font::em(size) * 1.3
        }
    };
    (1..=ticks.len().max(1))
        .find(|&step| {
            let shown: Vec<usize> = (0..ticks.len()).step_by(step).collect();
            shown.windows(2).all(|w| {
                let room = (at[w[1]] - at[w[0]]).abs();
                room >= 0.5 * (extent(w[0]) + extent(w[1])) + if horizontal { 8.0 } else { 0.0 }
            })
        })
        .unwrap_or(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crowded_tick_labels_are_thinned() {
        let ticks: Vec<(f64, String)> = (0..8)
            .map(|i| (f64::from(i), format!("{}0.00", i)))
            .collect();
        let wide: Vec<f64> = (0..8).map(|i| 100.0 * f64::from(i)).collect();
        assert_eq!(label_step(&wide, &ticks, 12.5, true), 1);
        let narrow: Vec<f64> = (0..8).map(|i| 30.0 * f64::from(i)).collect();
        let step = label_step(&narrow, &ticks, 12.5, true);
        assert!(step >= 2, "{step}");
        let w = scene::text_width("00.00", 12.5);
        assert!(30.0 * step as f64 >= w + 8.0, "shown labels do not touch");
    }

    #[test]
    fn ticks_cover_the_range() {
        let a = Axis::new(-0.33, 0.71, false, 6);
        assert!(a.ticks.first().unwrap().0 <= -0.33 && a.ticks.last().unwrap().0 >= 0.71);
        assert!(a.ticks.iter().any(|t| t.1 == "0.0" || t.1 == "0"));
        let l = Axis::new(0.2f64.ln(), 3f64.ln(), true, 6);
        assert!(l.ticks.iter().any(|t| t.1 == "1"), "{:?}", l.ticks);
        assert!(l.ticks.iter().any(|t| t.1 == "0.5"), "{:?}", l.ticks);
    }
}
