//! What the pages are made of: a section (its anchor, its heading, whether
//! the result carries it, and its renderer), the list of contents and the
//! body drawn from one table of sections, so the two cannot drift apart;
//! and what each page's sections are given.

use super::page::{esc, Page, Provenance};
use crate::render::figure::PageFigure;
use crate::result::plan::PlanReport;
use crate::result::{FitReport, SitesReport};
use crate::support::format as fmt;
use std::fmt::Write as _;

/// One `<h2>` section of a page.
pub(super) struct Section<C> {
    /// The anchor (`id` of the heading).
    pub id: &'static str,
    /// The heading, also its entry in the contents.
    pub title: &'static str,
    /// Whether the result carries this section.
    pub present: fn(&C) -> bool,
    /// Writes the section after its heading.
    pub render: fn(&mut Page, &C),
}

/// The presence test of a section every result carries.
pub(super) fn always<C>(_: &C) -> bool {
    true
}

/// The list of contents: one link per present section.
pub(super) fn contents<C>(page: &mut Page, cx: &C, sections: &[Section<C>]) {
    page.raw("<nav aria-label=\"Contents\"><ol>");
    for s in sections.iter().filter(|s| (s.present)(cx)) {
        let _ = write!(
            page.out,
            "<li><a href=\"#{}\">{}</a></li>",
            s.id,
            esc(s.title)
        );
    }
    page.raw("</ol></nav>\n");
}

/// The body: each present section's heading and content, in table order.
pub(super) fn body<C>(page: &mut Page, cx: &C, sections: &[Section<C>]) {
    for s in sections.iter().filter(|s| (s.present)(cx)) {
        page.h2(s.id, s.title);
        (s.render)(page, cx);
    }
}

/// What the sections of the `pondus fit` page are given.
pub(super) struct FitCtx<'a> {
    /// The result.
    pub report: &'a FitReport,
    /// The plots, as inline SVG.
    pub figures: &'a [PageFigure],
    /// Why a plot is missing, one note each.
    pub figure_notes: &'a [String],
    /// Where the result came from.
    pub prov: &'a Provenance,
    /// The confidence level as a percentage.
    pub lv: String,
    /// The moderators' names.
    pub mods: Vec<String>,
}

impl<'a> FitCtx<'a> {
    /// The context of `report`'s page.
    pub fn new(
        report: &'a FitReport,
        figures: &'a [PageFigure],
        figure_notes: &'a [String],
        prov: &'a Provenance,
    ) -> FitCtx<'a> {
        FitCtx {
            report,
            figures,
            figure_notes,
            prov,
            lv: fmt::level_pct(report.model.level),
            mods: report
                .model
                .moderators
                .iter()
                .map(|m| m.name.clone())
                .collect(),
        }
    }
}

/// What the sections of the `pondus sites` page are given.
pub(super) struct SitesCtx<'a> {
    /// The result.
    pub report: &'a SitesReport,
    /// The plots of the site slopes, as inline SVG.
    pub figures: &'a [PageFigure],
    /// Why a plot is missing, one note each.
    pub figure_notes: &'a [String],
    /// Where the result came from.
    pub prov: &'a Provenance,
}

/// What the sections of the `pondus plan` page are given.
pub(super) struct PlanCtx<'a> {
    /// The result.
    pub report: &'a PlanReport,
    /// The power curve, as inline SVG.
    pub figure: Option<&'a PageFigure>,
    /// Where the result came from.
    pub prov: &'a Provenance,
}
