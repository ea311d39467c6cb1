//! The legend of a bubble plot whose studies are marked by level: the
//! moderator's name, then per level its marker, a piece of its line and
//! "level (k = n)", in rows that fit the width.

use super::super::marks;
use super::super::palette::INK;
use super::super::scene::{fit_middle, fit_text, text_width};
use super::super::{size, Align, Scene};
use super::Split;

/// Width of an entry's marker and line sample before its text.
const SAMPLE: f64 = 14.0 + 6.0 + 26.0 + 6.0;
/// Space between entries.
const GAP: f64 = 18.0;

/// The title of the legend.
fn title(split: &Split<'_>) -> String {
    format!("{}:", split.name)
}

/// The text of level `l`'s entry.
fn entry(split: &Split<'_>, l: usize) -> String {
    let (level, k) = split.levels[l];
    format!("{level} (k = {k})")
}

/// The levels of each row of the legend, so that no row is wider than
/// `max` (an entry wider than a row on its own is shortened when drawn),
/// at text scale `k`.
pub(super) fn rows(split: &Split<'_>, max: f64, k: f64) -> Vec<Vec<usize>> {
    let small = size::SMALL * k;
    let mut rows: Vec<Vec<usize>> = vec![Vec::new()];
    let mut used = text_width(&title(split), small) + 10.0 * k;
    for l in 0..split.levels.len() {
        let w = SAMPLE * k + text_width(&entry(split, l), small);
        let row = rows.last_mut().expect("one row at least");
        if !row.is_empty() && used + w > max {
            rows.push(vec![l]);
            used = w + GAP * k;
        } else {
            row.push(l);
            used += w + GAP * k;
        }
    }
    rows
}

/// Draws the legend's `rows` from `x` (the left margin), the first row
/// centred at `y`, rows 20 pixels apart, sizes times `k`; the page is
/// `max` pixels wide between its margins.
pub(super) fn draw(
    sc: &mut Scene,
    split: &Split<'_>,
    rows: &[Vec<usize>],
    (margin, y): (f64, f64),
    k: f64,
    max: f64,
) {
    let small = size::SMALL * k;
    let head = fit_text(&title(split), small, max / 2.0);
    sc.text((margin, y), head.clone(), small, INK, Align::Left);
    let mut cy = y;
    for (r, row) in rows.iter().enumerate() {
        let mut x = margin;
        if r == 0 {
            x += text_width(&head, small) + 10.0 * k;
        }
        for &l in row {
            let m = marks::MARKS[l];
            marks::draw(
                sc,
                m.shape,
                (x + 7.0 * k, cy),
                6.0 * k,
                Some((m.color, 0.3)),
                Some((m.color, 2)),
            );
            let line = vec![(x + 20.0 * k, cy), (x + 46.0 * k, cy)];
            match m.dash {
                None => sc.line(line, m.color, 3),
                Some(d) => sc.dashed(line, m.color, 3, d),
            }
            let text = fit_middle(&entry(split, l), small, margin + max - x - SAMPLE * k);
            sc.text((x + SAMPLE * k, cy), text.clone(), small, INK, Align::Left);
            x += SAMPLE * k + text_width(&text, small) + GAP * k;
        }
        cy += 20.0 * k;
    }
}
