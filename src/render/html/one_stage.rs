//! The one-stage model on the `pondus sites` page: the model, its answers
//! in words beside the two-stage ones, the fixed effects and the variances.

use super::page::Page;
use super::section::SitesCtx;
use crate::result::{ProfiledVariance, ZTerm};
use crate::support::format::{self as fmt, num};

fn row(label: &str, t: &ZTerm) -> Vec<String> {
    vec![
        label.to_string(),
        num(t.estimate),
        num(t.se),
        fmt::interval(t.ci.ci_low, t.ci.ci_high),
        fmt::fixed(t.statistic, 2),
        fmt::p(t.p).trim_start_matches("= ").to_string(),
    ]
}

fn variance(v: &ProfiledVariance) -> String {
    format!(
        "{} (profile-likelihood CI {})",
        num(v.estimate),
        fmt::interval(v.ci.ci_low, v.ci.ci_high)
    )
}

/// The section's body.
pub(super) fn one_stage(page: &mut Page, cx: &SitesCtx) {
    let Some(os) = &cx.report.one_stage else {
        return;
    };
    for a in &os.answers {
        page.answer(a);
    }
    page.facts(&[
        ("Model", os.model.clone()),
        ("Data", format!("{} sites, {} rows", os.sites, os.rows)),
        ("τ² (site slopes)", variance(&os.variance.slope)),
        ("σ² (residual)", variance(&os.variance.residual)),
    ]);
    let mut rows = vec![row("b1 slope", &os.slope)];
    for (label, t) in [
        ("b2 w within sites", &os.w_within),
        ("b3 within-site interaction", &os.within_interaction),
        ("b4 across-site interaction", &os.across_interaction),
    ] {
        if let Some(t) = t {
            rows.push(row(label, t));
        }
    }
    for c in &os.covariates {
        rows.push(row(&format!("covariate {}", c.name), &c.term));
    }
    for c in &os.characteristics {
        rows.push(row(&format!("slope × {}", c.name), &c.term));
    }
    let lv = fmt::level_pct(os.level);
    page.table(
        "Fixed effects (z tests; SEs at the REML variances)",
        &["term", "estimate", "SE", &format!("{lv} CI"), "z", "p"],
        &rows,
    );
    if !os.notes.is_empty() {
        page.h3("Notes");
        page.list(&os.notes);
    }
    page.h3("Read the one-stage model with care");
    page.list(&os.cautions);
}
