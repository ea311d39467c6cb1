//! The line in the file of each study or row kept: a run of consecutive
//! lines is held as its first line and length (the usual case, every row
//! on a line of its own and none left out: at ten million studies that is
//! 80 MB not held), anything else line by line.

use crate::support::rows::Rows;

/// The lines of a list of rows, in order.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Lines {
    /// Lines `first`, `first + 1`, …, `first + len − 1`.
    Run {
        /// The first row's line.
        first: u64,
        /// Number of rows.
        len: usize,
    },
    /// Each row's line.
    Listed(Vec<u64>),
}

impl Default for Lines {
    fn default() -> Self {
        Lines::Listed(Vec::new())
    }
}

impl Lines {
    /// The lines of the rows `rows` (indices into `all`, the lines of every
    /// row), in that order.
    ///
    /// # Panics
    /// When a row is not an index into `all`.
    pub fn of_rows(all: &[u64], rows: &[usize]) -> Lines {
        let Some(&start) = rows.first() else {
            return Lines::default();
        };
        let first = all[start];
        // Every row's line one past the row before's (a comparison per
        // row, without a branch).
        let run = rows.iter().enumerate().fold(true, |run, (n, &i)| {
            run & (all[i].wrapping_sub(first) == n as u64)
        });
        if run {
            Lines::Run {
                first,
                len: rows.len(),
            }
        } else {
            Lines::Listed(rows.iter().map(|&i| all[i]).collect())
        }
    }

    /// [`Lines::of_rows`] for rows held as [`Rows`]: every row of the
    /// table read in order, without a list of them.
    pub fn of(all: &[u64], rows: &Rows) -> Lines {
        let n = match rows {
            Rows::Listed(list) => return Lines::of_rows(all, list),
            Rows::Every(n) => *n,
        };
        let Some(&first) = all.first().filter(|_| n > 0) else {
            return Lines::default();
        };
        let run = all[..n].iter().enumerate().fold(true, |run, (i, &l)| {
            run & (l.wrapping_sub(first) == i as u64)
        });
        if run {
            Lines::Run { first, len: n }
        } else {
            Lines::Listed(all[..n].to_vec())
        }
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        match self {
            Lines::Run { len, .. } => *len,
            Lines::Listed(v) => v.len(),
        }
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Row `i`'s line.
    ///
    /// # Panics
    /// When `i` is not below [`Lines::len`].
    pub fn get(&self, i: usize) -> u64 {
        match self {
            Lines::Run { first, len } => {
                assert!(i < *len, "row {i} of {len}");
                first + i as u64
            }
            Lines::Listed(v) => v[i],
        }
    }

    /// Every row's line, one number each.
    pub fn into_vec(self) -> Vec<u64> {
        match self {
            Lines::Run { first, len } => (first..).take(len).collect(),
            Lines::Listed(v) => v,
        }
    }

    /// [`Lines::into_vec`] of a copy.
    pub fn to_vec(&self) -> Vec<u64> {
        self.clone().into_vec()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn consecutive_lines_are_a_run_and_others_a_list() {
        let all = [2, 3, 4, 6, 7];
        let run = Lines::of_rows(&all, &[0, 1, 2]);
        assert_eq!(run, Lines::Run { first: 2, len: 3 });
        assert_eq!((run.len(), run.get(2)), (3, 4));
        assert_eq!(run.to_vec(), [2, 3, 4]);
        // A skipped line (a blank row) or a left-out row breaks the run.
        let gap = Lines::of_rows(&all, &[1, 2, 3]);
        assert_eq!(gap, Lines::Listed(vec![3, 4, 6]));
        assert_eq!(Lines::of_rows(&all, &[0, 2]), Lines::Listed(vec![2, 4]));
        assert_eq!(Lines::of_rows(&all, &[3, 4]).to_vec(), [6, 7]);
        assert!(Lines::of_rows(&all, &[]).is_empty());
        // Lines that go down (rows of a sheet are never so, but the run
        // must not take them for one) stay a list.
        assert_eq!(Lines::of_rows(&[5, 4], &[0, 1]), Lines::Listed(vec![5, 4]));
    }

    #[test]
    fn every_row_gives_the_lines_of_the_full_list() {
        for all in [
            vec![2, 3, 4, 5],
            vec![2, 3, 5, 6],
            vec![5, 4, 3],
            vec![7],
            vec![],
        ] {
            let n = all.len();
            let list: Vec<usize> = (0..n).collect();
            assert_eq!(
                Lines::of(&all, &Rows::Every(n)),
                Lines::of_rows(&all, &list),
                "{all:?}"
            );
            if n > 1 {
                let some = Rows::Listed(vec![0, n - 1]);
                assert_eq!(Lines::of(&all, &some), Lines::of_rows(&all, &[0, n - 1]));
            }
        }
        // Rows of a table whose first rows are the studies only.
        assert_eq!(
            Lines::of(&[2, 3, 9], &Rows::Every(2)),
            Lines::Run { first: 2, len: 2 }
        );
    }

    #[test]
    #[should_panic(expected = "row 3 of 3")]
    fn a_run_refuses_a_row_past_its_end() {
        Lines::Run { first: 10, len: 3 }.get(3);
    }
}
