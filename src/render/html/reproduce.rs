//! The "Reproduce this analysis" section every page ends with: the tool's
//! version, the input's SHA-256, the seed and the command line.

use super::page::{esc, Page, Provenance};
use super::section::{FitCtx, PlanCtx, SitesCtx};
use std::fmt::Write as _;

/// The section's heading.
pub(super) const TITLE: &str = "Reproduce this analysis";

/// The facts and the command that made the page.
fn reproduce(page: &mut Page, prov: &Provenance) {
    let mut facts = vec![("Tool", format!("pondus {}", prov.version))];
    if let Some(h) = &prov.input_sha256 {
        facts.push(("Input SHA-256", h.clone()));
    }
    if let Some(s) = prov.seed {
        facts.push(("Random seed", s.to_string()));
    }
    page.facts(&facts);
    page.p("The command that made this page:");
    let _ = writeln!(page.out, "<pre><code>{}</code></pre>", esc(&prov.command));
}

/// The section of the `pondus fit` page.
pub(super) fn fit(page: &mut Page, cx: &FitCtx) {
    reproduce(page, cx.prov);
}

/// The section of the `pondus sites` page.
pub(super) fn sites(page: &mut Page, cx: &SitesCtx) {
    reproduce(page, cx.prov);
}

/// The section of the `pondus plan` page.
pub(super) fn plan(page: &mut Page, cx: &PlanCtx) {
    reproduce(page, cx.prov);
}
