//! One requested column's cells: as texts back to back, or, for a column
//! that holds numbers and was read in pieces, as numbers parsed straight
//! from the file's bytes ([`NumberCells`]) with every cell's text still
//! given back exactly as written.

use super::cells::read_number;
use super::number::Cell;
use super::plain;
use crate::support::texts::Texts;
use std::borrow::Cow;

/// One requested column's cells.
#[derive(Debug, Clone, Default)]
pub struct Column {
    /// The header as written in the file.
    pub header: String,
    /// Its position in the header row (0-based).
    pub index: usize,
    pub(super) cells: Cells,
}

/// How a column's cells are held.
#[derive(Debug, Clone)]
pub(super) enum Cells {
    /// Every cell's text (trimmed).
    Text(Texts),
    /// Numbers, with the texts that are not their numbers' shortest form.
    Numbers(NumberCells),
}

impl Default for Cells {
    fn default() -> Self {
        Cells::Text(Texts::default())
    }
}

impl Cells {
    /// Appends a cell's text (trimmed).
    #[inline]
    pub(super) fn push(&mut self, cell: &str) {
        match self {
            Cells::Text(t) => t.push(cell),
            Cells::Numbers(n) => n.push(cell),
        }
    }

    /// The number of cells.
    fn len(&self) -> usize {
        match self {
            Cells::Text(t) => t.len(),
            Cells::Numbers(n) => n.values.len(),
        }
    }

    /// See [`Column::text`].
    fn text(&self, row: usize) -> Cow<'_, str> {
        match self {
            Cells::Text(t) => Cow::Borrowed(t.get(row)),
            Cells::Numbers(n) => n.text(row),
        }
    }

    /// Empties the list, keeping its room.
    pub(super) fn clear(&mut self) {
        match self {
            Cells::Text(t) => t.clear(),
            Cells::Numbers(n) => n.clear(),
        }
    }
}

impl Column {
    /// An empty column of texts named `header`, at `index` in the header row.
    pub(crate) fn new(header: String, index: usize) -> Self {
        Column {
            header,
            index,
            cells: Cells::default(),
        }
    }

    /// An empty column of numbers (see [`NumberCells`]).
    pub(crate) fn of_numbers(header: String, index: usize) -> Self {
        Column {
            header,
            index,
            cells: Cells::Numbers(NumberCells::default()),
        }
    }

    /// The text of the cell of data row `row` (0-based), trimmed, exactly as
    /// written in the file.
    pub fn text(&self, row: usize) -> Cow<'_, str> {
        self.cells.text(row)
    }

    /// The cell of data row `row` read as a number: what
    /// [`read_number`] reads from [`Column::text`].
    #[inline]
    pub fn number(&self, row: usize) -> Cell {
        match &self.cells {
            Cells::Text(t) => read_number(t.get(row)),
            Cells::Numbers(n) => n.number(row),
        }
    }

    /// Whether any cell is empty, for a column of texts found from where
    /// each text ends ([`Texts::any_empty`]), else cell by cell.
    pub fn any_empty(&self) -> bool {
        match &self.cells {
            Cells::Text(t) => t.any_empty(),
            Cells::Numbers(n) => (0..n.values.len()).any(|row| n.text(row).is_empty()),
        }
    }

    /// The number stored for data row `row` of a column read as numbers:
    /// Some(x) only when [`Column::number`] is `Cell::Value(x)` (None for
    /// a column of texts and for a cell without a number), without a look
    /// at any text.
    #[inline]
    pub fn value(&self, row: usize) -> Option<f64> {
        match &self.cells {
            Cells::Text(_) => None,
            Cells::Numbers(n) => Some(n.values[row]).filter(|x| !x.is_nan()),
        }
    }

    /// Appends a cell's text (to a column of texts; a column of numbers
    /// reads it as [`NumberCells::push`] does).
    pub(crate) fn push(&mut self, cell: &str) {
        self.cells.push(cell);
    }

    /// Appends the cells of a piece read the same way (texts to texts,
    /// numbers to numbers), in order.
    pub(super) fn append(&mut self, cells: &Cells) {
        match (&mut self.cells, cells) {
            (Cells::Text(t), Cells::Text(o)) => t.append(o),
            (Cells::Numbers(n), Cells::Numbers(o)) => n.append(o),
            // Not made by the readers; kept correct all the same.
            (mine, other) => (0..other.len()).for_each(|row| mine.push(&other.text(row))),
        }
    }

    /// The cells as numbers, NaN for a missing one, when the column was read
    /// as numbers and no cell is invalid (what [`Column::take_numbers`]
    /// would take); None otherwise.
    pub fn numbers(&self) -> Option<&[f64]> {
        match &self.cells {
            Cells::Numbers(n) if n.invalid == 0 => Some(&n.values),
            _ => None,
        }
    }

    /// The cells as numbers, NaN for a missing one, taken out of the column
    /// (moved, not copied; the column is left empty) when it was read as
    /// numbers and no cell is invalid ([`Column::number`] is never
    /// [`Cell::Invalid`]); None, the column untouched, otherwise.
    pub fn take_numbers(&mut self) -> Option<Vec<f64>> {
        match &mut self.cells {
            Cells::Numbers(n) if n.invalid == 0 => {
                let values = std::mem::take(&mut n.values);
                n.clear();
                Some(values)
            }
            _ => None,
        }
    }

    /// The cells' texts, the column given up (a list that becomes the
    /// studies' labels is moved, not copied).
    pub fn into_cells(self) -> Texts {
        match self.cells {
            Cells::Text(t) => t,
            cells => {
                let mut t = Texts::with_capacity(cells.len());
                (0..cells.len()).for_each(|row| t.push(&cells.text(row)));
                t
            }
        }
    }
}

/// A column of numbers read straight from the cells' bytes: one double a
/// row, and the text of each cell whose text is not the shortest form of
/// its number (`0.50`, `1e-3`, `NA`, `abc`), so that [`NumberCells::text`]
/// gives back every cell as written and [`NumberCells::number`] reads
/// every cell as [`read_number`] reads its text.
///
/// A row holds NaN when its cell is empty (text `""`, [`Cell::Missing`]) or
/// is not a finite number (its text kept; [`read_number`] then says
/// whether it is a missing mark or invalid). Any other row holds the
/// number, and its text is kept only when it is not `format!("{x}")`.
#[derive(Debug, Clone, Default)]
pub(crate) struct NumberCells {
    values: Vec<f64>,
    /// Rows whose text is kept, ascending.
    kept_rows: Vec<usize>,
    /// Their texts, in the same order.
    kept: Texts,
    /// How many of them [`read_number`] reads as [`Cell::Invalid`]
    /// (counted as they are pushed, so that [`Column::take_numbers`] need
    /// not read the kept texts again).
    invalid: usize,
}

impl NumberCells {
    /// Appends a cell (trimmed text).
    #[inline]
    pub(crate) fn push(&mut self, cell: &str) {
        if cell.is_empty() {
            self.values.push(f64::NAN);
            return;
        }
        match plain::parse(cell.as_bytes()) {
            Some(x) if is_shortest_form(cell.as_bytes()) => self.values.push(x),
            parsed => {
                let x = match parsed {
                    Some(x) => x,
                    None => match read_number(cell) {
                        Cell::Value(x) => x,
                        Cell::Missing => f64::NAN,
                        Cell::Invalid => {
                            self.invalid += 1;
                            f64::NAN
                        }
                    },
                };
                self.kept_rows.push(self.values.len());
                self.kept.push(cell);
                self.values.push(x);
            }
        }
    }

    /// Appends a number read from a cell in its shortest form (see
    /// [`plain::short_with_form`]).
    #[inline]
    pub(crate) fn push_value(&mut self, x: f64) {
        self.values.push(x);
    }

    /// Appends a number read from a cell of [`plain::short_with_form`]'s
    /// form that is not its shortest form (`1.6430`), with the cell's text
    /// (what [`NumberCells::push`] keeps for it, without reading it again).
    #[inline]
    pub(crate) fn push_kept(&mut self, x: f64, cell: &str) {
        self.kept_rows.push(self.values.len());
        self.kept.push(cell);
        self.values.push(x);
    }

    /// The kept text of row `row`, if any.
    fn kept_text(&self, row: usize) -> Option<&str> {
        self.kept_rows
            .binary_search(&row)
            .ok()
            .map(|k| self.kept.get(k))
    }

    /// See [`Column::number`].
    #[inline]
    fn number(&self, row: usize) -> Cell {
        let x = self.values[row];
        if !x.is_nan() {
            return Cell::Value(x);
        }
        match self.kept_text(row) {
            Some(t) => read_number(t),
            None => Cell::Missing,
        }
    }

    /// See [`Column::text`].
    fn text(&self, row: usize) -> Cow<'_, str> {
        if let Some(t) = self.kept_text(row) {
            return Cow::Borrowed(t);
        }
        let x = self.values[row];
        if x.is_nan() {
            Cow::Borrowed("")
        } else {
            Cow::Owned(format!("{x}"))
        }
    }

    /// Appends the rows of `other`, in order.
    pub(crate) fn append(&mut self, other: &NumberCells) {
        let shift = self.values.len();
        self.values.extend_from_slice(&other.values);
        self.kept_rows
            .extend(other.kept_rows.iter().map(|r| r + shift));
        self.kept.append(&other.kept);
        self.invalid += other.invalid;
    }

    /// Empties the column, keeping its room.
    pub(crate) fn clear(&mut self) {
        self.values.clear();
        self.kept_rows.clear();
        self.kept.clear();
        self.invalid = 0;
    }
}

/// Whether `cell`, a plain number that [`plain::parse`] read as x, is
/// exactly `format!("{x}")`: an optional `-`, an integer part without
/// leading zeros (or `0`), an optional point followed by digits of which
/// the last is not `0`, no exponent, and at most 15 significant digits.
///
/// # Formula
/// Rust's `Display` for `f64` writes the shortest digit string that reads
/// back as x, in positional notation (never an exponent). Two different
/// decimals of at most 15 significant digits never read as the same double
/// (DBL_DIG = 15: every such decimal is recovered by rounding its double to
/// 15 digits; IEEE 754-2019 §5.12.2, C11 §5.2.4.2.2, section numbers from
/// memory), so no shorter string reads as x, and no other string of the
/// same length does: the shortest form is this one's digits. Without a
/// redundant sign, leading or trailing zero, point or exponent, `Display`
/// writes them exactly as here. Checked here, not taken on trust: the unit
/// test prints 200,000 random decimals back and compares them.
#[inline]
fn is_shortest_form(cell: &[u8]) -> bool {
    let body = match cell {
        [b'-', rest @ ..] => rest,
        _ => cell,
    };
    let point = body.iter().position(|&b| b == b'.');
    let (int, frac) = match point {
        Some(p) => (&body[..p], &body[p + 1..]),
        None => (body, &body[..0]),
    };
    let digits = |s: &[u8]| s.iter().all(u8::is_ascii_digit);
    if int.is_empty() || !digits(int) || !digits(frac) {
        return false;
    }
    if int.len() > 1 && int[0] == b'0' {
        return false;
    }
    if point.is_some() && frac.last().is_none_or(|&d| d == b'0') {
        return false;
    }
    let significant = int.iter().chain(frac).skip_while(|&&d| d == b'0').count();
    significant <= 15
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::support::rng::SplitMix64;

    fn column(cells: &[&str]) -> NumberCells {
        let mut c = NumberCells::default();
        for t in cells {
            c.push(t);
        }
        c
    }

    #[test]
    fn every_cell_reads_and_prints_as_its_text() {
        // Each cell, and whether its text is kept (not its number's
        // shortest form).
        let cases = [
            ("0", false),
            ("-0", false),
            ("1", false),
            ("-1.5", false),
            ("0.25", false),
            ("0.50", true),
            ("2.0", true),
            ("-0.0", true),
            ("1e-3", true),
            ("1E5", true),
            ("+2", true),
            (".5", true),
            ("5.", true),
            ("007", true),
            ("NA", true),
            ("n/a", true),
            (".", true),
            ("-", true),
            ("abc", true),
            ("inf", true),
            ("1,5", true),
            ("123456789012345", false),
            ("1234567890123456", true),
            ("0.000000000000000000000123", false),
            ("9007199254740993", true),
            ("0.1", false),
            ("1e999", true),
            ("-12.345678901234", false),
            ("", false),
        ];
        let cells: Vec<&str> = cases.iter().map(|c| c.0).collect();
        let c = column(&cells);
        for (row, (t, kept)) in cases.iter().enumerate() {
            assert_eq!(c.text(row), *t, "text of {t:?}");
            assert_eq!(c.number(row), read_number(t), "number of {t:?}");
            assert_eq!(c.kept_text(row).is_some(), *kept, "{t:?} kept");
        }
        // The invalid cells are counted as pushed (and when appended), as
        // reading every kept text again counts them.
        let invalid = |c: &NumberCells| {
            c.kept
                .iter()
                .filter(|t| read_number(t) == Cell::Invalid)
                .count()
        };
        assert!(c.invalid > 0);
        assert_eq!(c.invalid, invalid(&c));
        let mut twice = c.clone();
        twice.append(&c);
        assert_eq!(twice.invalid, 2 * invalid(&c));
        twice.clear();
        assert_eq!(twice.invalid, 0);
    }

    #[test]
    fn random_decimals_read_bit_for_bit_and_print_as_written() {
        // Decimals of 1 to 17 digits around a point anywhere, signs and
        // trailing zeros: every one either kept as text or printed back as
        // written, and read as `str::parse` reads it.
        let mut rng = SplitMix64::new(20261204);
        let mut c = NumberCells::default();
        let mut texts = Vec::new();
        for _ in 0..200_000 {
            let n = 1 + (rng.next_u64() % 17) as usize;
            let mut t = String::new();
            if rng.next_u64() % 3 == 0 {
                t.push('-');
            }
            let digits: String = (0..n)
                .map(|_| char::from(b'0' + (rng.next_u64() % 10) as u8))
                .collect();
            let point = (rng.next_u64() % (n as u64 + 1)) as usize;
            t.push_str(&digits[..point.max(1).min(n)]);
            if point < n && point > 0 {
                t.push('.');
                t.push_str(&digits[point..]);
            }
            c.push(&t);
            texts.push(t);
        }
        let mut shortest = 0;
        for (row, t) in texts.iter().enumerate() {
            assert_eq!(c.text(row), t.as_str());
            let want = t.parse::<f64>().unwrap();
            assert_eq!(c.number(row), Cell::Value(want), "{t}");
            if let Cell::Value(x) = c.number(row) {
                assert_eq!(x.to_bits(), want.to_bits(), "{t}");
            }
            if c.kept_text(row).is_none() {
                assert_eq!(format!("{want}"), *t);
                shortest += 1;
            }
        }
        // Most are held as numbers alone.
        assert!(shortest > 100_000, "{shortest}");
    }

    #[test]
    fn pieces_append_in_order() {
        let (a, b) = (["1", "x", "2.50"], ["", "y", "3"]);
        let mut whole = column(&a);
        whole.append(&column(&b));
        for (row, t) in a.iter().chain(&b).enumerate() {
            assert_eq!(whole.text(row), *t);
        }
        let mut col = Column::of_numbers("h".into(), 0);
        col.push("0.5");
        col.push("NA");
        assert_eq!(col.into_cells().to_vec(), ["0.5", "NA"]);
    }
}
