//! Correlations and partial correlations, analysed as Fisher's z.

use super::{first_missing, RowEffect, RowProblem, RowResult, RowValues};

/// Fisher's z of a correlation and its sampling variance.
///
/// # Formula
/// z = atanh(r) = ½ ln((1 + r)/(1 − r)),  v = 1/(n − 3)
/// (Fisher 1921; Borenstein et al. 2009, *Introduction to Meta-Analysis*, ch. 6).
///
/// # Errors
/// Returns a [`RowProblem`] for |r| ≥ 1 or n ≤ 3.
///
/// # Examples
/// ```
/// let (z, v) = pondus::effect::correlation::fisher_z(0.5, 100.0).unwrap();
/// assert!((z - 0.549_306_144_334_054_8).abs() < 1e-15);
/// assert!((v - 1.0 / 97.0).abs() < 1e-15);
/// ```
pub fn fisher_z(r: f64, n: f64) -> Result<(f64, f64), RowProblem> {
    if !(r > -1.0 && r < 1.0) {
        return Err(RowProblem::new(
            "r",
            "a correlation must lie strictly between -1 and 1",
        ));
    }
    if n <= 3.0 {
        return Err(RowProblem::new(
            "n",
            "n must be greater than 3 for the Fisher-z variance 1/(n-3)",
        ));
    }
    Ok((r.atanh(), 1.0 / (n - 3.0)))
}

pub(crate) fn fisher_z_row(row: RowValues<'_>) -> RowResult {
    if let Some(m) = first_missing(row, &["r", "n"]) {
        return Ok(RowEffect::Excluded(format!("missing {m}")));
    }
    let (z, v) = fisher_z(row.get("r").unwrap_or(0.0), row.get("n").unwrap_or(0.0))?;
    Ok(RowEffect::Value {
        y: z,
        v,
        note: None,
    })
}

/// Partial correlation from the t statistic of a regression coefficient,
/// analysed as Fisher's z.
///
/// # Formula
/// With df = n − q − 2 residual degrees of freedom (q other predictors plus
/// the focal one and an intercept): r_p = t / √(t² + df), z = atanh(r_p),
/// v = 1/(n − 3 − q) (Aloe & Thompson 2013, *Journal of the Society for Social
/// Work and Research* 4:390, cited from memory;
/// Fisher's variance for a partial correlation of order q).
///
/// # Errors
/// Returns a [`RowProblem`] when q is negative or not whole, or n is too small for q.
///
/// # Examples
/// ```
/// // t = 2 with 97 residual df (n = 100, one covariate).
/// let (r, z, v) = pondus::effect::correlation::partial_from_t(2.0, 100.0, 1.0).unwrap();
/// assert!((r - 2.0 / (4.0f64 + 97.0).sqrt()).abs() < 1e-15);
/// assert!((z - r.atanh()).abs() < 1e-15);
/// assert!((v - 1.0 / 96.0).abs() < 1e-15);
/// ```
pub fn partial_from_t(t: f64, n: f64, q: f64) -> Result<(f64, f64, f64), RowProblem> {
    if q < 0.0 || q.fract() != 0.0 {
        return Err(RowProblem::new(
            "covariates",
            "the number of covariates must be a whole number, 0 or more",
        ));
    }
    if n - 3.0 - q <= 0.0 {
        return Err(RowProblem::new(
            "n",
            "n must be greater than 3 + covariates for the variance 1/(n-3-covariates)",
        ));
    }
    let df = n - q - 2.0;
    // r = t/√(t² + df), with √(t² + df) as hypot(t, √df) so that t² cannot
    // overflow (|t| above about 1.3e154 would otherwise give r = 0).
    let r = t / t.hypot(df.sqrt());
    if !(r > -1.0 && r < 1.0) {
        return Err(RowProblem::new(
            "t",
            "this t statistic gives a partial correlation of ±1; check t and n",
        ));
    }
    Ok((r, r.atanh(), 1.0 / (n - 3.0 - q)))
}

pub(crate) fn partial_row(row: RowValues<'_>) -> RowResult {
    if let Some(m) = first_missing(row, &["t", "n", "covariates"]) {
        return Ok(RowEffect::Excluded(format!("missing {m}")));
    }
    let (_, z, v) = partial_from_t(
        row.get("t").unwrap_or(0.0),
        row.get("n").unwrap_or(0.0),
        row.get("covariates").unwrap_or(0.0),
    )?;
    Ok(RowEffect::Value {
        y: z,
        v,
        note: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fisher_z_by_hand() {
        // ½ ln(1.3/0.7) for r = 0.3, n = 28 → v = 1/25.
        let (z, v) = fisher_z(0.3, 28.0).unwrap();
        assert!((z - 0.5 * (1.3f64 / 0.7).ln()).abs() < 1e-15);
        assert_eq!(v, 0.04);
        let (z, _) = fisher_z(-0.3, 28.0).unwrap();
        assert!((z + 0.5 * (1.3f64 / 0.7).ln()).abs() < 1e-15);
    }

    #[test]
    fn fisher_z_rejects_out_of_range() {
        assert_eq!(fisher_z(1.0, 50.0).unwrap_err().role, "r");
        assert_eq!(fisher_z(-1.2, 50.0).unwrap_err().role, "r");
        assert_eq!(fisher_z(0.2, 3.0).unwrap_err().role, "n");
    }

    #[test]
    fn partial_r_checks() {
        assert_eq!(
            partial_from_t(1.0, 10.0, 1.5).unwrap_err().role,
            "covariates"
        );
        assert_eq!(partial_from_t(1.0, 6.0, 3.0).unwrap_err().role, "n");
        let (r, _, _) = partial_from_t(-3.0, 50.0, 0.0).unwrap();
        assert!((r + 3.0 / (9.0f64 + 48.0).sqrt()).abs() < 1e-15);
    }
}
