//! Which rows of a table a list of studies came from: every row (the usual
//! case, held as the count alone: at ten million studies that is 80 MB not
//! held), or the rows kept, in order.

/// The table rows of a list of studies, ascending, each at most once.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Rows {
    /// Rows 0, 1, …, n − 1: every row of a table of n rows.
    Every(usize),
    /// The rows kept, ascending.
    Listed(Vec<usize>),
}

impl Default for Rows {
    fn default() -> Self {
        Rows::Every(0)
    }
}

impl Rows {
    /// The rows `list` (ascending, each at most once) of a table of `total`
    /// rows: [`Rows::Every`] when they are all of them.
    pub fn new(list: Vec<usize>, total: usize) -> Rows {
        // Rows that ascend, each at most once, below `total` are all of
        // them when there are `total` of them.
        debug_assert!(list.windows(2).all(|w| w[0] < w[1]));
        if list.len() == total && list.last().is_none_or(|&i| i + 1 == total) {
            Rows::Every(total)
        } else {
            Rows::Listed(list)
        }
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        match self {
            Rows::Every(n) => *n,
            Rows::Listed(v) => v.len(),
        }
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The table row of study `n`.
    ///
    /// # Panics
    /// When `n` is not below [`Rows::len`].
    #[inline]
    pub fn get(&self, n: usize) -> usize {
        match self {
            Rows::Every(total) => {
                assert!(n < *total, "study {n} of {total}");
                n
            }
            Rows::Listed(v) => v[n],
        }
    }

    /// The table rows, in order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = usize> + Clone + '_ {
        (0..self.len()).map(|n| self.get(n))
    }

    /// Where table row `i` is among the rows (None when it is not one).
    pub fn position(&self, i: usize) -> Option<usize> {
        match self {
            Rows::Every(total) => (i < *total).then_some(i),
            Rows::Listed(v) => v.binary_search(&i).ok(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_row_is_held_as_a_count_and_others_as_a_list() {
        let every = Rows::new(vec![0, 1, 2], 3);
        assert_eq!(every, Rows::Every(3));
        assert_eq!(every.iter().collect::<Vec<_>>(), [0, 1, 2]);
        assert_eq!(
            (every.get(2), every.position(2), every.position(3)),
            (2, Some(2), None)
        );
        let some = Rows::new(vec![0, 2, 3], 5);
        assert_eq!(some, Rows::Listed(vec![0, 2, 3]));
        assert_eq!(
            (some.len(), some.get(1), some.position(3), some.position(1)),
            (3, 2, Some(2), None)
        );
        assert_eq!(some.iter().len(), 3);
        // As many rows as the table but not all of them cannot happen for
        // ascending rows below the total; a list that says otherwise stays
        // a list.
        assert_eq!(Rows::new(vec![1, 2], 2), Rows::Listed(vec![1, 2]));
        assert!(Rows::new(Vec::new(), 0).is_empty());
    }

    #[test]
    #[should_panic(expected = "study 3 of 3")]
    fn every_row_refuses_a_study_past_the_end() {
        Rows::Every(3).get(3);
    }
}
