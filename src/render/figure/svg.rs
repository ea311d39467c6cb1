//! A scene written as SVG: one flat list of elements (`polyline`, `polygon`,
//! `circle`, `text`) after a white background, coordinates with two
//! decimals (sub-pixel), the font named by family. A standalone SVG embeds
//! the subset of the bundled font its text uses (`@font-face`); an inline
//! one (for an HTML page) leaves the font to the page.

use super::font::{self, FAMILY};
use super::scene::{dashes, Align, Rgb, Scene, Shape};
use crate::error::Result;
use crate::support::format as fmt;
use std::collections::BTreeSet;
use std::fmt::Write as _;

/// Every character the scene's text uses.
pub(crate) fn chars_of(scene: &Scene) -> BTreeSet<char> {
    let mut set = BTreeSet::new();
    for s in &scene.shapes {
        if let Shape::Text { text, .. } = s {
            set.extend(text.chars());
        }
    }
    set
}

/// The scene as a standalone SVG document with its font subset embedded.
///
/// # Errors
/// [`crate::error::Error::Io`] when the font cannot be subset.
pub(crate) fn standalone(scene: &Scene) -> Result<String> {
    let chars = chars_of(scene);
    let defs = if chars.is_empty() {
        String::new()
    } else {
        format!(
            "<defs><style>{}</style></defs>\n",
            font::font_face_rule(&chars)?
        )
    };
    Ok(document(scene, true, &defs, None))
}

/// The scene as a standalone SVG document holding only the shapes that can
/// paint rows `y0..y1` (CSS pixels, see `Shape::rows`), for drawing a PNG
/// strip by strip: the same canvas, elements and attributes as
/// [`standalone`], in the same order, without the font subset (the
/// rasteriser has the whole bundled font), without the paper (the strip is
/// cleared to it) and without the shapes that cannot reach those rows, so
/// every strip reads only its own share.
pub(crate) fn rows_only(scene: &Scene, (y0, y1): (f64, f64)) -> String {
    document(scene, true, "", Some((y0, y1)))
}

/// The scene as an `<svg>` element for an HTML page: no namespace attribute
/// (inline SVG in HTML needs none) and no font (the page carries it once).
pub(crate) fn inline(scene: &Scene) -> String {
    document(scene, false, "", None)
}

/// A number for an attribute: two decimals at most, no trailing zeros.
fn n(x: f64) -> String {
    fmt::svg_coord(x)
}

fn points(pts: &[(f64, f64)]) -> String {
    let mut out = String::with_capacity(pts.len() * 14);
    for (i, p) in pts.iter().enumerate() {
        if i > 0 {
            out.push(' ');
        }
        let _ = write!(out, "{},{}", n(p.0), n(p.1));
    }
    out
}

/// Text content escaped for XML.
pub(crate) fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if (c as u32) < 0x20 && c != '\t' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

fn fill_attrs(fill: &Option<(Rgb, f64)>) -> String {
    match fill {
        Some((c, a)) if *a < 1.0 => format!(" fill=\"{}\" fill-opacity=\"{}\"", c.hex(), n(*a)),
        Some((c, _)) => format!(" fill=\"{}\"", c.hex()),
        None => " fill=\"none\"".into(),
    }
}

fn stroke_attrs(stroke: &Option<(Rgb, u32)>) -> String {
    match stroke {
        Some((c, w)) => format!(" stroke=\"{}\" stroke-width=\"{w}\"", c.hex()),
        None => String::new(),
    }
}

fn document(scene: &Scene, namespace: bool, defs: &str, rows: Option<(f64, f64)>) -> String {
    let (w, h) = (scene.width, scene.height);
    let mut out = String::with_capacity(200 + scene.shapes.len() * 120);
    let _ = writeln!(
        out,
        "<svg{} width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" font-family=\"{FAMILY}, sans-serif\" font-kerning=\"none\">",
        if namespace {
            " xmlns=\"http://www.w3.org/2000/svg\""
        } else {
            ""
        }
    );
    out.push_str(defs);
    // The paper (a strip of a PNG is cleared to it before it is drawn).
    if rows.is_none() {
        let _ = writeln!(
            out,
            "<rect x=\"0\" y=\"0\" width=\"{w}\" height=\"{h}\" fill=\"{}\"/>",
            super::palette::PAPER.hex()
        );
    }
    for s in &scene.shapes {
        if let Some((y0, y1)) = rows {
            let (top, bottom) = s.rows();
            if bottom < y0 || top > y1 {
                continue;
            }
        }
        shape(&mut out, s);
    }
    out.push_str("</svg>\n");
    out
}

fn shape(out: &mut String, s: &Shape) {
    match s {
        Shape::Line {
            pts,
            color,
            width,
            dash,
        } => {
            let pieces = match dash {
                Some((on, off)) => dashes(pts, *on, *off),
                None => vec![pts.clone()],
            };
            for piece in pieces {
                let _ = writeln!(
                    out,
                    "<polyline fill=\"none\" stroke=\"{}\" stroke-width=\"{width}\" points=\"{}\"/>",
                    color.hex(),
                    points(&piece)
                );
            }
        }
        Shape::Poly { pts, fill, stroke } => {
            let _ = writeln!(
                out,
                "<polygon points=\"{}\"{}{}/>",
                points(pts),
                fill_attrs(fill),
                stroke_attrs(stroke)
            );
        }
        Shape::Circle { c, r, fill, stroke } => {
            let _ = writeln!(
                out,
                "<circle cx=\"{}\" cy=\"{}\" r=\"{}\"{}{}/>",
                n(c.0),
                n(c.1),
                n(r.max(0.5)),
                fill_attrs(fill),
                stroke_attrs(stroke)
            );
        }
        Shape::Text {
            at,
            text,
            size,
            color,
            align,
        } => {
            let anchor = match align {
                Align::Left => "start",
                Align::Center => "middle",
                Align::Right => "end",
            };
            let _ = writeln!(
                out,
                "<text x=\"{}\" y=\"{}\" text-anchor=\"{anchor}\" font-size=\"{}\" fill=\"{}\">{}</text>",
                n(at.0),
                n(at.1 + font::baseline_offset(*size)),
                n(font::em(*size)),
                color.hex(),
                escape(text)
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coordinates_keep_two_decimals_and_text_is_escaped() {
        let mut sc = Scene::new(100, 50);
        sc.line(vec![(0.0, 0.126), (10.333, 20.0)], Rgb(0, 0, 0), 1);
        sc.text((5.0, 5.0), "a<b & \"c\"", 12.4, Rgb(1, 2, 3), Align::Left);
        let svg = inline(&sc);
        assert!(svg.contains("points=\"0,0.13 10.33,20\""), "{svg}");
        assert!(svg.contains(">a&lt;b &amp; &quot;c&quot;</text>"), "{svg}");
        assert!(svg.contains("font-size=\"10\""), "{svg}");
        assert!(!svg.contains("xmlns"));
    }
}
