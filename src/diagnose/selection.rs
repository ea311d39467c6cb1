//! `--selection`: the step-function selection model on the fitted model's
//! studies and moderators, checked cut points, the likelihood-ratio test
//! against the model without selection, and the report's numbers.

use super::ModelData;
use crate::dist;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::model::selection::{self, SelectionData, SelectionFit, Weights};
use crate::model::tau2::Tau2Method;
use crate::model::{self, FitOptions, Inference};
use crate::result::{
    Coefficient, ContrastTest, Favoured, Interval, LikelihoodRatio, RatioCoefficient,
    SelectionModel, SelectionWeight, Test,
};
use crate::support::flag::Flag;
use crate::support::format::typed;

/// Fewest studies an interval must hold for its weight to be estimated
/// without `--selection-force`.
pub const MIN_PER_INTERVAL: usize = 3;

/// Fewer studies than this in an interval: the output cautions that the
/// weights are poorly determined (Vevea & Hedges 1995 and later simulation
/// work suggest about 10 per interval; a rule of thumb in common practice).
pub const FEW_PER_INTERVAL: usize = 10;

/// The checked settings of `--selection`, `--favoured` and `--selection-force`.
#[derive(Debug, Clone, PartialEq)]
pub struct SelectionSettings {
    /// One-sided p-value cut points, ascending in (0, 1).
    pub cuts: Vec<f64>,
    /// Which direction the one-sided p-values favour.
    pub favoured: Favoured,
    /// Accept intervals with 1 or 2 studies.
    pub force: bool,
}

/// Parses and checks `--selection CUTS`: comma-separated numbers strictly
/// inside (0, 1), strictly ascending.
///
/// # Errors
/// [`Error::Usage`] naming `--selection`, the offending cut and the fix.
pub fn parse_cuts(text: &str) -> Result<Vec<f64>> {
    let usage = |m: String| Error::usage(Flag::Selection, m);
    if text.trim().is_empty() {
        return Err(usage(format!(
            "give one or more one-sided p-value cut points, e.g. {f} 0.025 or {f} 0.025,0.5",
            f = Flag::Selection
        )));
    }
    let mut cuts = Vec::new();
    for part in text.split(',') {
        let t = part.trim();
        let c: f64 = t.parse().map_err(|_| {
            usage(format!(
                "'{t}' is not a number; give cut points such as 0.025,0.5"
            ))
        })?;
        if !(c > 0.0 && c < 1.0) {
            return Err(usage(format!(
                "the cut point {t} is outside (0, 1); cut points are one-sided p-values \
                 strictly between 0 and 1, such as 0.025 or 0.5"
            )));
        }
        if let Some(&last) = cuts.last() {
            if c == last {
                return Err(usage(format!(
                    "the cut point {t} is given twice; give each once"
                )));
            }
            if c < last {
                return Err(usage(format!(
                    "the cut points must ascend, and {t} comes after {}; write them in \
                     ascending order",
                    typed(last)
                )));
            }
        }
        cuts.push(c);
    }
    Ok(cuts)
}

/// What `--selection` adds to the report.
#[derive(Debug, Clone)]
pub struct SelectionOutcome {
    /// The fitted selection model with the moderators.
    pub model: SelectionModel,
    /// The average effect under the selection model (the intercept-only
    /// selection model; the intercept itself without moderators), or why
    /// there is none.
    pub average: std::result::Result<ContrastTest, String>,
    /// Warnings for the report.
    pub warnings: Vec<String>,
}

/// The text of interval m ("p < 0.025", "0.025 ≤ p < 0.5", "p ≥ 0.5").
pub fn interval_text(cuts: &[f64], m: usize) -> String {
    match (m, m == cuts.len()) {
        (0, true) => "every p".into(),
        (0, false) => format!("p < {}", typed(cuts[0])),
        (_, true) => format!("p ≥ {}", typed(cuts[m - 1])),
        _ => format!("{} ≤ p < {}", typed(cuts[m - 1]), typed(cuts[m])),
    }
}

/// Fits the selection model to `d` and the same model without selection,
/// and the intercept-only selection model for the average effect.
///
/// # Errors
/// [`Error::Usage`] for an empty interval, or one with fewer than
/// [`MIN_PER_INTERVAL`] studies without `force`, or more parameters than
/// studies; [`Error::NoConvergence`] when the likelihood has no maximum the
/// data fix.
pub fn analyse(
    d: &ModelData<'_>,
    s: &SelectionSettings,
    terms: &[String],
    scale: ReadingScale,
) -> Result<SelectionOutcome> {
    let sign = match s.favoured {
        Favoured::Positive => 1.0,
        Favoured::Negative => -1.0,
    };
    let ys: Vec<f64> = d.y.iter().map(|y| sign * y).collect();
    let counts = check_counts(&ys, d, s)?;
    let (fit, null) = fit_pair(&ys, d.v, d.x, d.p, &s.cuts)?;
    let z = dist::normal_quantile(0.5 + d.options.level / 2.0);
    let coefficients = (0..d.p)
        .map(|j| coefficient(&terms[j], &fit, j, sign, z, scale))
        .collect();
    let nj = s.cuts.len() + 1;
    let weights = (0..nj)
        .map(|m| {
            let eta_se = (m > 0).then(|| fit.cov[(d.p + m, d.p + m)].sqrt());
            let w = fit.weights[m];
            SelectionWeight {
                from: if m == 0 { 0.0 } else { s.cuts[m - 1] },
                to: if m == nj - 1 { 1.0 } else { s.cuts[m] },
                studies: counts[m],
                estimate: w,
                se: eta_se.map(|e| w * e),
                ci_low: eta_se.map(|e| (w.ln() - z * e).exp()),
                ci_high: eta_se.map(|e| (w.ln() + z * e).exp()),
            }
        })
        .collect();
    let statistic = (2.0 * (fit.log_likelihood - null.log_likelihood)).max(0.0);
    let df = s.cuts.len() as f64;
    let average = if d.p == 1 {
        Ok(contrast(&fit, 0, sign, z))
    } else {
        let ones = vec![1.0; d.k()];
        fit_pair(&ys, d.v, &ones, 1, &s.cuts)
            .map(|(f, _)| contrast(&f, 0, sign, z))
            .map_err(|e| e.to_string())
    };
    let mut warnings = Vec::new();
    if s.force && counts.iter().any(|&c| c < MIN_PER_INTERVAL) {
        warnings.push(format!(
            "{}: an interval holds fewer than {MIN_PER_INTERVAL} studies, so its weight rests \
             on one or two studies; read the selection model as illustration only.",
            Flag::SelectionForce
        ));
    }
    Ok(SelectionOutcome {
        model: SelectionModel {
            cutpoints: s.cuts.clone(),
            favoured: s.favoured,
            weights,
            tau2: fit.tau2,
            tau2_se: (!fit.tau2_at_zero).then(|| fit.cov[(d.p, d.p)].sqrt()),
            coefficients,
            test: LikelihoodRatio {
                statistic,
                df,
                p: dist::chi2_sf(statistic, df),
            },
            log_likelihood: fit.log_likelihood,
            log_likelihood_unselected: null.log_likelihood,
            iterations: fit.iterations,
            forced: s.force,
        },
        average,
        warnings,
    })
}

/// Studies per interval, refusing empty or thin intervals and models with
/// as many parameters as studies.
fn check_counts(ys: &[f64], d: &ModelData<'_>, s: &SelectionSettings) -> Result<Vec<usize>> {
    let nj = s.cuts.len() + 1;
    let mut counts = vec![0usize; nj];
    for j in selection::intervals(ys, d.v, &s.cuts) {
        counts[j] += 1;
    }
    let k = d.k();
    let listing = || {
        (0..nj)
            .map(|m| format!("{}: {}", interval_text(&s.cuts, m), counts[m]))
            .collect::<Vec<_>>()
            .join("; ")
    };
    if let Some(m) = counts.iter().position(|&c| c == 0) {
        return Err(Error::usage(
            Flag::Selection,
            format!(
                "no study has its one-sided p-value in the interval {} (studies per interval: \
                 {}), so its weight cannot be estimated; choose cut points with studies \
                 between them, or fewer cut points",
                interval_text(&s.cuts, m),
                listing()
            ),
        ));
    }
    if !s.force {
        if let Some(m) = counts.iter().position(|&c| c < MIN_PER_INTERVAL) {
            return Err(Error::usage(
                Flag::Selection,
                format!(
                    "the interval {} holds only {} stud{} (studies per interval: {}); a weight \
                     resting on fewer than {MIN_PER_INTERVAL} studies is not identified. Merge \
                     intervals by leaving out a cut point, or add {} to fit it anyway",
                    interval_text(&s.cuts, m),
                    counts[m],
                    if counts[m] == 1 { "y" } else { "ies" },
                    listing(),
                    Flag::SelectionForce
                ),
            ));
        }
    }
    let params = d.p + nj;
    if k <= params {
        return Err(Error::usage(
            Flag::Selection,
            format!(
                "the selection model has {params} parameters ({} coefficient{}, τ² and {} \
                 weight{}) and there are only {k} studies; use fewer cut points or moderators",
                d.p,
                if d.p == 1 { "" } else { "s" },
                nj - 1,
                if nj == 2 { "" } else { "s" }
            ),
        ));
    }
    Ok(counts)
}

/// The selection model and the same model with every weight 1, both on the
/// standardised design (β = Aβ̃, Cov β = A Cov β̃ A'), started from the
/// random-effects ML fit; the selection model also from log weights
/// ln ¼, the better maximum kept.
fn fit_pair(
    ys: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    cuts: &[f64],
) -> Result<(SelectionFit, SelectionFit)> {
    let k = ys.len();
    let st = model::standardise(x, k, p);
    let opts = FitOptions {
        method: Tau2Method::Ml,
        inference: Inference::Z,
        level: 0.95,
    };
    let ml = model::fit_parts(ys, v, &st.x, p, opts, false)?;
    let beta0: Vec<f64> = ml.beta.iter().copied().collect();
    let tau20 = ml.tau2.estimate;
    let d = SelectionData {
        y: ys,
        v,
        x: &st.x,
        p,
        cuts,
    };
    let nj = cuts.len();
    let null = selection::fit(d, Weights::Fixed, &beta0, tau20, &vec![0.0; nj])?;
    let first = selection::fit(d, Weights::Estimated, &beta0, tau20, &vec![0.0; nj]);
    let second = selection::fit(
        d,
        Weights::Estimated,
        &beta0,
        tau20,
        &vec![0.25f64.ln(); nj],
    );
    let best = match (first, second) {
        (Ok(a), Ok(b)) => {
            if b.log_likelihood > a.log_likelihood {
                b
            } else {
                a
            }
        }
        (Ok(a), Err(_)) | (Err(_), Ok(a)) => a,
        (Err(e), Err(_)) => return Err(e),
    };
    Ok((unstandardise(best, &st.a, p), null))
}

/// β and its covariance back on the original design.
fn unstandardise(mut f: SelectionFit, a: &nalgebra::DMatrix<f64>, p: usize) -> SelectionFit {
    let bt = nalgebra::DVector::from_column_slice(&f.beta);
    f.beta = (a * bt).iter().copied().collect();
    let n = f.cov.nrows();
    let mut t = nalgebra::DMatrix::identity(n, n);
    t.view_mut((0, 0), (p, p)).copy_from(a);
    f.cov = &t * &f.cov * t.transpose();
    f
}

/// Coefficient j with its z test, back in the user's direction (`sign`).
fn contrast(f: &SelectionFit, j: usize, sign: f64, z: f64) -> ContrastTest {
    let est = sign * f.beta[j];
    let se = f.cov[(j, j)].sqrt();
    let stat = est / se;
    ContrastTest {
        estimate: est,
        se,
        ci: Interval::new(est - z * se, est + z * se),
        test: Test {
            statistic: stat,
            df: None,
            p: dist::normal_two_sided_p(stat),
        },
    }
}

fn coefficient(
    term: &str,
    f: &SelectionFit,
    j: usize,
    sign: f64,
    z: f64,
    scale: ReadingScale,
) -> Coefficient {
    let c = contrast(f, j, sign, z);
    Coefficient {
        term: term.to_string(),
        contrast: c,
        ratio: (scale == ReadingScale::Ratio).then(|| RatioCoefficient {
            estimate: c.estimate.exp(),
            ci: c.ci.map(f64::exp),
        }),
        robust_se: None,
        robust_df: None,
        robust_p: None,
        robust_ci: None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cut_points_are_checked_one_by_one() {
        assert_eq!(parse_cuts("0.025, 0.5").unwrap(), vec![0.025, 0.5]);
        for (bad, words) in [
            ("0", "outside (0, 1)"),
            ("1", "outside (0, 1)"),
            ("0.5,0.025", "must ascend"),
            ("0.05,0.05", "given twice"),
            ("a", "not a number"),
            ("", "give one or more"),
            ("0.025,", "not a number"),
        ] {
            let e = parse_cuts(bad).unwrap_err().to_string();
            assert!(e.contains("--selection") && e.contains(words), "{bad}: {e}");
        }
    }

    #[test]
    fn interval_texts() {
        assert_eq!(interval_text(&[0.025, 0.5], 0), "p < 0.025");
        assert_eq!(interval_text(&[0.025, 0.5], 1), "0.025 ≤ p < 0.5");
        assert_eq!(interval_text(&[0.025, 0.5], 2), "p ≥ 0.5");
    }
}
