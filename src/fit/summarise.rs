//! Stage 7 of `fit`: summarise the fit. The coefficient table (with the
//! cluster-robust columns under `--robust`), the omnibus moderator test
//! (model-based, or the robust HTZ test under `--robust`) with its answer in
//! words, residual heterogeneity, and the average effect from the null model.

use super::clusters::Robust;
use crate::effect::ReadingScale;
use crate::model::design::Design;
use crate::model::inference::{self, CoefInference, PredictionInference};
use crate::model::multilevel::{RobustCoef, RobustTest};
use crate::model::{Inference, ModelFit};
use crate::result::{
    Coefficient, ContrastTest, Estimate, FlooredAverage, FlooredCheck, FlooredTest, Heterogeneity,
    Interval, ModeratorTest, RatioCoefficient, RobustTestMethod, Test, TestDistribution,
};

/// The summaries of the fit.
#[derive(Debug, Clone)]
pub struct Summary {
    /// Coefficients, intercept first.
    pub coefficients: Vec<Coefficient>,
    /// The omnibus test of the moderator terms (None without moderators).
    pub moderator_test: Option<ModeratorTest>,
    /// Residual heterogeneity.
    pub heterogeneity: Heterogeneity,
    /// The average effect, from the intercept-only model.
    pub average: Estimate,
    /// The floored Knapp–Hartung answer when a raw factor is below 1.
    pub floored: Option<FlooredCheck>,
}

/// Summarises the fit; `null` is the intercept-only fit (None when the
/// model has no moderators), `robust` the cluster-robust inference with the
/// confidence level of its intervals.
pub fn summarise(
    design: &Design,
    fit: &ModelFit,
    null: Option<ModelFit>,
    (robust, level): (Option<&Robust>, f64),
    scale: ReadingScale,
) -> Summary {
    let robust_coefs = robust.map(|r| r.coefficients.as_slice());
    let coefficients = inference::coefficients(fit)
        .iter()
        .enumerate()
        .map(|(j, c)| {
            let r = robust_coefs.and_then(|rc| rc.get(j));
            coefficient(&design.terms[j].name, c, r.map(|r| (r, level)), scale)
        })
        .collect();
    let names: Vec<&str> = design.moderators.iter().map(|m| m.name.as_str()).collect();
    let robust_test = robust.and_then(|r| r.test.as_ref());
    let moderator_test = moderator_test(fit, &names, robust_test);
    let null_or_fit = null.as_ref().unwrap_or(fit);
    let average = estimate(inference::predict(null_or_fit, &[1.0]), scale);
    let floored = floored_check(fit, null.as_ref(), moderator_test.as_ref(), &average);
    Summary {
        coefficients,
        moderator_test,
        heterogeneity: heterogeneity(fit, null.as_ref()),
        average,
        floored,
    }
}

/// The answer with the Knapp–Hartung factor floored at 1 ([`inference::floored`]),
/// when the raw factor of the model or of the intercept-only model is below
/// 1 and the chosen inference is not already `kh-floor`; `test` and
/// `average` are the chosen answers, compared at α = 1 − level. A robust
/// moderator test is not compared (it does not use the factor).
fn floored_check(
    fit: &ModelFit,
    null: Option<&ModelFit>,
    test: Option<&ModeratorTest>,
    average: &Estimate,
) -> Option<FlooredCheck> {
    if fit.options.inference == Inference::KhFloor {
        return None;
    }
    let null_or_fit = null.unwrap_or(fit);
    let with_moderators = null.is_some();
    let below = |s2: f64| s2 < 1.0 - crate::tolerance::KH_BELOW_ONE;
    let model_low = with_moderators && below(fit.scale_factor);
    let average_low = below(null_or_fit.scale_factor);
    if !model_low && !average_low {
        return None;
    }
    let alpha = 1.0 - fit.options.level;
    let floored_test = if model_low && test.is_some_and(|t| t.method.is_none()) {
        inference::omnibus(&inference::floored(fit)).map(|t| FlooredTest {
            statistic: t.statistic,
            df1: t.df1,
            df2: t.df2.unwrap_or(f64::NAN),
            p: t.p,
            significant: t.p < alpha,
        })
    } else {
        None
    };
    let floored_average = average_low.then(|| {
        let f = inference::floored(null_or_fit);
        let c = &inference::coefficients(&f)[0];
        FlooredAverage {
            se: c.se,
            ci: Interval::new(c.ci_low, c.ci_high),
            p: c.p,
        }
    });
    let excludes_zero = |lo: f64, hi: f64| lo > 0.0 || hi < 0.0;
    let test_differs = match (test, &floored_test) {
        (Some(t), Some(f)) => t.significant != f.significant,
        _ => false,
    };
    let average_differs = floored_average.is_some_and(|f| {
        excludes_zero(average.mean.ci.ci_low, average.mean.ci.ci_high)
            != excludes_zero(f.ci.ci_low, f.ci.ci_high)
    });
    Some(FlooredCheck {
        scale_factor: with_moderators.then_some(fit.scale_factor),
        scale_factor_average: null_or_fit.scale_factor,
        moderator_test: floored_test,
        average: floored_average,
        conclusion_differs: test_differs || average_differs,
    })
}

/// One row of the coefficient table; `robust` the coefficient's
/// cluster-robust inference and the confidence level.
///
/// # Formula
/// The robust interval is β̂ ± t_{df, 1−(1−level)/2} · SE_CR2, with df the
/// Satterthwaite degrees of freedom of the CR2 t test (the interval that
/// inverts that test; Tipton 2015, Psychol. Methods 20:375; Pustejovsky &
/// Tipton 2018, J. Bus. Econ. Stat. 36:672).
fn coefficient(
    term: &str,
    c: &CoefInference,
    robust: Option<(&RobustCoef, f64)>,
    scale: ReadingScale,
) -> Coefficient {
    let robust_ci = robust.map(|(r, level)| {
        let half = crate::dist::t_quantile(0.5 + level / 2.0, r.df) * r.se;
        Interval::new(c.estimate - half, c.estimate + half)
    });
    let robust = robust.map(|(r, _)| r);
    Coefficient {
        term: term.to_string(),
        contrast: contrast_test(c),
        ratio: (scale == ReadingScale::Ratio).then(|| RatioCoefficient {
            estimate: c.estimate.exp(),
            ci: Interval::new(c.ci_low, c.ci_high).map(f64::exp),
        }),
        robust_se: robust.map(|r| r.se),
        robust_df: robust.map(|r| r.df),
        robust_p: robust.map(|r| r.p),
        robust_ci,
    }
}

/// The omnibus moderator test: the model's Wald-type test, or under
/// `--robust` the cluster-robust HTZ test in its place (only where the
/// model-based test exists).
fn moderator_test(
    fit: &ModelFit,
    names: &[&str],
    robust: Option<&RobustTest>,
) -> Option<ModeratorTest> {
    let level = fit.options.level;
    inference::omnibus(fit).map(|t| match robust {
        None => {
            let significant = t.p < 1.0 - level;
            ModeratorTest {
                statistic: t.statistic,
                df1: t.df1,
                df2: t.df2,
                p: t.p,
                distribution: if t.df2.is_some() {
                    TestDistribution::F
                } else {
                    TestDistribution::ChiSquare
                },
                significant,
                answer: answer(significant, names, fit, t.statistic, t.df1, t.df2, t.p),
                method: None,
            }
        }
        Some(r) => {
            let significant = r.p < 1.0 - level;
            let mut answer = answer(
                significant,
                names,
                fit,
                r.statistic,
                r.df1,
                Some(r.df2),
                r.p,
            );
            answer.push_str(" (Cluster-robust test: CR2 approximate Hotelling T², HTZ.)");
            ModeratorTest {
                statistic: r.statistic,
                df1: r.df1,
                df2: Some(r.df2),
                p: r.p,
                distribution: TestDistribution::F,
                significant,
                answer,
                method: Some(RobustTestMethod::Htz),
            }
        }
    })
}

/// Residual heterogeneity statistics.
///
/// # Formula
/// Q_E = Σ (y_i − x_i'β̂₀)²/v_i with the common-effect fit β̂₀, df = k − p;
/// ṽ = (k − p)/tr P₀; I² = τ̂²/(τ̂² + ṽ), H² = (τ̂² + ṽ)/ṽ (Higgins & Thompson
/// 2002, *Stat. Med.* 21:1539, generalised to meta-regression), so the
/// common-effect model (τ² fixed at 0) has I² = 0 and H² = 1 by definition;
/// its Q test still shows any excess variation. R² = (τ̂²₀ − τ̂²)/τ̂²₀ truncated to
/// [0, 1], with τ̂²₀ from the same estimator without moderators (Raudenbush 2009).
fn heterogeneity(fit: &ModelFit, null_fit: Option<&ModelFit>) -> Heterogeneity {
    let df = (fit.k - fit.p) as f64;
    let t = fit.tau2.estimate;
    let (i2, h2) = (t / (t + fit.v_typical), (t + fit.v_typical) / fit.v_typical);
    let tau2_0 = null_fit.map(|f| f.tau2.estimate).unwrap_or(t);
    let r2 = match null_fit {
        Some(_) if tau2_0 > 0.0 => Some(((tau2_0 - t) / tau2_0).clamp(0.0, 1.0)),
        _ => None,
    };
    Heterogeneity {
        q: fit.q_e,
        df,
        p: crate::dist::chi2_sf(fit.q_e, df),
        i2,
        h2,
        r2,
        tau2_without_moderators: tau2_0,
        typical_variance: fit.v_typical,
    }
}

/// The moderator test's answer to "does the effect change with the
/// moderators?", in words, tested at α = 1 − level.
fn answer(
    significant: bool,
    moderators: &[&str],
    fit: &ModelFit,
    stat: f64,
    df1: f64,
    df2: Option<f64>,
    p: f64,
) -> String {
    let test = match df2 {
        Some(d2) if d2.fract() != 0.0 => format!("F({df1}, {d2:.1}) = {stat:.2}"),
        Some(d2) => format!("F({df1}, {d2}) = {stat:.2}"),
        None => format!("chi-square({df1}) = {stat:.2}"),
    };
    let alpha = 1.0 - fit.options.level;
    let names = match moderators {
        [] => String::new(),
        [one] => one.to_string(),
        [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
    };
    let p_txt = crate::support::format::p(p);
    let k = fit.k;
    let several = fit.p > 2;
    if significant && several {
        format!(
            "Yes. Taken together, the moderator terms ({names}) are associated with the effect \
             across these {k} studies: {test}, p {p_txt}, tested at α = {alpha:.2}. The \
             coefficients below show which terms carry the association. An association across \
             studies is not proof that a moderator causes the difference."
        )
    } else if significant {
        format!(
            "Yes. The effect changes with {names} across these {k} studies: {test}, p {p_txt}, \
             tested at α = {alpha:.2}. An association across studies is not proof that {names} \
             causes the difference."
        )
    } else {
        let what = if several {
            format!("the moderator terms ({names}), taken together")
        } else {
            names.clone()
        };
        format!(
            "No clear evidence that the effect changes with {what}: {test}, p {p_txt}, tested at \
             α = {alpha:.2}. This is not evidence of no change: with {k} studies the test may \
             have little power."
        )
    }
}

/// A prediction with its reading-scale values.
pub(super) fn estimate(p: PredictionInference, scale: ReadingScale) -> Estimate {
    Estimate {
        mean: p.mean_effect(),
        reading: p.reading(scale),
    }
}

/// An estimate with its interval and test, as reported (coefficients and contrasts).
pub(super) fn contrast_test(c: &CoefInference) -> ContrastTest {
    ContrastTest {
        estimate: c.estimate,
        se: c.se,
        ci: Interval::new(c.ci_low, c.ci_high),
        test: Test {
            statistic: c.statistic,
            df: c.df,
            p: c.p,
        },
    }
}
