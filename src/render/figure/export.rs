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

/// The largest PNG drawn, in pixels (4 bytes each in memory while drawing).
pub const MAX_PNG_PIXELS: u64 = 120_000_000;

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
    let (w, h) = png_size(width, height, dpi);
    let pixels = u64::from(w) * u64::from(h);
    if pixels > MAX_PNG_PIXELS {
        return Err(Error::Usage {
            option: flag.into(),
            message: format!(
                "a {w} × {h} PNG ({width} × {height} at {dpi} dpi) would need {} MB of memory (the \
                 limit is {} megapixels); write an .svg or .pdf instead, or give a smaller {}, {} \
                 or {}",
                pixels * 4 / 1_000_000,
                MAX_PNG_PIXELS / 1_000_000,
                Flag::Dpi,
                Flag::Width,
                Flag::Height
            ),
        });
    }
    let tree = tree(svg)?;
    let mut pixmap = resvg::tiny_skia::Pixmap::new(w, h)
        .ok_or_else(|| drawing_error("the picture has no pixels"))?;
    pixmap.fill(resvg::tiny_skia::Color::WHITE);
    let s = (f64::from(dpi) / CSS_DPI) as f32;
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::from_scale(s, s),
        &mut pixmap.as_mut(),
    );
    // The background is opaque, so the premultiplied RGBA is plain RGB.
    let rgb: Vec<u8> = pixmap
        .data()
        .chunks_exact(4)
        .flat_map(|p| [p[0], p[1], p[2]])
        .collect();
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
        let mut writer = enc.write_header().map_err(drawing_error)?;
        writer.write_image_data(&rgb).map_err(drawing_error)?;
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
