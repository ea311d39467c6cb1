//! Marks that tell the levels of a categorical moderator apart in a plot:
//! a shape, a colour and a line style per level, so that each level can be
//! told from the others by shape alone, by line style alone, and by
//! lightness alone (the colours step from dark to light, which survives
//! every kind of colour blindness and greyscale printing).
//!
//! The shapes have distinct numbers of corners (disc, triangle, square,
//! four-pointed star, plus), and each is drawn with the same area as the
//! disc of the given radius, so area keeps meaning weight.

use super::scene::{Rgb, Scene};
use std::f64::consts::PI;

/// How many levels the marks tell apart.
pub(crate) const LEVELS: usize = 5;

/// A marker shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Shape {
    /// A circle.
    Disc,
    /// An equilateral triangle, apex up.
    Triangle,
    /// An axis-aligned square.
    Square,
    /// A four-pointed star (eight corners).
    Star,
    /// A plus sign (twelve corners).
    Plus,
}

/// The look of one level: shape, colour and the dash of its fitted line
/// (None: solid).
#[derive(Debug, Clone, Copy)]
pub(crate) struct LevelMark {
    pub shape: Shape,
    pub color: Rgb,
    pub dash: Option<(f64, f64)>,
}

/// The marks of the levels, in level order: dark to light, each with its own
/// shape and line style.
pub(crate) const MARKS: [LevelMark; LEVELS] = [
    LevelMark {
        shape: Shape::Disc,
        color: Rgb(0x1D, 0x34, 0x61),
        dash: None,
    },
    LevelMark {
        shape: Shape::Triangle,
        color: Rgb(0xA3, 0x30, 0x3A),
        dash: Some((10.0, 4.0)),
    },
    LevelMark {
        shape: Shape::Square,
        color: Rgb(0x2A, 0x8C, 0x82),
        dash: Some((3.0, 3.0)),
    },
    LevelMark {
        shape: Shape::Star,
        color: Rgb(0xC4, 0x88, 0x3A),
        dash: Some((16.0, 4.0)),
    },
    LevelMark {
        shape: Shape::Plus,
        color: Rgb(0xE0, 0xA8, 0x3A),
        dash: Some((1.5, 3.5)),
    },
];

/// The corners of `shape` centred at `c` with the area of a disc of radius
/// `r` (None for the disc itself).
pub(crate) fn corners(shape: Shape, (x, y): (f64, f64), r: f64) -> Option<Vec<(f64, f64)>> {
    let area = PI * r * r;
    let pts = match shape {
        Shape::Disc => return None,
        Shape::Triangle => {
            // Area (3√3/4)·R² for circumradius R; centred on its centroid.
            let big = (4.0 * area / (3.0 * 3f64.sqrt())).sqrt();
            (0..3)
                .map(|i| {
                    let a = -PI / 2.0 + f64::from(i) * 2.0 * PI / 3.0;
                    (x + big * a.cos(), y + big * a.sin())
                })
                .collect()
        }
        Shape::Square => {
            let h = area.sqrt() / 2.0;
            vec![
                (x - h, y - h),
                (x + h, y - h),
                (x + h, y + h),
                (x - h, y + h),
            ]
        }
        Shape::Star => {
            // Points at radius R, notches at R/2: area 4·R·(R/2)·sin 45°.
            let big = (area / 2f64.sqrt()).sqrt();
            (0..8)
                .map(|i| {
                    let a = -PI / 2.0 + f64::from(i) * PI / 4.0;
                    let rad = if i % 2 == 0 { big } else { big / 2.0 };
                    (x + rad * a.cos(), y + rad * a.sin())
                })
                .collect()
        }
        Shape::Plus => {
            // Arms of half-length b and half-width b/3: area 20·b²/9.
            let b = (9.0 * area / 20.0).sqrt();
            let a = b / 3.0;
            vec![
                (x - a, y - b),
                (x + a, y - b),
                (x + a, y - a),
                (x + b, y - a),
                (x + b, y + a),
                (x + a, y + a),
                (x + a, y + b),
                (x - a, y + b),
                (x - a, y + a),
                (x - b, y + a),
                (x - b, y - a),
                (x - a, y - a),
            ]
        }
    };
    Some(pts)
}

/// Draws `shape` at `c` with the area of a disc of radius `r`.
pub(crate) fn draw(
    sc: &mut Scene,
    shape: Shape,
    c: (f64, f64),
    r: f64,
    fill: Option<(Rgb, f64)>,
    stroke: Option<(Rgb, u32)>,
) {
    match corners(shape, c, r) {
        None => sc.circle(c, r, fill, stroke),
        Some(pts) => sc.poly(pts, fill, stroke),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Relative luminance (WCAG 2.x definition).
    fn luminance(c: Rgb) -> f64 {
        let lin = |v: u8| {
            let v = f64::from(v) / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * lin(c.0) + 0.7152 * lin(c.1) + 0.0722 * lin(c.2)
    }

    #[test]
    fn levels_differ_in_lightness_shape_and_line_style() {
        for (i, a) in MARKS.iter().enumerate() {
            // Visible on white paper: contrast ratio at least 2 : 1.
            assert!(1.05 / (luminance(a.color) + 0.05) >= 2.0, "mark {i}");
            for b in &MARKS[i + 1..] {
                assert!(luminance(b.color) - luminance(a.color) >= 0.06, "mark {i}");
                assert_ne!(a.shape, b.shape);
                assert_ne!(a.dash, b.dash);
            }
        }
    }

    /// Shoelace area of a polygon.
    fn area(pts: &[(f64, f64)]) -> f64 {
        let n = pts.len();
        (0..n)
            .map(|i| {
                let (a, b) = (pts[i], pts[(i + 1) % n]);
                a.0 * b.1 - b.0 * a.1
            })
            .sum::<f64>()
            .abs()
            / 2.0
    }

    #[test]
    fn every_shape_has_the_area_of_its_disc_and_its_own_corner_count() {
        let mut counts = vec![0];
        for m in &MARKS[1..] {
            let pts = corners(m.shape, (10.0, 20.0), 7.0).unwrap();
            assert!((area(&pts) - PI * 49.0).abs() < 1e-9, "{:?}", m.shape);
            assert!(!counts.contains(&pts.len()));
            counts.push(pts.len());
        }
        assert!(corners(Shape::Disc, (0.0, 0.0), 1.0).is_none());
    }
}
