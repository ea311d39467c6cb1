//! Precomputed effects and unstandardised slopes.

use super::{first_missing, RowEffect, RowProblem, RowResult, RowValues};

/// Two-sided 97.5% normal quantile, used to turn a 95% CI into an SE:
/// se = (ci_high − ci_low) / (2 · 1.959963984540054).
pub const Z_975: f64 = 1.959_963_984_540_054;

/// A precomputed effect. Precision from `variance`, else `se` (v = se²),
/// else a 95% CI: v = ((ci_high − ci_low) / (2 · z₀.₉₇₅))² with z₀.₉₇₅ =
/// 1.959963984540054, the first that
/// the row has (Cochrane Handbook, section 6.3.1, for the CI route).
///
/// # Errors
/// A non-positive variance or SE, a CI whose ends are reversed or equal, or
/// an effect outside its own CI (which usually means the CI is on another scale).
pub fn precomputed(row: RowValues<'_>) -> RowResult {
    let Some(y) = row.get("effect") else {
        return Ok(RowEffect::Excluded("missing effect".into()));
    };
    let v = if let Some(v) = row.get("variance") {
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
        v
    } else if let Some(se) = row.get("se") {
        if se <= 0.0 {
            return Err(RowProblem::new(
                "se",
                "a standard error must be greater than 0",
            ));
        }
        se * se
    } else if let (Some(lo), Some(hi)) = (row.get("ci_low"), row.get("ci_high")) {
        if hi <= lo {
            return Err(RowProblem::new(
                "ci_high",
                "the upper CI limit must be greater than the lower one",
            ));
        }
        if y < lo || y > hi {
            return Err(RowProblem::new(
                "effect",
                "the effect lies outside its own confidence interval; give the CI on the same \
                 scale as the effect (for ratios, the logarithms of the limits)",
            ));
        }
        let se = (hi - lo) / (2.0 * Z_975);
        se * se
    } else {
        return Ok(RowEffect::Excluded(
            "missing precision (variance, se or a 95% CI)".into(),
        ));
    };
    Ok(RowEffect::Value { y, v, note: None })
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
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::effect::{Measure, RowValues};

    fn row(values: &[Option<f64>]) -> RowResult {
        precomputed(RowValues::new(Measure::Effect.roles(), values))
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
                note: None
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
