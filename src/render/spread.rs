//! The spread of the true effects in words and in a table (`--spread-by`):
//! does the spread differ with each characteristic, and by how much on the
//! τ scale; shared by the terminal report and the HTML page.

use super::layout::{column_width, lpad, pad, width, Ctx};
use crate::result::{FitReport, Spread, SpreadCoefficient, Tau2At};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// The cautions printed under the spread answer.
pub const SPREAD_CAUTION: &str = "A difference in spread is an association across studies: \
    studies that differ in this characteristic differ in other ways too, so it is observational, \
    not a cause. The spread is estimated from few studies per level or value, so its intervals \
    are wide and the model is best read as exploratory; each spread term and each moderator is \
    a further test (multiple testing). Decisions about programmes, patients or pupils rest with \
    the responsible professionals and local guidance.";

/// What the coefficients come from, under the location-scale model.
pub fn spread_note() -> String {
    format!(
        "With {} the coefficients of the mean (and their Wald z tests) come from the \
         location-scale model: standard errors from (X'WX)⁻¹ at each study's own fitted τ², \
         weights 1/(v + τ_i²). The heterogeneity figures describe the model with one τ² for all \
         studies.",
        Flag::SpreadBy
    )
}

/// The answer in words: the LR test, then each characteristic's τ at its
/// levels (or at the mean ∓ 1 SD) and the ratio of τ.
pub fn answer_lines(r: &FitReport, s: &Spread) -> Vec<String> {
    let alpha = 1.0 - r.model.level;
    let lv = format!("{}%", (r.model.level * 100.0 * 1e6).round() / 1e6);
    let names = s.spread_by.join(", ");
    let test = format!(
        "the likelihood-ratio test against one τ² for all studies gives chi-square({}) = {:.2}, p \
         {}",
        s.test.df,
        s.test.statistic,
        fmt::p(s.test.p)
    );
    let mut out = vec![if s.test.p < alpha {
        format!(
            "Yes: the spread of true effects differs with {names} at α = {}: {test}.",
            fmt::short(alpha)
        )
    } else {
        format!(
            "No clear evidence at α = {} that the spread of true effects differs with {names}: \
             {test}. This is not evidence of equal spread: with {} studies the test has little \
             power.",
            fmt::short(alpha),
            r.k
        )
    }];
    for name in &s.spread_by {
        let at: Vec<&Tau2At> = s.tau2_by.iter().filter(|t| &t.term == name).collect();
        let levels: Vec<String> = at
            .iter()
            .map(|t| {
                let where_ = match t.value {
                    Some(v) => format!("{} ({})", t.at, fmt::short(v)),
                    None => t.at.clone(),
                };
                format!(
                    "{} at {where_} ({lv} CI {})",
                    num(t.tau),
                    fmt::interval(t.ci.ci_low.sqrt(), t.ci.ci_high.sqrt())
                )
            })
            .collect();
        let mut line = format!(
            "{name}: τ (the SD of true effects) is {}",
            levels.join(", ")
        );
        for c in s.coefficients.iter().skip(1) {
            if let Some(ratio) = ratio_words(c, &s.coefficients, name, &at, &lv) {
                line.push_str("; ");
                line.push_str(&ratio);
            }
        }
        line.push('.');
        out.push(line);
    }
    out
}

/// "τ at b is 2.75 times τ at a" (a level against the reference level, the
/// one without a coefficient of its own), or the factor by which τ changes
/// per SD of a numeric term; None when `c` is not a term of `name`.
///
/// # Formula
/// τ ratio = exp(α_j/2) (per SD: exp(α_j·SD/2)), its interval from α_j's.
fn ratio_words(
    c: &SpreadCoefficient,
    coefs: &[SpreadCoefficient],
    name: &str,
    at: &[&Tau2At],
    lv: &str,
) -> Option<String> {
    let ratio = |x: f64| format!("{:.2}", (x / 2.0).exp());
    if let Some(level) = c.term.strip_prefix(&format!("{name}=")) {
        let reference = at
            .iter()
            .find(|t| !coefs.iter().any(|c| c.term == format!("{name}={}", t.at)))?;
        return Some(format!(
            "τ at {level} is {} times τ at {} ({lv} CI {} to {})",
            ratio(c.estimate),
            reference.at,
            ratio(c.ci.ci_low),
            ratio(c.ci.ci_high)
        ));
    }
    if c.term == name {
        let mean = at.iter().find(|t| t.at == "mean")?.value?;
        let hi = at.iter().find(|t| t.at == "mean+1sd")?.value?;
        let sd = hi - mean;
        return Some(format!(
            "per SD of {name} ({}) τ is multiplied by {} ({lv} CI {} to {})",
            fmt::short(sd),
            ratio(c.estimate * sd),
            ratio(c.ci.ci_low * sd),
            ratio(c.ci.ci_high * sd)
        ));
    }
    None
}

/// The terminal section: the answer, the coefficient table, the note and cautions.
pub fn section(r: &FitReport, cx: &Ctx, o: &mut String) {
    let Some(s) = &r.spread else {
        return;
    };
    let _ = writeln!(
        o,
        "Does the spread of true effects differ with {}?",
        s.spread_by.join(", ")
    );
    for line in answer_lines(r, s) {
        o.push_str(&cx.para(&line));
    }
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "Spread coefficients (ln τ², location-scale model by {}; Wald z)",
        s.method.id().to_uppercase()
    );
    let tw = column_width(s.coefficients.iter().map(|c| width(&c.term)), 9, 28);
    let _ = writeln!(
        o,
        "  {}  {}  {}  {}  {}  p",
        pad("term", tw),
        lpad("estimate", 9),
        lpad("SE", 8),
        pad(&format!("{} CI", cx.level_pct), 22),
        lpad("z", 6)
    );
    for c in &s.coefficients {
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}",
            pad(&c.term, tw),
            lpad(&num(c.estimate), 9),
            lpad(&num(c.se), 8),
            pad(&fmt::interval(c.ci.ci_low, c.ci.ci_high), 22),
            lpad(&format!("{:.2}", c.statistic), 6),
            fmt::p_cell(c.p)
        );
    }
    let _ = writeln!(
        o,
        "  log-likelihood {} (one τ²: {})",
        num(s.log_likelihood),
        num(s.log_likelihood_one_tau2)
    );
    o.push_str(&cx.para(&spread_note()));
    o.push_str(&cx.para(SPREAD_CAUTION));
    let _ = writeln!(o);
}
