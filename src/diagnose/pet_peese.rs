//! PET and PEESE (Stanley & Doucouliagos 2014, *Res. Synth. Methods*
//! 5:60): the effect of a hypothetical study with no sampling error, read
//! off a weighted regression of the effects on their standard errors (PET)
//! or their variances (PEESE), and the conditional choice between them.

use crate::dist;
use crate::error::{Error, Result};
use crate::model::wls::{fit_with, Data, Want};
use crate::result::{
    ConditionalEstimate, ContrastTest, Interval, PetPeeseChoice, PrecisionRegression, Test,
};
use crate::support::flag::Flag;
use crate::tolerance::EXACT_FIT_REL;

/// Two-sided level at which PET's intercept must differ from 0 for the
/// conditional estimate to take PEESE's (Stanley & Doucouliagos 2014, who
/// test one-sided at 5%, the same in the favoured direction).
pub const PET_ALPHA: f64 = 0.10;

/// The regressor added to the design.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Precision {
    /// The standard error √v_i (PET).
    StandardError,
    /// The sampling variance v_i (PEESE).
    Variance,
}

/// One precision regression.
///
/// # Formula
/// Weighted least squares of y_i on Z = [X, s_i] with s_i = √v_i (PET) or
/// v_i (PEESE) and weights 1/v_i; multiplicative dispersion
/// φ = Q/(k − p − 1) with Q the weighted residual sum of squares;
/// se_j = √(φ·[(Z'WZ)⁻¹]_jj), t_j = b_j/se_j on k − p − 1 df, interval
/// b_j ± t_{1−α/2, k−p−1}·se_j (Stanley & Doucouliagos 2014, eqs. 5 and 6,
/// cited from memory; moderators as further regressors as in their
/// multiple meta-regression form).
///
/// # Errors
/// [`Error::Model`] with fewer than p + 2 studies, a singular augmented
/// design, or an exact fit (no residual variance).
pub fn regression(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    level: f64,
    kind: Precision,
) -> Result<PrecisionRegression> {
    let k = y.len();
    let name = match kind {
        Precision::StandardError => "PET",
        Precision::Variance => "PEESE",
    };
    if k < p + 2 {
        return Err(Error::Model(format!(
            "{}: {name} needs at least {} studies with {p} coefficient{}, and there are {k}",
            Flag::SmallStudy,
            p + 2,
            if p == 1 { "" } else { "s" }
        )));
    }
    let q = p + 1;
    let mut z = Vec::with_capacity(k * q);
    for i in 0..k {
        z.extend_from_slice(&x[i * p..(i + 1) * p]);
        z.push(match kind {
            Precision::StandardError => v[i].sqrt(),
            Precision::Variance => v[i],
        });
    }
    let data = Data { y, v, x: &z, p: q };
    let f = fit_with(&data, 0.0, Want::Q).ok_or_else(|| {
        Error::Model(format!(
            "{}: {name} is not defined: the {} are collinear with the moderators",
            Flag::SmallStudy,
            match kind {
                Precision::StandardError => "standard errors",
                Precision::Variance => "variances",
            }
        ))
    })?;
    let df = (k - q) as f64;
    let phi = f.q / df;
    // Q at rounding level (a few ε of Σ y²/v): an exact fit, no residual variance.
    let total: f64 = y.iter().zip(v).map(|(y, v)| y * y / v).sum();
    if f.q <= EXACT_FIT_REL * total {
        return Err(Error::Model(format!(
            "{}: {name} is not defined (the effects lie exactly on a line in their \
             precision, so the residual variance is 0)",
            Flag::SmallStudy
        )));
    }
    let crit = dist::t_quantile(0.5 + level / 2.0, df);
    let coef = |j: usize| -> Result<ContrastTest> {
        let est = f.beta[j];
        let se = (phi * f.m_inv[(j, j)]).sqrt();
        let t = est / se;
        if !(t.is_finite() && se > 0.0) {
            return Err(Error::Model(format!(
                "{}: {name} is not defined (the effects lie exactly on a line in their \
                 precision, so the residual variance is 0)",
                Flag::SmallStudy
            )));
        }
        Ok(ContrastTest {
            estimate: est,
            se,
            ci: Interval::new(est - crit * se, est + crit * se),
            test: Test {
                statistic: t,
                df: Some(df),
                p: dist::t_two_sided_p(t, df),
            },
        })
    };
    Ok(PrecisionRegression {
        intercept: coef(0)?,
        slope: coef(p)?,
        moderators: (1..p).map(coef).collect::<Result<_>>()?,
        dispersion: phi,
    })
}

/// The conditional estimate: PEESE's intercept when PET's intercept differs
/// from 0 at two-sided α = [`PET_ALPHA`], else PET's.
pub fn conditional(pet: &PrecisionRegression, peese: &PrecisionRegression) -> ConditionalEstimate {
    if pet.intercept.test.p < PET_ALPHA {
        ConditionalEstimate {
            used: PetPeeseChoice::Peese,
            estimate: peese.intercept,
        }
    } else {
        ConditionalEstimate {
            used: PetPeeseChoice::Pet,
            estimate: pet.intercept,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn effects_on_an_exact_line_in_the_standard_error_are_refused() {
        let v = [0.01, 0.04, 0.09, 0.16];
        let y: Vec<f64> = v.iter().map(|v: &f64| 0.1 + 2.0 * v.sqrt()).collect();
        let e = regression(&y, &v, &[1.0; 4], 1, 0.95, Precision::StandardError)
            .unwrap_err()
            .to_string();
        assert!(e.contains("PET is not defined"), "{e}");
    }

    #[test]
    fn pet_recovers_a_known_line_and_its_slope_is_the_regression_test() {
        // y = 0.2 + 1.5·se + a residual pattern orthogonal to nothing in
        // particular: the intercept and slope come back near 0.2 and 1.5.
        let v = [0.01, 0.02, 0.04, 0.05, 0.08, 0.1];
        let e = [0.01, -0.02, 0.015, -0.01, 0.02, -0.012];
        let y: Vec<f64> = v
            .iter()
            .zip(e)
            .map(|(v, e): (&f64, f64)| 0.2 + 1.5 * v.sqrt() + e)
            .collect();
        let r = regression(&y, &v, &[1.0; 6], 1, 0.95, Precision::StandardError).unwrap();
        assert!(
            (r.intercept.estimate - 0.2).abs() < 0.05,
            "{:?}",
            r.intercept
        );
        assert!((r.slope.estimate - 1.5).abs() < 0.2, "{:?}", r.slope);
        let a = super::super::small_study::asymmetry(&y, &v, &[1.0; 6], 1).unwrap();
        assert!((a.slope - r.slope.estimate).abs() < 1e-12);
        assert!((a.p - r.slope.test.p).abs() < 1e-12);
    }
}
