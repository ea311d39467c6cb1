//! The top of the `pondus fit` page, before its contents: the header, the
//! question in words, the answer, and what to read with care.

use super::page::{esc, words_and, Page};
use super::section::FitCtx;
use crate::support::format::{self as fmt, num};

/// The page's title: the question the analysis answers.
fn title(cx: &FitCtx) -> String {
    let mods = &cx.mods;
    if mods.is_empty() {
        format!("Pooled effect across {} studies", cx.report.k)
    } else {
        format!(
            "{} {} change the effect?",
            if mods.len() == 1 { "Does" } else { "Do" },
            words_and(mods)
        )
    }
}

/// A new page with the header, the question, the answer and the cautions.
pub(super) fn start(cx: &FitCtx) -> Page {
    let report = cx.report;
    let (mods, lv) = (&cx.mods, &cx.lv);
    let title = title(cx);
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.header(
        &title,
        &format!(
            "{} · {} studies · {} · made by pondus {}",
            esc(&report.measure.description),
            report.k,
            esc(&report.input.file),
            esc(&cx.prov.version)
        ),
    );

    page.h2("question", "The question");
    let question = if mods.is_empty() {
        format!(
            "What is the average effect — {} — across these {} studies, how much do their true \
             effects differ, and what effect should a new study expect?",
            report.measure.description, report.k
        )
    } else {
        format!(
            "Across these {} studies, is the effect — {} — associated with {}? And how much \
             variation between studies is left once the moderators are taken into account?",
            report.k,
            report.measure.description,
            words_and(mods)
        )
    };
    page.p(&question);
    let answer = match &report.moderator_test {
        Some(t) => t.answer.clone(),
        None => {
            let a = &report.average;
            let new_study = if a.mean.pi.pi_low.is_nan() && a.mean.pi.pi_high.is_nan() {
                "there are too few studies for a prediction interval for a new study \
                 (k − p − 1 < 1)"
                    .to_string()
            } else {
                format!(
                    "a new study's true effect is expected in {} ({lv} prediction interval)",
                    fmt::pi_interval(a.mean.pi.pi_low, a.mean.pi.pi_high)
                )
            };
            format!(
                "The average effect is {} ({lv} CI {}); {new_study}.",
                num(a.mean.estimate),
                fmt::interval(a.mean.ci.ci_low, a.mean.ci.ci_high),
            )
        }
    };
    page.answer(&answer);
    if !report.cautions.is_empty() || !report.warnings.is_empty() {
        let mut items = report.warnings.clone();
        items.extend(report.cautions.iter().cloned());
        page.care(&items);
    }
    page
}
