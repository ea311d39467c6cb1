//! The one-stage model in words: the formula with the column names, what
//! each answer is about, how it compares with the two-stage answers, notes
//! and cautions.

use super::{Characteristics, SiteMoments};
use crate::result::{Coefficient, OneStage, SitesReport, ZTerm};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};

/// The model with the column names.
pub(super) fn formula(report: &SitesReport, ch: &Characteristics) -> String {
    let m = &report.model;
    let mut s = format!("{} = site intercept + b1·{}", m.y, m.x);
    if let Some(w) = &m.w {
        s.push_str(&format!(
            " + b2·({w} − site mean) + b3·{x}·({w} − site mean) + b4·{x}·(site mean of {w})",
            x = m.x
        ));
    }
    for c in &m.covariates {
        s.push_str(&format!(" + {c}"));
    }
    for c in &ch.names {
        s.push_str(&format!(" + {}·{c}", m.x));
    }
    s.push_str(&format!(
        " + random site slope of {} (variance τ²) + error (variance σ²); REML",
        m.x
    ));
    s
}

fn describe(t: &ZTerm, level: f64) -> String {
    format!(
        "{} ({:.0}% CI {} to {}, p {})",
        num(t.estimate),
        100.0 * level,
        num(t.ci.ci_low),
        num(t.ci.ci_high),
        fmt::p(t.p)
    )
}

fn describe_two(c: &Coefficient) -> String {
    let t = &c.contrast;
    format!(
        "{} (CI {} to {}, p {})",
        num(t.estimate),
        num(t.ci.ci_low),
        num(t.ci.ci_high),
        fmt::p(t.test.p)
    )
}

/// How two answers compare.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Comparison {
    /// Close estimates (apart by no more than the larger SE) and intervals
    /// on the same side of 0.
    Agree,
    /// Close estimates, but one interval excludes 0 and the other does not
    /// (or they exclude it on opposite sides).
    Verdict,
    /// Estimates apart by more than the larger standard error.
    Apart,
}

fn compare(one: &ZTerm, two: &Coefficient) -> Comparison {
    let side = |lo: f64, hi: f64| {
        if lo > 0.0 {
            1
        } else if hi < 0.0 {
            -1
        } else {
            0
        }
    };
    let t = &two.contrast;
    if (one.estimate - t.estimate).abs() > one.se.max(t.se) {
        Comparison::Apart
    } else if side(one.ci.ci_low, one.ci.ci_high) != side(t.ci.ci_low, t.ci.ci_high) {
        Comparison::Verdict
    } else {
        Comparison::Agree
    }
}

/// The sentence for close estimates whose intervals disagree about 0.
fn verdict(side: &str, what: &str, c: &Coefficient) -> String {
    format!(
        "{side}, the estimates are close but only one interval excludes 0: the two-stage {what} gives \
         {}. The one-stage z test treats τ² and σ² as known, the two-stage test uses Knapp–Hartung t (or \
         the test chosen with {}) with its own between-site variance and weights; near the edge of \
         significance such differences decide, so neither verdict is firm.",
        describe_two(c),
        Flag::Inference
    )
}

/// Fills the answers, notes and cautions of `r`.
pub(super) fn fill(
    r: &mut OneStage,
    report: &SitesReport,
    moments: &SiteMoments,
    chars: &[Vec<f64>],
) {
    let m = &report.model;
    let (x, y) = (&m.x, &m.y);
    let level = r.level;
    let mut answers = Vec::new();
    if let (Some(w), Some(within), Some(across)) =
        (&m.w, r.within_interaction, r.across_interaction)
    {
        answers.push(format!(
            "Within sites (one-stage b3): {}. The {x}→{y} slope changes by this much per unit of a \
             participant's own {w} above the mean of their site. It compares participants of the same \
             site, so differences between sites cannot bias it.",
            describe(&within, level)
        ));
        answers.push(format!(
            "Across sites (one-stage b4): {}. Per unit of the site mean of {w}, the slope differs by this \
             much between sites, beyond what the within-site interaction explains. It compares sites, so \
             anything else that differs between those sites can produce it (ecological bias).",
            describe(&across, level)
        ));
        if let Some(st) = &report.stages {
            let two_within = st.within.as_ref().and_then(|f| f.coefficients.first());
            let two_across = st
                .across
                .as_ref()
                .and_then(|f| f.coefficients.iter().find(|c| c.term == "mean_w"));
            if let Some(c) = two_within {
                answers.push(match compare(&within, c) {
                    Comparison::Verdict => verdict("Within sites", "pooled product term", c),
                    Comparison::Apart => {
                    format!(
                        "Within sites, the two answers differ by more than a standard error: the two-stage pooled product term is {}. They \
                         can differ because they weight the sites differently (the two-stage answer weights \
                         each site's own product term by its precision and a between-site variance of \
                         product terms; the one-stage model pools every row with weights from σ² and τ²), \
                         because each site's own regression adjusts for its own {w} main effect and \
                         intercept, and because sites too small for a product term drop out of the \
                         two-stage answer but stay in the one-stage model.",
                        describe_two(c)
                    )
                    }
                    Comparison::Agree => format!(
                        "Within sites, the two answers agree: the two-stage pooled product term is {}.",
                        describe_two(c)
                    ),
                });
            }
            if let Some(c) = two_across {
                answers.push(match compare(&across, c) {
                    Comparison::Verdict => verdict(
                        "Across sites",
                        &format!("regression of the site slopes on the site mean of {w}"),
                        c,
                    ),
                    Comparison::Apart => {
                    format!(
                        "Across sites, the two answers differ by more than a standard error: the two-stage regression of the site slopes on \
                         the site mean of {w} gives {}. The site slopes of that regression come from models \
                         without {w}, so when the within-site interaction is not 0 and a site's slope depends \
                         on how its {x} and {w} go together (and that changes with the site mean of {w}), \
                         the regression mixes within-site and across-site moderation; the one-stage b4 keeps \
                         {x}·({w} − site mean) in the model and so separates them (Hua et al. 2017, Stat Med \
                         36:772; Riley et al. 2020, BMJ 369:m1374). Different weighting of the sites plays a \
                         part too.",
                        describe_two(c)
                    )
                    }
                    Comparison::Agree => format!(
                        "Across sites, the two answers agree: the two-stage regression of the site slopes on \
                         the site mean of {w} gives {}.",
                        describe_two(c)
                    ),
                });
            }
        }
        answers.push(
            "For a question about individuals (does the effect depend on a participant's own value?), read \
             the within-site answer; the across-site answer is about sites."
                .into(),
        );
    } else {
        answers.push(format!(
            "The average {x}→{y} slope (one-stage b1): {}; the site slopes vary around it with SD √τ² = {}.",
            describe(&r.slope, level),
            num(r.variance.slope.estimate.sqrt())
        ));
    }
    for c in &r.characteristics {
        answers.push(format!(
            "Site characteristic '{}': the slope differs by {} per unit between sites; an across-site \
             comparison, with the same limits.",
            c.name,
            describe(&c.term, level)
        ));
    }
    r.answers = answers;
    r.notes = notes(r, report, moments, chars);
    r.cautions = cautions(r);
}

fn notes(
    r: &OneStage,
    report: &SitesReport,
    moments: &SiteMoments,
    chars: &[Vec<f64>],
) -> Vec<String> {
    let mut notes = Vec::new();
    let m = &report.model;
    let two = report.sites.len();
    if r.sites != two {
        notes.push(format!(
            "The one-stage model uses all {} sites with rows; the per-site regressions (and the two-stage \
             answers) use the {two} sites listed with estimates.",
            r.sites
        ));
    }
    if r.search.at_boundary {
        notes.push(format!(
            "τ² is estimated at 0: the restricted likelihood falls as soon as the site slopes are allowed to \
             vary (its derivative at 0 is {}), so the model treats the slope as common to all sites.",
            num(r.search.score_at_zero)
        ));
    }
    let mut zero_outside = Vec::new();
    if let Some(w) = &m.w {
        let means: Vec<f64> = moments
            .sites
            .iter()
            .map(|s| s.moments.mean(moments.layout.w()))
            .collect();
        if !spans_zero(&means) {
            zero_outside.push(format!("the site mean of {w}"));
        }
    }
    for (i, c) in r.characteristics.iter().enumerate() {
        let vals: Vec<f64> = chars.iter().map(|v| v[i]).collect();
        if !spans_zero(&vals) {
            zero_outside.push(format!("'{}'", c.name));
        }
    }
    if !zero_outside.is_empty() {
        notes.push(format!(
            "b1 (slope) is the {} slope where {} = 0, outside the sites' values; centre the column (subtract a \
             typical value) for a slope at a value that occurs. The other terms do not change.",
            m.x,
            zero_outside.join(" and ")
        ));
    }
    notes
}

fn spans_zero(v: &[f64]) -> bool {
    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    lo <= 0.0 && hi >= 0.0
}

fn cautions(r: &OneStage) -> Vec<String> {
    let mut c = vec![
        "Associations across sites (b4 and the site characteristics) are observational, even when every \
         site randomised: sites differ in many ways at once."
            .to_string(),
        "Standard errors treat τ² and σ² as known (z tests); with few sites they are too small and the \
         p-values too low."
            .to_string(),
    ];
    if r.sites < 10 {
        c.push(format!(
            "Only {} sites: τ² and every between-site comparison are estimated imprecisely.",
            r.sites
        ));
    }
    c.push(
        "Decisions about participants, patients, pupils or programmes rest with the responsible \
         professionals and local guidance, not with this output."
            .into(),
    );
    c
}
