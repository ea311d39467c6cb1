//! The terminal report of `fit`: plain words, aligned columns, no colour
//! (the binary may colour the headings afterwards). The common look of the
//! terminal reports is described in [`super::layout`].

use super::layout::{
    bullets, clip, column_width, fact, lpad, pad, title, trim_lines, width, Ctx, Section, Shown,
    MAX_LISTED_STUDIES, TEXT_WIDTH,
};
use super::{answers, diagnostics, interpret, multilevel, sensitivity, spread};
use crate::effect::Measure;
use crate::result::{AtValue, Estimate, FitReport, MeasureId, ModeratorKind, Reading};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;
use std::io::Write;

fn reading_line(r: &Reading, name: &str) -> String {
    format!(
        "as {name}: {}  CI {}  new study {}",
        num(r.estimate),
        fmt::interval(r.ci.ci_low, r.ci.ci_high),
        fmt::pi_interval(r.pi.pi_low, r.pi.pi_high)
    )
}

fn estimate_lines(out: &mut String, e: &Estimate, level_pct: &str, reading_name: Option<&str>) {
    let _ = writeln!(
        out,
        "  {}  ({level_pct} CI {}, SE {})",
        num(e.mean.estimate),
        fmt::interval(e.mean.ci.ci_low, e.mean.ci.ci_high),
        num(e.mean.se)
    );
    if e.mean.pi.pi_low.is_nan() && e.mean.pi.pi_high.is_nan() {
        let _ = writeln!(
            out,
            "  no prediction interval for a new study: too few studies for its t distribution \
             (k − p − 1 < 1)"
        );
    } else {
        let _ = writeln!(
            out,
            "  a new study's true effect is expected in {} ({level_pct} prediction interval)",
            fmt::pi_interval(e.mean.pi.pi_low, e.mean.pi.pi_high)
        );
    }
    if let (Some(r), Some(name)) = (&e.reading, reading_name) {
        let _ = writeln!(out, "  {}", reading_line(r, name));
    }
}

fn at_text(at: &std::collections::BTreeMap<String, AtValue>) -> String {
    at.iter()
        .map(|(k, v)| match v {
            AtValue::Number(x) => format!("{k} = {x}"),
            AtValue::Level(l) => format!("{k} = {l}"),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The sections of the terminal report, in order; each writes nothing when
/// the report does not carry it.
const SECTIONS: &[Section] = &[
    header,
    moderator_answer,
    coefficients,
    heterogeneity,
    spread::section,
    multilevel::dependent_effects,
    average,
    predictions,
    answers::beyond,
    studies,
    answers::shrunken,
    answers::model_set,
    obtained,
    left_out,
    interpret::artifacts,
    interpret::conditional_effects,
    interpret::simple_slopes,
    interpret::level_contrasts,
    interpret::regions,
    interpret::picture,
    diagnostics::leave_one_out,
    diagnostics::influence,
    diagnostics::permutation,
    diagnostics::small_study,
    sensitivity::selection,
    sensitivity::sensitivity,
    diagnostics::cumulative,
    messages,
];

/// Renders the report as text at the default width ([`TEXT_WIDTH`]).
pub fn render(r: &FitReport) -> String {
    render_at(r, TEXT_WIDTH)
}

/// Renders the report as text, wrapped at `width` characters.
pub fn render_at(r: &FitReport, width: usize) -> String {
    sections(&Ctx::of(r, width), r)
}

/// The report as part of another one (the second stage of `sites`): no
/// title line and no cautions (the outer report prints them once).
pub fn render_embedded(r: &FitReport, width: usize) -> String {
    let mut cx = Ctx::of(r, width);
    cx.embedded = true;
    sections(&cx, r)
}

fn sections(cx: &Ctx, r: &FitReport) -> String {
    let mut o = String::new();
    for section in SECTIONS {
        section(r, cx, &mut o);
    }
    // Padding of the last column leaves trailing blanks: drop them.
    trim_lines(&o)
}

/// The title and the facts: data, effects, studies, model and moderators.
fn header(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    let w = cx.width;
    if !cx.embedded {
        let what = if cx.has_mods {
            "random-effects meta-regression"
        } else {
            "random-effects meta-analysis"
        };
        title(o, what, w);
    }
    let data = match &r.input.sheet {
        Some(sheet) => format!("{} (sheet '{sheet}', {} rows)", r.input.file, r.input.rows),
        None => format!(
            "{} ({}-separated, {} rows)",
            r.input.file, r.input.delimiter, r.input.rows
        ),
    };
    fact(o, "Data", &data, w);
    let mut effects = r.measure.description.clone();
    if let Some(n) = &r.measure.reading_name {
        let _ = write!(effects, "; summaries also shown as {n}");
    }
    fact(o, "Effects", &effects, w);
    let studies = format!(
        "{} used{}",
        r.k,
        if r.excluded.is_empty() {
            String::new()
        } else {
            format!(", {} left out (listed below)", r.excluded.len())
        }
    );
    fact(o, "Studies", &studies, w);
    let model = format!(
        "τ² by {}; {}; {level_pct} intervals",
        r.model.tau2_description, r.model.inference_description
    );
    fact(o, "Model", &model, w);
    if cx.has_mods {
        let mods: Vec<String> = r
            .model
            .moderators
            .iter()
            .map(|m| match &m.kind {
                ModeratorKind::Numeric { centered_at, .. } => {
                    format!(
                        "{} (numeric{})",
                        m.name,
                        centered_at
                            .map(|c| format!(", centred: {} subtracted, the mean", fmt::value(c)))
                            .unwrap_or_default()
                    )
                }
                ModeratorKind::Categorical {
                    levels, reference, ..
                } => format!(
                    "{} ({} levels, reference {})",
                    m.name,
                    levels.len(),
                    reference
                ),
            })
            .collect();
        fact(o, "Moderators", &mods.join("; "), w);
        for [a, b] in &r.model.interactions {
            fact(o, "", &format!("with the product term {a}×{b}"), w);
        }
    }
    let _ = writeln!(o);
}

/// The answer of the omnibus moderator test in words.
fn moderator_answer(r: &FitReport, cx: &Ctx, o: &mut String) {
    if let Some(t) = &r.moderator_test {
        let _ = writeln!(o, "Does the effect change with the moderators?");
        o.push_str(&cx.para(&t.answer));
        let _ = writeln!(o);
    }
}

/// The coefficient table, with the ratio column for ratio measures.
fn coefficients(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    let scale = match &r.measure.reading_name {
        Some(_)
            if matches!(
                r.measure.id,
                MeasureId::Measure(Measure::R | Measure::PartialR)
            ) =>
        {
            " (Fisher z scale)"
        }
        Some(_) => " (log scale)",
        None => "",
    };
    let robust = r.coefficients.iter().any(|c| c.robust_se.is_some());
    let from = if r.spread.is_some() {
        " — location-scale model, Wald z"
    } else if robust {
        " — cluster-robust (CR2)"
    } else {
        ""
    };
    let _ = writeln!(o, "Coefficients{scale}{from}");
    let tw = column_width(r.coefficients.iter().map(|c| width(&c.term)), 9, 28);
    let stat = if r.model.inference.uses_t() { "t" } else { "z" };
    let rows: Vec<Shown> = r.coefficients.iter().map(Shown::of).collect();
    let cw = rows
        .iter()
        .map(|s| width(&fmt::interval(s.ci.ci_low, s.ci.ci_high)))
        .max()
        .unwrap_or(10)
        .max(width(&format!("{level_pct} CI")));
    let ratio_name = r.measure.reading_name.as_deref().unwrap_or("ratio");
    let has_ratio = r.coefficients.iter().any(|c| c.ratio.is_some());
    // The p column is as wide as "< 0.0001" and two blanks before the ratio.
    let pw = if has_ratio { 10 } else { 8 };
    let est_d = fmt::column_decimals(r.coefficients.iter().map(|c| c.contrast.estimate));
    let se_d = fmt::column_decimals(rows.iter().map(|s| s.se));
    let ests: Vec<String> = r
        .coefficients
        .iter()
        .map(|c| fmt::fixed(c.contrast.estimate, est_d))
        .collect();
    let ses: Vec<String> = rows.iter().map(|s| fmt::fixed(s.se, se_d)).collect();
    let stats: Vec<String> = rows.iter().map(|s| format!("{:.2}", s.statistic)).collect();
    // Number columns as wide as their widest cell or header (a blank more
    // for the estimate, whose sign would otherwise touch the term).
    let column = |cells: &[String], head: &str| {
        cells
            .iter()
            .map(|c| width(c))
            .max()
            .unwrap_or(0)
            .max(width(head))
    };
    let (ew, sw, zw) = (
        column(&ests, "estimate") + 1,
        column(&ses, "SE"),
        column(&stats, stat),
    );
    let _ = writeln!(
        o,
        "  {}  {}  {}  {}  {}  {}{}",
        pad("term", tw),
        lpad("estimate", ew),
        lpad("SE", sw),
        pad(&format!("{level_pct} CI"), cw),
        lpad(stat, zw),
        pad("p", pw),
        if has_ratio { "exp(estimate) [CI]" } else { "" }
    );
    for (i, (c, s)) in r.coefficients.iter().zip(&rows).enumerate() {
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}{}",
            pad(&clip(&c.term, tw), tw),
            lpad(&ests[i], ew),
            lpad(&ses[i], sw),
            pad(&fmt::interval(s.ci.ci_low, s.ci.ci_high), cw),
            lpad(&stats[i], zw),
            pad(fmt::p(s.p).trim_start_matches("= "), pw),
            c.ratio
                .as_ref()
                .map(|x| format!(
                    "{} {}",
                    num(x.estimate),
                    fmt::interval(s.ci.ci_low.exp(), s.ci.ci_high.exp())
                ))
                .unwrap_or_default()
        );
    }
    if robust {
        o.push_str(&cx.para(
            "(cluster-robust CR2 standard errors; each term's t test and interval on its own \
             Satterthwaite degrees of freedom, shown with the model-based standard errors under \
             Cluster-robust inference)",
        ));
    } else if let Some(c) = r.coefficients.first() {
        if let Some(df) = c.contrast.test.df {
            let _ = writeln!(o, "  (t tests on {df} degrees of freedom)");
        }
    }
    if has_ratio {
        o.push_str(&cx.para(&format!(
            "(exp(estimate) is the {ratio_name} at the intercept and, for a moderator \
             term, the factor by which the {ratio_name} changes per unit or versus the \
             reference level)"
        )));
    }
    let _ = writeln!(o);
}

/// τ², τ, I², Q and, with moderators, the share of τ² they explain.
fn heterogeneity(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    let h = &r.heterogeneity;
    let _ = writeln!(
        o,
        "{}",
        if cx.has_mods {
            "Heterogeneity left after the moderators"
        } else {
            "Heterogeneity"
        }
    );
    let ci = match (r.tau2.ci.ci_low, r.tau2.ci.ci_high) {
        (Some(a), Some(b)) => format!("  ({level_pct} CI {})", fmt::interval(a, b)),
        _ if r.variance_components.is_some() => "  (between + within clusters, below)".into(),
        _ => "  (fixed by the common-effect model)".into(),
    };
    let _ = writeln!(
        o,
        "  between-study variance τ²   {}{ci}",
        num(r.tau2.estimate)
    );
    let _ = writeln!(o, "  between-study SD τ          {}", num(r.tau2.tau));
    let _ = writeln!(
        o,
        "  I², beyond sampling error   {}   (H² = {:.2})",
        fmt::percent(h.i2),
        h.h2
    );
    let _ = writeln!(
        o,
        "  Cochran's Q                 {:.2} on {} df, p {}",
        h.q,
        h.df,
        fmt::p(h.p)
    );
    if cx.has_mods {
        match h.r2 {
            Some(r2) => {
                let _ = writeln!(
                    o,
                    "  explained by moderators     {}   (τ² without them: {})",
                    fmt::percent(r2),
                    num(h.tau2_without_moderators)
                );
            }
            None => {
                let _ = writeln!(
                    o,
                    "  explained by moderators     not defined (τ² without moderators is 0)"
                );
            }
        }
    }
    let _ = writeln!(o);
}

/// The average effect of the same estimator without moderators.
fn average(r: &FitReport, cx: &Ctx, o: &mut String) {
    let _ = writeln!(
        o,
        "{}",
        if cx.has_mods {
            "Average effect (same estimator, no moderators)"
        } else {
            "Average effect"
        }
    );
    estimate_lines(
        o,
        &r.average,
        &cx.level_pct,
        r.measure.reading_name.as_deref(),
    );
    if let Some(words) = average_basis_text(r) {
        o.push_str(&cx.para(&words));
    }
    let _ = writeln!(o);
}

/// What the average of a moderator model pools, when rows with an effect
/// were left out for a missing moderator value (None otherwise).
pub(crate) fn average_basis_text(r: &FitReport) -> Option<String> {
    let b = r.average_basis?;
    let dropped = b.with_effect - b.studies;
    (dropped > 0).then(|| {
        format!(
            "pools {} of {} studies, those complete for the moderators: {dropped} {} with an \
             effect but a missing {} {} left out of both models, so this average \
             can differ from one fitted to all {}.",
            b.studies,
            b.with_effect,
            if dropped == 1 { "row" } else { "rows" },
            if r.spread.is_some() {
                format!(
                    "moderator or spread-characteristic ({}) value",
                    Flag::SpreadBy
                )
            } else {
                "moderator value".to_string()
            },
            if dropped == 1 { "is" } else { "are" },
            b.with_effect
        )
    })
}

/// The predicted effects at the requested moderator values (`--predict`).
fn predictions(r: &FitReport, cx: &Ctx, o: &mut String) {
    if r.predictions.is_empty() {
        return;
    }
    let level_pct = &cx.level_pct;
    let _ = writeln!(o, "Predicted effects");
    for p in &r.predictions {
        let _ = writeln!(o, "  at {}:", at_text(&p.at));
        let _ = writeln!(
            o,
            "    {}  ({level_pct} CI {}, SE {}); new study {}",
            num(p.mean.estimate),
            fmt::interval(p.mean.ci.ci_low, p.mean.ci.ci_high),
            num(p.mean.se),
            fmt::pi_interval(p.mean.pi.pi_low, p.mean.pi.pi_high)
        );
        if let (Some(rd), Some(name)) = (&p.reading, &r.measure.reading_name) {
            let _ = writeln!(o, "    {}", reading_line(rd, name));
        }
    }
    let _ = writeln!(o);
}

/// The studies one per line (up to [`MAX_LISTED_STUDIES`]).
fn studies(r: &FitReport, _: &Ctx, o: &mut String) {
    if r.studies.len() > MAX_LISTED_STUDIES {
        let _ = writeln!(
            o,
            "Studies: {} used; write them all with {} FILE.csv\n",
            r.studies.len(),
            Flag::Table
        );
        return;
    }
    let _ = writeln!(o, "Studies");
    let lw = column_width(r.studies.iter().map(|s| width(&s.study)), 5, 30);
    let _ = writeln!(
        o,
        "  {}  {}  {}  {}  {}",
        pad("study", lw),
        lpad("effect", 10),
        lpad("variance", 10),
        lpad("weight", 7),
        lpad("std. resid.", 11)
    );
    let eff_d = fmt::column_decimals(r.studies.iter().map(|s| s.effect));
    let var_d = fmt::column_decimals(r.studies.iter().map(|s| s.variance));
    for s in r.studies.iter() {
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}{}",
            pad(&clip(&s.study, lw), lw),
            lpad(&fmt::fixed(s.effect, eff_d), 10),
            lpad(&fmt::fixed(s.variance, var_d), 10),
            lpad(&format!("{:.1}%", s.weight), 7),
            lpad(
                &s.std_residual
                    .map(|x| format!("{x:.2}"))
                    .unwrap_or("—".into()),
                11
            ),
            if s.note.is_some() { "  *" } else { "" }
        );
    }
    if r.studies.iter().any(|s| s.note.is_some()) {
        let _ = writeln!(o, "  * adjusted, see the notes");
    }
    let _ = writeln!(o);
}

/// How each effect was obtained (when routes differ, or any was approximated or converted).
fn obtained(r: &FitReport, _: &Ctx, o: &mut String) {
    super::obtained::text_section(r, o);
}

/// The rows left out of the model, with the reason.
fn left_out(r: &FitReport, cx: &Ctx, o: &mut String) {
    if r.excluded.is_empty() {
        return;
    }
    let _ = writeln!(o, "Left out");
    for e in r.excluded.iter().take(MAX_LISTED_STUDIES) {
        let text = format!("{}  {}: {}", r.input.row_place(e.line), e.study, e.reason);
        super::layout::item(o, &text, cx.width);
    }
    if r.excluded.len() > MAX_LISTED_STUDIES {
        let _ = writeln!(
            o,
            "  ... and {} more (all are in {} and {})",
            r.excluded.len() - MAX_LISTED_STUDIES,
            Flag::Table,
            Flag::Json
        );
    }
    let _ = writeln!(o);
}

/// Warnings, notes and cautions, each as a bulleted list (the cautions
/// left to the outer report when embedded).
fn messages(r: &FitReport, cx: &Ctx, o: &mut String) {
    bullets(o, "Warnings", &r.warnings, cx.width);
    bullets(o, "Notes", &r.notes, cx.width);
    if !cx.embedded {
        bullets(o, "Cautions", &r.cautions, cx.width);
    }
}

/// Writes the text report.
///
/// # Errors
/// Any error of the writer.
pub fn write<W: Write>(report: &FitReport, mut out: W) -> std::io::Result<()> {
    out.write_all(render(report).as_bytes())
}
