//! The plots of a page, as inline SVG with their accessible descriptions.

use super::page::Page;
use super::section::{FitCtx, SitesCtx};
use crate::render::figure::PageFigure;

/// Each figure, then the notes on the plots that could not be drawn.
fn figures(page: &mut Page, figures: &[PageFigure], notes: &[String]) {
    for (i, f) in figures.iter().enumerate() {
        page.figure(&format!("fig-{}-{i}", f.kind), f);
    }
    if !notes.is_empty() {
        page.list(notes);
    }
}

/// The plots of the `pondus fit` page.
pub(super) fn fit_plots(page: &mut Page, cx: &FitCtx) {
    figures(page, cx.figures, cx.figure_notes);
}

/// The plots of the site slopes on the `pondus sites` page.
pub(super) fn sites_plots(page: &mut Page, cx: &SitesCtx) {
    figures(page, cx.figures, cx.figure_notes);
}
