//! Terminal sections of the robustness diagnostics (`--loo`, `--influence`,
//! `--permutations`, `--small-study`, `--cumulative-by`), rendered from the
//! public result only.

use super::layout::{clip, lpad, pad, width, wrap, Ctx, MAX_LISTED_STUDIES};
use crate::result::{AtValue, FitReport};
use crate::support::flag::Flag;
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

fn label_width(labels: impl Iterator<Item = usize>) -> usize {
    labels.max().unwrap_or(5).clamp(5, 28)
}

/// Leave-one-out (`--loo`): the model refitted without each study.
pub fn leave_one_out(r: &FitReport, _: &Ctx, o: &mut String) {
    let alpha = 1.0 - r.model.level;
    let has_mods = r.model.terms.len() > 1;
    if let Some(loo) = &r.leave_one_out {
        let _ = writeln!(o, "Leave-one-out (the model refitted without each study)");
        let tested = if has_mods {
            "moderator test p"
        } else {
            "average effect p"
        };
        let terms: Vec<&String> = if has_mods {
            r.model.terms.iter().skip(1).take(3).collect()
        } else {
            r.model.terms.iter().take(1).collect()
        };
        let first = usize::from(has_mods);
        let flagged = loo
            .iter()
            .filter(|l| l.sign_changed || l.significance_changed)
            .count();
        let list_all = loo.len() <= MAX_LISTED_STUDIES;
        let lw = label_width(loo.iter().map(|l| width(&l.study)));
        let mut head = format!("  {}", pad("without", lw));
        for t in &terms {
            let _ = write!(head, "  {}", lpad(&clip(t, 10), 10));
        }
        let _ = write!(
            head,
            "  {}  {}  {}  flag",
            lpad("τ²", 10),
            lpad("I²", 6),
            lpad("p", 8)
        );
        let _ = writeln!(o, "{head}");
        for l in loo {
            let flag = match (l.sign_changed, l.significance_changed) {
                (true, true) => "sign, significance",
                (true, false) => "sign",
                (false, true) => "significance",
                (false, false) => "",
            };
            if !list_all && flag.is_empty() {
                continue;
            }
            let mut line = format!("  {}", pad(&clip(&l.study, lw), lw));
            if l.problem.is_some() {
                let _ = writeln!(
                    o,
                    "{line}  no answer: {}",
                    l.problem.as_deref().unwrap_or("")
                );
                continue;
            }
            for j in 0..terms.len() {
                let c = l.coefficients.get(first + j).copied();
                let _ = write!(line, "  {}", lpad(&fmt::opt_num(c), 10));
            }
            let p = l.moderator_p.or(l.average_p);
            let _ = write!(
                line,
                "  {}  {}  {}  {flag}",
                lpad(&fmt::opt_num(l.tau2), 10),
                lpad(&l.i2.map(fmt::percent).unwrap_or("—".into()), 6),
                lpad(&p.map(fmt::p_cell).unwrap_or("—".into()), 8)
            );
            let _ = writeln!(o, "{line}");
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
        let what = if has_mods {
            "a moderator coefficient changes sign, or the moderator test crosses"
        } else {
            "the average effect changes sign, or its test crosses"
        };
        o.push_str(&wrap(
            &format!(
                "{flagged} of {} removals flagged ({what} α = {alpha:.2}); {tested} from the \
                 model's own inference. A flagged study is a reason to check its data and \
                 design, not to drop it.",
                loo.len()
            ),
            "  ",
            70,
        ));
        let _ = writeln!(o);
    }
}

/// The influence measures of each study (`--influence`).
pub fn influence(r: &FitReport, _: &Ctx, o: &mut String) {
    if let (Some(inf), Some(cut)) = (&r.influence, &r.influence_cutoffs) {
        let _ = writeln!(o, "Influence of each study (Viechtbauer & Cheung 2010)");
        let list_all = inf.len() <= MAX_LISTED_STUDIES;
        let lw = label_width(inf.iter().map(|l| width(&l.study)));
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}  {}  {}  cut-offs exceeded",
            pad("study", lw),
            lpad("rstudent", 8),
            lpad("DFFITS", 7),
            lpad("Cook's D", 8),
            lpad("COVRATIO", 8),
            lpad("hat", 6),
            lpad("τ² (−i)", 9),
            lpad("Q (−i)", 8)
        );
        let f2 = |x: Option<f64>| x.map(|x| format!("{x:.3}")).unwrap_or("—".into());
        for s in inf {
            if !list_all && !s.influential {
                continue;
            }
            let _ = writeln!(
                o,
                "  {}  {}  {}  {}  {}  {}  {}  {}  {}{}",
                pad(&clip(&s.study, lw), lw),
                lpad(&f2(s.rstudent), 8),
                lpad(&f2(s.dffits), 7),
                lpad(&f2(s.cooks_distance), 8),
                lpad(&f2(s.cov_ratio), 8),
                lpad(&format!("{:.3}", s.hat), 6),
                lpad(&fmt::opt_num(s.tau2_deleted), 9),
                lpad(
                    &s.q_deleted.map(|q| format!("{q:.2}")).unwrap_or("—".into()),
                    8
                ),
                s.exceeded
                    .iter()
                    .map(|c| c.id())
                    .collect::<Vec<_>>()
                    .join(", "),
                if s.influential {
                    "  ← influential"
                } else {
                    ""
                }
            );
        }
        if !list_all {
            let _ = writeln!(
                o,
                "  (only the influential studies are listed; {} and {} have all {})",
                Flag::Json,
                Flag::Table,
                inf.len()
            );
        }
        let n = inf.iter().filter(|s| s.influential).count();
        o.push_str(&wrap(
            &format!(
                "{n} of {} studies influential by the cut-offs |DFFITS| > {:.3}, Cook's D > {:.3}, \
                 hat > {:.3} (rules of thumb in common practice); |rstudent| > {:.2} marks an \
                 outlying effect. An influential study deserves a second look, not removal.",
                inf.len(),
                cut.dffits,
                cut.cooks_distance,
                cut.hat,
                cut.rstudent
            ),
            "  ",
            70,
        ));
        let _ = writeln!(o);
    }
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
        let vw = steps
            .iter()
            .map(|s| width(&value_text(&s.value)))
            .max()
            .unwrap_or(5)
            .clamp(5, 16);
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
