//! The legend of a bubble plot whose studies are marked by level: the
//! moderator's name, then per level its marker, a piece of its line and
//! "level (k = n)", in rows that fit the width.

use super::super::marks;
use super::super::palette::INK;
use super::super::scene::text_width;
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

/// The levels of each row of the legend, so that no row is wider than `max`.
pub(super) fn rows(split: &Split<'_>, max: f64) -> Vec<Vec<usize>> {
    let mut rows: Vec<Vec<usize>> = vec![Vec::new()];
    let mut used = text_width(&title(split), size::SMALL) + 10.0;
    for l in 0..split.levels.len() {
        let w = SAMPLE + text_width(&entry(split, l), size::SMALL);
        let row = rows.last_mut().expect("one row at least");
        if !row.is_empty() && used + w > max {
            rows.push(vec![l]);
            used = w + GAP;
        } else {
            row.push(l);
            used += w + GAP;
        }
    }
    rows
}

/// Draws the legend's `rows` from the left margin, the first centred at `y`.
pub(super) fn draw(sc: &mut Scene, split: &Split<'_>, rows: &[Vec<usize>], margin: f64, y: f64) {
    let head = title(split);
    sc.text((margin, y), head.clone(), size::SMALL, INK, Align::Left);
    let mut cy = y;
    for (r, row) in rows.iter().enumerate() {
        let mut x = margin;
        if r == 0 {
            x += text_width(&head, size::SMALL) + 10.0;
        }
        for &l in row {
            let m = marks::MARKS[l];
            marks::draw(
                sc,
                m.shape,
                (x + 7.0, cy),
                6.0,
                Some((m.color, 0.3)),
                Some((m.color, 2)),
            );
            let line = vec![(x + 20.0, cy), (x + 46.0, cy)];
            match m.dash {
                None => sc.line(line, m.color, 3),
                Some(d) => sc.dashed(line, m.color, 3, d),
            }
            let text = entry(split, l);
            sc.text(
                (x + SAMPLE, cy),
                text.clone(),
                size::SMALL,
                INK,
                Align::Left,
            );
            x += SAMPLE + text_width(&text, size::SMALL) + GAP;
        }
        cy += 20.0;
    }
}
