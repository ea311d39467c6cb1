//! PNG and PDF made from a figure's SVG, so all three formats show the same
//! letters, positions and colours.
//!
//! The SVG is parsed once by usvg (with only the bundled font in its font
//! database: no system fonts are consulted), then rasterised by resvg into
//! a PNG at the requested dots per inch, or converted by svg2pdf into a
//! one-page vector PDF whose page has the figure's physical size (CSS
//! pixels at 96 per inch) with the used glyphs of the font embedded and the
//! text selectable.

use super::font::{FAMILY, FONT};
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use resvg::usvg;
use std::sync::{Arc, OnceLock};

/// CSS pixels per inch: `--width`/`--height` are measured in these.
pub const CSS_DPI: f64 = 96.0;

/// The largest PNG drawn, in pixels: every figure of the default width up
/// to the largest height (30,000 CSS pixels) at 300 dpi. The picture is
/// drawn in strips of at most 16 megapixels, so memory does not grow
/// with it; the limit bounds the time and the file instead.
pub const MAX_PNG_PIXELS: u64 = 300_000_000;

/// Pixels drawn at once (4 bytes each): a PNG is rasterised strip by strip
/// and each strip's rows are compressed before the next is drawn.
const STRIP_PIXELS: u64 = 16_000_000;

/// Pixel count above which PNGs are compressed fast rather than small.
const LARGE_PIXELS: u64 = 4_000_000;

fn drawing_error(e: impl std::fmt::Display) -> Error {
    Error::Io {
        path: "<plot>".into(),
        action: "drawing",
        source: std::io::Error::other(e.to_string()),
    }
}

/// The font database holding the bundled font alone, shared by all figures.
fn fonts() -> Arc<usvg::fontdb::Database> {
    static DB: OnceLock<Arc<usvg::fontdb::Database>> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = usvg::fontdb::Database::new();
        db.load_font_data(FONT.to_vec());
        db.set_sans_serif_family(FAMILY);
        Arc::new(db)
    })
    .clone()
}

/// The SVG parsed into usvg's tree, text laid out with the bundled font.
fn tree(svg: &str) -> Result<usvg::Tree> {
    let opts = usvg::Options {
        font_family: FAMILY.to_string(),
        fontdb: fonts(),
        ..usvg::Options::default()
    };
    usvg::Tree::from_str(svg, &opts).map_err(drawing_error)
}

/// Pixel size of a `width` × `height` (CSS pixels) figure at `dpi`.
pub fn png_size(width: u32, height: u32, dpi: u32) -> (u32, u32) {
    let s = f64::from(dpi) / CSS_DPI;
    (
        (f64::from(width) * s).round().max(1.0) as u32,
        (f64::from(height) * s).round().max(1.0) as u32,
    )
}

/// The SVG rasterised at `dpi` (the whole figure scaled by `dpi / 96`) as an
/// 8-bit RGB PNG whose `pHYs` chunk records the resolution.
///
/// # Errors
/// [`Error::Usage`] naming `flag` when the picture would exceed
/// [`MAX_PNG_PIXELS`]; [`Error::Io`] (action "drawing") when parsing or encoding fails.
pub(crate) fn png(svg: &str, width: u32, height: u32, dpi: u32, flag: Flag) -> Result<Vec<u8>> {
    png_in_strips(svg, (width, height), dpi, flag, STRIP_PIXELS)
}

/// [`png`], drawing at most `strip_pixels` pixels at a time.
fn png_in_strips(
    svg: &str,
    (width, height): (u32, u32),
    dpi: u32,
    flag: Flag,
    strip_pixels: u64,
) -> Result<Vec<u8>> {
    let (w, h) = png_size(width, height, dpi);
    let pixels = u64::from(w) * u64::from(h);
    if pixels > MAX_PNG_PIXELS {
        return Err(Error::Usage {
            option: flag.into(),
            message: format!(
                "a {w} × {h} PNG ({width} × {height} at {dpi} dpi) would be {} megapixels (the \
                 limit is {}); write an .svg or .pdf instead, or give a smaller {}, {} or {}",
                pixels / 1_000_000,
                MAX_PNG_PIXELS / 1_000_000,
                Flag::Dpi,
                Flag::Width,
                Flag::Height
            ),
        });
    }
    let tree = tree(svg)?;
    let strip = (strip_pixels / u64::from(w)).clamp(1, u64::from(h)) as u32;
    let mut pixmap = resvg::tiny_skia::Pixmap::new(w, strip)
        .ok_or_else(|| drawing_error("the picture has no pixels"))?;
    let s = (f64::from(dpi) / CSS_DPI) as f32;
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        // Pixels per metre: dpi / 0.0254.
        let ppm = (f64::from(dpi) / 0.0254).round() as u32;
        enc.set_pixel_dims(Some(png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }));
        // Large pictures (tall forest plots) trade file size for speed.
        enc.set_compression(if pixels > LARGE_PIXELS {
            png::Compression::Fast
        } else {
            png::Compression::Default
        });
        let mut header = enc.write_header().map_err(drawing_error)?;
        let mut writer = header.stream_writer().map_err(drawing_error)?;
        let mut rgb = vec![0u8; w as usize * strip as usize * 3];
        for top in (0..h).step_by(strip as usize) {
            let rows = strip.min(h - top) as usize;
            pixmap.fill(resvg::tiny_skia::Color::WHITE);
            resvg::render(
                &tree,
                resvg::tiny_skia::Transform::from_scale(s, s).post_translate(0.0, -(top as f32)),
                &mut pixmap.as_mut(),
            );
            // The background is opaque, so the premultiplied RGBA is plain RGB.
            let n = rows * w as usize;
            for (d, p) in rgb[..n * 3]
                .chunks_exact_mut(3)
                .zip(pixmap.data()[..n * 4].chunks_exact(4))
            {
                d.copy_from_slice(&p[..3]);
            }
            std::io::Write::write_all(&mut writer, &rgb[..rows * w as usize * 3])
                .map_err(drawing_error)?;
        }
        writer.finish().map_err(drawing_error)?;
    }
    Ok(out)
}

/// The SVG as a one-page vector PDF, the page `width × 0.75` by
/// `height × 0.75` points (96 CSS pixels = 72 points = one inch).
///
/// # Errors
/// [`Error::Io`] (action "drawing") when parsing or converting fails.
pub(crate) fn pdf(svg: &str) -> Result<Vec<u8>> {
    let tree = tree(svg)?;
    svg2pdf::to_pdf(
        &tree,
        svg2pdf::ConversionOptions::default(),
        svg2pdf::PageOptions {
            dpi: CSS_DPI as f32,
        },
    )
    .map_err(drawing_error)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::figure::scene::{Align, Rgb, Scene};

    fn pixels(png_bytes: &[u8]) -> Vec<u8> {
        let mut reader = png::Decoder::new(std::io::Cursor::new(png_bytes))
            .read_info()
            .unwrap();
        let mut buf = vec![0; reader.output_buffer_size()];
        let info = reader.next_frame(&mut buf).unwrap();
        buf.truncate(info.buffer_size());
        buf
    }

    #[test]
    fn a_png_drawn_in_strips_has_the_pixels_of_one_drawn_at_once() {
        let mut sc = Scene::new(300, 400);
        for i in 0..20 {
            let y = 10.0 + 19.3 * f64::from(i);
            sc.circle(
                (40.0 + 11.0 * f64::from(i), y),
                7.5,
                Some((Rgb(0, 90, 160), 0.4)),
                None,
            );
            sc.line(vec![(5.0, y), (295.0, y + 3.0)], Rgb(200, 80, 0), 1);
            sc.text(
                (60.0, y),
                "Study 1, 0.25 [−0.10, 0.60]",
                12.0,
                Rgb(0, 0, 0),
                Align::Left,
            );
        }
        let svg = super::super::svg::standalone(&sc).unwrap();
        let whole = png_in_strips(&svg, (300, 400), 150, Flag::Forest, u64::MAX).unwrap();
        // 469 × 625 pixels at 150 dpi: strips of 21 rows (10,000 pixels)
        // cut through discs, lines and letters.
        let strips = png_in_strips(&svg, (300, 400), 150, Flag::Forest, 10_000).unwrap();
        let (a, b) = (pixels(&whole), pixels(&strips));
        assert_eq!(a.len(), b.len());
        let diff: Vec<(usize, u8)> = a
            .iter()
            .zip(&b)
            .enumerate()
            .filter(|(_, (x, y))| x != y)
            .map(|(i, (x, y))| (i, x.abs_diff(*y)))
            .collect();
        // Antialiased edges cut by a strip's top are stepped from another
        // row, so their coverage may differ slightly; a shape drawn in the
        // wrong place would differ by far more, at every edge.
        assert!(
            diff.len() * 100 < a.len(),
            "{} of {} values differ",
            diff.len(),
            a.len()
        );
        assert!(
            diff.iter().all(|d| d.1 <= 64),
            "{:?}",
            diff.iter().map(|d| d.1).max()
        );
        assert!(
            pixels(&whole).iter().any(|&v| v < 100),
            "something is drawn"
        );
    }
}
