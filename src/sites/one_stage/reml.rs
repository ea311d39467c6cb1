//! The restricted likelihood of the one-stage model, evaluated from
//! per-site sufficient statistics, its maximisation over γ = τ²/σ² and the
//! profile-likelihood intervals of τ² and σ².
//!
//! # Formula
//! With a fixed intercept per site, REML is the likelihood of the
//! within-site error contrasts (Patterson & Thompson 1971, Biometrika
//! 58:545; Harville 1974, Biometrika 61:383: any full set of contrasts
//! gives the same likelihood up to a constant). Within site j the centred
//! rows have covariance σ²(I + γ x̃ⱼx̃ⱼᵀ), so by Sherman–Morrison the
//! quadratic form of two centred columns a, b is
//!
//! ```text
//! a'V⁻¹b = σ⁻² [S_ab − gⱼ S_ax S_xb],   gⱼ = γ / (1 + γ Sxxⱼ)
//! log det Vⱼ = (nⱼ − 1) log σ² + log(1 + γ Sxxⱼ)
//! ```
//!
//! with S the centred co-moments of site j. Summed over sites, with Z the
//! p within-site predictors, N = Σ(nⱼ − 1) and ν = N − p:
//!
//! ```text
//! M(γ) = Σ S_ZZ − gⱼ aⱼaⱼᵀ,  m(γ) = Σ S_Zy − gⱼ aⱼ Sxyⱼ,  aⱼ = S_Zx
//! β̂(γ) = M⁻¹m,  R(γ) = Σ [Syy − 2β̂'S_Zy + β̂'S_ZZβ̂ − gⱼ(Sxy − aⱼ'β̂)²]
//! −2ℓ_R(γ, σ²) = ν log σ² + Σ log(1 + γ Sxxⱼ) + log det M + R/σ² + const
//! ```
//!
//! σ² is profiled out (σ̂² = R/ν), leaving one parameter:
//! −2ℓ_P(γ) = ν log(R/ν) + Σ log(1 + γ Sxxⱼ) + log det M + ν, whose
//! derivative (using dM/dγ = −Σ aⱼaⱼᵀ/(1+γSxxⱼ)² and dR/dγ =
//! −Σ (Sxyⱼ − aⱼ'β̂)²/(1+γSxxⱼ)²) is
//!
//! ```text
//! D(γ) = ν R'/R + Σ Sxxⱼ/(1+γSxxⱼ) − Σ aⱼ'M⁻¹aⱼ/(1+γSxxⱼ)²
//! ```
//!
//! γ̂ = 0 (τ̂² = 0) when −2ℓ_P is smallest at 0 and D(0) ≥ 0.

use crate::error::{Error, Result};
use crate::model::solve::{brent_min, brent_root, Search};
use crate::tolerance;
use nalgebra::{DMatrix, DVector};

/// One site's centred co-moments of the predictors Z, x and y.
#[derive(Debug, Clone)]
pub(super) struct SiteStats {
    /// Σ(x − x̄)².
    pub sxx: f64,
    /// Σ(x − x̄)(y − ȳ).
    pub sxy: f64,
    /// Σ(y − ȳ)².
    pub syy: f64,
    /// S_ZZ (p × p).
    pub szz: DMatrix<f64>,
    /// S_Zx = aⱼ.
    pub szx: DVector<f64>,
    /// S_Zy.
    pub szy: DVector<f64>,
}

/// The criterion's pieces at one γ.
#[derive(Debug, Clone)]
pub(super) struct Eval {
    /// M(γ) (σ² times X'V⁻¹X of the within-site predictors).
    pub m: DMatrix<f64>,
    /// β̂(γ).
    pub beta: DVector<f64>,
    /// R(γ), the generalised residual sum of squares times σ².
    pub r: f64,
    /// log det M.
    pub logdet: f64,
    /// Σ log(1 + γ Sxxⱼ).
    pub logdet_v: f64,
}

/// The one-stage REML problem.
#[derive(Debug, Clone)]
pub(super) struct Problem {
    pub sites: Vec<SiteStats>,
    /// ν = Σ(nⱼ − 1) − p.
    pub df: f64,
    /// Mean Sxxⱼ: γ·scale is τ² over the typical sampling variance of a site slope.
    pub scale: f64,
}

/// The estimates at the REML optimum.
#[derive(Debug, Clone)]
pub(super) struct Optimum {
    pub gamma: f64,
    pub sigma2: f64,
    pub eval: Eval,
    /// −2ℓ_P at γ̂ (without constants).
    pub crit: f64,
    /// D(0), the derivative of −2ℓ_P at τ² = 0.
    pub score_at_zero: f64,
    /// Evaluations of the criterion used.
    pub evaluations: u64,
}

const SEARCH: Search<'static> = Search {
    what: "the REML estimate of the slope variance τ² of the one-stage model",
    hint: "check the data for sites with nearly constant x or outlying rows",
};

/// Points of the scan over t = γ·scale/(1 + γ·scale) ∈ [0, 1) before the
/// local search (equally spaced, then 1 − 10⁻ᵏ for k = 2…10).
const SCAN: usize = 40;

impl Problem {
    fn p(&self) -> usize {
        self.sites[0].szx.len()
    }

    /// The pieces at γ ≥ 0; None when M(γ) is not positive definite.
    pub fn at(&self, gamma: f64) -> Option<Eval> {
        let p = self.p();
        let mut m = DMatrix::zeros(p, p);
        let mut v = DVector::zeros(p);
        let mut logdet_v = 0.0;
        for s in &self.sites {
            let g = gamma / (1.0 + gamma * s.sxx);
            m += &s.szz - &s.szx * s.szx.transpose() * g;
            v += &s.szy - &s.szx * (g * s.sxy);
            logdet_v += (gamma * s.sxx).ln_1p();
        }
        let chol = m.clone().cholesky()?;
        let beta = chol.solve(&v);
        let logdet = 2.0 * chol.l().diagonal().iter().map(|d| d.ln()).sum::<f64>();
        let mut r = 0.0;
        for s in &self.sites {
            let g = gamma / (1.0 + gamma * s.sxx);
            let e = s.sxy - s.szx.dot(&beta);
            r += s.syy - 2.0 * beta.dot(&s.szy) + (&s.szz * &beta).dot(&beta) - g * e * e;
        }
        (r.is_finite() && logdet.is_finite()).then_some(Eval {
            m,
            beta,
            r: r.max(0.0),
            logdet,
            logdet_v,
        })
    }

    /// −2ℓ_P(γ) without constants (σ² profiled out); +∞ where undefined.
    pub fn crit(&self, gamma: f64) -> f64 {
        match self.at(gamma) {
            Some(e) if e.r > 0.0 => {
                self.df * (e.r / self.df).ln() + e.logdet_v + e.logdet + self.df
            }
            _ => f64::INFINITY,
        }
    }

    /// −2ℓ_R(γ, σ²) without constants.
    pub fn full(&self, gamma: f64, sigma2: f64) -> f64 {
        match self.at(gamma) {
            Some(e) => self.df * sigma2.ln() + e.logdet_v + e.logdet + e.r / sigma2,
            None => f64::INFINITY,
        }
    }

    /// D(γ) = d(−2ℓ_P)/dγ (see the module's formula); NaN where undefined.
    pub fn score(&self, gamma: f64) -> f64 {
        let Some(e) = self.at(gamma) else {
            return f64::NAN;
        };
        let Some(chol) = e.m.clone().cholesky() else {
            return f64::NAN;
        };
        let (mut dr, mut tr, mut lv) = (0.0, 0.0, 0.0);
        for s in &self.sites {
            let d = 1.0 + gamma * s.sxx;
            let res = s.sxy - s.szx.dot(&e.beta);
            dr -= res * res / (d * d);
            tr += s.szx.dot(&chol.solve(&s.szx)) / (d * d);
            lv += s.sxx / d;
        }
        self.df * dr / e.r + lv - tr
    }

    fn gamma_of(&self, t: f64) -> f64 {
        t / ((1.0 - t) * self.scale)
    }

    /// The scan points in t.
    fn scan_points() -> Vec<f64> {
        let mut t: Vec<f64> = (0..SCAN).map(|i| i as f64 / SCAN as f64).collect();
        t.extend((2..=10).map(|k| 1.0 - 10f64.powi(-k)));
        t
    }

    /// The minimiser of `f` over γ ≥ 0: a scan over t, then Brent's
    /// root of `df` (the derivative) in the bracket around the scan's
    /// best point, or Brent's minimiser when the derivative does not change
    /// sign there; γ = 0 when the scan's best point is 0 and `df(0) ≥ 0`.
    /// Returns γ and the evaluations used.
    ///
    /// # Errors
    /// [`Error::Model`] when the best point is the last (the criterion
    /// keeps falling as γ grows); [`Error::NoConvergence`] from the search.
    fn minimise(
        &self,
        f: &dyn Fn(f64) -> f64,
        df: Option<&dyn Fn(f64) -> f64>,
    ) -> Result<(f64, u64)> {
        let t = Self::scan_points();
        let vals: Vec<f64> = t.iter().map(|&t| f(self.gamma_of(t))).collect();
        let mut evals = t.len() as u64;
        let best = (0..t.len())
            .min_by(|&a, &b| vals[a].total_cmp(&vals[b]))
            .unwrap_or(0);
        if !vals[best].is_finite() {
            return Err(Error::Model(
                "the one-stage model's restricted likelihood cannot be evaluated: the \
                 predictors are collinear across the sites (check that the site means of w and \
                 the site characteristics vary between sites and are not multiples of each \
                 other)"
                    .into(),
            ));
        }
        if best == t.len() - 1 {
            return Err(Error::Model(
                "the one-stage model's restricted likelihood keeps rising as the slope variance \
                 τ² grows without bound (the site slopes vary far more than their rows can \
                 say), so τ² cannot be estimated; check x and y for a site on another scale"
                    .into(),
            ));
        }
        let slope0 = df.map(|d| d(0.0));
        if best == 0 {
            match slope0 {
                Some(s) if s >= 0.0 => return Ok((0.0, evals + 1)),
                None if vals[0] <= f(self.gamma_of(t[1] * 1e-6)) => return Ok((0.0, evals + 1)),
                _ => {}
            }
        }
        let lo = if best == 0 { 0.0 } else { t[best - 1] };
        let hi = t[best + 1];
        let (glo, ghi) = (self.gamma_of(lo), self.gamma_of(hi));
        if let Some(d) = df {
            let (a, b) = (d(glo), d(ghi));
            evals += 2;
            if a < 0.0 && b > 0.0 {
                let (g, it) = brent_root(d, glo, ghi, SEARCH)?;
                return Ok((g, evals + it));
            }
        }
        let tb = brent_min(
            |t| f(self.gamma_of(t)),
            lo,
            hi,
            (
                tolerance::MULTILEVEL_LINE_REL,
                tolerance::MULTILEVEL_LINE_ABS,
            ),
            SEARCH,
        )?;
        let g = self.gamma_of(tb);
        // The scan's best point stands if the local search did not improve on it.
        Ok((
            if f(g) <= vals[best] {
                g
            } else {
                self.gamma_of(t[best])
            },
            evals,
        ))
    }

    /// The REML estimates: γ̂ by [`Problem::minimise`] on −2ℓ_P and its
    /// derivative, σ̂² = R(γ̂)/ν.
    ///
    /// # Errors
    /// Those of the search.
    pub fn optimum(&self) -> Result<Optimum> {
        let crit = |g: f64| self.crit(g);
        let score = |g: f64| self.score(g);
        let (gamma, evaluations) = self.minimise(&crit, Some(&score))?;
        let eval = self
            .at(gamma)
            .ok_or_else(|| SEARCH.fail("the criterion is undefined at the estimate".into()))?;
        Ok(Optimum {
            gamma,
            sigma2: eval.r / self.df,
            crit: self.crit(gamma),
            score_at_zero: self.score(0.0),
            eval,
            evaluations,
        })
    }

    /// min over σ² of −2ℓ_R(τ²/σ², σ²) at a fixed τ² > 0: Brent's
    /// minimiser over log σ² within ±`SPAN` of log σ̂².
    fn profile_tau2(&self, tau2: f64, opt: &Optimum) -> Result<f64> {
        if tau2 <= 0.0 {
            return Ok(self.crit(0.0));
        }
        let c = opt.sigma2.ln();
        let f = |u: f64| self.full(tau2 / u.exp(), u.exp());
        let u = brent_min(
            f,
            c - SPAN,
            c + SPAN,
            (
                tolerance::MULTILEVEL_LINE_REL,
                tolerance::MULTILEVEL_LINE_ABS,
            ),
            SEARCH,
        )?;
        Ok(f(u))
    }

    /// min over τ² ≥ 0 of −2ℓ_R at a fixed σ² (τ² = γσ²).
    fn profile_sigma2(&self, sigma2: f64) -> Result<f64> {
        let f = |g: f64| self.full(g, sigma2);
        match self.minimise(&f, None) {
            Ok((g, _)) => Ok(f(g).min(f(0.0))),
            // Far from σ̂² the conditional optimum of γ can lie beyond the
            // scan (a tiny σ² pushes τ² = γσ² to carry the variation); the
            // scan's smallest value is then a close upper bound, far above
            // the cut either way.
            Err(Error::Model(_)) => Ok(Self::scan_points()
                .iter()
                .map(|&t| f(self.gamma_of(t)))
                .fold(f64::INFINITY, f64::min)),
            Err(e) => Err(e),
        }
    }

    /// Profile-likelihood intervals of τ² and σ²: the values whose profile
    /// −2ℓ_R lies within `cut` (the χ²₁ quantile at the confidence level)
    /// of its minimum (Venzon & Moolgavkar 1988, Applied Statistics 37:87,
    /// for the profile-likelihood interval; Patterson & Thompson 1971 for
    /// the restricted likelihood it is applied to). τ²'s lower end is 0
    /// when the profile at 0 is within the cut.
    ///
    /// # Errors
    /// Those of the searches; [`Error::NoConvergence`] when an end cannot be
    /// bracketed.
    pub fn intervals(&self, opt: &Optimum, cut: f64) -> Result<[(f64, f64); 2]> {
        let best = opt.crit;
        let tau2_hat = opt.gamma * opt.sigma2;
        let h_tau = |t: f64| -> f64 {
            self.profile_tau2(t, opt)
                .map(|v| v - best - cut)
                .unwrap_or(f64::NAN)
        };
        let tau_lo = if tau2_hat <= 0.0 || h_tau(0.0) <= 0.0 {
            0.0
        } else {
            brent_root(h_tau, 0.0, tau2_hat, SEARCH)?.0
        };
        let start = if tau2_hat > 0.0 {
            tau2_hat
        } else {
            opt.sigma2 / self.scale
        };
        let tau_hi = upper_root(&h_tau, tau2_hat, start)?;
        let h_sig = |s: f64| -> f64 {
            self.profile_sigma2(s)
                .map(|v| v - best - cut)
                .unwrap_or(f64::NAN)
        };
        let mut lo = opt.sigma2 / 2.0;
        let mut k = 0;
        while h_sig(lo) <= 0.0 {
            lo /= 2.0;
            k += 1;
            if k > tolerance::BRACKET_DOUBLINGS {
                return Err(SEARCH.fail("the lower end of σ²'s interval".into()));
            }
        }
        let sig_lo = brent_root(h_sig, lo, opt.sigma2, SEARCH)?.0;
        let sig_hi = upper_root(&h_sig, opt.sigma2, opt.sigma2)?;
        Ok([(tau_lo, tau_hi), (sig_lo, sig_hi)])
    }
}

/// Half-width, on the log scale, of the search for σ² at a fixed τ²: σ²
/// rests on the within-site residuals (many degrees of freedom), so its
/// conditional optimum stays within a factor e¹⁰ of σ̂².
const SPAN: f64 = 10.0;

/// The root of `h` above `from` (h(from) < 0), bracketed by doubling from `start`.
fn upper_root(h: &dyn Fn(f64) -> f64, from: f64, start: f64) -> Result<f64> {
    let mut hi = start.max(f64::MIN_POSITIVE) * 2.0;
    let mut k = 0;
    while h(hi) <= 0.0 {
        hi *= 2.0;
        k += 1;
        if k > tolerance::BRACKET_DOUBLINGS {
            return Err(SEARCH.fail("the upper end of a variance's interval".into()));
        }
    }
    Ok(brent_root(h, from, hi, SEARCH)?.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Three invented sites of (x, y) with one within-site predictor (x).
    fn problem() -> Problem {
        let data: [&[(f64, f64)]; 3] = [
            &[(0.0, 1.0), (1.0, 2.5), (2.0, 2.9), (3.0, 4.8), (1.5, 2.0)],
            &[(0.5, 0.2), (1.0, 0.1), (2.5, 1.9), (3.5, 1.2)],
            &[
                (1.0, 3.0),
                (2.0, 5.1),
                (3.0, 6.8),
                (4.0, 9.5),
                (0.0, 1.1),
                (2.2, 5.0),
            ],
        ];
        let sites = data
            .iter()
            .map(|rows| {
                let n = rows.len() as f64;
                let mx = rows.iter().map(|r| r.0).sum::<f64>() / n;
                let my = rows.iter().map(|r| r.1).sum::<f64>() / n;
                let s = |f: &dyn Fn(&(f64, f64)) -> f64| rows.iter().map(f).sum::<f64>();
                let sxx = s(&|r| (r.0 - mx).powi(2));
                let sxy = s(&|r| (r.0 - mx) * (r.1 - my));
                SiteStats {
                    sxx,
                    sxy,
                    syy: s(&|r| (r.1 - my).powi(2)),
                    szz: DMatrix::from_element(1, 1, sxx),
                    szx: DVector::from_element(1, sxx),
                    szy: DVector::from_element(1, sxy),
                }
            })
            .collect();
        Problem {
            sites,
            df: 15.0 - 3.0 - 1.0,
            scale: 1.0,
        }
    }

    /// The analytic derivative D(γ) against central differences of −2ℓ_P.
    #[test]
    fn score_matches_finite_differences() {
        let p = problem();
        for g in [0.01, 0.1, 0.7, 3.0] {
            let h = 1e-6 * g;
            let fd = (p.crit(g + h) - p.crit(g - h)) / (2.0 * h);
            let d = p.score(g);
            assert!(
                (fd - d).abs() <= 1e-5 * d.abs().max(1.0),
                "γ = {g}: {d} vs {fd}"
            );
        }
    }

    /// The profiled criterion is the full one at σ̂² = R/ν, and no σ² does better.
    #[test]
    fn profiled_criterion_is_the_minimum_over_sigma2() {
        let p = problem();
        let opt = p.optimum().unwrap();
        let c = p.full(opt.gamma, opt.sigma2);
        assert!((c - opt.crit).abs() < 1e-12 * c.abs());
        for f in [0.9, 1.1] {
            assert!(p.full(opt.gamma, opt.sigma2 * f) > c);
        }
        assert!(p.crit(opt.gamma * 1.01) >= opt.crit && p.crit(opt.gamma * 0.99) >= opt.crit);
    }
}
