//! A list of shapes in pixel coordinates (CSS pixels, 96 per inch, with
//! sub-pixel precision), built by each plot and written as SVG by `svg.rs`;
//! PNG and PDF are made from that SVG (`export.rs`).

use super::font;

/// A colour (8-bit sRGB channels).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    /// `#RRGGBB` in capitals.
    pub fn hex(self) -> String {
        format!("#{:02X}{:02X}{:02X}", self.0, self.1, self.2)
    }
}

/// Horizontal text alignment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Text starts at the point.
    Left,
    /// Text is centred on the point.
    Center,
    /// Text ends at the point.
    Right,
}

/// One shape.
#[derive(Debug, Clone)]
pub(crate) enum Shape {
    /// An open polyline, optionally dashed (`(on, off)` lengths in pixels).
    Line {
        pts: Vec<(f64, f64)>,
        color: Rgb,
        width: u32,
        dash: Option<(f64, f64)>,
    },
    /// A closed polygon, filled and/or outlined.
    Poly {
        pts: Vec<(f64, f64)>,
        fill: Option<(Rgb, f64)>,
        stroke: Option<(Rgb, u32)>,
    },
    /// A circle, filled and/or outlined.
    Circle {
        c: (f64, f64),
        r: f64,
        fill: Option<(Rgb, f64)>,
        stroke: Option<(Rgb, u32)>,
    },
    /// One line of text, vertically centred on the point.
    Text {
        at: (f64, f64),
        text: String,
        size: f64,
        color: Rgb,
        align: Align,
    },
}

impl Shape {
    /// The rows (CSS pixels, top and bottom) the shape can paint,
    /// generously: strokes with their joins (a miter reaches at most twice
    /// the line width from a corner), text a whole line height (`size`)
    /// above and below its centre, plus 2 pixels for antialiasing.
    pub(crate) fn rows(&self) -> (f64, f64) {
        let span = |pts: &[(f64, f64)], reach: f64| {
            let (lo, hi) = pts
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                    (lo.min(p.1), hi.max(p.1))
                });
            (lo - reach - 2.0, hi + reach + 2.0)
        };
        match self {
            Shape::Line { pts, width, .. } => span(pts, 2.0 * f64::from(*width)),
            Shape::Poly { pts, stroke, .. } => {
                span(pts, 2.0 * stroke.map_or(0.0, |s| f64::from(s.1)))
            }
            Shape::Circle { c, r, stroke, .. } => {
                let reach = r.max(0.5) + stroke.map_or(0.0, |s| f64::from(s.1));
                (c.1 - reach - 2.0, c.1 + reach + 2.0)
            }
            Shape::Text { at, size, .. } => (at.1 - size - 2.0, at.1 + size + 2.0),
        }
    }
}

/// A picture: its size and its shapes, drawn in order.
#[derive(Debug, Clone)]
pub struct Scene {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    pub(crate) shapes: Vec<Shape>,
}

impl Scene {
    pub(crate) fn new(width: u32, height: u32) -> Scene {
        Scene {
            width,
            height,
            shapes: Vec::new(),
        }
    }

    pub(crate) fn line(&mut self, pts: Vec<(f64, f64)>, color: Rgb, width: u32) {
        self.shapes.push(Shape::Line {
            pts,
            color,
            width,
            dash: None,
        });
    }

    pub(crate) fn dashed(
        &mut self,
        pts: Vec<(f64, f64)>,
        color: Rgb,
        width: u32,
        dash: (f64, f64),
    ) {
        self.shapes.push(Shape::Line {
            pts,
            color,
            width,
            dash: Some(dash),
        });
    }

    pub(crate) fn poly(
        &mut self,
        pts: Vec<(f64, f64)>,
        fill: Option<(Rgb, f64)>,
        stroke: Option<(Rgb, u32)>,
    ) {
        self.shapes.push(Shape::Poly { pts, fill, stroke });
    }

    pub(crate) fn rect(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, fill: Rgb) {
        self.poly(
            vec![(x0, y0), (x1, y0), (x1, y1), (x0, y1)],
            Some((fill, 1.0)),
            None,
        );
    }

    pub(crate) fn circle(
        &mut self,
        c: (f64, f64),
        r: f64,
        fill: Option<(Rgb, f64)>,
        stroke: Option<(Rgb, u32)>,
    ) {
        self.shapes.push(Shape::Circle { c, r, fill, stroke });
    }

    pub(crate) fn text(
        &mut self,
        at: (f64, f64),
        text: impl Into<String>,
        size: f64,
        color: Rgb,
        align: Align,
    ) {
        self.shapes.push(Shape::Text {
            at,
            // Labels come from data files: characters XML does not allow
            // would make the SVG unreadable.
            text: crate::support::text::xml(&text.into()).into_owned(),
            size,
            color,
            align,
        });
    }
}

/// Width in pixels of `text` at `size` in the bundled font.
pub(crate) fn text_width(text: &str, size: f64) -> f64 {
    font::text_width(text, size)
}

/// `text` shortened with an ellipsis to fit in `max` pixels at `size`.
pub(crate) fn fit_text(text: &str, size: f64, max: f64) -> String {
    if text_width(text, size) <= max {
        return text.to_string();
    }
    let chars: Vec<char> = text.chars().collect();
    let (mut lo, mut hi) = (0usize, chars.len());
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        let candidate: String = chars[..mid].iter().collect::<String>() + "…";
        if text_width(&candidate, size) <= max {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    let kept: String = chars[..lo].iter().collect();
    format!("{}…", kept.trim_end())
}

/// `text` shortened to fit in `max` pixels at `size` by an ellipsis in the
/// middle, keeping both ends ("Laboratory for Cognitive … Dunmarrow"): the
/// end of a study label (a year, a site, a letter) often tells studies apart.
pub(crate) fn fit_middle(text: &str, size: f64, max: f64) -> String {
    if text_width(text, size) <= max {
        return text.to_string();
    }
    let chars: Vec<char> = text.chars().collect();
    if chars.len() < 4 {
        return fit_text(text, size, max);
    }
    let build = |keep: usize| -> String {
        let tail = keep / 2;
        let head = keep - tail;
        let h: String = chars[..head].iter().collect();
        let t: String = chars[chars.len() - tail..].iter().collect();
        format!("{} … {}", h.trim_end(), t.trim_start())
    };
    let (mut lo, mut hi) = (0usize, chars.len() - 1);
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        if text_width(&build(mid), size) <= max {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    if lo < 2 {
        return fit_text(text, size, max);
    }
    build(lo)
}

/// Splits a polyline into dash pieces.
pub(crate) fn dashes(pts: &[(f64, f64)], on: f64, off: f64) -> Vec<Vec<(f64, f64)>> {
    let mut out = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    let mut drawing = true;
    let mut left = on;
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        let len = ((b.0 - a.0).powi(2) + (b.1 - a.1).powi(2)).sqrt();
        let mut t = 0.0;
        if drawing && current.is_empty() {
            current.push(a);
        }
        while len - t > left {
            t += left;
            let p = (a.0 + (b.0 - a.0) * t / len, a.1 + (b.1 - a.1) * t / len);
            if drawing {
                current.push(p);
                out.push(std::mem::take(&mut current));
                left = off;
            } else {
                current = vec![p];
                left = on;
            }
            drawing = !drawing;
        }
        left -= len - t;
        if drawing {
            current.push(b);
        }
    }
    if current.len() > 1 {
        out.push(current);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dashes_cover_about_half_of_a_line() {
        let d = dashes(&[(0.0, 0.0), (100.0, 0.0)], 5.0, 5.0);
        assert_eq!(d.len(), 10);
        assert!((d[1][0].0 - 10.0).abs() < 1e-9);
    }

    #[test]
    fn long_text_is_shortened_with_an_ellipsis() {
        let t = fit_text("A very long study label that cannot fit", 12.0, 80.0);
        assert!(t.ends_with('…'), "{t}");
        assert!(text_width(&t, 12.0) <= 80.0);
        assert_eq!(fit_text("short", 12.0, 200.0), "short");
    }

    #[test]
    fn long_labels_keep_both_ends() {
        let label = "Laboratory for Cognitive Studies of Memory, University of Dunmarrow";
        let t = fit_middle(label, 12.0, 200.0);
        assert!(text_width(&t, 12.0) <= 200.0, "{t}");
        assert!(
            t.starts_with("Laboratory") && t.ends_with("Dunmarrow"),
            "{t}"
        );
        assert!(t.contains(" … "), "{t}");
        assert_eq!(fit_middle("Site 10", 12.0, 200.0), "Site 10");
    }
}
