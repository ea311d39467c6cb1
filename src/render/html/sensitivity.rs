//! The "Publication bias: sensitivity" section of the `pondus fit` page:
//! the selection model (`--selection`) and the table of the average effect
//! and each moderator coefficient under every adjustment, with the plain
//! answer and the cautions.

use super::page::Page;
use super::section::FitCtx;
use crate::result::{SensitivityRow, Verdict};
use crate::support::format::{self as fmt, num};

/// Whether the report carries the sensitivity view.
pub(super) fn has_sensitivity(cx: &FitCtx) -> bool {
    cx.report.sensitivity.is_some()
}

fn verdict_words(v: Option<Verdict>) -> &'static str {
    match v {
        None => "",
        Some(Verdict::Holds) => "holds",
        Some(Verdict::Fades) => "interval includes no effect",
        Some(Verdict::Reverses) => "changes sign",
        Some(Verdict::Appears) => "differs from no effect only here",
        Some(Verdict::NoneEither) => "still includes no effect",
    }
}

fn cells(row: &SensitivityRow) -> Vec<String> {
    let shown = match (row.reading, row.estimate, row.ci.ci_low, row.ci.ci_high) {
        (Some(r), ..) => Some((r.estimate, r.ci.ci_low, r.ci.ci_high)),
        (None, Some(e), Some(a), Some(b)) => Some((e, a, b)),
        _ => None,
    };
    match shown {
        Some((e, a, b)) => vec![
            row.adjustment.label().to_string(),
            num(e),
            fmt::interval(a, b),
            fmt::opt_p_cell(row.p),
            verdict_words(row.verdict).to_string(),
        ],
        None => vec![
            row.adjustment.label().to_string(),
            "—".into(),
            "—".into(),
            "—".into(),
            row.missing.clone().unwrap_or_default(),
        ],
    }
}

/// The selection model and the side-by-side table.
pub(super) fn sensitivity(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, cx.lv.as_str());
    let Some(view) = &report.sensitivity else {
        return;
    };
    page.answer(&view.answer.join(" "));
    for q in &view.quantities {
        let scale = match (
            &report.measure.reading_name,
            q.rows[0].reading.is_some(),
            q.moderator,
        ) {
            (Some(n), true, false) => format!(" (as {n})"),
            (Some(_), true, true) => " (as a ratio: the factor per unit)".into(),
            _ => String::new(),
        };
        let rows: Vec<Vec<String>> = q.rows.iter().map(cells).collect();
        page.table(
            &format!("{}{scale}", q.quantity),
            &[
                "adjustment",
                "estimate",
                &format!("{lv} CI"),
                "p",
                "against the fit",
            ],
            &rows,
        );
    }
    if let Some(s) = &report.selection {
        page.h3("Selection model");
        let rows: Vec<Vec<String>> = s
            .weights
            .iter()
            .enumerate()
            .map(|(m, w)| {
                let range = if m == 0 {
                    format!("p < {}", fmt::typed(w.to))
                } else if w.to >= 1.0 {
                    format!("p ≥ {}", fmt::typed(w.from))
                } else {
                    format!("{} ≤ p < {}", fmt::typed(w.from), fmt::typed(w.to))
                };
                vec![
                    range,
                    w.studies.to_string(),
                    num(w.estimate),
                    match (w.ci_low, w.ci_high) {
                        (Some(a), Some(b)) => fmt::interval(a, b),
                        _ => "reference".into(),
                    },
                ]
            })
            .collect();
        page.table(
            &format!(
                "Weights of the one-sided p-value intervals (favouring {} effects)",
                s.favoured
            ),
            &["interval", "studies", "weight", &format!("{lv} CI")],
            &rows,
        );
        page.facts(&[
            (
                "τ² (maximum likelihood)",
                format!("{} (SE {})", num(s.tau2), fmt::opt_num(s.tau2_se)),
            ),
            (
                "Likelihood-ratio test of selection",
                format!(
                    "χ²({}) = {:.2}, p {}",
                    s.test.df,
                    s.test.statistic,
                    fmt::p(s.test.p)
                ),
            ),
        ]);
        let coef: Vec<Vec<String>> = s
            .coefficients
            .iter()
            .map(|c| {
                vec![
                    c.term.clone(),
                    num(c.contrast.estimate),
                    num(c.contrast.se),
                    fmt::interval(c.contrast.ci.ci_low, c.contrast.ci.ci_high),
                    fmt::p_cell(c.contrast.test.p),
                ]
            })
            .collect();
        page.table(
            "Coefficients of the selection model (z tests)",
            &["term", "estimate", "SE", &format!("{lv} CI"), "p"],
            &coef,
        );
    }
    page.list(&view.cautions);
}
