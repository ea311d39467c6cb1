//! The "Single studies and new ones" section of the `pondus fit` page: the
//! chance that a new study's true effect exceeds a value (`--beyond`) and
//! each study's shrunken estimate (`--shrink`).

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::render::answers::{
    distribution_words, terms_text, BEYOND_CAUTION, MAX_LISTED_MODELS, MODEL_SET_CAUTION,
    SHRINK_NOTE,
};
use crate::support::format::{self as fmt, num};

/// Whether the report carries `--beyond` or `--shrink`.
pub(super) fn has_answers(cx: &FitCtx) -> bool {
    cx.report.beyond.is_some()
        || cx.report.model_set.is_some()
        || cx.report.studies.iter().any(|s| s.shrunken.is_some())
}

/// The probabilities and the shrunken estimates.
pub(super) fn answers(page: &mut Page, cx: &FitCtx) {
    let r = cx.report;
    if let Some(b) = &r.beyond {
        let value = match &r.measure.reading_name {
            Some(name) => format!("{} ({name})", fmt::short(b.value)),
            None => fmt::short(b.value),
        };
        page.h3(&format!(
            "Chance that a new study's true effect exceeds {value}"
        ));
        let mut rows = vec![vec![
            "the average effect".to_string(),
            fmt::percent(b.average),
        ]];
        for p in &b.at {
            let at: Vec<String> =
                p.at.iter()
                    .map(|(k, v)| format!("{k} = {}", at_text(v)))
                    .collect();
            rows.push(vec![
                format!("at {}", at.join(", ")),
                fmt::percent(p.probability),
            ]);
        }
        page.table(
            &format!(
                "From {}, as the prediction interval",
                distribution_words(b.df)
            ),
            &["where", "chance"],
            &rows,
        );
        page.p(BEYOND_CAUTION);
    }
    if r.studies.iter().any(|s| s.shrunken.is_some()) {
        let reading = r.measure.reading_name.as_deref();
        page.h3(&format!(
            "Shrunken estimates of each study's true effect{}",
            reading.map(|n| format!(" (as {n})")).unwrap_or_default()
        ));
        let rows: Vec<Vec<String>> = r
            .studies
            .iter()
            .filter_map(|s| {
                let sh = s.shrunken.as_ref()?;
                let (obs, est, ci) = match &sh.reading {
                    Some(rd) => (r.measure.reading_scale.apply(s.effect), rd.estimate, rd.ci),
                    None => (s.effect, sh.estimate, sh.ci),
                };
                Some(vec![
                    s.study.clone(),
                    num(obs),
                    num(est),
                    fmt::interval(ci.ci_low, ci.ci_high),
                    format!("{:.2}", sh.own_weight),
                ])
            })
            .collect();
        page.table(
            "Observed and shrunken (empirical-Bayes) estimates",
            &[
                "study",
                "observed",
                "shrunken",
                &format!("{} interval", cx.lv),
                "own weight",
            ],
            &rows,
        );
        page.p(SHRINK_NOTE);
    }
    model_set(page, cx);
}

/// `--all-subsets`: the ranked models, importance and averaged coefficients.
fn model_set(page: &mut Page, cx: &FitCtx) {
    let Some(ms) = &cx.report.model_set else {
        return;
    };
    page.h3("Moderator sets ranked by AICc");
    let rows: Vec<Vec<String>> = ms
        .models
        .iter()
        .take(MAX_LISTED_MODELS)
        .map(|m| {
            vec![
                terms_text(&m.terms),
                m.parameters.to_string(),
                num(m.log_likelihood),
                num(m.aicc),
                format!("{:.2}", m.delta),
                format!("{:.3}", m.weight),
            ]
        })
        .collect();
    let shown = if ms.models.len() > MAX_LISTED_MODELS {
        format!(
            "the best {MAX_LISTED_MODELS} of {} models (all in the JSON)",
            ms.models.len()
        )
    } else {
        format!("all {} models", ms.models.len())
    };
    page.table(
        &format!("Each fitted by maximum likelihood; {shown}"),
        &[
            "terms",
            "q",
            "log-likelihood",
            "AICc",
            "ΔAICc",
            "Akaike weight",
        ],
        &rows,
    );
    let rows: Vec<Vec<String>> = ms
        .importance
        .iter()
        .map(|i| vec![i.moderator.clone(), format!("{:.2}", i.importance)])
        .collect();
    page.table(
        "Importance: the summed Akaike weight of the models containing each candidate",
        &["candidate", "importance"],
        &rows,
    );
    let rows: Vec<Vec<String>> = ms
        .averaged
        .iter()
        .map(|a| vec![a.term.clone(), num(a.estimate), num(a.se)])
        .collect();
    page.table(
        "Model-averaged coefficients over all models (0 where a term is absent)",
        &["term", "estimate", "unconditional SE"],
        &rows,
    );
    page.p(MODEL_SET_CAUTION);
}
