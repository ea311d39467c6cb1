//! Work over a table's rows in fixed pieces, on every core: the pieces
//! depend on the number of rows only, never on the number of threads, and
//! their results come back in row order, so whatever is merged from them
//! is the same on 1, 2 or 64 threads (the rule of the model's sums, in
//! [`crate::model::wls`], applied to the stages before the model).

use rayon::prelude::*;
use std::ops::Range;

/// Rows per piece: large enough that a piece's start-up cost (a task,
/// a few small vectors) is lost in its work, small enough that two cores
/// share the rows of a modest table evenly.
pub const ROWS: usize = 16_384;

/// `f` over the rows `0..rows` in pieces of [`ROWS`], in parallel, with the
/// results in piece order; one call on the caller's thread when there is
/// only one piece.
pub fn map<T: Send>(rows: usize, f: impl Fn(Range<usize>) -> T + Sync) -> Vec<T> {
    if rows <= ROWS {
        return vec![f(0..rows)];
    }
    (0..rows.div_ceil(ROWS))
        .into_par_iter()
        .map(|c| f(c * ROWS..rows.min((c + 1) * ROWS)))
        .collect()
}

/// `f(first_row, piece)` over `out` in pieces of [`ROWS`] entries, in
/// parallel, each piece written in place; the results in piece order.
pub fn fill<E: Send, T: Send>(out: &mut [E], f: impl Fn(usize, &mut [E]) -> T + Sync) -> Vec<T> {
    fill_wide(out, 1, f)
}

/// [`fill`] for `out` holding `width` entries a row (a row-major matrix):
/// the pieces are [`ROWS`] rows, and `f` gets the first row's index.
pub fn fill_wide<E: Send, T: Send>(
    out: &mut [E],
    width: usize,
    f: impl Fn(usize, &mut [E]) -> T + Sync,
) -> Vec<T> {
    let step = ROWS * width.max(1);
    if out.len() <= step {
        return vec![f(0, out)];
    }
    out.par_chunks_mut(step)
        .enumerate()
        .map(|(c, piece)| f(c * ROWS, piece))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pieces_cover_every_row_once_in_order() {
        for rows in [0, 1, ROWS - 1, ROWS, ROWS + 1, 3 * ROWS + 7] {
            let got: Vec<usize> = map(rows, |r| r.collect::<Vec<_>>())
                .into_iter()
                .flatten()
                .collect();
            assert_eq!(got, (0..rows).collect::<Vec<_>>(), "{rows} rows");
        }
    }

    #[test]
    fn fill_wide_hands_out_whole_rows_with_their_index() {
        let (rows, width) = (2 * ROWS + 5, 3);
        let mut out = vec![0usize; rows * width];
        let firsts = fill_wide(&mut out, width, |first, piece| {
            for (n, x) in piece.iter_mut().enumerate() {
                *x = first * width + n;
            }
            first
        });
        assert_eq!(firsts, [0, ROWS, 2 * ROWS]);
        assert!(out.iter().enumerate().all(|(n, &x)| n == x));
    }

    #[test]
    fn the_result_does_not_depend_on_the_thread_count() {
        // A float sum per piece, the pieces' sums added in order.
        let xs: Vec<f64> = (0..5 * ROWS).map(|i| 1.0 / (1.0 + i as f64)).collect();
        let total = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                map(xs.len(), |r| xs[r].iter().sum::<f64>())
                    .iter()
                    .sum::<f64>()
            })
        };
        let one = total(1);
        for threads in [2, 4] {
            assert_eq!(total(threads).to_bits(), one.to_bits());
        }
    }
}
