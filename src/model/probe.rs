//! The mathematics of reading a fitted meta-regression at chosen moderator
//! values: conditional effects (`--probe`), simple slopes in models with a
//! product term, pairwise level contrasts (`--compare-levels`) and
//! Johnson–Neyman regions of significance (`--regions`). The words and the
//! report's structs are made by the `fit` job (`crate::fit`).
//!
//! Every quantity here is a linear contrast c'β̂ of the fitted coefficients,
//! with Var(c'β̂) = c' Cov c from the model's covariance (Knapp–Hartung-scaled
//! under `kh`) and the model's reference distribution: t(k − p) under `kh`,
//! the normal under `z` (the same as the coefficient tests,
//! [`inference::critical`]). The contrast vectors are built from design rows
//! ([`design::design_row`]), so centring, dummy coding and product terms are
//! handled exactly as in the fit.

use super::design::{self, Design, ModeratorKind, Value};
use super::inference::{self, CoefInference, PredictionInference};
use super::ModelFit;
use crate::error::Result;
use crate::tolerance;
use nalgebra::DVector;

pub use crate::result::Region;

/// Johnson–Neyman bounds of θ(m) = a + b·m along m.
///
/// # Formula
/// With Var θ(m) = v00 + 2 m v01 + m² v11 and critical value c, the
/// confidence interval of θ(m) excludes 0 where
/// (a + b m)² − c² Var θ(m) > 0, that is where
/// f(m) = (b² − c² v11) m² + 2 (a b − c² v01) m + (a² − c² v00) > 0
/// (Johnson & Neyman 1936, *Statistical Research Memoirs* 1:57; in the form of
/// Bauer & Curran 2005, *Multivariate Behavioral Research* 40:373, eq. for the
/// region of significance, cited from memory). With A = b² − c² v11 and the
/// discriminant D: A > 0, D > 0 → significant outside the roots; A > 0,
/// D ≤ 0 → everywhere; A < 0, D > 0 → inside the roots; A < 0, D ≤ 0 →
/// nowhere. A = 0 (within [`tolerance::JN_DEGENERATE`] of the scale b² + c² v11)
/// leaves a linear inequality with one bound. The roots use the
/// cancellation-free form q = −(B + sign(B)√D)/2, roots q/A and C/q.
///
/// # Examples
/// ```
/// use pondus::model::probe::{jn_bounds, Region};
/// // θ(m) = m with Var = 1 and c = 2: significant where m² > 4, |m| > 2.
/// let (b, r) = jn_bounds(0.0, 1.0, 1.0, 0.0, 0.0, 2.0);
/// assert_eq!(r, Region::Outside);
/// assert!((b[0] + 2.0).abs() < 1e-12 && (b[1] - 2.0).abs() < 1e-12);
/// ```
pub fn jn_bounds(a: f64, b: f64, v00: f64, v01: f64, v11: f64, c: f64) -> (Vec<f64>, Region) {
    let c2 = c * c;
    let qa = b * b - c2 * v11;
    let qb = 2.0 * (a * b - c2 * v01);
    let qc = a * a - c2 * v00;
    let scale = b * b + c2 * v11;
    if qa.abs() <= tolerance::JN_DEGENERATE * scale || scale == 0.0 {
        // Linear: qb m + qc > 0.
        if qb == 0.0 {
            return (
                Vec::new(),
                if qc > 0.0 {
                    Region::Everywhere
                } else {
                    Region::Nowhere
                },
            );
        }
        let root = -qc / qb;
        return (
            vec![root],
            if qb > 0.0 {
                Region::Above
            } else {
                Region::Below
            },
        );
    }
    let disc = qb * qb - 4.0 * qa * qc;
    if disc <= 0.0 {
        return (
            Vec::new(),
            if qa > 0.0 {
                Region::Everywhere
            } else {
                Region::Nowhere
            },
        );
    }
    let q = -0.5 * (qb + qb.signum() * disc.sqrt());
    let (mut r1, mut r2) = if q == 0.0 {
        // qb = 0 and qc = 0 with disc > 0 cannot happen; qb = 0 gives q from √D.
        let h = (disc.sqrt()) / (2.0 * qa);
        (-h, h)
    } else {
        (q / qa, qc / q)
    };
    if r1 > r2 {
        std::mem::swap(&mut r1, &mut r2);
    }
    (
        vec![r1, r2],
        if qa > 0.0 {
            Region::Outside
        } else {
            Region::Inside
        },
    )
}

/// The parts of [lo, hi] where the region holds.
pub fn within(bounds: &[f64], region: Region, lo: f64, hi: f64) -> Vec<[f64; 2]> {
    let mut out = Vec::new();
    let mut push = |a: f64, b: f64| {
        let (a, b) = (a.max(lo), b.min(hi));
        if a < b {
            out.push([a, b]);
        }
    };
    match (region, bounds) {
        (Region::Everywhere, _) => push(lo, hi),
        (Region::Outside, [r1, r2]) => {
            push(lo, *r1);
            push(*r2, hi);
        }
        (Region::Inside, [r1, r2]) => push(*r1, *r2),
        (Region::Above, [r]) => push(*r, hi),
        (Region::Below, [r]) => push(lo, *r),
        _ => {}
    }
    out
}

/// The test of one contrast c'β̂ (the same inference as a coefficient's).
///
/// # Formula
/// estimate c'β̂, SE √(c' Cov c), CI estimate ± crit·SE, statistic
/// estimate/SE on t(k − p) (kh) or the normal (z).
pub fn contrast(fit: &ModelFit, c: &[f64]) -> CoefInference {
    let x = DVector::from_column_slice(c);
    let est = x.dot(&fit.beta);
    let se = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0).sqrt();
    inference::wald(fit, est, se)
}

/// A conditional effect: the mean effect at one design row, with its test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conditional {
    /// Estimate, confidence and prediction intervals ([`inference::predict`]).
    pub prediction: PredictionInference,
    /// estimate/SE.
    pub statistic: f64,
    /// Degrees of freedom of the reference distribution (None for the normal).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
}

/// The mean effect at design row `x0` (x0'β̂, [`inference::predict`]) and
/// its test against 0 on t(k − p) (kh) or the normal (z).
pub fn conditional(fit: &ModelFit, x0: &[f64]) -> Conditional {
    let prediction = inference::predict(fit, x0);
    let test = inference::wald(fit, prediction.estimate, prediction.se);
    Conditional {
        prediction,
        statistic: test.statistic,
        df: test.df,
        p: test.p,
    }
}

fn quad(fit: &ModelFit, a: &[f64], b: &[f64]) -> f64 {
    let x = DVector::from_column_slice(a);
    let y = DVector::from_column_slice(b);
    (x.transpose() * &fit.cov * &y)[(0, 0)]
}

/// Holm's step-down adjustment (Holm 1979, *Scand. J. Statist.* 6:65):
/// with p sorted ascending, p̃_(i) = max_{j ≤ i} min(1, (m − j + 1) p_(j)).
pub fn holm(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut out = vec![0.0; m];
    let mut running: f64 = 0.0;
    for (rank, &i) in order.iter().enumerate() {
        running = running.max(((m - rank) as f64 * p[i]).min(1.0));
        out[i] = running;
    }
    out
}

/// The design row of the moderator values `values` ([`design::design_row`]).
///
/// # Errors
/// As [`design::design_row`].
pub fn row(design: &Design, values: &[Value]) -> Result<Vec<f64>> {
    design::design_row(&design.moderators, &design.interactions, values)
}

/// The difference a − b of two contrast vectors.
pub fn minus(a: &[f64], b: &[f64]) -> Vec<f64> {
    a.iter().zip(b).map(|(x, y)| x - y).collect()
}

/// A quantity a moderator contributes as a "slope".
#[derive(Debug, Clone, PartialEq)]
pub enum Partner {
    /// The change of the mean effect per unit of a numeric moderator.
    PerUnit,
    /// A categorical moderator's level minus its reference level.
    Difference {
        /// The level.
        level: String,
        /// The reference level.
        reference: String,
    },
}

/// The quantities a moderator `f` contributes as a "slope": its slope per
/// unit when numeric, each level's difference from the reference when
/// categorical. Each comes with its contrast at `values`.
///
/// # Errors
/// As [`design::design_row`].
pub fn partner_contrasts(
    design: &Design,
    f: usize,
    values: &[Value],
) -> Result<Vec<(Partner, Vec<f64>)>> {
    let m = &design.moderators[f];
    let mut out = Vec::new();
    match &m.kind {
        ModeratorKind::Numeric { mean, .. } => {
            let mut v = values.to_vec();
            v[f] = Value::Number(*mean + 1.0);
            let up = row(design, &v)?;
            v[f] = Value::Number(*mean);
            let here = row(design, &v)?;
            out.push((Partner::PerUnit, minus(&up, &here)));
        }
        ModeratorKind::Categorical {
            levels, reference, ..
        } => {
            let mut v = values.to_vec();
            v[f] = Value::Label(reference.clone());
            let base = row(design, &v)?;
            for l in levels.iter().filter(|l| *l != reference) {
                v[f] = Value::Label(l.clone());
                out.push((
                    Partner::Difference {
                        level: l.clone(),
                        reference: reference.clone(),
                    },
                    minus(&row(design, &v)?, &base),
                ));
            }
        }
    }
    Ok(out)
}

/// Pairwise contrasts between the design rows of a moderator's levels:
/// (b, a, test of row b − row a) for every a < b, with Holm-adjusted
/// p-values ([`holm`]) over the pairs.
pub fn pairwise(fit: &ModelFit, rows: &[Vec<f64>]) -> Vec<(usize, usize, CoefInference, f64)> {
    let mut pairs = Vec::new();
    for a in 0..rows.len() {
        for b in a + 1..rows.len() {
            pairs.push((b, a, contrast(fit, &minus(&rows[b], &rows[a]))));
        }
    }
    let ps: Vec<f64> = pairs.iter().map(|(_, _, t)| t.p).collect();
    pairs
        .into_iter()
        .zip(holm(&ps))
        .map(|((b, a, t), p_holm)| (b, a, t, p_holm))
        .collect()
}

/// A Johnson–Neyman region along a numeric moderator, over all values and
/// over the studies' range [min, max].
#[derive(Debug, Clone, PartialEq)]
pub struct JnRegion {
    /// The quantity at moderator value 0: θ(0) = a.
    pub a: f64,
    /// Its change per unit of the moderator: θ(m) = a + b·m.
    pub b: f64,
    /// Where the confidence interval of θ just touches 0 ([`jn_bounds`]).
    pub bounds: Vec<f64>,
    /// Where θ is significant, over all values.
    pub region: Region,
    /// The bounds strictly inside (min, max).
    pub observed_bounds: Vec<f64>,
    /// The significant parts of [min, max] ([`within`]).
    pub observed: Vec<[f64; 2]>,
    /// Where θ is significant within [min, max].
    pub observed_region: Region,
    /// The studies' smallest value of the moderator.
    pub min: f64,
    /// The studies' largest value.
    pub max: f64,
}

/// The Johnson–Neyman region of the quantity whose contrast at moderator
/// value x is `at(x)`; the contrast is linear in x, so c(x) = c(0) + x·(c(1) − c(0)),
/// θ(x) = a + b x with a = c(0)'β̂, b = (c(1) − c(0))'β̂, and
/// Var θ(x) = v00 + 2 x v01 + x² v11 from c(0)' Cov c(0), c(0)' Cov d, d' Cov d.
///
/// # Errors
/// Those of `at`.
pub fn jn_region(
    fit: &ModelFit,
    min: f64,
    max: f64,
    at: impl Fn(f64) -> Result<Vec<f64>>,
) -> Result<JnRegion> {
    let c0 = at(0.0)?;
    let d = minus(&at(1.0)?, &c0);
    let beta: Vec<f64> = fit.beta.iter().copied().collect();
    let dot = |u: &[f64]| u.iter().zip(&beta).map(|(x, b)| x * b).sum::<f64>();
    let (a, b) = (dot(&c0), dot(&d));
    let (v00, v01, v11) = (quad(fit, &c0, &c0), quad(fit, &c0, &d), quad(fit, &d, &d));
    let crit = inference::critical(fit);
    let (bounds, region) = jn_bounds(a, b, v00, v01, v11, crit);
    let observed = within(&bounds, region, min, max);
    let observed_bounds: Vec<f64> = bounds
        .iter()
        .copied()
        .filter(|x| *x > min && *x < max)
        .collect();
    let observed_region = match (observed.as_slice(), observed_bounds.len()) {
        ([], _) => Region::Nowhere,
        ([[l, h]], _) if *l == min && *h == max => Region::Everywhere,
        ([_, _], _) => Region::Outside,
        ([[l, _]], 1) if *l == min => Region::Below,
        ([_], 1) => Region::Above,
        ([_], _) => Region::Inside,
        _ => Region::Inside,
    };
    Ok(JnRegion {
        a,
        b,
        bounds,
        region,
        observed_bounds,
        observed,
        observed_region,
        min,
        max,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// f(m) evaluated directly, to check the roots are where the CI touches 0.
    fn margin(a: f64, b: f64, v: (f64, f64, f64), c: f64, m: f64) -> f64 {
        (a + b * m).powi(2) - c * c * (v.0 + 2.0 * m * v.1 + m * m * v.2)
    }

    #[test]
    fn four_cases_by_construction() {
        let c = 1.96;
        // Steep, precise slope through 0 at m = 5: significant outside an interval around 5.
        let v = (0.04, -0.004, 0.0004);
        let (bd, r) = jn_bounds(-1.0, 0.2, v.0, v.1, v.2, c);
        assert_eq!(r, Region::Outside);
        for x in &bd {
            assert!(margin(-1.0, 0.2, v, c, *x).abs() < 1e-12);
        }
        assert!(bd[0] < 5.0 && 5.0 < bd[1]);
        // A line crosses 0 somewhere, where its interval must contain 0: a
        // large, precise intercept with a small slope is significant outside
        // two bounds far away (near the crossing at m = −500).
        let (bd, r) = jn_bounds(5.0, 0.01, 0.01, 0.0, 1e-6, c);
        assert_eq!(r, Region::Outside);
        assert!(bd[0] < -500.0 && bd[1] > -500.0 && bd[1] < 0.0, "{bd:?}");
        // Only a quantity that does not change with m is significant everywhere.
        let (bd, r) = jn_bounds(5.0, 0.0, 0.01, 0.0, 0.0, c);
        assert_eq!((bd.len(), r), (0, Region::Everywhere));
        // Flat and noisy: nowhere.
        let (bd, r) = jn_bounds(0.05, 0.0, 0.04, 0.0, 0.01, c);
        assert_eq!((bd.len(), r), (0, Region::Nowhere));
        // Imprecise slope, precise near m = 0 where the effect is large: inside.
        let v = (0.01, 0.0, 0.25);
        let (bd, r) = jn_bounds(1.0, 0.1, v.0, v.1, v.2, c);
        assert_eq!(r, Region::Inside);
        for x in &bd {
            assert!(margin(1.0, 0.1, v, c, *x).abs() < 1e-12);
        }
        assert!(bd[0] < 0.0 && 0.0 < bd[1]);
    }

    #[test]
    fn within_clips_to_the_observed_range() {
        assert_eq!(
            within(&[2.0, 4.0], Region::Outside, 0.0, 10.0),
            vec![[0.0, 2.0], [4.0, 10.0]]
        );
        assert_eq!(
            within(&[2.0, 4.0], Region::Outside, 3.0, 10.0),
            vec![[4.0, 10.0]]
        );
        assert_eq!(
            within(&[2.0, 4.0], Region::Inside, 3.0, 10.0),
            vec![[3.0, 4.0]]
        );
        assert!(within(&[2.0, 4.0], Region::Inside, 5.0, 10.0).is_empty());
        assert!(within(&[], Region::Nowhere, 0.0, 1.0).is_empty());
    }

    #[test]
    fn holm_by_hand() {
        // p = 0.01, 0.04, 0.03: sorted 0.01·3 = 0.03, 0.03·2 = 0.06, 0.04·1 → max(0.06, 0.04) = 0.06.
        let a = holm(&[0.01, 0.04, 0.03]);
        assert!((a[0] - 0.03).abs() < 1e-15);
        assert!((a[2] - 0.06).abs() < 1e-15);
        assert!((a[1] - 0.06).abs() < 1e-15);
        assert_eq!(holm(&[0.6, 0.9]), vec![1.0, 1.0]);
    }
}
