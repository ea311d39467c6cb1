//! The typed values of a moderator over all table rows, compact: one
//! number a row for a numeric moderator, one small code a row for a
//! categorical one (each label stored once).

use crate::support::rows::Rows;
use std::collections::HashMap;

/// A numeric moderator's values, one per table row, 8 bytes each: a
/// missing value is kept as NaN, which no value read can be (cells are
/// parsed with [`parse_cell`](crate::input::number::parse_cell), which refuses non-finite numbers).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Numbers(pub(super) Vec<f64>);

impl Numbers {
    /// Per row a finite value, or NaN for a missing one (as
    /// [`crate::input::Column::take_numbers`] gives them).
    pub fn from_values(values: Vec<f64>) -> Self {
        Numbers(values)
    }

    /// The value of row `i` (None when missing).
    pub fn get(&self, i: usize) -> Option<f64> {
        let x = self.0[i];
        (!x.is_nan()).then_some(x)
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.0.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// The values of the rows `rows` (ascending, each at most once), in
    /// that order: the values themselves, not a copy, when `rows` is every
    /// row (the usual case, which then costs no pass and no memory).
    pub fn of_rows(&self, rows: &Rows) -> std::borrow::Cow<'_, [f64]> {
        if rows.len() == self.0.len() {
            std::borrow::Cow::Borrowed(&self.0)
        } else {
            std::borrow::Cow::Owned(rows.iter().map(|i| self.0[i]).collect())
        }
    }

    /// The values of the rows `rows` (ascending, each at most once), in
    /// that order, the list given up: moved, not copied, when `rows` is
    /// every row.
    pub fn into_rows(self, rows: &Rows) -> Vec<f64> {
        if rows.len() == self.0.len() {
            self.0
        } else {
            rows.iter().map(|i| self.0[i]).collect()
        }
    }
}

impl From<Vec<Option<f64>>> for Numbers {
    fn from(v: Vec<Option<f64>>) -> Self {
        Numbers(v.into_iter().map(|x| x.unwrap_or(f64::NAN)).collect())
    }
}

/// A categorical moderator's labels, one per table row: each distinct label
/// is stored once and every row holds its 4-byte code.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Categories {
    names: Vec<String>,
    codes: Vec<u32>,
}

/// The code of a missing label.
const MISSING: u32 = u32::MAX;

impl Categories {
    /// The label of row `i` (None when missing).
    pub fn get(&self, i: usize) -> Option<&str> {
        match self.codes[i] {
            MISSING => None,
            c => Some(&self.names[c as usize]),
        }
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.codes.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.codes.is_empty()
    }

    /// The distinct labels and the codes of the rows `rows` (ascending,
    /// each at most once, none with a missing label), the list given up:
    /// the codes are moved, not copied, when `rows` is every row.
    ///
    /// # Panics
    /// When one of `rows` has no label (the caller's rows are those with
    /// every value present).
    pub fn into_rows(self, rows: &Rows) -> (Vec<String>, Vec<u32>) {
        let codes = if rows.len() == self.codes.len() {
            self.codes
        } else {
            rows.iter().map(|i| self.codes[i]).collect()
        };
        assert!(!codes.contains(&MISSING), "every row asked for has a label");
        (self.names, codes)
    }
}

impl<S: AsRef<str>> FromIterator<Option<S>> for Categories {
    fn from_iter<I: IntoIterator<Item = Option<S>>>(iter: I) -> Self {
        let iter = iter.into_iter();
        let mut out = Categories {
            names: Vec::new(),
            codes: Vec::with_capacity(iter.size_hint().0),
        };
        let mut index: HashMap<String, u32> = HashMap::new();
        for label in iter {
            let code = match label {
                None => MISSING,
                Some(l) => {
                    let l = l.as_ref();
                    match index.get(l) {
                        Some(&c) => c,
                        None => {
                            // At most one label a row, so codes stay below
                            // the row count; past 2^32 - 1 labels the rows
                            // would not fit in memory anyway.
                            let c = u32::try_from(out.names.len())
                                .ok()
                                .filter(|&c| c != MISSING)
                                .expect("fewer than 2^32 - 1 distinct labels");
                            out.names.push(l.to_string());
                            index.insert(l.to_string(), c);
                            c
                        }
                    }
                }
            };
            out.codes.push(code);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn categories_come_back_as_given() {
        let c: Categories = [Some("b"), None, Some("a"), Some("b")]
            .into_iter()
            .collect();
        assert_eq!(c.len(), 4);
        let back: Vec<Option<&str>> = (0..4).map(|i| c.get(i)).collect();
        assert_eq!(back, [Some("b"), None, Some("a"), Some("b")]);
        assert_eq!(c.names.len(), 2);
    }

    #[test]
    fn rows_of_numbers_are_those_asked_for() {
        let n: Numbers = vec![Some(1.5), None, Some(-0.0), Some(4.0)].into();
        assert_eq!(&*n.of_rows(&Rows::Listed(vec![0, 2])), &[1.5, -0.0]);
        let all = n.of_rows(&Rows::Every(4));
        assert!(matches!(all, std::borrow::Cow::Borrowed(_)));
        assert_eq!(all.len(), 4);
        assert_eq!(n.of_rows(&Rows::Listed(Vec::new())).len(), 0);
        assert_eq!(n.clone().into_rows(&Rows::Listed(vec![0, 3])), [1.5, 4.0]);
        assert_eq!(n.into_rows(&Rows::Every(4)).len(), 4);
    }

    #[test]
    fn numbers_keep_missing_values() {
        let n: Numbers = vec![Some(1.5), None, Some(-0.0)].into();
        assert_eq!(
            (n.get(0), n.get(1), n.get(2)),
            (Some(1.5), None, Some(-0.0))
        );
        assert_eq!(n.len(), 3);
    }
}
