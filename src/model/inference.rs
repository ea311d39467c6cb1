//! Tests, intervals and predictions from a fitted model.

use super::{Inference, ModelFit};
use crate::dist;
use crate::effect::ReadingScale;
use crate::result::{Interval, MeanEffect, PredictionInterval, Reading};
use nalgebra::{DMatrix, DVector};

/// One coefficient's inference.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CoefInference {
    /// Estimate.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// Lower confidence limit.
    pub ci_low: f64,
    /// Upper confidence limit.
    pub ci_high: f64,
    /// t (kh) or z statistic.
    pub statistic: f64,
    /// Degrees of freedom (kh only).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
}

/// The omnibus test of all non-intercept coefficients.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OmnibusTest {
    /// F (kh) or chi-square (z) statistic.
    pub statistic: f64,
    /// Numerator df (the number of tested coefficients).
    pub df1: f64,
    /// Denominator df (kh only).
    pub df2: Option<f64>,
    /// p-value.
    pub p: f64,
}

/// A prediction for a new study at a design row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PredictionInference {
    /// Predicted mean effect x0'β̂.
    pub estimate: f64,
    /// Its standard error √(x0' Cov x0).
    pub se: f64,
    /// Confidence interval for the mean effect.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Prediction interval for a new study's true effect: estimate ± crit·√(se² + τ²).
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
}

impl PredictionInference {
    /// The estimate, standard error and intervals as reported.
    pub fn mean_effect(&self) -> MeanEffect {
        MeanEffect {
            estimate: self.estimate,
            se: self.se,
            ci: Interval::new(self.ci_low, self.ci_high),
            pi: PredictionInterval::new(self.pi_low, self.pi_high),
        }
    }

    /// The estimate and intervals on the reading scale (None when it is the analysis scale).
    pub fn reading(&self, scale: ReadingScale) -> Option<Reading> {
        (scale != ReadingScale::Same).then(|| Reading::of(&self.mean_effect(), |x| scale.apply(x)))
    }
}

/// The critical value of the two-sided interval at `level`: t(k − p) under
/// Knapp–Hartung, normal under z.
pub fn critical(fit: &ModelFit) -> f64 {
    let q = 1.0 - (1.0 - fit.options.level) / 2.0;
    match fit.options.inference {
        Inference::Kh => dist::t_quantile(q, (fit.k - fit.p) as f64),
        Inference::Z => dist::normal_quantile(q),
    }
}

fn two_sided_p(fit: &ModelFit, stat: f64) -> f64 {
    match fit.options.inference {
        Inference::Kh => dist::t_two_sided_p(stat, (fit.k - fit.p) as f64),
        Inference::Z => dist::normal_two_sided_p(stat),
    }
}

/// The degrees of freedom of a single-coefficient test: k − p under
/// Knapp–Hartung, none (normal) under z.
pub fn df(fit: &ModelFit) -> Option<f64> {
    match fit.options.inference {
        Inference::Kh => Some((fit.k - fit.p) as f64),
        Inference::Z => None,
    }
}

/// The test of one linear combination with estimate `estimate` and
/// standard error `se`, with the fit's inference.
///
/// # Formula
/// CI estimate ± crit·SE ([`critical`]), statistic estimate/SE, two-sided p
/// on t(k − p) (Knapp–Hartung) or the normal (z).
pub fn wald(fit: &ModelFit, estimate: f64, se: f64) -> CoefInference {
    let crit = critical(fit);
    let stat = estimate / se;
    CoefInference {
        estimate,
        se,
        ci_low: estimate - crit * se,
        ci_high: estimate + crit * se,
        statistic: stat,
        df: df(fit),
        p: two_sided_p(fit, stat),
    }
}

/// Per-coefficient estimate, SE, interval, statistic and p.
pub fn coefficients(fit: &ModelFit) -> Vec<CoefInference> {
    (0..fit.p)
        .map(|j| wald(fit, fit.beta[j], fit.cov[(j, j)].max(0.0).sqrt()))
        .collect()
}

/// Wald-type test that the coefficients `terms` are all zero:
/// X² = b' V⁻¹ b on df1 = |terms|; under Knapp–Hartung F = X²/df1 on (df1, k − p).
pub fn wald_test(fit: &ModelFit, terms: &[usize]) -> Option<OmnibusTest> {
    let m = terms.len();
    if m == 0 {
        return None;
    }
    let b = DVector::from_iterator(m, terms.iter().map(|&j| fit.beta[j]));
    let v = DMatrix::from_fn(m, m, |r, c| fit.cov[(terms[r], terms[c])]);
    let chol = v.cholesky()?;
    let x2 = b.dot(&chol.solve(&b));
    let df1 = m as f64;
    Some(match fit.options.inference {
        Inference::Kh => {
            let df2 = (fit.k - fit.p) as f64;
            let f = x2 / df1;
            OmnibusTest {
                statistic: f,
                df1,
                df2: Some(df2),
                p: dist::f_sf(f, df1, df2),
            }
        }
        Inference::Z => OmnibusTest {
            statistic: x2,
            df1,
            df2: None,
            p: dist::chi2_sf(x2, df1),
        },
    })
}

/// Test of every non-intercept coefficient (None for an intercept-only model).
pub fn omnibus(fit: &ModelFit) -> Option<OmnibusTest> {
    let terms: Vec<usize> = (1..fit.p).collect();
    wald_test(fit, &terms)
}

/// Prediction at design row `x0` (including the leading 1 for the intercept).
///
/// # Formula
/// μ̂ = x0'β̂, SE = √(x0' Cov x0), CI μ̂ ± c·SE, prediction interval for a new
/// study's true effect μ̂ ± c·√(SE² + τ̂²), with c the t(k − p) quantile under
/// Knapp–Hartung and the normal quantile under z (the interval of Higgins,
/// Thompson & Spiegelhalter 2009, *J. R. Stat. Soc. A* 172:137, cited from
/// memory, who use t(k − 2) without moderators; the reference distribution
/// here is the one of the coefficient intervals).
pub fn predict(fit: &ModelFit, x0: &[f64]) -> PredictionInference {
    let x = DVector::from_column_slice(x0);
    let est = x.dot(&fit.beta);
    let se = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0).sqrt();
    let crit = critical(fit);
    let pi_half = predictive_from(fit, est, se, fit.tau2.estimate).half_width(fit.options.level);
    PredictionInference {
        estimate: est,
        se,
        ci_low: est - crit * se,
        ci_high: est + crit * se,
        pi_low: est - pi_half,
        pi_high: est + pi_half,
    }
}

/// The predictive distribution of a new study's true effect: centre +
/// scale·T, with T standard normal (`df` None) or Student t on `df` degrees
/// of freedom. The prediction interval ([`predict`]) and the probability of
/// exceeding a value (`--beyond`) both come from it, so they always agree.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Predictive {
    /// The predicted mean effect x0'β̂.
    pub centre: f64,
    /// √(SE² + τ̂²).
    pub scale: f64,
    /// Degrees of freedom of the t distribution (None: normal).
    pub df: Option<f64>,
}

impl Predictive {
    /// Half the width of the two-sided interval at `level`: c·scale.
    pub fn half_width(&self, level: f64) -> f64 {
        let q = 1.0 - (1.0 - level) / 2.0;
        let c = match self.df {
            Some(df) => dist::t_quantile(q, df),
            None => dist::normal_quantile(q),
        };
        c * self.scale
    }

    /// The probability that a new study's true effect exceeds `value`
    /// (analysis scale).
    ///
    /// # Formula
    /// P(θ_new > c) = 1 − F((c − centre)/scale), F the t(df) or normal
    /// distribution function (the upper tail, from the two-sided p of
    /// [`dist`]: half of it above 0, one minus half below). A scale of 0
    /// (no uncertainty, τ̂² = 0 and SE = 0) gives 1 above and 0 at or below.
    pub fn exceeds(&self, value: f64) -> f64 {
        if self.scale <= 0.0 {
            return if self.centre > value { 1.0 } else { 0.0 };
        }
        let t = (value - self.centre) / self.scale;
        let two_sided = match self.df {
            Some(df) => dist::t_two_sided_p(t, df),
            None => dist::normal_two_sided_p(t),
        };
        if t >= 0.0 {
            two_sided / 2.0
        } else {
            1.0 - two_sided / 2.0
        }
    }
}

/// The predictive distribution at design row `x0` with the fit's τ̂².
pub fn predictive(fit: &ModelFit, x0: &[f64]) -> Predictive {
    let x = DVector::from_column_slice(x0);
    let est = x.dot(&fit.beta);
    let se = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0).sqrt();
    predictive_from(fit, est, se, fit.tau2.estimate)
}

/// The predictive distribution of a new study's true effect around `est`
/// with the mean's standard error `se` and between-study variance `tau2`.
///
/// # Formula
/// centre = est, scale = √(se² + τ²), on t(k − p) under Knapp–Hartung and
/// the normal under z (see [`predict`] for the source).
pub fn predictive_from(fit: &ModelFit, est: f64, se: f64, tau2: f64) -> Predictive {
    Predictive {
        centre: est,
        scale: (se * se + tau2).sqrt(),
        df: df(fit),
    }
}
