//! The "Average effect and heterogeneity" section of the `pondus fit` page.

use super::page::Page;
use super::section::FitCtx;
use crate::result::Estimate;
use crate::support::format::{self as fmt, num};

/// An estimate's row, and its row on the reading scale when there is one.
fn estimate_rows(
    rows: &mut Vec<Vec<String>>,
    name: &str,
    e: &Estimate,
    reading_name: Option<&str>,
) {
    rows.push(vec![
        name.to_string(),
        num(e.mean.estimate),
        fmt::interval(e.mean.ci.ci_low, e.mean.ci.ci_high),
        fmt::pi_interval(e.mean.pi.pi_low, e.mean.pi.pi_high),
        num(e.mean.se),
    ]);
    if let (Some(r), Some(rn)) = (&e.reading, reading_name) {
        rows.push(vec![
            format!("{name}, as {rn}"),
            num(r.estimate),
            fmt::interval(r.ci.ci_low, r.ci.ci_high),
            fmt::pi_interval(r.pi.pi_low, r.pi.pi_high),
            "—".into(),
        ]);
    }
}

/// The average effect and the heterogeneity table.
pub(super) fn pooled(page: &mut Page, cx: &FitCtx) {
    let (report, lv, mods) = (cx.report, &cx.lv, &cx.mods);
    let reading = report.measure.reading_name.as_deref();
    let mut rows = Vec::new();
    estimate_rows(&mut rows, "average effect", &report.average, reading);
    page.table(
        "The average effect from the same estimator with no moderators",
        &[
            "",
            "estimate",
            &format!("{lv} CI"),
            &format!("{lv} prediction interval"),
            "SE",
        ],
        &rows,
    );
    if let Some(words) = crate::render::text::average_basis_text(report) {
        page.p(&format!("The average {words}"));
    }
    let h = &report.heterogeneity;
    let t = &report.tau2;
    let mut het = vec![
        vec![
            if mods.is_empty() {
                "τ² (between-study variance)"
            } else {
                "residual τ² (between-study variance left)"
            }
            .to_string(),
            num(t.estimate),
            match (t.ci.ci_low, t.ci.ci_high) {
                (Some(a), Some(b)) => format!("{lv} CI {}", fmt::interval(a, b)),
                _ => "—".into(),
            },
        ],
        vec!["τ (between-study SD)".into(), num(t.tau), String::new()],
        vec![
            "I² (share of variation beyond sampling error)".into(),
            fmt::percent(h.i2),
            format!("H² = {}", num(h.h2)),
        ],
        vec![
            "Cochran's Q".into(),
            num(h.q),
            format!("{} df, p {}", fmt::df(h.df), fmt::p(h.p)),
        ],
    ];
    if let Some(r2) = h.r2 {
        het.push(vec![
            "τ² explained by the moderators (R²)".into(),
            fmt::percent(r2),
            format!("τ² without them: {}", num(h.tau2_without_moderators)),
        ]);
    }
    page.table("Heterogeneity", &["quantity", "value", "detail"], &het);
}
