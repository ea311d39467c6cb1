//! The design's rows written from the moderators' values, in fixed pieces
//! on every core ([`pieces::fill_wide`]), so the matrix is the same
//! whatever the number of threads.

use super::{Coded, Coder, ModeratorKind, RawModerator};
use crate::support::pieces;
use crate::support::rows::Rows;

/// The row-major k × p design: each included row through [`Coder::encode`],
/// or, when every moderator is numeric and there is no product term (the
/// usual large meta-regression), column by column from the moderators'
/// values: 1, then x or x − x̄ for each moderator, the same operations as
/// [`Coder::encode`] and so the same bits (tested).
pub(super) fn rows(
    coder: &Coder<'_>,
    raw: &[RawModerator],
    codes: &[Option<Vec<usize>>],
    included: &Rows,
) -> Vec<f64> {
    let (k, p) = (included.len(), coder.width);
    let mut x = vec![0.0; k * p];
    match plain_columns(coder, raw) {
        Some(columns) => {
            pieces::fill_wide(&mut x, p, |first, out| {
                plain_piece(&columns, included, first, out, p);
            });
        }
        None => encoded(&mut x, coder, raw, codes, included),
    }
    x
}

/// Writes every row of `x` through [`Coder::encode`].
fn encoded(
    x: &mut [f64],
    coder: &Coder<'_>,
    raw: &[RawModerator],
    codes: &[Option<Vec<usize>>],
    included: &Rows,
) {
    let p = coder.width;
    pieces::fill_wide(x, p, |first, out| {
        for (n, row) in out.chunks_exact_mut(p).enumerate() {
            let i = included.get(first + n);
            let value = |j: usize| match (&raw[j], &codes[j]) {
                (RawModerator::Numeric(v), _) => Coded::Number(v.0[i]),
                (RawModerator::Text(_), Some(c)) => Coded::Level(c[i]),
                (RawModerator::Text(_), None) => Coded::Number(f64::NAN),
            };
            coder.encode(value, row);
        }
    });
}

/// Each moderator's values (every table row) and the mean its column
/// subtracts (None: written as it is), when every moderator is numeric and
/// there is no product term; None otherwise.
fn plain_columns<'r>(
    coder: &Coder<'_>,
    raw: &'r [RawModerator],
) -> Option<Vec<(&'r [f64], Option<f64>)>> {
    if !coder.interactions.is_empty() {
        return None;
    }
    coder
        .mods
        .iter()
        .zip(raw)
        .map(|(m, r)| match (&m.kind, r) {
            (ModeratorKind::Numeric { mean, centered, .. }, RawModerator::Numeric(v)) => {
                Some((v.0.as_slice(), centered.then_some(*mean)))
            }
            _ => None,
        })
        .collect()
}

/// The rows of one piece (`out`, the included rows from `first` on) of the
/// design of [`plain_columns`]: the column of ones, then each moderator's
/// column in turn.
fn plain_piece(
    columns: &[(&[f64], Option<f64>)],
    included: &Rows,
    first: usize,
    out: &mut [f64],
    p: usize,
) {
    let n = out.len() / p;
    for row in out.chunks_exact_mut(p) {
        row[0] = 1.0;
    }
    for (j, &(values, mean)) in columns.iter().enumerate() {
        let cells = out[1 + j..].iter_mut().step_by(p);
        match (included, mean) {
            (Rows::Every(_), None) => {
                for (o, &x) in cells.zip(&values[first..first + n]) {
                    *o = x;
                }
            }
            (Rows::Every(_), Some(m)) => {
                for (o, &x) in cells.zip(&values[first..first + n]) {
                    *o = x - m;
                }
            }
            (Rows::Listed(list), _) => {
                for (o, &i) in cells.zip(&list[first..first + n]) {
                    *o = match mean {
                        Some(m) => values[i] - m,
                        None => values[i],
                    };
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::{build, ModeratorSpec, Numbers};
    use super::*;

    /// Invented values: −0.0, a missing value (its row left out below),
    /// large and tiny numbers, over more rows than one piece.
    fn raw(k: usize) -> Vec<RawModerator> {
        let a = (0..k).map(|i| match i % 11 {
            0 => -0.0,
            4 if i == 4 => f64::NAN,
            7 => 3.1e8,
            _ => (i as f64 * 0.73).cos() * 1e-3 + 0.5,
        });
        let b = (0..k).map(|i| (i as f64).sqrt() - 40.0);
        vec![
            RawModerator::Numeric(Numbers::from_values(a.collect())),
            RawModerator::Numeric(Numbers::from_values(b.collect())),
        ]
    }

    fn bits(x: &[f64]) -> Vec<u64> {
        x.iter().map(|v| v.to_bits()).collect()
    }

    #[test]
    fn numeric_columns_are_written_as_the_row_coder_writes_them() {
        let k = 2 * pieces::ROWS + 123;
        let raw = raw(k);
        let spec = |name: &str, center: bool| ModeratorSpec {
            name: name.into(),
            categorical: false,
            reference: None,
            center,
        };
        let listed = Rows::Listed((0..k).filter(|&i| i != 4).collect());
        let mut every_raw = raw.clone();
        every_raw.truncate(2);
        if let RawModerator::Numeric(v) = &mut every_raw[0] {
            v.0[4] = 1.25;
        }
        for (raw, included) in [(&raw, listed), (&every_raw, Rows::Every(k))] {
            for centre in [[false, false], [true, false], [false, true], [true, true]] {
                let specs = [spec("a", centre[0]), spec("b", centre[1])];
                let d = build(&specs, raw, &included, &[]).unwrap();
                let coder = Coder::new(&d.moderators, &d.interactions);
                assert!(plain_columns(&coder, raw).is_some());
                let codes = vec![None; 2];
                let mut want = vec![0.0; included.len() * d.p];
                encoded(&mut want, &coder, raw, &codes, &included);
                assert_eq!(bits(&d.x), bits(&want), "centred {centre:?}");
            }
        }
    }

    #[test]
    fn product_terms_and_categories_go_through_the_row_coder() {
        let k = 300;
        let raw = raw(k);
        let included = Rows::Listed((0..k).filter(|&i| i != 4).collect());
        let specs: Vec<ModeratorSpec> = ["a", "b"]
            .iter()
            .map(|n| ModeratorSpec {
                name: (*n).into(),
                categorical: false,
                reference: None,
                center: false,
            })
            .collect();
        let d = build(&specs, &raw, &included, &[(0, 1)]).unwrap();
        let coder = Coder::new(&d.moderators, &d.interactions);
        assert!(plain_columns(&coder, &raw).is_none());
        assert_eq!(d.p, 4);
        let i = included.get(17);
        let (a, b) = match (&raw[0], &raw[1]) {
            (RawModerator::Numeric(a), RawModerator::Numeric(b)) => (a.0[i], b.0[i]),
            _ => unreachable!(),
        };
        assert_eq!(bits(&d.x[17 * 4..18 * 4]), bits(&[1.0, a, b, a * b]));
    }
}
