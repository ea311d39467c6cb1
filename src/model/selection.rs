//! The step-function selection model (Vevea & Hedges 1995, *Psychometrika*
//! 60:419; Hedges 1992, *Statistical Science* 7:246): a random-effects
//! meta-regression whose studies are published with a probability that is
//! constant within intervals of their one-sided p-values, fitted by maximum
//! likelihood jointly over the coefficients β, τ² and the interval weights.
//!
//! The search is a damped Newton iteration on θ = (β, τ², η₂ … η_J) with
//! η_j = ln ω_j, the gradient analytic and the Hessian its central
//! difference; τ² is kept ≥ 0 by projection (an active set at 0). The
//! observed information −H at the maximum gives the standard errors.

use crate::dist;
use crate::error::{Error, Result};
use crate::tolerance::{
    SELECTION_DECREMENT, SELECTION_DIFF_STEP, SELECTION_MAX_ITERS, SELECTION_MAX_LOG_WEIGHT,
};
use nalgebra::{DMatrix, DVector};
use statrs::distribution::{Continuous, ContinuousCDF, Normal};

/// ln √(2π).
const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;

/// The data of a selection model: effects, variances, design and cut points.
#[derive(Debug, Clone, Copy)]
pub struct SelectionData<'a> {
    /// Effects, already signed so that the favoured direction is positive.
    pub y: &'a [f64],
    /// Sampling variances (> 0).
    pub v: &'a [f64],
    /// Design, row-major k × p.
    pub x: &'a [f64],
    /// Number of coefficients.
    pub p: usize,
    /// One-sided p-value cut points, ascending in (0, 1).
    pub cuts: &'a [f64],
}

/// A fitted selection model (or the same model with every weight fixed at 1).
#[derive(Debug, Clone)]
pub struct SelectionFit {
    /// Coefficients β̂.
    pub beta: Vec<f64>,
    /// τ̂² (≥ 0).
    pub tau2: f64,
    /// Weights ω̂ of the J intervals, the first 1.
    pub weights: Vec<f64>,
    /// Inverse observed information of the free parameters, in the order
    /// (β, τ², η₂ … η_J); the rows and columns of a parameter held fixed
    /// (τ² at 0, the η when the weights are fixed) are 0.
    pub cov: DMatrix<f64>,
    /// Whether τ̂² is on the boundary 0 (then it has no standard error).
    pub tau2_at_zero: bool,
    /// Maximised log-likelihood, constants included.
    pub log_likelihood: f64,
    /// Newton iterations used.
    pub iterations: usize,
}

/// The interval (0-based) of each study: the number of cut points at or
/// below its one-sided p-value p_i = 1 − Φ(y_i/√v_i).
pub fn intervals(y: &[f64], v: &[f64], cuts: &[f64]) -> Vec<usize> {
    y.iter()
        .zip(v)
        .map(|(y, v)| {
            let p = one_sided_p(y / v.sqrt());
            cuts.iter().filter(|&&c| p >= c).count()
        })
        .collect()
}

/// One-sided p-value 1 − Φ(z) of a positive-favoured z.
pub fn one_sided_p(z: f64) -> f64 {
    Normal::standard().sf(z)
}

/// Per-study pieces the likelihood needs: the interval index and the bounds
/// √v_i·Φ⁻¹(1 − c_j) of the effect that separate the intervals.
struct Prepared<'a> {
    d: SelectionData<'a>,
    interval: Vec<usize>,
    /// Φ⁻¹(1 − c_j), descending.
    q: Vec<f64>,
}

/// Log-likelihood and its gradient in θ.
struct Eval {
    ll: f64,
    grad: DVector<f64>,
}

impl<'a> Prepared<'a> {
    fn new(d: SelectionData<'a>) -> Self {
        let q = d
            .cuts
            .iter()
            .map(|c| dist::normal_quantile(1.0 - c))
            .collect();
        Prepared {
            interval: intervals(d.y, d.v, d.cuts),
            d,
            q,
        }
    }

    fn n_params(&self) -> usize {
        self.d.p + 1 + self.d.cuts.len()
    }

    /// ℓ(θ) and ∇ℓ(θ); None when θ gives a non-finite value.
    ///
    /// # Formula
    /// With μ_i = x_i'β, σ_i² = v_i + τ², bounds a_ij = √v_i·Φ⁻¹(1 − c_j)
    /// (a_i0 = +∞, a_iJ = −∞), z_ij = (a_ij − μ_i)/σ_i, the interval
    /// probabilities P_im = Φ(z_im) − Φ(z_i,m+1) and A_i = Σ_m ω_m P_im:
    /// ℓ = Σ_i [−ln√(2π) − ½ln σ_i² − ½r_i² + η_{j(i)} − ln A_i], r_i = (y_i − μ_i)/σ_i;
    /// ∂ℓ/∂μ_i = r_i/σ_i + Σ_m ω_m (φ(z_im) − φ(z_i,m+1))/(σ_i A_i);
    /// ∂ℓ/∂σ_i² = (r_i² − 1)/(2σ_i²) + Σ_m ω_m (φ(z_im)z_im − φ(z_i,m+1)z_i,m+1)/(2σ_i² A_i);
    /// ∂ℓ/∂η_m = Σ_i (1[j(i) = m] − ω_m P_im/A_i).
    fn eval(&self, theta: &[f64]) -> Option<Eval> {
        let d = &self.d;
        let (p, nj) = (d.p, d.cuts.len() + 1);
        let tau2 = theta[p];
        let mut omega = vec![1.0; nj];
        for m in 1..nj {
            omega[m] = theta[p + m].exp();
        }
        let norm = Normal::standard();
        let mut ll = 0.0;
        let mut grad: DVector<f64> = DVector::zeros(self.n_params());
        let mut prob = vec![0.0; nj];
        let mut phi = vec![0.0; nj + 1];
        let mut phiz = vec![0.0; nj + 1];
        let mut cdf = vec![0.0; nj + 1];
        let mut sf = vec![0.0; nj + 1];
        for i in 0..d.y.len() {
            let row = &d.x[i * p..(i + 1) * p];
            let mu: f64 = row.iter().zip(&theta[..p]).map(|(a, b)| a * b).sum();
            let s2 = d.v[i] + tau2;
            if s2 <= 0.0 {
                return None;
            }
            let s = s2.sqrt();
            let r = (d.y[i] - mu) / s;
            // Bounds b = 0..=J: +∞, the cut bounds, −∞.
            (cdf[0], sf[0], phi[0], phiz[0]) = (1.0, 0.0, 0.0, 0.0);
            (cdf[nj], sf[nj], phi[nj], phiz[nj]) = (0.0, 1.0, 0.0, 0.0);
            let sv = d.v[i].sqrt();
            for b in 1..nj {
                let z = (sv * self.q[b - 1] - mu) / s;
                cdf[b] = norm.cdf(z);
                sf[b] = norm.sf(z);
                phi[b] = norm.pdf(z);
                phiz[b] = phi[b] * z;
            }
            let mut a = 0.0;
            let (mut da_mu, mut da_s2) = (0.0, 0.0);
            for m in 0..nj {
                // Φ(z_m) − Φ(z_{m+1}), from the upper tails when both are
                // above 0, so that neither difference loses digits.
                prob[m] = if cdf[m + 1] > 0.5 {
                    sf[m + 1] - sf[m]
                } else {
                    cdf[m] - cdf[m + 1]
                };
                a += omega[m] * prob[m];
                da_mu += omega[m] * (phi[m] - phi[m + 1]);
                da_s2 += omega[m] * (phiz[m] - phiz[m + 1]);
            }
            let j = self.interval[i];
            ll += -LN_SQRT_2PI - 0.5 * s2.ln() - 0.5 * r * r + omega[j].ln() - a.ln();
            let g_mu = r / s + da_mu / (s * a);
            let g_s2 = (r * r - 1.0) / (2.0 * s2) + da_s2 / (2.0 * s2 * a);
            for c in 0..p {
                grad[c] += row[c] * g_mu;
            }
            grad[p] += g_s2;
            for m in 1..nj {
                grad[p + m] += f64::from(u8::from(j == m)) - omega[m] * prob[m] / a;
            }
        }
        (ll.is_finite() && grad.iter().all(|g| g.is_finite())).then_some(Eval { ll, grad })
    }

    /// Central-difference Hessian of ℓ from the analytic gradient,
    /// symmetrised; steps scaled to each parameter.
    fn hessian(&self, theta: &[f64], scales: &[f64]) -> Option<DMatrix<f64>> {
        let n = theta.len();
        let mut h = DMatrix::zeros(n, n);
        let mut t = theta.to_vec();
        for c in 0..n {
            let step = SELECTION_DIFF_STEP * scales[c].max(theta[c].abs());
            t[c] = theta[c] + step;
            let up = self.eval(&t)?.grad;
            t[c] = theta[c] - step;
            let down = self.eval(&t)?.grad;
            t[c] = theta[c];
            for r in 0..n {
                h[(r, c)] = (up[r] - down[r]) / (2.0 * step);
            }
        }
        Some((&h + h.transpose()) * 0.5)
    }
}

/// Which parameters a search moves.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weights {
    /// Estimate the weights of intervals 2 … J.
    Estimated,
    /// Hold every weight at 1 (the model without selection).
    Fixed,
}

/// Fits the selection model by maximum likelihood from the starting values
/// `beta0`, `tau20` and log weights `eta0` (one per interval after the first).
///
/// # Formula
/// Maximises ℓ of `Prepared::eval` (Vevea & Hedges 1995, eq. 6, in the
/// meta-regression form) by Newton steps θ ← θ + t(−H)⁻¹∇ℓ, t halved until
/// ℓ rises, a multiple of the identity added to −H where it is not positive
/// definite, τ² projected onto [0, ∞) and held at 0 while ∂ℓ/∂τ² ≤ 0 there;
/// stops when the Newton decrement ∇ℓ'(−H)⁻¹∇ℓ/2 falls below
/// [`SELECTION_DECREMENT`].
///
/// # Errors
/// [`Error::NoConvergence`] when the iteration limit is reached, a weight
/// runs to 0 or infinity (|η| above [`SELECTION_MAX_LOG_WEIGHT`]), or the
/// information matrix at the maximum is singular.
pub fn fit(
    d: SelectionData<'_>,
    weights: Weights,
    beta0: &[f64],
    tau20: f64,
    eta0: &[f64],
) -> Result<SelectionFit> {
    let pr = Prepared::new(d);
    let (p, nj) = (d.p, d.cuts.len() + 1);
    let n = pr.n_params();
    let mut theta: Vec<f64> = beta0.to_vec();
    theta.push(tau20.max(0.0));
    match weights {
        Weights::Estimated => theta.extend_from_slice(eta0),
        Weights::Fixed => theta.extend(std::iter::repeat_n(0.0, nj - 1)),
    }
    let scales = param_scales(&d, n);
    let fail = |detail: String| Error::NoConvergence {
        what: "the selection model's maximum-likelihood estimates".into(),
        detail,
        hint: format!(
            "use fewer or other cut points ({}), so that each interval holds more studies",
            crate::support::flag::Flag::Selection
        ),
    };
    let mut cur = pr
        .eval(&theta)
        .ok_or_else(|| fail("the likelihood is not finite at the starting values".into()))?;
    for iter in 1..=SELECTION_MAX_ITERS {
        let free = free_set(p, nj, weights, theta[p], cur.grad[p]);
        let h = pr
            .hessian(&theta, &scales)
            .ok_or_else(|| fail("the likelihood is not finite near the estimates".into()))?;
        let (step, decrement) = newton_step(&h, &cur.grad, &free);
        if decrement < SELECTION_DECREMENT {
            check_weights(&theta[p + 1..]).map_err(fail)?;
            let info = info_inverse(&h, &free).ok_or_else(|| {
                fail(
                    "the information matrix at the maximum is singular: the data cannot \
                     fix every parameter"
                        .into(),
                )
            })?;
            return Ok(SelectionFit {
                beta: theta[..p].to_vec(),
                tau2: theta[p],
                weights: std::iter::once(1.0)
                    .chain(theta[p + 1..].iter().map(|e| e.exp()))
                    .collect(),
                cov: info,
                tau2_at_zero: !free[p],
                log_likelihood: cur.ll,
                iterations: iter,
            });
        }
        let mut t = 1.0;
        let mut accepted = false;
        for _ in 0..60 {
            let mut next: Vec<f64> = theta.iter().zip(&step).map(|(a, s)| a + t * s).collect();
            next[p] = next[p].max(0.0);
            if let Some(e) = pr.eval(&next) {
                if e.ll >= cur.ll - 1e-12 * (1.0 + cur.ll.abs()) {
                    theta = next;
                    cur = e;
                    accepted = true;
                    break;
                }
            }
            t /= 2.0;
        }
        if !accepted {
            return Err(fail(format!(
                "no step from iteration {iter} raised the likelihood"
            )));
        }
        check_weights(&theta[p + 1..]).map_err(fail)?;
    }
    Err(fail(format!(
        "the Newton search did not settle in {SELECTION_MAX_ITERS} iterations"
    )))
}

/// Typical sizes of the parameters (for the difference steps): √median v
/// for the coefficients, median v for τ², 1 for the log weights.
fn param_scales(d: &SelectionData<'_>, n: usize) -> Vec<f64> {
    let mut v = d.v.to_vec();
    v.sort_by(f64::total_cmp);
    let med = v[v.len() / 2];
    let mut s = vec![med.sqrt(); d.p];
    s.push(med);
    s.resize(n, 1.0);
    s
}

/// The parameters a Newton step moves.
fn free_set(p: usize, nj: usize, weights: Weights, tau2: f64, g_tau2: f64) -> Vec<bool> {
    let mut free = vec![true; p + nj];
    if tau2 <= 0.0 && g_tau2 <= 0.0 {
        free[p] = false;
    }
    if weights == Weights::Fixed {
        for f in &mut free[p + 1..] {
            *f = false;
        }
    }
    free
}

/// The Newton step (−H + λI)⁻¹∇ℓ on the free parameters (0 elsewhere), λ
/// the smallest of 0, 10⁻⁸·‖H‖, 10⁻⁶·‖H‖, … that makes the matrix positive
/// definite, and the Newton decrement ∇ℓ'(−H + λI)⁻¹∇ℓ/2.
fn newton_step(h: &DMatrix<f64>, g: &DVector<f64>, free: &[bool]) -> (Vec<f64>, f64) {
    let idx: Vec<usize> = (0..free.len()).filter(|&i| free[i]).collect();
    let m = idx.len();
    let neg = DMatrix::from_fn(m, m, |r, c| -h[(idx[r], idx[c])]);
    let gf = DVector::from_fn(m, |r, _| g[idx[r]]);
    let norm = neg.abs().max().max(f64::MIN_POSITIVE);
    let mut lambda = 0.0;
    for _ in 0..20 {
        let a = &neg + DMatrix::identity(m, m) * lambda;
        if let Some(ch) = a.cholesky() {
            let s = ch.solve(&gf);
            let dec = gf.dot(&s) / 2.0;
            let mut step = vec![0.0; free.len()];
            for (r, &i) in idx.iter().enumerate() {
                step[i] = s[r];
            }
            return (step, dec);
        }
        lambda = if lambda == 0.0 {
            1e-8 * norm
        } else {
            lambda * 100.0
        };
    }
    // A plain gradient step as the last resort (the line search scales it).
    let mut step = vec![0.0; free.len()];
    for &i in &idx {
        step[i] = g[i] / norm;
    }
    (step, f64::INFINITY)
}

/// (−H)⁻¹ on the free parameters, 0 elsewhere; None unless −H is positive
/// definite there.
fn info_inverse(h: &DMatrix<f64>, free: &[bool]) -> Option<DMatrix<f64>> {
    let idx: Vec<usize> = (0..free.len()).filter(|&i| free[i]).collect();
    let m = idx.len();
    let neg = DMatrix::from_fn(m, m, |r, c| -h[(idx[r], idx[c])]);
    let inv = neg.cholesky()?.inverse();
    let n = free.len();
    let mut out = DMatrix::zeros(n, n);
    for (r, &i) in idx.iter().enumerate() {
        for (c, &j) in idx.iter().enumerate() {
            out[(i, j)] = inv[(r, c)];
        }
    }
    out.iter().all(|x| x.is_finite()).then_some(out)
}

/// Fails when a log weight has run beyond ±[`SELECTION_MAX_LOG_WEIGHT`].
fn check_weights(eta: &[f64]) -> std::result::Result<(), String> {
    match eta.iter().position(|e| e.abs() > SELECTION_MAX_LOG_WEIGHT) {
        None => Ok(()),
        Some(m) => Err(format!(
            "the weight of interval {} runs to {} (the data cannot fix it)",
            m + 2,
            if eta[m] > 0.0 { "infinity" } else { "0" }
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let y = vec![
            0.42, 0.31, 0.55, 0.12, 0.68, 0.25, 0.05, 0.47, 0.36, -0.08, 0.60, 0.19,
        ];
        let v = vec![
            0.02, 0.03, 0.05, 0.01, 0.08, 0.02, 0.015, 0.04, 0.03, 0.02, 0.06, 0.012,
        ];
        let x = vec![1.0; y.len()];
        (y, v, x)
    }

    #[test]
    fn the_analytic_gradient_matches_differences_of_the_likelihood() {
        let (y, v, x) = data();
        let cuts = [0.025, 0.5];
        let d = SelectionData {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
            cuts: &cuts,
        };
        let pr = Prepared::new(d);
        let theta = [0.2, 0.03, -0.4, 0.3];
        let g = pr.eval(&theta).unwrap().grad;
        for c in 0..theta.len() {
            let h = 1e-6;
            let mut up = theta;
            up[c] += h;
            let mut down = theta;
            down[c] -= h;
            let num = (pr.eval(&up).unwrap().ll - pr.eval(&down).unwrap().ll) / (2.0 * h);
            assert!(
                (num - g[c]).abs() < 1e-6 * (1.0 + g[c].abs()),
                "{c}: {num} vs {}",
                g[c]
            );
        }
    }

    #[test]
    fn with_weights_fixed_the_fit_is_the_random_effects_ml_fit() {
        // ω ≡ 1 makes A_i = 1: the likelihood is that of the usual model, so
        // the estimates are the ML estimates of the random-effects model.
        let (y, v, x) = data();
        let cuts = [0.025];
        let d = SelectionData {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
            cuts: &cuts,
        };
        let f = fit(d, Weights::Fixed, &[0.0], 0.01, &[0.0]).unwrap();
        let opts = crate::model::FitOptions {
            method: crate::model::tau2::Tau2Method::Ml,
            inference: crate::model::Inference::Z,
            level: 0.95,
        };
        let ml = crate::model::fit_parts(&y, &v, &x, 1, opts, false).unwrap();
        assert!(
            (f.tau2 - ml.tau2.estimate).abs() < 1e-7,
            "{} {}",
            f.tau2,
            ml.tau2.estimate
        );
        assert!((f.beta[0] - ml.beta[0]).abs() < 1e-7);
        let ll = ml.log_likelihood.unwrap();
        assert!(
            (f.log_likelihood - ll).abs() < 1e-8,
            "{} {ll}",
            f.log_likelihood
        );
    }

    #[test]
    fn intervals_count_cut_points_at_or_below_p() {
        // z = 2.5 → p ≈ 0.0062; z = 1 → p ≈ 0.159; z = −1 → p ≈ 0.841.
        let iv = intervals(&[2.5, 1.0, -1.0], &[1.0, 1.0, 1.0], &[0.025, 0.5]);
        assert_eq!(iv, vec![0, 1, 2]);
    }
}
