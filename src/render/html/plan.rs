//! The `pondus plan` report as one HTML page: the question, the
//! assumptions, power by number of sites, the power curve and the notes.

use super::page::{esc, Page, Provenance};
use super::reproduce;
use super::section::{always, body, PlanCtx, Section};
use crate::render::figure::PageFigure;
use crate::result::plan::{PlanReport, PlanTest};
use crate::support::format::{self as fmt, num};

/// The sections of the page, in order.
fn sections<'a>() -> [Section<PlanCtx<'a>>; 6] {
    [
        Section {
            id: "question",
            title: "The question",
            present: always,
            render: question,
        },
        Section {
            id: "assumptions",
            title: "Assumptions",
            present: always,
            render: assumptions,
        },
        Section {
            id: "table",
            title: "Power by number of sites",
            present: always,
            render: power_table,
        },
        Section {
            id: "plots",
            title: "Power curve",
            present: |cx| cx.figure.is_some(),
            render: curve,
        },
        Section {
            id: "notes",
            title: "Notes",
            present: |cx| !cx.report.notes.is_empty(),
            render: |page, cx| page.list(&cx.report.notes),
        },
        Section {
            id: "reproduce",
            title: reproduce::TITLE,
            present: always,
            render: reproduce::plan,
        },
    ]
}

/// The `pondus plan` report as one HTML page.
pub fn plan_page(report: &PlanReport, figure: Option<&PageFigure>, prov: &Provenance) -> String {
    let cx = PlanCtx {
        report,
        figure,
        prov,
    };
    let title = "Planning a moderator analysis: power of the moderator test";
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.header(
        title,
        &format!(
            "measure {} · {} sites planned · made by pondus {}",
            esc(report.measure),
            report.k,
            esc(&prov.version)
        ),
    );
    body(&mut page, &cx, &sections());
    page.finish(prov)
}

/// The question in words, the answer and the cautions.
fn question(page: &mut Page, cx: &PlanCtx) {
    let report = cx.report;
    page.p(&format!(
        "If the moderator ({}) changes the effect by {} per unit on the analysis scale, with a \
         residual between-site variance τ² = {}, how likely is the moderator test ({}) at α = {} \
         to detect it with {} sites?",
        report.moderator,
        num(report.moderator_effect),
        num(report.tau2),
        test_words(report.test),
        report.alpha,
        report.k
    ));
    let mut answer = format!(
        "Power with {} sites: {} ({}).",
        report.k,
        fmt::percent(report.power),
        report.power_method
    );
    if let Some(tp) = report.target_power {
        if let Some(a) = &report.k_needed_answer {
            answer.push_str(&format!(
                " Sites needed for the target power {}: {}.",
                fmt::percent(tp),
                crate::render::plan::k_answer_words(a, report)
            ));
            if let Some(m) = &a.check_method {
                answer.push_str(&format!(
                    " As a check, the {m} gives {}.",
                    a.check_k.map_or_else(
                        || "no k within the bound".to_string(),
                        |k| format!("k = {k}")
                    )
                ));
            }
        }
        if let Some(n) = report.n_needed {
            answer.push_str(&format!(
                " At {} sites, about {} participants per site are needed.",
                report.k,
                n.ceil()
            ));
        }
    }
    page.answer(&answer);
    if !report.cautions.is_empty() {
        page.care(&report.cautions);
    }
}

/// What the power was computed from.
fn assumptions(page: &mut Page, cx: &PlanCtx) {
    let report = cx.report;
    let mut facts = vec![
        ("Measure", report.measure.to_string()),
        ("Sites", report.k.to_string()),
        ("Within-site sampling variance", num(report.within_variance)),
        ("Between-site variance τ²", num(report.tau2)),
        ("Moderator", report.moderator.clone()),
        ("Moderator coefficient", num(report.moderator_effect)),
        ("Significance level", report.alpha.to_string()),
        ("Test", test_words(report.test).to_string()),
        ("SE of the moderator coefficient", num(report.se)),
        ("Noncentrality λ", num(report.noncentrality)),
    ];
    if let Some(n) = report.n {
        facts.insert(2, ("Participants per site", fmt::value(n)));
    }
    if let Some(p) = report.power_analytic {
        facts.push((
            "Analytic power",
            format!("{} ({})", fmt::percent(p), report.power_analytic_method),
        ));
    }
    if let Some(s) = &report.simulation {
        facts.push((
            "Simulated power",
            format!(
                "{} ± {} (Monte-Carlo SE), {} simulations, seed {}",
                fmt::percent(s.power),
                fmt::percent(s.monte_carlo_se),
                s.simulations,
                s.seed
            ),
        ));
    }
    page.facts(&facts);
}

/// Power for each number of sites.
fn power_table(page: &mut Page, cx: &PlanCtx) {
    let report = cx.report;
    let rows: Vec<Vec<String>> = report
        .table
        .iter()
        .map(|r| vec![r.k.to_string(), fmt::percent(r.power)])
        .collect();
    page.p(&format!("Power from the {}.", report.table_method));
    page.table("", &["sites", "power"], &rows);
}

/// The power curve.
fn curve(page: &mut Page, cx: &PlanCtx) {
    if let Some(f) = cx.figure {
        page.figure("fig-power-0", f);
    }
}

/// The moderator test in words.
fn test_words(t: PlanTest) -> &'static str {
    match t {
        PlanTest::Z => "Wald z test",
        PlanTest::Kh => "Knapp–Hartung t test",
    }
}
