//! Terminal section of the `--cluster` results: variance components with
//! their share of the total variance, the likelihood-ratio tests, the level
//! of each moderator, and the cluster-robust coefficients.

use super::layout::{lpad, pad, wrap, Ctx};
use crate::result::{ClusterLevel, FitReport};
use crate::support::format::{self as fmt, num};
use std::fmt::Write;

/// The section (nothing without `--cluster`).
pub fn dependent_effects(r: &FitReport, cx: &Ctx, o: &mut String) {
    let level_pct = &cx.level_pct;
    let Some(c) = &r.clustering else {
        return;
    };
    let _ = writeln!(
        o,
        "Dependent effects: {} effects in {} clusters of '{}' ({} with one effect, at most {} in one)",
        r.k, c.clusters, c.column, c.single_effect_clusters, c.max_cluster_size
    );
    if let Some(vc) = &r.variance_components {
        let _ = writeln!(
            o,
            "  {}  {}  {}  share of total variance",
            pad("level", 22),
            lpad("σ²", 9),
            pad(&format!("{level_pct} CI (profile)"), 22),
        );
        for v in vc {
            let label = if v.level == ClusterLevel::Between {
                "between clusters"
            } else {
                "within clusters"
            };
            let ci = match (v.ci.ci_low, v.ci.ci_high) {
                (Some(a), Some(b)) => fmt::interval(a, b),
                _ => "—".into(),
            };
            let _ = writeln!(
                o,
                "  {}  {}  {}  {}",
                pad(label, 22),
                lpad(&num(v.estimate), 9),
                pad(&ci, 22),
                fmt::percent(v.i2)
            );
        }
        for t in &c.lr_tests {
            let what = if t.component == ClusterLevel::Within {
                "within-cluster variance = 0 (effects of a cluster share one true effect)"
            } else {
                "between-cluster variance = 0 (the model with independent effects)"
            };
            o.push_str(&wrap(
                &format!(
                    "LR test of {what}: {:.2}, p {} (50:50 mixture of χ²₀ and χ²₁)",
                    t.statistic,
                    fmt::p(t.p)
                ),
                "  ",
                cx.width - 2,
            ));
        }
    } else {
        let _ = writeln!(
            o,
            "  working model: effects treated as independent (two-level); inference robust to the clustering"
        );
    }
    if !c.moderator_levels.is_empty() {
        let parts: Vec<String> = c
            .moderator_levels
            .iter()
            .map(|t| format!("{} ({} clusters)", t.term, t.level))
            .collect();
        o.push_str(&wrap(
            &format!("Moderator terms vary: {}", parts.join(", ")),
            "  ",
            cx.width - 2,
        ));
    }
    if let Some(text) = &c.robust {
        let _ = writeln!(o, "Cluster-robust inference");
        o.push_str(&wrap(text, "  ", cx.width - 2));
        let _ = writeln!(
            o,
            "  {}  {}  {}  {}  {}  {}  p",
            pad("term", 22),
            lpad("estimate", 10),
            lpad("model SE", 9),
            lpad("robust SE", 10),
            lpad("df", 6),
            pad(&format!("{} CI", cx.level_pct), 20),
        );
        for k in &r.coefficients {
            if let (Some(se), Some(df), Some(p), Some(ci)) =
                (k.robust_se, k.robust_df, k.robust_p, k.robust_ci)
            {
                let _ = writeln!(
                    o,
                    "  {}  {}  {}  {}  {}  {}  {}",
                    pad(&k.term, 22),
                    lpad(&num(k.contrast.estimate), 10),
                    lpad(&num(k.contrast.se), 9),
                    lpad(&num(se), 10),
                    lpad(&format!("{df:.1}"), 6),
                    pad(&fmt::interval(ci.ci_low, ci.ci_high), 20),
                    fmt::p(p).trim_start_matches("= ")
                );
            }
        }
        if let Some(t) = &r.moderator_test {
            if let (Some(m), Some(d2)) = (&t.method, t.df2) {
                let _ = writeln!(
                    o,
                    "  moderator test ({m}): F({}, {d2:.1}) = {:.2}, p {}",
                    t.df1,
                    t.statistic,
                    fmt::p(t.p)
                );
            }
        }
    }
    let _ = writeln!(o);
}
