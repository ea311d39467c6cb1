//! The influence view (`--influence`): how much each study moves the
//! answer, how unusual its effect is next to the others and how much pull
//! it has, with cut-offs from the regression-diagnostics textbooks.

use super::loo::Refits;
use super::{conclusion, model_cov, ModelData};
use crate::dist;
use crate::effect::ReadingScale;
use crate::model::{inference, ModelFit};
use crate::result::{Influence, InfluenceFlag, InfluenceRules};
use nalgebra::{DMatrix, DVector};

/// The cut-offs of the flags for k studies and p coefficients at confidence
/// `level`.
///
/// # Formula
/// - a coefficient moves by more than 2/√k of its standard error: the
///   size-adjusted cut-off for DFBETAS of Belsley, Kuh & Welsch (1980,
///   *Regression Diagnostics*, Wiley, §2.1; from memory);
/// - |deleted residual| > z₁₋α/(2k): the Bonferroni-adjusted outlier test on
///   externally studentised residuals (Cook & Weisberg 1982, *Residuals and
///   Influence in Regression*, Chapman & Hall, §2.2; from memory; the
///   normal in place of the t because the sampling variances are known);
/// - leverage > 2p/k: twice the average leverage p/k (Hoaglin & Welsch
///   1978, *Am. Stat.* 32:17; Belsley, Kuh & Welsch 1980).
///
/// They are rules of thumb in common practice, named so that a reader can
/// weigh them, not tests with a known error rate.
pub fn cutoffs(k: usize, p: usize, level: f64) -> (f64, f64, f64) {
    let (kf, pf) = (k as f64, p as f64);
    let alpha = 1.0 - level;
    (
        2.0 / kf.sqrt(),
        dist::normal_quantile(1.0 - alpha / (2.0 * kf)),
        2.0 * pf / kf,
    )
}

fn quad(a: &DMatrix<f64>, x: &DVector<f64>) -> f64 {
    (x.transpose() * a * x)[(0, 0)]
}

/// The influence view of every study from the full fit and the refits
/// without each study ([`super::deleted_fits`], [`super::average_fits`]).
///
/// # Formula
/// With the full fit's weights w_i = 1/(v_i + τ̂²), its model-based
/// covariance V = (X'WX)⁻¹ and, without study i, β̂₍₋ᵢ₎, τ̂²₍₋ᵢ₎,
/// V₍₋ᵢ₎ = (X₍₋ᵢ₎'W₍₋ᵢ₎X₍₋ᵢ₎)⁻¹ and the average μ̂₍₋ᵢ₎ of the model without
/// moderators:
/// - average shift μ̂₍₋ᵢ₎ − μ̂, and g(μ̂₍₋ᵢ₎) − g(μ̂) on the reading scale;
/// - coefficient shifts β̂ⱼ₍₋ᵢ₎ − β̂ⱼ, and the same over SE(β̂ⱼ) as reported
///   (a DFBETAS-like scaling, Belsley, Kuh & Welsch 1980, with the full
///   fit's standard error);
/// - the moderator test's p without the study and the conclusions it
///   reverses ([`conclusion::changes`]);
/// - standardised deleted residual (y_i − x_i'β̂₍₋ᵢ₎)/√(v_i + τ̂²₍₋ᵢ₎ +
///   x_i'V₍₋ᵢ₎x_i): the study's effect against the prediction of the others
///   (the mixed-model form of Viechtbauer & Cheung 2010, *Res. Synth.
///   Methods* 1:112, from memory);
/// - leverage h_i = w_i x_i'Vx_i (the diagonal of the weighted hat matrix).
///
/// The flags use the [`cutoffs`]; `moves_coefficient` reads the moderator
/// coefficients (the average without moderators).
pub fn table(
    d: &ModelData<'_>,
    r: Refits<'_>,
    labels: &[String],
    lines: &[u64],
) -> (Vec<Influence>, InfluenceRules) {
    let k = d.k();
    let (shift_cut, resid_cut, lev_cut) = cutoffs(k, d.p, d.options.level);
    let full = r.full;
    let v_full = model_cov(full);
    let t = full.tau2.estimate;
    let se: Vec<f64> = inference::coefficients(full).iter().map(|c| c.se).collect();
    let full_average = full_average(d, r);
    let reading = |x: f64| (r.scale != ReadingScale::Same).then(|| r.scale.apply(x));
    let moved: Vec<usize> = if d.p > 1 { (1..d.p).collect() } else { vec![0] };
    let out = r
        .deleted
        .iter()
        .enumerate()
        .map(|(i, del)| {
            let xi = DVector::from_column_slice(d.row(i));
            let leverage = quad(&v_full, &xi) / (d.v[i] + t);
            let mut inf = Influence {
                study: labels[i].clone(),
                line: lines[i],
                average_without: None,
                average_shift: None,
                average_shift_reading: None,
                coefficient_shifts: Vec::new(),
                coefficient_shifts_se: Vec::new(),
                moderator_p_without: None,
                changes: Vec::new(),
                deleted_residual: None,
                leverage,
                flags: Vec::new(),
                problem: None,
            };
            match del {
                Err(why) => inf.problem = Some(why.clone()),
                Ok(f) => fill(&mut inf, d, f, r, &se, i),
            }
            if let (Some(a), Some(m)) = (
                r.averages.get(i).and_then(|a| a.as_ref().ok()),
                full_average,
            ) {
                let a = a.beta[0];
                inf.average_without = Some(a);
                inf.average_shift = Some(a - m);
                inf.average_shift_reading = reading(a).zip(reading(m)).map(|(x, y)| x - y);
            }
            if !inf.changes.is_empty() {
                inf.flags.push(InfluenceFlag::ChangesConclusion);
            }
            let big = |j: &usize| {
                inf.coefficient_shifts_se
                    .get(*j)
                    .is_some_and(|s| s.abs() > shift_cut)
            };
            if moved.iter().any(big) {
                inf.flags.push(InfluenceFlag::MovesCoefficient);
            }
            if inf.deleted_residual.is_some_and(|x| x.abs() > resid_cut) {
                inf.flags.push(InfluenceFlag::UnusualEffect);
            }
            if leverage > lev_cut {
                inf.flags.push(InfluenceFlag::HighLeverage);
            }
            inf
        })
        .collect();
    let average = full_average.unwrap_or(f64::NAN);
    let rules = InfluenceRules {
        coefficient_shift_se: shift_cut,
        deleted_residual: resid_cut,
        leverage: lev_cut,
        average,
        average_reading: reading(average),
        moderator_p: inference::omnibus(full).map(|t| t.p),
    };
    (out, rules)
}

/// The quantities of one study that need its refit.
fn fill(inf: &mut Influence, d: &ModelData<'_>, f: &ModelFit, r: Refits<'_>, se: &[f64], i: usize) {
    let finite = |x: f64| x.is_finite().then_some(x);
    let xi = DVector::from_column_slice(d.row(i));
    let vd = model_cov(f);
    let pred = xi.dot(&f.beta);
    inf.deleted_residual =
        finite((d.y[i] - pred) / (d.v[i] + f.tau2.estimate + quad(&vd, &xi)).sqrt());
    inf.coefficient_shifts = (0..d.p).map(|j| f.beta[j] - r.full.beta[j]).collect();
    inf.coefficient_shifts_se = inf
        .coefficient_shifts
        .iter()
        .zip(se)
        .map(|(s, e)| s / e)
        .collect();
    inf.moderator_p_without = inference::omnibus(f).map(|t| t.p);
    inf.changes = conclusion::changes(r.full, f, r.terms, d.options.level);
}

/// The average effect with every study: the model's intercept without
/// moderators, else the intercept-only fit of the same rows.
fn full_average(d: &ModelData<'_>, r: Refits<'_>) -> Option<f64> {
    if d.p == 1 {
        return Some(r.full.beta[0]);
    }
    let ones = vec![1.0; d.k()];
    super::refit(d.y, d.v, std::borrow::Cow::Borrowed(&ones), 1, d.options)
        .ok()
        .map(|f| f.beta[0])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::tau2::Tau2Method;
    use crate::model::{FitOptions, Inference};

    #[test]
    fn common_effect_with_equal_variances_has_textbook_values() {
        // Intercept only, τ² = 0, all v = 0.1: β̂ is the mean, h_i = 1/k,
        // β̂₍₋ᵢ₎ the mean of the others, the shift in SEs
        // (mean of others − mean)/√(v/k) and the deleted residual
        // (y_i − mean of others)/√(v + v/(k − 1)) (worked by hand).
        let y = [0.1, 0.4, 0.2, 0.9, 0.3];
        let v = [0.1; 5];
        let x = [1.0; 5];
        let options = FitOptions {
            method: Tau2Method::None,
            inference: Inference::Z,
            level: 0.95,
        };
        let d = ModelData {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
            options,
        };
        let full = crate::model::fit(&y, &v, &x, 1, options).unwrap();
        let del = super::super::deleted_fits(&d);
        let avg = super::super::average_fits(&d, &del);
        let labels: Vec<String> = (0..5).map(|i| i.to_string()).collect();
        let refits = Refits {
            full: &full,
            deleted: &del,
            averages: &avg,
            terms: &["intercept".to_string()],
            scale: ReadingScale::Same,
        };
        let (t, rules) = table(&d, refits, &labels, &[2, 3, 4, 5, 6]);
        let mean = y.iter().sum::<f64>() / 5.0;
        assert!((rules.average - mean).abs() < 1e-14);
        assert!((rules.leverage - 0.4).abs() < 1e-15);
        assert!((rules.coefficient_shift_se - 2.0 / 5f64.sqrt()).abs() < 1e-15);
        for (i, s) in t.iter().enumerate() {
            let others = (y.iter().sum::<f64>() - y[i]) / 4.0;
            assert!((s.leverage - 0.2).abs() < 1e-14);
            assert!((s.average_shift.unwrap() - (others - mean)).abs() < 1e-14);
            let in_se = (others - mean) / (0.1f64 / 5.0).sqrt();
            assert!((s.coefficient_shifts_se[0] - in_se).abs() < 1e-12);
            let rs = (y[i] - others) / (0.1f64 * 1.25).sqrt();
            assert!((s.deleted_residual.unwrap() - rs).abs() < 1e-12);
            assert_eq!(s.moderator_p_without, None);
        }
        // Study 4 (0.9): the mean moves from 0.38 to 0.25, −0.13/√0.02 =
        // −0.92 SE, beyond 2/√5 ≈ 0.894; study 5 (0.3) by 0.14 SE.
        assert!(t[3].flags.contains(&InfluenceFlag::MovesCoefficient));
        assert!(!t[4].flags.contains(&InfluenceFlag::MovesCoefficient));
    }
}
