//! Precomputed effects and unstandardised slopes.

use super::route::{EffectReading, Route};
use super::{first_missing, RowEffect, RowProblem, RowResult, RowValues};
use crate::support::flag::Flag;
use crate::support::format;
use crate::tolerance::CI_ASYMMETRY;

/// Two-sided 97.5% normal quantile, used to turn a 95% CI into an SE:
/// se = (ci_high − ci_low) / (2 · 1.959963984540054).
pub const Z_975: f64 = 1.959_963_984_540_054;

/// A precomputed effect with its variance, SE or confidence limits (in that
/// order of preference).
///
/// # Formula
/// v = variance; or v = se²; or, from limits at level L (`--ci-level`),
/// SE = (hi − lo)/(2z), z = Φ⁻¹(1 − (1 − L)/2) (the normal-theory interval
/// y ± z·SE solved for SE; Cochrane Handbook, section 6.3.1). With `--effect-scale log` the effect and limits
/// are ratios: y = ln(effect), lo = ln(ci_low), hi = ln(ci_high) before the
/// same step; a variance or SE given instead is taken as that of ln(effect).
///
/// # Errors
/// A [`RowProblem`] for a variance or SE ≤ 0, limits in the wrong order, an
/// effect outside its own limits, or (log scale) a ratio ≤ 0.
pub fn precomputed(row: RowValues<'_>, reading: &EffectReading) -> RowResult {
    let Some(raw) = row.get("effect") else {
        return Ok(RowEffect::Excluded("missing effect".into()));
    };
    let log = reading.log_scale;
    let positive = |role: &'static str, x: f64| {
        if x > 0.0 {
            Ok(x.ln())
        } else {
            Err(RowProblem::new(
                role,
                format!(
                    "a ratio must be greater than 0 (with {} log the effects and limits are ratios)",
                    Flag::EffectScale
                ),
            ))
        }
    };
    let y = if log { positive("effect", raw)? } else { raw };
    let value = |v: f64, from: Route, check: Option<String>| {
        Ok(RowEffect::Value {
            y,
            v,
            note: None,
            from,
            check,
        })
    };
    if let Some(v) = row.get("variance") {
        if v <= 0.0 {
            return Err(RowProblem::new(
                "variance",
                "a sampling variance must be greater than 0",
            ));
        }
        // Both given: they must agree (to 5%, the rounding of published
        // values), else one of them is wrong and the other would be
        // silently ignored.
        if let Some(se) = row.get("se").filter(|se| (se * se - v).abs() > 0.05 * v) {
            return Err(RowProblem::new(
                "se",
                format!(
                    "the row gives both a variance ({v}) and an se ({se}, se² = {}) and they \
                     disagree; fix the row or leave one of the two columns empty",
                    se * se
                ),
            ));
        }
        return value(v, Route::Variance, None);
    }
    if let Some(se) = row.get("se") {
        if se <= 0.0 {
            return Err(RowProblem::new(
                "se",
                "a standard error must be greater than 0",
            ));
        }
        return value(se * se, Route::Se, None);
    }
    let (Some(lo), Some(hi)) = (row.get("ci_low"), row.get("ci_high")) else {
        return Ok(RowEffect::Excluded(
            "missing precision (variance, se or a confidence interval)".into(),
        ));
    };
    let (lo, hi) = if log {
        (positive("ci_low", lo)?, positive("ci_high", hi)?)
    } else {
        (lo, hi)
    };
    if hi <= lo {
        return Err(RowProblem::new(
            "ci_high",
            "the upper CI limit must be greater than the lower one",
        ));
    }
    if y < lo || y > hi {
        return Err(RowProblem::new(
            "effect",
            format!(
                "the effect lies outside its own confidence interval; give the CI on the same \
                 scale as the effect (for ratios, the logarithms of the limits, or the ratios with \
                 {} log)",
                Flag::EffectScale
            ),
        ));
    }
    let se = (hi - lo) / (2.0 * reading.z());
    let check = (!log && asymmetric(y, lo, hi)).then(|| asymmetry_warning(y, lo, hi));
    value(se * se, Route::Ci, check)
}

/// Whether limits are clearly asymmetric about their effect: the longer arm
/// more than [`CI_ASYMMETRY`] times the shorter.
pub fn asymmetric(y: f64, lo: f64, hi: f64) -> bool {
    let (a, b) = (y - lo, hi - y);
    let (short, long) = if a < b { (a, b) } else { (b, a) };
    long > CI_ASYMMETRY * short
}

fn asymmetry_warning(y: f64, lo: f64, hi: f64) -> String {
    let mut w = format!(
        "its limits ({}, {}) are clearly asymmetric about the effect {}",
        format::short(lo),
        format::short(hi),
        format::short(y)
    );
    if lo > 0.0 && !asymmetric(y.ln(), lo.ln(), hi.ln()) {
        w.push_str(&format!(
            "; they are symmetric on the log scale, as for a ratio: if the effects are ratios, \
             give {} log",
            Flag::EffectScale
        ));
    } else {
        w.push_str("; a symmetric interval was assumed");
    }
    w
}

/// An unstandardised slope with its SE: y = slope, v = se².
///
/// # Errors
/// A non-positive SE.
pub fn slope(row: RowValues<'_>) -> RowResult {
    if let Some(m) = first_missing(row, &["slope", "se"]) {
        return Ok(RowEffect::Excluded(format!("missing {m}")));
    }
    let (b, se) = (
        row.get("slope").unwrap_or(0.0),
        row.get("se").unwrap_or(0.0),
    );
    if se <= 0.0 {
        return Err(RowProblem::new(
            "se",
            "a standard error must be greater than 0",
        ));
    }
    Ok(RowEffect::Value {
        y: b,
        v: se * se,
        note: None,
        from: Route::Se,
        check: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::effect::{Measure, RowValues};

    fn row(values: &[Option<f64>]) -> RowResult {
        precomputed(
            RowValues::new(Measure::Effect.roles(), values),
            &EffectReading::default(),
        )
    }

    #[test]
    fn precision_routes_in_priority_order() {
        // Both a variance and an se: used when they agree, refused when not.
        assert!(row(&[Some(0.3), Some(0.04), Some(0.5), None, None]).is_err());
        let v = row(&[Some(0.3), Some(0.04), Some(0.2001), None, None]).unwrap();
        assert_eq!(
            v,
            RowEffect::Value {
                y: 0.3,
                v: 0.04,
                note: None,
                from: Route::Variance,
                check: None
            }
        );
        let v = row(&[Some(0.3), None, Some(0.2), None, None]).unwrap();
        assert!(matches!(v, RowEffect::Value { v, .. } if (v - 0.04).abs() < 1e-15));
        // 95% CI 0.3 ± 1.96·0.2 gives back se = 0.2.
        let h = Z_975 * 0.2;
        let v = row(&[Some(0.3), None, None, Some(0.3 - h), Some(0.3 + h)]).unwrap();
        assert!(matches!(v, RowEffect::Value { v, .. } if (v - 0.04).abs() < 1e-14));
    }

    #[test]
    fn bad_precision_is_a_problem() {
        assert_eq!(
            row(&[Some(0.3), Some(0.0), None, None, None])
                .unwrap_err()
                .role,
            "variance"
        );
        assert_eq!(
            row(&[Some(0.3), None, Some(-1.0), None, None])
                .unwrap_err()
                .role,
            "se"
        );
        assert_eq!(
            row(&[Some(0.3), None, None, Some(0.5), Some(0.1)])
                .unwrap_err()
                .role,
            "ci_high"
        );
        // A ratio-scale CI around a log effect.
        assert_eq!(
            row(&[Some(-0.5), None, None, Some(0.4), Some(0.9)])
                .unwrap_err()
                .role,
            "effect"
        );
    }

    #[test]
    fn missing_values_exclude() {
        assert!(matches!(
            row(&[None, Some(0.1), None, None, None]),
            Ok(RowEffect::Excluded(_))
        ));
        assert!(matches!(
            row(&[Some(0.1), None, None, Some(0.0), None]),
            Ok(RowEffect::Excluded(_))
        ));
        let s = slope(RowValues::new(Measure::Slope.roles(), &[Some(0.2), None])).unwrap();
        assert_eq!(s, RowEffect::Excluded("missing se".into()));
        let s = slope(RowValues::new(
            Measure::Slope.roles(),
            &[Some(0.2), Some(0.1)],
        ))
        .unwrap();
        assert!(matches!(s, RowEffect::Value { v, .. } if (v - 0.01).abs() < 1e-17));
    }
}
