//! The "Moderators" section of the `pondus fit` page: the omnibus test,
//! the coefficients, the predicted effects and each level's estimates.

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::support::format::{self as fmt, num};

/// The omnibus test, the coefficients, the predictions and the levels.
pub(super) fn moderators(page: &mut Page, cx: &FitCtx) {
    omnibus(page, cx);
    coefficients(page, cx);
    predictions(page, cx);
    levels(page, cx);
}

/// The omnibus test of the moderators and what each moderator is.
fn omnibus(page: &mut Page, cx: &FitCtx) {
    let report = cx.report;
    match &report.moderator_test {
        Some(mt) => {
            let stat = match mt.df2 {
                Some(d2) => format!(
                    "F({}, {}) = {:.2}",
                    fmt::df(mt.df1),
                    fmt::df(d2),
                    mt.statistic
                ),
                None => format!("χ²({}) = {:.2}", fmt::df(mt.df1), mt.statistic),
            };
            page.facts(&[
                ("Omnibus test of the moderators", stat),
                ("p", fmt::p(mt.p).trim_start_matches("= ").to_string()),
                (
                    "Answer",
                    if mt.significant {
                        "associated"
                    } else {
                        "no clear association"
                    }
                    .into(),
                ),
            ]);
            let described: Vec<String> = report
                .model
                .moderators
                .iter()
                .map(|m| format!("{}: {}", m.name, describe_moderator(m)))
                .collect();
            page.list(&described);
        }
        None => page.p("This model has no moderators: it estimates the average effect only."),
    }
}

/// The coefficient table on the analysis scale.
fn coefficients(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, &cx.lv);
    let ratio = report.coefficients.iter().any(|c| c.ratio.is_some());
    let stat_name = if report.model.inference.uses_t() {
        "t"
    } else {
        "z"
    };
    let mut head = vec!["term", "estimate", "SE"];
    let ci_head = format!("{lv} CI");
    head.push(&ci_head);
    head.push(stat_name);
    head.push("p");
    if ratio {
        head.push("as ratio");
        head.push("ratio CI");
    }
    let rows: Vec<Vec<String>> = report
        .coefficients
        .iter()
        .map(|c| {
            // Under --robust the cluster-robust SE, interval, t and p.
            let s = crate::render::layout::Shown::of(c);
            let mut r = vec![
                c.term.clone(),
                num(c.contrast.estimate),
                num(s.se),
                fmt::interval(s.ci.ci_low, s.ci.ci_high),
                format!("{:.2}", s.statistic),
                fmt::p(s.p).trim_start_matches("= ").to_string(),
            ];
            if let Some(q) = &c.ratio {
                r.push(num(q.estimate));
                r.push(fmt::interval(s.ci.ci_low.exp(), s.ci.ci_high.exp()));
            } else if ratio {
                r.push("—".into());
                r.push("—".into());
            }
            r
        })
        .collect();
    let robust = report.coefficients.iter().any(|c| c.robust_se.is_some());
    let df_note = if robust {
        " — cluster-robust (CR2) standard errors, each term's t test and interval on its own \
         Satterthwaite degrees of freedom (model-based standard errors under Dependent effects)"
            .to_string()
    } else {
        report
            .coefficients
            .first()
            .and_then(|c| c.contrast.test.df)
            .map(|d| format!(" (t tests on {} degrees of freedom)", fmt::df(d)))
            .unwrap_or_default()
    };
    page.table(
        &format!("Coefficients on the analysis scale{df_note}"),
        &head,
        &rows,
    );
}

/// The predicted effects at given moderator values (`--predict`).
fn predictions(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, &cx.lv);
    if !report.predictions.is_empty() {
        page.h3("Predicted effects");
        let rows: Vec<Vec<String>> = report
            .predictions
            .iter()
            .map(|p| {
                let at: Vec<String> =
                    p.at.iter()
                        .map(|(k, v)| format!("{k} = {}", at_text(v)))
                        .collect();
                let mut at = at.join(", ");
                if !p.outside_range.is_empty() {
                    at.push_str(&format!(
                        " (outside the studies' range: {})",
                        p.outside_range.join(", ")
                    ));
                }
                vec![
                    at,
                    num(p.mean.estimate),
                    fmt::interval(p.mean.ci.ci_low, p.mean.ci.ci_high),
                    fmt::pi_interval(p.mean.pi.pi_low, p.mean.pi.pi_high),
                    num(p.mean.se),
                ]
            })
            .collect();
        page.table(
            "The expected mean effect at given moderator values, and the range for a new study's true effect",
            &["at", "estimate", &format!("{lv} CI"), &format!("{lv} prediction interval"), "SE"],
            &rows,
        );
    }
}

/// Each level of a categorical moderator: the model's prediction and a separate pooling.
fn levels(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, &cx.lv);
    for g in &report.subgroups {
        page.h3(&format!("Levels of {}", g.moderator));
        let rows: Vec<Vec<String>> = g
            .levels
            .iter()
            .map(|l| {
                vec![
                    l.level.clone(),
                    l.k.to_string(),
                    num(l.predicted.mean.estimate),
                    fmt::interval(l.predicted.mean.ci.ci_low, l.predicted.mean.ci.ci_high),
                    l.pooled
                        .as_ref()
                        .map(|e| {
                            format!(
                                "{} {}",
                                num(e.mean.estimate),
                                fmt::interval(e.mean.ci.ci_low, e.mean.ci.ci_high)
                            )
                        })
                        .unwrap_or_else(|| "—".into()),
                ]
            })
            .collect();
        let held = if g.held.is_empty() {
            String::new()
        } else {
            format!("; model predictions hold the other moderators {}", g.held)
        };
        page.table(
            &format!(
                "Each level: the model's prediction and a separate pooling of its studies{held}"
            ),
            &[
                "level",
                "studies",
                "model estimate",
                &format!("{lv} CI"),
                "separate pooling",
            ],
            &rows,
        );
    }
}

/// A moderator in words: numeric, or categorical with its levels.
fn describe_moderator(m: &crate::result::Moderator) -> String {
    use crate::result::ModeratorKind;
    match &m.kind {
        ModeratorKind::Numeric { centered_at, .. } => match centered_at {
            Some(c) => format!(
                "numeric, centred: {} (its mean over the included studies) subtracted before \
                 fitting, so the intercept is the effect at that value",
                crate::support::format::value(*c)
            ),
            None => "numeric".into(),
        },
        ModeratorKind::Categorical {
            levels, reference, ..
        } => format!(
            "categorical with {} levels ({}), compared with the reference level {}",
            levels.len(),
            levels.join(", "),
            reference
        ),
    }
}
