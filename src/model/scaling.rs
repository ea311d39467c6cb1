//! The internal standardisation of a design (each column but the
//! intercept centred and scaled to unit SD) and the sweep over the rows
//! that it, the rank check and a moderator's summary share.

use nalgebra::DMatrix;

/// Internal standardisation of the design: X̃ = XA with every non-intercept
/// column centred (when column 0 is the intercept) and scaled to unit SD, so the normal equations stay well
/// conditioned (for example with a calendar year beside the intercept).
/// The fit is invariant to this: β = Aβ̃, Cov(β) = A Cov(β̃) A'.
pub(crate) struct Standardised {
    pub(crate) x: Vec<f64>,
    pub(crate) a: DMatrix<f64>,
    pub(crate) log_det_a: f64,
}

pub(crate) fn standardise(x: &[f64], k: usize, p: usize) -> Standardised {
    let mut xs = x.to_vec();
    let (a, log_det_a) = standardise_in_place(&mut xs, k, p);
    Standardised {
        x: xs,
        a,
        log_det_a,
    }
}

/// [`standardise`] writing X̃ over X (no second k × p matrix): returns A and
/// ln|det A|. Each column's mean, largest deviation and sum of squares are
/// read before any value is overwritten, and no column reads another, so
/// the values are the same bits as those of a copy. Column by column below
/// [`super::wls::PARALLEL_MIN_ROWS`] studies; above, row by row ([`by_rows`], the
/// same bits, tested), which reads the design four times instead of four
/// times per column.
pub(crate) fn standardise_in_place(x: &mut [f64], k: usize, p: usize) -> (DMatrix<f64>, f64) {
    standardise_swept(x, k, p, None)
}

/// [`standardise_in_place`] with, when known, the [`Swept`] values of the
/// first k rows of `x` as given (made beside the rank check, so the rows
/// are not read again; they must be those of these values).
pub(crate) fn standardise_swept(
    x: &mut [f64],
    k: usize,
    p: usize,
    swept: Option<Swept>,
) -> (DMatrix<f64>, f64) {
    if k >= super::wls::PARALLEL_MIN_ROWS {
        let swept = swept.unwrap_or_else(|| Swept::of(x, k, p, &ColumnSweep::of(x, k, p)));
        by_rows(x, k, p, swept)
    } else {
        by_columns(x, k, p)
    }
}

/// [`standardise_in_place`] column by column: each column read three
/// times and written once.
fn by_columns(x: &mut [f64], k: usize, p: usize) -> (DMatrix<f64>, f64) {
    // Centring needs a column of ones to move the means into; without one
    // (a design without intercept, possible through the library) columns
    // are only scaled.
    let has_intercept = p > 0 && (0..k).all(|i| x[i * p] == 1.0);
    let first = usize::from(has_intercept);
    let mut a = DMatrix::identity(p, p);
    let mut log_det_a = 0.0;
    for j in first..p {
        let mean = if has_intercept {
            (0..k).map(|i| x[i * p + j]).sum::<f64>() / k as f64
        } else {
            0.0
        };
        // The SD through the largest deviation, so the squares neither
        // underflow (values near 1e-300) nor overflow (near 1e300).
        let big = (0..k).fold(0.0f64, |m, i| m.max((x[i * p + j] - mean).abs()));
        let sd = column_sd(big, k, || {
            (0..k)
                .map(|i| ((x[i * p + j] - mean) / big).powi(2))
                .sum::<f64>()
        });
        for i in 0..k {
            x[i * p + j] = (x[i * p + j] - mean) / sd;
        }
        record_scaling((&mut a, &mut log_det_a), j, (mean, sd), has_intercept);
    }
    (a, log_det_a)
}

/// The SD a column is scaled by, from its largest deviation from the mean
/// `big` and `ss()`, the sum of the squared deviations divided by `big`
/// (not called when `big` is 0 or not finite): big·√(ss/k), or 1 when that
/// is not a positive finite number (a constant column is left unscaled).
fn column_sd(big: f64, k: usize, ss: impl FnOnce() -> f64) -> f64 {
    let sd = if big > 0.0 && big.is_finite() {
        big * (ss() / k as f64).sqrt()
    } else {
        0.0
    };
    if sd > 0.0 && sd.is_finite() {
        sd
    } else {
        1.0
    }
}

/// Column j's entries of A (x̃_j = (x_j − mean)/sd, so A_jj = 1/sd and,
/// with an intercept, A_0j = −mean/sd) and its term −ln sd of ln|det A|.
fn record_scaling(
    (a, log_det_a): (&mut DMatrix<f64>, &mut f64),
    j: usize,
    (mean, sd): (f64, f64),
    has_intercept: bool,
) {
    a[(j, j)] = 1.0 / sd;
    if has_intercept {
        a[(0, j)] = -mean / sd;
    }
    *log_det_a -= sd.ln();
}

/// What one sweep over the first k rows of a row-major matrix of p columns
/// gives: each column's running sum (in row order, from −0.0, as
/// `Iterator::sum`), smallest and largest value (NaN passed over), and
/// whether column 0 is all ones.
#[derive(Debug, Clone)]
pub(crate) struct ColumnSweep {
    pub(crate) sum: Vec<f64>,
    pub(crate) lo: Vec<f64>,
    pub(crate) hi: Vec<f64>,
    pub(crate) ones: bool,
}

impl ColumnSweep {
    pub(crate) fn of(x: &[f64], k: usize, p: usize) -> Self {
        macro_rules! fixed {
            ($n:literal) => {
                Self::fixed::<$n>(x, k)
            };
        }
        by_columns!(p, fixed, Self::general(x, k, p))
    }

    /// [`ColumnSweep::of`] for any number of columns: each value goes
    /// through `f64::min` and `f64::max` (which pass over NaN).
    fn general(x: &[f64], k: usize, p: usize) -> Self {
        let mut out = ColumnSweep {
            sum: vec![-0.0; p],
            lo: vec![f64::INFINITY; p],
            hi: vec![f64::NEG_INFINITY; p],
            ones: p > 0,
        };
        for r in x.chunks_exact(p.max(1)).take(k) {
            out.ones &= r[0] == 1.0;
            for (j, &v) in r.iter().enumerate() {
                out.sum[j] += v;
                out.lo[j] = out.lo[j].min(v);
                out.hi[j] = out.hi[j].max(v);
            }
        }
        out
    }

    /// [`ColumnSweep::general`] for `P` columns, the running values kept
    /// in arrays of that size and the ends updated by comparison (a NaN
    /// compares false, so it is passed over as by `f64::min`; of two equal
    /// values the first is kept), which the compiler does for all columns
    /// of a row at once. The same bits as the general loop (tested).
    fn fixed<const P: usize>(x: &[f64], k: usize) -> Self {
        let mut sum = [-0.0; P];
        let mut lo = [f64::INFINITY; P];
        let mut hi = [f64::NEG_INFINITY; P];
        let mut ones = true;
        for r in x.chunks_exact(P).take(k) {
            ones &= r[0] == 1.0;
            for j in 0..P {
                let v = r[j];
                sum[j] += v;
                lo[j] = if v < lo[j] { v } else { lo[j] };
                hi[j] = if v > hi[j] { v } else { hi[j] };
            }
        }
        ColumnSweep {
            sum: sum.to_vec(),
            lo: lo.to_vec(),
            hi: hi.to_vec(),
            ones,
        }
    }

    /// Column j's largest |x − m|, NaN values passed over (0 for a
    /// column of NaN alone): max(|max x − m|, |min x − m|) exactly, since
    /// the rounded difference fl(x − m) does not decrease as x grows, so
    /// its magnitude is largest at one of the ends.
    pub(crate) fn largest_deviation(&self, j: usize, m: f64) -> f64 {
        if self.lo[j] > self.hi[j] {
            0.0
        } else {
            0.0f64
                .max((self.hi[j] - m).abs())
                .max((self.lo[j] - m).abs())
        }
    }
}

/// What the standardisation of a large design reads from its rows before
/// it writes any: the [`ColumnSweep`], and from it each column's mean (0
/// without an intercept), largest deviation from it and, for each column
/// that can be scaled, the sum of the squared deviations divided by that
/// largest one (each a running sum from −0.0 in row order).
#[derive(Debug, Clone)]
pub(crate) struct Swept {
    has_intercept: bool,
    mean: Vec<f64>,
    big: Vec<f64>,
    squares: Vec<f64>,
}

impl Swept {
    /// The values for the first k rows of `x`, whose sweep is `sweep`.
    pub(crate) fn of(x: &[f64], k: usize, p: usize, sweep: &ColumnSweep) -> Self {
        // Centring needs a column of ones to move the means into; without
        // one (a design without intercept, possible through the library)
        // columns are only scaled.
        let has_intercept = sweep.ones;
        let first = usize::from(has_intercept);
        let mean: Vec<f64> = if has_intercept {
            sweep.sum.iter().map(|s| s / k as f64).collect()
        } else {
            vec![0.0; p]
        };
        // The SD through the largest deviation, so the squares neither
        // underflow (values near 1e-300) nor overflow (near 1e300).
        let big: Vec<f64> = (0..p)
            .map(|j| sweep.largest_deviation(j, mean[j]))
            .collect();
        let scalable: Vec<bool> = big.iter().map(|b| *b > 0.0 && b.is_finite()).collect();
        let squares = {
            let (mean, big, scalable) = (&mean, &big, &scalable);
            macro_rules! fixed {
                ($n:literal) => {
                    squares_fixed::<$n>(x, k, first, (mean, big, scalable))
                };
            }
            by_columns!(p, fixed, squares(x, k, first, (mean, big, scalable)))
        };
        Swept {
            has_intercept,
            mean,
            big,
            squares,
        }
    }
}

/// [`standardise_in_place`] reading the design row by row: three sweeps
/// over the rows in all (a [`ColumnSweep`]; the sums of squares, each
/// keeping one running value per column in row order, both in [`Swept`];
/// then the scaling, on every core), the same bits as column by column.
fn by_rows(x: &mut [f64], k: usize, p: usize, swept: Swept) -> (DMatrix<f64>, f64) {
    use rayon::prelude::*;
    let Swept {
        has_intercept,
        mean,
        big,
        squares: ss,
    } = swept;
    let first = usize::from(has_intercept);
    let sd: Vec<f64> = (0..p).map(|j| column_sd(big[j], k, || ss[j])).collect();
    let scale_row = |r: &mut [f64]| {
        for j in first..p {
            r[j] = (r[j] - mean[j]) / sd[j];
        }
    };
    if p > 0 && first < p {
        x[..k * p].par_chunks_exact_mut(p).for_each(scale_row);
    }
    let mut a = DMatrix::identity(p, p);
    let mut log_det_a = 0.0;
    for j in first..p {
        record_scaling((&mut a, &mut log_det_a), j, (mean[j], sd[j]), has_intercept);
    }
    (a, log_det_a)
}

/// Each scalable column's Σ ((x − mean)/big)² over the first k rows, a
/// running sum from −0.0 in row order (−0.0 for the others and for the
/// columns before `first`).
fn squares(
    x: &[f64],
    k: usize,
    first: usize,
    (mean, big, scalable): (&[f64], &[f64], &[bool]),
) -> Vec<f64> {
    let p = mean.len();
    let mut ss = vec![-0.0; p];
    for r in x.chunks_exact(p.max(1)).take(k) {
        for (j, (s, v)) in ss.iter_mut().zip(r).enumerate().skip(first) {
            if scalable[j] {
                *s += ((v - mean[j]) / big[j]).powi(2);
            }
        }
    }
    ss
}

/// [`squares`] for `P` columns: every column's square is formed and kept
/// only where the column is scalable, so the compiler does all columns of
/// a row at once; each kept sum has the same operations in the same order
/// (the same bits, tested).
fn squares_fixed<const P: usize>(
    x: &[f64],
    k: usize,
    first: usize,
    (mean, big, scalable): (&[f64], &[f64], &[bool]),
) -> Vec<f64> {
    let mut ss = [-0.0; P];
    let mut m = [0.0; P];
    let mut b = [1.0; P];
    let mut keep = [false; P];
    for j in first..P {
        (m[j], b[j], keep[j]) = (mean[j], big[j], scalable[j]);
    }
    for r in x.chunks_exact(P).take(k) {
        for j in 0..P {
            let d = (r[j] - m[j]) / b[j];
            ss[j] = if keep[j] { ss[j] + d * d } else { ss[j] };
        }
    }
    ss.to_vec()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::wls;

    #[test]
    fn standardising_row_by_row_equals_the_column_by_column_values_bit_for_bit() {
        // Invented columns: a calendar year, a wide-ranging one, a constant,
        // tiny values, one whose largest deviation is below its mean, NaN in
        // some rows, one infinity, NaN in every row; with and without an
        // intercept; k small and past the parallel threshold.
        for k in [7usize, wls::PARALLEL_MIN_ROWS + 101] {
            for intercept in [true, false] {
                let p = 9;
                let x: Vec<f64> = (0..k)
                    .flat_map(|i| {
                        let u = ((i * 7919) % 1013) as f64 / 1013.0;
                        let first = if intercept { 1.0 } else { u - 0.5 };
                        let some_nan = if i % 5 == 3 { f64::NAN } else { u };
                        let one_inf = if i == k / 2 { f64::INFINITY } else { u };
                        [
                            first,
                            1990.0 + (i % 31) as f64,
                            1e6 * u * u,
                            3.0,
                            1e-300 * u,
                            // The largest deviation below the mean.
                            -1e3 * u * u * u,
                            some_nan,
                            one_inf,
                            f64::NAN,
                        ]
                    })
                    .collect();
                // Every column, and narrower designs (the unrolled sweeps
                // of 1 to 8 columns).
                let picks: [&[usize]; 6] = [
                    &[0, 1, 2, 3, 4, 5, 6, 7, 8],
                    &[0, 1, 6, 7],
                    &[0, 2, 5],
                    &[0, 8],
                    &[0, 4, 5, 6, 1, 2, 3],
                    &[3],
                ];
                for pick in picks {
                    let w = pick.len();
                    let sub: Vec<f64> = x
                        .chunks_exact(p)
                        .flat_map(|r| pick.iter().map(|&j| r[j]))
                        .collect();
                    let (mut rows, mut cols) = (sub.clone(), sub);
                    let swept = Swept::of(&rows, k, w, &ColumnSweep::of(&rows, k, w));
                    let (a, log_det_a) = by_rows(&mut rows, k, w, swept);
                    let (a_ref, log_det_ref) = by_columns(&mut cols, k, w);
                    assert!(rows
                        .iter()
                        .zip(&cols)
                        .all(|(r, c)| r.to_bits() == c.to_bits()));
                    assert_eq!(log_det_a.to_bits(), log_det_ref.to_bits());
                    assert!(a
                        .iter()
                        .zip(a_ref.iter())
                        .all(|(r, c)| r.to_bits() == c.to_bits()));
                }
            }
        }
    }

    #[test]
    fn the_unrolled_sweep_equals_the_general_one_bit_for_bit() {
        // Invented rows: NaN first, in between and throughout, infinities
        // of both signs, tiny and huge values, a column of ones.
        let values = [
            f64::NAN,
            0.5,
            -3.0,
            f64::INFINITY,
            1e-300,
            -1e300,
            f64::NEG_INFINITY,
            7.25,
            1.0,
        ];
        for p in 1..=8 {
            for k in [1usize, 2, 9, 100] {
                let x: Vec<f64> = (0..k * p)
                    .map(|n| {
                        let (i, j) = (n / p, n % p);
                        match j {
                            0 if p > 1 => 1.0,
                            2 => f64::NAN,
                            _ => values[(i * 5 + j * 3) % values.len()] * (1.0 + j as f64),
                        }
                    })
                    .collect();
                let (a, b) = (ColumnSweep::of(&x, k, p), ColumnSweep::general(&x, k, p));
                // A NaN's sign and payload are not kept by arithmetic (they
                // may differ between builds), so every NaN counts as one.
                let bits = |v: &[f64]| {
                    v.iter()
                        .map(|x| if x.is_nan() { u64::MAX } else { x.to_bits() })
                        .collect::<Vec<_>>()
                };
                assert_eq!(bits(&a.sum), bits(&b.sum), "p = {p}, k = {k}");
                assert_eq!(bits(&a.lo), bits(&b.lo), "p = {p}, k = {k}");
                assert_eq!(bits(&a.hi), bits(&b.hi), "p = {p}, k = {k}");
                assert_eq!(a.ones, b.ones);
            }
        }
    }
}
