//! The shareable report: one self-contained HTML page (inline CSS, inline
//! SVG pictures, the bundled font as a data URL; no scripts, no web
//! addresses), readable on a screen and on paper. A pure renderer of the
//! public results.
//!
//! Every piece of text that comes from the data (study labels, column
//! names, levels, file names, the command line) goes through [`esc`], so a
//! label such as `<script>` is shown as text. The page also declares a
//! Content-Security-Policy that allows no scripts and no fetches, so even a
//! mistake in escaping could not run anything or reach the network.

use crate::plan::report::PlanReport;
use crate::render::figure::PageFigure;
use crate::result::{AtValue, ClusterLevel, Estimate, FitReport, ProbePoint};
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// Where a result came from, for the reproducibility block.
#[derive(Debug, Clone, Default)]
pub struct Provenance {
    /// The command line, quoted for a POSIX shell.
    pub command: String,
    /// The tool's version.
    pub version: String,
    /// SHA-256 of the input bytes, lowercase hex (None when there was no input file).
    pub input_sha256: Option<String>,
    /// The random seed, where one was used.
    pub seed: Option<u64>,
}

/// Escapes text for HTML element content and double-quoted attributes.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// The page's style sheet: this project's own look (warm paper, mulberry
/// accents, framed figures), a print style, and tabular figures in tables.
const STYLE: &str = r#"
:root{--ink:#1f2633;--muted:#5c6370;--accent:#7a3b69;--accent-soft:#f4edf2;--rule:#d9d3ca;--paper:#fbfaf7;--head:#efebe4;--frame:#9c8f80;--warn:#8a4b08;--warn-soft:#fbf1e2}
html{background:var(--paper)}
body{font-family:"DejaVu Sans",system-ui,sans-serif;color:var(--ink);background:var(--paper);max-width:62rem;margin:0 auto;padding:1.5rem 1.25rem 3rem;line-height:1.5;font-size:15px}
header{border-top:6px solid var(--accent);padding-top:.75rem;margin-bottom:1.5rem}
h1{font-size:1.55rem;margin:.2rem 0 .3rem;line-height:1.25}
h2{font-size:1.15rem;margin:2.2rem 0 .6rem;padding-bottom:.2rem;border-bottom:1px solid var(--rule);color:var(--accent)}
h3{font-size:1rem;margin:1.4rem 0 .4rem}
p.sub{color:var(--muted);margin:0}
nav ol{columns:2;margin:.5rem 0;padding-left:1.4rem;color:var(--muted)}
nav a{color:var(--accent)}
.answer{background:var(--accent-soft);border-left:6px solid var(--accent);padding:.8rem 1rem;margin:1rem 0;font-size:1.05rem}
.care{background:var(--warn-soft);border-left:6px solid var(--warn);padding:.6rem 1rem;margin:1rem 0}
.care h2{border:none;color:var(--warn);margin:.2rem 0 .3rem;font-size:1.05rem}
.care ul{margin:.2rem 0;padding-left:1.2rem}
table{border-collapse:collapse;margin:.5rem 0 1rem;font-variant-numeric:tabular-nums;background:#fff}
caption{caption-side:top;text-align:left;color:var(--muted);font-size:.9rem;padding:.2rem 0}
th,td{border:1px solid var(--rule);padding:.25rem .55rem;vertical-align:top}
thead th{background:var(--head);text-align:left;font-weight:600}
tbody th{text-align:left;font-weight:normal}
td.n{text-align:right;white-space:nowrap}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:.15rem 1rem;margin:.5rem 0}
dl.facts dt{color:var(--muted)}
dl.facts dd{margin:0}
figure.plot{border:3px solid var(--frame);background:#fff;padding:.6rem;margin:1rem 0}
figure.plot svg{display:block;max-width:100%;height:auto}
figcaption{color:var(--muted);font-size:.9rem;margin-top:.4rem}
code,pre{font-family:"DejaVu Sans Mono",ui-monospace,monospace;font-size:.88rem}
pre{background:#fff;border:1px solid var(--rule);padding:.6rem;white-space:pre-wrap;overflow-wrap:break-word}
footer{margin-top:2.5rem;color:var(--muted);font-size:.85rem;border-top:1px solid var(--rule);padding-top:.5rem}
@media print{
 html,body{background:#fff}
 body{max-width:none;padding:0;font-size:10pt}
 nav{display:none}
 h2{break-after:avoid}
 figure.plot{break-inside:avoid;border-width:1px}
 tr{break-inside:avoid}
 .answer,.care{break-inside:avoid}
}
"#;

/// Page builder: a string with helpers for the few elements the report uses.
struct Page {
    out: String,
}

impl Page {
    fn new(title: &str) -> Page {
        let mut out = String::with_capacity(64 * 1024);
        out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
        out.push_str(
            "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; \
             style-src 'unsafe-inline'; font-src data:; img-src data:\">\n",
        );
        out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
        let _ = writeln!(out, "<title>{}</title>", esc(title));
        out.push_str("<style>");
        out.push_str(&crate::render::figure::scene::font_face_css());
        out.push_str(STYLE);
        out.push_str("</style>\n</head>\n<body>\n");
        Page { out }
    }

    fn raw(&mut self, html: &str) {
        self.out.push_str(html);
    }

    fn h2(&mut self, id: &str, text: &str) {
        let _ = writeln!(self.out, "<h2 id=\"{id}\">{}</h2>", esc(text));
    }

    fn h3(&mut self, text: &str) {
        let _ = writeln!(self.out, "<h3>{}</h3>", esc(text));
    }

    fn p(&mut self, text: &str) {
        let _ = writeln!(self.out, "<p>{}</p>", esc(text));
    }

    fn list(&mut self, items: &[String]) {
        self.out.push_str("<ul>\n");
        for i in items {
            let _ = writeln!(self.out, "<li>{}</li>", esc(i));
        }
        self.out.push_str("</ul>\n");
    }

    fn facts(&mut self, rows: &[(&str, String)]) {
        self.out.push_str("<dl class=\"facts\">\n");
        for (k, v) in rows {
            let _ = writeln!(self.out, "<dt>{}</dt><dd>{}</dd>", esc(k), esc(v));
        }
        self.out.push_str("</dl>\n");
    }

    /// A table: the first cell of each row is a row header; cells that
    /// look like numbers are right-aligned.
    fn table(&mut self, caption: &str, head: &[&str], rows: &[Vec<String>]) {
        self.out.push_str("<table>\n");
        if !caption.is_empty() {
            let _ = writeln!(self.out, "<caption>{}</caption>", esc(caption));
        }
        self.out.push_str("<thead><tr>");
        for h in head {
            let _ = write!(self.out, "<th scope=\"col\">{}</th>", esc(h));
        }
        self.out.push_str("</tr></thead>\n<tbody>\n");
        for r in rows {
            self.out.push_str("<tr>");
            for (j, c) in r.iter().enumerate() {
                if j == 0 {
                    let _ = write!(self.out, "<th scope=\"row\">{}</th>", esc(c));
                } else if numeric_looking(c) {
                    let _ = write!(self.out, "<td class=\"n\">{}</td>", esc(c));
                } else {
                    let _ = write!(self.out, "<td>{}</td>", esc(c));
                }
            }
            self.out.push_str("</tr>\n");
        }
        self.out.push_str("</tbody>\n</table>\n");
    }

    fn figure(&mut self, id: &str, f: &PageFigure) {
        let _ = writeln!(
            self.out,
            "<figure class=\"plot\" id=\"{id}\" data-plot=\"{}\">",
            f.kind
        );
        self.out.push_str(&labelled_svg(f, id));
        let _ = writeln!(
            self.out,
            "\n<figcaption>{}</figcaption>\n</figure>",
            esc(&f.description)
        );
    }

    fn finish(mut self, prov: &Provenance) -> String {
        let _ = writeln!(
            self.out,
            "<footer>Made by pondus {}. This page is self-contained: it loads nothing from the \
             network and runs no scripts.</footer>\n</body>\n</html>",
            esc(&prov.version)
        );
        self.out
    }
}

fn numeric_looking(c: &str) -> bool {
    let t = c.trim_start_matches(['<', '=', ' ', '[', '−', '-']);
    !t.is_empty()
        && t.chars().next().is_some_and(|ch| ch.is_ascii_digit())
        && c.chars()
            .all(|ch| ch.is_ascii_digit() || " .,-+−e%[]<=".contains(ch) || ch == '—' || ch == '×')
}

/// The SVG with an accessible name and description: `role="img"`, and
/// `<title>`/`<desc>` children referenced by `aria-labelledby`.
fn labelled_svg(f: &PageFigure, id: &str) -> String {
    let svg = f.svg.trim_start();
    let svg = match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    };
    match svg.find('>') {
        Some(end) if svg.starts_with("<svg") => {
            let (open, rest) = svg.split_at(end);
            format!(
                "{open} role=\"img\" aria-labelledby=\"{id}-title {id}-desc\"><title id=\"{id}-title\">{}</title><desc id=\"{id}-desc\">{}</desc>{}",
                esc(&f.title),
                esc(&f.description),
                &rest[1..]
            )
        }
        _ => esc(svg),
    }
}

fn words_and(items: &[String]) -> String {
    match items.len() {
        0 => String::new(),
        1 => items[0].clone(),
        2 => format!("{} and {}", items[0], items[1]),
        n => format!("{}, and {}", items[..n - 1].join(", "), items[n - 1]),
    }
}

fn at_text(v: &AtValue) -> String {
    match v {
        AtValue::Number(x) => fmt::value(*x),
        AtValue::Level(l) => l.clone(),
    }
}

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
        fmt::interval(e.mean.pi.pi_low, e.mean.pi.pi_high),
        num(e.mean.se),
    ]);
    if let (Some(r), Some(rn)) = (&e.reading, reading_name) {
        rows.push(vec![
            format!("{name}, as {rn}"),
            num(r.estimate),
            fmt::interval(r.ci.ci_low, r.ci.ci_high),
            fmt::interval(r.pi.pi_low, r.pi.pi_high),
            "—".into(),
        ]);
    }
}

/// The whole `pondus fit` report as one HTML page.
pub fn fit_page(
    report: &FitReport,
    figures: &[PageFigure],
    figure_notes: &[String],
    prov: &Provenance,
) -> String {
    let mods: Vec<String> = report
        .model
        .moderators
        .iter()
        .map(|m| m.name.clone())
        .collect();
    let lv = fmt::level_pct(report.model.level);
    let title = if mods.is_empty() {
        format!("Pooled effect across {} studies", report.k)
    } else {
        format!(
            "{} {} change the effect?",
            if mods.len() == 1 { "Does" } else { "Do" },
            words_and(&mods)
        )
    };
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.raw("<header>\n");
    let _ = writeln!(page.out, "<h1>{}</h1>", esc(&title));
    let _ = writeln!(
        page.out,
        "<p class=\"sub\">{} · {} studies · {} · made by pondus {}</p>",
        esc(&report.measure.description),
        report.k,
        esc(&report.input.file),
        esc(&prov.version)
    );
    page.raw("</header>\n");

    // The question in words.
    page.h2("question", "The question");
    let question = if mods.is_empty() {
        format!(
            "What is the average effect — {} — across these {} studies, how much do their true \
             effects differ, and what effect should a new study expect?",
            report.measure.description, report.k
        )
    } else {
        format!(
            "Across these {} studies, is the effect — {} — associated with {}? And how much \
             variation between studies is left once the moderators are taken into account?",
            report.k,
            report.measure.description,
            words_and(&mods)
        )
    };
    page.p(&question);
    let answer = match &report.moderator_test {
        Some(t) => t.answer.clone(),
        None => {
            let a = &report.average;
            format!(
                "The average effect is {} ({lv} CI {}); a new study's true effect is expected in {} \
                 ({lv} prediction interval).",
                num(a.mean.estimate),
                fmt::interval(a.mean.ci.ci_low, a.mean.ci.ci_high),
                fmt::interval(a.mean.pi.pi_low, a.mean.pi.pi_high)
            )
        }
    };
    let _ = writeln!(
        page.out,
        "<div class=\"answer\" role=\"note\">{}</div>",
        esc(&answer)
    );
    if !report.cautions.is_empty() || !report.warnings.is_empty() {
        page.raw("<section class=\"care\" aria-labelledby=\"care\">\n");
        let _ = writeln!(page.out, "<h2 id=\"care\">Read with care</h2>");
        let mut items = report.warnings.clone();
        items.extend(report.cautions.iter().cloned());
        page.list(&items);
        page.raw("</section>\n");
    }

    let mut contents = vec![
        ("data", "Data used"),
        ("pooled", "Average effect and heterogeneity"),
        ("moderators", "Moderators"),
    ];
    if has_dependence(report) {
        contents.push(("dependence", "Dependent effects"));
    }
    if has_interpretation(report) {
        contents.push(("interpretation", "Reading the moderation"));
    }
    if has_diagnostics(report) {
        contents.push(("robustness", "Robustness checks"));
    }
    contents.extend([
        ("plots", "Plots"),
        ("studies", "Studies"),
        ("reproduce", "Reproduce this analysis"),
    ]);
    page.raw("<nav aria-label=\"Contents\"><ol>");
    for (id, title) in contents {
        let _ = write!(page.out, "<li><a href=\"#{id}\">{}</a></li>", esc(title));
    }
    page.raw("</ol></nav>\n");

    // Data.
    page.h2("data", "Data used");
    page.facts(&[
        ("File", report.input.file.clone()),
        (
            "Rows read",
            format!(
                "{} ({}-separated)",
                report.input.rows, report.input.delimiter
            ),
        ),
        ("Studies in the model", report.k.to_string()),
        ("Rows left out", report.excluded.len().to_string()),
        ("Effect measure", report.measure.description.clone()),
        (
            "Model",
            format!(
                "{}; {}; {lv} intervals",
                report.model.tau2_description, report.model.inference_description
            ),
        ),
    ]);
    if !report.excluded.is_empty() {
        let rows: Vec<Vec<String>> = report
            .excluded
            .iter()
            .map(|e| vec![e.study.clone(), e.line.to_string(), e.reason.clone()])
            .collect();
        page.table(
            "Rows left out of the model, with the reason",
            &["study", "line", "reason"],
            &rows,
        );
    }
    if !report.notes.is_empty() {
        page.h3("Notes");
        page.list(&report.notes);
    }

    // Pooled result and heterogeneity.
    page.h2("pooled", "Average effect and heterogeneity");
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

    // Moderators.
    page.h2("moderators", "Moderators");
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
    let ratio = report.coefficients.iter().any(|c| c.ratio.is_some());
    let stat_name = if report.model.inference == crate::result::Inference::Kh {
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
            let mut r = vec![
                c.term.clone(),
                num(c.contrast.estimate),
                num(c.contrast.se),
                fmt::interval(c.contrast.ci.ci_low, c.contrast.ci.ci_high),
                format!("{:.2}", c.contrast.test.statistic),
                fmt::p(c.contrast.test.p)
                    .trim_start_matches("= ")
                    .to_string(),
            ];
            if let Some(q) = &c.ratio {
                r.push(num(q.estimate));
                r.push(fmt::interval(q.ci.ci_low, q.ci.ci_high));
            } else if ratio {
                r.push("—".into());
                r.push("—".into());
            }
            r
        })
        .collect();
    let df_note = report
        .coefficients
        .first()
        .and_then(|c| c.contrast.test.df)
        .map(|d| format!(" (t tests on {} degrees of freedom)", fmt::df(d)))
        .unwrap_or_default();
    page.table(
        &format!("Coefficients on the analysis scale{df_note}"),
        &head,
        &rows,
    );
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
                    fmt::interval(p.mean.pi.pi_low, p.mean.pi.pi_high),
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
            format!("; model predictions with {}", g.held)
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

    dependence(&mut page, report, &lv);
    interpretation(&mut page, report, &lv);
    diagnostics(&mut page, report, &lv);

    // Plots.
    page.h2("plots", "Plots");
    for (i, f) in figures.iter().enumerate() {
        page.figure(&format!("fig-{}-{i}", f.kind), f);
    }
    if !figure_notes.is_empty() {
        page.list(figure_notes);
    }

    // Studies.
    page.h2("studies", "Studies");
    let mut head: Vec<String> = [
        "study",
        "line",
        "effect",
        "variance",
        &format!("{lv} CI"),
        "weight",
        "std. residual",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    head.extend(mods.iter().cloned());
    head.push("note".into());
    let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
    let rows: Vec<Vec<String>> = report
        .studies
        .iter()
        .map(|s| {
            let mut r = vec![
                s.study.clone(),
                s.line.to_string(),
                num(s.effect),
                num(s.variance),
                fmt::interval(s.ci.ci_low, s.ci.ci_high),
                format!("{:.1}%", s.weight),
                s.std_residual
                    .map(|z| format!("{z:.2}"))
                    .unwrap_or_else(|| "—".into()),
            ];
            r.extend(s.moderators.iter().map(at_text));
            r.push(s.note.clone().unwrap_or_default());
            r
        })
        .collect();
    page.table(
        "Every study in the model, in input order (effects on the analysis scale)",
        &head_ref,
        &rows,
    );

    reproduce(&mut page, prov);
    page.finish(prov)
}

/// A contrast's cells: estimate, CI, statistic, p.
fn contrast_cells(t: &crate::result::ContrastTest) -> Vec<String> {
    vec![
        num(t.estimate),
        fmt::interval(t.ci.ci_low, t.ci.ci_high),
        format!("{:.2}", t.test.statistic),
        fmt::p(t.test.p).trim_start_matches("= ").to_string(),
    ]
}

/// Conditional effects, simple slopes, level contrasts, regions of
/// significance, how the picture changes, and artifact corrections — each
/// only when it was asked for.
fn interpretation(page: &mut Page, report: &FitReport, lv: &str) {
    if !has_interpretation(report) {
        return;
    }
    let it = &report.interpretation;
    page.h2("interpretation", "Reading the moderation");
    if !it.conditional_effects.is_empty() {
        page.h3("Conditional effects");
        let mut groups: Vec<(&str, &str)> = Vec::new();
        for c in &it.conditional_effects {
            if !groups.contains(&(c.moderator.as_str(), c.held.as_str())) {
                groups.push((c.moderator.as_str(), c.held.as_str()));
            }
        }
        let stat = if report.model.inference == crate::result::Inference::Kh {
            "t"
        } else {
            "z"
        };
        for (m, held) in groups {
            let rows: Vec<Vec<String>> = it
                .conditional_effects
                .iter()
                .filter(|c| c.moderator == m && c.held == held)
                .map(|c| {
                    let mut at = format!("{} = {}", c.moderator, at_text(&c.at));
                    if !matches!(c.point, ProbePoint::Given | ProbePoint::Level) {
                        at.push_str(&format!(" ({})", c.point));
                    }
                    if c.outside_range {
                        at.push_str(" (outside the studies' range)");
                    }
                    vec![
                        at,
                        num(c.mean.estimate),
                        fmt::interval(c.mean.ci.ci_low, c.mean.ci.ci_high),
                        fmt::interval(c.mean.pi.pi_low, c.mean.pi.pi_high),
                        format!("{:.2}", c.test.statistic),
                        fmt::p(c.test.p).trim_start_matches("= ").to_string(),
                    ]
                })
                .collect();
            let held = if held.is_empty() {
                String::new()
            } else {
                format!("; {held}")
            };
            page.table(
                &format!("The mean effect at values of {m}{held}"),
                &[
                    "at",
                    "estimate",
                    &format!("{lv} CI"),
                    &format!("{lv} prediction interval"),
                    stat,
                    "p",
                ],
                &rows,
            );
        }
    }
    if !it.simple_slopes.is_empty() {
        page.h3("Simple slopes");
        let rows: Vec<Vec<String>> = it
            .simple_slopes
            .iter()
            .map(|s| {
                let mut r = vec![format!("{} at {} = {}", s.of, s.moderator, at_text(&s.at))];
                r.extend(contrast_cells(&s.test));
                r.push(s.held.clone());
                r
            })
            .collect();
        page.table(
            "The conditional effect of one moderator at values of the other in the product term",
            &[
                "quantity",
                "estimate",
                &format!("{lv} CI"),
                "statistic",
                "p",
                "others held",
            ],
            &rows,
        );
    }
    if !it.level_contrasts.is_empty() {
        page.h3("Differences between levels");
        let rows: Vec<Vec<String>> = it
            .level_contrasts
            .iter()
            .map(|c| {
                let mut r = vec![format!("{}: {} − {}", c.moderator, c.level, c.minus)];
                r.extend(contrast_cells(&c.test));
                r.push(fmt::p(c.p_holm).trim_start_matches("= ").to_string());
                r
            })
            .collect();
        page.table(
            "Pairwise differences, with p adjusted over the pairs of each moderator (Holm)",
            &[
                "difference",
                "estimate",
                &format!("{lv} CI"),
                "statistic",
                "p",
                "Holm p",
            ],
            &rows,
        );
    }
    if !it.regions_of_significance.is_empty() {
        page.h3("Regions of significance (Johnson–Neyman)");
        let rows: Vec<Vec<String>> = it
            .regions_of_significance
            .iter()
            .map(|r| {
                let bounds: Vec<String> = r.bounds.iter().map(|b| num(*b)).collect();
                vec![
                    format!("{} along {}", r.quantity, r.moderator),
                    if bounds.is_empty() {
                        "none".into()
                    } else {
                        bounds.join(", ")
                    },
                    r.significant.to_string(),
                    format!(
                        "{} to {}",
                        fmt::value(r.observed_min),
                        fmt::value(r.observed_max)
                    ),
                    r.observed_region.to_string(),
                ]
            })
            .collect();
        page.table(
            "Where the confidence interval excludes 0",
            &[
                "quantity",
                "bounds",
                "significant",
                "observed range",
                "within the observed range",
            ],
            &rows,
        );
        let words: Vec<String> = it
            .regions_of_significance
            .iter()
            .map(|r| {
                if r.held.is_empty() {
                    r.words.clone()
                } else {
                    format!("{} ({})", r.words, r.held)
                }
            })
            .collect();
        page.list(&words);
    }
    if let Some(pc) = &it.picture {
        page.h3("How the picture changes");
        let rows = vec![
            vec![
                "mean effect".to_string(),
                format!(
                    "{} {}",
                    num(pc.pooled.mean.estimate),
                    fmt::interval(pc.pooled.mean.ci.ci_low, pc.pooled.mean.ci.ci_high)
                ),
                format!(
                    "{} to {} (probed values)",
                    num(pc.conditional_min),
                    num(pc.conditional_max)
                ),
            ],
            vec![
                "τ²".to_string(),
                num(pc.tau2_without),
                match pc.r2 {
                    Some(r2) => format!("{} (R² = {})", num(pc.tau2_with), fmt::percent(r2)),
                    None => num(pc.tau2_with),
                },
            ],
        ];
        page.table("", &["", "without moderators", "with moderators"], &rows);
        page.p(&pc.words);
    }
    if let Some(a) = &report.artifacts {
        page.h3("Artifact corrections");
        page.p(&format!(
            "Corrections applied: {}. {}",
            a.corrections.join(", "),
            a.method
        ));
        let rows: Vec<Vec<String>> = a
            .studies
            .iter()
            .map(|s| {
                vec![
                    s.study.clone(),
                    num(s.observed_r),
                    num(s.corrected_r),
                    num(s.observed_variance),
                    num(s.corrected_variance),
                    num(s.se_factor),
                ]
            })
            .collect();
        page.table(
            &format!(
                "Each study's correlation before and after correction (mean observed r {}, mean corrected r {})",
                num(a.mean_observed_r),
                num(a.mean_corrected_r)
            ),
            &["study", "observed r", "corrected r", "observed variance", "corrected variance", "SE factor"],
            &rows,
        );
    }
}

/// Studies listed one by one in the robustness tables at most; above this,
/// only the flagged studies are listed (all of them are in `--table`).
const MAX_LISTED: usize = 60;

/// Whether the report carries conditional effects, contrasts, regions or artifact corrections.
fn has_interpretation(report: &FitReport) -> bool {
    let it = &report.interpretation;
    !it.conditional_effects.is_empty()
        || !it.simple_slopes.is_empty()
        || !it.level_contrasts.is_empty()
        || !it.regions_of_significance.is_empty()
        || report.artifacts.is_some()
}

/// Whether the report carries a cluster structure or cluster-robust tests.
fn has_dependence(report: &FitReport) -> bool {
    report.clustering.is_some()
        || report.variance_components.is_some()
        || report.coefficients.iter().any(|c| c.robust_se.is_some())
}

/// Whether the report carries any robustness check.
fn has_diagnostics(report: &FitReport) -> bool {
    report.leave_one_out.is_some()
        || report.influence.is_some()
        || report.permutation.is_some()
        || report.small_study.is_some()
        || report.cumulative.is_some()
}

/// Leave-one-out, influence, permutation test, small-study effects and the
/// cumulative meta-analysis — each only when it was run.
fn diagnostics(page: &mut Page, report: &FitReport, lv: &str) {
    if !has_diagnostics(report) {
        return;
    }
    page.h2("robustness", "Robustness checks");
    let terms = &report.model.terms;
    if let Some(perm) = &report.permutation {
        page.h3("Permutation test of the moderators");
        let how = if perm.exact {
            format!(
                "every one of the {} distinct arrangements of the moderator rows",
                perm.permutations
            )
        } else {
            format!(
                "{} random permutations of the moderator rows (seed {})",
                perm.permutations,
                perm.seed
                    .map(|s| s.to_string())
                    .unwrap_or_else(|| "—".into())
            )
        };
        page.facts(&[
            ("Arrangements", how),
            (
                "Permutation p of the moderator test",
                fmt::p(perm.moderator_p)
                    .trim_start_matches("= ")
                    .to_string(),
            ),
            ("Refits without an answer", perm.failed.to_string()),
        ]);
        let rows: Vec<Vec<String>> = terms
            .iter()
            .zip(&perm.coefficient_p)
            .zip(&report.coefficients)
            .map(|((t, pp), c)| {
                vec![
                    t.clone(),
                    fmt::opt_p_cell(*pp),
                    fmt::p(c.contrast.test.p)
                        .trim_start_matches("= ")
                        .to_string(),
                ]
            })
            .collect();
        page.table(
            "Each coefficient: the permutation p beside the model's p",
            &["term", "permutation p", "model p"],
            &rows,
        );
    }
    if let Some(loo) = &report.leave_one_out {
        page.h3("Leaving out one study at a time");
        let flagged: Vec<String> = loo
            .iter()
            .filter(|l| l.sign_changed || l.significance_changed)
            .map(|l| {
                let what = match (l.sign_changed, l.significance_changed) {
                    (true, true) => "a sign and the significance",
                    (true, false) => "a sign",
                    _ => "the significance",
                };
                format!("{} (changes {what})", l.study)
            })
            .collect();
        if flagged.is_empty() {
            page.p("No single study changes the sign of a coefficient or the significance of the test when left out.");
        } else {
            page.p(&format!(
                "Leaving out one of these studies changes the conclusion: {}.",
                flagged.join("; ")
            ));
        }
        let mut head: Vec<String> = vec!["study left out".into()];
        head.extend(terms.iter().cloned());
        head.extend(["τ²".into(), "I²".into(), "test p".into(), "flag".into()]);
        let head_ref: Vec<&str> = head.iter().map(String::as_str).collect();
        let rows: Vec<Vec<String>> = loo
            .iter()
            .filter(|l| loo.len() <= MAX_LISTED || l.sign_changed || l.significance_changed)
            .map(|l| {
                let mut r = vec![l.study.clone()];
                if l.coefficients.is_empty() {
                    r.extend(terms.iter().map(|_| "—".to_string()));
                } else {
                    r.extend(l.coefficients.iter().map(|c| num(*c)));
                }
                r.push(fmt::opt_num(l.tau2));
                r.push(l.i2.map(fmt::percent).unwrap_or_else(|| "—".into()));
                r.push(fmt::opt_p_cell(l.moderator_p.or(l.average_p)));
                r.push(match (l.sign_changed, l.significance_changed) {
                    (true, true) => "sign, significance".into(),
                    (true, false) => "sign".into(),
                    (false, true) => "significance".into(),
                    _ => l.problem.clone().unwrap_or_default(),
                });
                r
            })
            .collect();
        let caption = if loo.len() <= MAX_LISTED {
            "The model refitted without each study".to_string()
        } else {
            format!(
                "The flagged studies among {} refits (all are in --table)",
                loo.len()
            )
        };
        page.table(&caption, &head_ref, &rows);
    }
    if let Some(inf) = &report.influence {
        page.h3("Influence of each study");
        if let Some(c) = &report.influence_cutoffs {
            page.p(&format!(
                "A study is marked influential when |DFFITS| > {}, Cook's distance > {} or its hat value > {} \
                 (cut-offs in common use, after Viechtbauer & Cheung 2010); a studentised residual beyond ±{} is \
                 noted but does not by itself make a study influential.",
                num(c.dffits),
                num(c.cooks_distance),
                num(c.hat),
                num(c.rstudent)
            ));
        }
        let rows: Vec<Vec<String>> = inf
            .iter()
            .filter(|i| inf.len() <= MAX_LISTED || i.influential)
            .map(|i| {
                vec![
                    i.study.clone(),
                    fmt::opt_num(i.rstudent),
                    fmt::opt_num(i.dffits),
                    fmt::opt_num(i.cooks_distance),
                    fmt::opt_num(i.cov_ratio),
                    num(i.hat),
                    fmt::opt_num(i.tau2_deleted),
                    fmt::opt_num(i.q_deleted),
                    if i.exceeded.is_empty() {
                        if i.influential {
                            "yes".into()
                        } else {
                            String::new()
                        }
                    } else {
                        i.exceeded
                            .iter()
                            .map(|c| c.id())
                            .collect::<Vec<_>>()
                            .join(", ")
                    },
                ]
            })
            .collect();
        page.table(
            if inf.len() <= MAX_LISTED {
                "Influence measures (cut-offs exceeded in the last column)"
            } else {
                "The influential studies (all are in --table)"
            },
            &[
                "study",
                "studentised residual",
                "DFFITS",
                "Cook's distance",
                "covariance ratio",
                "hat",
                "τ² without it",
                "Q without it",
                "exceeded",
            ],
            &rows,
        );
    }
    if let Some(ss) = &report.small_study {
        page.h3("Small-study effects");
        let a = &ss.asymmetry_test;
        let r = &ss.rank_test;
        let t = &ss.trim_fill;
        page.facts(&[
            (
                "Regression test for funnel asymmetry",
                format!(
                    "slope on the standard error {} (SE {}), t({}) = {:.2}, p {}{}",
                    num(a.slope),
                    num(a.se),
                    fmt::df(a.df),
                    a.statistic,
                    fmt::p(a.p),
                    if a.with_moderators { ", with the moderators in the model" } else { "" }
                ),
            ),
            (
                "Rank correlation test",
                format!("Kendall's τ = {}, p {}", num(r.tau), fmt::p(r.p)),
            ),
            (
                "Trim-and-fill",
                format!(
                    "{} {} filled on the {}; average {} ({lv} CI {}) against {} from the observed studies",
                    t.filled,
                    if t.filled == 1 { "study" } else { "studies" },
                    t.side,
                    num(t.estimate),
                    fmt::interval(t.ci.ci_low, t.ci.ci_high),
                    num(t.estimate_observed)
                ),
            ),
        ]);
        page.list(&ss.cautions);
    }
    if let Some(steps) = &report.cumulative {
        page.h3("Cumulative meta-analysis");
        let rows: Vec<Vec<String>> = steps
            .iter()
            .map(|c| {
                vec![
                    format!("+ {}", c.study),
                    at_text(&c.value),
                    c.k.to_string(),
                    fmt::opt_num(c.estimate),
                    match (c.ci.ci_low, c.ci.ci_high) {
                        (Some(a), Some(b)) => fmt::interval(a, b),
                        _ => "—".into(),
                    },
                    fmt::opt_num(c.tau2),
                    c.i2.map(fmt::percent).unwrap_or_else(|| "—".into()),
                ]
            })
            .collect();
        let order = report
            .cumulative_order
            .as_ref()
            .map(|o| format!(" by {} ({} order)", o.column, o.order))
            .unwrap_or_default();
        page.table(
            &format!("The average effect as studies are added{order}"),
            &[
                "study added",
                "value",
                "studies",
                "average",
                &format!("{lv} CI"),
                "τ²",
                "I²",
            ],
            &rows,
        );
    }
}

/// A second-stage fit as a short block: its answer (when it tests
/// moderators), τ², and the coefficients.
fn stage_block(page: &mut Page, title: &str, fit: &FitReport, intercept_label: Option<&str>) {
    page.h3(title);
    let lv = fmt::level_pct(fit.model.level);
    if let Some(t) = &fit.moderator_test {
        let _ = writeln!(
            page.out,
            "<div class=\"answer\" role=\"note\">{}</div>",
            esc(&t.answer)
        );
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

/// The `pondus sites` result (first stage, join, and with `--fit` both
/// second-stage answers) as one HTML page.
pub fn sites_page(
    report: &crate::result::SitesReport,
    figures: &[PageFigure],
    figure_notes: &[String],
    prov: &Provenance,
) -> String {
    let m = &report.model;
    let title = match &m.w {
        Some(w) => format!(
            "Does {w} change the {} → {} slope, within sites or across them?",
            m.x, m.y
        ),
        None => format!(
            "The {} → {} slope in {} sites",
            m.x,
            m.y,
            report.sites.len()
        ),
    };
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.raw("<header>\n");
    let _ = writeln!(page.out, "<h1>{}</h1>", esc(&title));
    let _ = writeln!(
        page.out,
        "<p class=\"sub\">two-stage analysis of participant rows · {} sites estimated · {} · made by pondus {}</p>",
        report.sites.len(),
        esc(&report.input.file),
        esc(&prov.version)
    );
    page.raw("</header>\n");
    page.h2("question", "The question");
    let mut q = format!(
        "In every site, how does {} change with {}{}?",
        m.y,
        m.x,
        if m.covariates.is_empty() {
            String::new()
        } else {
            format!(" (adjusted for {})", words_and(&m.covariates))
        }
    );
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
        for a in &st.answers {
            let _ = write!(page.out, "<p>{}</p>", esc(a));
        }
        page.raw("</div>\n");
        if !st.cautions.is_empty() {
            page.raw("<section class=\"care\" aria-labelledby=\"care\">\n");
            let _ = writeln!(page.out, "<h2 id=\"care\">Read with care</h2>");
            page.list(&st.cautions);
            page.raw("</section>\n");
        }
    } else {
        page.p("Only the first stage was run; add --fit for the pooled and across-site answers.");
    }

    page.h2("data", "Data used");
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

    if let Some(st) = &report.stages {
        page.h2("stages", "Second stage");
        let product = format!(
            "pooled product term {}·{}",
            m.x,
            m.w.clone().unwrap_or_default()
        );
        if let Some(f) = &st.within {
            stage_block(
                &mut page,
                "Within sites: the pooled product term",
                f,
                Some(&product),
            );
        }
        if let Some(f) = &st.across {
            stage_block(
                &mut page,
                "Across sites: the slopes on the site mean",
                f,
                None,
            );
        }
        if let Some(f) = &st.characteristics {
            let title = if f.model.moderators.is_empty() {
                "The pooled slope"
            } else {
                "Across sites: the slopes on the site characteristics"
            };
            stage_block(&mut page, title, f, None);
        }
    }
    if !figures.is_empty() {
        page.h2("plots", "Plots of the site slopes");
        for (i, f) in figures.iter().enumerate() {
            page.figure(&format!("fig-{}-{i}", f.kind), f);
        }
        if !figure_notes.is_empty() {
            page.list(figure_notes);
        }
    }

    page.h2("sites", "Sites");
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
    reproduce(&mut page, prov);
    page.finish(prov)
}

/// The three-level model's variance components, likelihood-ratio tests and
/// moderator levels, and the cluster-robust tests (`--cluster`, `--robust`).
fn dependence(page: &mut Page, report: &FitReport, lv: &str) {
    if !has_dependence(report) {
        return;
    }
    let robust = report.coefficients.iter().any(|c| c.robust_se.is_some());
    page.h2("dependence", "Dependent effects");
    if let Some(c) = &report.clustering {
        page.facts(&[
            ("Cluster column", c.column.clone()),
            (
                "Clusters",
                format!(
                    "{} (largest has {} effects; {} with a single effect)",
                    c.clusters, c.max_cluster_size, c.single_effect_clusters
                ),
            ),
            ("Model", c.model.to_string()),
        ]);
    }
    if let Some(vc) = &report.variance_components {
        let rows: Vec<Vec<String>> = vc
            .iter()
            .map(|v| {
                vec![
                    v.level.to_string(),
                    num(v.estimate),
                    match (v.ci.ci_low, v.ci.ci_high) {
                        (Some(a), Some(b)) => fmt::interval(a, b),
                        _ => "—".into(),
                    },
                    fmt::percent(v.i2),
                ]
            })
            .collect();
        page.table(
            "Variance components (profile-likelihood intervals) and the share of the total variation at each level",
            &["level", "variance", &format!("{lv} CI"), "I² at this level"],
            &rows,
        );
    }
    if let Some(c) = &report.clustering {
        if !c.lr_tests.is_empty() {
            let rows: Vec<Vec<String>> = c
                .lr_tests
                .iter()
                .map(|t| {
                    vec![
                        format!("{} = 0", t.component),
                        format!("{:.2}", t.statistic),
                        fmt::p(t.p).trim_start_matches("= ").to_string(),
                    ]
                })
                .collect();
            page.table(
                "Likelihood-ratio tests of each component (50:50 mixture of χ²₀ and χ²₁)",
                &["null hypothesis", "statistic", "p"],
                &rows,
            );
        }
        if !c.moderator_levels.is_empty() {
            let items: Vec<String> = c
                .moderator_levels
                .iter()
                .map(|t| {
                    format!(
                        "{} varies {}",
                        t.term,
                        match t.level {
                            ClusterLevel::Between => "between clusters only",
                            ClusterLevel::Within => "within clusters",
                        }
                    )
                })
                .collect();
            page.list(&items);
        }
        if let Some(r) = &c.robust {
            page.p(r);
        }
    }
    if robust {
        let rows: Vec<Vec<String>> = report
            .coefficients
            .iter()
            .map(|c| {
                vec![
                    c.term.clone(),
                    num(c.contrast.estimate),
                    num(c.contrast.se),
                    fmt::opt_num(c.robust_se),
                    c.robust_df
                        .map(|d| format!("{d:.1}"))
                        .unwrap_or_else(|| "—".into()),
                    fmt::opt_p_cell(c.robust_p),
                ]
            })
            .collect();
        page.table(
            "Cluster-robust (CR2) standard errors with Satterthwaite degrees of freedom",
            &[
                "term",
                "estimate",
                "model SE",
                "robust SE",
                "robust df",
                "robust p",
            ],
            &rows,
        );
    }
}

fn describe_moderator(m: &crate::result::Moderator) -> String {
    use crate::model::design::ModeratorKind;
    match &m.kind {
        ModeratorKind::Numeric { .. } => "numeric".into(),
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

fn test_words(t: crate::plan::PlanTest) -> &'static str {
    match t {
        crate::plan::PlanTest::Z => "Wald z test",
        crate::plan::PlanTest::Kh => "Knapp–Hartung t test",
    }
}

fn reproduce(page: &mut Page, prov: &Provenance) {
    page.h2("reproduce", "Reproduce this analysis");
    let mut facts = vec![("Tool", format!("pondus {}", prov.version))];
    if let Some(h) = &prov.input_sha256 {
        facts.push(("Input SHA-256", h.clone()));
    }
    if let Some(s) = prov.seed {
        facts.push(("Random seed", s.to_string()));
    }
    page.facts(&facts);
    page.p("The command that made this page:");
    let _ = writeln!(page.out, "<pre><code>{}</code></pre>", esc(&prov.command));
}

/// The `pondus plan` report as one HTML page.
pub fn plan_page(report: &PlanReport, figure: Option<&PageFigure>, prov: &Provenance) -> String {
    let title = "Planning a moderator analysis: power of the moderator test";
    let mut page = Page::new(&format!("{title} — pondus report"));
    page.raw("<header>\n");
    let _ = writeln!(page.out, "<h1>{}</h1>", esc(title));
    let _ = writeln!(
        page.out,
        "<p class=\"sub\">measure {} · {} sites planned · made by pondus {}</p>",
        esc(report.measure),
        report.k,
        esc(&prov.version)
    );
    page.raw("</header>\n");
    page.h2("question", "The question");
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
        match report.k_needed {
            Some(k) => answer.push_str(&format!(
                " The target power {} needs about {k} sites.",
                fmt::percent(tp)
            )),
            None if report.n_needed.is_none() => answer.push_str(&format!(
                " The target power {} is not reached with up to {} sites.",
                fmt::percent(tp),
                report.max_k
            )),
            None => {}
        }
        if let Some(n) = report.n_needed {
            answer.push_str(&format!(
                " At {} sites, about {} participants per site are needed.",
                report.k,
                n.ceil()
            ));
        }
        if let Some(s) = &report.k_needed_simulated {
            answer.push_str(&format!(
                " Confirmed by simulation: {} sites.",
                s.k.map(|k| k.to_string())
                    .unwrap_or_else(|| "not within the simulated range".into())
            ));
        }
    }
    let _ = writeln!(
        page.out,
        "<div class=\"answer\" role=\"note\">{}</div>",
        esc(&answer)
    );
    if !report.cautions.is_empty() {
        page.raw("<section class=\"care\" aria-labelledby=\"care\">\n");
        let _ = writeln!(page.out, "<h2 id=\"care\">Read with care</h2>");
        page.list(&report.cautions);
        page.raw("</section>\n");
    }
    page.h2("assumptions", "Assumptions");
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
    page.h2("table", "Power by number of sites");
    let rows: Vec<Vec<String>> = report
        .table
        .iter()
        .map(|r| vec![r.k.to_string(), fmt::percent(r.power)])
        .collect();
    page.p(&format!("Power from the {}.", report.table_method));
    page.table("", &["sites", "power"], &rows);
    if let Some(f) = figure {
        page.h2("plots", "Power curve");
        page.figure("fig-power-0", f);
    }
    if !report.notes.is_empty() {
        page.h2("notes", "Notes");
        page.list(&report.notes);
    }
    reproduce(&mut page, prov);
    page.finish(prov)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_matches_the_fips_180_example() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        assert_eq!(
            crate::support::hash::sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn escaping_covers_markup_and_quotes() {
        assert_eq!(
            esc("<script>alert(\"x\")</script> & 'y'"),
            "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &#39;y&#39;"
        );
        assert_eq!(esc("Ødegård"), "Ødegård");
    }

    #[test]
    fn numbers_are_right_aligned_and_words_are_not() {
        assert!(numeric_looking("0.2311"));
        assert!(numeric_looking("-1.5000"));
        assert!(numeric_looking("[0.1, 0.2]"));
        assert!(numeric_looking("< 0.0001"));
        assert!(numeric_looking("59.3%"));
        assert!(!numeric_looking("mode=online"));
        assert!(!numeric_looking("Lab 12"));
        assert!(!numeric_looking(""));
    }

    #[test]
    fn svg_gets_role_title_and_description() {
        let f = PageFigure {
            kind: "forest",
            title: "A <b>".into(),
            description: "d & e".into(),
            svg: "<svg width=\"10\" height=\"10\"><rect/></svg>".into(),
        };
        let s = labelled_svg(&f, "fig");
        assert!(s.starts_with(
            "<svg width=\"10\" height=\"10\" role=\"img\" aria-labelledby=\"fig-title fig-desc\"><title id=\"fig-title\">A &lt;b&gt;</title><desc id=\"fig-desc\">d &amp; e</desc><rect/>"
        ));
    }
}
