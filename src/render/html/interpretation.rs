//! The "Reading the moderation" section of the `pondus fit` page:
//! conditional effects, simple slopes, level contrasts, regions of
//! significance, how the picture changes, and the artifact corrections —
//! each only when it was asked for.

use super::page::{at_text, Page};
use super::section::FitCtx;
use crate::result::{FitReport, ProbePoint};
use crate::support::format::{self as fmt, num};

/// Whether the report carries conditional effects, contrasts, regions or artifact corrections.
pub(super) fn has_interpretation(cx: &FitCtx) -> bool {
    let report = cx.report;
    let it = &report.interpretation;
    !it.conditional_effects.is_empty()
        || !it.simple_slopes.is_empty()
        || !it.level_contrasts.is_empty()
        || !it.regions_of_significance.is_empty()
        || report.artifacts.is_some()
}

/// Conditional effects, simple slopes, level contrasts, regions of
/// significance, how the picture changes, and artifact corrections.
pub(super) fn interpretation(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, cx.lv.as_str());
    conditional_effects(page, report, lv);
    simple_slopes(page, report, lv);
    level_contrasts(page, report, lv);
    regions(page, report);
    picture(page, report);
    artifacts(page, report);
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

/// The mean effect at values of each moderator (`--probe`).
fn conditional_effects(page: &mut Page, report: &FitReport, lv: &str) {
    let it = &report.interpretation;
    if !it.conditional_effects.is_empty() {
        page.h3("Conditional effects");
        let mut groups: Vec<(&str, &str)> = Vec::new();
        for c in &it.conditional_effects {
            if !groups.contains(&(c.moderator.as_str(), c.held.as_str())) {
                groups.push((c.moderator.as_str(), c.held.as_str()));
            }
        }
        let stat = if report.model.inference.uses_t() {
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
                        fmt::pi_interval(c.mean.pi.pi_low, c.mean.pi.pi_high),
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
}

/// Simple slopes of the partners in a product term.
fn simple_slopes(page: &mut Page, report: &FitReport, lv: &str) {
    let it = &report.interpretation;
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
}

/// Pairwise differences between levels (`--compare-levels`).
fn level_contrasts(page: &mut Page, report: &FitReport, lv: &str) {
    let it = &report.interpretation;
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
}

/// Johnson–Neyman regions of significance (`--regions`).
fn regions(page: &mut Page, report: &FitReport) {
    let it = &report.interpretation;
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
}

/// The average and τ² without and with the moderators.
fn picture(page: &mut Page, report: &FitReport) {
    let it = &report.interpretation;
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
}

/// Each study's correlation before and after the artifact corrections.
fn artifacts(page: &mut Page, report: &FitReport) {
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
