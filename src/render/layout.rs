//! Layout of the terminal report: padding, clipping and wrapping of plain
//! text in columns, the cap on listed studies, and what every terminal
//! section is given ([`Ctx`], [`Section`]). The section renderers
//! (`text`, `multilevel`, `interpret`, `diagnostics`) import this module and
//! none of each other.

use crate::result::FitReport;
use std::fmt::Write as _;

/// Studies listed one by one in the terminal at most; above this, `--table` has them.
pub const MAX_LISTED_STUDIES: usize = 40;

/// What every terminal section is given besides the report.
#[derive(Debug, Clone)]
pub struct Ctx {
    /// The confidence level as a percentage, e.g. `95%`.
    pub level_pct: String,
    /// Whether the model has moderators.
    pub has_mods: bool,
}

impl Ctx {
    /// The context of `r`'s terminal report.
    pub fn of(r: &FitReport) -> Ctx {
        Ctx {
            level_pct: format!("{}%", (r.model.level * 100.0 * 1e6).round() / 1e6),
            has_mods: !r.model.moderators.is_empty(),
        }
    }
}

/// One section of the terminal report: appends its lines (nothing when the
/// report does not carry it).
pub type Section = fn(&FitReport, &Ctx, &mut String);

/// Width of `s` in characters.
pub(super) fn width(s: &str) -> usize {
    s.chars().count()
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

/// `s` shortened to `w` characters, the last one an ellipsis.
pub(super) fn clip(s: &str, w: usize) -> String {
    if width(s) <= w {
        s.to_string()
    } else {
        let t: String = s.chars().take(w.saturating_sub(1)).collect();
        format!("{t}…")
    }
}

/// `text` wrapped at word boundaries into lines of at most `width`
/// characters, each line starting with `indent` and ending in a newline.
pub(super) fn wrap(text: &str, indent: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            let _ = writeln!(out, "{indent}{line}");
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        let _ = writeln!(out, "{indent}{line}");
    }
    out
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
    fn clipping_ends_in_an_ellipsis() {
        assert_eq!(clip("abcdef", 4), "abc…");
        assert_eq!(clip("abc", 4), "abc");
    }

    #[test]
    fn wrapping_keeps_words_whole_and_indents_every_line() {
        assert_eq!(wrap("one two three", "  ", 7), "  one two\n  three\n");
        assert_eq!(wrap("", "  ", 7), "");
    }
}
