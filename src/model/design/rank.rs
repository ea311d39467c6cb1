//! Whether every column of a design matrix carries something the columns
//! before it do not: the rank check of [`super::build`], in one pass over
//! the rows that keeps only a p × p triangle (no copy of the k × p matrix).

use super::Term;
use crate::error::{Error, Result};
use crate::model::wls::{CHUNK_ROWS, PARALLEL_MIN_ROWS};
use crate::model::ColumnSweep;
use crate::tolerance;

/// Rows gathered below the triangle before each Householder step.
const BLOCK_ROWS: usize = 256;

/// A column whose remainder after projecting out the earlier ones keeps
/// less than [`tolerance::COLLINEAR`] of its squared norm is a linear
/// combination of them.
///
/// # Formula
/// Every column but the intercept is centred, c_ij = x_ij − x̄_j (the span
/// of [1, X] is that of [1, X − x̄], and a large offset with a small spread,
/// m = 1e6 + i or dates as Unix times, then keeps its digits instead of
/// looking collinear with the intercept), and every column is scaled to a
/// largest magnitude of 1 (scaling does not change the rank; it keeps the
/// squares from underflowing near 1e-300 or overflowing near 1e300). With
/// C = QR (R upper triangular p × p), R_jj² is the squared norm of the part
/// of column j orthogonal to columns 0..j−1, and column j is collinear when
/// R_jj² ≤ [`tolerance::COLLINEAR`] · Σ_i c_ij². R is found by Householder
/// reflections on blocks of rows stacked under the R of the rows before
/// (the triangle of a tall matrix from its row blocks: Golub & Van Loan,
/// *Matrix Computations*, 4th ed., 2013, §5.2 and §5.2.2 on the
/// factorisation of a stacked matrix; cited from memory); the reflections
/// are backward stable, as modified Gram–Schmidt's R is.
///
/// # Errors
/// [`Error::Model`] naming the first collinear term and those before it.
pub(super) fn check_rank(
    x: &[f64],
    k: usize,
    p: usize,
    terms: &[Term],
    sweep: &ColumnSweep,
) -> Result<()> {
    let (work, norm0) = triangle_of(x, k, p, sweep);
    let rows = p + BLOCK_ROWS;
    for j in 0..p {
        let norm = work[j * rows + j].powi(2);
        if norm.is_nan() || norm <= tolerance::COLLINEAR * norm0[j] {
            let earlier: Vec<&str> = terms[..j].iter().map(|t| t.name.as_str()).collect();
            return Err(Error::Model(format!(
                "term '{}' is a linear combination of the terms before it ({}) in the included \
                 studies (collinear moderators), so the coefficients cannot be separated; drop one \
                 of the moderators involved",
                terms[j].name,
                earlier.join(", ")
            )));
        }
    }
    Ok(())
}

/// R of the centred and scaled design (column-major (p + [`BLOCK_ROWS`]) × p,
/// R in the top p rows) and each centred, scaled column's squared norm;
/// `sweep` is that of the first k rows of `x` ([`ColumnSweep::of`]).
fn triangle_of(x: &[f64], k: usize, p: usize, sweep: &ColumnSweep) -> (Vec<f64>, Vec<f64>) {
    use rayon::prelude::*;
    let (shift, scale) = shifts_and_scales(sweep, k, p);
    // Scaled by a product with 1/scale, not a division: within an ulp of
    // the quotient, which moves R's rounding only (see [`dot`]).
    let inverse: Vec<f64> = scale.iter().map(|s| 1.0 / s).collect();
    // The triangle and the squared column norms of a run of rows.
    let part = |rows: &[f64]| {
        let mut t = Triangle::new(p);
        let mut norm0 = vec![0.0; p];
        let mut c = vec![0.0; p];
        for row in rows.chunks_exact(p) {
            for j in 0..p {
                c[j] = (row[j] - shift[j]) * inverse[j];
                norm0[j] += c[j] * c[j];
            }
            t.push(&c);
        }
        (t.finish(), norm0)
    };
    let x = &x[..k * p];
    if k < PARALLEL_MIN_ROWS {
        part(x)
    } else {
        // Fixed chunks of rows on all threads, then the chunks' triangles
        // stacked and reduced in chunk order (the triangle of a stacked
        // matrix, as for the blocks within a chunk): the same R, up to
        // rounding, for any thread count, and the same bits for any.
        let parts: Vec<(Vec<f64>, Vec<f64>)> = x.par_chunks(CHUNK_ROWS * p).map(part).collect();
        let mut t = Triangle::new(p);
        let mut norm0 = vec![0.0; p];
        let mut r_row = vec![0.0; p];
        for (r, n) in &parts {
            for a in 0..p {
                for (j, e) in r_row.iter_mut().enumerate() {
                    *e = r[j * (p + BLOCK_ROWS) + a];
                }
                t.push(&r_row);
            }
            for (s, x) in norm0.iter_mut().zip(n) {
                *s += x;
            }
        }
        (t.finish(), norm0)
    }
}

/// R of the rows pushed so far: column-major (p + [`BLOCK_ROWS`]) × p, R in
/// the top p rows and up to [`BLOCK_ROWS`] rows gathered below it, reduced
/// into R each time the block is full.
struct Triangle {
    work: Vec<f64>,
    p: usize,
    filled: usize,
}

impl Triangle {
    fn new(p: usize) -> Self {
        Triangle {
            work: vec![0.0; (p + BLOCK_ROWS) * p],
            p,
            filled: p,
        }
    }

    fn push(&mut self, row: &[f64]) {
        let rows = self.p + BLOCK_ROWS;
        for (j, &c) in row.iter().enumerate() {
            self.work[j * rows + self.filled] = c;
        }
        self.filled += 1;
        if self.filled == rows {
            reduce(&mut self.work, rows, self.p, self.filled);
            self.filled = self.p;
        }
    }

    /// The matrix with every row reduced into R.
    fn finish(mut self) -> Vec<f64> {
        reduce(&mut self.work, self.p + BLOCK_ROWS, self.p, self.filled);
        self.work
    }
}

/// Each column's shift (its mean, for every column but the first, when
/// finite; else 0) and scale (the largest |x − shift| when positive and
/// finite; else 1), from one sweep over the rows ([`ColumnSweep`]).
fn shifts_and_scales(sweep: &ColumnSweep, k: usize, p: usize) -> (Vec<f64>, Vec<f64>) {
    let shift: Vec<f64> = (0..p)
        .map(|j| {
            let mean = sweep.sum[j] / k as f64;
            if j > 0 && mean.is_finite() {
                mean
            } else {
                0.0
            }
        })
        .collect();
    let scale = (0..p)
        .map(|j| {
            let b = sweep.largest_deviation(j, shift[j]);
            if b > 0.0 && b.is_finite() {
                b
            } else {
                1.0
            }
        })
        .collect();
    (shift, scale)
}

/// Householder reflections that make the first `filled` rows of the
/// column-major `rows` × `p` matrix in `work` upper triangular: the top
/// p rows then hold R, and the rows below are cleared for the next block.
fn reduce(work: &mut [f64], rows: usize, p: usize, filled: usize) {
    for a in 0..p {
        let (left, right) = work.split_at_mut((a + 1) * rows);
        let col = &mut left[a * rows + a..a * rows + filled];
        let norm = dot(col, col).sqrt();
        if norm == 0.0 || !norm.is_finite() {
            if !norm.is_finite() {
                col[0] = f64::NAN;
            }
            continue;
        }
        let alpha = if col[0] > 0.0 { -norm } else { norm };
        // v = col − alpha·e₁, kept in col; H = I − 2vv'/(v'v).
        col[0] -= alpha;
        let vv = dot(col, col);
        for b in 0..p - a - 1 {
            let other = &mut right[b * rows + a..b * rows + filled];
            let f = 2.0 * dot(col, other) / vv;
            for (o, v) in other.iter_mut().zip(col.iter()) {
                *o -= f * v;
            }
        }
        col[0] = alpha;
        for c in &mut col[1..] {
            *c = 0.0;
        }
    }
    for j in 0..p {
        for c in &mut work[j * rows + p..j * rows + filled.max(p)] {
            *c = 0.0;
        }
    }
}

/// Σ a_i·b_i in eight running sums (rows i ≡ 0, …, 7 mod 8) added at the
/// end: eight additions in flight instead of one chain, so the reflections
/// of a block take a fraction of the time. The order of
/// the additions changes only the rounding of R, which decides nothing
/// but whether a column is collinear, against a threshold far above it.
#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut lanes = [0.0; 8];
    let (a8, b8) = (a.chunks_exact(8), b.chunks_exact(8));
    let (ra, rb) = (a8.remainder(), b8.remainder());
    for (x, y) in a8.zip(b8) {
        for l in 0..8 {
            lanes[l] += x[l] * y[l];
        }
    }
    for (x, y) in ra.iter().zip(rb) {
        lanes[0] += x * y;
    }
    lanes.iter().fold(0.0, |t, l| t + l)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn terms(p: usize) -> Vec<Term> {
        (0..p)
            .map(|j| Term {
                name: format!("t{j}"),
            })
            .collect()
    }

    /// Modified Gram–Schmidt with the same centring and scaling: the
    /// squared norm of each column's remainder and of the column (the
    /// check this module replaced, kept here as the comparison).
    fn gram_schmidt(x: &[f64], k: usize, p: usize) -> Vec<(f64, f64)> {
        let mut q: Vec<Vec<f64>> = Vec::new();
        let mut out = Vec::new();
        for j in 0..p {
            let mut col: Vec<f64> = (0..k).map(|i| x[i * p + j]).collect();
            if j > 0 {
                let mean = col.iter().sum::<f64>() / k as f64;
                col.iter_mut().for_each(|c| *c -= mean);
            }
            let scale = col.iter().fold(0.0f64, |m, c| m.max(c.abs()));
            col.iter_mut().for_each(|c| *c /= scale);
            let norm0: f64 = col.iter().map(|c| c * c).sum();
            for b in &q {
                let dot: f64 = col.iter().zip(b).map(|(c, b)| c * b).sum();
                col.iter_mut().zip(b).for_each(|(c, b)| *c -= dot * b);
            }
            let norm: f64 = col.iter().map(|c| c * c).sum();
            out.push((norm, norm0));
            q.push(col.iter().map(|c| c / norm.sqrt()).collect());
        }
        out
    }

    /// A seeded k × 4 design (intercept, two numbers, their sum plus
    /// `noise` times a third): invented values, for this test only.
    fn design(k: usize, noise: f64) -> Vec<f64> {
        let mut state: u64 = 0x9E37_79B9_7F4A_7C15;
        let mut next = || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((state >> 11) as f64) / ((1u64 << 53) as f64)
        };
        (0..k)
            .flat_map(|_| {
                let (a, b, c) = (1e6 + next(), 3.0 * next(), next() - 0.5);
                [1.0, a, b, a + b + noise * c]
            })
            .collect()
    }

    /// The triangle's R_jj² agrees with Gram–Schmidt's remainders (to
    /// rounding relative to the column), for k across the block size and
    /// past the parallel threshold (chunks' triangles stacked).
    #[test]
    fn remainders_agree_with_gram_schmidt() {
        for k in [
            5,
            255,
            256,
            257,
            1000,
            5000,
            PARALLEL_MIN_ROWS + 3 * CHUNK_ROWS / 2,
        ] {
            for noise in [1.0, 1e-3] {
                let x = design(k, noise);
                let (work, _) = triangle_of(&x, k, 4, &ColumnSweep::of(&x, k, 4));
                let rows = 4 + BLOCK_ROWS;
                for (j, (norm, norm0)) in gram_schmidt(&x, k, 4).into_iter().enumerate() {
                    let r = work[j * rows + j].powi(2);
                    assert!(
                        (r - norm).abs() <= 1e-9 * norm0,
                        "k {k}, noise {noise}, column {j}: {r} vs {norm}"
                    );
                }
            }
        }
    }

    /// Every length, remainders of 0 to 7 included: integers (exact in
    /// any order) give the exact sum.
    #[test]
    fn four_lane_dot_products_are_the_sums() {
        for n in 0..20 {
            let a: Vec<f64> = (0..n).map(|i| (i * 3 + 1) as f64).collect();
            let b: Vec<f64> = (0..n).map(|i| (7 - i as i64) as f64).collect();
            let want: i64 = (0..n as i64).map(|i| (3 * i + 1) * (7 - i)).sum();
            assert_eq!(dot(&a, &b), want as f64, "length {n}");
        }
    }

    /// The rank check of `x` with its own sweep.
    fn check(x: &[f64], k: usize, p: usize, terms: &[Term]) -> Result<()> {
        check_rank(x, k, p, terms, &ColumnSweep::of(x, k, p))
    }

    /// Clearly on either side of the tolerance, for k below and past the
    /// parallel threshold: a remainder of 1e-6 of
    /// the column's squared norm passes, an exact combination and one of
    /// 1e-14 are refused, naming the term.
    #[test]
    fn collinear_columns_are_named() {
        for k in [600, PARALLEL_MIN_ROWS + 777] {
            assert!(check(&design(k, 1e-3), k, 4, &terms(4)).is_ok());
            for noise in [0.0, 1e-7] {
                let e = check(&design(k, noise), k, 4, &terms(4)).unwrap_err();
                assert!(e.to_string().contains("term 't3'"), "{e}");
            }
        }
        let k = 600;
        let mut x = design(k, 1.0);
        x[4 * 17 + 2] = f64::NAN;
        let e = check(&x, k, 4, &terms(4)).unwrap_err();
        assert!(e.to_string().contains("term 't2'"), "{e}");
    }

    /// The one-sweep shifts and scales are those of the two sweeps they
    /// replaced (the mean, then the running largest |x − shift|), bit for
    /// bit, on invented columns whose largest deviation lies above or below
    /// the mean, with NaN in some rows or all, and with an infinity.
    #[test]
    fn one_sweep_shifts_and_scales_are_the_two_sweeps_values() {
        let (k, p) = (1001, 7);
        let x: Vec<f64> = (0..k)
            .flat_map(|i| {
                let u = ((i * 7919) % 1013) as f64 / 1013.0;
                [
                    1.0,
                    1e6 + u * u,
                    -1e3 * u * u * u,
                    if i % 5 == 3 { f64::NAN } else { u },
                    if i == k / 2 { f64::INFINITY } else { u },
                    f64::NAN,
                    4.0,
                ]
            })
            .collect();
        let (shift, scale) = shifts_and_scales(&ColumnSweep::of(&x, k, p), k, p);
        for j in 0..p {
            let col = || (0..k).map(|i| x[i * p + j]);
            let mean = col().sum::<f64>() / k as f64;
            let s = if j > 0 && mean.is_finite() { mean } else { 0.0 };
            let b = col().fold(0.0f64, |m, v| m.max((v - s).abs()));
            let b = if b > 0.0 && b.is_finite() { b } else { 1.0 };
            assert_eq!(shift[j].to_bits(), s.to_bits(), "column {j}");
            assert_eq!(scale[j].to_bits(), b.to_bits(), "column {j}");
        }
    }
}
