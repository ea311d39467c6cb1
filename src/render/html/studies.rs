//! The "Studies" section of the `pondus fit` page: every study in the model.

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::support::format::{self as fmt, num};

/// Every study in the model, in input order.
pub(super) fn studies(page: &mut Page, cx: &FitCtx) {
    let (report, lv, mods) = (cx.report, &cx.lv, &cx.mods);
    let mut head: Vec<String> = [
        "study",
        report.input.row_heading(),
        "effect",
        "variance",
        &format!("{lv} CI"),
        "weight",
        "std. residual",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    head.extend(mods.iter().cloned());
    head.push("note".into());
    let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
    let rows: Vec<Vec<String>> = report
        .studies
        .iter()
        .map(|s| {
            let mut r = vec![
                s.study.clone(),
                s.line.to_string(),
                num(s.effect),
                num(s.variance),
                fmt::interval(s.ci.ci_low, s.ci.ci_high),
                format!("{:.1}%", s.weight),
                s.std_residual
                    .map(|z| format!("{z:.2}"))
                    .unwrap_or_else(|| "—".into()),
            ];
            r.extend(s.moderators.iter().map(at_text));
            r.push(s.note.clone().unwrap_or_default());
            r
        })
        .collect();
    page.table(
        "Every study in the model, in input order (effects on the analysis scale)",
        &head_ref,
        &rows,
    );
}
