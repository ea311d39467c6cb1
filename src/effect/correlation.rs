//! Correlations and partial correlations, analysed as Fisher's z.

use super::route::{EffectReading, Route, R_ROUTES};
use super::smd_routes::{self, first_and_check, p_unusable, t_from_p, GroupD, Outcome};
use super::{first_missing, RowEffect, RowProblem, RowResult, RowValues};
use crate::support::flag::Flag;
use crate::tolerance::ROUTE_CHECK_R;

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

/// r from the t statistic of a correlation (or of a simple regression slope).
///
/// # Formula
/// r = t/√(t² + n − 2) (Rosenthal 1994, *The Handbook of Research
/// Synthesis*, ch. 16; the inverse of t = r√(n − 2)/√(1 − r²)).
pub fn r_from_t(t: f64, n: f64) -> f64 {
    t / (t * t + n - 2.0).sqrt()
}

/// r from a standardised mean difference and the group sizes (`--convert`).
///
/// # Formula
/// r = d/√(d² + a), a = (n_t + n_c)²/(n_t·n_c) (Borenstein et al. 2009,
/// *Introduction to Meta-Analysis*, ch. 7, eq. 7.7).
pub fn r_from_d(d: f64, nt: f64, nc: f64) -> f64 {
    let a = (nt + nc) * (nt + nc) / (nt * nc);
    d / (d * d + a).sqrt()
}

/// One route's r, or None when its columns are not all there.
fn r_route(route: Route, row: RowValues<'_>) -> Result<Option<Outcome>, RowProblem> {
    let Some(n) = row.get("n") else {
        return Ok(None);
    };
    let r = match route {
        Route::R => row.get("r"),
        Route::T => row.get("t").map(|t| r_from_t(t, n)),
        _ => {
            if row.get("p").is_none() && row.inequality().is_none() {
                return Ok(None);
            }
            if let Some(why) = p_unusable(row) {
                return Ok(Some(Outcome::Unusable(route, why)));
            }
            let s = row.get("sign").unwrap_or(1.0);
            if s != 1.0 && s != -1.0 {
                return Err(RowProblem::new(
                    "sign",
                    "sign must be 1 (positive) or -1 (negative)",
                ));
            }
            if n <= 3.0 {
                return Err(RowProblem::new(
                    "n",
                    "n must be greater than 3 for the Fisher-z variance 1/(n-3)",
                ));
            }
            let t = t_from_p(row.get("p").unwrap_or(1.0), s, n - 2.0);
            Some(r_from_t(t, n))
        }
    };
    let Some(r) = r else {
        return Ok(None);
    };
    if route == Route::T && n <= 3.0 {
        return Err(RowProblem::new(
            "n",
            "n must be greater than 3 for the Fisher-z variance 1/(n-3)",
        ));
    }
    // The outcome carries r in `d` and n in `nt` (nc unused).
    Ok(Some(Outcome::Value(
        route,
        GroupD {
            d: r,
            nt: n,
            nc: 0.0,
        },
    )))
}

/// Computes one `r` row: the first usable of r, t and p (each with n), the
/// cross-check of the others (see [`ROUTE_CHECK_R`]), and with `--convert`
/// a group comparison turned into r.
pub(crate) fn r_row(row: RowValues<'_>, reading: &EffectReading) -> RowResult {
    let mut outcomes = Vec::new();
    for info in R_ROUTES.iter().filter(|i| !i.needs_convert) {
        if let Some(o) = r_route(info.route, row)? {
            outcomes.push(o);
        }
    }
    if let Some((route, first, check)) = first_and_check(&outcomes, |g| g.d, ROUTE_CHECK_R, "r") {
        let (z, v) = fisher_z(first.d, first.nt)?;
        return Ok(RowEffect::Value {
            y: z,
            v,
            note: None,
            from: route,
            check,
        });
    }
    if let Some(Outcome::Unusable(_, why)) = outcomes.first() {
        return Ok(RowEffect::Excluded(why.clone()));
    }
    if reading.convert {
        let groups = smd_routes::native_outcomes(row)?;
        if let Some((_, gd, _)) = first_and_check(&groups, |g| g.d, f64::INFINITY, "d") {
            let n = gd.nt + gd.nc;
            let (z, v) = fisher_z(r_from_d(gd.d, gd.nt, gd.nc), n)?;
            return Ok(RowEffect::Value {
                y: z,
                v,
                note: None,
                from: Route::DToR,
                check: None,
            });
        }
        if !groups.is_empty() {
            return Ok(RowEffect::Excluded(smd_routes::exclusion(
                &groups, row, false,
            )));
        }
    } else if smd_routes::native_outcomes(row).is_ok_and(|g| !g.is_empty()) {
        return Ok(RowEffect::Excluded(format!(
            "reports a group comparison but no correlation; add {} to convert d to r",
            Flag::Convert
        )));
    }
    if row.get("p").is_some() {
        if let Some(why) = p_unusable(row) {
            return Ok(RowEffect::Excluded(why));
        }
    }
    Ok(RowEffect::Excluded(super::closest_missing(
        row,
        R_ROUTES.iter().filter(|i| !i.needs_convert),
    )))
}

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
        from: Route::T,
        check: None,
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
