//! The "Dependent effects" section of the `pondus fit` page: the
//! three-level model's variance components, likelihood-ratio tests and
//! moderator levels, and the cluster-robust tests.

use super::page::Page;
use super::section::FitCtx;
use crate::result::ClusterLevel;
use crate::support::format::{self as fmt, num};

/// Whether the report carries a cluster structure or cluster-robust tests.
pub(super) fn has_dependence(cx: &FitCtx) -> bool {
    let report = cx.report;
    report.clustering.is_some()
        || report.variance_components.is_some()
        || report.coefficients.iter().any(|c| c.robust_se.is_some())
}

/// The three-level model's variance components, likelihood-ratio tests and
/// moderator levels, and the cluster-robust tests (`--cluster`, `--robust`).
pub(super) fn dependence(page: &mut Page, cx: &FitCtx) {
    let (report, lv) = (cx.report, &cx.lv);
    let robust = report.coefficients.iter().any(|c| c.robust_se.is_some());
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
                    c.robust_ci
                        .map(|i| fmt::interval(i.ci_low, i.ci_high))
                        .unwrap_or_else(|| "—".into()),
                    fmt::opt_p_cell(c.robust_p),
                ]
            })
            .collect();
        let robust_ci_head = format!("robust {lv} CI");
        page.table(
            "Cluster-robust (CR2) standard errors with Satterthwaite degrees of freedom",
            &[
                "term",
                "estimate",
                "model SE",
                "robust SE",
                "robust df",
                robust_ci_head.as_str(),
                "robust p",
            ],
            &rows,
        );
    }
}
