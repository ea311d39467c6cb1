//! The bundled font: text measurement from its own metrics and a subset of
//! it holding only the glyphs a figure uses.
//!
//! Widths are the sum of the glyphs' advance widths (no kerning: every SVG
//! says `font-kerning="none"`, so browsers, the rasteriser and the PDF
//! converter place the glyphs exactly where these widths say). The subset is
//! made by the `subsetter` crate (glyph outlines, metrics, names), which
//! leaves out the character map and the OS/2 table because PDF does not need
//! them; browsers do, so [`subset`] adds a `cmap` (format 4, the characters
//! used) and copies `OS/2` before the font is written into an SVG or page.
//! Table layouts: the OpenType specification (Microsoft, "OpenType
//! specification 1.9", chapters "cmap", "OS/2" and "The OpenType font file").

use crate::error::{Error, Result};
use std::collections::{BTreeMap, BTreeSet};
use std::sync::OnceLock;

/// The bundled font (DejaVu Sans; licence in `assets/fonts/LICENSE-DejaVu.txt`).
pub static FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");

/// The family name of the bundled font (its `name` table says so too).
pub const FAMILY: &str = "DejaVu Sans";

/// The em size of a scene's text `size` (sizes are given as line heights,
/// the em is `size / 1.24`, the ratio the earlier drawing code used, so the
/// figures keep their proportions).
pub fn em(size: f64) -> f64 {
    size / 1.24
}

fn face() -> Option<&'static ttf_parser::Face<'static>> {
    static FACE: OnceLock<Option<ttf_parser::Face<'static>>> = OnceLock::new();
    FACE.get_or_init(|| ttf_parser::Face::parse(FONT, 0).ok())
        .as_ref()
}

/// Width in pixels of `text` at scene size `size`: the sum of the advance
/// widths (`hmtx`) of its glyphs, in font units, times `em / unitsPerEm`.
pub fn text_width(text: &str, size: f64) -> f64 {
    let Some(f) = face() else {
        return 0.6 * em(size) * text.chars().count() as f64;
    };
    let units: u32 = text
        .chars()
        .map(|c| {
            let g = f.glyph_index(c).unwrap_or(ttf_parser::GlyphId(0));
            u32::from(f.glyph_hor_advance(g).unwrap_or(0))
        })
        .sum();
    f64::from(units) * em(size) / f64::from(f.units_per_em())
}

/// How far below a text line's visual centre its baseline lies, in pixels:
/// half the capital height (`OS/2` `sCapHeight`, 0.729 em in DejaVu Sans),
/// so digits and capitals sit centred on the point.
pub fn baseline_offset(size: f64) -> f64 {
    let ratio = face()
        .and_then(|f| {
            f.capital_height()
                .map(|h| f64::from(h) / f64::from(f.units_per_em()))
        })
        .unwrap_or(0.729);
    0.5 * ratio * em(size)
}

fn font_error(what: &str) -> Error {
    Error::Io {
        path: "<font>".into(),
        action: "subsetting the bundled font",
        source: std::io::Error::other(what.to_string()),
    }
}

/// The bundled font cut down to the glyphs of `chars` (and the glyphs their
/// composite outlines refer to), as a TrueType file a browser accepts: the
/// `subsetter` output plus a format-4 `cmap` of `chars` and the original `OS/2`.
///
/// # Errors
/// [`Error::Io`] (action "subsetting the bundled font") when the font cannot be read or cut.
pub fn subset(chars: &BTreeSet<char>) -> Result<Vec<u8>> {
    let f = face().ok_or_else(|| font_error("the bundled font cannot be read"))?;
    let mut remapper = subsetter::GlyphRemapper::new();
    remapper.remap(0);
    let mut map: Vec<(char, u16)> = Vec::new();
    for &c in chars {
        if u32::from(c) > 0xFFFF {
            continue; // format 4 covers the Basic Multilingual Plane only
        }
        if let Some(g) = f.glyph_index(c) {
            map.push((c, g.0));
            remapper.remap(g.0);
        }
    }
    let cut = subsetter::subset(FONT, 0, &remapper).map_err(|e| font_error(&e.to_string()))?;
    let mut tables = read_tables(&cut).ok_or_else(|| font_error("the subset is malformed"))?;
    let new_ids: Vec<(u16, u16)> = map
        .iter()
        .filter_map(|&(c, g)| remapper.get(g).map(|n| (c as u16, n)))
        .collect();
    tables.insert(*b"cmap", cmap_format4(&new_ids));
    if let Some(os2) = f.raw_face().table(ttf_parser::Tag::from_bytes(b"OS/2")) {
        tables.insert(*b"OS/2", os2.to_vec());
    }
    Ok(write_font(&tables))
}

/// The tables of a TrueType file by tag.
fn read_tables(data: &[u8]) -> Option<BTreeMap<[u8; 4], Vec<u8>>> {
    let u16_at = |o: usize| Some(u16::from_be_bytes(data.get(o..o + 2)?.try_into().ok()?));
    let u32_at = |o: usize| Some(u32::from_be_bytes(data.get(o..o + 4)?.try_into().ok()?));
    let n = usize::from(u16_at(4)?);
    let mut out = BTreeMap::new();
    for i in 0..n {
        let rec = 12 + 16 * i;
        let tag: [u8; 4] = data.get(rec..rec + 4)?.try_into().ok()?;
        let off = u32_at(rec + 8)? as usize;
        let len = u32_at(rec + 12)? as usize;
        out.insert(tag, data.get(off..off + len)?.to_vec());
    }
    Some(out)
}

/// A `cmap` table with one format-4 subtable (platform 3, encoding 1),
/// one segment per character (`idDelta` maps it), and the closing 0xFFFF segment.
fn cmap_format4(pairs: &[(u16, u16)]) -> Vec<u8> {
    let mut pairs: Vec<(u16, u16)> = pairs.iter().copied().filter(|p| p.0 != 0xFFFF).collect();
    pairs.sort_unstable();
    pairs.dedup_by_key(|p| p.0);
    let seg_count = pairs.len() + 1;
    let seg_x2 = (2 * seg_count) as u16;
    let mut power = 1usize;
    let mut selector = 0u16;
    while power * 2 <= seg_count {
        power *= 2;
        selector += 1;
    }
    let search = (2 * power) as u16;
    let length = 16 + 8 * seg_count;
    let mut sub: Vec<u8> = Vec::with_capacity(length);
    let put = |v: u16, b: &mut Vec<u8>| b.extend_from_slice(&v.to_be_bytes());
    for v in [
        4,
        length as u16,
        0,
        seg_x2,
        search,
        selector,
        seg_x2 - search,
    ] {
        put(v, &mut sub);
    }
    for &(c, _) in &pairs {
        put(c, &mut sub); // endCode
    }
    put(0xFFFF, &mut sub);
    put(0, &mut sub); // reservedPad
    for &(c, _) in &pairs {
        put(c, &mut sub); // startCode
    }
    put(0xFFFF, &mut sub);
    for &(c, g) in &pairs {
        put(g.wrapping_sub(c), &mut sub); // idDelta
    }
    put(1, &mut sub);
    for _ in 0..seg_count {
        put(0, &mut sub); // idRangeOffset
    }
    let mut table = Vec::with_capacity(12 + sub.len());
    for v in [0u16, 1, 3, 1] {
        table.extend_from_slice(&v.to_be_bytes());
    }
    table.extend_from_slice(&12u32.to_be_bytes());
    table.extend_from_slice(&sub);
    table
}

/// The OpenType table checksum: the sum of the big-endian 32-bit words (zero-padded).
fn checksum(data: &[u8]) -> u32 {
    data.chunks(4).fold(0u32, |sum, c| {
        let mut w = [0u8; 4];
        w[..c.len()].copy_from_slice(c);
        sum.wrapping_add(u32::from_be_bytes(w))
    })
}

/// A TrueType file of `tables` (sorted by tag, 4-byte aligned, checksums and
/// the `head` table's `checkSumAdjustment` = 0xB1B0AFBA − the file's checksum).
fn write_font(tables: &BTreeMap<[u8; 4], Vec<u8>>) -> Vec<u8> {
    let n = tables.len() as u16;
    let mut selector = 0u16;
    while 1u32 << (selector + 1) <= u32::from(n) {
        selector += 1;
    }
    let search = (1u16 << selector) * 16;
    let mut out = Vec::new();
    out.extend_from_slice(&0x0001_0000u32.to_be_bytes());
    for v in [n, search, selector, n * 16 - search] {
        out.extend_from_slice(&v.to_be_bytes());
    }
    let mut offset = 12 + 16 * tables.len();
    let mut head_at = None;
    for (tag, data) in tables {
        let mut data = data.clone();
        if tag == b"head" && data.len() >= 12 {
            data[8..12].fill(0);
            head_at = Some(offset + 8);
        }
        out.extend_from_slice(tag);
        out.extend_from_slice(&checksum(&data).to_be_bytes());
        out.extend_from_slice(&(offset as u32).to_be_bytes());
        out.extend_from_slice(&(data.len() as u32).to_be_bytes());
        offset += data.len().div_ceil(4) * 4;
    }
    for (tag, data) in tables {
        let start = out.len();
        out.extend_from_slice(data);
        if tag == b"head" && data.len() >= 12 {
            out[start + 8..start + 12].fill(0);
        }
        while out.len() % 4 != 0 {
            out.push(0);
        }
    }
    if let Some(at) = head_at {
        let adjust = 0xB1B0_AFBAu32.wrapping_sub(checksum(&out));
        out[at..at + 4].copy_from_slice(&adjust.to_be_bytes());
    }
    out
}

/// Standard base64 (RFC 4648, with padding).
pub fn base64(bytes: &[u8]) -> String {
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

/// A CSS `@font-face` rule carrying the subset of the bundled font for `chars`.
///
/// # Errors
/// As [`subset`].
pub fn font_face_rule(chars: &BTreeSet<char>) -> Result<String> {
    Ok(format!(
        "@font-face{{font-family:\"{FAMILY}\";src:url(data:font/ttf;base64,{}) format(\"truetype\");}}",
        base64(&subset(chars)?)
    ))
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
    }

    #[test]
    fn the_subset_maps_each_character_to_the_same_outline_and_advance() {
        let chars: BTreeSet<char> = "Forest τ² −0.25 [95% CI] …".chars().collect();
        let bytes = subset(&chars).unwrap();
        assert!(bytes.len() < 40_000, "{} bytes", bytes.len());
        let full = face().unwrap();
        let cut = ttf_parser::Face::parse(&bytes, 0).expect("the subset parses");
        assert_eq!(checksum(&bytes), 0xB1B0_AFBA, "whole-file checksum");
        for c in chars {
            let (g0, g1) = (full.glyph_index(c).unwrap(), cut.glyph_index(c).unwrap());
            assert_eq!(full.glyph_hor_advance(g0), cut.glyph_hor_advance(g1), "{c}");
            assert_eq!(
                full.glyph_bounding_box(g0),
                cut.glyph_bounding_box(g1),
                "{c}"
            );
        }
        assert!(
            cut.glyph_index('Z').is_none(),
            "unused characters are left out"
        );
        assert!(cut.tables().os2.is_some() && cut.tables().hhea.number_of_metrics > 0);
    }

    #[test]
    fn widths_add_the_advances() {
        // DejaVu Sans: 'i' advances 569 units and 'W' 2025 of 2048 per em.
        let w = text_width("iW", 1.24 * 20.48);
        assert!((w - (569.0 + 2025.0) / 100.0).abs() < 1e-9, "{w}");
    }
}
