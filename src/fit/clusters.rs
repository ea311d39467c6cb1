//! The `--cluster` part of the `fit` job: reading the cluster ids, choosing
//! the working model, and adding the three-level and cluster-robust results
//! to the [`FitReport`]. The computations are in [`crate::model::multilevel`].

use crate::error::{Error, Result};
use crate::input::{ColumnRequest, Table};
use crate::model::multilevel::{
    self, Clusters, Dependence, Levels, RobustCoef, RobustTest, ThreeLevel,
};
use crate::model::{self, FitOptions, ModelFit};
use crate::result::*;

/// Robust Satterthwaite df below which the robust p-values are flagged
/// (Tipton 2015, *Psychol. Methods* 20:375: tests with df < 4 can be far
/// from their nominal level; common practice, cited from memory).
pub const ROBUST_MIN_DF: f64 = 4.0;

/// The column request of `--cluster`.
pub fn request(header: &str) -> ColumnRequest {
    ColumnRequest {
        header: header.to_string(),
        required: true,
        purpose: "the cluster ids (--cluster)".into(),
        hint: "Check the spelling of --cluster; headers are matched exactly, or ignoring case when unique.".into(),
    }
}

/// The cluster column's header and cells (one per table row).
pub fn cells(table: &Table, j: usize) -> (String, Vec<String>) {
    let col = table.column(j).expect("required column present");
    (
        col.header.clone(),
        (0..table.len())
            .map(|i| col.get(i).trim().to_string())
            .collect(),
    )
}

/// Clusters of the included rows.
///
/// # Errors
/// [`Error::Model`] naming the file, line and column of the first included
/// row with a missing id (empty or a missing-value mark).
pub fn clusters(
    cells: &(String, Vec<String>),
    included: &[usize],
    lines: &[u64],
    source: &str,
) -> Result<Clusters> {
    let (header, cells) = cells;
    let missing: Vec<usize> = included
        .iter()
        .copied()
        .filter(|&i| crate::input::number::is_missing(&cells[i]))
        .collect();
    if let Some(&first) = missing.first() {
        return Err(Error::Model(format!(
            "{source}: line {}, column '{header}': the cluster id is missing ({} effect{} without \
             one). Every effect in the model needs the id of its study, lab or site; fill it in \
             (an effect that is alone in its cluster gets an id of its own) and run again",
            lines[first],
            missing.len(),
            if missing.len() == 1 { "" } else { "s" }
        )));
    }
    let ids: Vec<&str> = included.iter().map(|&i| cells[i].as_str()).collect();
    Ok(Clusters::from_ids(&ids))
}

/// The model under the dependence settings: the usual fit without clusters
/// or with `--levels 2`, the three-level fit otherwise.
///
/// # Errors
/// As [`model::fit_parts`] and [`multilevel::fit`].
#[allow(clippy::too_many_arguments)]
pub fn fit(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    clusters: Option<&Clusters>,
    dep: &Dependence,
    options: FitOptions,
    with_ci: bool,
) -> Result<(ModelFit, Option<ThreeLevel>)> {
    match clusters {
        Some(cl) if dep.levels == Levels::Three => {
            let (f, t) = multilevel::fit(y, v, x, p, cl, options, with_ci)?;
            Ok((f, Some(t)))
        }
        _ => Ok((model::fit_parts(y, v, x, p, options, with_ci)?, None)),
    }
}

/// What [`finish`] adds, computed while the design is still at hand.
#[derive(Debug, Clone)]
pub struct Parts {
    header: String,
    sizes: Vec<usize>,
    three: Option<ThreeLevel>,
    levels: Vec<bool>,
    robust: Option<(Vec<RobustCoef>, Option<RobustTest>)>,
}

/// Robust inference and moderator levels for the fitted model.
///
/// # Errors
/// [`Error::Model`] from [`multilevel::robust`] (for example no more
/// clusters than coefficients).
#[allow(clippy::too_many_arguments)]
pub fn parts(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    cl: &Clusters,
    dep: &Dependence,
    fit: &ModelFit,
    three: Option<&ThreeLevel>,
) -> Result<Parts> {
    let robust = if dep.robust {
        let (sb, sw) = match three {
            Some(t) => (t.components.between, t.components.within),
            None => (0.0, fit.tau2.estimate),
        };
        let (_, coefs, test) = multilevel::robust(y, v, x, p, cl, sb, sw)?;
        Some((coefs, test))
    } else {
        None
    };
    Ok(Parts {
        header: dep.cluster.clone().unwrap_or_default(),
        sizes: cl.groups.iter().map(Vec::len).collect(),
        three: three.cloned(),
        levels: (1..p)
            .map(|j| multilevel::varies_within(x, p, j, cl))
            .collect(),
        robust,
    })
}

/// Adds the cluster results to the report: variance components with I² per
/// level (Cheung 2014, *Psychol. Methods* 19:211, cited from memory:
/// I²_level = σ²_level/(σ²_b + σ²_w + ṽ)), the likelihood-ratio tests, the
/// moderator levels, and under `--robust` the robust coefficients and the
/// HTZ moderator test in place of the model-based one.
pub fn finish(report: &mut FitReport, parts: Parts, moderators: &[&str], fit: &ModelFit) {
    let m = parts.sizes.len();
    let singles = parts.sizes.iter().filter(|&&n| n == 1).count();
    let v_typ = report.heterogeneity.typical_variance;
    let mut lr_tests = Vec::new();
    let fitted_by = if report.model.tau2_method == Tau2Method::Ml {
        "ML"
    } else {
        "REML"
    };
    if let Some(t) = &parts.three {
        let c = t.components;
        let total = c.between + c.within + v_typ;
        let ci = t.intervals;
        report.variance_components = Some(vec![
            VarianceComponent {
                level: ClusterLevel::Between,
                estimate: c.between,
                ci: Interval::new(ci.map(|c| c.0 .0), ci.map(|c| c.0 .1)),
                i2: c.between / total,
            },
            VarianceComponent {
                level: ClusterLevel::Within,
                estimate: c.within,
                ci: Interval::new(ci.map(|c| c.1 .0), ci.map(|c| c.1 .1)),
                i2: c.within / total,
            },
        ]);
        let ll = fit.log_likelihood.unwrap_or(f64::NAN);
        for (name, ll0) in [
            (ClusterLevel::Within, t.ll_without_within),
            (ClusterLevel::Between, t.ll_without_between),
        ] {
            let (stat, p) = multilevel::lr_test(ll, ll0);
            lr_tests.push(ComponentTest {
                component: name,
                statistic: stat,
                log_likelihood_without: ll0,
                p,
            });
        }
        report.model.tau2_description = format!(
            "{fitted_by} over both variance components of the three-level model \
             (σ²_between + σ²_within; τ² below is their sum)"
        );
        report.notes.push(format!(
            "Three-level model: effects nested in {m} clusters of '{}'. τ² is the sum of the \
             between- and within-cluster variances; prediction intervals are for a new effect in \
             a new cluster. Variance-component intervals are profile-likelihood intervals.",
            parts.header
        ));
        if report.model.inference == Inference::Kh {
            report.notes.push(
                "Under kh the coefficient covariance of the three-level model is scaled by \
                 r'V⁻¹r/(k − p) and tested with t(k − p) (Knapp–Hartung carried over to the \
                 block-diagonal V)."
                    .into(),
            );
        }
    }
    if singles > 0 {
        report.notes.push(format!(
            "{singles} of {m} clusters hold a single effect; this is fine (they inform the sum \
             of the two variances more than its split)."
        ));
    }
    if singles == m {
        report.warnings.push(
            "Every cluster holds a single effect: the between- and within-cluster variances \
             cannot be told apart, only their sum is estimated."
                .into(),
        );
    }
    for s in &mut report.subgroups {
        for l in &mut s.levels {
            l.pooled = None;
            l.tau2 = None;
        }
    }
    if !report.subgroups.is_empty() {
        report.notes.push(
            "With --cluster the per-level pooled estimates (which would treat the effects as \
             independent) are left out; the model's predicted values per level remain."
                .into(),
        );
    }
    let robust_text = parts.robust.as_ref().map(|_| {
        format!(
            "CR2 cluster-robust standard errors on {m} clusters with the {} working model, \
             Satterthwaite df per coefficient; moderator test: approximate Hotelling T² (HTZ)",
            if parts.three.is_some() {
                "three-level"
            } else {
                "two-level"
            }
        )
    });
    if let Some((coefs, test)) = parts.robust {
        let mut low = Vec::new();
        for (c, r) in report.coefficients.iter_mut().zip(&coefs) {
            c.robust_se = Some(r.se);
            c.robust_df = Some(r.df);
            c.robust_p = Some(r.p);
            if r.df < ROBUST_MIN_DF {
                low.push(format!("{} ({:.1})", c.term, r.df));
            }
        }
        report.notes.push(
            "Only the coefficients' robust_se, robust_df, robust_p and the moderator test are \
             cluster-robust; intervals, predictions, fitted lines and --probe/--regions results \
             use the model-based covariance."
                .into(),
        );
        if !low.is_empty() {
            report.warnings.push(format!(
                "Robust degrees of freedom below {ROBUST_MIN_DF}: {}. Robust p-values with so few \
                 effective clusters can be far from their nominal level (Tipton 2015); read them \
                 with great care.",
                low.join(", ")
            ));
        }
        if let (Some(t), Some(mt)) = (test, report.moderator_test.as_mut()) {
            let level = report.model.level;
            let significant = t.p < 1.0 - level;
            mt.statistic = t.statistic;
            mt.df1 = t.df1;
            mt.df2 = Some(t.df2);
            mt.p = t.p;
            mt.distribution = TestDistribution::F;
            mt.significant = significant;
            mt.answer = crate::fit::answer(
                significant,
                moderators,
                fit,
                t.statistic,
                t.df1,
                Some(t.df2),
                t.p,
                level,
            );
            mt.answer
                .push_str(" (Cluster-robust test: CR2 approximate Hotelling T², HTZ.)");
            mt.method = Some(RobustTestMethod::Htz);
            if t.df2 < ROBUST_MIN_DF {
                report.warnings.push(format!(
                    "The robust moderator test has {:.1} denominator df (below {ROBUST_MIN_DF}): \
                     its p-value is unreliable.",
                    t.df2
                ));
            }
        }
    }
    report.cautions.push(format!(
        "Effects in the same cluster are dependent; the {m} clusters, not the {} effects, are the \
         independent units, and moderators that vary only between clusters are tested with about \
         as much information as {m} studies give.",
        report.k
    ));
    report.clustering = Some(ClusterReport {
        column: parts.header,
        clusters: m,
        single_effect_clusters: singles,
        max_cluster_size: parts.sizes.iter().copied().max().unwrap_or(0),
        model: if parts.three.is_some() {
            ClusterModel::ThreeLevel
        } else {
            ClusterModel::TwoLevel
        },
        lr_tests,
        moderator_levels: report
            .coefficients
            .iter()
            .skip(1)
            .zip(&parts.levels)
            .map(|(c, &w)| TermLevel {
                term: c.term.clone(),
                level: if w {
                    ClusterLevel::Within
                } else {
                    ClusterLevel::Between
                },
            })
            .collect(),
        robust: robust_text,
    });
}
