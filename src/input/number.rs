//! Parsing of numeric cells, and the decimal mark of a file: a decimal
//! comma (common in semicolon-separated files from European spreadsheets)
//! is detected when it is unambiguous, or forced with `--decimal`.

use std::borrow::Cow;

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

/// The decimal mark of a file's numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DecimalMark {
    /// `0.25` (a comma, if any, separates thousands when forced: `1,234.5`).
    Point,
    /// `0,25` (a point, if any, separates thousands: `1.234,5`).
    Comma,
}

impl DecimalMark {
    /// The mark itself.
    pub fn symbol(self) -> char {
        match self {
            DecimalMark::Point => '.',
            DecimalMark::Comma => ',',
        }
    }
}

/// How a cell's text looks as a number, for choosing the decimal mark.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Not a number in either convention (text, empty, a missing mark), or
    /// a whole number without separators (`12`): says nothing.
    Neutral,
    /// A number with a decimal point (`0.25`, `1e-3` is neutral).
    Point,
    /// A number with one comma that cannot be a thousands separator
    /// (`0,25`, `12,5`, `1,2345`, `0,250`).
    Comma,
    /// One comma followed by exactly three digits after a one- to
    /// three-digit whole part not starting with 0 (`1,234`, `12,500`):
    /// a decimal comma or a thousands separator.
    Ambiguous,
}

/// Splits an optional sign off `t`.
fn unsigned(t: &str) -> &str {
    t.strip_prefix(['+', '-']).unwrap_or(t)
}

fn digits(t: &str) -> bool {
    !t.is_empty() && t.bytes().all(|b| b.is_ascii_digit())
}

/// How `text` looks as a number ([`Shape`]).
pub fn shape(text: &str) -> Shape {
    let t = unsigned(text.trim());
    if t.is_empty() {
        return Shape::Neutral;
    }
    if let Some((a, b)) = t.split_once(',') {
        if !(a.is_empty() || digits(a)) || !digits(b) {
            return Shape::Neutral;
        }
        let thousands = (1..=3).contains(&a.len()) && !a.starts_with('0') && b.len() == 3;
        return if thousands {
            Shape::Ambiguous
        } else {
            Shape::Comma
        };
    }
    if t.contains('.') && t.parse::<f64>().is_ok_and(f64::is_finite) {
        Shape::Point
    } else {
        Shape::Neutral
    }
}

/// Whether `t` (unsigned) is digit groups of three joined by `sep` after a
/// first group of one to three digits, then optionally `dec` and digits.
fn grouped(t: &str, sep: char, dec: char) -> bool {
    let (whole, frac) = match t.split_once(dec) {
        Some((w, f)) => (w, Some(f)),
        None => (t, None),
    };
    if frac.is_some_and(|f| !f.is_empty() && !digits(f)) {
        return false;
    }
    let mut groups = whole.split(sep);
    let first = groups.next().unwrap_or("");
    let rest: Vec<&str> = groups.collect();
    !rest.is_empty()
        && digits(first)
        && first.len() <= 3
        && rest.iter().all(|g| g.len() == 3 && digits(g))
}

/// `text` rewritten for the number parser under the decimal mark `mark`:
/// with [`DecimalMark::Comma`], `0,25` becomes `0.25` and `1.234,5` becomes
/// `1234.5`; with [`DecimalMark::Point`], `1,234.5` becomes `1234.5` (a
/// comma read as a thousands separator, only in groups of three). Other
/// text is returned unchanged (and fails or passes [`parse_cell`] as
/// before).
///
/// # Examples
/// ```
/// use pondus::input::number::{normalise, DecimalMark};
/// assert_eq!(normalise("-0,25", DecimalMark::Comma), "-0.25");
/// assert_eq!(normalise("1.234,5", DecimalMark::Comma), "1234.5");
/// assert_eq!(normalise("1,234", DecimalMark::Point), "1234");
/// assert_eq!(normalise("Smith, 2019", DecimalMark::Comma), "Smith, 2019");
/// ```
pub fn normalise(text: &str, mark: DecimalMark) -> Cow<'_, str> {
    let trimmed = text.trim();
    let sign_len = trimmed.len() - unsigned(trimmed).len();
    let (sign, t) = trimmed.split_at(sign_len);
    match mark {
        DecimalMark::Comma => {
            if grouped(t, '.', ',') {
                Cow::Owned(format!("{sign}{}", t.replace('.', "").replace(',', ".")))
            } else if matches!(shape(text), Shape::Comma | Shape::Ambiguous) {
                Cow::Owned(format!("{sign}{}", t.replace(',', ".")))
            } else {
                Cow::Borrowed(text)
            }
        }
        DecimalMark::Point => {
            if grouped(t, ',', '.') {
                Cow::Owned(format!("{sign}{}", t.replace(',', "")))
            } else {
                Cow::Borrowed(text)
            }
        }
    }
}

/// A cell that decided (or confused) the choice of the decimal mark, for
/// notes and messages.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Example {
    /// The cell's text.
    pub text: String,
    /// Its line in the file (1-based).
    pub line: u64,
    /// Its column's header.
    pub column: String,
}

impl std::fmt::Display for Example {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "'{}' (line {}, column '{}')",
            self.text, self.line, self.column
        )
    }
}

/// Tallies the shapes of a file's numeric-looking cells and decides the
/// decimal mark: a comma when some cell has an unambiguous decimal comma
/// and none has a decimal point; a point when no cell has a comma. Both
/// kinds, or only ambiguous commas (`1,234`), cannot be decided.
#[derive(Debug, Clone, Default)]
pub struct Detector {
    /// Cells with an unambiguous decimal comma, and the first of them.
    pub commas: (u64, Option<Example>),
    /// Cells with a comma that may separate thousands, and the first.
    pub ambiguous: (u64, Option<Example>),
    /// Cells with a decimal point, and the first.
    pub points: (u64, Option<Example>),
}

/// What [`Detector::decide`] found.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Decision {
    /// Read numbers with this mark; `detected` says whether the file
    /// showed it (a comma), rather than the default point.
    Mark(DecimalMark),
    /// The file has decimal commas and decimal points.
    Mixed {
        /// The first cell with a comma.
        comma: Example,
        /// The first cell with a point.
        point: Example,
    },
    /// Every comma could be a thousands separator.
    Ambiguous(Example),
}

impl Detector {
    /// Counts one cell.
    pub fn see(&mut self, text: &str, line: u64, column: &str) {
        let slot = match shape(text) {
            Shape::Neutral => return,
            Shape::Comma => &mut self.commas,
            Shape::Ambiguous => &mut self.ambiguous,
            Shape::Point => &mut self.points,
        };
        slot.0 += 1;
        if slot.1.is_none() {
            slot.1 = Some(Example {
                text: text.trim().to_string(),
                line,
                column: column.to_string(),
            });
        }
    }

    /// The decision over every cell seen.
    pub fn decide(&self) -> Decision {
        let comma = self.commas.1.clone().or_else(|| self.ambiguous.1.clone());
        match (comma, &self.points.1) {
            (None, _) => Decision::Mark(DecimalMark::Point),
            (Some(comma), Some(point)) => Decision::Mixed {
                comma,
                point: point.clone(),
            },
            (Some(a), None) if self.commas.0 == 0 => Decision::Ambiguous(a),
            (Some(_), None) => Decision::Mark(DecimalMark::Comma),
        }
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

    #[test]
    fn shapes_of_decimal_commas_and_thousands() {
        assert_eq!(shape("0,25"), Shape::Comma);
        assert_eq!(shape("-12,5"), Shape::Comma);
        assert_eq!(shape("0,250"), Shape::Comma);
        assert_eq!(shape(",5"), Shape::Comma);
        assert_eq!(shape("1,234"), Shape::Ambiguous);
        assert_eq!(shape("12,500"), Shape::Ambiguous);
        assert_eq!(shape("1234,5"), Shape::Comma);
        assert_eq!(shape("0.25"), Shape::Point);
        assert_eq!(shape("12"), Shape::Neutral);
        assert_eq!(shape("Smith, J."), Shape::Neutral);
        assert_eq!(shape("1,2,3"), Shape::Neutral);
        assert_eq!(shape("NA"), Shape::Neutral);
    }

    #[test]
    fn normalising_under_each_mark() {
        assert_eq!(normalise("0,25", DecimalMark::Comma), "0.25");
        assert_eq!(normalise(" 1.234.567,5 ", DecimalMark::Comma), "1234567.5");
        assert_eq!(normalise("12", DecimalMark::Comma), "12");
        assert_eq!(normalise("1,234,567.5", DecimalMark::Point), "1234567.5");
        assert_eq!(normalise("0,25", DecimalMark::Point), "0,25");
        assert_eq!(
            parse_cell(&normalise("-0,5", DecimalMark::Comma)),
            Cell::Value(-0.5)
        );
    }

    #[test]
    fn deciding_the_mark() {
        let mut d = Detector::default();
        d.see("12", 2, "n");
        assert_eq!(d.decide(), Decision::Mark(DecimalMark::Point));
        d.see("1,234", 3, "n");
        assert!(matches!(d.decide(), Decision::Ambiguous(e) if e.line == 3));
        d.see("0,25", 4, "yi");
        assert_eq!(d.decide(), Decision::Mark(DecimalMark::Comma));
        d.see("0.5", 5, "vi");
        assert!(matches!(d.decide(), Decision::Mixed { point, .. } if point.line == 5));
    }
}
