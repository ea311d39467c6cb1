//! Terminal sections of the answers about single studies and new ones:
//! the chance that a new study's true effect exceeds a value (`--beyond`)
//! and the shrunken estimates (`--shrink`).

use super::layout::{clip, column_width, lpad, pad, width, wrap, Ctx, MAX_LISTED_STUDIES};
use crate::result::{AtValue, FitReport};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// "name = value, ..." of a prediction point.
fn at_text(at: &std::collections::BTreeMap<String, AtValue>) -> String {
    at.iter()
        .map(|(k, v)| match v {
            AtValue::Number(x) => format!("{k} = {}", fmt::value(*x)),
            AtValue::Level(l) => format!("{k} = {l}"),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The distribution behind the probabilities, in words.
pub fn distribution_words(df: Option<f64>) -> String {
    match df {
        Some(d) => format!("the t distribution on {} df", fmt::df(d)),
        None => "the normal distribution".into(),
    }
}

/// The caution printed under the probabilities.
pub const BEYOND_CAUTION: &str = "These chances are about the true effect of a new study like \
    these ones, read from the model's prediction interval; they assume that the studies are a \
    fair sample of the settings a new one would come from, and with few studies they are rough. \
    They are not a promise about any single programme, patient or pupil; decisions rest with the \
    responsible professionals and local guidance.";

/// `--beyond`: the probability at the average and at each `--at` point.
pub fn beyond(r: &FitReport, cx: &Ctx, o: &mut String) {
    let Some(b) = &r.beyond else {
        return;
    };
    let value = match &r.measure.reading_name {
        Some(name) => format!(
            "{} ({name}; {} as analysed)",
            fmt::short(b.value),
            num(b.value_analysis)
        ),
        None => fmt::short(b.value),
    };
    let _ = writeln!(o, "Chance that a new study's true effect exceeds {value}");
    let _ = writeln!(o, "  at the average effect: {}", fmt::percent(b.average));
    for p in &b.at {
        let _ = writeln!(
            o,
            "  at {}: {}",
            at_text(&p.at),
            fmt::percent(p.probability)
        );
    }
    let _ = writeln!(
        o,
        "  From {}, as the prediction interval.",
        distribution_words(b.df)
    );
    o.push_str(&wrap(BEYOND_CAUTION, "  ", cx.width - 2));
    let _ = writeln!(o);
}

/// `--shrink`: each study's observed and shrunken effect.
pub fn shrunken(r: &FitReport, cx: &Ctx, o: &mut String) {
    if !r.studies.iter().any(|s| s.shrunken.is_some()) {
        return;
    }
    if r.studies.len() > MAX_LISTED_STUDIES {
        let _ = writeln!(
            o,
            "Shrunken estimates: {} studies; write them all with {} FILE.csv or {} FILE.json\n",
            r.studies.len(),
            Flag::Table,
            Flag::Json
        );
        return;
    }
    let reading = r.measure.reading_name.as_deref();
    let _ = writeln!(
        o,
        "Shrunken estimates of each study's true effect{}",
        reading.map(|n| format!(" (as {n})")).unwrap_or_default()
    );
    let lw = column_width(r.studies.iter().map(|s| width(&s.study)), 5, 30);
    let _ = writeln!(
        o,
        "  {}  {}  {}  {}  {}",
        pad("study", lw),
        lpad("observed", 10),
        lpad("shrunken", 10),
        pad(&format!("{} interval", cx.level_pct), 20),
        lpad("own weight", 10)
    );
    for s in r.studies.iter() {
        let Some(sh) = &s.shrunken else {
            continue;
        };
        let (obs, est, ci) = match &sh.reading {
            Some(rd) => (r.measure.reading_scale.apply(s.effect), rd.estimate, rd.ci),
            None => (s.effect, sh.estimate, sh.ci),
        };
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}",
            pad(&clip(&s.study, lw), lw),
            lpad(&num(obs), 10),
            lpad(&num(est), 10),
            pad(&fmt::interval(ci.ci_low, ci.ci_high), 20),
            lpad(&format!("{:.2}", sh.own_weight), 10)
        );
    }
    o.push_str(&wrap(SHRINK_NOTE, "  ", cx.width - 2));
    let _ = writeln!(o);
}

/// The note printed under the shrunken estimates.
pub const SHRINK_NOTE: &str = "Each study's own result is pulled toward the model's fitted value; \
    the own weight τ²/(τ² + v) is the share of the observed result kept, so small, noisy studies \
    move most. The intervals add the uncertainty of the fitted value but not that of τ². \
    Differences between shrunken estimates are still uncertain: compare intervals, not ranks.";

/// The most models the terminal lists (the JSON has them all).
pub const MAX_LISTED_MODELS: usize = 10;

/// The caution printed under the ranking.
pub const MODEL_SET_CAUTION: &str = "Ranking many candidate moderators on few studies is \
    exploratory: the best-ranked set may not be best in new data, and across-study associations \
    are observational. Importance is a summed weight of evidence, not a test and not a \
    probability that a moderator matters; model-averaged coefficients shrink terms toward 0 by \
    the weight of the models without them.";

/// The terms of a model in words.
pub fn terms_text(terms: &[String]) -> String {
    if terms.is_empty() {
        "(no moderators)".into()
    } else {
        terms.join(" + ")
    }
}

/// `--all-subsets`: the ranked models, importance and averaged coefficients.
pub fn model_set(r: &FitReport, cx: &Ctx, o: &mut String) {
    let Some(ms) = &r.model_set else {
        return;
    };
    let _ = writeln!(
        o,
        "Moderator sets ranked by AICc ({} models, each fitted by ML)",
        ms.models.len()
    );
    let tw = ms
        .models
        .iter()
        .take(MAX_LISTED_MODELS)
        .map(|m| width(&terms_text(&m.terms)))
        .max()
        .unwrap_or(5)
        .clamp(5, 40);
    let _ = writeln!(
        o,
        "  {}  {}  {}  {}  {}  {}",
        pad("terms", tw),
        lpad("q", 3),
        lpad("log-lik", 10),
        lpad("AICc", 10),
        lpad("ΔAICc", 8),
        lpad("weight", 7)
    );
    for m in ms.models.iter().take(MAX_LISTED_MODELS) {
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}",
            pad(&clip(&terms_text(&m.terms), tw), tw),
            lpad(&m.parameters.to_string(), 3),
            lpad(&num(m.log_likelihood), 10),
            lpad(&num(m.aicc), 10),
            lpad(&format!("{:.2}", m.delta), 8),
            lpad(&format!("{:.3}", m.weight), 7)
        );
    }
    if ms.models.len() > MAX_LISTED_MODELS {
        let _ = writeln!(
            o,
            "  ... {} more in {} FILE.json",
            ms.models.len() - MAX_LISTED_MODELS,
            Flag::Json
        );
    }
    let imp: Vec<String> = ms
        .importance
        .iter()
        .map(|i| format!("{} {:.2}", i.moderator, i.importance))
        .collect();
    let _ = writeln!(o, "  Importance (summed Akaike weight): {}", imp.join(", "));
    let _ = writeln!(o, "  Model-averaged coefficients (unconditional SE):");
    let cw = column_width(ms.averaged.iter().map(|a| width(&a.term)), 5, 30);
    for a in &ms.averaged {
        let _ = writeln!(
            o,
            "    {}  {}  (SE {})",
            pad(&clip(&a.term, cw), cw),
            lpad(&num(a.estimate), 10),
            num(a.se)
        );
    }
    o.push_str(&wrap(MODEL_SET_CAUTION, "  ", cx.width - 2));
    let _ = writeln!(o);
}
