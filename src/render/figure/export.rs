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
use super::scene::Scene;
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use rayon::prelude::*;
use resvg::usvg;
use std::sync::{Arc, OnceLock};

/// CSS pixels per inch: `--width`/`--height` are measured in these.
pub const CSS_DPI: f64 = 96.0;

/// The largest PNG drawn, in pixels: every figure of the default width up
/// to the largest height (30,000 CSS pixels) at 300 dpi. The picture is
/// drawn in strips of at most 8 megapixels (`STRIP_PIXELS`), so memory does not
/// grow with it; the limit bounds the time and the file instead.
pub const MAX_PNG_PIXELS: u64 = 300_000_000;

/// Pixels drawn at once by one thread (4 bytes each, 32 MB): a PNG is
/// rasterised strip by strip, each strip filtered and compressed on its
/// own, the strips in parallel.
const STRIP_PIXELS: u64 = 8_000_000;

/// Pixel count above which PNGs are compressed fast rather than small.
const LARGE_PIXELS: u64 = 4_000_000;

/// The deflate level of a PNG of `pixels` pixels: 1 (zlib-rs's quick
/// strategy, static codes) above [`LARGE_PIXELS`], where compressing would
/// otherwise take most of the time, else 6 (zlib's default), for small files.
fn level(pixels: u64) -> u32 {
    if pixels > LARGE_PIXELS {
        1
    } else {
        6
    }
}

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

/// The scene's SVG rasterised at `dpi` (the whole figure scaled by
/// `dpi / 96`) as an 8-bit RGB PNG whose `pHYs` chunk records the resolution.
///
/// The picture is drawn in horizontal strips of at most [`STRIP_PIXELS`]
/// pixels, on all of rayon's threads: each strip's SVG holds only the
/// shapes that reach it (`svg::rows_only`), is parsed and rasterised by
/// resvg, its rows are written as PNG scanlines and compressed into a
/// raw deflate stream ending in a sync flush (the last strip's ends the
/// stream), and the strips' streams are joined in order into one zlib
/// stream (RFC 1950: header, the deflate data, the Adler-32 of all the
/// scanlines, combined from the strips' own). The strips are fixed by
/// the picture's size alone, so the bytes do not depend on the number of
/// threads.
///
/// # Errors
/// [`Error::Usage`] naming `flag` when the picture would exceed
/// [`MAX_PNG_PIXELS`]; [`Error::Io`] (action "drawing") when parsing or encoding fails.
pub(crate) fn png(scene: &Scene, dpi: u32, flag: Flag) -> Result<Vec<u8>> {
    png_in_strips(scene, dpi, flag, STRIP_PIXELS)
}

/// One compressed strip: its raw deflate data, the Adler-32 of its
/// scanlines and their length.
struct Strip {
    deflated: Vec<u8>,
    adler: u32,
    len: u64,
}

/// [`png`], drawing at most `strip_pixels` pixels at a time.
fn png_in_strips(scene: &Scene, dpi: u32, flag: Flag, strip_pixels: u64) -> Result<Vec<u8>> {
    let (width, height) = (scene.width, scene.height);
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
    let rows = (strip_pixels / u64::from(w)).clamp(1, u64::from(h)) as u32;
    let tops: Vec<u32> = (0..h).step_by(rows as usize).collect();
    let level = level(pixels);
    // Each worker thread reuses its pixel and row buffers from strip to strip.
    let strips: Vec<Strip> = tops
        .par_iter()
        .map_init(
            || (None, Vec::new()),
            |(pixmap, scanlines), &top| {
                let n = rows.min(h - top);
                strip(scene, (w, top, n), dpi, (pixmap, scanlines))?;
                Strip::of(scanlines, level, top + n == h)
            },
        )
        .collect::<Result<_>>()?;
    Ok(container((w, h), dpi, level, &strips))
}

impl Strip {
    /// The strip of `scanlines` compressed at `level` (`last`: the strip
    /// that ends the deflate stream).
    fn of(scanlines: &[u8], level: u32, last: bool) -> Result<Strip> {
        Ok(Strip {
            deflated: deflate(scanlines, level, last)?,
            adler: zlib_rs::adler32::adler32(1, scanlines),
            len: scanlines.len() as u64,
        })
    }
}

/// Rows `top..top + n` of the `w`-pixel-wide picture drawn into `pixmap`
/// (made, or reused when it has `n` rows) and written as PNG scanlines
/// into `scanlines`.
fn strip(
    scene: &Scene,
    (w, top, n): (u32, u32, u32),
    dpi: u32,
    (pixmap, scanlines): (&mut Option<resvg::tiny_skia::Pixmap>, &mut Vec<u8>),
) -> Result<()> {
    let s = f64::from(dpi) / CSS_DPI;
    // The strip's rows in CSS pixels.
    let rows_css = (f64::from(top) / s, f64::from(top + n) / s);
    let tree = tree(&super::svg::rows_only(scene, rows_css))?;
    if pixmap.as_ref().is_none_or(|p| p.height() != n) {
        *pixmap = Some(
            resvg::tiny_skia::Pixmap::new(w, n)
                .ok_or_else(|| drawing_error("the picture has no pixels"))?,
        );
    }
    let Some(pm) = pixmap.as_mut() else {
        return Err(drawing_error("the picture has no pixels"));
    };
    pm.fill(resvg::tiny_skia::Color::WHITE);
    let s = s as f32;
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::from_scale(s, s).post_translate(0.0, -(top as f32)),
        &mut pm.as_mut(),
    );
    scanlines_of(pm.data(), w as usize, scanlines);
    Ok(())
}

/// Premultiplied RGBA rows (on an opaque background, so plain RGB) as PNG
/// scanlines into `out`: each row its filter byte 0 ("None") and the red,
/// green and blue bytes of each pixel (PNG specification, 2nd ed., §7.2
/// and §9.2). "None" rather than "Sub": on these flat-coloured figures the
/// deflate step finds the repeats itself, and the 1,000-study forest plot
/// at 300 dpi came out smaller (11.1 against 12.2 MB at level 1).
fn scanlines_of(rgba: &[u8], w: usize, out: &mut Vec<u8>) {
    let rows = rgba.len() / (4 * w);
    let line = 1 + 3 * w;
    // One spare byte: each pixel is copied as four bytes, the fourth
    // overwritten by the next pixel (or by the next row's filter byte).
    // Every byte is written below, so a reused buffer is not cleared.
    out.resize(rows * line + 1, 0);
    for (r, src) in rgba.chunks_exact(4 * w).enumerate() {
        let dst = &mut out[r * line..];
        dst[0] = 0;
        for (i, p) in src.chunks_exact(4).enumerate() {
            dst[1 + 3 * i..5 + 3 * i].copy_from_slice(p);
        }
    }
    out.truncate(rows * line);
}

/// `data` as raw deflate at `level`, ending in a sync flush (byte-aligned,
/// no final block) unless `last`, whose final block ends the stream.
fn deflate(data: &[u8], level: u32, last: bool) -> Result<Vec<u8>> {
    use flate2::{Compress, Compression, FlushCompress, Status};
    let mut c = Compress::new(Compression::new(level), false);
    let mut out = Vec::with_capacity(data.len() / 8 + 4096);
    let flush = if last {
        FlushCompress::Finish
    } else {
        FlushCompress::Sync
    };
    loop {
        if out.len() == out.capacity() {
            out.reserve(out.capacity().max(4096));
        }
        let consumed = c.total_in() as usize;
        let status = c
            .compress_vec(&data[consumed..], &mut out, flush)
            .map_err(drawing_error)?;
        let all_in = c.total_in() as usize == data.len();
        // A flush is complete when the compressor leaves output space unused.
        if (last && status == Status::StreamEnd) || (!last && all_in && out.len() < out.capacity())
        {
            return Ok(out);
        }
    }
}

/// The PNG file: signature, `IHDR` (8-bit RGB), `pHYs` (pixels per metre,
/// dpi / 0.0254), one `IDAT` per strip carrying the zlib stream, `IEND`
/// (PNG specification, 2nd ed., §5 and §11).
fn container((w, h): (u32, u32), dpi: u32, level: u32, strips: &[Strip]) -> Vec<u8> {
    let size: usize = strips.iter().map(|s| s.deflated.len() + 12).sum();
    let mut out = Vec::with_capacity(size + 100);
    out.extend_from_slice(b"\x89PNG\r\n\x1a\n");
    let mut ihdr = Vec::with_capacity(13);
    ihdr.extend_from_slice(&w.to_be_bytes());
    ihdr.extend_from_slice(&h.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]); // depth 8, RGB, deflate, adaptive filters, no interlace
    chunk(&mut out, b"IHDR", &[&ihdr]);
    let ppm = ((f64::from(dpi) / 0.0254).round() as u32).to_be_bytes();
    chunk(&mut out, b"pHYs", &[&ppm, &ppm, &[1]]);
    // zlib header (RFC 1950 §2.2): deflate with a 32 KB window, the level
    // class in FLEVEL, FCHECK making the pair a multiple of 31.
    let flevel: u16 = match level {
        0 | 1 => 0,
        2..=5 => 1,
        6 => 2,
        _ => 3,
    };
    let head = 0x7800 | (flevel << 6);
    let head = (head + (31 - head % 31) % 31).to_be_bytes();
    let mut adler = 1;
    for (i, s) in strips.iter().enumerate() {
        adler = zlib_rs::adler32::adler32_combine(adler, s.adler, s.len);
        let first: &[u8] = if i == 0 { &head } else { &[] };
        let tail = if i + 1 == strips.len() {
            adler.to_be_bytes().to_vec()
        } else {
            Vec::new()
        };
        chunk(&mut out, b"IDAT", &[first, &s.deflated, &tail]);
    }
    chunk(&mut out, b"IEND", &[]);
    out
}

/// Appends a PNG chunk: length, type, the data given in `parts`, CRC-32 of type and data.
fn chunk(out: &mut Vec<u8>, kind: &[u8; 4], parts: &[&[u8]]) {
    let len: usize = parts.iter().map(|p| p.len()).sum();
    out.extend_from_slice(&(len as u32).to_be_bytes());
    let mut crc = zlib_rs::crc32::crc32(0, kind);
    out.extend_from_slice(kind);
    for p in parts {
        crc = zlib_rs::crc32::crc32(crc, p);
        out.extend_from_slice(p);
    }
    out.extend_from_slice(&crc.to_be_bytes());
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

    fn scene() -> Scene {
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
        sc
    }

    #[test]
    fn a_png_drawn_in_strips_has_the_pixels_of_one_drawn_at_once() {
        let sc = scene();
        let whole = png_in_strips(&sc, 150, Flag::Forest, u64::MAX).unwrap();
        // 469 × 625 pixels at 150 dpi: strips of 21 rows (10,000 pixels)
        // cut through discs, lines and letters.
        let strips = png_in_strips(&sc, 150, Flag::Forest, 10_000).unwrap();
        let (a, b) = (pixels(&whole), pixels(&strips));
        assert_eq!(a.len(), b.len());
        assert_eq!(a.len(), 469 * 625 * 3);
        let diff: Vec<(usize, u8)> = a
            .iter()
            .zip(&b)
            .enumerate()
            .filter(|(_, (x, y))| x != y)
            .map(|(i, (x, y))| (i, x.abs_diff(*y)))
            .collect();
        // Antialiased edges cut by a strip's top are stepped from another
        // row, so their coverage may differ slightly; a shape drawn in the
        // wrong place, or left out of a strip it reaches, would differ by
        // far more, at every edge.
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
        assert!(a.iter().any(|&v| v < 100), "something is drawn");
    }

    #[test]
    fn the_png_is_the_same_bytes_on_any_number_of_threads() {
        let sc = scene();
        let on = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| png_in_strips(&sc, 300, Flag::Forest, 50_000).unwrap())
        };
        let one = on(1);
        assert_eq!(one, on(2));
        assert_eq!(one, on(3));
        // And it decodes (the zlib stream's checksum and every chunk's CRC
        // are checked by the decoder) to the right size.
        assert_eq!(pixels(&one).len(), 938 * 1250 * 3);
    }

    #[test]
    fn the_zlib_header_is_valid_for_every_level() {
        // RFC 1950: (CMF·256 + FLG) is a multiple of 31, CMF 0x78.
        let sc = scene();
        for (dpi, level) in [(96, 6), (600, 1)] {
            let bytes = png(&sc, dpi, Flag::Forest).unwrap();
            let idat = bytes.windows(4).position(|w| w == b"IDAT").unwrap() + 4;
            let head = u16::from_be_bytes([bytes[idat], bytes[idat + 1]]);
            assert_eq!(bytes[idat], 0x78);
            assert_eq!(head % 31, 0, "{dpi} dpi");
            let (w, h) = png_size(300, 400, dpi);
            assert_eq!(super::level(u64::from(w) * u64::from(h)), level);
        }
    }
}
