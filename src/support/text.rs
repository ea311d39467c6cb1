//! Text from data files made safe for where it is shown: a terminal
//! (control characters and bidirectional overrides replaced), XML and HTML
//! (characters XML 1.0 does not allow replaced) and a spreadsheet cell
//! (a leading formula character neutralised).

use std::borrow::Cow;

/// What replaces a character that may not be shown: U+FFFD, the Unicode
/// replacement character.
pub const REPLACEMENT: char = '\u{FFFD}';

/// Whether `c` steers a terminal or reorders text instead of showing as
/// itself: C0 controls other than tab and line feed (BEL, ESC, carriage
/// return, ...), DEL, the C1 controls U+0080–U+009F, and the Unicode
/// bidirectional embeddings, overrides, isolates and marks (U+061C,
/// U+200E, U+200F, U+202A–U+202E, U+2066–U+2069; Unicode Standard Annex
/// #9).
pub fn is_terminal_unsafe(c: char) -> bool {
    (c.is_control() && c != '\n' && c != '\t')
        || matches!(c, '\u{061C}' | '\u{200E}' | '\u{200F}' | '\u{202A}'..='\u{202E}' | '\u{2066}'..='\u{2069}')
}

/// `s` with every [`is_terminal_unsafe`] character replaced by
/// [`REPLACEMENT`], so a label from a data file cannot move the cursor,
/// ring the bell, change colours or reverse the line it is printed on.
pub fn terminal(s: &str) -> Cow<'_, str> {
    replace_if(s, is_terminal_unsafe)
}

/// Whether XML 1.0 allows `c` in a document (the `Char` production of the
/// XML 1.0 recommendation, §2.2: tab, line feed, carriage return,
/// U+0020–U+D7FF, U+E000–U+FFFD, U+10000–U+10FFFF). SVG and the HTML
/// pages use the same rule.
pub fn is_xml_char(c: char) -> bool {
    matches!(c, '\t' | '\n' | '\r' | '\u{20}'..='\u{D7FF}' | '\u{E000}'..='\u{FFFD}' | '\u{10000}'..)
}

/// `s` with every character XML does not allow ([`is_xml_char`]), and every
/// other control character, replaced by [`REPLACEMENT`]. Markup characters
/// (`<`, `&`, quotes) are left to the writer's own escaping.
pub fn xml(s: &str) -> Cow<'_, str> {
    replace_if(s, |c| !is_xml_char(c) || is_terminal_unsafe(c))
}

/// A text cell for a CSV file that a spreadsheet may open: a value starting
/// with `=`, `+`, `-`, `@`, a tab or a carriage return would be read as a
/// formula, so it gets a leading apostrophe (the advice of the OWASP page
/// "CSV Injection", cited from memory). Numbers are not passed here.
pub fn spreadsheet_cell(s: &str) -> Cow<'_, str> {
    match s.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') => Cow::Owned(format!("'{s}")),
        _ => Cow::Borrowed(s),
    }
}

fn replace_if(s: &str, bad: impl Fn(char) -> bool) -> Cow<'_, str> {
    if s.chars().any(&bad) {
        Cow::Owned(
            s.chars()
                .map(|c| if bad(c) { REPLACEMENT } else { c })
                .collect(),
        )
    } else {
        Cow::Borrowed(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn terminal_text_loses_escapes_bells_and_overrides() {
        assert_eq!(terminal("plain\tline\n"), "plain\tline\n");
        assert_eq!(terminal("a\x1b[31mb\x07"), "a\u{FFFD}[31mb\u{FFFD}");
        assert_eq!(
            terminal("x\u{202E}y\u{2066}z\r"),
            "x\u{FFFD}y\u{FFFD}z\u{FFFD}"
        );
        assert_eq!(terminal("\u{9b}2J"), "\u{FFFD}2J");
        assert!(matches!(terminal("Müller (2019) – ü"), Cow::Borrowed(_)));
    }

    #[test]
    fn xml_text_keeps_only_allowed_characters() {
        assert_eq!(xml("a\x0bb\x1bc\u{FFFE}d"), "a\u{FFFD}b\u{FFFD}c\u{FFFD}d");
        assert_eq!(xml("<&>\"'"), "<&>\"'");
        assert_eq!(xml("\u{1F600}\u{E000}"), "\u{1F600}\u{E000}");
    }

    #[test]
    fn formula_starts_are_neutralised() {
        for s in ["=1+1", "+1", "-2", "@SUM(A1)", "\tx", "\rx"] {
            assert_eq!(spreadsheet_cell(s), format!("'{s}"));
        }
        assert_eq!(spreadsheet_cell("Smith 2019"), "Smith 2019");
        assert_eq!(spreadsheet_cell(""), "");
    }
}
