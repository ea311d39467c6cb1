//! The location-scale meta-regression model: the mean of the true effects
//! depends on x_i and their spread on z_i,
//! y_i = x_i'β + u_i + e_i, u_i ~ N(0, τ_i²), ln τ_i² = z_i'α, e_i ~ N(0, v_i)
//! (Viechtbauer & López-López 2022, *Res. Synth. Methods* 13:697, cited
//! from memory), fitted by maximum or restricted maximum likelihood.
//!
//! β is profiled out (generalised least squares at the current τ_i²); α is
//! found by Fisher scoring with step halving, finished by Newton steps on
//! the observed information (the numerical Jacobian of the analytic score).
//! Both designs are standardised internally (`standardise`), which
//! leaves the likelihood unchanged.

use super::standardise;
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// Central-difference step of the observed information (on the
/// standardised α̃ scale, where one unit is one SD of the characteristic).
const HESSIAN_STEP: f64 = 1e-5;
/// Fisher-scoring iterations before the Newton finish.
const SCORING_ITERS: usize = 500;
/// Newton iterations of the finish.
const NEWTON_ITERS: usize = 50;
/// Convergence: the score's size in the metric of the information, g'I⁻¹g
/// (about twice the log-likelihood still to gain; α is then within about
/// 10⁻⁶ standard deviations of the maximum).
const SCORE_TOL: f64 = 1e-12;
/// An estimated τ_i² below this share of the smallest sampling variance
/// counts as the spread running off to 0 (no finite estimate).
const TAU2_FLOOR_SHARE: f64 = 1e-10;

/// A fitted location-scale model (original parametrisation).
#[derive(Debug, Clone)]
pub struct LocationScaleFit {
    /// α, intercept first (log τ² scale).
    pub alpha: DVector<f64>,
    /// Covariance of α̂: the inverse observed information.
    pub alpha_cov: DMatrix<f64>,
    /// β, intercept first.
    pub beta: DVector<f64>,
    /// (X'WX)⁻¹ at the fitted τ_i².
    pub beta_cov: DMatrix<f64>,
    /// τ̂_i² per study.
    pub tau2: Vec<f64>,
    /// The (restricted) log-likelihood, constants included (as the usual
    /// model's, so the two can be compared).
    pub log_likelihood: f64,
    /// Scoring and Newton iterations used.
    pub iterations: usize,
}

/// The likelihood, its score and the scoring matrix at one α̃.
struct Eval {
    ll: f64,
    score: DVector<f64>,
    fisher: DMatrix<f64>,
    beta: DVector<f64>,
    m_inv: DMatrix<f64>,
    tau2: Vec<f64>,
}

struct Problem<'a> {
    y: &'a [f64],
    v: &'a [f64],
    x: Vec<f64>,
    p: usize,
    z: Vec<f64>,
    m: usize,
    restricted: bool,
}

impl Problem<'_> {
    /// The log-likelihood with β profiled out, its score in α̃ and the
    /// expected information.
    ///
    /// # Formula
    /// With w_i = 1/(v_i + τ_i²), r = y − Xβ̂ (GLS),
    /// ML ℓ = −½[k ln 2π + Σ ln(v_i + τ_i²) + Σ w_i r_i²];
    /// REML ℓ_R = −½[(k − p) ln 2π + Σ ln(v_i + τ_i²) + ln det X'WX + Σ w_i r_i²].
    /// Score: ∂ℓ/∂α_j = −½ Σ_i τ_i² z_ij (d_i − w_i² r_i²), d_i = w_i (ML) or
    /// P_ii = w_i − w_i² x_i'(X'WX)⁻¹x_i (REML) (Harville 1977, *JASA* 72:320,
    /// the score of variance parameters; cited from memory). Scoring matrix:
    /// ½ Σ_i τ_i⁴ d_i² z_i z_i' (the expected information of ML, with d_i as above).
    fn eval(&self, alpha: &DVector<f64>) -> Option<Eval> {
        let (k, p, m) = (self.y.len(), self.p, self.m);
        let mut tau2 = Vec::with_capacity(k);
        for i in 0..k {
            let eta: f64 = (0..m).map(|j| self.z[i * m + j] * alpha[j]).sum();
            let t = eta.exp();
            if !t.is_finite() {
                return None;
            }
            tau2.push(t);
        }
        let w: Vec<f64> = (0..k).map(|i| 1.0 / (self.v[i] + tau2[i])).collect();
        let mut xtwx = DMatrix::zeros(p, p);
        let mut xtwy = DVector::zeros(p);
        for (i, &wi) in w.iter().enumerate() {
            let row = &self.x[i * p..(i + 1) * p];
            for a in 0..p {
                xtwy[a] += wi * row[a] * self.y[i];
                for b in 0..p {
                    xtwx[(a, b)] += wi * row[a] * row[b];
                }
            }
        }
        let chol = xtwx.clone().cholesky()?;
        let m_inv = chol.inverse();
        let beta = &m_inv * xtwy;
        let log_det: f64 = 2.0
            * chol
                .l()
                .diagonal()
                .iter()
                .map(|d: &f64| d.ln())
                .sum::<f64>();
        let two_pi = (2.0 * std::f64::consts::PI).ln();
        let mut ll = 0.0;
        let mut score = DVector::zeros(m);
        let mut fisher = DMatrix::zeros(m, m);
        for i in 0..k {
            let row = &self.x[i * p..(i + 1) * p];
            let fitted: f64 = (0..p).map(|a| row[a] * beta[a]).sum();
            let r = self.y[i] - fitted;
            ll -= 0.5 * ((self.v[i] + tau2[i]).ln() + w[i] * r * r);
            let d = if self.restricted {
                let h: f64 = (0..p)
                    .map(|a| (0..p).map(|b| row[a] * m_inv[(a, b)] * row[b]).sum::<f64>())
                    .sum();
                w[i] - w[i] * w[i] * h
            } else {
                w[i]
            };
            let g = -0.5 * tau2[i] * (d - w[i] * w[i] * r * r);
            let f = 0.5 * tau2[i] * tau2[i] * d * d;
            for a in 0..m {
                let za = self.z[i * m + a];
                score[a] += g * za;
                for b in 0..m {
                    fisher[(a, b)] += f * za * self.z[i * m + b];
                }
            }
        }
        if self.restricted {
            ll -= 0.5 * (log_det + (k - p) as f64 * two_pi);
        } else {
            ll -= 0.5 * k as f64 * two_pi;
        }
        ll.is_finite().then_some(Eval {
            ll,
            score,
            fisher,
            beta,
            m_inv,
            tau2,
        })
    }

    /// The observed information −∂²ℓ/∂α̃∂α̃', by central differences of the
    /// analytic score, symmetrised.
    fn observed_information(&self, alpha: &DVector<f64>) -> Option<DMatrix<f64>> {
        let m = self.m;
        let mut h = DMatrix::zeros(m, m);
        for j in 0..m {
            let mut up = alpha.clone();
            let mut down = alpha.clone();
            up[j] += HESSIAN_STEP;
            down[j] -= HESSIAN_STEP;
            let gu = self.eval(&up)?.score;
            let gd = self.eval(&down)?.score;
            for a in 0..m {
                h[(a, j)] = -(gu[a] - gd[a]) / (2.0 * HESSIAN_STEP);
            }
        }
        Some((&h + h.transpose()) * 0.5)
    }
}

/// One step from `alpha` along `dir`, halved until the likelihood rises.
fn step(
    pb: &Problem,
    alpha: &DVector<f64>,
    cur: &Eval,
    dir: &DVector<f64>,
) -> Option<(DVector<f64>, Eval)> {
    let mut t = 1.0;
    for _ in 0..60 {
        let cand = alpha + dir * t;
        if let Some(e) = pb.eval(&cand) {
            if e.ll >= cur.ll {
                return Some((cand, e));
            }
        }
        t /= 2.0;
    }
    None
}

/// Fits the location-scale model.
///
/// `x` is row-major k × p (intercept first), `z` row-major k × m (intercept
/// first); `start_tau2` the τ² of the model with one τ² (the start);
/// `restricted` chooses REML.
///
/// # Errors
/// [`Error::Model`] when k ≤ p + m − 1 or either design is singular;
/// [`Error::NoConvergence`] when the search does not settle, the spread of
/// part of the studies runs off to 0 (no finite estimate), or the observed
/// information is not positive definite.
#[allow(clippy::too_many_arguments)]
pub fn fit(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    z: &[f64],
    m: usize,
    start_tau2: f64,
    restricted: bool,
) -> Result<LocationScaleFit> {
    let k = y.len();
    if k < p + m + 1 {
        return Err(Error::Model(format!(
            "{k} studies cannot support {p} mean coefficients and {m} spread coefficients; at \
             least {} are needed",
            p + m + 1
        )));
    }
    let sx = standardise(x, k, p);
    let sz = standardise(z, k, m);
    let pb = Problem {
        y,
        v,
        x: sx.x,
        p,
        z: sz.x,
        m,
        restricted,
    };
    let v_min = v.iter().copied().fold(f64::INFINITY, f64::min);
    let v_mean = v.iter().sum::<f64>() / k as f64;
    let mut alpha = DVector::zeros(m);
    alpha[0] = start_tau2.max(0.01 * v_mean).ln();
    let fail = |detail: String| Error::NoConvergence {
        what: "the location-scale model".into(),
        detail,
        hint: "fewer spread terms, or merge levels with few studies".into(),
    };
    let mut cur = pb
        .eval(&alpha)
        .ok_or_else(|| Error::Model("the weighted design matrix is singular".into()))?;
    let mut iterations = 0;
    let mut converged = false;
    for it in 0..SCORING_ITERS + NEWTON_ITERS {
        iterations = it + 1;
        let newton = it >= SCORING_ITERS || converged;
        let metric = if newton {
            pb.observed_information(&alpha)
                .filter(|h| h.clone().cholesky().is_some())
                .unwrap_or_else(|| cur.fisher.clone())
        } else {
            cur.fisher.clone()
        };
        let Some(chol) = metric.cholesky() else {
            return Err(fail("the information matrix is singular".into()));
        };
        let dir = chol.solve(&cur.score);
        let size = cur.score.dot(&dir);
        if size < SCORE_TOL {
            if newton {
                break;
            }
            converged = true;
            continue;
        }
        match step(&pb, &alpha, &cur, &dir) {
            Some((a, e)) => {
                alpha = a;
                cur = e;
            }
            None if size < SCORE_TOL.sqrt() => break,
            None => return Err(fail("no step along the score raises the likelihood".into())),
        }
        if it + 1 == SCORING_ITERS + NEWTON_ITERS {
            return Err(fail(format!(
                "the search did not settle in {} iterations",
                SCORING_ITERS + NEWTON_ITERS
            )));
        }
    }
    if cur.tau2.iter().any(|&t| t < TAU2_FLOOR_SHARE * v_min) {
        return Err(fail(
            "the spread of true effects runs off to 0 for some of the studies (ln τ² has no \
             finite estimate there), so its coefficients and their tests are not defined"
                .into(),
        ));
    }
    let info = pb
        .observed_information(&alpha)
        .ok_or_else(|| fail("the observed information could not be computed".into()))?;
    let info_chol = info
        .cholesky()
        .ok_or_else(|| fail("the observed information is not positive definite".into()))?;
    let cov_std = info_chol.inverse();
    let ll = cur.ll + if restricted { sx.log_det_a } else { 0.0 };
    Ok(LocationScaleFit {
        alpha: &sz.a * &alpha,
        alpha_cov: &sz.a * cov_std * sz.a.transpose(),
        beta: &sx.a * &cur.beta,
        beta_cov: &sx.a * &cur.m_inv * sx.a.transpose(),
        tau2: cur.tau2,
        log_likelihood: ll,
        iterations,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::tau2::Tau2Method;
    use crate::model::{fit_parts, FitOptions, Inference};

    fn data() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let y = vec![0.1, 0.5, 0.35, 0.9, 0.7, 1.2, -0.2, 0.4, 0.8, 0.05];
        let v = vec![0.02, 0.03, 0.01, 0.05, 0.02, 0.04, 0.03, 0.02, 0.06, 0.01];
        let d: Vec<f64> = (0..10).map(|i| i as f64).collect();
        (y, v, d)
    }

    /// With the intercept alone as spread term the model is the usual one:
    /// the same τ² and log-likelihood as the REML and ML fits.
    #[test]
    fn one_spread_term_is_the_usual_model() {
        let (y, v, d) = data();
        let x: Vec<f64> = d.iter().flat_map(|t| [1.0, *t]).collect();
        let z = vec![1.0; 10];
        for (method, restricted) in [(Tau2Method::Reml, true), (Tau2Method::Ml, false)] {
            let opts = FitOptions {
                method,
                inference: Inference::Z,
                level: 0.95,
            };
            let usual = fit_parts(&y, &v, &x, 2, opts, false).unwrap();
            let ls = fit(&y, &v, &x, 2, &z, 1, usual.tau2.estimate * 2.0, restricted).unwrap();
            assert!((ls.tau2[0] - usual.tau2.estimate).abs() < 1e-6 * usual.tau2.estimate);
            let ll = usual.log_likelihood.unwrap();
            assert!(
                (ls.log_likelihood - ll).abs() < 1e-10,
                "{} vs {ll}",
                ls.log_likelihood
            );
            assert!((ls.beta[1] - usual.beta[1]).abs() < 1e-8);
        }
    }

    /// The analytic score agrees with central differences of the likelihood.
    #[test]
    fn score_matches_finite_differences() {
        let (y, v, d) = data();
        let x: Vec<f64> = d.iter().flat_map(|t| [1.0, *t]).collect();
        let z: Vec<f64> = d.iter().flat_map(|t| [1.0, (t - 4.5) / 3.0]).collect();
        for restricted in [true, false] {
            let pb = Problem {
                y: &y,
                v: &v,
                x: x.clone(),
                p: 2,
                z: z.clone(),
                m: 2,
                restricted,
            };
            let a = DVector::from_vec(vec![-3.0, 0.4]);
            let e = pb.eval(&a).unwrap();
            for j in 0..2 {
                let h = 1e-6;
                let mut up = a.clone();
                let mut dn = a.clone();
                up[j] += h;
                dn[j] -= h;
                let fd = (pb.eval(&up).unwrap().ll - pb.eval(&dn).unwrap().ll) / (2.0 * h);
                assert!((fd - e.score[j]).abs() < 1e-6, "{fd} vs {}", e.score[j]);
            }
        }
    }
}
