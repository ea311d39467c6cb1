//! The "Robustness checks" section of the `pondus fit` page: the
//! permutation test, leave-one-out, influence, small-study effects and the
//! cumulative meta-analysis — each only when it was run.

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::result::FitReport;
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};

/// Studies listed one by one in the robustness tables at most; above this,
/// only the flagged studies are listed (all of them are in `--table`).
const MAX_LISTED: usize = 60;

/// Whether the report carries any robustness check.
pub(super) fn has_diagnostics(cx: &FitCtx) -> bool {
    let report = cx.report;
    report.leave_one_out.is_some()
        || report.influence.is_some()
        || report.permutation.is_some()
        || report.small_study.is_some()
        || report.cumulative.is_some()
}

/// Permutation test, leave-one-out, influence, small-study effects and the
/// cumulative meta-analysis.
pub(super) fn robustness(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, cx.lv.as_str());
    permutation(page, report);
    leave_one_out(page, report);
    influence(page, report);
    small_study(page, report, lv);
    cumulative(page, report, lv);
}

/// The permutation p of the moderator test and of each coefficient.
fn permutation(page: &mut Page, report: &FitReport) {
    let terms = &report.model.terms;
    if let Some(perm) = &report.permutation {
        page.h3("Permutation test of the moderators");
        let how = if perm.exact {
            format!(
                "every one of the {} distinct arrangements of the moderator rows",
                perm.permutations
            )
        } else {
            format!(
                "{} random permutations of the moderator rows (seed {})",
                perm.permutations,
                perm.seed
                    .map(|s| s.to_string())
                    .unwrap_or_else(|| "—".into())
            )
        };
        page.facts(&[
            ("Arrangements", how),
            (
                "Permutation p of the moderator test",
                fmt::p(perm.moderator_p)
                    .trim_start_matches("= ")
                    .to_string(),
            ),
            ("Refits without an answer", perm.failed.to_string()),
        ]);
        let rows: Vec<Vec<String>> = terms
            .iter()
            .zip(&perm.coefficient_p)
            .zip(&report.coefficients)
            .map(|((t, pp), c)| {
                vec![
                    t.clone(),
                    fmt::opt_p_cell(*pp),
                    fmt::p(c.contrast.test.p)
                        .trim_start_matches("= ")
                        .to_string(),
                ]
            })
            .collect();
        page.table(
            "Each coefficient: the permutation p beside the model's p",
            &["term", "permutation p", "model p"],
            &rows,
        );
    }
}

/// The model refitted without each study (`--loo`).
fn leave_one_out(page: &mut Page, report: &FitReport) {
    let terms = &report.model.terms;
    if let Some(loo) = &report.leave_one_out {
        page.h3("Leaving out one study at a time");
        let flagged: Vec<String> = loo
            .iter()
            .filter(|l| l.sign_changed || l.significance_changed)
            .map(|l| {
                let what = match (l.sign_changed, l.significance_changed) {
                    (true, true) => "a sign and the significance",
                    (true, false) => "a sign",
                    _ => "the significance",
                };
                format!("{} (changes {what})", l.study)
            })
            .collect();
        if flagged.is_empty() {
            page.p("No single study changes the sign of a coefficient or the significance of the test when left out.");
        } else {
            page.p(&format!(
                "Leaving out one of these studies changes the conclusion: {}.",
                flagged.join("; ")
            ));
        }
        let mut head: Vec<String> = vec!["study left out".into()];
        head.extend(terms.iter().cloned());
        head.extend(["τ²".into(), "I²".into(), "test p".into(), "flag".into()]);
        let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
        let rows: Vec<Vec<String>> = loo
            .iter()
            .filter(|l| loo.len() <= MAX_LISTED || l.sign_changed || l.significance_changed)
            .map(|l| {
                let mut r = vec![l.study.clone()];
                if l.coefficients.is_empty() {
                    r.extend(terms.iter().map(|_| "—".to_string()));
                } else {
                    r.extend(l.coefficients.iter().map(|c| num(*c)));
                }
                r.push(fmt::opt_num(l.tau2));
                r.push(l.i2.map(fmt::percent).unwrap_or_else(|| "—".into()));
                r.push(fmt::opt_p_cell(l.moderator_p.or(l.average_p)));
                r.push(match (l.sign_changed, l.significance_changed) {
                    (true, true) => "sign, significance".into(),
                    (true, false) => "sign".into(),
                    (false, true) => "significance".into(),
                    _ => l.problem.clone().unwrap_or_default(),
                });
                r
            })
            .collect();
        let caption = if loo.len() <= MAX_LISTED {
            "The model refitted without each study".to_string()
        } else {
            format!(
                "The flagged studies among {} refits (all are in {})",
                loo.len(),
                Flag::Table
            )
        };
        page.table(&caption, &head_ref, &rows);
    }
}

/// The influence measures of each study (`--influence`).
fn influence(page: &mut Page, report: &FitReport) {
    if let Some(inf) = &report.influence {
        page.h3("Influence of each study");
        if let Some(c) = &report.influence_cutoffs {
            page.p(&format!(
                "A study is marked influential when |DFFITS| > {}, Cook's distance > {} or its hat value > {} \
                 (cut-offs in common use, after Viechtbauer & Cheung 2010); a studentised residual beyond ±{} is \
                 noted but does not by itself make a study influential.",
                num(c.dffits),
                num(c.cooks_distance),
                num(c.hat),
                num(c.rstudent)
            ));
        }
        let rows: Vec<Vec<String>> = inf
            .iter()
            .filter(|i| inf.len() <= MAX_LISTED || i.influential)
            .map(|i| {
                vec![
                    i.study.clone(),
                    fmt::opt_num(i.rstudent),
                    fmt::opt_num(i.dffits),
                    fmt::opt_num(i.cooks_distance),
                    fmt::opt_num(i.cov_ratio),
                    num(i.hat),
                    fmt::opt_num(i.tau2_deleted),
                    fmt::opt_num(i.q_deleted),
                    if i.exceeded.is_empty() {
                        if i.influential {
                            "yes".into()
                        } else {
                            String::new()
                        }
                    } else {
                        i.exceeded
                            .iter()
                            .map(|c| c.id())
                            .collect::<Vec<_>>()
                            .join(", ")
                    },
                ]
            })
            .collect();
        page.table(
            &if inf.len() <= MAX_LISTED {
                "Influence measures (cut-offs exceeded in the last column)".to_string()
            } else {
                format!("The influential studies (all are in {})", Flag::Table)
            },
            &[
                "study",
                "studentised residual",
                "DFFITS",
                "Cook's distance",
                "covariance ratio",
                "hat",
                "τ² without it",
                "Q without it",
                "exceeded",
            ],
            &rows,
        );
    }
}

/// The funnel-asymmetry and rank tests and trim-and-fill (`--small-study`).
fn small_study(page: &mut Page, report: &FitReport, lv: &str) {
    if let Some(ss) = &report.small_study {
        page.h3("Small-study effects");
        let a = &ss.asymmetry_test;
        let r = &ss.rank_test;
        let t = &ss.trim_fill;
        page.facts(&[
            (
                "Regression test for funnel asymmetry",
                format!(
                    "slope on the standard error {} (SE {}), t({}) = {:.2}, p {}{}",
                    num(a.slope),
                    num(a.se),
                    fmt::df(a.df),
                    a.statistic,
                    fmt::p(a.p),
                    if a.with_moderators { ", with the moderators in the model" } else { "" }
                ),
            ),
            (
                "Rank correlation test",
                format!("Kendall's τ = {}, p {}", num(r.tau), fmt::p(r.p)),
            ),
            (
                "Trim-and-fill",
                format!(
                    "{} {} filled on the {}; average {} ({lv} CI {}) against {} from the observed studies",
                    t.filled,
                    if t.filled == 1 { "study" } else { "studies" },
                    t.side,
                    num(t.estimate),
                    fmt::interval(t.ci.ci_low, t.ci.ci_high),
                    num(t.estimate_observed)
                ),
            ),
            (
                "PET (effect on its standard error)",
                format!(
                    "intercept {} ({lv} CI {}, p {}), slope {} (SE {})",
                    num(ss.pet.intercept.estimate),
                    fmt::interval(ss.pet.intercept.ci.ci_low, ss.pet.intercept.ci.ci_high),
                    fmt::p(ss.pet.intercept.test.p),
                    num(ss.pet.slope.estimate),
                    num(ss.pet.slope.se)
                ),
            ),
            (
                "PEESE (effect on its variance)",
                format!(
                    "intercept {} ({lv} CI {}, p {}), slope {} (SE {})",
                    num(ss.peese.intercept.estimate),
                    fmt::interval(ss.peese.intercept.ci.ci_low, ss.peese.intercept.ci.ci_high),
                    fmt::p(ss.peese.intercept.test.p),
                    num(ss.peese.slope.estimate),
                    num(ss.peese.slope.se)
                ),
            ),
            (
                "Conditional PET-PEESE",
                format!(
                    "{} (the {} intercept)",
                    num(ss.conditional.estimate.estimate),
                    if ss.conditional.used == crate::result::PetPeeseChoice::Peese {
                        "PEESE"
                    } else {
                        "PET"
                    }
                ),
            ),
        ]);
        page.list(&ss.cautions);
    }
}

/// The average effect as studies are added (`--cumulative-by`).
fn cumulative(page: &mut Page, report: &FitReport, lv: &str) {
    if let Some(steps) = &report.cumulative {
        page.h3("Cumulative meta-analysis");
        let rows: Vec<Vec<String>> = steps
            .iter()
            .map(|c| {
                vec![
                    format!("+ {}", c.study),
                    at_text(&c.value),
                    c.k.to_string(),
                    fmt::opt_num(c.estimate),
                    match (c.ci.ci_low, c.ci.ci_high) {
                        (Some(a), Some(b)) => fmt::interval(a, b),
                        _ => "—".into(),
                    },
                    fmt::opt_num(c.tau2),
                    c.i2.map(fmt::percent).unwrap_or_else(|| "—".into()),
                ]
            })
            .collect();
        let order = report
            .cumulative_order
            .as_ref()
            .map(|o| format!(" by {} ({} order)", o.column, o.order))
            .unwrap_or_default();
        page.table(
            &format!("The average effect as studies are added{order}"),
            &[
                "study added",
                "value",
                "studies",
                "average",
                &format!("{lv} CI"),
                "τ²",
                "I²",
            ],
            &rows,
        );
    }
}
