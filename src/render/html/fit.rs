//! The whole `pondus fit` report as one HTML page: the top (header,
//! question, answer, cautions), then the contents and the body, both drawn
//! from one table of sections.

use super::page::{Page, Provenance};
use super::section::{always, body, contents, FitCtx, Section};
use super::{
    answers, data, dependence, diagnostics, estimates, figures, interpretation, moderators,
    question, reproduce, sensitivity, spread, studies,
};
use crate::render::figure::PageFigure;
use crate::result::FitReport;

/// The sections after the contents, in order; the contents list the
/// present ones.
fn sections<'a>() -> [Section<FitCtx<'a>>; 13] {
    [
        Section {
            id: "data",
            title: "Data used",
            present: always,
            render: data::data,
        },
        Section {
            id: "obtained",
            title: "How each effect was obtained",
            present: |cx: &FitCtx| crate::render::obtained::has_block(cx.report),
            render: |page: &mut Page, cx: &FitCtx| {
                page.list(&crate::render::obtained::lines(cx.report));
            },
        },
        Section {
            id: "pooled",
            title: "Average effect and heterogeneity",
            present: always,
            render: estimates::pooled,
        },
        Section {
            id: "moderators",
            title: "Moderators",
            present: always,
            render: moderators::moderators,
        },
        Section {
            id: "spread",
            title: "Spread of the true effects",
            present: spread::has_spread,
            render: spread::spread,
        },
        Section {
            id: "dependence",
            title: "Dependent effects",
            present: dependence::has_dependence,
            render: dependence::dependence,
        },
        Section {
            id: "interpretation",
            title: "Reading the moderation",
            present: interpretation::has_interpretation,
            render: interpretation::interpretation,
        },
        Section {
            id: "answers",
            title: "Single studies and new ones",
            present: answers::has_answers,
            render: answers::answers,
        },
        Section {
            id: "robustness",
            title: "Robustness checks",
            present: diagnostics::has_diagnostics,
            render: diagnostics::robustness,
        },
        Section {
            id: "sensitivity",
            title: "Publication bias: sensitivity",
            present: sensitivity::has_sensitivity,
            render: sensitivity::sensitivity,
        },
        Section {
            id: "plots",
            title: "Plots",
            present: always,
            render: figures::fit_plots,
        },
        Section {
            id: "studies",
            title: "Studies",
            present: always,
            render: studies::studies,
        },
        Section {
            id: "reproduce",
            title: reproduce::TITLE,
            present: always,
            render: reproduce::fit,
        },
    ]
}

/// The whole `pondus fit` report as one HTML page.
pub fn fit_page(
    report: &FitReport,
    figures: &[PageFigure],
    figure_notes: &[String],
    prov: &Provenance,
) -> String {
    let cx = FitCtx::new(report, figures, figure_notes, prov);
    let mut page = question::start(&cx);
    let sections = sections();
    contents(&mut page, &cx, &sections);
    body(&mut page, &cx, &sections);
    page.finish(prov)
}
