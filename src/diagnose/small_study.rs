//! Small-study effects: the regression test for funnel-plot asymmetry, the
//! rank-correlation test, trim-and-fill, and PET and PEESE ([`super::pet_peese`]).

use super::pet_peese::{self, Precision};
use super::ModelData;
use crate::dist;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::model::wls::{fit_with, Data, Want};
use crate::model::{self, inference, FitOptions};
use crate::result::{
    AsymmetryTest, FilledStudy, Interval, RankTest, RatioCoefficient, Side, SmallStudy, TrimFill,
};
use crate::support::flag::Flag;
use crate::tolerance::TRIM_FILL_MAX_ITERS;

/// Fewest studies for which the small-study analyses are computed at all.
pub const MIN_STUDIES: usize = 3;

/// Fewer studies than this: the output says the tests have very little
/// power (Sterne et al. 2011, *BMJ* 343:d4002, recommend at least 10 studies
/// for asymmetry tests; a rule of thumb in common practice, cited from memory).
pub const LOW_POWER_STUDIES: usize = 10;

/// The regression test for funnel-plot asymmetry, classic form (Egger,
/// Davey Smith, Schneider & Minder 1997, *BMJ* 315:629).
///
/// # Formula
/// Weighted least squares of y_i on the design X (intercept, and the
/// moderators when `x` has them) plus the standard error √v_i, with weights
/// 1/v_i and a multiplicative dispersion φ = Q/(k − p − 1), Q the weighted
/// residual sum of squares: t = b_se/√(φ·[(Z'WZ)⁻¹]_se,se) on k − p − 1 df.
/// Without moderators this is the original test of the intercept in the
/// regression of y_i/√v_i on 1/√v_i (the two regressions are the same after
/// dividing by √v_i, with the roles of intercept and slope swapped).
///
/// # Errors
/// [`Error::Model`] when k − p − 1 < 1 or the augmented design is singular.
pub fn asymmetry(y: &[f64], v: &[f64], x: &[f64], p: usize) -> Result<AsymmetryTest> {
    let k = y.len();
    if k < p + 2 {
        return Err(Error::Model(format!(
            "{}: the regression test needs at least {} studies with {} coefficient{} \
             (it adds the standard error as one more), and there are {k}",
            Flag::SmallStudy,
            p + 2,
            p,
            if p == 1 { "" } else { "s" }
        )));
    }
    let q = p + 1;
    let mut z = Vec::with_capacity(k * q);
    for i in 0..k {
        z.extend_from_slice(&x[i * p..(i + 1) * p]);
        z.push(v[i].sqrt());
    }
    let data = Data { y, v, x: &z, p: q };
    let f = fit_with(&data, 0.0, Want::Q).ok_or_else(|| {
        Error::Model(format!(
            "{}: the standard errors are collinear with the moderators, so the \
             regression test is not defined",
            Flag::SmallStudy
        ))
    })?;
    let df = (k - q) as f64;
    let phi = f.q / df;
    let slope = f.beta[p];
    let se = (phi * f.m_inv[(p, p)]).sqrt();
    let t = slope / se;
    if !t.is_finite() {
        return Err(Error::Model(format!(
            "{}: the regression test is not defined (the effects lie exactly on a \
             line in their standard errors, or all standard errors are equal)",
            Flag::SmallStudy
        )));
    }
    Ok(AsymmetryTest {
        statistic: t,
        df,
        p: dist::t_two_sided_p(t, df),
        slope,
        se,
        with_moderators: p > 1,
    })
}

/// The rank-correlation test (Begg & Mazumdar 1994, *Biometrics* 50:1088,
/// cited from memory).
///
/// # Formula
/// θ̂ = Σ w_i y_i / Σ w_i with w_i = 1/v_i; standardised deviates
/// t*_i = (y_i − θ̂)/√v*_i with v*_i = v_i − 1/Σ w_i (the variance of
/// y_i − θ̂); Kendall's τ_b between t* and v. With S = concordant −
/// discordant pairs, z = S/√Var(S) with the tie-corrected variance
/// Var(S) = [n(n−1)(2n+5) − Σ t(t−1)(2t+5) − Σ u(u−1)(2u+5)]/18
/// plus Σ t(t−1)·Σ u(u−1)/(2n(n−1)) plus Σ t(t−1)(t−2)·Σ u(u−1)(u−2)/(9n(n−1)(n−2)),
/// summed over tie groups of sizes t (in t*) and u (in v) (Kendall 1970,
/// *Rank Correlation Methods*, ch. 4, cited from memory); p = 2(1 − Φ(|z|)).
/// Without ties this is Begg & Mazumdar's normal approximation.
///
/// # Errors
/// [`Error::Model`] when all deviates or all variances are tied.
pub fn rank_test(y: &[f64], v: &[f64]) -> Result<RankTest> {
    let n = y.len();
    let sw: f64 = v.iter().map(|v| 1.0 / v).sum();
    let theta = y.iter().zip(v).map(|(y, v)| y / v).sum::<f64>() / sw;
    let t: Vec<f64> = y
        .iter()
        .zip(v)
        .map(|(y, v)| (y - theta) / (v - 1.0 / sw).sqrt())
        .collect();
    let mut s = 0.0f64;
    for i in 0..n {
        for j in (i + 1)..n {
            let a = (t[i] - t[j]).signum() * f64::from(t[i] != t[j]);
            let b = (v[i] - v[j]).signum() * f64::from(v[i] != v[j]);
            s += a * b;
        }
    }
    let ties = |x: &[f64]| -> (f64, f64, f64) {
        let mut sorted: Vec<f64> = x.to_vec();
        sorted.sort_by(f64::total_cmp);
        let (mut pairs, mut t0, mut t1) = (0.0, 0.0, 0.0);
        let mut a = 0;
        while a < sorted.len() {
            let b = a + sorted[a..].iter().take_while(|&&z| z == sorted[a]).count();
            let c = (b - a) as f64;
            if c > 1.0 {
                pairs += c * (c - 1.0) / 2.0;
                t0 += c * (c - 1.0) * (c - 2.0);
                t1 += c * (c - 1.0) * (2.0 * c + 5.0);
            }
            a = b;
        }
        (pairs, t0, t1)
    };
    let nf = n as f64;
    let total = nf * (nf - 1.0) / 2.0;
    let (xt, x0, x1) = ties(&t);
    let (yt, y0, y1) = ties(v);
    // Rounding in the square roots can leave |τ| a few ε above 1.
    let tau = (s / ((total - xt).sqrt() * (total - yt).sqrt())).clamp(-1.0, 1.0);
    let m = nf * (nf - 1.0);
    let var = (m * (2.0 * nf + 5.0) - x1 - y1) / 18.0
        + 2.0 * xt * yt / m
        + x0 * y0 / (9.0 * m * (nf - 2.0));
    let z = s / var.sqrt();
    if !(tau.is_finite() && z.is_finite()) {
        return Err(Error::Model(format!(
            "{}: the rank-correlation test is not defined (all sampling variances, or \
             all deviates, are tied)",
            Flag::SmallStudy
        )));
    }
    Ok(RankTest {
        tau,
        p: dist::normal_two_sided_p(z),
    })
}

/// Ranks 1..n of `x`, ties sharing their average rank.
fn average_ranks(x: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..x.len()).collect();
    idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut r = vec![0.0; x.len()];
    let mut a = 0;
    while a < idx.len() {
        let b = a + idx[a..].iter().take_while(|&&i| x[i] == x[idx[a]]).count();
        let avg = (a + 1 + b) as f64 / 2.0;
        for &i in &idx[a..b] {
            r[i] = avg;
        }
        a = b;
    }
    r
}

fn pooled(y: &[f64], v: &[f64], options: FitOptions) -> Result<(f64, f64, f64)> {
    let ones = vec![1.0; y.len()];
    let f = model::fit_parts(y, v, &ones, 1, options, false)?;
    if f.kh_scale == Some(0.0) {
        return Err(Error::Model(format!(
            "{}: trim-and-fill met studies that all have the same effect, so the \
             Knapp–Hartung interval is 0; use {} z",
            Flag::SmallStudy,
            Flag::Inference
        )));
    }
    let pr = inference::predict(&f, &[1.0]);
    Ok((pr.estimate, pr.ci_low, pr.ci_high))
}

/// Trim-and-fill with the L0 estimator (Duval & Tweedie 2000, *Biometrics*
/// 56:455, and *JASA* 95:89; cited from memory), on the model without
/// moderators with the user's τ² estimator and inference.
///
/// # Formula
/// With missing studies sought on the left, y'_i = y_i (on the right,
/// y'_i = −y_i). Start with k₀ = 0 and repeat: θ̂ = the pooled estimate of
/// the studies left after removing the k₀ largest y'; d_i = y'_i − θ̂ for all
/// k studies; r_i = the rank of |d_i| (ties averaged); T = Σ_{d_i > 0} r_i;
/// L0 = (4T − k(k + 1))/(2k − 1); k₀ = max(0, round(L0)) (halves rounded
/// away from zero), at most k − 2; until k₀ repeats. Then the k₀ largest y'
/// are mirrored about the last θ̂ (2θ̂ − y'_i, same variance) and the model is
/// fitted to the k + k₀ studies. The side is the one the regression test
/// points to: left when its standard-error slope is positive (small studies
/// with larger effects), else right (a choice in common practice).
///
/// # Errors
/// [`Error::NoConvergence`] when k₀ does not settle; model errors of the fits.
pub fn trim_fill(
    y: &[f64],
    v: &[f64],
    options: FitOptions,
    left: bool,
    scale: ReadingScale,
) -> Result<TrimFill> {
    let k = y.len();
    let sign = if left { 1.0 } else { -1.0 };
    let yp: Vec<f64> = y.iter().map(|y| sign * y).collect();
    // Study order by y', largest first (ties in file order).
    let mut order: Vec<usize> = (0..k).collect();
    order.sort_by(|&a, &b| yp[b].total_cmp(&yp[a]));
    let kf = k as f64;
    let mut k0 = 0usize;
    let mut iterations = 0;
    let theta = loop {
        iterations += 1;
        if iterations > TRIM_FILL_MAX_ITERS {
            return Err(Error::NoConvergence {
                what: "trim-and-fill".into(),
                detail: format!(
                    "the number of missing studies did not settle in {TRIM_FILL_MAX_ITERS} rounds"
                ),
                hint: "read the regression and rank tests instead".into(),
            });
        }
        let keep: Vec<usize> = order[k0..].to_vec();
        let ky: Vec<f64> = keep.iter().map(|&i| yp[i]).collect();
        let kv: Vec<f64> = keep.iter().map(|&i| v[i]).collect();
        let (theta, _, _) = pooled(&ky, &kv, options)?;
        let d: Vec<f64> = yp.iter().map(|y| y - theta).collect();
        let abs: Vec<f64> = d.iter().map(|x| x.abs()).collect();
        let ranks = average_ranks(&abs);
        let t: f64 = d
            .iter()
            .zip(&ranks)
            .filter(|(d, _)| **d > 0.0)
            .map(|(_, r)| r)
            .sum();
        let l0 = (4.0 * t - kf * (kf + 1.0)) / (2.0 * kf - 1.0);
        let next = (l0.round().max(0.0) as usize).min(k - 2);
        if next == k0 {
            break theta;
        }
        k0 = next;
    };
    let mut fy = yp.clone();
    let mut fv = v.to_vec();
    let mut filled = Vec::with_capacity(k0);
    for &i in &order[..k0] {
        let mirrored = 2.0 * theta - yp[i];
        fy.push(mirrored);
        fv.push(v[i]);
        filled.push(FilledStudy {
            effect: sign * mirrored,
            variance: v[i],
        });
    }
    let (est, lo, hi) = pooled(&fy, &fv, options)?;
    let (est, lo, hi) = if left {
        (est, lo, hi)
    } else {
        (-est, -hi, -lo)
    };
    let (observed, _, _) = pooled(y, v, options)?;
    Ok(TrimFill {
        filled: k0,
        side: if left { Side::Left } else { Side::Right },
        estimate: est,
        ci: Interval::new(lo, hi),
        estimate_observed: observed,
        iterations,
        filled_studies: filled,
        reading: (scale != ReadingScale::Same).then(|| RatioCoefficient {
            estimate: scale.apply(est),
            ci: Interval::new(scale.apply(lo), scale.apply(hi)),
        }),
    })
}

/// All the small-study analyses with their cautions.
///
/// # Errors
/// [`Error::Model`] with fewer than [`MIN_STUDIES`] studies, or from the parts.
pub fn analyse(d: &ModelData<'_>, scale: ReadingScale) -> Result<(SmallStudy, Vec<String>)> {
    let k = d.k();
    if k < MIN_STUDIES {
        return Err(Error::Model(format!(
            "{flag} needs at least {MIN_STUDIES} studies, and the model has {k}; drop \
             {flag} (with so few studies no asymmetry can be judged)",
            flag = Flag::SmallStudy
        )));
    }
    let asymmetry_test = asymmetry(d.y, d.v, d.x, d.p)?;
    let rank_test = rank_test(d.y, d.v)?;
    // The side comes from the regression test without moderators (the
    // model trim-and-fill works on).
    let ones = vec![1.0; k];
    let plain = if d.p == 1 {
        asymmetry_test.clone()
    } else {
        asymmetry(d.y, d.v, &ones, 1)?
    };
    let trim_fill = trim_fill(d.y, d.v, d.options, plain.slope > 0.0, scale)?;
    let level = d.options.level;
    let pet = pet_peese::regression(d.y, d.v, d.x, d.p, level, Precision::StandardError)?;
    let peese = pet_peese::regression(d.y, d.v, d.x, d.p, level, Precision::Variance)?;
    let conditional = pet_peese::conditional(&pet, &peese);
    let mut cautions = Vec::new();
    if k < LOW_POWER_STUDIES {
        cautions.push(format!(
            "With only {k} studies the small-study tests have very little power: a \
             non-significant result says almost nothing (at least {LOW_POWER_STUDIES} studies \
             is a common rule of thumb, Sterne et al. 2011, BMJ 343:d4002)."
        ));
    } else {
        cautions.push(
            "The small-study tests have little power unless there are many studies; a \
             non-significant result does not show that there is no asymmetry."
                .into(),
        );
    }
    cautions.push(
        "Funnel-plot asymmetry has causes other than publication bias: true differences between \
         small and large studies (other populations, doses or quality), heterogeneity, a link \
         between the effect measure and its variance, and chance. Trim-and-fill assumes the \
         asymmetry comes from missing studies; read its estimate as a sensitivity analysis, not \
         a corrected answer."
            .into(),
    );
    let mut notes = Vec::new();
    if d.p > 1 {
        notes.push(
            "Trim-and-fill was done on the model without moderators (the average effect); the \
             regression test includes the moderators."
                .into(),
        );
    }
    Ok((
        SmallStudy {
            asymmetry_test,
            rank_test,
            trim_fill,
            pet,
            peese,
            conditional,
            cautions,
        },
        notes,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranks_average_ties() {
        assert_eq!(
            average_ranks(&[3.0, 1.0, 3.0, 2.0]),
            vec![3.5, 1.0, 3.5, 2.0]
        );
    }

    #[test]
    fn symmetric_funnel_fills_nothing() {
        // Effects mirrored in pairs about 0.2 with equal variances within a
        // pair: T = k(k+1)/4 exactly, so L0 < 1 and nothing is filled.
        let y = [0.1, 0.3, 0.0, 0.4, -0.1, 0.5];
        let v = [0.01, 0.01, 0.04, 0.04, 0.09, 0.09];
        let o = FitOptions {
            method: crate::model::tau2::Tau2Method::Dl,
            inference: crate::model::Inference::Z,
            level: 0.95,
        };
        let t = trim_fill(&y, &v, o, true, ReadingScale::Same).unwrap();
        assert_eq!(t.filled, 0);
        assert!((t.estimate - 0.2).abs() < 1e-12);
    }
}

#[cfg(test)]
mod rank_tests {
    use super::*;

    #[test]
    fn perfectly_concordant_ranks_give_tau_one_and_the_untied_variance() {
        // t* rises with v here (worked by hand: θ̂ = −0.08, t* ≈ −12.8, 0.65,
        // 6.8, 11.1), so all 6 pairs are concordant: S = 6, τ = 1,
        // Var(S) = 4·3·13/18, p = 2(1 − Φ(6/√(26/3))).
        let y = [-1.0, 0.0, 1.0, 2.0];
        let v = [0.01, 0.02, 0.03, 0.04];
        let r = rank_test(&y, &v).unwrap();
        assert!((r.tau - 1.0).abs() < 1e-15, "{}", r.tau);
        let want = dist::normal_two_sided_p(6.0 / (26.0f64 / 3.0).sqrt());
        assert!((r.p - want).abs() < 1e-15, "{} vs {want}", r.p);
    }
}
