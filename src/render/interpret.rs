//! The terminal sections of `--probe`, `--compare-levels`, `--regions` and
//! the artifact corrections (part of the text report; pure function of the result).

use super::layout::{item, pad_apart as pad, wrap, Ctx, MAX_LISTED_STUDIES};
use crate::result::{AtValue, ContrastTest, FitReport, QuantityKind};
use crate::support::format::{self as fmt, num};
use std::fmt::Write as _;

fn at(v: &AtValue) -> String {
    match v {
        AtValue::Number(x) => crate::support::format::short(*x),
        AtValue::Level(l) => l.clone(),
    }
}

fn test_text(t: &ContrastTest) -> String {
    let stat = match t.test.df {
        Some(df) => format!("t({df}) = {:.2}", t.test.statistic),
        None => format!("z = {:.2}", t.test.statistic),
    };
    format!("{stat}, p {}", fmt::p(t.test.p))
}

/// The artifact corrections of `r-corrected`, study by study.
pub fn artifacts(r: &FitReport, cx: &Ctx, o: &mut String) {
    if let Some(a) = &r.artifacts {
        let _ = writeln!(
            o,
            "Artifact corrections (measure r-corrected, analysed on the r scale)"
        );
        for c in &a.corrections {
            let _ = writeln!(o, "  - {c}");
        }
        o.push_str(&wrap(&a.method, "  ", cx.width - 2));
        let _ = writeln!(
            o,
            "  mean r over the studies (unweighted): observed {}, corrected {}",
            num(a.mean_observed_r),
            num(a.mean_corrected_r)
        );
        let _ = writeln!(
            o,
            "  {}{}{}SE factor",
            pad("study", 28),
            pad("observed r", 12),
            pad("corrected r", 13)
        );
        for s in a.studies.iter().take(MAX_LISTED_STUDIES) {
            let label = super::layout::clip(&s.study, 26);
            let _ = writeln!(
                o,
                "  {}{}{}{}",
                pad(&label, 28),
                pad(&num(s.observed_r), 12),
                pad(&num(s.corrected_r), 13),
                num(s.se_factor)
            );
        }
        let _ = writeln!(o);
    }
}

/// The mean effect at chosen moderator values (`--probe`).
pub fn conditional_effects(r: &FitReport, cx: &Ctx, o: &mut String) {
    let (it, lv) = (&r.interpretation, &cx.level_pct);
    let reading = r.measure.reading_name.as_deref();
    if !it.conditional_effects.is_empty() {
        let _ = writeln!(o, "Conditional effects");
        o.push_str(&cx.para(&format!(
            "(the mean effect at chosen moderator values; {lv} CI; new study = {lv} prediction \
             interval)"
        )));
        let mut last = None;
        for e in &it.conditional_effects {
            if last != Some((&e.moderator, &e.held)) {
                let held = if e.held.is_empty() {
                    String::new()
                } else {
                    format!("; held: {}", e.held)
                };
                let _ = writeln!(o, "  {}{held}", e.moderator);
                let _ = writeln!(
                    o,
                    "    {}{}{}{}{}p",
                    pad("at", 14),
                    pad("", 13),
                    pad("effect", 10),
                    pad("CI", 20),
                    pad("new study", 20)
                );
                last = Some((&e.moderator, &e.held));
            }
            let mark = if e.outside_range {
                " (outside the studies' range)"
            } else {
                ""
            };
            let _ = writeln!(
                o,
                "    {}{}{}{}{}{}{mark}",
                pad(&at(&e.at), 14),
                pad(e.point.id(), 13),
                pad(&num(e.mean.estimate), 10),
                pad(&fmt::interval(e.mean.ci.ci_low, e.mean.ci.ci_high), 20),
                pad(&fmt::pi_interval(e.mean.pi.pi_low, e.mean.pi.pi_high), 20),
                fmt::p(e.test.p)
            );
            if let (Some(rd), Some(name)) = (&e.reading, reading) {
                let _ = writeln!(
                    o,
                    "    {}as {name}: {}  CI {}  new study {}",
                    pad("", 27),
                    num(rd.estimate),
                    fmt::interval(rd.ci.ci_low, rd.ci.ci_high),
                    fmt::pi_interval(rd.pi.pi_low, rd.pi.pi_high)
                );
            }
        }
        let _ = writeln!(o);
    }
}

/// The slope of each partner of a product term at the probed values.
pub fn simple_slopes(r: &FitReport, cx: &Ctx, o: &mut String) {
    let (it, lv) = (&r.interpretation, &cx.level_pct);
    if !it.simple_slopes.is_empty() {
        let _ = writeln!(o, "Simple slopes");
        o.push_str(&cx.para(&format!(
            "(how the partner in a product term changes the effect, at each probed value; {lv} \
             CI)"
        )));
        for s in &it.simple_slopes {
            let what = match s.quantity_kind {
                QuantityKind::LevelDifference => format!("difference {}", s.of),
                QuantityKind::Slope | QuantityKind::MeanEffect => {
                    format!("slope of {} (per unit)", s.of)
                }
            };
            item(
                o,
                &format!(
                    "{what} at {} = {} ({}): {}  CI {}  SE {}  {}",
                    s.moderator,
                    at(&s.at),
                    s.point,
                    num(s.test.estimate),
                    fmt::interval(s.test.ci.ci_low, s.test.ci.ci_high),
                    num(s.test.se),
                    test_text(&s.test)
                ),
                cx.width,
            );
        }
        if let Some(s) = it.simple_slopes.first() {
            if !s.held.is_empty() {
                let _ = writeln!(o, "  held: {}", s.held);
            }
        }
        let _ = writeln!(o);
    }
}

/// Differences between levels (`--compare-levels`).
pub fn level_contrasts(r: &FitReport, cx: &Ctx, o: &mut String) {
    let (it, lv) = (&r.interpretation, &cx.level_pct);
    if !it.level_contrasts.is_empty() {
        let _ = writeln!(o, "Level contrasts");
        o.push_str(&cx.para(&format!(
            "(the difference between two levels; {lv} CI; Holm-adjusted p over the pairs of each \
             moderator)"
        )));
        for c in &it.level_contrasts {
            item(
                o,
                &format!(
                    "{}: {} − {}: {}  CI {}  {}, Holm p {}",
                    c.moderator,
                    c.level,
                    c.minus,
                    num(c.test.estimate),
                    fmt::interval(c.test.ci.ci_low, c.test.ci.ci_high),
                    test_text(&c.test),
                    fmt::p(c.p_holm)
                ),
                cx.width,
            );
        }
        if let Some(c) = it.level_contrasts.first() {
            if !c.held.is_empty() {
                let _ = writeln!(o, "  held: {}", c.held);
            }
        }
        let _ = writeln!(o);
    }
}

/// The Johnson–Neyman regions of significance (`--regions`).
pub fn regions(r: &FitReport, cx: &Ctx, o: &mut String) {
    let it = &r.interpretation;
    if !it.regions_of_significance.is_empty() {
        let _ = writeln!(o, "Regions of significance (Johnson–Neyman)");
        for g in &it.regions_of_significance {
            let bounds = if g.bounds.is_empty() {
                "no bounds".to_string()
            } else {
                format!(
                    "bounds {}",
                    g.bounds
                        .iter()
                        .map(|b| num(*b))
                        .collect::<Vec<_>>()
                        .join(" and ")
                )
            };
            let line = format!(
                "{} along {}: {bounds} (significant {}); observed range {} to {}: {}{}",
                match g.quantity_kind {
                    QuantityKind::MeanEffect => "mean effect".to_string(),
                    QuantityKind::LevelDifference => format!("difference {}", g.quantity),
                    QuantityKind::Slope => format!("slope of {}", g.quantity),
                },
                g.moderator,
                g.significant,
                crate::support::format::short(g.observed_min),
                crate::support::format::short(g.observed_max),
                g.observed_region,
                if g.observed_bounds.is_empty() {
                    String::new()
                } else {
                    format!(
                        " {}",
                        g.observed_bounds
                            .iter()
                            .map(|b| num(*b))
                            .collect::<Vec<_>>()
                            .join(" and ")
                    )
                }
            );
            item(o, &line, cx.width);
            o.push_str(&wrap(&g.words, "    ", cx.width - 4));
            if !g.held.is_empty() {
                let _ = writeln!(o, "    held: {}", g.held);
            }
        }
        let _ = writeln!(o);
    }
}

/// The average and τ² without and with the moderators.
pub fn picture(r: &FitReport, cx: &Ctx, o: &mut String) {
    let it = &r.interpretation;
    if let Some(p) = &it.picture {
        let _ = writeln!(o, "How the picture changes");
        let _ = writeln!(
            o,
            "  {}{}with moderators",
            pad("", 16),
            pad("without moderators", 32)
        );
        let _ = writeln!(
            o,
            "  {}{}{} to {} (probed values)",
            pad("mean effect", 16),
            pad(
                &format!(
                    "{} {}",
                    num(p.pooled.mean.estimate),
                    fmt::interval(p.pooled.mean.ci.ci_low, p.pooled.mean.ci.ci_high)
                ),
                32
            ),
            num(p.conditional_min),
            num(p.conditional_max)
        );
        let r2 =
            p.r2.map(|x| format!(" (R² = {:.0}%)", 100.0 * x))
                .unwrap_or_default();
        let _ = writeln!(
            o,
            "  {}{}{}{r2}",
            pad("τ²", 16),
            pad(&num(p.tau2_without), 32),
            num(p.tau2_with)
        );
        o.push_str(&wrap(&p.words, "  ", cx.width - 2));
        let _ = writeln!(o);
    }
}
