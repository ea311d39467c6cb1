//! The rank check of the design: modified Gram–Schmidt over its columns.

use super::Term;
use crate::error::{Error, Result};
use crate::tolerance;
use rayon::prelude::*;

/// Modified Gram–Schmidt over the columns: a column whose remainder after
/// projecting out the earlier ones keeps less than [`tolerance::COLLINEAR`]
/// of its squared norm is a linear combination of them (Golub & Van Loan,
/// *Matrix Computations*, 4th ed., 2013, §5.2.8; cited from memory).
///
/// Every column but the intercept is centred first: the span of [1, X] is
/// that of [1, X − x̄], and a large offset with a small spread (m = 1e6 + i,
/// dates as Unix times) then keeps its digits instead of looking collinear
/// with the intercept. Scaling a column does not change the rank; scaling
/// it to a largest magnitude of 1 keeps the squares from underflowing
/// (values near 1e-300) or overflowing (near 1e300).
///
/// Worked "right-looking": once column b is normalised to q_b, q_b is
/// projected out of every later column in one sweep over the rows. Each
/// column meets the same projections in the same order as when each is
/// finished before the next is begun (the order of the textbook
/// algorithm), and every sum runs over the rows in row order, so the
/// numbers are the same; the sweeps carry the sums of several columns at
/// once instead of one sum after another.
///
/// # Errors
/// [`Error::Model`] naming the first term that is a combination of the
/// terms before it.
pub(super) fn check_rank(x: &[f64], k: usize, p: usize, terms: &[Term]) -> Result<()> {
    let collinear =
        |_, norm0: f64, norm: f64| norm.is_nan() || norm <= tolerance::COLLINEAR * norm0;
    let Some(b) = sweep(x, k, p, collinear) else {
        return Ok(());
    };
    let earlier: Vec<&str> = terms[..b].iter().map(|t| t.name.as_str()).collect();
    Err(Error::Model(format!(
        "term '{}' is a linear combination of the terms before it ({}) in the included \
         studies (collinear moderators), so the coefficients cannot be separated; drop one \
         of the moderators involved",
        terms[b].name,
        earlier.join(", ")
    )))
}

/// The Gram–Schmidt sweep of [`check_rank`] over the k × p row-major `x`:
/// `stop(b, ‖c_b‖², ‖r_b‖²)` is asked for each column b in order (c_b the
/// centred and scaled column, r_b what is left of it after the earlier
/// columns are projected out), and the first b where it says so is
/// returned.
fn sweep(
    x: &[f64],
    k: usize,
    p: usize,
    mut stop: impl FnMut(usize, f64, f64) -> bool,
) -> Option<usize> {
    if k == 0 || p == 0 {
        return None;
    }
    // The sums start at −0.0 as `Iterator::sum` does; each column's sums
    // run over the rows in order, the columns' side by side.
    let mut sums = vec![-0.0; p];
    for row in x.chunks_exact(p) {
        for (s, &v) in sums.iter_mut().zip(row) {
            *s += v;
        }
    }
    // Column-major copy, centred (all but column 0) and scaled to a
    // largest magnitude of 1, with each column's ‖c_j‖²: the columns in
    // parallel (each worked alone, so the same on any number of threads;
    // most of the time here is the first touch of the copy's memory).
    let means: Vec<Option<f64>> = (0..p)
        .map(|j| Some(sums[j] / k as f64).filter(|m| j > 0 && m.is_finite()))
        .collect();
    let mut cols = vec![0.0; p * k];
    let norm0: Vec<f64> = cols
        .par_chunks_mut(k)
        .enumerate()
        .map(|(j, col)| {
            for (c, row) in col.iter_mut().zip(x.chunks_exact(p)) {
                *c = match means[j] {
                    Some(mean) => row[j] - mean,
                    None => row[j],
                };
            }
            let scale = col.iter().fold(0.0f64, |m, c| m.max(c.abs()));
            if scale > 0.0 && scale.is_finite() {
                for c in col.iter_mut() {
                    *c /= scale;
                }
            }
            col.iter().map(|c| c * c).sum::<f64>()
        })
        .collect();
    // ‖r_0‖²: column 0 has nothing to be projected out of it.
    let mut norm = cols[..k].iter().map(|c| c * c).sum::<f64>();
    let mut dots = vec![-0.0; p];
    for b in 0..p {
        if stop(b, norm0[b], norm) {
            return Some(b);
        }
        let n = norm.sqrt();
        let (done, later) = cols.split_at_mut((b + 1) * k);
        let q = &mut done[b * k..];
        let rest = p - b - 1;
        // q_b, and the dot of every later column with it.
        dots[..rest].fill(-0.0);
        for (i, c) in q.iter_mut().enumerate() {
            *c /= n;
            for (m, d) in dots[..rest].iter_mut().enumerate() {
                *d += later[m * k + i] * *c;
            }
        }
        // The projections, with ‖r_{b+1}‖² after its last one.
        norm = -0.0;
        for (i, &qi) in q.iter().enumerate() {
            for (m, d) in dots[..rest].iter().enumerate() {
                let c = &mut later[m * k + i];
                *c -= d * qi;
                if m == 0 {
                    norm += *c * *c;
                }
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The column-by-column algorithm as first written, for comparison.
    fn textbook(x: &[f64], k: usize, p: usize) -> Vec<(f64, f64)> {
        let mut q: Vec<Vec<f64>> = Vec::with_capacity(p);
        let mut out = Vec::new();
        for j in 0..p {
            let mut col: Vec<f64> = (0..k).map(|i| x[i * p + j]).collect();
            if j > 0 {
                let mean = col.iter().sum::<f64>() / k as f64;
                if mean.is_finite() {
                    for c in &mut col {
                        *c -= mean;
                    }
                }
            }
            let scale = col.iter().fold(0.0f64, |m, c| m.max(c.abs()));
            if scale > 0.0 && scale.is_finite() {
                for c in &mut col {
                    *c /= scale;
                }
            }
            let norm0: f64 = col.iter().map(|c| c * c).sum();
            for b in &q {
                let dot: f64 = col.iter().zip(b).map(|(c, b)| c * b).sum();
                for (c, b) in col.iter_mut().zip(b) {
                    *c -= dot * b;
                }
            }
            let norm: f64 = col.iter().map(|c| c * c).sum();
            out.push((norm0, norm));
            let n = norm.sqrt();
            q.push(col.into_iter().map(|c| c / n).collect());
        }
        out
    }

    fn names(p: usize) -> Vec<Term> {
        (0..p)
            .map(|j| Term {
                name: format!("t{j}"),
            })
            .collect()
    }

    /// Invented design: an intercept and `p − 1` scrambled columns, the
    /// last `near` of them close to a combination of the others.
    fn design(k: usize, p: usize, near: f64) -> Vec<f64> {
        let mut x = Vec::with_capacity(k * p);
        for i in 0..k {
            x.push(1.0);
            for j in 1..p - 1 {
                x.push((((i + 7) * (j * 31 + 3) * 7919) % 1009) as f64 / 97.0 + 1e3 * j as f64);
            }
            let combo: f64 = x[i * p + 1..i * p + p - 1].iter().sum();
            x.push(combo + near * (((i * 104_729) % 89) as f64 - 44.0));
        }
        x
    }

    #[test]
    fn right_looking_sums_equal_the_textbook_order_bit_for_bit() {
        for (k, p, near) in [(50, 2, 1e-3), (300, 4, 1e-3), (1000, 6, 1e-6), (7, 3, 0.0)] {
            let x = design(k, p, near);
            let expected: Vec<(u64, u64)> = textbook(&x, k, p)
                .iter()
                .map(|(a, b)| (a.to_bits(), b.to_bits()))
                .collect();
            let mut got = Vec::new();
            let stopped = sweep(&x, k, p, |_, n0, n| {
                got.push((n0.to_bits(), n.to_bits()));
                false
            });
            assert_eq!(stopped, None);
            assert_eq!(got, expected, "{k} × {p}");
        }
    }

    #[test]
    fn an_exact_combination_is_named() {
        let (k, p) = (200, 5);
        let x = design(k, p, 0.0);
        let e = check_rank(&x, k, p, &names(p)).unwrap_err();
        assert!(e.to_string().contains("term 't4'"), "{e}");
        assert!(e.to_string().contains("(t0, t1, t2, t3)"), "{e}");
    }
}
