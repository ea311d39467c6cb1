//! The terminal summary of `pondus sites`: a pure function of the
//! [`SitesReport`].

use super::layout::{
    bullets, clip, column_width, fact, heading, pad, title, trim_lines, width, MIN_TEXT_WIDTH,
    TEXT_WIDTH,
};
use crate::result::{
    Coefficient, FitReport, SeType, SiteMeasure, SitesInputKind, SitesReport, TwoStage,
};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

/// Sites listed one by one at most; the effects file has them all.
pub const MAX_LISTED_SITES: usize = 40;

fn list(items: &[String], max: usize) -> String {
    let quoted = items.iter().map(|i| format!("'{i}'"));
    crate::support::listing::first_of(quoted, items.len(), max)
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

/// Renders the summary at the default width
/// ([`super::layout::TEXT_WIDTH`]).
pub fn render(r: &SitesReport) -> String {
    render_at(r, TEXT_WIDTH)
}

/// Renders the summary wrapped at `width` characters: the run, the sites
/// left out and the join, the per-site table, notes, the second stage and
/// the cautions (once, those of the second stage's fits included).
pub fn render_at(r: &SitesReport, width: usize) -> String {
    let width = width.max(MIN_TEXT_WIDTH);
    let mut o = String::new();
    run_lines(&mut o, r, width);
    exclusions_and_join(&mut o, r, width);
    site_table(&mut o, r);
    bullets(&mut o, "Notes", &r.notes, width);
    if let Some(st) = &r.stages {
        stages(&mut o, r, st, width);
    }
    if let Some(os) = &r.one_stage {
        super::one_stage::render(&mut o, os, width);
    }
    trim_lines(&o)
}

/// "; N blank rows skipped" when the reader skipped wholly blank rows.
fn blank_rows_text(n: u64) -> String {
    match n {
        0 => String::new(),
        1 => "; 1 blank row skipped".into(),
        n => format!("; {n} blank rows skipped"),
    }
}

/// What was read and how each site's slope was estimated.
fn run_lines(o: &mut String, r: &SitesReport, width: usize) {
    let m = &r.model;
    title(o, "per-site regressions", width);
    let data = if r.input.kind == SitesInputKind::Moments {
        format!(
            "{} (a per-site moments table, {} rows{})",
            r.input.file,
            r.input.rows,
            blank_rows_text(r.input.blank_rows)
        )
    } else {
        format!(
            "{} ({} rows read, {} left out for missing values{})",
            r.input.file,
            r.input.rows,
            r.input.missing_rows,
            blank_rows_text(r.input.blank_rows)
        )
    };
    fact(o, "Data", &data, width);
    if m.effect != SiteMeasure::Slope {
        group_lines(o, r, width);
        return;
    }
    let mut slope = format!("{} on {}", m.y, m.x);
    if !m.covariates.is_empty() {
        let _ = write!(slope, ", adjusted for {}", m.covariates.join(", "));
    }
    fact(o, "Slope", &slope, width);
    if let Some(w) = &m.w {
        let product = format!(
            "{y} = b0 + b1·{x} + b2·{w} + b3·{x}·{w}{cov}; interaction = b3{c}",
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
        fact(o, "Model", &product, width);
    }
    let se = if m.se_type == SeType::Hc3 {
        "HC3 (second pass over the rows)"
    } else {
        "classical OLS"
    };
    fact(o, "SE", se, width);
    fact(
        o,
        "Sites",
        &format!("{} estimated, {} left out", r.sites.len(), r.excluded.len()),
        width,
    );
    let _ = writeln!(o);
}

/// What a group comparison estimated in each site.
fn group_lines(o: &mut String, r: &SitesReport, width: usize) {
    let m = &r.model;
    let treat = m.treat.as_deref().unwrap_or("1");
    let effect = if m.effect == SiteMeasure::Smd {
        format!(
            "Hedges' g of {} between the groups of {} ('{treat}' = treatment)",
            m.y, m.x
        )
    } else {
        format!(
            "log odds ratio of {} = '{}' between the groups of {} ('{treat}' = treatment)",
            m.y,
            m.event.as_deref().unwrap_or("1"),
            m.x
        )
    };
    fact(o, "Effect", &effect, width);
    fact(
        o,
        "Sites",
        &format!("{} estimated, {} left out", r.sites.len(), r.excluded.len()),
        width,
    );
    let _ = writeln!(o);
}

/// One line per site of a group comparison: the group sizes (and events)
/// and the effect with its variance.
fn group_table(o: &mut String, r: &SitesReport) {
    let lw = r
        .sites
        .iter()
        .map(|s| width(&s.study))
        .max()
        .unwrap_or(4)
        .clamp(4, 28);
    heading(o, "Site estimates");
    let smd = r.model.effect == SiteMeasure::Smd;
    let (a, b, e, v) = if smd {
        ("treatment n", "control n", "g", "var(g)")
    } else {
        ("treatment", "control", "log OR", "variance")
    };
    let _ = writeln!(
        o,
        "  {}  {:>6}  {:>12}  {:>12}  {:>9}  {:>9}",
        pad("site", lw),
        "n",
        a,
        b,
        e,
        v
    );
    for s in &r.sites {
        let (a, b, e, v) = match (&s.smd, &s.log_or) {
            (Some(g), _) => (g.treat_n.to_string(), g.ctrl_n.to_string(), g.g, g.var_g),
            (None, Some(t)) => (
                format!("{}/{}", t.treat_events, t.treat_n),
                format!("{}/{}", t.ctrl_events, t.ctrl_n),
                t.log_or,
                t.var_log_or,
            ),
            (None, None) => continue,
        };
        let _ = writeln!(
            o,
            "  {}  {:>6}  {:>12}  {:>12}  {:>9}  {:>9}",
            pad(&clip(&s.study, lw), lw),
            s.n,
            a,
            b,
            fmt::fixed(e, 4),
            fmt::fixed(v, 4)
        );
    }
    let _ = writeln!(o);
}

/// The sites left out, those kept without a product term, and the join
/// with the site table.
fn exclusions_and_join(o: &mut String, r: &SitesReport, width: usize) {
    let mut left_out: Vec<String> = r
        .excluded
        .iter()
        .take(MAX_LISTED_SITES)
        .map(|e| format!("'{}' (n = {}): {}", e.study, e.n, e.reason))
        .collect();
    if r.excluded.len() > MAX_LISTED_SITES {
        left_out.push(format!(
            "... and {} more (see {})",
            r.excluded.len() - MAX_LISTED_SITES,
            Flag::Json
        ));
    }
    bullets(o, "Sites left out", &left_out, width);
    let no_term: Vec<String> = r
        .sites
        .iter()
        .filter_map(|s| s.note.as_ref().map(|n| format!("'{}': {n}", s.study)))
        .collect();
    let no_term: Vec<String> = no_term.into_iter().take(MAX_LISTED_SITES).collect();
    bullets(o, "Sites kept without a product term", &no_term, width);
    if let Some(j) = &r.join {
        let mut lines = vec![format!(
            "{} (id column '{}'): {} characteristic{} joined ({})",
            j.file,
            j.key,
            j.columns.len(),
            if j.columns.len() == 1 { "" } else { "s" },
            j.columns.join(", ")
        )];
        if j.without_info.is_empty() && j.info_only.is_empty() {
            lines.push("every site matched".into());
        }
        if !j.without_info.is_empty() {
            lines.push(format!(
                "{} site{} with estimates but no row in the site table (kept, characteristics empty): {}",
                j.without_info.len(),
                if j.without_info.len() == 1 { "" } else { "s" },
                list(&j.without_info, 10)
            ));
        }
        if !j.info_only.is_empty() {
            lines.push(format!(
                "{} site-table id{} without an estimate (no rows, or left out above): {}",
                j.info_only.len(),
                if j.info_only.len() == 1 { "" } else { "s" },
                list(&j.info_only, 10)
            ));
        }
        bullets(o, "Site characteristics joined", &lines, width);
    }
}

/// One line per site (when there are few enough to list), each number
/// column with one number of decimals.
fn site_table(o: &mut String, r: &SitesReport) {
    let m = &r.model;
    if r.sites.is_empty() || r.sites.len() > MAX_LISTED_SITES {
        return;
    }
    if m.effect != SiteMeasure::Slope {
        group_table(o, r);
        return;
    }
    let with_w = m.w.is_some();
    let lw = column_width(r.sites.iter().map(|s| width(&s.study)), 4, 28);
    let dec = |xs: &mut dyn Iterator<Item = f64>| fmt::column_decimals(xs);
    let (slope_d, se_d) = (
        dec(&mut r.sites.iter().map(|s| s.slope)),
        dec(&mut r.sites.iter().map(|s| s.se)),
    );
    let (int_d, int_se_d) = (
        dec(&mut r.sites.iter().filter_map(|s| s.interaction)),
        dec(&mut r.sites.iter().filter_map(|s| s.interaction_se)),
    );
    heading(o, "Site estimates");
    let mut head = format!(
        "  {}  {:>6}  {:>10}  {:>9}  {:>6}",
        pad("site", lw),
        "n",
        "slope",
        "SE",
        "r"
    );
    if with_w {
        let _ = write!(head, "  {:>11}  {:>9}", "interaction", "SE");
    }
    let _ = writeln!(o, "{head}");
    let cell = |x: Option<f64>, d: usize| x.map_or_else(|| "—".into(), |x| fmt::fixed(x, d));
    for s in &r.sites {
        let mut line = format!(
            "  {}  {:>6}  {:>10}  {:>9}  {:>6}",
            pad(&clip(&s.study, lw), lw),
            s.n,
            fmt::fixed(s.slope, slope_d),
            fmt::fixed(s.se, se_d),
            fmt::fixed(s.r, 3)
        );
        if with_w {
            let _ = write!(
                line,
                "  {:>11}  {:>9}",
                cell(s.interaction, int_d),
                cell(s.interaction_se, int_se_d)
            );
        }
        let _ = writeln!(o, "{line}");
    }
    let _ = writeln!(o);
}

/// The second stage: within- and across-site answers, the meta-regression
/// on the site characteristics, and the cautions of the run and of every
/// fit in it, each once.
fn stages(o: &mut String, r: &SitesReport, st: &TwoStage, width: usize) {
    let m = &r.model;
    let w = m.w.as_deref().unwrap_or("w");
    if let Some(f) = &st.within {
        heading(
            o,
            &format!("Within-site moderation: pooled product term {}·{w}", m.x),
        );
        fit_facts(o, f);
        if let Some(c) = f.coefficients.first() {
            coefficient_line(o, "pooled b3", c, f.model.level);
        }
        let _ = writeln!(o);
    }
    if let Some(f) = &st.across {
        heading(
            o,
            &format!("Across-site moderation: site slopes on the site mean of {w}"),
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
        let _ = writeln!(o);
    }
    bullets(o, "Which answer is which", &st.answers, width);
    if let Some(f) = &st.characteristics {
        heading(
            o,
            match (
                f.model.moderators.is_empty(),
                m.effect == SiteMeasure::Slope,
            ) {
                (true, true) => "The pooled slope across sites",
                (true, false) => "The pooled effect across sites",
                (false, true) => "Site slopes on the site characteristics",
                (false, false) => "Site effects on the site characteristics",
            },
        );
        for line in super::text::render_embedded(f, width - 2).lines() {
            if line.is_empty() {
                let _ = writeln!(o);
            } else {
                let _ = writeln!(o, "  {line}");
            }
        }
    }
    bullets(o, "Cautions", &st.cautions, width);
}
