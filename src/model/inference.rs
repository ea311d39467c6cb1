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
    /// Prediction interval for a new study's true effect ([`predictive`]);
    /// NaN when its df is below 1.
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

/// The degrees of freedom of a test of the linear combination c'β: the
/// smallest df of the coefficients it involves (k − p for every combination
/// of the two-level model; the between–within rule for the three-level one).
pub fn combo_df(fit: &ModelFit, c: &[f64]) -> f64 {
    let df = c
        .iter()
        .zip(&fit.term_df)
        .filter(|(c, _)| **c != 0.0)
        .map(|(_, d)| *d)
        .fold(f64::INFINITY, f64::min);
    if df.is_finite() {
        df
    } else {
        (fit.k - fit.p) as f64
    }
}

/// The smallest df of any coefficient (used where a combination is not at hand).
fn min_df(fit: &ModelFit) -> f64 {
    fit.term_df
        .iter()
        .copied()
        .fold((fit.k - fit.p) as f64, f64::min)
}

/// The critical value of the two-sided interval at `level` on `df` degrees
/// of freedom: t(df) under Knapp–Hartung (floored or not), normal under z.
pub fn critical_on(fit: &ModelFit, df: f64) -> f64 {
    let q = 1.0 - (1.0 - fit.options.level) / 2.0;
    if fit.options.inference.uses_t() {
        dist::t_quantile(q, df)
    } else {
        dist::normal_quantile(q)
    }
}

/// [`critical_on`] on the smallest df of the model's coefficients (k − p
/// for the two-level model).
pub fn critical(fit: &ModelFit) -> f64 {
    critical_on(fit, min_df(fit))
}

/// The test of one linear combination c'β with estimate `estimate` and
/// standard error `se`, with the fit's inference.
///
/// # Formula
/// CI estimate ± crit·SE ([`critical_on`] at [`combo_df`]), statistic
/// estimate/SE, two-sided p on t(df) (Knapp–Hartung) or the normal (z).
pub fn wald_of(fit: &ModelFit, c: &[f64], estimate: f64, se: f64) -> CoefInference {
    let df = combo_df(fit, c);
    let crit = critical_on(fit, df);
    let stat = estimate / se;
    let t = fit.options.inference.uses_t();
    CoefInference {
        estimate,
        se,
        ci_low: estimate - crit * se,
        ci_high: estimate + crit * se,
        statistic: stat,
        df: t.then_some(df),
        p: if t {
            dist::t_two_sided_p(stat, df)
        } else {
            dist::normal_two_sided_p(stat)
        },
    }
}

/// [`wald_of`] for a quantity whose combination is not at hand: tested on
/// the smallest df of the model's coefficients.
pub fn wald(fit: &ModelFit, estimate: f64, se: f64) -> CoefInference {
    let c = vec![1.0; fit.p];
    wald_of(fit, &c, estimate, se)
}

/// Per-coefficient estimate, SE, interval, statistic and p.
pub fn coefficients(fit: &ModelFit) -> Vec<CoefInference> {
    (0..fit.p)
        .map(|j| {
            let mut c = vec![0.0; fit.p];
            c[j] = 1.0;
            wald_of(fit, &c, fit.beta[j], coefficient_se(fit, j))
        })
        .collect()
}

/// Wald-type test that the coefficients `terms` are all zero:
/// X² = b' V⁻¹ b on df1 = |terms|; under Knapp–Hartung F = X²/df1 on
/// (df1, df2) with df2 = k − p for the two-level model and the smallest
/// between–within df of the tested terms for the three-level model.
pub fn wald_test(fit: &ModelFit, terms: &[usize]) -> Option<OmnibusTest> {
    let (x2, df1) = wald_x2(fit, terms)?;
    Some(match fit.options.inference {
        Inference::Kh | Inference::KhFloor => {
            let df2 = terms
                .iter()
                .map(|&j| fit.term_df[j])
                .fold(f64::INFINITY, f64::min);
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

/// X² = b' V⁻¹ b of [`wald_test`] and its df1 = |terms| (None for no terms
/// or a covariance that is not positive definite).
fn wald_x2(fit: &ModelFit, terms: &[usize]) -> Option<(f64, f64)> {
    let m = terms.len();
    if m == 0 {
        return None;
    }
    let b = DVector::from_iterator(m, terms.iter().map(|&j| fit.beta[j]));
    let v = DMatrix::from_fn(m, m, |r, c| fit.cov[(terms[r], terms[c])]);
    let chol = v.cholesky()?;
    Some((b.dot(&chol.solve(&b)), m as f64))
}

/// The statistic of [`omnibus`] alone, without its p-value (F = X²/df1
/// under Knapp–Hartung, X² under z): what a permutation test compares, the
/// same number bit for bit.
pub fn omnibus_statistic(fit: &ModelFit) -> Option<f64> {
    let terms: Vec<usize> = (1..fit.p).collect();
    let (x2, df1) = wald_x2(fit, &terms)?;
    Some(match fit.options.inference {
        Inference::Kh | Inference::KhFloor => x2 / df1,
        Inference::Z => x2,
    })
}

/// The statistics of [`coefficients`] alone, β̂_j / SE_j, without their
/// intervals and p-values (the same numbers bit for bit).
pub fn coefficient_statistics(fit: &ModelFit) -> Vec<f64> {
    (0..fit.p)
        .map(|j| fit.beta[j] / coefficient_se(fit, j))
        .collect()
}

/// SE_j = √max(Cov_jj, 0), the one definition [`coefficients`] and
/// [`coefficient_statistics`] share.
fn coefficient_se(fit: &ModelFit, j: usize) -> f64 {
    fit.cov[(j, j)].max(0.0).sqrt()
}

/// Test of every non-intercept coefficient (None for an intercept-only model).
pub fn omnibus(fit: &ModelFit) -> Option<OmnibusTest> {
    let terms: Vec<usize> = (1..fit.p).collect();
    wald_test(fit, &terms)
}

/// The predictive distribution of a new study's true effect at design row
/// `x0`: θ_new ~ μ̂ + scale·t(df). One function, so every prediction
/// interval (and any probability read off it) follows the same rule.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PredictiveT {
    /// Centre x0'β̂.
    pub center: f64,
    /// Scale √(max(x0'(X'WX)⁻¹x0, x0' Cov x0) + τ̂²): the model-based
    /// (unscaled) variance of x0'β̂, or the one used by the tests when larger.
    pub scale: f64,
    /// Degrees of freedom of the t distribution (≥ 1).
    pub df: f64,
}

/// The predictive t distribution at `x0`, None when its df would be below 1.
///
/// # Formula
/// θ_new ~ x0'β̂ + √(x0'(X'WX)⁻¹x0 + τ̂²)·t(k − p − 1): the interval of
/// Higgins, Thompson & Spiegelhalter (2009, *J. R. Stat. Soc. A* 172:137),
/// who use t(k − 2) with the unscaled SE of the average, generalised to p
/// coefficients by one df per coefficient, under every inference. The
/// Knapp–Hartung factor is not applied when below 1; when above 1 the scaled
/// variance is used, so the interval is never narrower than the confidence
/// interval (our safeguard). For the three-level model the df
/// is the between-cluster df less 1, m − p_b − 1 (our generalisation). With
/// df < 1 there is no interval. Such intervals are still too narrow with
/// few studies (Partlett & Riley 2017, *Stat. Med.* 36:301).
pub fn predictive(fit: &ModelFit, x0: &[f64]) -> Option<PredictiveT> {
    if fit.pi_df < 1.0 {
        return None;
    }
    let x = DVector::from_column_slice(x0);
    let unscaled = (x.transpose() * &fit.cov_model * &x)[(0, 0)].max(0.0);
    let used = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0);
    // The larger of the two: the prediction interval is never narrower than
    // the confidence interval (which a scale factor above 1 could cause).
    let var = unscaled.max(used);
    Some(PredictiveT {
        center: x.dot(&fit.beta),
        scale: (var + fit.tau2.estimate).sqrt(),
        df: fit.pi_df,
    })
}

impl PredictiveT {
    /// The central interval with probability `level`.
    pub fn interval(&self, level: f64) -> (f64, f64) {
        let half = self.scale * dist::t_quantile(1.0 - (1.0 - level) / 2.0, self.df);
        (self.center - half, self.center + half)
    }

    /// The probability that a new study's true effect exceeds `value`
    /// (analysis scale), from the same distribution as [`Self::interval`]
    /// (`--beyond`).
    ///
    /// # Formula
    /// P(θ_new > c) = 1 − F_df((c − centre)/scale), F_df the t distribution
    /// function (the upper tail, from the two-sided p of [`dist`]: half of it
    /// above 0, one minus half below). A scale of 0 (no uncertainty) gives 1
    /// above the centre and 0 at or below.
    pub fn exceeds(&self, value: f64) -> f64 {
        if self.scale <= 0.0 {
            return if self.center > value { 1.0 } else { 0.0 };
        }
        let t = (value - self.center) / self.scale;
        let two_sided = dist::t_two_sided_p(t, self.df);
        if t >= 0.0 {
            two_sided / 2.0
        } else {
            1.0 - two_sided / 2.0
        }
    }
}

/// Prediction at design row `x0` (including the leading 1 for the intercept).
///
/// # Formula
/// μ̂ = x0'β̂, SE = √(x0' Cov x0), CI μ̂ ± c·SE with c the t quantile on the
/// df of x0 ([`combo_df`]) under Knapp–Hartung and the normal quantile
/// under z; the prediction interval for a new study's true effect is the
/// central interval of [`predictive`] (NaN ends, shown as none, when its df
/// is below 1).
pub fn predict(fit: &ModelFit, x0: &[f64]) -> PredictionInference {
    let x = DVector::from_column_slice(x0);
    let est = x.dot(&fit.beta);
    let se = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0).sqrt();
    let crit = critical_on(fit, combo_df(fit, x0));
    let (pi_low, pi_high) = predictive(fit, x0)
        .map(|d| d.interval(fit.options.level))
        .unwrap_or((f64::NAN, f64::NAN));
    PredictionInference {
        estimate: est,
        se,
        ci_low: est - crit * se,
        ci_high: est + crit * se,
        pi_low,
        pi_high,
    }
}

/// The fit as `--inference kh-floor` would test it: the model-based
/// covariance scaled by max(1, s²) and t tests, everything else unchanged
/// (the floored answer shown beside the chosen one when s² < 1). The
/// per-study arrays (weights, fitted values, residuals) are left
/// empty: the tests and intervals of the coefficients do not read them, and
/// with a million studies a copy would cost tens of megabytes.
pub fn floored(fit: &ModelFit) -> ModelFit {
    let scale = fit.scale_factor.max(1.0);
    ModelFit {
        tau2: fit.tau2,
        tau2_ci: fit.tau2_ci,
        beta: fit.beta.clone(),
        cov: &fit.cov_model * scale,
        cov_model: fit.cov_model.clone(),
        kh_scale: Some(scale),
        scale_factor: fit.scale_factor,
        term_df: fit.term_df.clone(),
        pi_df: fit.pi_df,
        k: fit.k,
        p: fit.p,
        weights: Vec::new(),
        fitted: Vec::new(),
        std_resid: Vec::new(),
        q_e: fit.q_e,
        v_typical: fit.v_typical,
        log_likelihood: fit.log_likelihood,
        options: super::FitOptions {
            inference: Inference::KhFloor,
            ..fit.options
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::{fit, tau2::Tau2Method, FitOptions};

    /// The statistics without their p-values are the tests' statistics,
    /// bit for bit, under both inferences (invented numbers).
    #[test]
    fn statistics_alone_equal_the_full_tests() {
        let y = [0.12, 0.45, 0.31, 0.78, 0.05, 0.66, 0.29, 0.51];
        let v = [0.02, 0.05, 0.03, 0.04, 0.06, 0.02, 0.05, 0.03];
        let x: Vec<f64> = (0..8)
            .flat_map(|i| [1.0, i as f64 * 0.7, ((i * 5) % 3) as f64])
            .collect();
        for inference in [Inference::Kh, Inference::Z] {
            let options = FitOptions {
                method: Tau2Method::Reml,
                inference,
                level: 0.95,
            };
            let f = fit(&y, &v, &x, 3, options).unwrap();
            let full = omnibus(&f).unwrap().statistic;
            assert_eq!(omnibus_statistic(&f).unwrap().to_bits(), full.to_bits());
            let stats = coefficient_statistics(&f);
            for (c, s) in coefficients(&f).iter().zip(&stats) {
                assert_eq!(c.statistic.to_bits(), s.to_bits());
            }
            assert_eq!(stats.len(), 3);
        }
    }
}
