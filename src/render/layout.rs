//! Layout of the terminal reports: padding, clipping and wrapping of plain
//! text in columns, the cap on listed studies, and what every terminal
//! section is given ([`Ctx`], [`Section`]). The section renderers
//! (`text`, `multilevel`, `interpret`, `diagnostics`) import this module and
//! none of each other.
//!
//! One style for `fit`, `plan` and `sites`: a title line
//! (`pondus VERSION · what`) over a rule, facts as `Label       value`
//! lines, headings without a colon on a line of their own, the content
//! indented by two blanks, lists as `  - item` with wrapped lines hanging
//! under the item's first word, every line at most [`Ctx::width`]
//! characters (tables fit it too: number columns as wide as their cells, a
//! free-text last column wrapped under itself or moved below its row, label
//! and term columns giving way with a note), and
//! the cautions once, at the end.

use crate::result::FitReport;
use std::fmt::Write as _;

/// Studies listed one by one in the terminal at most; above this, `--table` has them.
pub const MAX_LISTED_STUDIES: usize = 40;

/// The width of the terminal reports when nothing else is asked: 100
/// characters (the binary passes the terminal's width when it is narrower).
pub const TEXT_WIDTH: usize = 100;

/// The narrowest width the reports are laid out for; a narrower terminal
/// gets this width (and wraps the lines itself).
pub const MIN_TEXT_WIDTH: usize = 60;

/// What every terminal section is given besides the report.
#[derive(Debug, Clone)]
pub struct Ctx {
    /// The confidence level as a percentage, e.g. `95%`.
    pub level_pct: String,
    /// Whether the model has moderators.
    pub has_mods: bool,
    /// Line width in characters for wrapped text.
    pub width: usize,
    /// Whether the report is part of another one (the second stage of
    /// `sites`): no title line and no cautions, which the outer report
    /// prints once.
    pub embedded: bool,
}

impl Ctx {
    /// The context of `r`'s terminal report at `width` characters
    /// (at least [`MIN_TEXT_WIDTH`]).
    pub fn of(r: &FitReport, width: usize) -> Ctx {
        Ctx {
            level_pct: format!("{}%", (r.model.level * 100.0 * 1e6).round() / 1e6),
            has_mods: !r.model.moderators.is_empty(),
            width: width.max(MIN_TEXT_WIDTH),
            embedded: false,
        }
    }

    /// `text` as a paragraph indented by two blanks, wrapped at the width.
    pub fn para(&self, text: &str) -> String {
        wrap(text, "  ", self.width - 2)
    }
}

/// The title line and its rule: `pondus VERSION · what`.
pub fn title(o: &mut String, what: &str, width: usize) {
    let _ = writeln!(o, "pondus {} · {what}", env!("CARGO_PKG_VERSION"));
    let _ = writeln!(o, "{}", "─".repeat(width.clamp(MIN_TEXT_WIDTH, 72)));
}

/// A fact line: the label (at most 10 characters, so that at least two
/// blanks follow it) in a column of 12 and the value wrapped under itself
/// at `width`.
pub fn fact(o: &mut String, label: &str, value: &str, width: usize) {
    debug_assert!(label.chars().count() <= 10, "fact label too long: {label}");
    let w = wrap(value, &" ".repeat(12), width.saturating_sub(12).max(20));
    let first = w.trim_start();
    let _ = write!(o, "{}{first}", pad(label, 12));
    if w.is_empty() {
        o.push('\n');
    }
}

/// A heading on its own line (no colon; the content follows indented).
pub fn heading(o: &mut String, text: &str) {
    let _ = writeln!(o, "{text}");
}

/// A list under a heading: each item as `  - item`, wrapped at `width`
/// with its further lines under the item's first word; then a blank line.
/// Nothing when `items` is empty.
pub fn bullets(o: &mut String, head: &str, items: &[String], width: usize) {
    if items.is_empty() {
        return;
    }
    heading(o, head);
    for it in items {
        let w = wrap(it, "    ", width.saturating_sub(4).max(20));
        let _ = write!(o, "  - {}", w.trim_start());
    }
    let _ = writeln!(o);
}

/// One line of a list under a heading: `text` indented by two blanks and
/// wrapped at `width`, its further lines indented by four. The text's
/// fields (parts separated by two blanks, such as "CI [0.1, 0.2]  SE 0.04")
/// are kept whole where they fit a line, so a line breaks between fields;
/// a field wider than a line is wrapped at its words.
pub fn item(o: &mut String, text: &str, width: usize) {
    let room = width.saturating_sub(4).max(20);
    let mut line = String::new();
    let mut lines: Vec<String> = Vec::new();
    for field in text.split("  ").filter(|f| !f.trim().is_empty()) {
        let field = field.trim();
        if !line.is_empty() && self::width(&line) + 2 + self::width(field) <= room {
            line.push_str("  ");
            line.push_str(field);
            continue;
        }
        if !line.is_empty() {
            lines.push(std::mem::take(&mut line));
        }
        if self::width(field) <= room {
            line = field.to_string();
        } else {
            let mut parts: Vec<String> = wrap(field, "", room).lines().map(String::from).collect();
            line = parts.pop().unwrap_or_default();
            lines.extend(parts);
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    for (i, l) in lines.iter().enumerate() {
        let _ = writeln!(o, "{}{l}", if i == 0 { "  " } else { "    " });
    }
}

/// Every line of `o` without trailing blanks (padding of a last column).
pub fn trim_lines(o: &str) -> String {
    let mut out = String::with_capacity(o.len());
    for line in o.lines() {
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}

/// One section of the terminal report: appends its lines (nothing when the
/// report does not carry it).
pub type Section = fn(&FitReport, &Ctx, &mut String);

/// Width of `s` in characters.
pub(super) fn width(s: &str) -> usize {
    s.chars().count()
}

/// The width of a column of cells of these widths: the widest, kept
/// within `min..=max` (`min` when there is no cell).
pub(super) fn column_width(widths: impl Iterator<Item = usize>, min: usize, max: usize) -> usize {
    widths.max().unwrap_or(min).clamp(min, max)
}

/// `s` followed by blanks up to `w` characters (unchanged when wider).
pub(super) fn pad(s: &str, w: usize) -> String {
    let n = width(s);
    if n >= w {
        s.to_string()
    } else {
        format!("{s}{}", " ".repeat(w - n))
    }
}

/// Like [`pad`], but a cell of `w` characters or more gets one blank after
/// it, so that it stays apart from the next one.
pub(super) fn pad_apart(s: &str, w: usize) -> String {
    let n = width(s);
    if n >= w {
        format!("{s} ")
    } else {
        format!("{s}{}", " ".repeat(w - n))
    }
}

/// Blanks up to `w` characters followed by `s` (unchanged when wider).
pub(super) fn lpad(s: &str, w: usize) -> String {
    let n = width(s);
    if n >= w {
        s.to_string()
    } else {
        format!("{}{s}", " ".repeat(w - n))
    }
}

/// `s` shortened to `w` characters by an ellipsis in the middle, keeping
/// both ends ("Laboratory fo…Dunmarrow 2019"): the end of a label (a year,
/// a site, a letter) often tells rows apart. The start keeps the larger
/// half. The figures shorten labels the same way.
pub fn clip(s: &str, w: usize) -> String {
    let n = width(s);
    if n <= w {
        return s.to_string();
    }
    if w < 4 {
        let t: String = s.chars().take(w.saturating_sub(1)).collect();
        return format!("{t}…");
    }
    let keep = w - 1;
    let tail = keep / 2;
    let head = keep - tail;
    let start: String = s.chars().take(head).collect();
    let end: String = s.chars().skip(n - tail).collect();
    format!("{}…{}", start.trim_end(), end.trim_start())
}

/// Whether a word is a lone relation or operator sign (`<`, `=`, `+`, …),
/// which stays on the line of the words on both sides of it when text is
/// wrapped ("p < 0.0001" is never split after "<").
fn is_operator(word: &str) -> bool {
    matches!(
        word,
        "<" | ">" | "=" | "≤" | "≥" | "≈" | "+" | "-" | "−" | "×" | "·" | "/" | "±"
    )
}

/// A word longer than `width` cut into pieces of at most `width`
/// characters: after the last path separator (`/` or `\\`) that fits, so a
/// long file path breaks between its folders, or else at `width` itself.
fn split_long(word: &str, width: usize) -> Vec<String> {
    let width = width.max(1);
    let mut rest: Vec<char> = word.chars().collect();
    let mut pieces = Vec::new();
    while rest.len() > width {
        let cut = rest[..width]
            .iter()
            .rposition(|&c| c == '/' || c == '\\')
            .map_or(width, |i| i + 1);
        pieces.push(rest.drain(..cut).collect());
    }
    pieces.push(rest.into_iter().collect());
    pieces
}

/// `text` wrapped at word boundaries into lines of at most `width`
/// characters, each line starting with `indent` and ending in a newline.
/// A word longer than a line (a long file path) is cut by [`split_long`].
/// A lone operator sign is kept together with the words on both sides of it.
pub(super) fn wrap(text: &str, indent: &str, width: usize) -> String {
    let mut units: Vec<String> = Vec::new();
    let mut glue = false;
    for word in text.split_whitespace() {
        let op = is_operator(word);
        match units.last_mut() {
            Some(last) if glue || op => {
                last.push(' ');
                last.push_str(word);
            }
            _ => units.push(word.to_string()),
        }
        glue = op;
    }
    let units: Vec<String> = units
        .iter()
        .flat_map(|u| {
            // A unit glued around a relation sign ("p < 0.0001") stays whole.
            if u.chars().count() > width && !u.contains(' ') {
                split_long(u, width)
            } else {
                vec![u.clone()]
            }
        })
        .collect();
    let mut out = String::new();
    let mut line = String::new();
    for unit in &units {
        if !line.is_empty() && line.chars().count() + 1 + unit.chars().count() > width {
            let _ = writeln!(out, "{indent}{line}");
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(unit);
    }
    if !line.is_empty() {
        let _ = writeln!(out, "{indent}{line}");
    }
    out
}

/// One row of a table whose last column is free text: `fixed` (the cells
/// before it, each followed by its two blanks) and then `text`.
/// When the text does not fit beside the row on one line, it goes on the
/// lines below, indented by four (and wrapped at `width`). Ends in a newline; no trailing blanks.
pub(super) fn row_with_text(fixed: &str, text: &str, width: usize) -> String {
    let at = self::width(fixed);
    if text.trim().is_empty() {
        return format!("{}\n", fixed.trim_end());
    }
    // Below the row when the text does not fit beside it on one line.
    if at + last_column_room(text).max(self::width(text)) > width {
        let rest = wrap(text, "    ", width.saturating_sub(4).max(20));
        return format!("{}\n{rest}", fixed.trim_end());
    }
    let lines = wrap(text, &" ".repeat(at), width - at);
    format!("{fixed}{}", lines.trim_start())
}

/// The header row of such a table: like [`row_with_text`], but a header
/// too long for the room is stacked word by word inside its column (the
/// room always holds its longest word when [`fit_columns`] laid the table
/// out), so that it stays above its column.
pub(super) fn head_with_text(fixed: &str, text: &str, width: usize) -> String {
    let at = self::width(fixed);
    if at + last_column_room(text) > width {
        return row_with_text(fixed, text, width);
    }
    let lines = wrap(text, &" ".repeat(at), width - at);
    format!("{fixed}{}", lines.trim_start())
}

/// The fewest characters a free-text last column is given before its text
/// moves to the lines below the row.
pub(super) const MIN_LAST_COLUMN: usize = 8;

/// The room a free-text cell needs at least: its longest word, and never
/// less than [`MIN_LAST_COLUMN`].
pub(super) fn last_column_room(text: &str) -> usize {
    text.split_whitespace()
        .map(self::width)
        .max()
        .unwrap_or(0)
        .max(MIN_LAST_COLUMN)
}

/// The narrowest a label column is made before term columns give way.
const MIN_LABEL_COLUMN: usize = 14;

/// How a table with a label column, optional term columns and a free-text
/// last column fits `width`: the label column's width and how many of the
/// term columns are shown. `label` is the width the labels want, `fixed`
/// the width of the other cells (with their separating blanks, the label's
/// two included), `terms` each term column's width with its two blanks.
/// The label column gives way first (down to [`MIN_LABEL_COLUMN`]
/// characters), then term columns are left out from the end.
pub(super) fn fit_columns(
    label: usize,
    fixed: usize,
    terms: &[usize],
    last: usize,
    width: usize,
) -> (usize, usize) {
    let mut shown = terms.len();
    loop {
        let used: usize = fixed + terms[..shown].iter().sum::<usize>() + last;
        let room = width.saturating_sub(used);
        if room >= label {
            return (label, shown);
        }
        let floor = MIN_LABEL_COLUMN.min(label);
        if room >= floor || shown == 0 {
            return (room.max(floor), shown);
        }
        shown -= 1;
    }
}

/// What the coefficient table shows for one coefficient: the cluster-robust
/// SE, interval, t and p under `--robust`, the model's otherwise.
pub(crate) struct Shown {
    pub(crate) se: f64,
    pub(crate) ci: crate::result::Interval,
    pub(crate) statistic: f64,
    pub(crate) p: f64,
}

impl Shown {
    pub(crate) fn of(c: &crate::result::Coefficient) -> Shown {
        match (c.robust_se, c.robust_ci, c.robust_p) {
            (Some(se), Some(ci), Some(p)) => Shown {
                se,
                ci,
                statistic: c.contrast.estimate / se,
                p,
            },
            _ => Shown {
                se: c.contrast.se,
                ci: c.contrast.ci,
                statistic: c.contrast.test.statistic,
                p: c.contrast.test.p,
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn padding_counts_characters_not_bytes() {
        assert_eq!(pad("τ²", 4), "τ²  ");
        assert_eq!(lpad("τ²", 4), "  τ²");
        assert_eq!(pad("wide", 2), "wide");
        assert_eq!(pad_apart("wide", 2), "wide ");
        assert_eq!(pad_apart("ab", 4), "ab  ");
    }

    #[test]
    fn clipping_keeps_both_ends() {
        assert_eq!(clip("abcdef", 4), "ab…f");
        assert_eq!(clip("abc", 4), "abc");
        assert_eq!(
            clip("Laboratory for Cognition Dunmarrow 2019", 20),
            "Laboratory…rrow 2019"
        );
        assert_eq!(clip("abcdef", 2), "a…");
    }

    #[test]
    fn a_path_longer_than_a_line_breaks_between_folders() {
        let path = "/work/a-checkout-with-a-long-name/pondus/data-examples/choir-participants.csv";
        let w = wrap(&format!("{path} (427 rows read)"), "  ", 40);
        for line in w.lines() {
            assert!(line.chars().count() <= 42, "{w}");
        }
        // Every piece but the last ends at a separator; nothing is lost.
        let joined: String = w.lines().map(str::trim).collect::<Vec<_>>().join(" ");
        assert!(
            joined.starts_with("/work/a-checkout-with-a-long-name/"),
            "{w}"
        );
        assert_eq!(joined.replace("/ ", "/"), format!("{path} (427 rows read)"));
        // A word without separators is cut at the width.
        assert_eq!(wrap("abcdefghij", "", 4), "abcd\nefgh\nij\n");
    }

    #[test]
    fn facts_and_bullets_wrap_at_the_width() {
        let mut o = String::new();
        fact(&mut o, "Data", "one two three four five six", 32);
        assert_eq!(o, "Data        one two three four\n            five six\n");
        let mut o = String::new();
        bullets(&mut o, "Notes", &["alpha beta gamma delta".into()], 20);
        assert_eq!(o, "Notes\n  - alpha beta gamma\n    delta\n\n");
        for line in o.lines() {
            assert!(width(line) <= 20);
        }
    }

    #[test]
    fn wrapping_keeps_words_whole_and_indents_every_line() {
        assert_eq!(wrap("one two three", "  ", 7), "  one two\n  three\n");
        assert_eq!(wrap("", "  ", 7), "");
        // A relation sign stays with both of its sides.
        assert_eq!(wrap("so p < 0.0001 here", "", 8), "so\np < 0.0001\nhere\n");
        assert_eq!(wrap("1/(v + τ²) ok", "", 6), "1/(v + τ²)\nok\n");
    }

    #[test]
    fn a_free_text_last_column_stays_beside_its_row_or_goes_below() {
        // Room enough: beside the row.
        let row = row_with_text("  lab A  0.12  ", "high leverage", 36);
        assert_eq!(row, "  lab A  0.12  high leverage\n");
        // Too long for the room: on its own lines below, wrapped at the width.
        let row = row_with_text("  lab A  0.12  ", "moves a coefficient, high leverage", 36);
        assert_eq!(
            row,
            "  lab A  0.12\n    moves a coefficient, high\n    leverage\n"
        );
        for line in row.lines() {
            assert!(width(line) <= 36);
        }
        assert_eq!(row_with_text("  a  1  ", "", 36), "  a  1\n");
        // A header stacks its words inside the column instead.
        let head = head_with_text("  study  Δ  ", "conclusion changed", 24);
        assert_eq!(head, "  study  Δ  conclusion\n            changed\n");
    }

    #[test]
    fn columns_give_way_label_first_then_terms() {
        // Everything fits (the free-text column keeps 12).
        assert_eq!(fit_columns(20, 40, &[11, 11], 12, 100), (20, 2));
        // The label shrinks to what is left.
        assert_eq!(fit_columns(28, 48, &[11, 11], 12, 100), (18, 2));
        // Then the last term column goes, then the next.
        assert_eq!(fit_columns(28, 56, &[11, 11], 12, 100), (21, 1));
        assert_eq!(fit_columns(28, 66, &[11, 11], 12, 100), (22, 0));
        // Nothing left to drop: the label keeps its floor.
        assert_eq!(fit_columns(28, 90, &[], 12, 100), (14, 0));
    }
}
