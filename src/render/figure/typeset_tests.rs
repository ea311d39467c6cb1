//! Tests that a figure's text is typeset by the font's own metrics in every
//! format: one label holding letters with and without descenders, the
//! period, comma and colon, the en dash, the minus sign and digits is drawn,
//! rasterised (SVG and PNG by resvg, PDF by Poppler's `pdftoppm`, Debian's
//! poppler-utils), and its pixels checked: every glyph without a descender
//! ends on one baseline, and every glyph's ink starts where the pen position
//! plus the glyph's left side bearing (from the font's `hmtx`/`glyf`) puts
//! it, so the gaps within a word are the font's own.
//!
//! Without `pdftoppm` the PDF part says so on stderr and passes, so that
//! `cargo test` works on a fresh machine; with `PONDUS_REQUIRE_PDFTOPPM=1`
//! (set by `.ci/run`, which installs poppler-utils) it fails instead.

use super::export::{self, CSS_DPI};
use super::font::{self, FONT};
use super::scene::{Align, Rgb, Scene};
use super::svg;

/// The label: x-height letters, descenders, punctuation, dashes, digits.
const LABEL: &str = "axvwz yq.,:–−10";
/// Glyphs that end on the baseline (no descender; dashes float mid-height).
const ON_BASELINE: &str = "axvwz.:10";
const DPI: u32 = 150;
/// Scene size giving an em of 40 pixels at 150 dpi (gaps of a few pixels
/// between neighbouring glyphs, so they separate cleanly).
const SIZE: f64 = 40.0 * 1.24 * 96.0 / 150.0;
const ORIGIN: (f64, f64) = (20.0, 60.0);

struct Raster {
    w: usize,
    h: usize,
    /// Darkness per pixel, 0 (white) to 255 (black).
    ink: Vec<u8>,
}

fn decode(png_bytes: &[u8]) -> Raster {
    let decoder = png::Decoder::new(std::io::Cursor::new(png_bytes));
    let mut reader = decoder.read_info().expect("a PNG header");
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).expect("the PNG decodes");
    let step = match info.color_type {
        png::ColorType::Rgb => 3,
        png::ColorType::Rgba => 4,
        png::ColorType::Grayscale => 1,
        other => panic!("unexpected colour type {other:?}"),
    };
    let ink = buf[..info.buffer_size()]
        .chunks_exact(step)
        .map(|p| 255 - p.iter().take(3).copied().min().unwrap_or(255))
        .collect();
    Raster {
        w: info.width as usize,
        h: info.height as usize,
        ink,
    }
}

fn scene() -> Scene {
    let mut sc = Scene::new(420, 100);
    sc.text(ORIGIN, LABEL, SIZE, Rgb(0, 0, 0), Align::Left);
    sc
}

/// Each glyph with ink: its ink columns and its lowest inked row.
#[derive(Debug)]
struct Blob {
    left: usize,
    bottom: usize,
}

/// Splits the picture into blobs at columns without ink (darker than half).
fn blobs(r: &Raster) -> Vec<Blob> {
    let dark = |x: usize, y: usize| r.ink[y * r.w + x] >= 128;
    let mut out = Vec::new();
    let mut x = 0;
    while x < r.w {
        if (0..r.h).any(|y| dark(x, y)) {
            let left = x;
            let mut bottom = 0;
            while x < r.w && (0..r.h).any(|y| dark(x, y)) {
                bottom = bottom.max((0..r.h).rev().find(|&y| dark(x, y)).unwrap());
                x += 1;
            }
            out.push(Blob { left, bottom });
        }
        x += 1;
    }
    out
}

/// Where each inked glyph's left edge should be, in pixels at `DPI`: the
/// text starts at `ORIGIN.0`, each glyph at the sum of the advances before
/// it plus its own left side bearing (`xMin` of its outline).
fn expected_lefts() -> Vec<(char, f64)> {
    let face = ttf_parser::Face::parse(FONT, 0).unwrap();
    let px = font::em(SIZE) / f64::from(face.units_per_em()) * f64::from(DPI) / CSS_DPI;
    let mut pen = 0.0;
    let mut out = Vec::new();
    for c in LABEL.chars() {
        let g = face.glyph_index(c).unwrap();
        if let Some(b) = face.glyph_bounding_box(g) {
            out.push((
                c,
                ORIGIN.0 * f64::from(DPI) / CSS_DPI + (pen + f64::from(b.x_min)) * px,
            ));
        }
        pen += f64::from(face.glyph_hor_advance(g).unwrap());
    }
    out
}

fn check(format: &str, r: &Raster) {
    let found = blobs(r);
    let want = expected_lefts();
    assert_eq!(
        found.len(),
        want.len(),
        "{format}: one blob of ink per glyph ({:?})",
        found
    );
    let mut baseline = Vec::new();
    for (b, (c, x)) in found.iter().zip(&want) {
        // Ink starts within a pixel of where the metrics put it (antialiased
        // edges lighter than half are not counted, hence up to one more).
        let off = b.left as f64 - x;
        assert!(
            (-1.0..=1.5).contains(&off),
            "{format}: '{c}' starts at {} px, the font's metrics say {x:.1}",
            b.left
        );
        if ON_BASELINE.contains(*c) {
            baseline.push((*c, b.bottom));
        }
    }
    let lo = baseline.iter().map(|b| b.1).min().unwrap();
    let hi = baseline.iter().map(|b| b.1).max().unwrap();
    assert!(
        hi - lo <= 1,
        "{format}: glyphs without descenders end on rows {baseline:?}, not one baseline"
    );
}

#[test]
fn label_text_is_typeset_by_the_font_metrics_in_svg_png_and_pdf() {
    let sc = scene();
    let svg_text = svg::standalone(&sc).unwrap();
    // SVG and PNG: the same SVG rasterised by resvg (the PNG path).
    let png_bytes = export::png(&sc, DPI, crate::support::flag::Flag::Forest).unwrap();
    let r = decode(&png_bytes);
    assert_eq!((r.w, r.h), (656, 156), "420 × 100 CSS pixels at 150 dpi");
    check("PNG", &r);
    // PDF: rasterised by Poppler.
    let pdf = export::pdf(&svg_text).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let pdf_path = dir.path().join("label.pdf");
    std::fs::write(&pdf_path, &pdf).unwrap();
    let out = dir.path().join("page");
    let run = std::process::Command::new("pdftoppm")
        .args(["-r", "150", "-png", "-singlefile"])
        .arg(&pdf_path)
        .arg(&out)
        .status();
    match run {
        Ok(status) => {
            assert!(status.success(), "pdftoppm failed on the PDF");
            let page = std::fs::read(dir.path().join("page.png")).unwrap();
            let r = decode(&page);
            assert!(
                r.w.abs_diff(656) <= 1 && r.h.abs_diff(156) <= 1,
                "the PDF page is 420 × 100 CSS pixels (315 × 75 points): {} × {} at 150 dpi",
                r.w,
                r.h
            );
            check("PDF", &r);
        }
        Err(_) if std::env::var_os("PONDUS_REQUIRE_PDFTOPPM").is_some() => {
            panic!("PONDUS_REQUIRE_PDFTOPPM is set but pdftoppm was not found (install Debian's poppler-utils)")
        }
        Err(_) => eprintln!(
            "typeset test: PDF part SKIPPED, no pdftoppm on this machine (CI installs \
             poppler-utils and sets PONDUS_REQUIRE_PDFTOPPM=1)"
        ),
    }
}
