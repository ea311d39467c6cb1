//! The routes of `smd`: Hedges' g from group means and SDs, means and SEs,
//! a t or F statistic, a p-value, or medians with quartiles or ranges; and,
//! with `--convert`, from a correlation or event counts. The first complete
//! route gives the effect; the other complete routes are computed too and a
//! disagreement is reported (see [`crate::tolerance::ROUTE_CHECK_D`]).
//!
//! Formulas and sources are in each function's doc comment and in
//! docs/methods.md §2.5; the route order is [`super::route::SMD_ROUTES`].

use super::route::{EffectReading, Route, SMD_ROUTES};
use super::smd::hedges_g;
use super::{binary, RowEffect, RowProblem, RowResult, RowValues};
use crate::dist::{normal_quantile, t_quantile};
use crate::support::flag::Flag;
use crate::support::format;
use crate::tolerance::ROUTE_CHECK_D;

/// A group comparison as Cohen's d with the group sizes, before the
/// small-sample correction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GroupD {
    /// Cohen's d (pooled SD).
    pub d: f64,
    /// Treated group size.
    pub nt: f64,
    /// Control group size.
    pub nc: f64,
}

/// What one route gave for a row.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Outcome {
    /// Every column is there and the values give d.
    Value(Route, GroupD),
    /// Every column is there (or a p-value is), but the values cannot be
    /// used; the reason in words.
    Unusable(Route, String),
}

/// Hedges' g and its variance from d and the group sizes.
///
/// # Formula
/// df = n_t + n_c − 2, J = 1 − 3/(4·df − 1), g = J·d,
/// v = (n_t + n_c)/(n_t·n_c) + g²/(2(n_t + n_c))
/// (Hedges & Olkin 1985, ch. 5; the same as [`hedges_g`] from means).
pub fn g_from_d(d: f64, nt: f64, nc: f64) -> (f64, f64) {
    let df = nt + nc - 2.0;
    let j = 1.0 - 3.0 / (4.0 * df - 1.0);
    let g = j * d;
    (g, (nt + nc) / (nt * nc) + g * g / (2.0 * (nt + nc)))
}

/// d from an independent-groups t statistic.
///
/// # Formula
/// d = t·√(1/n_t + 1/n_c) (Borenstein et al. 2009, *Introduction to
/// Meta-Analysis*, ch. 7; follows from t = (m_t − m_c)/(s_p·√(1/n_t + 1/n_c))).
pub fn d_from_t(t: f64, nt: f64, nc: f64) -> f64 {
    t * (1.0 / nt + 1.0 / nc).sqrt()
}

/// The t statistic behind a two-sided p-value, with the reported direction.
///
/// # Formula
/// t = sign·F⁻¹_t(1 − p/2; df) (the inverse of p = 2·(1 − F_t(|t|; df))).
pub fn t_from_p(p: f64, sign: f64, df: f64) -> f64 {
    if p >= 1.0 {
        return 0.0;
    }
    sign * t_quantile(1.0 - p / 2.0, df)
}

/// Approximated mean and SD of a group from its median and quartiles.
///
/// # Formula
/// mean ≈ (0.7 + 0.39/n)(q₁ + q₃)/2 + (0.3 − 0.39/n)·m (Luo et al. 2018,
/// *Stat Methods Med Res* 27:1785, scenario of the quartiles);
/// SD ≈ (q₃ − q₁)/(2·Φ⁻¹((0.75n − 0.125)/(n + 0.25))) (Wan et al. 2014,
/// *BMC Med Res Methodol* 14:135). Both assume roughly normal data.
pub fn mean_sd_from_iqr(m: f64, q1: f64, q3: f64, n: f64) -> (f64, f64) {
    let mean = (0.7 + 0.39 / n) * (q1 + q3) / 2.0 + (0.3 - 0.39 / n) * m;
    let eta = 2.0 * normal_quantile((0.75 * n - 0.125) / (n + 0.25));
    (mean, (q3 - q1) / eta)
}

/// Approximated mean and SD of a group from its median, minimum and maximum.
///
/// # Formula
/// mean ≈ w(a + b)/2 + (1 − w)·m, w = 4/(4 + n^0.75) (Luo et al. 2018,
/// scenario of the range); SD ≈ (b − a)/(2·Φ⁻¹((n − 0.375)/(n + 0.25)))
/// (Wan et al. 2014). Both assume roughly normal data.
pub fn mean_sd_from_range(m: f64, a: f64, b: f64, n: f64) -> (f64, f64) {
    let w = 4.0 / (4.0 + n.powf(0.75));
    let mean = w * (a + b) / 2.0 + (1.0 - w) * m;
    let xi = 2.0 * normal_quantile((n - 0.375) / (n + 0.25));
    (mean, (b - a) / xi)
}

/// All values of `names`, or None when one is missing.
fn all(row: RowValues<'_>, names: &[&str]) -> Option<Vec<f64>> {
    names.iter().map(|n| row.get(n)).collect()
}

fn check_sizes(nt: f64, nc: f64) -> Result<(), RowProblem> {
    for (role, n) in [("treat_n", nt), ("ctrl_n", nc)] {
        if n < 2.0 {
            return Err(RowProblem::new(role, "a group needs at least 2 members"));
        }
    }
    Ok(())
}

fn check_sign(s: f64) -> Result<(), RowProblem> {
    if s == 1.0 || s == -1.0 {
        Ok(())
    } else {
        Err(RowProblem::new(
            "sign",
            "sign must be 1 (treatment above control) or -1 (below)",
        ))
    }
}

/// Why a p-value cannot be used, or None when it can.
pub(crate) fn p_unusable(row: RowValues<'_>) -> Option<String> {
    if let Some(text) = row.inequality() {
        return Some(format!(
            "p written as an inequality ('{text}') cannot give an effect; give the exact p, t or means"
        ));
    }
    let p = row.get("p")?;
    if p <= 0.0 {
        return Some(
            "p of 0 (rounded or truncated) cannot give an effect; give the exact p, t or means"
                .into(),
        );
    }
    if p > 1.0 {
        return Some("p above 1 is not a p-value; check the cell".into());
    }
    if row.get("sign").is_none() {
        return Some(
            "p without sign: the direction of the effect is unknown; add a sign column (1 or -1)"
                .into(),
        );
    }
    None
}

/// One group's mean and SD from a median-based route, checked.
fn approx_group(
    names: [&'static str; 3],
    x: [f64; 3],
    n: f64,
    range: bool,
) -> Result<(f64, f64), RowProblem> {
    let [m, lo, hi] = x;
    if !(lo <= m && m <= hi) || hi <= lo {
        let what = if range {
            "min ≤ median ≤ max with max > min"
        } else {
            "q1 ≤ median ≤ q3 with q3 > q1"
        };
        return Err(RowProblem::new(
            names[2],
            format!("the values must satisfy {what}"),
        ));
    }
    Ok(if range {
        mean_sd_from_range(m, lo, hi, n)
    } else {
        mean_sd_from_iqr(m, lo, hi, n)
    })
}

/// d through one native route, or None when its columns are not all there.
fn one_route(route: Route, row: RowValues<'_>) -> Result<Option<Outcome>, RowProblem> {
    let info = SMD_ROUTES
        .iter()
        .find(|i| i.route == route)
        .expect("smd route");
    if route == Route::P {
        let (Some(nt), Some(nc)) = (row.get("treat_n"), row.get("ctrl_n")) else {
            return Ok(None);
        };
        if row.get("p").is_none() && row.inequality().is_none() {
            return Ok(None);
        }
        if let Some(why) = p_unusable(row) {
            return Ok(Some(Outcome::Unusable(route, why)));
        }
        let (p, s) = (row.get("p").unwrap_or(1.0), row.get("sign").unwrap_or(1.0));
        check_sign(s)?;
        check_sizes(nt, nc)?;
        let t = t_from_p(p, s, nt + nc - 2.0);
        return Ok(Some(Outcome::Value(
            route,
            GroupD {
                d: d_from_t(t, nt, nc),
                nt,
                nc,
            },
        )));
    }
    let Some(x) = all(row, info.columns) else {
        return Ok(None);
    };
    let value = |d: f64, nt: f64, nc: f64| Ok(Some(Outcome::Value(route, GroupD { d, nt, nc })));
    match route {
        Route::Means | Route::MeansSe => {
            let (nt, nc) = (x[2], x[5]);
            check_sizes(nt, nc)?;
            let (st, sc) = if route == Route::Means {
                (x[1], x[4])
            } else {
                for (role, se) in [("treat_se", x[1]), ("ctrl_se", x[4])] {
                    if se <= 0.0 {
                        return Err(RowProblem::new(
                            role,
                            "a standard error must be greater than 0",
                        ));
                    }
                }
                (x[1] * nt.sqrt(), x[4] * nc.sqrt())
            };
            let s = hedges_g(x[0], st, nt, x[3], sc, nc)?;
            value(s.d, nt, nc)
        }
        Route::T => {
            check_sizes(x[1], x[2])?;
            value(d_from_t(x[0], x[1], x[2]), x[1], x[2])
        }
        Route::F => {
            if x[0] < 0.0 {
                return Err(RowProblem::new("f", "an F statistic cannot be negative"));
            }
            check_sign(x[1])?;
            check_sizes(x[2], x[3])?;
            value(d_from_t(x[1] * x[0].sqrt(), x[2], x[3]), x[2], x[3])
        }
        Route::MedianIqr | Route::MedianRange => {
            let (nt, nc) = (x[3], x[7]);
            check_sizes(nt, nc)?;
            let range = route == Route::MedianRange;
            let names = |i: usize| [info.columns[i], info.columns[i + 1], info.columns[i + 2]];
            let (mt, st) = approx_group(names(0), [x[0], x[1], x[2]], nt, range)?;
            let (mc, sc) = approx_group(names(4), [x[4], x[5], x[6]], nc, range)?;
            let s = hedges_g(mt, st, nt, mc, sc, nc)?;
            value(s.d, nt, nc)
        }
        _ => Ok(None),
    }
}

/// Every complete native route of the row, in the catalogue's order.
///
/// # Errors
/// A [`RowProblem`] for a value out of range in a complete route.
pub(crate) fn native_outcomes(row: RowValues<'_>) -> Result<Vec<Outcome>, RowProblem> {
    let mut out = Vec::new();
    for info in SMD_ROUTES.iter().filter(|i| !i.needs_convert) {
        if let Some(o) = one_route(info.route, row)? {
            out.push(o);
        }
    }
    Ok(out)
}

/// The first usable outcome and the cross-check of the others against it
/// (a warning text when one differs by more than `limit` on the scale of `scale`).
pub(crate) fn first_and_check(
    outcomes: &[Outcome],
    scale: impl Fn(&GroupD) -> f64,
    limit: f64,
    what: &str,
) -> Option<(Route, GroupD, Option<String>)> {
    let mut usable = outcomes.iter().filter_map(|o| match o {
        Outcome::Value(r, g) => Some((*r, *g)),
        Outcome::Unusable(..) => None,
    });
    let (route, first) = usable.next()?;
    let x0 = scale(&first);
    let differing: Vec<String> = usable
        .filter(|(_, g)| (scale(g) - x0).abs() > limit)
        .map(|(r, g)| format!("from {r} {what} = {}", format::short(scale(&g))))
        .collect();
    let check = (!differing.is_empty()).then(|| {
        format!(
            "from {route} {what} = {}, but {}; check the extraction",
            format::short(x0),
            differing.join(", ")
        )
    });
    Some((route, first, check))
}

/// Why a row with no usable route is left out.
pub(crate) fn exclusion(outcomes: &[Outcome], row: RowValues<'_>, convert_hint: bool) -> String {
    if let Some(Outcome::Unusable(_, why)) = outcomes.first() {
        return why.clone();
    }
    if convert_hint {
        if all(row, &["r", "n"]).is_some() {
            return format!(
                "reports r and n but no group comparison; add {} to convert r to d",
                Flag::Convert
            );
        }
        if all(row, &["treat_events", "treat_n", "ctrl_events", "ctrl_n"]).is_some() {
            return format!(
                "reports event counts but no group means; add {} to convert them to d",
                Flag::Convert
            );
        }
    }
    if row.get("p").is_some() && row.get("sign").is_none() {
        if let Some(why) = p_unusable(row) {
            return why;
        }
    }
    super::closest_missing(row, SMD_ROUTES.iter().filter(|i| !i.needs_convert))
}

/// Computes one `smd` row: the first usable route, the cross-check of the
/// others, and with `--convert` a correlation or counts when no group
/// comparison is there.
pub(crate) fn smd_row(row: RowValues<'_>, reading: &EffectReading) -> RowResult {
    let outcomes = native_outcomes(row)?;
    if let Some((route, gd, check)) = first_and_check(&outcomes, |g| g.d, ROUTE_CHECK_D, "d") {
        let (g, v) = g_from_d(gd.d, gd.nt, gd.nc);
        return Ok(RowEffect::Value {
            y: g,
            v,
            note: None,
            from: route,
            check,
        });
    }
    if !outcomes.is_empty() || !reading.convert {
        return Ok(RowEffect::Excluded(exclusion(
            &outcomes,
            row,
            !reading.convert,
        )));
    }
    if let Some(x) = all(row, &["r", "n"]) {
        let (g, v) = g_from_r(x[0], x[1])?;
        return Ok(RowEffect::Value {
            y: g,
            v,
            note: None,
            from: Route::RToD,
            check: None,
        });
    }
    if let Some(x) = all(row, &["treat_events", "treat_n", "ctrl_events", "ctrl_n"]) {
        return match binary::two_by_two(x[0], x[1], x[2], x[3], binary::Kind::LogOddsRatio)? {
            binary::Table2x2::Effect { y, v, corrected } => {
                let (g, vg) = g_from_log_or(y, v, x[1], x[3]);
                Ok(RowEffect::Value {
                    y: g,
                    v: vg,
                    note: corrected.then(|| "zero cell: 0.5 added to each cell".to_string()),
                    from: Route::CountsToD,
                    check: None,
                })
            }
            binary::Table2x2::Excluded(why) => Ok(RowEffect::Excluded(why)),
        };
    }
    Ok(RowEffect::Excluded(exclusion(&outcomes, row, false)))
}

/// Hedges' g and its variance from a correlation (`--convert`).
///
/// # Formula
/// d = 2r/√(1 − r²), v_d = 4·v_r/(1 − r²)³ with v_r = (1 − r²)²/(n − 1)
/// (Borenstein et al. 2009, *Introduction to Meta-Analysis*, ch. 7, eqs.
/// 7.5–7.6); then g = J·d, v_g = J²·v_d with J = 1 − 3/(4(n − 2) − 1).
///
/// # Errors
/// A [`RowProblem`] for r outside (−1, 1) or n below 4.
pub fn g_from_r(r: f64, n: f64) -> Result<(f64, f64), RowProblem> {
    if !(r > -1.0 && r < 1.0) {
        return Err(RowProblem::new(
            "r",
            "a correlation must lie strictly between -1 and 1",
        ));
    }
    if n < 4.0 {
        return Err(RowProblem::new(
            "n",
            "n must be at least 4 to convert r to d",
        ));
    }
    let one = 1.0 - r * r;
    let d = 2.0 * r / one.sqrt();
    let vr = one * one / (n - 1.0);
    let vd = 4.0 * vr / (one * one * one);
    let j = 1.0 - 3.0 / (4.0 * (n - 2.0) - 1.0);
    Ok((j * d, j * j * vd))
}

/// Hedges' g and its variance from a log odds ratio (`--convert`).
///
/// # Formula
/// d = ln(OR)·√3/π, v_d = v·3/π² (Hasselblad & Hedges 1995, *Psychol Bull*
/// 117:167; Chinn 2000, *Stat Med* 19:3127; Borenstein et al. 2009, ch. 7);
/// then g = J·d, v_g = J²·v_d with J = 1 − 3/(4(n_t + n_c − 2) − 1).
pub fn g_from_log_or(y: f64, v: f64, nt: f64, nc: f64) -> (f64, f64) {
    let k = 3f64.sqrt() / std::f64::consts::PI;
    let j = 1.0 - 3.0 / (4.0 * (nt + nc - 2.0) - 1.0);
    (j * y * k, j * j * v * k * k)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::effect::Measure;

    fn row_of(pairs: &[(&str, f64)]) -> Vec<Option<f64>> {
        Measure::Smd
            .roles()
            .iter()
            .map(|r| pairs.iter().find(|(n, _)| *n == r.name).map(|(_, x)| *x))
            .collect()
    }

    fn run(pairs: &[(&str, f64)], convert: bool) -> RowEffect {
        let v = row_of(pairs);
        let reading = EffectReading {
            convert,
            ..EffectReading::default()
        };
        smd_row(RowValues::new(Measure::Smd.roles(), &v), &reading).unwrap()
    }

    const MEANS: [(&str, f64); 6] = [
        ("treat_mean", 103.0),
        ("treat_sd", 5.5),
        ("treat_n", 50.0),
        ("ctrl_mean", 100.0),
        ("ctrl_sd", 4.5),
        ("ctrl_n", 50.0),
    ];

    #[test]
    fn t_route_equals_means_route() {
        // The pooled-variance t of the means example: t = d/√(1/50 + 1/50).
        let s = hedges_g(103.0, 5.5, 50.0, 100.0, 4.5, 50.0).unwrap();
        let t = s.d / (0.04f64).sqrt();
        let RowEffect::Value { y, v, from, .. } =
            run(&[("t", t), ("treat_n", 50.0), ("ctrl_n", 50.0)], false)
        else {
            panic!()
        };
        assert_eq!(from, Route::T);
        assert!((y - s.g).abs() < 1e-12 && (v - s.v).abs() < 1e-12);
    }

    #[test]
    fn cross_check_flags_a_typo() {
        let mut pairs = MEANS.to_vec();
        pairs.push(("t", 1.0)); // the true t is about 2.99
        let RowEffect::Value { from, check, .. } = run(&pairs, false) else {
            panic!()
        };
        assert_eq!(from, Route::Means);
        let c = check.expect("a disagreement");
        assert!(
            c.contains("from means d = 0.597") && c.contains("from t d = 0.2"),
            "{c}"
        );
        let mut pairs = MEANS.to_vec();
        pairs.push(("t", 2.985));
        let RowEffect::Value { check, .. } = run(&pairs, false) else {
            panic!()
        };
        assert_eq!(check, None);
    }

    #[test]
    fn p_values_that_cannot_be_used() {
        let base = [("treat_n", 20.0), ("ctrl_n", 20.0)];
        let with = |extra: &[(&str, f64)]| {
            let mut v = base.to_vec();
            v.extend_from_slice(extra);
            run(&v, false)
        };
        let RowEffect::Excluded(w) = with(&[("p", 0.04)]) else {
            panic!()
        };
        assert!(w.contains("without sign"), "{w}");
        let RowEffect::Excluded(w) = with(&[("p", 0.0), ("sign", 1.0)]) else {
            panic!()
        };
        assert!(w.contains("p of 0"), "{w}");
        let RowEffect::Excluded(w) = with(&[("p", 1.5), ("sign", 1.0)]) else {
            panic!()
        };
        assert!(w.contains("above 1"), "{w}");
        let RowEffect::Value { from, y, .. } = with(&[("p", 0.04), ("sign", -1.0)]) else {
            panic!()
        };
        assert_eq!(from, Route::P);
        assert!(y < 0.0);
    }

    #[test]
    fn conversions_only_when_asked() {
        let RowEffect::Excluded(w) = run(&[("r", 0.3), ("n", 60.0)], false) else {
            panic!()
        };
        assert!(w.contains("--convert"), "{w}");
        let RowEffect::Value { from, y, .. } = run(&[("r", 0.3), ("n", 60.0)], true) else {
            panic!()
        };
        assert_eq!(from, Route::RToD);
        let d = 0.6 / (0.91f64).sqrt();
        assert!((y - (1.0 - 3.0 / 231.0) * d).abs() < 1e-12);
    }

    #[test]
    fn missing_reason_names_the_closest_route() {
        let RowEffect::Excluded(w) = run(&MEANS[..5], false) else {
            panic!()
        };
        assert_eq!(w, "missing ctrl_n");
    }

    #[test]
    fn bad_values_are_problems() {
        let v = row_of(&[
            ("f", 4.0),
            ("sign", 2.0),
            ("treat_n", 20.0),
            ("ctrl_n", 20.0),
        ]);
        let e = smd_row(
            RowValues::new(Measure::Smd.roles(), &v),
            &EffectReading::default(),
        );
        assert_eq!(e.unwrap_err().role, "sign");
        let v = row_of(&[
            ("treat_median", 5.0),
            ("treat_q1", 6.0),
            ("treat_q3", 7.0),
            ("treat_n", 20.0),
            ("ctrl_median", 5.0),
            ("ctrl_q1", 4.0),
            ("ctrl_q3", 7.0),
            ("ctrl_n", 20.0),
        ]);
        let e = smd_row(
            RowValues::new(Measure::Smd.roles(), &v),
            &EffectReading::default(),
        );
        assert_eq!(e.unwrap_err().role, "treat_q3");
    }
}
