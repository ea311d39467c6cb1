//! The terminal summary of `pondus sites`: a pure function of the
//! [`SitesReport`].

use crate::result::{Coefficient, FitReport, SeType, SitesInputKind, SitesReport, TwoStage};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// Sites listed one by one at most; the effects file has them all.
pub const MAX_LISTED_SITES: usize = 40;

fn list(items: &[String], max: usize) -> String {
    let mut s = items
        .iter()
        .take(max)
        .map(|i| format!("'{i}'"))
        .collect::<Vec<_>>()
        .join(", ");
    if items.len() > max {
        let _ = write!(s, " and {} more", items.len() - max);
    }
    s
}

fn coefficient_line(out: &mut String, label: &str, c: &Coefficient, level: f64) {
    let _ = writeln!(
        out,
        "  {label}: {}  (SE {}, {:.0}% CI [{}, {}], p {})",
        num(c.contrast.estimate),
        num(c.contrast.se),
        100.0 * level,
        num(c.contrast.ci.ci_low),
        num(c.contrast.ci.ci_high),
        fmt::p(c.contrast.test.p)
    );
}

fn fit_facts(out: &mut String, f: &FitReport) {
    let _ = writeln!(
        out,
        "  {} sites{}; τ² = {} ({}), {}",
        f.k,
        if f.excluded.is_empty() {
            String::new()
        } else {
            format!(
                " ({} left out: {})",
                f.excluded.len(),
                list(
                    &f.excluded
                        .iter()
                        .map(|e| e.study.clone())
                        .collect::<Vec<_>>(),
                    5
                )
            )
        },
        num(f.tau2.estimate),
        f.model.tau2_method,
        f.model.inference_description
    );
}

/// Renders the summary: the run, the sites left out and the join, the
/// per-site table, notes, and the second stage.
pub fn render(r: &SitesReport) -> String {
    let mut o = String::new();
    run_lines(&mut o, r);
    exclusions_and_join(&mut o, r);
    site_table(&mut o, r);
    if !r.notes.is_empty() {
        let _ = writeln!(o);
        for n in &r.notes {
            o.push_str(&super::layout::wrap(n, "  ", 88));
        }
    }
    if let Some(st) = &r.stages {
        stages(&mut o, r, st);
    }
    o
}

/// What was read and how each site's slope was estimated.
/// "; N blank rows skipped" when the reader skipped wholly blank rows.
fn blank_rows_text(n: u64) -> String {
    match n {
        0 => String::new(),
        1 => "; 1 blank row skipped".into(),
        n => format!("; {n} blank rows skipped"),
    }
}

fn run_lines(o: &mut String, r: &SitesReport) {
    let m = &r.model;
    let _ = writeln!(o, "pondus sites: per-site regressions in {}", r.input.file);
    let mut model = format!("  slope: {} on {}", m.y, m.x);
    if !m.covariates.is_empty() {
        let _ = write!(model, ", adjusted for {}", m.covariates.join(", "));
    }
    let _ = writeln!(o, "{model}");
    if let Some(w) = &m.w {
        let _ = writeln!(
            o,
            "  product term: {y} = b0 + b1·{x} + b2·{w} + b3·{x}·{w}{cov}; interaction = b3{c}",
            y = m.y,
            x = m.x,
            cov = if m.covariates.is_empty() {
                ""
            } else {
                " + covariates"
            },
            c = if m.center_within {
                " (x and w centred at site means)"
            } else {
                ""
            }
        );
    }
    let _ = writeln!(
        o,
        "  standard errors: {}",
        if m.se_type == SeType::Hc3 {
            "HC3 (second pass over the rows)"
        } else {
            "classical OLS"
        }
    );
    if r.input.kind == SitesInputKind::Moments {
        let _ = writeln!(
            o,
            "  input: a per-site moments table with {} rows{}",
            r.input.rows,
            blank_rows_text(r.input.blank_rows)
        );
    } else {
        let _ = writeln!(
            o,
            "  rows read: {} ({} left out for missing values{})",
            r.input.rows,
            r.input.missing_rows,
            blank_rows_text(r.input.blank_rows)
        );
    }
    let _ = writeln!(
        o,
        "  sites estimated: {}, left out: {}",
        r.sites.len(),
        r.excluded.len()
    );
}

/// The sites left out, those kept without a product term, and the join
/// with the site table.
fn exclusions_and_join(o: &mut String, r: &SitesReport) {
    if !r.excluded.is_empty() {
        let _ = writeln!(o, "\nSites left out:");
        for e in r.excluded.iter().take(MAX_LISTED_SITES) {
            let _ = writeln!(o, "  '{}' (n = {}): {}", e.study, e.n, e.reason);
        }
        if r.excluded.len() > MAX_LISTED_SITES {
            let _ = writeln!(
                o,
                "  ... and {} more (see {})",
                r.excluded.len() - MAX_LISTED_SITES,
                Flag::Json
            );
        }
    }
    let no_term: Vec<String> = r
        .sites
        .iter()
        .filter_map(|s| s.note.as_ref().map(|n| format!("'{}': {n}", s.study)))
        .collect();
    if !no_term.is_empty() {
        let _ = writeln!(o, "\nSites kept without a product term:");
        for n in no_term.iter().take(MAX_LISTED_SITES) {
            let _ = writeln!(o, "  {n}");
        }
    }
    if let Some(j) = &r.join {
        let _ = writeln!(
            o,
            "\nSite table {} (id column '{}'): {} characteristic{} joined ({})",
            j.file,
            j.key,
            j.columns.len(),
            if j.columns.len() == 1 { "" } else { "s" },
            j.columns.join(", ")
        );
        if j.without_info.is_empty() && j.info_only.is_empty() {
            let _ = writeln!(o, "  every site matched");
        }
        if !j.without_info.is_empty() {
            let _ = writeln!(
                o,
                "  {} site{} with estimates but no row in the site table (kept, characteristics empty): {}",
                j.without_info.len(),
                if j.without_info.len() == 1 { "" } else { "s" },
                list(&j.without_info, 10)
            );
        }
        if !j.info_only.is_empty() {
            let _ = writeln!(
                o,
                "  {} site-table id{} without an estimate (no rows, or left out above): {}",
                j.info_only.len(),
                if j.info_only.len() == 1 { "" } else { "s" },
                list(&j.info_only, 10)
            );
        }
    }
}

/// One line per site (when there are few enough to list).
fn site_table(o: &mut String, r: &SitesReport) {
    let m = &r.model;
    if r.sites.len() <= MAX_LISTED_SITES {
        let with_w = m.w.is_some();
        let _ = writeln!(o);
        let mut head = format!(
            "  {:<20} {:>7} {:>11} {:>10} {:>8}",
            "site", "n", "slope", "se", "r"
        );
        if with_w {
            let _ = write!(head, " {:>12} {:>10}", "interaction", "se");
        }
        let _ = writeln!(o, "{head}");
        for s in &r.sites {
            let id: String = s.study.chars().take(20).collect();
            let mut line = format!(
                "  {:<20} {:>7} {:>11} {:>10} {:>8.3}",
                id,
                s.n,
                num(s.slope),
                num(s.se),
                s.r
            );
            if with_w {
                let _ = write!(
                    line,
                    " {:>12} {:>10}",
                    s.interaction.map(num).unwrap_or_else(|| "—".into()),
                    s.interaction_se.map(num).unwrap_or_else(|| "—".into())
                );
            }
            let _ = writeln!(o, "{line}");
        }
    }
}

/// The second stage: within- and across-site answers and the cautions.
fn stages(o: &mut String, r: &SitesReport, st: &TwoStage) {
    let m = &r.model;
    let w = m.w.as_deref().unwrap_or("w");
    if let Some(f) = &st.within {
        let _ = writeln!(
            o,
            "\nWithin-site moderation: pooled product term {}·{w}",
            m.x
        );
        fit_facts(o, f);
        if let Some(c) = f.coefficients.first() {
            coefficient_line(o, "pooled b3", c, f.model.level);
        }
    }
    if let Some(f) = &st.across {
        let _ = writeln!(
            o,
            "\nAcross-site moderation: site slopes on the site mean of {w}"
        );
        fit_facts(o, f);
        if let Some(c) = f.coefficients.iter().find(|c| c.term == "mean_w") {
            coefficient_line(
                o,
                &format!("slope change per unit of mean {w}"),
                c,
                f.model.level,
            );
        }
    }
    if !st.answers.is_empty() {
        let _ = writeln!(o, "\nWhich answer is which:");
        for a in &st.answers {
            o.push_str(&super::layout::wrap(a, "  ", 88));
        }
    }
    if let Some(f) = &st.characteristics {
        let _ = writeln!(o, "\nSite slopes on the site characteristics:\n");
        o.push_str(&super::text::render(f));
    }
    let _ = writeln!(o, "\nCautions:");
    for c in &st.cautions {
        o.push_str(&super::layout::wrap(&format!("- {c}"), "  ", 88));
    }
}
