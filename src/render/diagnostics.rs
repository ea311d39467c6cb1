//! Terminal sections of the robustness diagnostics (`--loo`, `--influence`,
//! `--permutations`, `--small-study`, `--cumulative-by`), rendered from the
//! public result only.

use super::layout::{
    clip, column_width, fit_columns, head_with_text, last_column_room, lpad, pad, row_with_text,
    width, wrap, Ctx, MAX_LISTED_STUDIES,
};
use crate::result::{
    AtValue, ConclusionChange, ConclusionKind, FitReport, InfluenceFlag, LeaveOneOut,
};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

fn label_width(labels: impl Iterator<Item = usize>) -> usize {
    column_width(labels, 5, 28)
}

/// A reversed conclusion in a few words: "moderator test lost",
/// "session_minutes gained" (its interval now excludes 0).
pub(crate) fn change_text(c: &ConclusionChange) -> String {
    let what = match c.kind {
        ConclusionKind::ModeratorTest => "moderator test".to_string(),
        ConclusionKind::Average => "average".to_string(),
        ConclusionKind::Coefficient => c.term.clone().unwrap_or_default(),
    };
    let how = if c.significant_with && !c.significant_without {
        "lost"
    } else {
        "gained"
    };
    format!("{what} {how}")
}

/// The reversed conclusions of one removal, joined by commas.
pub(crate) fn changes_text(cs: &[ConclusionChange]) -> String {
    cs.iter().map(change_text).collect::<Vec<_>>().join(", ")
}

/// The header of the average column: "average" with the reading scale's name.
pub(crate) fn average_header(r: &FitReport) -> String {
    match &r.measure.reading_name {
        Some(name) => format!("average ({name})"),
        None => "average".into(),
    }
}

/// Most moderator coefficients shown as columns of the terminal's
/// leave-one-out and influence tables (`--json` and `--table` have all).
const MAX_TERM_COLUMNS: usize = 3;

/// The longest coefficient name in a column header of those tables; a
/// longer one is shortened in the middle.
const MAX_TERM_HEADER: usize = 16;

/// "1 more coefficient is" / "3 more coefficients are": the columns a
/// narrow terminal leaves out.
fn more_coefficients(n: usize) -> String {
    if n == 1 {
        "1 more coefficient is".into()
    } else {
        format!("{n} more coefficients are")
    }
}

/// Leave-one-out (`--loo`): the model refitted without each study.
pub fn leave_one_out(r: &FitReport, cx: &Ctx, o: &mut String) {
    let has_mods = r.model.terms.len() > 1;
    let Some(loo) = &r.leave_one_out else {
        return;
    };
    let _ = writeln!(o, "Leave-one-out (the model refitted without each study)");
    let terms: Vec<&String> = if has_mods {
        r.model
            .terms
            .iter()
            .skip(1)
            .take(MAX_TERM_COLUMNS)
            .collect()
    } else {
        Vec::new()
    };
    let flagged = loo.iter().filter(|l| !l.changes.is_empty()).count();
    let list_all = loo.len() <= MAX_LISTED_STUDIES;
    let listed = |l: &&LeaveOneOut| list_all || !l.changes.is_empty() || l.problem.is_some();
    let avg_head = average_header(r);
    let aw = width(&avg_head).max(9);
    let heads: Vec<String> = terms.iter().map(|t| clip(t, MAX_TERM_HEADER)).collect();
    let tw: Vec<usize> = heads.iter().map(|t| width(t).max(9)).collect();
    let tested = if has_mods { "test p" } else { "p" };
    // τ² and p columns as wide as their widest cell.
    let tau_cells: Vec<String> = loo.iter().map(|l| fmt::opt_num(l.tau2)).collect();
    let p_cells: Vec<String> = loo
        .iter()
        .map(|l| {
            l.moderator_p
                .or(l.average_p)
                .map(fmt::p_cell)
                .unwrap_or("—".into())
        })
        .collect();
    let widest = |cells: &[String], head: &str| {
        cells
            .iter()
            .map(|c| width(c))
            .max()
            .unwrap_or(0)
            .max(width(head))
    };
    let (zw, pw) = (widest(&tau_cells, "τ²"), widest(&p_cells, tested));
    // Cells besides the label and the terms: the label's and the average's
    // blanks and the average, τ², I², p and the blanks before the text.
    let fixed = 2 + 2 + aw + (2 + zw) + (2 + 6) + (2 + pw) + 2;
    let with_blanks: Vec<usize> = tw.iter().map(|w| w + 2).collect();
    let wanted = label_width(loo.iter().map(|l| width(&l.study)));
    // The header's words must fit beside the row; a longer text of a row
    // goes below it.
    let last = last_column_room("conclusion changed");
    let (lw, shown) = fit_columns(wanted, fixed, &with_blanks, last, cx.width);
    let mut head = format!("  {}  {}", pad("without", lw), lpad(&avg_head, aw));
    for (t, w) in heads.iter().zip(&tw).take(shown) {
        let _ = write!(head, "  {}", lpad(t, *w));
    }
    let _ = write!(
        head,
        "  {}  {}  {}  ",
        lpad("τ²", zw),
        lpad("I²", 6),
        lpad(tested, pw)
    );
    o.push_str(&head_with_text(&head, "conclusion changed", cx.width));
    let first = usize::from(has_mods);
    for l in loo.iter().filter(listed) {
        let mut line = format!("  {}", pad(&clip(&l.study, lw), lw));
        if let Some(why) = &l.problem {
            o.push_str(&row_with_text(
                &format!("{line}  "),
                &format!("no answer: {why}"),
                cx.width,
            ));
            continue;
        }
        let _ = write!(
            line,
            "  {}",
            lpad(&fmt::opt_num(l.average_reading.or(l.average)), aw)
        );
        for (j, w) in tw.iter().enumerate().take(shown) {
            let c = l.coefficients.get(first + j).copied();
            let _ = write!(line, "  {}", lpad(&fmt::opt_num(c), *w));
        }
        let p = l.moderator_p.or(l.average_p);
        let _ = write!(
            line,
            "  {}  {}  {}  ",
            lpad(&fmt::opt_num(l.tau2), zw),
            lpad(&l.i2.map(fmt::percent).unwrap_or("—".into()), 6),
            lpad(&p.map(fmt::p_cell).unwrap_or("—".into()), pw),
        );
        o.push_str(&row_with_text(&line, &changes_text(&l.changes), cx.width));
    }
    if !list_all {
        let _ = writeln!(
            o,
            "  (only the flagged studies are listed; {} and {} have all {})",
            Flag::Json,
            Flag::Table,
            loo.len()
        );
    }
    o.push_str(&loo_words(r, cx, flagged, loo.len(), shown));
    let _ = writeln!(o);
}

/// The paragraph under the leave-one-out table: the flagging rule, what the
/// average is, and the coefficients a narrow table left out.
fn loo_words(r: &FitReport, cx: &Ctx, flagged: usize, k: usize, shown: usize) -> String {
    let alpha = 1.0 - r.model.level;
    let has_mods = r.model.terms.len() > 1;
    let more = r.model.terms.len().saturating_sub(1 + shown);
    let hidden = if more > 0 {
        format!(
            " {} in {} and {}.",
            more_coefficients(more),
            Flag::Json,
            Flag::Table
        )
    } else {
        String::new()
    };
    let rule = if has_mods {
        format!(
            "the moderator test crossing α = {alpha:.2}, or a moderator coefficient whose \
             {} interval excluded 0 no longer doing so, or the reverse",
            cx.level_pct
        )
    } else {
        "the average effect's interval ceasing to exclude 0, or starting to".to_string()
    };
    let sign = if has_mods {
        " A sign change of a coefficient that its interval does not separate from 0 is not \
         flagged."
    } else {
        ""
    };
    let avg = if has_mods {
        "The average is that of the model without moderators on the same studies"
    } else {
        "The average is the model's own"
    };
    wrap(
        &format!(
            "{flagged} of {} removals change a conclusion ({rule}); \"lost\" means it no longer \
             holds without the study, \"gained\" that it holds only without it.{sign} {avg}, \
             shown on the reading scale where the measure has one.{hidden} A flagged study is \
             a reason to check its data and design, not to drop it.",
            k
        ),
        "  ",
        cx.width - 2,
    )
}

/// An influence flag in a few words.
pub(crate) fn flag_text(f: InfluenceFlag, has_mods: bool) -> &'static str {
    match (f, has_mods) {
        (InfluenceFlag::ChangesConclusion, _) => "changes a conclusion",
        (InfluenceFlag::MovesCoefficient, true) => "moves a coefficient",
        (InfluenceFlag::MovesCoefficient, false) => "moves the average",
        (InfluenceFlag::UnusualEffect, _) => "unusual effect",
        (InfluenceFlag::HighLeverage, _) => "high leverage",
    }
}

/// The flags of one study, joined by commas.
pub(crate) fn flags_text(fs: &[InfluenceFlag], has_mods: bool) -> String {
    fs.iter()
        .map(|f| flag_text(*f, has_mods))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The rules behind the influence flags, in words with their sources.
pub(crate) fn influence_rules_text(r: &FitReport) -> Option<String> {
    let rules = r.influence_rules.as_ref()?;
    let has_mods = r.model.terms.len() > 1;
    let k = r.influence.as_ref().map_or(0, Vec::len);
    let p = r.model.terms.len();
    let what = if has_mods {
        "a moderator coefficient"
    } else {
        "the average"
    };
    Some(format!(
        "Flags: \"changes a conclusion\" by the rule of the leave-one-out table; \"{}\" when \
         leaving the study out moves {what} by more than 2/√k = {} of its standard error (the \
         size-adjusted cut-off of Belsley, Kuh & Welsch 1980); \"unusual effect\" when the \
         deleted residual is beyond ±{} (the Bonferroni outlier test at α/k, Cook & Weisberg \
         1982); \"high leverage\" above 2p/k = {} (twice the average leverage p/k, k = {k}, \
         p = {p}; Hoaglin & Welsch 1978). These are rules of thumb in common practice.",
        flag_text(InfluenceFlag::MovesCoefficient, has_mods),
        num(rules.coefficient_shift_se),
        fmt::fixed(rules.deleted_residual, 2),
        num(rules.leverage),
    ))
}

/// The influence view (`--influence`): how far each study moves the
/// answer, then how unusual it is and how much pull it has.
pub fn influence(r: &FitReport, cx: &Ctx, o: &mut String) {
    let (Some(inf), Some(rules)) = (&r.influence, &r.influence_rules) else {
        return;
    };
    let has_mods = r.model.terms.len() > 1;
    let _ = writeln!(o, "Influence: how far each study moves the answer");
    let mut with = format!(
        "  with every study: average {}",
        num(rules.average_reading.unwrap_or(rules.average))
    );
    if let Some(name) = &r.measure.reading_name {
        let _ = write!(with, " (as {name})");
    }
    if let Some(p) = rules.moderator_p {
        let _ = write!(with, "; moderator test p {}", fmt::p(p));
    }
    let _ = writeln!(o, "{with}");
    let terms: Vec<&String> = if has_mods {
        r.model
            .terms
            .iter()
            .skip(1)
            .take(MAX_TERM_COLUMNS)
            .collect()
    } else {
        Vec::new()
    };
    let first = usize::from(has_mods);
    let list_all = inf.len() <= MAX_LISTED_STUDIES;
    let ah = format!("Δ {}", average_header(r));
    let aw = width(&ah).max(9);
    // Each moderator coefficient's move in its standard errors; without
    // moderators, the average's (the quantity its flag reads).
    let heads: Vec<String> = if has_mods {
        terms
            .iter()
            .map(|t| format!("Δ {}", clip(t, MAX_TERM_HEADER)))
            .collect()
    } else {
        vec!["Δ in SE".to_string()]
    };
    let tw: Vec<usize> = heads.iter().map(|h| width(h).max(8)).collect();
    // Cells besides the label and the terms: blanks, the average's move,
    // p without (with moderators), residual, leverage, blanks before flags.
    let fixed = 2 + 2 + aw + if has_mods { 2 + 9 } else { 0 } + (2 + 8) + (2 + 8) + 2;
    let with_blanks: Vec<usize> = tw.iter().map(|w| w + 2).collect();
    let wanted = label_width(inf.iter().map(|l| width(&l.study)));
    let last = last_column_room("flags");
    let (lw, shown) = if has_mods {
        fit_columns(wanted, fixed, &with_blanks, last, cx.width)
    } else {
        // Without moderators the one Δ-in-SE column always stays.
        let (lw, _) = fit_columns(wanted, fixed + with_blanks[0], &[], last, cx.width);
        (lw, 1)
    };
    let mut head = format!("  {}  {}", pad("study", lw), lpad(&ah, aw));
    for (h, w) in heads.iter().zip(&tw).take(shown) {
        let _ = write!(head, "  {}", lpad(h, *w));
    }
    if has_mods {
        let _ = write!(head, "  {}", lpad("p without", 9));
    }
    let _ = write!(head, "  {}  {}  ", lpad("residual", 8), lpad("leverage", 8));
    o.push_str(&head_with_text(&head, "flags", cx.width));
    for s in inf {
        if !list_all && s.flags.is_empty() && s.problem.is_none() {
            continue;
        }
        let mut line = format!("  {}", pad(&clip(&s.study, lw), lw));
        let shift = s.average_shift_reading.or(s.average_shift);
        let shift = shift.map(|x| fmt::fixed(x, 4)).unwrap_or("—".into());
        let _ = write!(line, "  {}", lpad(&shift, aw));
        if let Some(why) = &s.problem {
            let text = format!("leverage {}; no refit: {why}", fmt::fixed(s.leverage, 3));
            o.push_str(&row_with_text(&format!("{line}  "), &text, cx.width));
            continue;
        }
        for (j, w) in tw.iter().enumerate().take(shown) {
            let c = s.coefficient_shifts_se.get(first + j).copied();
            let _ = write!(
                line,
                "  {}",
                lpad(&c.map(|c| fmt::fixed(c, 2)).unwrap_or("—".into()), *w)
            );
        }
        if has_mods {
            let _ = write!(
                line,
                "  {}",
                lpad(&fmt::opt_p_cell(s.moderator_p_without), 9)
            );
        }
        let _ = write!(
            line,
            "  {}  {}  ",
            lpad(
                &s.deleted_residual
                    .map(|x| fmt::fixed(x, 2))
                    .unwrap_or("—".into()),
                8
            ),
            lpad(&fmt::fixed(s.leverage, 3), 8),
        );
        o.push_str(&row_with_text(
            &line,
            &flags_text(&s.flags, has_mods),
            cx.width,
        ));
    }
    if !list_all {
        let _ = writeln!(
            o,
            "  (only the flagged studies are listed; {} and {} have all {})",
            Flag::Json,
            Flag::Table,
            inf.len()
        );
    }
    o.push_str(&cx.para(&influence_words(r, shown)));
    let _ = writeln!(o);
}

/// The paragraph under the influence table: what Δ, the residual and the
/// leverage are, the flagging rules, and the coefficients a narrow table left out.
fn influence_words(r: &FitReport, shown: usize) -> String {
    let inf = r.influence.as_deref().unwrap_or_default();
    let has_mods = r.model.terms.len() > 1;
    let n = inf.iter().filter(|s| !s.flags.is_empty()).count();
    let reading = if r.measure.reading_name.is_some() {
        " on the reading scale"
    } else {
        ""
    };
    let mut words = format!(
        "{n} of {} studies flagged. Δ: the change when the study is left out (the average{reading}, \
         from the model without moderators on the same studies; each coefficient in its standard \
         errors). The residual is the deleted residual: the study's effect against the model \
         fitted without it, in standard deviations; \
         leverage is its pull on its own fitted value. ",
        inf.len()
    );
    words.push_str(&influence_rules_text(r).unwrap_or_default());
    let more = r.model.terms.len().saturating_sub(1 + shown);
    if has_mods && more > 0 {
        let _ = write!(
            words,
            " The {} in {} and {}.",
            if more == 1 {
                "move of 1 more coefficient is".to_string()
            } else {
                format!("moves of {more} more coefficients are")
            },
            Flag::Json,
            Flag::Table
        );
    }
    words.push_str(" A flagged study deserves a second look at its data and design, not removal.");
    words
}

/// The permutation test of the moderators (`--permutations`).
pub fn permutation(r: &FitReport, cx: &Ctx, o: &mut String) {
    if let Some(p) = &r.permutation {
        let how = if p.exact {
            format!(
                "all {} distinct arrangements of the moderator values",
                p.permutations
            )
        } else {
            format!(
                "{} random permutations of the moderator values, seed {}",
                p.permutations,
                p.seed.unwrap_or_default()
            )
        };
        let _ = writeln!(o, "Permutation test of the moderators");
        let _ = writeln!(o, "  {how}");
        let model_p = r
            .moderator_test
            .as_ref()
            .map(|t| {
                format!(
                    " (from the {} distribution: p {})",
                    t.distribution,
                    fmt::p(t.p)
                )
            })
            .unwrap_or_default();
        let _ = writeln!(
            o,
            "  moderator test        permutation p {}{model_p}",
            fmt::p(p.moderator_p)
        );
        for (c, cp) in r.coefficients.iter().zip(&p.coefficient_p) {
            if let Some(cp) = cp {
                let _ = writeln!(
                    o,
                    "  {}  permutation p {}",
                    pad(&clip(&c.term, 20), 20),
                    fmt::p(*cp)
                );
            }
        }
        if p.failed > 0 {
            let _ = writeln!(
                o,
                "  ({} arrangements could not be refitted and are left out)",
                p.failed
            );
        }
        let smallest = if p.exact {
            1.0 / p.permutations as f64
        } else {
            1.0 / (p.permutations as f64 + 1.0)
        };
        o.push_str(&wrap(
            &format!(
                "The permutation p does not rely on the F or normal distribution; with these \
                 arrangements it cannot be smaller than {}.",
                num(smallest)
            ),
            "  ",
            cx.width - 2,
        ));
        let _ = writeln!(o);
    }
}

/// The small-study tests and trim-and-fill (`--small-study`).
pub fn small_study(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    if let Some(s) = &r.small_study {
        let _ = writeln!(o, "Small-study effects");
        let a = &s.asymmetry_test;
        o.push_str(&wrap(
            &format!(
                "regression test (effect on its standard error, weights 1/variance{}): slope {} \
                 (SE {}), t({}) = {:.2}, p {}",
                if a.with_moderators {
                    ", with the moderators"
                } else {
                    ""
                },
                num(a.slope),
                num(a.se),
                a.df,
                a.statistic,
                fmt::p(a.p)
            ),
            "  ",
            cx.width - 2,
        ));
        o.push_str(&wrap(
            &format!(
                "rank correlation (Kendall's τ between standardised effects and variances): \
                 τ = {:.3}, p {}",
                s.rank_test.tau,
                fmt::p(s.rank_test.p)
            ),
            "  ",
            cx.width - 2,
        ));
        let t = &s.trim_fill;
        let mut tf = format!(
            "trim-and-fill (average effect, no moderators): {} {} filled on the {}; average \
             with them {} ({level_pct} CI {}), observed studies alone {}",
            t.filled,
            if t.filled == 1 { "study" } else { "studies" },
            t.side,
            num(t.estimate),
            fmt::interval(t.ci.ci_low, t.ci.ci_high),
            num(t.estimate_observed)
        );
        if let (Some(rd), Some(name)) = (&t.reading, &r.measure.reading_name) {
            let _ = write!(
                tf,
                "; as {name}: {} {}",
                num(rd.estimate),
                fmt::interval(rd.ci.ci_low, rd.ci.ci_high)
            );
        }
        o.push_str(&wrap(&tf, "  ", cx.width - 2));
        for (name, reg, what) in [
            ("PET", &s.pet, "standard error"),
            ("PEESE", &s.peese, "variance"),
        ] {
            o.push_str(&wrap(
                &format!(
                    "{name} (effect on its {what}, weights 1/variance{}): intercept {} \
                     ({level_pct} CI {}, t({}) = {:.2}, p {}), slope {} (SE {})",
                    if a.with_moderators {
                        ", with the moderators; the intercept is at every moderator 0"
                    } else {
                        ""
                    },
                    num(reg.intercept.estimate),
                    fmt::interval(reg.intercept.ci.ci_low, reg.intercept.ci.ci_high),
                    fmt::df(reg.intercept.test.df.unwrap_or(f64::NAN)),
                    reg.intercept.test.statistic,
                    fmt::p(reg.intercept.test.p),
                    num(reg.slope.estimate),
                    num(reg.slope.se)
                ),
                "  ",
                cx.width - 2,
            ));
        }
        o.push_str(&wrap(
            &format!(
                "conditional PET-PEESE estimate: {} (the {} intercept; PET's intercept p {} \
                 0.10)",
                num(s.conditional.estimate.estimate),
                if s.conditional.used == crate::result::PetPeeseChoice::Peese {
                    "PEESE"
                } else {
                    "PET"
                },
                if s.conditional.used == crate::result::PetPeeseChoice::Peese {
                    "<"
                } else {
                    "≥"
                }
            ),
            "  ",
            cx.width - 2,
        ));
        for c in &s.cautions {
            let w = wrap(c, "    ", cx.width - 4);
            let _ = write!(o, "  - {}", w.trim_start());
        }
        let _ = writeln!(o);
    }
}

/// The cumulative meta-analysis (`--cumulative-by`).
pub fn cumulative(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    if let (Some(steps), Some(ord)) = (&r.cumulative, &r.cumulative_order) {
        let _ = writeln!(
            o,
            "Cumulative meta-analysis (average effect, studies added by {}, {})",
            ord.column,
            if ord.order == crate::result::SortOrder::Numeric {
                "ascending numbers"
            } else {
                "text in code-point order"
            }
        );
        let lw = label_width(steps.iter().map(|s| width(&s.study)));
        let vw = column_width(steps.iter().map(|s| width(&value_text(&s.value))), 5, 16);
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}  {}",
            pad("adding", lw),
            pad(&clip(&ord.column, vw), vw),
            lpad("k", 4),
            lpad("average", 9),
            pad(&format!("{level_pct} CI"), 19),
            lpad("p", 8),
            lpad("τ²", 9)
        );
        let many = steps.len() > MAX_LISTED_STUDIES;
        for (n, s) in steps.iter().enumerate() {
            if many && n >= MAX_LISTED_STUDIES / 2 && n + MAX_LISTED_STUDIES / 2 < steps.len() {
                if n == MAX_LISTED_STUDIES / 2 {
                    let _ = writeln!(o, "  ... (all steps are in {})", Flag::Json);
                }
                continue;
            }
            let ci = match (s.ci.ci_low, s.ci.ci_high) {
                (Some(a), Some(b)) => fmt::interval(a, b),
                _ => "—".into(),
            };
            let _ = writeln!(
                o,
                "  {}  {}  {}  {}  {}  {}  {}",
                pad(&clip(&s.study, lw), lw),
                pad(&clip(&value_text(&s.value), vw), vw),
                lpad(&s.k.to_string(), 4),
                lpad(&fmt::opt_num(s.estimate), 9),
                pad(&ci, 19),
                lpad(&s.p.map(fmt::p_cell).unwrap_or("—".into()), 8),
                lpad(&fmt::opt_num(s.tau2), 9)
            );
        }
        o.push_str(&wrap(
            "The first row is the first study alone (normal interval). A cumulative analysis \
             shows how the evidence built up; its p-values are repeated looks at growing data \
             and are not adjusted for that.",
            "  ",
            cx.width - 2,
        ));
        let _ = writeln!(o);
    }
}

fn value_text(v: &AtValue) -> String {
    match v {
        AtValue::Number(x) => format!("{x}"),
        AtValue::Level(l) => l.clone(),
    }
}
