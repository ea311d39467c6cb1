//! Reference distributions for tests and intervals, with the weak spots of
//! `statrs` 0.19 handled (measured against 50-digit references: t quantiles
//! above about 1e5 df, chi-square lower-tail quantiles for small areas): t quantiles with
//! very large df use the normal, and chi-square quantiles are refined on the
//! tail they are defined on, so small tail areas keep full relative accuracy.

use statrs::distribution::{
    ChiSquared, Continuous, ContinuousCDF, FisherSnedecor, Normal, StudentsT,
};

use crate::tolerance::{QUANTILE_MAX_ITERS, QUANTILE_REL_STEP, T_AS_NORMAL_DF};

fn std_normal() -> Normal {
    Normal::standard()
}

/// Quantile of the standard normal distribution; `p` must lie in (0, 1).
///
/// Every function here returns NaN for NaN or out-of-range arguments rather
/// than panicking inside statrs; callers turn a NaN into an error.
pub fn normal_quantile(p: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) {
        return f64::NAN;
    }
    std_normal().inverse_cdf(p)
}

/// Quantile of Student's t with `df` degrees of freedom; `p` in (0, 1), `df` > 0.
pub fn t_quantile(p: f64, df: f64) -> f64 {
    if !(p > 0.0 && p < 1.0 && df > 0.0) {
        return f64::NAN;
    }
    if df > T_AS_NORMAL_DF {
        return normal_quantile(p);
    }
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}

/// Two-sided p-value of a z statistic.
pub fn normal_two_sided_p(z: f64) -> f64 {
    if z.is_nan() {
        return f64::NAN;
    }
    (2.0 * std_normal().sf(z.abs())).min(1.0)
}

/// Two-sided p-value of a t statistic with `df` degrees of freedom.
pub fn t_two_sided_p(t: f64, df: f64) -> f64 {
    if t.is_nan() || df.is_nan() || df <= 0.0 {
        return f64::NAN;
    }
    if df > T_AS_NORMAL_DF {
        return normal_two_sided_p(t);
    }
    match StudentsT::new(0.0, 1.0, df) {
        Ok(d) => (2.0 * d.sf(t.abs())).min(1.0),
        Err(_) => f64::NAN,
    }
}

/// Upper-tail probability P(X > x) of chi-square with `df` degrees of freedom.
///
/// An x so small that x/2 underflows to 0 (below about 1e-323) gives 1, and
/// x = +∞ gives 0, without calling `statrs`: its incomplete gamma function
/// panics on a zero argument (found by the `fit_numbers` fuzz target, a
/// residual Q below about 1e-323).
pub fn chi2_sf(x: f64, df: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    match ChiSquared::new(df) {
        Ok(_) if x / 2.0 <= 0.0 => 1.0,
        Ok(_) if x.is_infinite() => 0.0,
        Ok(d) => d.sf(x),
        Err(_) => f64::NAN,
    }
}

/// Upper-tail probability P(X > x) of F with (`df1`, `df2`) degrees of freedom.
pub fn f_sf(x: f64, df1: f64, df2: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    match FisherSnedecor::new(df1, df2) {
        Ok(_) if x <= 0.0 => 1.0,
        Ok(_) if x.is_infinite() => 0.0,
        Ok(d) => d.sf(x),
        Err(_) => f64::NAN,
    }
}

/// Which tail a quantile is defined on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tail {
    /// P(X ≤ x) = area.
    Lower,
    /// P(X > x) = area.
    Upper,
}

/// The chi-square point with tail area `area` on `tail`.
///
/// Starts from `statrs`' quantile and refines it by a safeguarded Newton
/// iteration on ln(tail area), so that the answer has full relative accuracy
/// in the tail area even where `statrs` alone stops early (lower tail, small
/// areas, df = 1).
pub fn chi2_quantile(area: f64, df: f64, tail: Tail) -> f64 {
    let Ok(d) = ChiSquared::new(df) else {
        return f64::NAN;
    };
    if !(area > 0.0 && area < 1.0) {
        return f64::NAN;
    }
    let tail_area = |x: f64| match tail {
        Tail::Lower => d.cdf(x),
        Tail::Upper => d.sf(x),
    };
    // g(x) = ln tail(x) − ln area: increasing for the lower tail, decreasing for the upper.
    let sign = if tail == Tail::Lower { 1.0 } else { -1.0 };
    let g = |x: f64| sign * (tail_area(x).ln() - area.ln());
    let start = match tail {
        Tail::Lower => d.inverse_cdf(area),
        Tail::Upper => d.inverse_cdf(1.0 - area),
    };
    let mut x = if start.is_finite() && start > 0.0 {
        start
    } else {
        df.max(1.0)
    };
    // Bracket: g(lo) < 0 < g(hi).
    let (mut lo, mut hi) = (x, x);
    while g(lo) > 0.0 && lo > f64::MIN_POSITIVE {
        lo /= 2.0;
    }
    while g(hi) < 0.0 && hi < f64::MAX / 4.0 {
        hi *= 2.0;
    }
    for _ in 0..QUANTILE_MAX_ITERS {
        let gx = g(x);
        if gx == 0.0 {
            break;
        }
        if gx < 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        // d/dx ln tail = ±pdf/tail.
        let slope = d.pdf(x) / tail_area(x);
        let mut next = x - gx / slope;
        if !next.is_finite() || next <= lo || next >= hi {
            next = 0.5 * (lo + hi);
        }
        if (next - x).abs() <= QUANTILE_REL_STEP * x.abs() {
            x = next;
            break;
        }
        x = next;
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    // Reference quantiles: scipy 1.16.3 (stats.chi2.isf/ppf, stats.t.ppf,
    // stats.norm.ppf), which agree with the printed tables of Abramowitz &
    // Stegun (1964), ch. 26, to the tables' digits.
    #[test]
    fn table_values() {
        assert!((normal_quantile(0.975) - 1.959_963_984_540_054).abs() < 1e-12);
        assert!((t_quantile(0.975, 10.0) - 2.228_138_851_964_938).abs() < 1e-9);
        assert!((chi2_quantile(0.05, 1.0, Tail::Upper) - 3.841_458_820_694_124).abs() < 1e-9);
        assert!((chi2_quantile(0.025, 12.0, Tail::Lower) - 4.403_788_506_981_22).abs() < 1e-8);
        assert!((chi2_quantile(0.025, 12.0, Tail::Upper) - 23.336_664_158_645_34).abs() < 1e-8);
    }

    #[test]
    fn small_lower_tail_areas_are_refined() {
        for &(a, df) in &[(1e-4, 1.0), (1e-6, 1.0), (1e-3, 2.0), (1e-8, 5.0)] {
            let x = chi2_quantile(a, df, Tail::Lower);
            let back = ChiSquared::new(df).unwrap().cdf(x);
            assert!(((back - a) / a).abs() < 1e-10, "area {a}, df {df}: {back}");
        }
    }

    #[test]
    fn nan_in_gives_nan_out_not_a_panic() {
        assert!(t_two_sided_p(f64::NAN, 5.0).is_nan());
        assert!(normal_two_sided_p(f64::NAN).is_nan());
        assert!(f_sf(f64::NAN, 1.0, 5.0).is_nan());
        assert!(chi2_sf(f64::NAN, 3.0).is_nan());
        assert!(t_quantile(f64::NAN, 5.0).is_nan());
        assert!(normal_quantile(1.5).is_nan());
    }

    #[test]
    fn p_values() {
        // statrs' normal tail carries about 3e-11 relative error (measured against 50-digit values).
        assert!((normal_two_sided_p(1.959_963_984_540_054) - 0.05).abs() < 1e-10);
        assert!((t_two_sided_p(2.228_138_851_964_938, 10.0) - 0.05).abs() < 1e-10);
        assert!((chi2_sf(3.841_458_820_694_124, 1.0) - 0.05).abs() < 1e-12);
        assert!(t_two_sided_p(0.0, 5.0) == 1.0);
    }

    #[test]
    fn tails_at_the_ends_of_the_range_do_not_panic() {
        // statrs' incomplete gamma panics when x/2 underflows to 0.
        assert_eq!(chi2_sf(5e-324, 3.0), 1.0);
        assert_eq!(chi2_sf(0.0, 3.0), 1.0);
        assert_eq!(chi2_sf(-1.0, 3.0), 1.0);
        assert_eq!(chi2_sf(f64::INFINITY, 3.0), 0.0);
        assert!((chi2_sf(1e-300, 1.0) - 1.0).abs() < 1e-12);
        assert_eq!(f_sf(5e-324, 2.0, 5.0), 1.0);
        assert_eq!(f_sf(f64::INFINITY, 2.0, 5.0), 0.0);
        assert!(chi2_sf(f64::NAN, 3.0).is_nan());
        // Siblings: the t and normal tails at the same ends.
        assert_eq!(t_two_sided_p(f64::INFINITY, 5.0), 0.0);
        assert_eq!(t_two_sided_p(5e-324, 5.0), 1.0);
        assert_eq!(normal_two_sided_p(f64::INFINITY), 0.0);
        assert_eq!(normal_two_sided_p(5e-324), 1.0);
    }
}
