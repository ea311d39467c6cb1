//! Ordinary least squares (every weight 1) without a column of ones for
//! the variances: the sums of [`super::wls::fit_with`] at τ² = 0 with
//! v_i = 1, formed without the division w_i = 1/(v_i + τ²) (which is
//! exactly 1 there) and without reading a variance per row. Every product
//! and sum is the one `fit_with` forms, in the same order (w·x is x, w·y
//! is y, w·r² is r·r exactly), so the results are the same bits (tested).

use super::wls::{chunks, count_pass, Data, PARALLEL_MIN_ROWS};
use nalgebra::{DMatrix, DVector};

/// β̂ = (X'X)⁻¹X'y, (X'X)⁻¹ and the residual sum of squares, for a design
/// of 1 to 8 columns (None for a wider one, or when X'X is not positive
/// definite or β̂ is not finite).
pub(super) fn ols(data: &Data<'_>) -> Option<(DVector<f64>, DMatrix<f64>, f64)> {
    let p = data.p;
    if !(1..=8).contains(&p) {
        return None;
    }
    let (mut m, b) = cross_products(data);
    for a in 0..p {
        for c in 0..a {
            m[a * p + c] = m[c * p + a];
        }
    }
    let chol = DMatrix::from_row_slice(p, p, &m).cholesky()?;
    let beta = chol.solve(&DVector::from_column_slice(&b));
    let m_inv = chol.inverse();
    if !beta.iter().all(|x| x.is_finite()) {
        return None;
    }
    let rss = residual_squares(data, beta.as_slice());
    Some((beta, m_inv, rss))
}

/// X'X (upper triangle, row-major p × p) and X'y: in fixed chunks on every
/// core past [`PARALLEL_MIN_ROWS`] rows, the chunks' sums added in order
/// to zeros (as [`super::wls`] adds them).
fn cross_products(data: &Data<'_>) -> (Vec<f64>, Vec<f64>) {
    use rayon::prelude::*;
    count_pass();
    let p = data.p;
    let serial = |d: &Data<'_>| {
        macro_rules! fixed {
            ($n:literal) => {
                cross_products_fixed::<$n>(d.x, d.y)
            };
        }
        by_columns!(p, fixed, unreachable_width())
    };
    if data.k() < PARALLEL_MIN_ROWS {
        return serial(data);
    }
    let parts: Vec<(Vec<f64>, Vec<f64>)> = chunks(data).par_iter().map(serial).collect();
    let (mut m, mut b) = (vec![0.0; p * p], vec![0.0; p]);
    for (pm, pb) in parts {
        for (t, x) in m.iter_mut().zip(&pm) {
            *t += x;
        }
        for (t, x) in b.iter_mut().zip(&pb) {
            *t += x;
        }
    }
    (m, b)
}

/// The widths past 8 never reach the sums ([`ols`] refuses them first).
fn unreachable_width() -> (Vec<f64>, Vec<f64>) {
    (Vec::new(), Vec::new())
}

/// [`cross_products`] of one run of rows, `P` columns.
fn cross_products_fixed<const P: usize>(x: &[f64], y: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let mut m = [[0.0f64; P]; P];
    let mut b = [0.0f64; P];
    for (xi, &yi) in x.chunks_exact(P).zip(y) {
        for a in 0..P {
            b[a] += xi[a] * yi;
            for c in a..P {
                m[a][c] += xi[a] * xi[c];
            }
        }
    }
    (m.iter().flatten().copied().collect(), b.to_vec())
}

/// Σ (y_i − x_i'β)², in the chunks of [`cross_products`].
fn residual_squares(data: &Data<'_>, beta: &[f64]) -> f64 {
    use rayon::prelude::*;
    count_pass();
    let p = data.p;
    let serial = |d: &Data<'_>| {
        macro_rules! fixed {
            ($n:literal) => {
                residual_squares_fixed::<$n>(d.x, d.y, beta)
            };
        }
        by_columns!(p, fixed, f64::NAN)
    };
    if data.k() < PARALLEL_MIN_ROWS {
        return serial(data);
    }
    let parts: Vec<f64> = chunks(data).par_iter().map(serial).collect();
    parts.iter().fold(0.0, |acc, x| acc + x)
}

/// [`residual_squares`] of one run of rows, `P` columns.
fn residual_squares_fixed<const P: usize>(x: &[f64], y: &[f64], beta: &[f64]) -> f64 {
    let mut q = 0.0;
    for (xi, &yi) in x.chunks_exact(P).zip(y) {
        let mut fit = 0.0;
        for a in 0..P {
            fit += xi[a] * beta[a];
        }
        let r = yi - fit;
        q += r * r;
    }
    q
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::wls::{fit_with, Want, CHUNK_ROWS};

    /// The same bits as `fit_with` with a column of ones for the
    /// variances, at τ² = 0, whatever the data's own variances: invented
    /// designs of 1 to 8 columns (a calendar year, tiny and wide values),
    /// small and past the parallel threshold.
    #[test]
    fn unit_weights_are_the_weighted_fit_at_one_bit_for_bit() {
        for k in [12usize, PARALLEL_MIN_ROWS + CHUNK_ROWS / 3] {
            for p in 1..=8 {
                let x: Vec<f64> = (0..k * p)
                    .map(|n| {
                        let (i, j) = (n / p, n % p);
                        let u = ((i * 7919 + j * 104_729) % 1013) as f64 / 1013.0;
                        match j {
                            0 => 1.0,
                            1 => 1990.0 + (i % 31) as f64,
                            2 => 1e-3 * u,
                            _ => u * (j as f64) - 0.5 * u * u,
                        }
                    })
                    .collect();
                let y: Vec<f64> = (0..k)
                    .map(|i| 0.3 + ((i * 31) % 97) as f64 / 97.0 - 0.01 * (i % 7) as f64)
                    .collect();
                let ones = vec![1.0; k];
                let own: Vec<f64> = (0..k).map(|i| 0.05 + (i % 5) as f64).collect();
                let data = Data {
                    y: &y,
                    v: &own,
                    x: &x,
                    p,
                };
                let unit = Data {
                    v: &ones,
                    ..data.clone()
                };
                let want = fit_with(&unit, 0.0, Want::Q).expect("full rank");
                let (beta, m_inv, rss) = ols(&data).expect("full rank");
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(
                    bits(beta.as_slice()),
                    bits(want.beta.as_slice()),
                    "p {p}, k {k}"
                );
                assert_eq!(
                    bits(m_inv.as_slice()),
                    bits(want.m_inv.as_slice()),
                    "p {p}, k {k}"
                );
                assert_eq!(rss.to_bits(), want.q.to_bits(), "p {p}, k {k}");
            }
        }
        // Nine columns are left to the weighted fit.
        let x = vec![1.0; 90];
        let y = vec![0.0; 10];
        let d = Data {
            y: &y,
            v: &[1.0; 10],
            x: &x,
            p: 9,
        };
        assert!(ols(&d).is_none());
    }
}
