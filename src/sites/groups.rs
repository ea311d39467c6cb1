//! Per-site group comparisons from a site's moments: Hedges' g between the
//! two groups of a 0/1-coded x (`--effect smd`), and the 2×2 table and log
//! odds ratio of a 0/1-coded y (`--effect log-or`).
//!
//! With x coded 0/1 (1 = treatment) everything follows from the count, the
//! means and the co-moments of (x, y) that the streaming pass and the SQL
//! query produce, so both routes give the same numbers:
//!
//! - n₁ = n·x̄, n₀ = n − n₁ (group sizes);
//! - ȳ₁ − ȳ₀ = C_xy / C_xx (the OLS slope of y on a 0/1 x), and
//!   ȳ₁ = ȳ + (n₀/n)(ȳ₁ − ȳ₀), ȳ₀ = ȳ − (n₁/n)(ȳ₁ − ȳ₀);
//! - the pooled within-group sum of squares is the residual sum of squares
//!   of that regression, C_yy − C_xy²/C_xx, so s² = that / (n − 2);
//! - with y coded 0/1 as well, events in the treatment group a = Σ x·y =
//!   C_xy + n·x̄·ȳ, and in the control group c = n·ȳ − a.
//!
//! Hedges' g and its variance, and the log odds ratio with its variance
//! and zero-cell correction, are then computed by the same functions
//! `pondus fit` uses ([`crate::effect::smd::hedges_g`],
//! [`crate::effect::binary::two_by_two`]).

use super::first_pass::SiteSummary;
use super::moments::Moments;
use super::settings::SitesSettings;
use crate::effect::binary::{two_by_two, Kind, Table2x2};
use crate::effect::smd::hedges_g;
use crate::result::{ExcludedSite, SiteEffect, SiteMeasure, SiteOdds, SiteSmd};
use crate::support::flag::Flag;

/// Index of x and y in the moment vector of a group comparison.
const X: usize = 0;
const Y: usize = 1;

/// How far n·x̄ may lie from a whole number before x is taken not to be
/// 0/1 coded (rounding of the means in a moments table, relative to n).
const COUNT_SLACK: f64 = 1e-6;

/// A whole count from n·mean, or None when it is not one.
fn count(n: f64, mean: f64) -> Option<f64> {
    whole(n * mean, n)
}

/// `c` as a whole count between 0 and n, or None when it is not one.
fn whole(c: f64, n: f64) -> Option<f64> {
    let r = c.round();
    ((c - r).abs() <= COUNT_SLACK * n.max(1.0) && r >= 0.0 && r <= n).then_some(r)
}

/// The group sizes (n₁, n₀) of a site whose x is coded 0/1.
///
/// # Errors
/// A reason when x is not 0/1 coded (n·x̄ not whole, or its variance not
/// that of a 0/1 variable) or a group is empty.
pub fn group_sizes(m: &Moments) -> Result<(f64, f64), String> {
    let n = m.n() as f64;
    let not_coded = || {
        "x is not coded 0/1 in this site (the group sizes n·mean_x and the variance of x do not \
         fit two groups); code the treatment group 1 and the control group 0"
            .to_string()
    };
    let n1 = count(n, m.mean(X)).ok_or_else(not_coded)?;
    let n0 = n - n1;
    // A 0/1 variable with n₁ ones has co-moment n₁n₀/n.
    let cxx = m.comoment(X, X);
    if (cxx - n1 * n0 / n).abs() > COUNT_SLACK * n.max(1.0) {
        return Err(not_coded());
    }
    if n < 3.0 {
        return Err(format!(
            "too few rows for a comparison of two groups: {n}, it needs at least 3"
        ));
    }
    if n1 < 1.0 || n0 < 1.0 {
        let which = if n1 < 1.0 { "treatment" } else { "control" };
        return Err(format!(
            "no rows in the {which} group, so the groups cannot be compared"
        ));
    }
    Ok((n1, n0))
}

/// Hedges' g of y between the groups of a 0/1 x, from the site's moments;
/// also the raw mean difference and its classical standard error.
///
/// # Errors
/// A reason for the list of sites left out: x not 0/1, a group with fewer
/// than 2 rows, or y constant within both groups.
pub fn smd(m: &Moments) -> Result<(SiteSmd, f64, f64), String> {
    let (n1, n0) = group_sizes(m)?;
    if n1 < 2.0 || n0 < 2.0 {
        return Err(format!(
            "too few rows for a standardised mean difference: {n1} in the treatment group and \
             {n0} in the control group, each needs at least 2"
        ));
    }
    let n = n1 + n0;
    let (cxx, cxy, cyy) = (m.comoment(X, X), m.comoment(X, Y), m.comoment(Y, Y));
    let diff = cxy / cxx;
    let within = (cyy - cxy * cxy / cxx).max(0.0);
    let s2 = within / (n - 2.0);
    // As in the slope route: a residual that is rounding of C_yy is no spread.
    if within <= crate::tolerance::EXACT_FIT_RSS * cyy || s2 <= 0.0 || !s2.is_finite() {
        return Err(
            "y does not vary within the groups, so there is no SD to standardise by".into(),
        );
    }
    let s = s2.sqrt();
    let my = m.mean(Y);
    let (m1, m0) = (my + n0 / n * diff, my - n1 / n * diff);
    let g = hedges_g(m1, s, n1, m0, s, n0).map_err(|p| p.message)?;
    let se = s * (1.0 / n1 + 1.0 / n0).sqrt();
    Ok((
        SiteSmd {
            treat_n: n1 as u64,
            ctrl_n: n0 as u64,
            treat_mean: m1,
            ctrl_mean: m0,
            sd_within: s,
            t: diff / se,
            g: g.g,
            var_g: g.v,
        },
        diff,
        se,
    ))
}

/// The 2×2 table of a 0/1 x by a 0/1 y and its log odds ratio, from the
/// site's moments; also the difference in proportions and its classical
/// OLS standard error (0 when y is fixed within each group).
///
/// # Errors
/// A reason for the list of sites left out: x or y not 0/1, an empty
/// group, or a table without information on an odds ratio (no events, or
/// only events, in both groups).
pub fn log_or(m: &Moments) -> Result<(SiteOdds, f64, f64), String> {
    let (n1, n0) = group_sizes(m)?;
    let n = n1 + n0;
    let (my, cxy) = (m.mean(Y), m.comoment(X, Y));
    let events = count(n, my).ok_or_else(|| {
        "y is not coded 0/1 in this site (n·mean_y is not a whole number); code the event 1"
            .to_string()
    })?;
    let cyy = m.comoment(Y, Y);
    if (cyy - events * (n - events) / n).abs() > COUNT_SLACK * n.max(1.0) {
        return Err(
            "y is not coded 0/1 in this site (its variance does not fit); code the \
                    event 1 and its absence 0"
                .into(),
        );
    }
    let a = whole(cxy + n * m.mean(X) * my, n)
        .filter(|&a| a <= n1 && a <= events)
        .ok_or_else(|| "the cross-moment of x and y does not fit a 0/1 table".to_string())?;
    let c = events - a;
    let (y, v, corrected) = match two_by_two(a, n1, c, n0, Kind::LogOddsRatio) {
        Ok(Table2x2::Effect { y, v, corrected }) => (y, v, corrected),
        Ok(Table2x2::Excluded(why)) => return Err(why),
        Err(p) => return Err(p.message),
    };
    let (p1, p0) = (a / n1, c / n0);
    let within = a * (1.0 - p1) + c * (1.0 - p0);
    let se = if n > 2.0 {
        (within / (n - 2.0) * (1.0 / n1 + 1.0 / n0)).sqrt()
    } else {
        f64::NAN
    };
    Ok((
        SiteOdds {
            treat_events: a as u64,
            treat_n: n1 as u64,
            ctrl_events: c as u64,
            ctrl_n: n0 as u64,
            log_or: y,
            var_log_or: v,
            zero_cell: corrected,
        },
        p1 - p0,
        se,
    ))
}

/// Each site's group comparison (`effect` is `Smd` or `LogOr`); sites
/// that cannot give one are listed with the reason.
pub(super) fn group_sites(
    summaries: Vec<SiteSummary>,
    effect: SiteMeasure,
) -> (Vec<SiteEffect>, Vec<ExcludedSite>) {
    let mut sites = Vec::new();
    let mut excluded = Vec::new();
    for site in summaries {
        let m = &site.moments;
        let (smd_part, odds_part, diff, se) = match effect {
            SiteMeasure::LogOr => match log_or(m) {
                Ok((o, d, se)) => (None, Some(o), d, se),
                Err(reason) => {
                    excluded.push(ExcludedSite {
                        study: site.id,
                        n: m.n(),
                        reason,
                    });
                    continue;
                }
            },
            _ => match smd(m) {
                Ok((g, d, se)) => (Some(g), None, d, se),
                Err(reason) => {
                    excluded.push(ExcludedSite {
                        study: site.id,
                        n: m.n(),
                        reason,
                    });
                    continue;
                }
            },
        };
        let (cxx, cyy) = (m.comoment(X, X), m.comoment(Y, Y));
        // Clamped: a 2×2 table with one empty cell pair has |r| = 1, which
        // rounding can carry a hair beyond.
        let r = (m.comoment(X, Y) / (cxx * cyy).sqrt()).clamp(-1.0, 1.0);
        sites.push(SiteEffect {
            study: site.id,
            n: m.n(),
            slope: diff,
            se,
            r,
            interaction: None,
            interaction_se: None,
            mean_x: m.mean(X),
            mean_w: None,
            note: None,
            characteristics: vec![],
            smd: smd_part,
            log_or: odds_part,
        });
    }
    (sites, excluded)
}

/// The notes of a group comparison: what the columns hold, and which
/// sites had a zero cell.
pub(super) fn notes(s: &SitesSettings, sites: &[SiteEffect]) -> Vec<String> {
    let treat = s.treat.as_deref().unwrap_or("1");
    match s.effect {
        SiteMeasure::Slope => vec![],
        SiteMeasure::Smd => vec![format!(
            "Groups of {x}: '{treat}' is the treatment group, the other value the control. \
             Hedges' g = J·(treatment mean − control mean)/pooled within-group SD (divisor n − 2), \
             with J = 1 − 3/(4(n − 2) − 1) and variance (n_t + n_c)/(n_t·n_c) + g²/(2(n_t + n_c)), \
             the formulas of `pondus fit {m} smd` (Hedges & Olkin 1985, ch. 5); 'slope' is the raw \
             mean difference.",
            x = s.x,
            m = Flag::Measure
        )],
        SiteMeasure::LogOr => {
            let event = s.event.as_deref().unwrap_or("1");
            let mut v = vec![format!(
                "Groups of {x}: '{treat}' is the treatment group; events of {y}: '{event}'. The \
                 log odds ratio is ln(a·d/(b·c)) with variance 1/a + 1/b + 1/c + 1/d (Woolf 1955); \
                 'slope' is the difference in proportions.",
                x = s.x,
                y = s.y
            )];
            let zero: Vec<String> = sites
                .iter()
                .filter(|e| e.log_or.as_ref().is_some_and(|o| o.zero_cell))
                .map(|e| format!("'{}'", e.study))
                .collect();
            if !zero.is_empty() {
                let shown = zero.iter().take(20).cloned().collect::<Vec<_>>().join(", ");
                let more = if zero.len() > 20 {
                    format!(" and {} more", zero.len() - 20)
                } else {
                    String::new()
                };
                v.push(format!(
                    "{} site{} had a zero cell, so 0.5 was added to every cell of {} table for \
                     the log odds ratio and its variance (as `pondus fit {m} log-or` does \
                     from the counts): {shown}{more}.",
                    zero.len(),
                    if zero.len() == 1 { "" } else { "s" },
                    if zero.len() == 1 { "its" } else { "their" },
                    m = Flag::Measure
                ));
            }
            v
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn moments(rows: &[(f64, f64)]) -> Moments {
        let mut m = Moments::new(2);
        rows.iter().for_each(|&(x, y)| m.push(&[x, y]));
        m
    }

    /// Treatment 5, 7, 9 (mean 7, SD 2), control 1, 3 (mean 2, SD √2):
    /// pooled s² = (2·4 + 1·2)/3 = 10/3, by hand.
    #[test]
    fn smd_by_hand() {
        let m = moments(&[(1.0, 5.0), (0.0, 1.0), (1.0, 7.0), (0.0, 3.0), (1.0, 9.0)]);
        let (s, diff, _) = smd(&m).unwrap();
        assert_eq!((s.treat_n, s.ctrl_n), (3, 2));
        assert!((diff - 5.0).abs() < 1e-13 && (s.treat_mean - 7.0).abs() < 1e-13);
        assert!((s.sd_within - (10.0f64 / 3.0).sqrt()).abs() < 1e-13);
        let want = hedges_g(7.0, 2.0, 3.0, 2.0, 2f64.sqrt(), 2.0).unwrap();
        assert!((s.g - want.g).abs() < 1e-13 && (s.var_g - want.v).abs() < 1e-13);
    }

    /// a = 2 of 3 treated, c = 0 of 3 controls: the zero cell is corrected.
    #[test]
    fn table_by_hand() {
        let rows = [
            (1.0, 1.0),
            (1.0, 1.0),
            (1.0, 0.0),
            (0.0, 0.0),
            (0.0, 0.0),
            (0.0, 0.0),
        ];
        let (t, diff, _) = log_or(&moments(&rows)).unwrap();
        assert_eq!(
            (t.treat_events, t.treat_n, t.ctrl_events, t.ctrl_n),
            (2, 3, 0, 3)
        );
        assert!(t.zero_cell);
        assert!((t.log_or - (2.5f64 * 3.5 / (1.5 * 0.5)).ln()).abs() < 1e-13);
        assert!((diff - 2.0 / 3.0).abs() < 1e-13);
    }

    #[test]
    fn refusals() {
        let e = smd(&moments(&[(1.0, 1.0), (1.0, 2.0), (1.0, 3.0)])).unwrap_err();
        assert!(e.contains("no rows in the control group"), "{e}");
        let e = smd(&moments(&[(1.0, 1.0), (2.0, 2.0), (1.0, 3.0)])).unwrap_err();
        assert!(e.contains("not coded 0/1"), "{e}");
        let e = smd(&moments(&[(1.0, 1.0), (0.0, 2.0), (1.0, 3.0)])).unwrap_err();
        assert!(e.contains("at least 2"), "{e}");
        let e = smd(&moments(&[(1.0, 1.0), (0.0, 2.0), (1.0, 1.0), (0.0, 2.0)])).unwrap_err();
        assert!(e.contains("does not vary"), "{e}");
    }
}
