//! A backend-independent list of shapes in pixel coordinates, and its
//! drawing with plotters into SVG or PNG.

use super::{Format, FONT};
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontStyle, RGBAColor, RGBColor};
use std::sync::OnceLock;

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
        color: RGBColor,
        width: u32,
        dash: Option<(f64, f64)>,
    },
    /// A closed polygon, filled and/or outlined.
    Poly {
        pts: Vec<(f64, f64)>,
        fill: Option<(RGBColor, f64)>,
        stroke: Option<(RGBColor, u32)>,
    },
    /// A circle, filled and/or outlined.
    Circle {
        c: (f64, f64),
        r: f64,
        fill: Option<(RGBColor, f64)>,
        stroke: Option<(RGBColor, u32)>,
    },
    /// One line of text, vertically centred on the point.
    Text {
        at: (f64, f64),
        text: String,
        size: f64,
        color: RGBColor,
        align: Align,
    },
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

    pub(crate) fn line(&mut self, pts: Vec<(f64, f64)>, color: RGBColor, width: u32) {
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
        color: RGBColor,
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
        fill: Option<(RGBColor, f64)>,
        stroke: Option<(RGBColor, u32)>,
    ) {
        self.shapes.push(Shape::Poly { pts, fill, stroke });
    }

    pub(crate) fn rect(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, fill: RGBColor) {
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
        fill: Option<(RGBColor, f64)>,
        stroke: Option<(RGBColor, u32)>,
    ) {
        self.shapes.push(Shape::Circle { c, r, fill, stroke });
    }

    pub(crate) fn text(
        &mut self,
        at: (f64, f64),
        text: impl Into<String>,
        size: f64,
        color: RGBColor,
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

/// The family name the bundled font is registered under. The SVG backend
/// writes it as the `font-family` attribute, a CSS list; every SVG carries
/// the font itself in an `@font-face` rule under that name, so viewers show
/// the PNGs' typeface whether or not DejaVu Sans is installed.
const FAMILY: &str = "DejaVu Sans, sans-serif";

/// The bundled font as a CSS `@font-face` rule with the TTF inline (base64),
/// so an SVG shows the same typeface as the PNG on a machine without it.
fn font_face_rule() -> &'static str {
    static RULE: OnceLock<String> = OnceLock::new();
    RULE.get_or_init(|| {
        format!(
            "<defs><style>@font-face{{font-family:\"DejaVu Sans\";src:url(data:font/ttf;base64,{}) format(\"truetype\");}}</style></defs>",
            base64(FONT)
        )
    })
}

/// Inserts [`font_face_rule`] right after the opening `<svg ...>` tag.
fn embed_font(svg: String) -> String {
    match svg
        .find("<svg")
        .and_then(|start| svg[start..].find('>').map(|end| start + end + 1))
    {
        Some(at) => {
            let mut out = String::with_capacity(svg.len() + font_face_rule().len());
            out.push_str(&svg[..at]);
            out.push_str(font_face_rule());
            out.push_str(&svg[at..]);
            out
        }
        None => svg,
    }
}

/// Standard base64 (RFC 4648, with padding).
fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            *chunk.get(1).unwrap_or(&0),
            *chunk.get(2).unwrap_or(&0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for i in 0..4 {
            if i <= chunk.len() {
                out.push(ALPHABET[((n >> (18 - 6 * i)) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// Registers the bundled font once; false when it cannot be read.
fn font_ready() -> bool {
    static READY: OnceLock<bool> = OnceLock::new();
    *READY.get_or_init(|| plotters::style::register_font(FAMILY, FontStyle::Normal, FONT).is_ok())
}

/// Width in pixels of `text` at `size` in the bundled font.
pub(crate) fn text_width(text: &str, size: f64) -> f64 {
    if !font_ready() {
        return 0.6 * size * text.chars().count() as f64;
    }
    (FAMILY, size)
        .into_font()
        .box_size(text)
        .map(|(w, _)| f64::from(w))
        .unwrap_or(0.6 * size * text.chars().count() as f64)
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

fn drawing_error(e: impl std::fmt::Display) -> Error {
    Error::Io {
        path: "<plot>".into(),
        action: "drawing",
        source: std::io::Error::other(e.to_string()),
    }
}

fn pt(p: (f64, f64)) -> (i32, i32) {
    (p.0.round() as i32, p.1.round() as i32)
}

/// Splits a polyline into dash pieces.
fn dashes(pts: &[(f64, f64)], on: f64, off: f64) -> Vec<Vec<(f64, f64)>> {
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

fn draw<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, scene: &Scene) -> Result<()> {
    area.fill(&super::palette::PAPER).map_err(drawing_error)?;
    let rgba = |c: RGBColor, a: f64| -> RGBAColor { c.mix(a) };
    for s in &scene.shapes {
        match s {
            Shape::Line {
                pts,
                color,
                width,
                dash,
            } => {
                let style = ShapeStyle {
                    color: color.to_rgba(),
                    filled: false,
                    stroke_width: *width,
                };
                let pieces = match dash {
                    Some((on, off)) => dashes(pts, *on, *off),
                    None => vec![pts.clone()],
                };
                for piece in pieces {
                    let p: Vec<(i32, i32)> = piece.into_iter().map(pt).collect();
                    area.draw(&PathElement::new(p, style))
                        .map_err(drawing_error)?;
                }
            }
            Shape::Poly { pts, fill, stroke } => {
                let p: Vec<(i32, i32)> = pts.iter().copied().map(pt).collect();
                if let Some((c, a)) = fill {
                    area.draw(&Polygon::new(p.clone(), rgba(*c, *a).filled()))
                        .map_err(drawing_error)?;
                }
                if let Some((c, w)) = stroke {
                    let mut closed = p;
                    closed.push(closed[0]);
                    area.draw(&PathElement::new(closed, c.stroke_width(*w)))
                        .map_err(drawing_error)?;
                }
            }
            Shape::Circle { c, r, fill, stroke } => {
                let r = r.round().max(1.0) as u32;
                if let Some((col, a)) = fill {
                    area.draw(&Circle::new(pt(*c), r, rgba(*col, *a).filled()))
                        .map_err(drawing_error)?;
                }
                if let Some((col, w)) = stroke {
                    area.draw(&Circle::new(pt(*c), r, col.stroke_width(*w)))
                        .map_err(drawing_error)?;
                }
            }
            Shape::Text {
                at,
                text,
                size,
                color,
                align,
            } => {
                let h = match align {
                    Align::Left => HPos::Left,
                    Align::Center => HPos::Center,
                    Align::Right => HPos::Right,
                };
                let style = (FAMILY, *size)
                    .into_font()
                    .color(color)
                    .pos(Pos::new(h, VPos::Center));
                area.draw(&Text::new(text.clone(), pt(*at), style))
                    .map_err(drawing_error)?;
            }
        }
    }
    area.present().map_err(drawing_error)
}

/// The largest PNG drawn, in pixels (3 bytes each in memory while drawing).
pub const MAX_PNG_PIXELS: u64 = 120_000_000;

/// Pixel count above which PNGs are compressed fast rather than small.
const LARGE_PIXELS: u64 = 4_000_000;

/// Draws `scene` into SVG text or PNG bytes.
/// `flag` is the plot's option, named in the error for a PNG too large to draw.
/// Draws a scene as SVG markup for embedding in an HTML page: no XML
/// namespace attribute (inline SVG in HTML needs none, and the page then
/// names no web address at all) and no embedded font (the page carries
/// [`font_face_css`] once for all its pictures).
///
/// # Errors
/// [`Error::Io`] (action "drawing") when plotters fails.
pub(crate) fn encode_inline(scene: &Scene) -> Result<String> {
    if !font_ready() {
        return Err(drawing_error("the bundled font could not be loaded"));
    }
    let mut out = String::new();
    {
        let area =
            SVGBackend::with_string(&mut out, (scene.width, scene.height)).into_drawing_area();
        draw(&area, scene)?;
    }
    Ok(out.replacen(" xmlns=\"http://www.w3.org/2000/svg\"", "", 1))
}

/// The bundled font as a CSS `@font-face` rule (TTF inline, base64), for a
/// page that embeds several pictures drawn by `encode_inline`.
pub fn font_face_css() -> String {
    format!(
        "@font-face{{font-family:\"DejaVu Sans\";src:url(data:font/ttf;base64,{}) format(\"truetype\");}}",
        base64(FONT)
    )
}

pub(crate) fn encode(scene: &Scene, format: Format, flag: Flag) -> Result<Vec<u8>> {
    if !font_ready() {
        return Err(drawing_error("the bundled font could not be loaded"));
    }
    let (w, h) = (scene.width, scene.height);
    if format == Format::Png && u64::from(w) * u64::from(h) > MAX_PNG_PIXELS {
        return Err(Error::Usage {
            option: flag.into(),
            message: format!(
                "a {w} × {h} PNG would need {} MB of memory (the limit is {} megapixels); write an \
                 .svg instead, or give a smaller {}/{}",
                u64::from(w) * u64::from(h) * 3 / 1_000_000,
                MAX_PNG_PIXELS / 1_000_000,
                Flag::Width,
                Flag::Height
            ),
        });
    }
    match format {
        Format::Svg => {
            let mut out = String::new();
            {
                let area = SVGBackend::with_string(&mut out, (w, h)).into_drawing_area();
                draw(&area, scene)?;
            }
            Ok(embed_font(out).into_bytes())
        }
        Format::Png => {
            let mut rgb = vec![0u8; w as usize * h as usize * 3];
            {
                let area = BitMapBackend::with_buffer(&mut rgb, (w, h)).into_drawing_area();
                draw(&area, scene)?;
            }
            let mut out = Vec::new();
            {
                let mut enc = png::Encoder::new(&mut out, w, h);
                enc.set_color(png::ColorType::Rgb);
                enc.set_depth(png::BitDepth::Eight);
                // Large pictures (tall forest plots) trade file size for speed.
                enc.set_compression(if u64::from(w) * u64::from(h) > LARGE_PIXELS {
                    png::Compression::Fast
                } else {
                    png::Compression::Default
                });
                let mut writer = enc.write_header().map_err(drawing_error)?;
                writer.write_image_data(&rgb).map_err(drawing_error)?;
            }
            Ok(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc_4648_examples() {
        // RFC 4648, section 10.
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded);
        }
        let svg = embed_font("<?xml?><svg width=\"1\">x</svg>".to_string());
        assert!(svg.starts_with("<?xml?><svg width=\"1\"><defs><style>@font-face"));
        assert!(svg.ends_with("</style></defs>x</svg>"));
    }

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
}
