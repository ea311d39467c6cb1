//! Influence measures for the meta-regression (Viechtbauer & Cheung 2010,
//! *Research Synthesis Methods* 1:112, cited from memory).

use super::{model_cov, Deleted, ModelData};
use crate::dist::{self, Tail};
use crate::model::ModelFit;
use crate::result::{Cutoff, Influence, InfluenceCutoffs};
use nalgebra::{DMatrix, DVector};

/// The cut-offs for k studies and p coefficients at confidence `level`.
///
/// # Formula
/// |DFFITS| > 3√(p/(k − p)); Cook's distance > the median of χ²(p);
/// hat > 3p/k (the values Viechtbauer & Cheung 2010 suggest, after Belsley,
/// Kuh & Welsch 1980, *Regression Diagnostics*; rules of thumb in common
/// practice, cited from memory); |rstudent| > z₁₋α/₂ marks an outlying
/// residual.
pub fn cutoffs(k: usize, p: usize, level: f64) -> InfluenceCutoffs {
    let (kf, pf) = (k as f64, p as f64);
    InfluenceCutoffs {
        dffits: 3.0 * (pf / (kf - pf)).sqrt(),
        cooks_distance: dist::chi2_quantile(0.5, pf, Tail::Lower),
        hat: 3.0 * pf / kf,
        rstudent: dist::normal_quantile(1.0 - (1.0 - level) / 2.0),
    }
}

fn row(x: &[f64]) -> DVector<f64> {
    DVector::from_column_slice(x)
}

fn quad(a: &DMatrix<f64>, x: &DVector<f64>) -> f64 {
    (x.transpose() * a * x)[(0, 0)]
}

/// Influence measures of every study from the full fit and the refits
/// without each study ([`super::deleted_fits`]).
///
/// # Formula
/// With the full fit's weights w_i = 1/(v_i + τ̂²), its model-based
/// covariance V = (X'WX)⁻¹ (without the Knapp–Hartung factor) and, for the
/// fit without study i, β̂₍₋ᵢ₎, τ̂²₍₋ᵢ₎ and V₍₋ᵢ₎ = (X₍₋ᵢ₎'W₍₋ᵢ₎X₍₋ᵢ₎)⁻¹:
/// - hat h_i = w_i x_i'Vx_i;
/// - rstudent_i = (y_i − x_i'β̂₍₋ᵢ₎)/√(v_i + τ̂²₍₋ᵢ₎ + x_i'V₍₋ᵢ₎x_i);
/// - DFFITS_i = (x_i'β̂ − x_i'β̂₍₋ᵢ₎)/√(h_i(τ̂²₍₋ᵢ₎ + v_i));
/// - Cook's D_i = (β̂ − β̂₍₋ᵢ₎)'V⁻¹(β̂ − β̂₍₋ᵢ₎);
/// - COVRATIO_i = det V₍₋ᵢ₎ / det V;
/// - τ̂²₍₋ᵢ₎ and the residual Q₍₋ᵢ₎ (common-effect weights).
///
/// (Viechtbauer & Cheung 2010, equations for the mixed-effects model, cited
/// from memory.) A study is influential when |DFFITS|, Cook's D or h_i
/// exceed the [`cutoffs`].
pub fn table(
    d: &ModelData<'_>,
    full: &ModelFit,
    deleted: &[Deleted],
    labels: &[String],
    lines: &[u64],
) -> (Vec<Influence>, InfluenceCutoffs) {
    let k = d.k();
    let cut = cutoffs(k, d.p, d.options.level);
    let v_full = model_cov(full);
    let v_full_inv = v_full
        .clone()
        .cholesky()
        .map(|c| c.inverse())
        .unwrap_or_else(|| DMatrix::from_element(d.p, d.p, f64::NAN));
    let det_full = v_full.determinant();
    let t = full.tau2.estimate;
    let out = deleted
        .iter()
        .enumerate()
        .map(|(i, del)| {
            let xi = row(d.row(i));
            let hat = quad(&v_full, &xi) / (d.v[i] + t);
            let mut inf = Influence {
                study: labels[i].clone(),
                line: lines[i],
                rstudent: None,
                dffits: None,
                cooks_distance: None,
                cov_ratio: None,
                hat,
                tau2_deleted: None,
                q_deleted: None,
                influential: false,
                exceeded: Vec::new(),
                problem: None,
            };
            match del {
                Err(why) => inf.problem = Some(why.clone()),
                Ok(f) => {
                    let vd = model_cov(f);
                    let td = f.tau2.estimate;
                    let pred_del = xi.dot(&f.beta);
                    let pred_full = xi.dot(&full.beta);
                    let diff = &full.beta - &f.beta;
                    let finite = |x: f64| x.is_finite().then_some(x);
                    inf.rstudent =
                        finite((d.y[i] - pred_del) / (d.v[i] + td + quad(&vd, &xi)).sqrt());
                    inf.dffits = finite((pred_full - pred_del) / (hat * (td + d.v[i])).sqrt());
                    inf.cooks_distance = finite(quad(&v_full_inv, &diff));
                    inf.cov_ratio = finite(vd.determinant() / det_full);
                    inf.tau2_deleted = Some(td);
                    inf.q_deleted = Some(f.q_e);
                }
            }
            if inf.dffits.is_some_and(|x| x.abs() > cut.dffits) {
                inf.exceeded.push(Cutoff::Dffits);
            }
            if inf.cooks_distance.is_some_and(|x| x > cut.cooks_distance) {
                inf.exceeded.push(Cutoff::CooksDistance);
            }
            if hat > cut.hat {
                inf.exceeded.push(Cutoff::Hat);
            }
            inf.influential = !inf.exceeded.is_empty();
            if inf.rstudent.is_some_and(|x| x.abs() > cut.rstudent) {
                inf.exceeded.push(Cutoff::Rstudent);
            }
            inf
        })
        .collect();
    (out, cut)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::tau2::Tau2Method;
    use crate::model::{FitOptions, Inference};

    #[test]
    fn common_effect_with_equal_variances_has_textbook_values() {
        // Intercept only, τ² = 0, all v = 0.1: β̂ is the mean, h_i = 1/k,
        // β̂₍₋ᵢ₎ the mean of the others, Cook's D = (β̂ − β̂₍₋ᵢ₎)²·k/v and
        // COVRATIO = k/(k − 1) (worked by hand from the formulas).
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
        let labels: Vec<String> = (0..5).map(|i| i.to_string()).collect();
        let (t, _) = table(&d, &full, &del, &labels, &[2, 3, 4, 5, 6]);
        let mean = y.iter().sum::<f64>() / 5.0;
        for (i, s) in t.iter().enumerate() {
            let others = (y.iter().sum::<f64>() - y[i]) / 4.0;
            assert!((s.hat - 0.2).abs() < 1e-14);
            let cook = (mean - others).powi(2) * 5.0 / 0.1;
            assert!((s.cooks_distance.unwrap() - cook).abs() < 1e-12);
            assert!((s.cov_ratio.unwrap() - 1.25).abs() < 1e-12);
            // rstudent: (y_i − mean of others)/√(v + v/4).
            let rs = (y[i] - others) / (0.1f64 * 1.25).sqrt();
            assert!((s.rstudent.unwrap() - rs).abs() < 1e-12);
        }
    }
}
