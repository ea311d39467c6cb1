//! The "Spread of the true effects" section of the `pondus fit` page
//! (`--spread-by`): the answer in words, the coefficients of ln τ², τ at
//! telling values of each characteristic, the note and the cautions.

use super::page::Page;
use super::section::FitCtx;
use crate::render::spread::{answer_lines, spread_note, SPREAD_CAUTION};
use crate::support::format::{self as fmt, num};

/// Whether the report carries the location-scale model.
pub(super) fn has_spread(cx: &FitCtx) -> bool {
    cx.report.spread.is_some()
}

/// The answer, the coefficient table and the τ table.
pub(super) fn spread(page: &mut Page, cx: &FitCtx) {
    let r = cx.report;
    let Some(s) = &r.spread else {
        return;
    };
    for line in answer_lines(r, s) {
        page.p(&line);
    }
    let rows: Vec<Vec<String>> = s
        .coefficients
        .iter()
        .map(|c| {
            vec![
                c.term.clone(),
                num(c.estimate),
                num(c.se),
                fmt::interval(c.ci.ci_low, c.ci.ci_high),
                format!("{:.2}", c.statistic),
                fmt::p_cell(c.p),
            ]
        })
        .collect();
    page.table(
        &format!(
            "Coefficients of ln τ² (location-scale model by {}; Wald z); log-likelihood {} \
             (one τ²: {})",
            s.method.id().to_uppercase(),
            num(s.log_likelihood),
            num(s.log_likelihood_one_tau2)
        ),
        &["term", "estimate", "SE", &format!("{} CI", cx.lv), "z", "p"],
        &rows,
    );
    let rows: Vec<Vec<String>> = s
        .tau2_by
        .iter()
        .map(|t| {
            vec![
                t.term.clone(),
                match t.value {
                    Some(v) => format!("{} ({})", t.at, fmt::short(v)),
                    None => t.at.clone(),
                },
                num(t.tau2),
                num(t.tau),
                fmt::interval(t.ci.ci_low.sqrt(), t.ci.ci_high.sqrt()),
            ]
        })
        .collect();
    page.table(
        "τ² and τ at each level, or at the mean and ±1 SD, the other spread terms at their means",
        &["term", "at", "τ²", "τ", &format!("{} CI of τ", cx.lv)],
        &rows,
    );
    page.p(&spread_note());
    page.p(SPREAD_CAUTION);
}
