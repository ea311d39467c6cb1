//! Ordinary least squares from a site's means and co-moments, and the HC3
//! sandwich from a second look at its rows.

use super::moments::Moments;
use crate::tolerance;

/// Why a site's regression cannot be fitted.
#[derive(Debug, Clone, PartialEq)]
pub enum OlsProblem {
    /// Fewer rows than the model needs for a residual degree of freedom.
    TooFewRows {
        /// Rows in the site.
        n: u64,
        /// Rows needed (predictors + 2).
        need: u64,
    },
    /// A predictor (its index in the moment vector) takes one value only.
    Constant(usize),
    /// A predictor (its index in the moment vector) is a linear combination of the ones before it.
    Collinear(usize),
    /// The response takes one value only.
    ConstantResponse,
    /// The predictors reproduce the response exactly (RSS is rounding), so
    /// the slopes have no standard error.
    ExactFit,
    /// A variable (its index in the moment vector) has values so large that
    /// its sums of squares, or the slopes' variances, overflow double
    /// precision.
    TooLarge(usize),
    /// A variable (its index in the moment vector) has values so small that
    /// its squared deviations underflow to zero, so it would look constant.
    TooSmall(usize),
}

/// Values below this size in absolute value (about 1e-150) have squares
/// that fall to the subnormal range or to zero in double precision
/// (the smallest normal number is about 2.2e-308; IEEE 754).
const TINY: f64 = 1e-150;

/// The range problem of variable `i`, if any: a co-moment that is not
/// finite (the squares overflowed), or one that is zero or subnormal while
/// the variable's mean is not zero but smaller than [`TINY`] (the squares
/// underflowed; a truly constant column of such values is out of range
/// as well).
fn range_problem(m: &Moments, i: usize) -> Option<OlsProblem> {
    let c = m.comoment(i, i);
    let mean = m.mean(i).abs();
    if !c.is_finite() || !mean.is_finite() {
        return Some(OlsProblem::TooLarge(i));
    }
    if c < f64::MIN_POSITIVE && mean > 0.0 && mean < TINY {
        return Some(OlsProblem::TooSmall(i));
    }
    None
}

/// An OLS fit with an intercept, from moments.
#[derive(Debug, Clone, PartialEq)]
pub struct OlsFit {
    /// Indices of the predictors in the moment vector (without the intercept).
    pub predictors: Vec<usize>,
    /// Index of the response.
    pub response: usize,
    /// Slopes, one per predictor.
    pub beta: Vec<f64>,
    /// S⁻¹, the inverse of the predictors' co-moment matrix (p × p, row-major).
    pub s_inv: Vec<f64>,
    /// Residual sum of squares.
    pub rss: f64,
    /// Residual degrees of freedom n − p − 1.
    pub df: f64,
    /// Rows.
    pub n: u64,
}

impl OlsFit {
    /// Classical standard error of slope `j`: √(σ̂² [S⁻¹]ⱼⱼ), σ̂² = RSS/(n − p − 1).
    pub fn se(&self, j: usize) -> f64 {
        let p = self.beta.len();
        (self.rss / self.df * self.s_inv[j * p + j]).sqrt()
    }
}

/// Fits y = b₀ + Σ bⱼ zⱼ + e by OLS from the means and co-moments of (z, y).
///
/// # Formula
/// With an intercept, the slopes solve the centred normal equations
/// S b = s, where S = Σ (zᵢ − z̄)(zᵢ − z̄)ᵀ and s = Σ (zᵢ − z̄)(yᵢ − ȳ) are
/// co-moments; RSS = Σ(yᵢ − ȳ)² − sᵀb; and the slope block of (XᵀX)⁻¹ for
/// X = [1, Z] is S⁻¹ (partitioned inverse: centring makes the intercept
/// column orthogonal to the others), so Var(b) = σ̂² S⁻¹ with
/// σ̂² = RSS/(n − p − 1) (Greene, Econometric Analysis, 7th ed., sections
/// 3.5 and 4.3, from memory; any regression text).
///
/// S is factored by Cholesky; a predictor whose part not explained by the
/// earlier ones has a squared norm below [`tolerance::COLLINEAR`] of its
/// own is reported as collinear, one with zero co-moment as constant.
/// Before that, a variable whose squares overflow or underflow double
/// precision is reported as out of range (not as constant or as an exact
/// fit, which is what the overflowed or vanished sums would suggest), and
/// so is a fit whose slopes or variances are not finite numbers.
///
/// # Errors
/// [`OlsProblem`] naming the offending variable.
pub fn fit(m: &Moments, predictors: &[usize], response: usize) -> Result<OlsFit, OlsProblem> {
    let p = predictors.len();
    let need = p as u64 + 2;
    if m.n() < need {
        return Err(OlsProblem::TooFewRows { n: m.n(), need });
    }
    if let Some(problem) = predictors
        .iter()
        .chain(std::iter::once(&response))
        .find_map(|&i| range_problem(m, i))
    {
        return Err(problem);
    }
    let mut s = vec![0.0; p * p];
    for (a, &i) in predictors.iter().enumerate() {
        for (b, &j) in predictors.iter().enumerate() {
            s[a * p + b] = m.comoment(i, j);
        }
    }
    for (a, &i) in predictors.iter().enumerate() {
        if s[a * p + a] <= 0.0 {
            return Err(OlsProblem::Constant(i));
        }
    }
    let syy = m.comoment(response, response);
    if syy <= 0.0 {
        return Err(OlsProblem::ConstantResponse);
    }
    // Cholesky S = L Lᵀ with the collinearity check on each pivot.
    let mut l = vec![0.0; p * p];
    for j in 0..p {
        let mut d = s[j * p + j];
        for k in 0..j {
            d -= l[j * p + k] * l[j * p + k];
        }
        if d <= tolerance::COLLINEAR * s[j * p + j] {
            return Err(OlsProblem::Collinear(predictors[j]));
        }
        let djj = d.sqrt();
        l[j * p + j] = djj;
        for i in j + 1..p {
            let mut v = s[i * p + j];
            for k in 0..j {
                v -= l[i * p + k] * l[j * p + k];
            }
            l[i * p + j] = v / djj;
        }
    }
    // L⁻¹ (lower triangular), then S⁻¹ = L⁻ᵀ L⁻¹.
    let mut li = vec![0.0; p * p];
    for j in 0..p {
        li[j * p + j] = 1.0 / l[j * p + j];
        for i in j + 1..p {
            let mut v = 0.0;
            for k in j..i {
                v -= l[i * p + k] * li[k * p + j];
            }
            li[i * p + j] = v / l[i * p + i];
        }
    }
    let mut s_inv = vec![0.0; p * p];
    for i in 0..p {
        for j in 0..p {
            s_inv[i * p + j] = (i.max(j)..p).map(|k| li[k * p + i] * li[k * p + j]).sum();
        }
    }
    let sy: Vec<f64> = predictors
        .iter()
        .map(|&i| m.comoment(i, response))
        .collect();
    let beta: Vec<f64> = (0..p)
        .map(|i| (0..p).map(|j| s_inv[i * p + j] * sy[j]).sum())
        .collect();
    let explained: f64 = beta.iter().zip(&sy).map(|(b, s)| b * s).sum();
    let rss = (syy - explained).max(0.0);
    if rss <= tolerance::EXACT_FIT_RSS * syy {
        return Err(OlsProblem::ExactFit);
    }
    let fit = OlsFit {
        predictors: predictors.to_vec(),
        response,
        beta,
        s_inv,
        rss,
        df: m.n() as f64 - p as f64 - 1.0,
        n: m.n(),
    };
    if (0..p).any(|j| !fit.beta[j].is_finite() || !fit.se(j).is_finite()) {
        return Err(OlsProblem::TooLarge(response));
    }
    Ok(fit)
}

/// The HC3 variance of one slope, summed over a site's rows in a second pass.
///
/// # Formula
/// HC3 (MacKinnon & White 1985, J. Econometrics 29:305; Long & Ervin 2000,
/// The American Statistician 54:217):
/// Var(b) = (XᵀX)⁻¹ Xᵀ diag(eᵢ²/(1 − hᵢ)²) X (XᵀX)⁻¹ with leverages
/// hᵢ = xᵢᵀ(XᵀX)⁻¹xᵢ. In centred coordinates (XᵀX)⁻¹ = diag(1/n, S⁻¹), so
/// hᵢ = 1/n + (zᵢ − z̄)ᵀ S⁻¹ (zᵢ − z̄), eᵢ = (yᵢ − ȳ) − bᵀ(zᵢ − z̄), and the
/// variance of slope j is Σᵢ (aⱼᵀ(zᵢ − z̄))² eᵢ²/(1 − hᵢ)² with aⱼ the j-th
/// row of S⁻¹: one number per site, whatever the number of rows.
#[derive(Debug, Clone)]
pub struct Hc3 {
    target: usize,
    means: Vec<f64>,
    y_mean: f64,
    beta: Vec<f64>,
    s_inv: Vec<f64>,
    inv_n: f64,
    sum: f64,
    leverage_one: bool,
}

impl Hc3 {
    /// Prepares the sum for slope `target` of `fit`, whose moments are `m`.
    pub fn new(fit: &OlsFit, m: &Moments, target: usize) -> Self {
        Hc3 {
            target,
            means: fit.predictors.iter().map(|&i| m.mean(i)).collect(),
            y_mean: m.mean(fit.response),
            beta: fit.beta.clone(),
            s_inv: fit.s_inv.clone(),
            inv_n: 1.0 / fit.n as f64,
            sum: 0.0,
            leverage_one: false,
        }
    }

    /// Adds one row: predictor values `z` (in the fit's order) and response `y`.
    #[inline]
    pub fn add(&mut self, z: &[f64], y: f64) {
        match self.term(z, y) {
            Some(t) => self.sum += t,
            None => self.leverage_one = true,
        }
    }

    /// Adds the sum of the terms of other rows ([`Hc3::term`]) and whether
    /// one of them had leverage 1.
    pub fn absorb(&mut self, sum: f64, leverage_one: bool) {
        self.sum += sum;
        self.leverage_one |= leverage_one;
    }

    /// One row's term of the sum, (aⱼᵀ(zᵢ − z̄))² eᵢ²/(1 − hᵢ)² (see the
    /// type's formula), or None when its leverage is 1.
    #[inline]
    pub fn term(&self, z: &[f64], y: f64) -> Option<f64> {
        let p = self.beta.len();
        let mut zc = [0.0f64; super::moments::MAX_DIM];
        let mut e = y - self.y_mean;
        for j in 0..p {
            zc[j] = z[j] - self.means[j];
            e -= self.beta[j] * zc[j];
        }
        let mut h = self.inv_n;
        let mut a = 0.0;
        for i in 0..p {
            let row: f64 = self.s_inv[i * p..(i + 1) * p]
                .iter()
                .zip(&zc[..p])
                .map(|(s, z)| s * z)
                .sum();
            h += zc[i] * row;
            if i == self.target {
                a = row;
            }
        }
        let one_minus = 1.0 - h;
        if one_minus <= tolerance::LEVERAGE_ONE {
            return None;
        }
        let u = a * e / one_minus;
        Some(u * u)
    }

    /// The HC3 standard error, or `None` when a row had leverage 1 (it alone
    /// determines a coefficient, and HC3 divides by 1 − hᵢ = 0).
    pub fn se(&self) -> Option<f64> {
        (!self.leverage_one).then(|| self.sum.sqrt())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn moments(rows: &[[f64; 3]]) -> Moments {
        let mut m = Moments::new(3);
        rows.iter().for_each(|r| m.push(r));
        m
    }

    /// y = 1 + 2x exactly, plus one perturbed point; worked by hand:
    /// x = 0,1,2,3; y = 1,3,5,8 → x̄ = 1.5, ȳ = 4.25, Sxx = 5, Sxy = 11.5,
    /// b = 2.3, RSS = Syy − b·Sxy = 26.75 − 26.45 = 0.3, se = √(0.3/2/5).
    #[test]
    fn simple_regression_by_hand() {
        let m = moments(&[
            [0.0, 0.0, 1.0],
            [1.0, 0.0, 3.0],
            [2.0, 0.0, 5.0],
            [3.0, 0.0, 8.0],
        ]);
        let f = fit(&m, &[0], 2).unwrap();
        assert!((f.beta[0] - 2.3).abs() < 1e-14);
        assert!((f.rss - 0.3).abs() < 1e-13);
        assert!((f.se(0) - (0.3f64 / 2.0 / 5.0).sqrt()).abs() < 1e-14);
    }

    #[test]
    fn problems_are_named() {
        let m = moments(&[
            [1.0, 2.0, 1.0],
            [1.0, 3.0, 2.0],
            [1.0, 4.0, 4.0],
            [1.0, 1.0, 0.0],
        ]);
        assert_eq!(fit(&m, &[0], 2).unwrap_err(), OlsProblem::Constant(0));
        assert_eq!(
            fit(&m, &[1, 0], 2).unwrap_err(),
            OlsProblem::Constant(0),
            "constant checked before collinearity"
        );
        let m = moments(&[
            [1.0, 2.0, 1.0],
            [2.0, 4.0, 2.0],
            [3.0, 6.0, 4.0],
            [4.0, 8.0, 3.0],
        ]);
        assert_eq!(fit(&m, &[0, 1], 2).unwrap_err(), OlsProblem::Collinear(1));
        let m = moments(&[[1.0, 0.0, 1.0], [2.0, 0.0, 2.0]]);
        assert_eq!(
            fit(&m, &[0], 2).unwrap_err(),
            OlsProblem::TooFewRows { n: 2, need: 3 }
        );
        let m = moments(&[[1.0, 0.0, 1.0], [2.0, 0.0, 1.0], [3.0, 0.0, 1.0]]);
        assert_eq!(fit(&m, &[0], 2).unwrap_err(), OlsProblem::ConstantResponse);
        let m = moments(&[
            [1.0, 0.0, 3.0],
            [2.0, 0.0, 5.0],
            [3.0, 0.0, 7.0],
            [5.0, 0.0, 11.0],
        ]);
        assert_eq!(fit(&m, &[0], 2).unwrap_err(), OlsProblem::ExactFit);
    }

    /// HC3 of a slope in simple regression, worked by hand on the data of
    /// `simple_regression_by_hand`: b = 2.3, intercept 4.25 − 2.3·1.5 = 0.8;
    /// e = y − 0.8 − 2.3x = (0.2, −0.1, −0.4, 0.3); h = 1/4 + (x − 1.5)²/5 =
    /// (0.7, 0.3, 0.3, 0.7); aᵢ = (x − 1.5)/5; Var = Σ aᵢ² eᵢ²/(1 − hᵢ)².
    #[test]
    fn hc3_by_hand() {
        let rows = [
            [0.0, 0.0, 1.0],
            [1.0, 0.0, 3.0],
            [2.0, 0.0, 5.0],
            [3.0, 0.0, 8.0],
        ];
        let m = moments(&rows);
        let f = fit(&m, &[0], 2).unwrap();
        let mut h = Hc3::new(&f, &m, 0);
        rows.iter().for_each(|r| h.add(&[r[0]], r[2]));
        let e = [0.2, -0.1, -0.4, 0.3];
        let lev = [0.7, 0.3, 0.3, 0.7];
        let want: f64 = (0..4)
            .map(|i| {
                let a = (i as f64 - 1.5) / 5.0;
                (a * e[i] / (1.0 - lev[i])).powi(2)
            })
            .sum();
        assert!((h.se().unwrap() - want.sqrt()).abs() < 1e-13);
    }
}
