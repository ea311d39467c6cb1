//! The typed values of a moderator over all table rows, compact: one
//! number a row for a numeric moderator, one small code a row for a
//! categorical one (each label stored once).

use crate::support::pieces;
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
    /// Whether no row's label is missing.
    pub fn all_present(&self) -> bool {
        self.codes.iter().fold(true, |all, &c| all & (c != MISSING))
    }

    /// The label of row `i` (None when missing).
    pub fn get(&self, i: usize) -> Option<&str> {
        match self.codes[i] {
            MISSING => None,
            c => Some(&self.names[c as usize]),
        }
    }

    /// The code of row `i`'s label (its index among the distinct labels,
    /// in order of first appearance; None when missing).
    pub fn code(&self, i: usize) -> Option<usize> {
        match self.codes[i] {
            MISSING => None,
            c => Some(c as usize),
        }
    }

    /// Per code (see [`Categories::code`]), the position of its label in
    /// `levels` (None when it is not one of them): each distinct label
    /// looked up once, so rows are matched to levels by their codes
    /// instead of by comparing or hashing their texts.
    pub fn positions(&self, levels: &[String]) -> Vec<Option<usize>> {
        self.names
            .iter()
            .map(|n| levels.iter().position(|l| l == n))
            .collect()
    }

    /// The labels of the rows `rows`, each once with its number of rows
    /// (missing labels left out), in order of first appearance in the
    /// table: counted by code, one sweep over the codes.
    pub fn tally(&self, rows: &Rows) -> Vec<(&str, usize)> {
        let mut counts = vec![0usize; self.names.len()];
        for i in rows.iter() {
            match self.codes[i] {
                MISSING => {}
                c => counts[c as usize] += 1,
            }
        }
        self.names
            .iter()
            .zip(counts)
            .filter(|(_, n)| *n > 0)
            .map(|(name, n)| (name.as_str(), n))
            .collect()
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

/// Codes labels in order of first appearance: looked up by comparing with
/// each label seen while there are few (a categorical moderator usually has
/// a handful of levels, and comparing short texts costs less than hashing
/// one), through a hash map from the seventeenth on.
#[derive(Default)]
struct Coder {
    names: Vec<String>,
    index: HashMap<String, u32>,
}

impl Coder {
    const FEW: usize = 16;

    /// The code of `label`, a new one for a label not seen before.
    fn code(&mut self, label: &str) -> u32 {
        let seen = if self.names.len() <= Self::FEW {
            self.names.iter().position(|n| n == label).map(|c| c as u32)
        } else {
            self.index.get(label).copied()
        };
        seen.unwrap_or_else(|| {
            // At most one label a row, so codes stay below the row count;
            // past 2^32 - 1 labels the rows would not fit in memory anyway.
            let c = u32::try_from(self.names.len())
                .ok()
                .filter(|&c| c != MISSING)
                .expect("fewer than 2^32 - 1 distinct labels");
            self.names.push(label.to_string());
            self.index.insert(label.to_string(), c);
            c
        })
    }
}

impl<S: AsRef<str>> FromIterator<Option<S>> for Categories {
    fn from_iter<I: IntoIterator<Item = Option<S>>>(iter: I) -> Self {
        let iter = iter.into_iter();
        let mut codes = Vec::with_capacity(iter.size_hint().0);
        let mut coder = Coder::default();
        for label in iter {
            codes.push(label.map_or(MISSING, |l| coder.code(l.as_ref())));
        }
        Categories {
            names: coder.names,
            codes,
        }
    }
}

impl Categories {
    /// The list of `rows` rows, row i's label `label(i)` (None when
    /// missing), as [`FromIterator`] builds it from the labels in row order,
    /// built in the fixed pieces of [`pieces`] on every core: each piece's
    /// labels coded on their own, then each piece's codes renumbered, piece
    /// after piece, into the codes of the whole (a label's code is its order
    /// of first appearance in the whole, as in one sweep).
    pub fn from_rows<S: AsRef<str>>(
        rows: usize,
        label: impl Fn(usize) -> Option<S> + Sync,
    ) -> Self {
        let parts: Vec<Categories> = pieces::map(rows, |r| r.map(&label).collect());
        let mut coder = Coder::default();
        let mut codes = Vec::with_capacity(rows);
        for part in parts {
            let renumbered: Vec<u32> = part.names.iter().map(|n| coder.code(n)).collect();
            codes.extend(part.codes.iter().map(|&c| match c {
                MISSING => MISSING,
                c => renumbered[c as usize],
            }));
        }
        Categories {
            names: coder.names,
            codes,
        }
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
    fn many_labels_keep_their_codes_past_the_few_compared() {
        // 40 labels, each seen three times in a shuffled order: codes in
        // order of first appearance whether a label is found by comparing
        // (the first 16) or through the hash map.
        let labels: Vec<Option<String>> = (0..120)
            .map(|i| (i % 7 != 3).then(|| format!("L{}", (i * 37) % 40)))
            .collect();
        let c: Categories = labels.iter().map(|l| l.as_deref()).collect();
        let mut first: Vec<&str> = Vec::new();
        for (i, l) in labels.iter().enumerate() {
            assert_eq!(c.get(i), l.as_deref());
            if let Some(l) = l.as_deref() {
                if !first.contains(&l) {
                    first.push(l);
                }
                assert_eq!(c.code(i), first.iter().position(|f| *f == l));
            } else {
                assert_eq!(c.code(i), None);
            }
        }
        assert!(first.len() > 16);
        let levels = vec!["L5".to_string(), "none".to_string(), first[20].to_string()];
        let by_code = c.positions(&levels);
        for i in 0..labels.len() {
            let want = c.get(i).and_then(|l| levels.iter().position(|v| v == l));
            assert_eq!(c.code(i).and_then(|k| by_code[k]), want);
        }
    }

    #[test]
    fn the_tally_by_code_counts_each_label_of_the_rows() {
        // 40 invented labels past the 16 compared, missing ones, every row
        // and listed subsets: the counts of a count by label text.
        let labels: Vec<Option<String>> = (0..300)
            .map(|i| (i % 11 != 4).then(|| format!("L{}", (i * 37) % 40)))
            .collect();
        let c: Categories = labels.iter().map(|l| l.as_deref()).collect();
        for rows in [
            Rows::Every(300),
            Rows::Listed((0..300).filter(|i| i % 3 != 0).collect()),
            // Ten labels of the forty.
            Rows::Listed((0..10).collect()),
        ] {
            let mut want: Vec<(&str, usize)> = Vec::new();
            for i in rows.iter() {
                if let Some(l) = labels[i].as_deref() {
                    match want.iter_mut().find(|(w, _)| *w == l) {
                        Some((_, n)) => *n += 1,
                        None => want.push((l, 1)),
                    }
                }
            }
            let mut got = c.tally(&rows);
            got.sort();
            want.sort();
            assert_eq!(got, want);
        }
    }

    #[test]
    fn labels_coded_in_pieces_are_coded_as_in_one_sweep() {
        // Over several pieces of rows, labels first seen in later pieces,
        // more than 16 of them, missing ones: the same codes and names as
        // one sweep in row order, on 1, 2 and 4 threads.
        let rows = 3 * pieces::ROWS + 123;
        let label = |i: usize| (i % 11 != 5).then(|| format!("g{}", (i / 997 + (i * 7) % 3) % 60));
        let want: Categories = (0..rows).map(label).collect();
        assert!(want.names.len() > 16);
        for threads in [1, 2, 4] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            let got = pool.install(|| Categories::from_rows(rows, label));
            assert_eq!(got, want);
        }
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
