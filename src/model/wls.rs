//! Weighted least squares at a fixed τ²: the building block of every estimator.

use nalgebra::{DMatrix, DVector};

/// Data of a meta-regression: effects, sampling variances and the design.
#[derive(Debug, Clone)]
pub struct Data<'a> {
    /// Effects y_i.
    pub y: &'a [f64],
    /// Sampling variances v_i (> 0).
    pub v: &'a [f64],
    /// Design matrix, row-major k × p.
    pub x: &'a [f64],
    /// Number of columns.
    pub p: usize,
}

impl Data<'_> {
    /// Number of studies.
    pub fn k(&self) -> usize {
        self.y.len()
    }

    fn row(&self, i: usize) -> &[f64] {
        &self.x[i * self.p..(i + 1) * self.p]
    }
}

/// What a weighted fit at one τ² gives.
///
/// With w_i = 1/(v_i + τ²), W = diag(w), M = X'WX:
/// β̂ = M⁻¹X'Wy, r = y − Xβ̂, Q = Σ w_i r_i²,
/// tr P = Σ w_i − tr(M⁻¹ X'W²X) where P = W − WXM⁻¹X'W
/// (Viechtbauer 2005, *J. Educ. Behav. Stat.* 30:261, eq. for the REML score).
#[derive(Debug, Clone)]
pub struct Wls {
    /// The τ² the fit was made at.
    pub tau2: f64,
    /// Coefficients β̂.
    pub beta: DVector<f64>,
    /// M⁻¹ = (X'WX)⁻¹, the model-based covariance of β̂.
    pub m_inv: DMatrix<f64>,
    /// Weighted residual sum of squares Q = Σ w_i r_i².
    pub q: f64,
    /// Σ w_i.
    pub sum_w: f64,
    /// Σ w_i² r_i² = y'PPy.
    pub sum_w2r2: f64,
    /// tr P (only when asked for; NaN otherwise).
    pub tr_p: f64,
    /// Σ ln(v_i + τ²).
    pub sum_log_vt: f64,
    /// ln det M.
    pub logdet_m: f64,
}

/// Fits β by weighted least squares at `tau2`.
///
/// Returns `None` when X'WX is not positive definite (collinear design).
/// With `trace`, also computes tr P (one more p×p accumulation).
pub fn fit_at(data: &Data<'_>, tau2: f64, trace: bool) -> Option<Wls> {
    let p = data.p;
    let k = data.k();
    let mut m = vec![0.0; p * p];
    let mut n2 = if trace { vec![0.0; p * p] } else { Vec::new() };
    let mut b = vec![0.0; p];
    let mut sum_w = 0.0;
    let mut sum_log_vt = 0.0;
    for i in 0..k {
        let vt = data.v[i] + tau2;
        let w = 1.0 / vt;
        sum_w += w;
        sum_log_vt += vt.ln();
        let xi = data.row(i);
        let wy = w * data.y[i];
        for a in 0..p {
            let wxa = w * xi[a];
            b[a] += xi[a] * wy;
            for c in a..p {
                m[a * p + c] += wxa * xi[c];
            }
            if trace {
                let w2xa = wxa * w;
                for c in a..p {
                    n2[a * p + c] += w2xa * xi[c];
                }
            }
        }
    }
    for a in 0..p {
        for c in 0..a {
            m[a * p + c] = m[c * p + a];
            if trace {
                n2[a * p + c] = n2[c * p + a];
            }
        }
    }
    let mm = DMatrix::from_row_slice(p, p, &m);
    let chol = mm.cholesky()?;
    let logdet_m = 2.0
        * chol
            .l_dirty()
            .diagonal()
            .iter()
            .map(|d| d.ln())
            .sum::<f64>();
    let beta = chol.solve(&DVector::from_column_slice(&b));
    let m_inv = chol.inverse();
    if !beta.iter().all(|x| x.is_finite()) || !logdet_m.is_finite() {
        return None;
    }
    let mut q = 0.0;
    let mut sum_w2r2 = 0.0;
    for i in 0..k {
        let w = 1.0 / (data.v[i] + tau2);
        let xi = data.row(i);
        let mut fit = 0.0;
        for a in 0..p {
            fit += xi[a] * beta[a];
        }
        let r = data.y[i] - fit;
        let wr2 = w * r * r;
        q += wr2;
        sum_w2r2 += w * wr2;
    }
    let tr_p = if trace {
        let mut t = 0.0;
        for a in 0..p {
            for c in 0..p {
                t += m_inv[(a, c)] * n2[c * p + a];
            }
        }
        sum_w - t
    } else {
        f64::NAN
    };
    Some(Wls {
        tau2,
        beta,
        m_inv,
        q,
        sum_w,
        sum_w2r2,
        tr_p,
        sum_log_vt,
        logdet_m,
    })
}

/// Fitted value x_i'β̂ of study i.
pub fn fitted(data: &Data<'_>, beta: &DVector<f64>, i: usize) -> f64 {
    data.row(i)
        .iter()
        .zip(beta.iter())
        .map(|(x, b)| x * b)
        .sum()
}

/// x_i' A x_i for a p × p matrix A.
pub fn quad_form(data: &Data<'_>, a: &DMatrix<f64>, i: usize) -> f64 {
    let xi = data.row(i);
    let p = data.p;
    let mut s = 0.0;
    for r in 0..p {
        let mut t = 0.0;
        for c in 0..p {
            t += a[(r, c)] * xi[c];
        }
        s += xi[r] * t;
    }
    s
}

/// Ordinary least squares (all weights 1): returns (β̂, (X'X)⁻¹, residual sum of squares).
pub fn ols(data: &Data<'_>) -> Option<(DVector<f64>, DMatrix<f64>, f64)> {
    let ones = vec![1.0; data.k()];
    // With v = 1 and τ² = 0 every weight is 1.
    let unit = Data {
        y: data.y,
        v: &ones,
        x: data.x,
        p: data.p,
    };
    let f = fit_at(&unit, 0.0, false)?;
    Some((f.beta, f.m_inv, f.q))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn intercept_only_is_the_weighted_mean() {
        let y = [1.0, 2.0, 4.0];
        let v = [0.5, 1.0, 2.0];
        let x = [1.0, 1.0, 1.0];
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let f = fit_at(&d, 0.5, true).unwrap();
        let w: Vec<f64> = v.iter().map(|v| 1.0 / (v + 0.5)).collect();
        let sw: f64 = w.iter().sum();
        let mean = (w[0] * 1.0 + w[1] * 2.0 + w[2] * 4.0) / sw;
        assert!((f.beta[0] - mean).abs() < 1e-14);
        assert!((f.m_inv[(0, 0)] - 1.0 / sw).abs() < 1e-14);
        // tr P = Σw − Σw²/Σw for the intercept-only model.
        let sw2: f64 = w.iter().map(|w| w * w).sum();
        assert!((f.tr_p - (sw - sw2 / sw)).abs() < 1e-13);
    }

    #[test]
    fn collinear_design_is_refused() {
        let y = [1.0, 2.0, 3.0];
        let v = [1.0; 3];
        let x = [1.0, 2.0, 1.0, 2.0, 1.0, 2.0];
        assert!(fit_at(
            &Data {
                y: &y,
                v: &v,
                x: &x,
                p: 2
            },
            0.0,
            false
        )
        .is_none());
    }
}
