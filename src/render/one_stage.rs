//! The one-stage model in the terminal summary of `pondus sites`: a pure
//! function of the [`OneStage`] result.

use super::layout::{bullets, fact, heading};
use crate::result::{OneStage, ProfiledVariance, ZTerm};
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

fn term_line(o: &mut String, label: &str, t: &ZTerm, level: f64) {
    let _ = writeln!(
        o,
        "  {label}: {}  (SE {}, {:.0}% CI [{}, {}], z {}, p {})",
        num(t.estimate),
        num(t.se),
        100.0 * level,
        num(t.ci.ci_low),
        num(t.ci.ci_high),
        fmt::fixed(t.statistic, 2),
        fmt::p(t.p)
    );
}

fn variance_line(o: &mut String, label: &str, v: &ProfiledVariance, level: f64) {
    let _ = writeln!(
        o,
        "  {label}: {}  ({:.0}% profile-likelihood CI [{}, {}])",
        num(v.estimate),
        100.0 * level,
        num(v.ci.ci_low),
        num(v.ci.ci_high)
    );
}

/// The one-stage section: the model, the fixed effects, the variances,
/// the answers in words (beside the two-stage ones), notes and cautions.
pub fn render(o: &mut String, r: &OneStage, width: usize) {
    heading(o, "One-stage model (all rows, random site slope, REML)");
    fact(o, "Model", &r.model, width);
    fact(
        o,
        "Data",
        &format!("{} sites, {} rows", r.sites, r.rows),
        width,
    );
    let level = r.level;
    term_line(o, "b1 slope", &r.slope, level);
    if let Some(t) = &r.w_within {
        term_line(o, "b2 w within sites", t, level);
    }
    if let Some(t) = &r.within_interaction {
        term_line(o, "b3 within-site interaction", t, level);
    }
    if let Some(t) = &r.across_interaction {
        term_line(o, "b4 across-site interaction", t, level);
    }
    for c in &r.covariates {
        term_line(o, &format!("covariate {}", c.name), &c.term, level);
    }
    for c in &r.characteristics {
        term_line(o, &format!("slope × {}", c.name), &c.term, level);
    }
    variance_line(o, "τ² (site slopes)", &r.variance.slope, level);
    variance_line(o, "σ² (residual)", &r.variance.residual, level);
    let _ = writeln!(o);
    bullets(o, "What the one-stage model says", &r.answers, width);
    bullets(o, "One-stage notes", &r.notes, width);
    bullets(o, "One-stage cautions", &r.cautions, width);
}
