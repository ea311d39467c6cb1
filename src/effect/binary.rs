//! Two-group event counts: log odds ratio, log risk ratio, risk difference.

use super::route::{EffectReading, Route};
use super::{first_missing, RowEffect, RowProblem, RowResult, RowValues};

/// Which 2×2 measure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// ln((a·d)/(b·c)).
    LogOddsRatio,
    /// ln((a/n₁)/(c/n₂)).
    LogRiskRatio,
    /// a/n₁ − c/n₂.
    RiskDifference,
}

/// The continuity correction added to every cell of a table with a zero cell.
pub const ZERO_CELL_ADD: f64 = 0.5;

/// Effect and variance from a 2×2 table.
///
/// Cells: a = treated events, b = treated non-events, c = control events,
/// d = control non-events; n₁ = a + b, n₂ = c + d.
///
/// # Formula
/// - log OR: y = ln(a·d/(b·c)), v = 1/a + 1/b + 1/c + 1/d
/// - log RR: y = ln((a/n₁)/(c/n₂)), v = 1/a − 1/n₁ + 1/c − 1/n₂
/// - RD: y = a/n₁ − c/n₂, v = p₁(1 − p₁)/n₁ + p₂(1 − p₂)/n₂
///
/// (Borenstein et al. 2009, *Introduction to Meta-Analysis*, ch. 5; Cochrane
/// Handbook, ch. 6; both cited from memory). When any cell is zero, 0.5 is added to
/// all four cells first (so each group grows by 1). A table with no events in
/// either group (or, for the odds ratio, no non-events in either group) carries
/// no information on a ratio and is excluded.
///
/// # Examples
/// ```
/// use pondus::effect::binary::{two_by_two, Kind, Table2x2};
/// let t = two_by_two(5.0, 100.0, 10.0, 100.0, Kind::LogRiskRatio).unwrap();
/// let Table2x2::Effect { y, v, corrected } = t else { panic!() };
/// assert!((y - 0.5f64.ln()).abs() < 1e-15);
/// assert!((v - (0.2 - 0.01 + 0.1 - 0.01)).abs() < 1e-15);
/// assert!(!corrected);
/// ```
pub fn two_by_two(a: f64, n1: f64, c: f64, n2: f64, kind: Kind) -> Result<Table2x2, RowProblem> {
    for (role, x) in [
        ("treat_events", a),
        ("treat_n", n1),
        ("ctrl_events", c),
        ("ctrl_n", n2),
    ] {
        if x < 0.0 || x.fract() != 0.0 {
            return Err(RowProblem::new(
                role,
                "counts must be whole numbers, 0 or more",
            ));
        }
    }
    if n1 < 1.0 {
        return Err(RowProblem::new(
            "treat_n",
            "a group needs at least 1 member",
        ));
    }
    if n2 < 1.0 {
        return Err(RowProblem::new("ctrl_n", "a group needs at least 1 member"));
    }
    if a > n1 {
        return Err(RowProblem::new(
            "treat_events",
            "more events than members in the treated group (treat_n is the group size)",
        ));
    }
    if c > n2 {
        return Err(RowProblem::new(
            "ctrl_events",
            "more events than members in the control group (ctrl_n is the group size)",
        ));
    }
    let (b, d) = (n1 - a, n2 - c);
    let ratio = kind != Kind::RiskDifference;
    if ratio && a == 0.0 && c == 0.0 {
        return Ok(Table2x2::Excluded(
            "no events in either group: a ratio cannot be estimated".into(),
        ));
    }
    if kind == Kind::LogOddsRatio && b == 0.0 && d == 0.0 {
        return Ok(Table2x2::Excluded(
            "every member of both groups had the event: an odds ratio cannot be estimated".into(),
        ));
    }
    let corrected = a == 0.0 || b == 0.0 || c == 0.0 || d == 0.0;
    let k = if corrected { ZERO_CELL_ADD } else { 0.0 };
    let (a, b, c, d) = (a + k, b + k, c + k, d + k);
    let (n1, n2) = (a + b, c + d);
    let (y, v) = match kind {
        Kind::LogOddsRatio => (
            (a * d / (b * c)).ln(),
            1.0 / a + 1.0 / b + 1.0 / c + 1.0 / d,
        ),
        Kind::LogRiskRatio => (
            ((a / n1) / (c / n2)).ln(),
            1.0 / a - 1.0 / n1 + 1.0 / c - 1.0 / n2,
        ),
        Kind::RiskDifference => {
            let (p1, p2) = (a / n1, c / n2);
            (p1 - p2, p1 * (1.0 - p1) / n1 + p2 * (1.0 - p2) / n2)
        }
    };
    if !(v > 0.0 && v.is_finite()) {
        return Ok(Table2x2::Excluded(
            "the counts give no usable sampling variance".into(),
        ));
    }
    Ok(Table2x2::Effect { y, v, corrected })
}

/// Outcome of [`two_by_two`].
#[derive(Debug, Clone, PartialEq)]
pub enum Table2x2 {
    /// A usable effect.
    Effect {
        /// Effect on the analysis scale.
        y: f64,
        /// Sampling variance.
        v: f64,
        /// Whether 0.5 was added to every cell.
        corrected: bool,
    },
    /// Not estimable, with the reason.
    Excluded(String),
}

pub(crate) fn row(row: RowValues<'_>, kind: Kind) -> RowResult {
    let names = ["treat_events", "treat_n", "ctrl_events", "ctrl_n"];
    if let Some(m) = first_missing(row, &names) {
        return Ok(RowEffect::Excluded(format!("missing {m}")));
    }
    let x: Vec<f64> = names.iter().map(|n| row.get(n).unwrap_or(0.0)).collect();
    Ok(match two_by_two(x[0], x[1], x[2], x[3], kind)? {
        Table2x2::Effect { y, v, corrected } => RowEffect::Value {
            y,
            v,
            note: corrected.then(|| "zero cell: 0.5 added to each cell".to_string()),
            from: Route::Counts,
            check: None,
        },
        Table2x2::Excluded(why) => RowEffect::Excluded(why),
    })
}

/// Computes one `log-or` or `log-rr` row: the counts; or the ratio with
/// its confidence limits; or the log ratio with its SE (first complete wins).
///
/// # Formula
/// Ratio with limits at level L (`--ci-level`): y = ln(ratio),
/// SE = (ln hi − ln lo)/(2z), z = Φ⁻¹(1 − (1 − L)/2) (the normal-theory
/// interval of the log ratio solved for its SE; Cochrane Handbook,
/// section 6.3.1, from memory). Log ratio with SE: taken as given.
///
/// # Errors
/// A [`RowProblem`] for a ratio or limit ≤ 0, limits in the wrong order,
/// a ratio outside its limits, or an SE ≤ 0.
pub(crate) fn ratio_row(row: RowValues<'_>, kind: Kind, reading: &EffectReading) -> RowResult {
    let counts = ["treat_events", "treat_n", "ctrl_events", "ctrl_n"];
    let (ratio, log) = match kind {
        Kind::LogOddsRatio => ("or", "log_or"),
        _ => ("rr", "log_rr"),
    };
    if first_missing(row, &counts).is_none() {
        return self::row(row, kind);
    }
    if let (Some(r), Some(lo), Some(hi)) = (row.get(ratio), row.get("ci_low"), row.get("ci_high")) {
        for (role, x) in [(ratio, r), ("ci_low", lo), ("ci_high", hi)] {
            if x <= 0.0 {
                let role: &'static str = if role == ratio {
                    ratio_role(kind)
                } else {
                    role
                };
                return Err(RowProblem::new(
                    role,
                    "a ratio and its limits must be greater than 0 (they are read on the ratio \
                     scale; give log ratios in the log column with their se)",
                ));
            }
        }
        if hi <= lo {
            return Err(RowProblem::new(
                "ci_high",
                "the upper CI limit must be greater than the lower one",
            ));
        }
        if r < lo || r > hi {
            return Err(RowProblem::new(
                ratio_role(kind),
                "the ratio lies outside its own confidence interval; check the cells",
            ));
        }
        let se = (hi.ln() - lo.ln()) / (2.0 * reading.z());
        return Ok(RowEffect::Value {
            y: r.ln(),
            v: se * se,
            note: None,
            from: Route::RatioCi,
            check: None,
        });
    }
    if let (Some(y), Some(se)) = (row.get(log), row.get("se")) {
        if se <= 0.0 {
            return Err(RowProblem::new(
                "se",
                "a standard error must be greater than 0",
            ));
        }
        return Ok(RowEffect::Value {
            y,
            v: se * se,
            note: None,
            from: Route::LogSe,
            check: None,
        });
    }
    let routes = super::route::catalogue(match kind {
        Kind::LogOddsRatio => super::Measure::LogOr,
        _ => super::Measure::LogRr,
    });
    Ok(RowEffect::Excluded(super::closest_missing(
        row,
        routes.iter(),
    )))
}

fn ratio_role(kind: Kind) -> &'static str {
    match kind {
        Kind::LogOddsRatio => "or",
        _ => "rr",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn effect(t: Table2x2) -> (f64, f64, bool) {
        match t {
            Table2x2::Effect { y, v, corrected } => (y, v, corrected),
            Table2x2::Excluded(w) => panic!("excluded: {w}"),
        }
    }

    #[test]
    fn log_odds_ratio_by_hand() {
        let (y, v, c) = effect(two_by_two(5.0, 100.0, 10.0, 100.0, Kind::LogOddsRatio).unwrap());
        assert!((y - (5.0f64 * 90.0 / (95.0 * 10.0)).ln()).abs() < 1e-15);
        assert!((v - (1.0 / 5.0 + 1.0 / 95.0 + 1.0 / 10.0 + 1.0 / 90.0)).abs() < 1e-15);
        assert!(!c);
    }

    #[test]
    fn zero_cell_corrected_everywhere() {
        let (y, v, c) = effect(two_by_two(0.0, 20.0, 4.0, 20.0, Kind::LogOddsRatio).unwrap());
        assert!(c);
        assert!((y - (0.5f64 * 16.5 / (20.5 * 4.5)).ln()).abs() < 1e-15);
        assert!((v - (1.0 / 0.5 + 1.0 / 20.5 + 1.0 / 4.5 + 1.0 / 16.5)).abs() < 1e-14);
        let (y, _, c) = effect(two_by_two(0.0, 20.0, 4.0, 20.0, Kind::RiskDifference).unwrap());
        assert!(c);
        assert!((y - (0.5 / 21.0 - 4.5 / 21.0)).abs() < 1e-15);
    }

    #[test]
    fn double_zero() {
        assert!(matches!(
            two_by_two(0.0, 20.0, 0.0, 30.0, Kind::LogRiskRatio).unwrap(),
            Table2x2::Excluded(_)
        ));
        assert!(matches!(
            two_by_two(20.0, 20.0, 30.0, 30.0, Kind::LogOddsRatio).unwrap(),
            Table2x2::Excluded(_)
        ));
        // The risk difference is estimable with a correction.
        let (y, v, c) = effect(two_by_two(0.0, 20.0, 0.0, 30.0, Kind::RiskDifference).unwrap());
        assert!(c && v > 0.0 && (y - (0.5 / 21.0 - 0.5 / 31.0)).abs() < 1e-15);
    }

    #[test]
    fn bad_counts() {
        assert_eq!(
            two_by_two(11.0, 10.0, 1.0, 10.0, Kind::LogOddsRatio)
                .unwrap_err()
                .role,
            "treat_events"
        );
        assert_eq!(
            two_by_two(1.0, 10.0, 1.5, 10.0, Kind::LogOddsRatio)
                .unwrap_err()
                .role,
            "ctrl_events"
        );
        assert_eq!(
            two_by_two(0.0, 0.0, 1.0, 10.0, Kind::LogOddsRatio)
                .unwrap_err()
                .role,
            "treat_n"
        );
        assert_eq!(
            two_by_two(-1.0, 10.0, 1.0, 10.0, Kind::LogOddsRatio)
                .unwrap_err()
                .role,
            "treat_events"
        );
    }
}
