//! The "Robustness checks" section of the `pondus fit` page: the
//! permutation test, leave-one-out, influence, small-study effects and the
//! cumulative meta-analysis — each only when it was run.

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::render::diagnostics::{average_header, changes_text, flags_text, influence_rules_text};
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
    let has_mods = terms.len() > 1;
    let Some(loo) = &report.leave_one_out else {
        return;
    };
    page.h3("Leaving out one study at a time");
    let flagged: Vec<String> = loo
        .iter()
        .filter(|l| !l.changes.is_empty())
        .map(|l| format!("{} ({})", l.study, changes_text(&l.changes)))
        .collect();
    let rule = if has_mods {
        "the moderator test crossing α, or a moderator coefficient whose interval excluded 0 no \
         longer doing so, or the reverse"
    } else {
        "the average effect's interval ceasing to exclude 0, or starting to"
    };
    if flagged.is_empty() {
        page.p(&format!(
            "No single study changes a conclusion when left out ({rule}). A change of sign of a \
             coefficient that its interval does not separate from 0 is not counted."
        ));
    } else {
        page.p(&format!(
            "Leaving out one of these studies changes a conclusion ({rule}; “lost”: it no longer \
             holds without the study, “gained”: it holds only without it): {}.",
            flagged.join("; ")
        ));
    }
    let mut head: Vec<String> = vec!["study left out".into(), average_header(report)];
    head.extend(terms.iter().cloned());
    head.extend([
        "τ²".into(),
        "I²".into(),
        "test p".into(),
        "conclusion changed".into(),
    ]);
    let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
    let rows: Vec<Vec<String>> = loo
        .iter()
        .filter(|l| loo.len() <= MAX_LISTED || !l.changes.is_empty())
        .map(|l| {
            let mut r = vec![
                l.study.clone(),
                fmt::opt_num(l.average_reading.or(l.average)),
            ];
            if l.coefficients.is_empty() {
                r.extend(terms.iter().map(|_| "—".to_string()));
            } else {
                r.extend(l.coefficients.iter().map(|c| num(*c)));
            }
            r.push(fmt::opt_num(l.tau2));
            r.push(l.i2.map(fmt::percent).unwrap_or_else(|| "—".into()));
            r.push(fmt::opt_p_cell(l.moderator_p.or(l.average_p)));
            r.push(match &l.problem {
                Some(why) => why.clone(),
                None => changes_text(&l.changes),
            });
            r
        })
        .collect();
    let caption = if loo.len() <= MAX_LISTED {
        "The model refitted without each study (the average: the model without moderators on \
         the same studies, on the reading scale)"
            .to_string()
    } else {
        format!(
            "The flagged studies among {} refits (all are in {})",
            loo.len(),
            Flag::Table
        )
    };
    page.table(&caption, &head_ref, &rows);
}

/// The influence view (`--influence`).
fn influence(page: &mut Page, report: &FitReport) {
    let (Some(inf), Some(rules)) = (&report.influence, &report.influence_rules) else {
        return;
    };
    let terms = &report.model.terms;
    let has_mods = terms.len() > 1;
    page.h3("How far each study moves the answer");
    let mut with = format!(
        "With every study the average is {}",
        num(rules.average_reading.unwrap_or(rules.average))
    );
    if let Some(name) = &report.measure.reading_name {
        with.push_str(&format!(" (as {name})"));
    }
    if let Some(p) = rules.moderator_p {
        with.push_str(&format!(" and the moderator test's p {}", fmt::p(p)));
    }
    page.p(&format!(
        "{with}. Each row says what changes when that study is left out: the average (from the \
         model without moderators on the same studies, on the reading scale), each coefficient \
         (in its standard errors) and the moderator test's p; then how unusual the study is \
         (its deleted residual: its effect against the model fitted without it) and how much \
         pull it has (its leverage)."
    ));
    if let Some(t) = influence_rules_text(report) {
        page.p(&t);
    }
    let mut head: Vec<String> = vec!["study".into(), format!("Δ {}", average_header(report))];
    let first = usize::from(has_mods);
    if has_mods {
        head.extend(terms.iter().skip(1).map(|t| format!("Δ {t} (SE)")));
    } else {
        head.push("Δ average (SE)".into());
    }
    if has_mods {
        head.push("moderator test p without it".into());
    }
    head.extend(["deleted residual".into(), "leverage".into(), "flags".into()]);
    let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
    let rows: Vec<Vec<String>> = inf
        .iter()
        .filter(|i| inf.len() <= MAX_LISTED || !i.flags.is_empty())
        .map(|i| {
            let mut r = vec![
                i.study.clone(),
                fmt::opt_num(i.average_shift_reading.or(i.average_shift)),
            ];
            for j in first..terms.len() {
                r.push(
                    i.coefficient_shifts_se
                        .get(j)
                        .map(|x| fmt::fixed(*x, 2))
                        .unwrap_or_else(|| "—".into()),
                );
            }
            if has_mods {
                r.push(fmt::opt_p_cell(i.moderator_p_without));
            }
            r.push(
                i.deleted_residual
                    .map(|x| fmt::fixed(x, 2))
                    .unwrap_or_else(|| "—".into()),
            );
            r.push(fmt::fixed(i.leverage, 3));
            let mut flags = flags_text(&i.flags, has_mods);
            if !i.changes.is_empty() {
                flags.push_str(&format!(" ({})", changes_text(&i.changes)));
            }
            if let Some(why) = &i.problem {
                flags = format!("no refit: {why}");
            }
            r.push(flags);
            r
        })
        .collect();
    page.table(
        &if inf.len() <= MAX_LISTED {
            "Each study's influence (Δ: the change when it is left out)".to_string()
        } else {
            format!("The flagged studies (all are in {})", Flag::Table)
        },
        &head_ref,
        &rows,
    );
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
