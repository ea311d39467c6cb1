//! The `pondus sites` result (first stage, join, and with `--fit` both
//! second-stage answers) as one HTML page.

use super::page::{esc, words_and, Page, Provenance};
use super::section::{always, body, Section, SitesCtx};
use super::{figures, reproduce};
use crate::render::figure::PageFigure;
use crate::result::{FitReport, SiteMeasure, SitesReport};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// The sections of the page, in order.
fn sections<'a>() -> [Section<SitesCtx<'a>>; 7] {
    [
        Section {
            id: "question",
            title: "The question",
            present: always,
            render: question,
        },
        Section {
            id: "data",
            title: "Data used",
            present: always,
            render: data,
        },
        Section {
            id: "stages",
            title: "Second stage",
            present: |cx| cx.report.stages.is_some(),
            render: stages,
        },
        Section {
            id: "one-stage",
            title: "One-stage model",
            present: |cx| cx.report.one_stage.is_some(),
            render: super::one_stage::one_stage,
        },
        Section {
            id: "plots",
            title: "Plots of the site slopes",
            present: |cx| !cx.figures.is_empty(),
            render: figures::sites_plots,
        },
        Section {
            id: "sites",
            title: "Sites",
            present: always,
            render: sites,
        },
        Section {
            id: "reproduce",
            title: reproduce::TITLE,
            present: always,
            render: reproduce::sites,
        },
    ]
}

/// The `pondus sites` result (first stage, join, and with `--fit` both
/// second-stage answers) as one HTML page.
pub fn sites_page(
    report: &SitesReport,
    figures: &[PageFigure],
    figure_notes: &[String],
    prov: &Provenance,
) -> String {
    let cx = SitesCtx {
        report,
        figures,
        figure_notes,
        prov,
    };
    let m = &report.model;
    let title = match &m.w {
        Some(w) => format!(
            "Does {w} change the {} → {} slope, within sites or across them?",
            m.x, m.y
        ),
        None => match group_effect(m) {
            Some(effect) => format!("{effect} in {} sites", report.sites.len()),
            None => format!(
                "The {} → {} slope in {} sites",
                m.x,
                m.y,
                report.sites.len()
            ),
        },
    };
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.header(
        &title,
        &format!(
            "{} of participant rows · {} sites estimated · {} · made by pondus {}",
            if report.one_stage.is_some() {
                "two-stage and one-stage analysis"
            } else {
                "two-stage analysis"
            },
            report.sites.len(),
            esc(&report.input.file),
            esc(&prov.version)
        ),
    );
    body(&mut page, &cx, &sections());
    page.finish(prov)
}

/// The per-site effect of a group comparison in words (None for slopes).
fn group_effect(m: &crate::result::SitesModel) -> Option<String> {
    let treat = m.treat.as_deref().unwrap_or("1");
    match m.effect {
        SiteMeasure::Slope => None,
        SiteMeasure::Smd => Some(format!(
            "Hedges' g of {} between the groups of {} ('{treat}' versus the other)",
            m.y, m.x
        )),
        SiteMeasure::LogOr => Some(format!(
            "The log odds ratio of {} = '{}' between the groups of {} ('{treat}' versus the other)",
            m.y,
            m.event.as_deref().unwrap_or("1"),
            m.x
        )),
    }
}

/// The question in words, the answers of the second stage and their cautions.
fn question(page: &mut Page, cx: &SitesCtx) {
    let (report, m) = (cx.report, &cx.report.model);
    let mut q = match m.effect {
        SiteMeasure::Slope => String::new(),
        effect => format!(
            "In every site, how different is {} in the '{}' group of {} from the other group? \
             Each site gives its {}.",
            m.y,
            m.treat.as_deref().unwrap_or("1"),
            m.x,
            if effect == SiteMeasure::Smd {
                "Hedges' g (the standardised mean difference)".to_string()
            } else {
                format!(
                    "log odds ratio of {} = '{}'",
                    m.y,
                    m.event.as_deref().unwrap_or("1")
                )
            }
        ),
    };
    if q.is_empty() {
        q = format!(
            "In every site, how does {} change with {}{}?",
            m.y,
            m.x,
            if m.covariates.is_empty() {
                String::new()
            } else {
                format!(" (adjusted for {})", words_and(&m.covariates))
            }
        );
    }
    if let Some(w) = &m.w {
        q.push_str(&format!(
            " Does that slope depend on a participant's own {w} (within sites), and do sites with a \
             higher average {w} have different slopes (across sites)?"
        ));
    }
    page.p(&q);
    if let Some(st) = &report.stages {
        page.raw("<div class=\"answer\" role=\"note\">");
        let coef = |f: &FitReport, j: usize| {
            f.coefficients.get(j).map(|c| {
                format!(
                    "{} ({} CI {}, p {})",
                    num(c.contrast.estimate),
                    fmt::level_pct(f.model.level),
                    fmt::interval(c.contrast.ci.ci_low, c.contrast.ci.ci_high),
                    fmt::p(c.contrast.test.p)
                )
            })
        };
        if let (Some(f), Some(w)) = (&st.within, &m.w) {
            if let Some(t) = coef(f, 0) {
                let _ = write!(
                    page.out,
                    "<p><strong>Within sites</strong>: the pooled product term {}·{} is {}.</p>",
                    esc(&m.x),
                    esc(w),
                    esc(&t)
                );
            }
        }
        if let (Some(f), Some(w)) = (&st.across, &m.w) {
            if let Some(t) = coef(f, 1) {
                let _ = write!(
                    page.out,
                    "<p><strong>Across sites</strong>: the site slope changes by {} per unit of the site mean of {}.</p>",
                    esc(&t),
                    esc(w)
                );
            }
        }
        if let Some(f) = &st.characteristics {
            characteristics_answer(page, f, m);
        }
        for a in &st.answers {
            let _ = write!(page.out, "<p>{}</p>", esc(a));
        }
        page.raw("</div>\n");
        if !st.cautions.is_empty() {
            page.care(&st.cautions);
        }
    } else {
        page.p(&format!(
            "Only the first stage was run; add {} for the pooled and across-site answers.",
            Flag::Fit
        ));
    }
}

/// The answer of the fit of the site slopes: the average slope with its
/// intervals, and the moderator test on the site characteristics when there
/// are any (so that the answer box is complete without `--w`).
fn characteristics_answer(page: &mut Page, f: &FitReport, m: &crate::result::SitesModel) {
    let lv = fmt::level_pct(f.model.level);
    let a = &f.average.mean;
    if m.effect != SiteMeasure::Slope {
        let what = if m.effect == SiteMeasure::Smd {
            "Hedges' g"
        } else {
            "log odds ratio"
        };
        let _ =
            write!(
            page.out,
            "<p><strong>Average effect</strong>: across {} sites, the average {what} ('{}' versus \
             the other group of {}) is {} ({lv} CI {}, SE {}); a new site's effect is expected in \
             {} ({lv} prediction interval).</p>",
            f.k,
            esc(m.treat.as_deref().unwrap_or("1")),
            esc(&m.x),
            esc(&fmt::true_minus(&num(a.estimate))),
            esc(&fmt::true_minus(&fmt::interval(a.ci.ci_low, a.ci.ci_high))),
            esc(&num(a.se)),
            esc(&fmt::true_minus(&fmt::pi_interval(a.pi.pi_low, a.pi.pi_high)))
        );
        if let Some(t) = &f.moderator_test {
            let _ = write!(
                page.out,
                "<p><strong>Site characteristics</strong>: {}</p>",
                esc(&t.answer)
            );
        }
        return;
    }
    let _ =
        write!(
        page.out,
        "<p><strong>Average slope</strong>: across {} sites, {} changes on average by {} per unit \
         of {} ({lv} CI {}, SE {}); a new site's slope is expected in {} ({lv} prediction \
         interval).</p>",
        f.k,
        esc(&m.y),
        esc(&fmt::true_minus(&num(a.estimate))),
        esc(&m.x),
        esc(&fmt::true_minus(&fmt::interval(a.ci.ci_low, a.ci.ci_high))),
        esc(&num(a.se)),
        esc(&fmt::true_minus(&fmt::pi_interval(a.pi.pi_low, a.pi.pi_high)))
    );
    if let Some(t) = &f.moderator_test {
        let _ = write!(
            page.out,
            "<p><strong>Site characteristics</strong>: {}</p>",
            esc(&t.answer)
        );
    }
}

/// The input, the sites left out, the joined site table and the notes.
fn data(page: &mut Page, cx: &SitesCtx) {
    let (report, m) = (cx.report, &cx.report.model);
    let mut facts = vec![
        ("File", report.input.file.clone()),
        (
            "Rows read",
            format!(
                "{} ({}; {}-separated)",
                report.input.rows, report.input.kind, report.input.delimiter
            ),
        ),
        (
            "Rows left out for a missing value",
            if report.input.missing_rows == 0 {
                "0".to_string()
            } else {
                format!(
                    "{} (first lines: {})",
                    report.input.missing_rows,
                    report
                        .input
                        .missing_lines
                        .iter()
                        .map(u64::to_string)
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            },
        ),
        ("Sites estimated", report.sites.len().to_string()),
        ("Sites left out", report.excluded.len().to_string()),
        ("Standard errors", m.se_type.to_string()),
    ];
    if m.center_within {
        facts.push((
            "Product-term model",
            "x and w centred at their site means".into(),
        ));
    }
    page.facts(&facts);
    if !report.excluded.is_empty() {
        let rows: Vec<Vec<String>> = report
            .excluded
            .iter()
            .map(|e| vec![e.study.clone(), e.n.to_string(), e.reason.clone()])
            .collect();
        page.table(
            "Sites left out, with the reason",
            &["site", "rows", "reason"],
            &rows,
        );
    }
    if let Some(j) = &report.join {
        page.h3("Site characteristics");
        page.p(&format!(
            "{} joined by '{}': {}.",
            j.file,
            j.key,
            if j.columns.is_empty() {
                "no columns".into()
            } else {
                words_and(&j.columns)
            }
        ));
        let mut items = Vec::new();
        if !j.without_info.is_empty() {
            items.push(format!(
                "Sites with estimates but no row in the site table (kept, characteristics empty): {}",
                j.without_info.join(", ")
            ));
        }
        if !j.info_only.is_empty() {
            items.push(format!(
                "Site-table ids without an estimate: {}",
                j.info_only.join(", ")
            ));
        }
        if !items.is_empty() {
            page.list(&items);
        }
    }
    if !report.notes.is_empty() {
        page.h3("Notes");
        page.list(&report.notes);
    }
}

/// The second-stage fits: within sites, across sites, on the site characteristics.
fn stages(page: &mut Page, cx: &SitesCtx) {
    let (report, m) = (cx.report, &cx.report.model);
    let Some(st) = &report.stages else {
        return;
    };
    let product = format!(
        "pooled product term {}·{}",
        m.x,
        m.w.clone().unwrap_or_default()
    );
    if let Some(f) = &st.within {
        stage_block(
            page,
            "Within sites: the pooled product term",
            f,
            Some(&product),
        );
    }
    if let Some(f) = &st.across {
        stage_block(page, "Across sites: the slopes on the site mean", f, None);
    }
    if let Some(f) = &st.characteristics {
        let slope = m.effect == SiteMeasure::Slope;
        let title = match (f.model.moderators.is_empty(), slope) {
            (true, true) => "The pooled slope",
            (true, false) => "The pooled effect",
            (false, true) => "Across sites: the slopes on the site characteristics",
            (false, false) => "Across sites: the effects on the site characteristics",
        };
        stage_block(page, title, f, None);
    }
}

/// A second-stage fit as a short block: its answer (when it tests
/// moderators), τ², and the coefficients.
fn stage_block(page: &mut Page, title: &str, fit: &FitReport, intercept_label: Option<&str>) {
    page.h3(title);
    let lv = fmt::level_pct(fit.model.level);
    if let Some(t) = &fit.moderator_test {
        page.answer(&t.answer);
    }
    page.facts(&[
        ("Sites in this model", fit.k.to_string()),
        (
            "Residual τ²",
            format!("{} ({})", num(fit.tau2.estimate), fit.model.tau2_method),
        ),
        ("Tests", fit.model.inference_description.clone()),
    ]);
    let rows: Vec<Vec<String>> = fit
        .coefficients
        .iter()
        .enumerate()
        .map(|(j, c)| {
            vec![
                match (j, intercept_label) {
                    (0, Some(l)) => l.to_string(),
                    _ => c.term.clone(),
                },
                num(c.contrast.estimate),
                num(c.contrast.se),
                fmt::interval(c.contrast.ci.ci_low, c.contrast.ci.ci_high),
                fmt::p(c.contrast.test.p)
                    .trim_start_matches("= ")
                    .to_string(),
            ]
        })
        .collect();
    page.table(
        "",
        &["term", "estimate", "SE", &format!("{lv} CI"), "p"],
        &rows,
    );
    if !fit.excluded.is_empty() {
        let rows: Vec<Vec<String>> = fit
            .excluded
            .iter()
            .map(|e| vec![e.study.clone(), e.reason.clone()])
            .collect();
        page.table("Sites left out of this model", &["site", "reason"], &rows);
    }
}

/// The per-site group comparisons: group sizes (and events) and the effect.
fn group_sites(page: &mut Page, cx: &SitesCtx) {
    let (report, m) = (cx.report, &cx.report.model);
    let smd = m.effect == SiteMeasure::Smd;
    let head: &[&str] = if smd {
        &[
            "site",
            "n",
            "treatment n",
            "control n",
            "g",
            "variance of g",
        ]
    } else {
        &[
            "site",
            "n",
            "treatment events / n",
            "control events / n",
            "log OR",
            "variance",
            "zero cell",
        ]
    };
    let rows: Vec<Vec<String>> = report
        .sites
        .iter()
        .map(|e| match (&e.smd, &e.log_or) {
            (Some(g), _) => vec![
                e.study.clone(),
                e.n.to_string(),
                g.treat_n.to_string(),
                g.ctrl_n.to_string(),
                num(g.g),
                num(g.var_g),
            ],
            (None, Some(t)) => vec![
                e.study.clone(),
                e.n.to_string(),
                format!("{} / {}", t.treat_events, t.treat_n),
                format!("{} / {}", t.ctrl_events, t.ctrl_n),
                num(t.log_or),
                num(t.var_log_or),
                if t.zero_cell { "yes (0.5 added)" } else { "no" }.to_string(),
            ],
            (None, None) => vec![e.study.clone(), e.n.to_string()],
        })
        .collect();
    let title = group_effect(m).unwrap_or_default();
    page.table(&format!("Per-site effects: {title}"), head, &rows);
}

/// The per-site regressions.
fn sites(page: &mut Page, cx: &SitesCtx) {
    let (report, m) = (cx.report, &cx.report.model);
    if m.effect != SiteMeasure::Slope {
        group_sites(page, cx);
        return;
    }
    let with_w = m.w.is_some();
    let mut head = vec!["site", "n", "slope", "SE", "r", "mean x"];
    if with_w {
        head.extend(["product term", "its SE", "mean w"]);
    }
    let rows: Vec<Vec<String>> = report
        .sites
        .iter()
        .map(|e| {
            let mut r = vec![
                e.study.clone(),
                e.n.to_string(),
                num(e.slope),
                num(e.se),
                num(e.r),
                num(e.mean_x),
            ];
            if with_w {
                r.push(fmt::opt_num(e.interaction));
                r.push(fmt::opt_num(e.interaction_se));
                r.push(fmt::opt_num(e.mean_w));
            }
            r
        })
        .collect();
    page.table(
        &format!("Per-site regressions of {} on {}", m.y, m.x),
        &head,
        &rows,
    );
}
