//! Noncentral chi-square and noncentral F tails as Poisson mixtures of
//! central ones, summed outward from the Poisson mode.
//!
//! Both rest on the representation of a noncentral variable with
//! noncentrality λ as a central one whose degrees of freedom are raised by
//! 2J, J ~ Poisson(λ/2) (Johnson, Kotz & Balakrishnan 1995, *Continuous
//! Univariate Distributions* vol. 2, ch. 29 and 30).

use crate::tolerance::{NONCENTRAL_LAMBDA_MAX, NONCENTRAL_MAX_TERMS, NONCENTRAL_TAIL_MASS};
use statrs::function::beta::beta_reg;
use statrs::function::gamma::{gamma_lr, gamma_ur, ln_gamma};

/// Poisson(μ) probability of j, from logs: exp(j ln μ − μ − ln j!).
fn poisson_pmf(j: usize, mu: f64) -> f64 {
    if mu == 0.0 {
        return if j == 0 { 1.0 } else { 0.0 };
    }
    let jf = j as f64;
    (jf * mu.ln() - mu - ln_gamma(jf + 1.0)).exp()
}

/// Σ_j Pois(j; μ)·term(j), starting at the mode ⌊μ⌋ and stepping to the side
/// whose next weight is larger, until the unsummed Poisson mass is below
/// [`NONCENTRAL_TAIL_MASS`]. NaN when that takes more than
/// [`NONCENTRAL_MAX_TERMS`] terms.
fn poisson_mixture(mu: f64, term: impl Fn(usize) -> f64) -> f64 {
    let mode = mu.floor() as usize;
    let w0 = poisson_pmf(mode, mu);
    let mut total = w0 * term(mode);
    let mut mass = w0;
    let (mut lo, mut hi) = (mode, mode);
    let mut w_lo = w0;
    let mut w_hi = w0;
    for _ in 0..NONCENTRAL_MAX_TERMS {
        if 1.0 - mass < NONCENTRAL_TAIL_MASS {
            return total;
        }
        // Next weights by the recurrences p(j−1) = p(j)·j/μ, p(j+1) = p(j)·μ/(j+1).
        let next_lo = if lo > 0 { w_lo * lo as f64 / mu } else { 0.0 };
        let next_hi = w_hi * mu / (hi + 1) as f64;
        if next_lo > next_hi {
            lo -= 1;
            w_lo = next_lo;
            total += w_lo * term(lo);
            mass += w_lo;
        } else {
            if next_hi == 0.0 {
                // Both sides exhausted in floating point.
                return total;
            }
            hi += 1;
            w_hi = next_hi;
            total += w_hi * term(hi);
            mass += w_hi;
        }
    }
    f64::NAN
}

/// Upper tail P(X > x) of the noncentral chi-square with `df` degrees of
/// freedom and noncentrality `lambda`.
///
/// # Formula
/// P(χ²_ν(λ) > x) = Σ_{j≥0} e^{−λ/2} (λ/2)^j / j! · Q(ν/2 + j, x/2), with Q the
/// regularized upper incomplete gamma function (the central chi-square tail
/// with ν + 2j degrees of freedom). Source: Johnson, Kotz & Balakrishnan
/// (1995), vol. 2, eq. 29.2.
///
/// NaN for invalid arguments (df ≤ 0, λ < 0, NaN) and for λ above
/// [`NONCENTRAL_LAMBDA_MAX`].
pub fn ncx2_sf(x: f64, df: f64, lambda: f64) -> f64 {
    if !(df > 0.0 && (0.0..=NONCENTRAL_LAMBDA_MAX).contains(&lambda)) || x.is_nan() {
        return f64::NAN;
    }
    // x/2 underflowing to 0 counts as 0: statrs' incomplete gamma panics on it.
    if x / 2.0 <= 0.0 {
        return 1.0;
    }
    poisson_mixture(lambda / 2.0, |j| gamma_ur(df / 2.0 + j as f64, x / 2.0)).clamp(0.0, 1.0)
}

/// Lower tail P(X ≤ x) of the noncentral chi-square, summed directly (not
/// as 1 − [`ncx2_sf`], so small lower tails keep their relative accuracy).
///
/// # Formula
/// Σ_j Pois(j; λ/2) · P(ν/2 + j, x/2), P the regularized lower incomplete
/// gamma function; same source as [`ncx2_sf`].
pub fn ncx2_cdf(x: f64, df: f64, lambda: f64) -> f64 {
    if !(df > 0.0 && (0.0..=NONCENTRAL_LAMBDA_MAX).contains(&lambda)) || x.is_nan() {
        return f64::NAN;
    }
    if x / 2.0 <= 0.0 {
        return 0.0;
    }
    poisson_mixture(lambda / 2.0, |j| gamma_lr(df / 2.0 + j as f64, x / 2.0)).clamp(0.0, 1.0)
}

/// Upper tail P(F > f) of the noncentral F with (`df1`, `df2`) degrees of
/// freedom and noncentrality `lambda` (in the numerator).
///
/// # Formula
/// With y = ν₁f/(ν₁f + ν₂):
/// P(F > f) = Σ_j Pois(j; λ/2) · I_{1−y}(ν₂/2, ν₁/2 + j), I the regularized
/// incomplete beta function (the complement of the central F CDF
/// I_y(ν₁/2 + j, ν₂/2), written with the symmetry I_x(a, b) = 1 − I_{1−x}(b, a)
/// so that a small upper tail is not a difference of numbers near 1).
/// Source: Johnson, Kotz & Balakrishnan (1995), vol. 2, eq. 30.7.
///
/// NaN for invalid arguments and for λ above [`NONCENTRAL_LAMBDA_MAX`].
pub fn ncf_sf(f: f64, df1: f64, df2: f64, lambda: f64) -> f64 {
    if !(df1 > 0.0 && df2 > 0.0 && (0.0..=NONCENTRAL_LAMBDA_MAX).contains(&lambda)) || f.is_nan() {
        return f64::NAN;
    }
    if f <= 0.0 {
        return 1.0;
    }
    let one_minus_y = df2 / (df1 * f + df2);
    poisson_mixture(lambda / 2.0, |j| {
        beta_reg(df2 / 2.0, df1 / 2.0 + j as f64, one_minus_y)
    })
    .clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tolerance::{NONCENTRAL_LAMBDA_MAX, NONCENTRAL_REF_ABS};

    // Values printed by tests/reference/power_values.py with scipy 1.16.3
    // (scipy.stats.ncx2.sf / .cdf, scipy.stats.ncf.sf).
    const NCX2_SF: [(f64, f64, f64, f64); 7] = [
        (3.841458820694124, 1.0, 0.5, 0.10895461755061563),
        (3.841458820694124, 1.0, 7.84, 0.7995568714356516),
        (3.841458820694124, 1.0, 40.0, 0.9999936319685954),
        (10.0, 3.0, 2.5, 0.1292098748750061),
        (0.5, 2.0, 1.0, 0.8576340861306335),
        (500.0, 1.0, 450.0, 0.1255924032199771),
        (6.634896601021214, 1.0, 12.0, 0.8128028558719962),
    ];
    const NCX2_CDF: [(f64, f64, f64, f64); 3] = [
        (3.841458820694124, 1.0, 7.84, 0.20044312856434846),
        (10.0, 3.0, 2.5, 0.8707901251249942),
        (0.5, 2.0, 1.0, 0.1423659138693663),
    ];
    const NCF_SF: [(f64, f64, f64, f64, f64); 5] = [
        (4.0, 1.0, 10.0, 5.0, 0.6039744486155074),
        (5.317655071578714, 1.0, 8.0, 7.84, 0.6898347270806391),
        (2.5, 2.0, 20.0, 3.0, 0.42429155685835446),
        (1.0, 1.0, 3.0, 0.3, 0.45002395841222526),
        (4.0, 1.0, 200.0, 30.0, 0.9997322956152299),
    ];

    #[test]
    fn ncx2_against_scipy() {
        for (x, df, nc, want) in NCX2_SF {
            let got = ncx2_sf(x, df, nc);
            assert!(
                (got - want).abs() < NONCENTRAL_REF_ABS,
                "sf({x},{df},{nc}) = {got}, scipy {want}"
            );
        }
        for (x, df, nc, want) in NCX2_CDF {
            let got = ncx2_cdf(x, df, nc);
            assert!(
                (got - want).abs() < NONCENTRAL_REF_ABS,
                "cdf({x},{df},{nc}) = {got}, scipy {want}"
            );
        }
    }

    #[test]
    fn ncf_against_scipy() {
        for (x, d1, d2, nc, want) in NCF_SF {
            let got = ncf_sf(x, d1, d2, nc);
            assert!(
                (got - want).abs() < NONCENTRAL_REF_ABS,
                "ncf_sf({x},{d1},{d2},{nc}) = {got}, scipy {want}"
            );
        }
    }

    #[test]
    fn central_limits_and_bad_arguments() {
        // λ = 0 is the central distribution (statrs' chi-square and F via src/dist.rs).
        let c = ncx2_sf(3.0, 2.0, 0.0);
        assert!((c - crate::dist::chi2_sf(3.0, 2.0)).abs() < NONCENTRAL_REF_ABS);
        let f = ncf_sf(2.0, 1.0, 7.0, 0.0);
        assert!((f - crate::dist::f_sf(2.0, 1.0, 7.0)).abs() < NONCENTRAL_REF_ABS);
        assert!(ncx2_sf(1.0, 0.0, 1.0).is_nan());
        assert!(ncx2_sf(1.0, 1.0, -1.0).is_nan());
        assert!(ncf_sf(1.0, 1.0, 0.0, 1.0).is_nan());
        assert!(ncx2_sf(1.0, 1.0, 2.0 * NONCENTRAL_LAMBDA_MAX).is_nan());
        assert!(ncf_sf(1.0, 1.0, 5.0, 2.0 * NONCENTRAL_LAMBDA_MAX).is_nan());
        assert_eq!(ncx2_sf(-1.0, 1.0, 3.0), 1.0);
        let s = ncx2_sf(4.0, 1.0, 9.0) + ncx2_cdf(4.0, 1.0, 9.0);
        assert!((s - 1.0).abs() < NONCENTRAL_REF_ABS);
    }
}
