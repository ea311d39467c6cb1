//! Parsing of numeric cells.

/// What a cell holds once parsed as a number.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell {
    /// Empty, or a conventional missing-value mark (see [`is_missing`]).
    Missing,
    /// A finite number.
    Value(f64),
    /// Text that is not a finite number.
    Invalid,
}

/// Marks that mean "no value" in exported spreadsheets: the empty cell,
/// `NA`, `N/A`, `.` and `-` (case-insensitive, surrounding blanks ignored).
pub fn is_missing(text: &str) -> bool {
    let t = text.trim();
    t.is_empty()
        || t.eq_ignore_ascii_case("na")
        || t.eq_ignore_ascii_case("n/a")
        || t == "."
        || t == "-"
}

/// Parses a cell as a finite number.
///
/// Accepts the forms Rust's `f64` parser accepts (`3`, `-0.25`, `1e-3`, `+2`),
/// after trimming blanks. `inf`, `nan` and the like are [`Cell::Invalid`]: a
/// non-finite value is never passed on to the analysis.
///
/// # Examples
/// ```
/// use pondus::input::number::{parse_cell, Cell};
/// assert_eq!(parse_cell(" 0.25 "), Cell::Value(0.25));
/// assert_eq!(parse_cell("NA"), Cell::Missing);
/// assert_eq!(parse_cell("1,5"), Cell::Invalid);
/// assert_eq!(parse_cell("inf"), Cell::Invalid);
/// ```
pub fn parse_cell(text: &str) -> Cell {
    if is_missing(text) {
        return Cell::Missing;
    }
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() => Cell::Value(x),
        _ => Cell::Invalid,
    }
}

/// A hint for a cell that did not parse as a number.
pub fn invalid_hint(text: &str) -> &'static str {
    let t = text.trim();
    if t.contains(',') {
        "not a number; write numbers with a dot as the decimal mark and no thousands separators"
    } else if t.parse::<f64>().is_ok() {
        "not a finite number"
    } else {
        "not a number"
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn missing_marks() {
        for t in ["", "  ", "NA", "na", "N/A", ".", "-"] {
            assert_eq!(parse_cell(t), Cell::Missing, "{t:?}");
        }
    }

    #[test]
    fn numbers_and_non_numbers() {
        assert_eq!(parse_cell("1e-3"), Cell::Value(0.001));
        assert_eq!(parse_cell("+2"), Cell::Value(2.0));
        assert_eq!(parse_cell("-0"), Cell::Value(0.0));
        for t in ["abc", "NaN", "infinity", "-inf", "1,234", "1.2.3", "0x10"] {
            assert_eq!(parse_cell(t), Cell::Invalid, "{t:?}");
        }
        assert!(invalid_hint("1,5").contains("decimal mark"));
        assert_eq!(invalid_hint("nan"), "not a finite number");
    }
}
