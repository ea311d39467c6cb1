//! Stage 6 of `fit`: what `--cluster` adds. The variance components of the
//! three-level model with their likelihood-ratio tests, the clustering
//! section (clusters, the level at which each moderator varies), and under
//! `--robust` the cluster-robust inference. The computations are in
//! [`crate::model::multilevel`]; the summaries, messages and report take
//! these additions as inputs.

use super::estimate::{Fitted, WorkingModel};
use super::in_file;
use super::studies::Studies;
use crate::error::Result;
use crate::model::design::Design;
use crate::model::multilevel::{self, Clusters, Dependence, RobustCoef, RobustTest, ThreeLevel};
use crate::result::{
    ClusterLevel, ClusterModel, ClusterReport, ComponentTest, Interval, TermLevel,
    VarianceComponent,
};

/// Robust Satterthwaite df below which the robust p-values are flagged
/// (Tipton 2015, *Psychol. Methods* 20:375: tests with df < 4 can be far
/// from their nominal level; common practice, cited from memory).
pub const ROBUST_MIN_DF: f64 = 4.0;

/// Cluster-robust inference (`--robust`).
#[derive(Debug, Clone)]
pub struct Robust {
    /// Robust SE, Satterthwaite df and p per coefficient, intercept first.
    pub coefficients: Vec<RobustCoef>,
    /// The HTZ test of the moderator terms (None without moderators).
    pub test: Option<RobustTest>,
}

/// What `--cluster` adds to the report.
#[derive(Debug, Clone)]
pub struct ClusterAdditions {
    /// The clustering section.
    pub report: ClusterReport,
    /// Variance components of the three-level model (None for the two-level working model).
    pub variance_components: Option<Vec<VarianceComponent>>,
    /// Cluster-robust inference, under `--robust`.
    pub robust: Option<Robust>,
}

/// The cluster additions of a clustered fit (None without `--cluster`).
///
/// # Errors
/// [`crate::Error::Model`] from [`multilevel::robust`] (for example no more
/// clusters than coefficients).
pub fn additions(
    dep: &Dependence,
    source: &str,
    design: &Design,
    model: &Fitted,
    studies: &Studies,
) -> Result<Option<ClusterAdditions>> {
    let Some(cl) = model.working.clusters() else {
        return Ok(None);
    };
    let (x, p) = (&design.x, design.p);
    let robust = if dep.robust {
        let (sb, sw) = match &model.working {
            WorkingModel::ThreeLevel(t) => (t.components.between, t.components.within),
            WorkingModel::TwoLevel(_) | WorkingModel::Independent => (0.0, model.fit.tau2.estimate),
        };
        let (_, coefficients, test) = multilevel::robust(&studies.y, &studies.v, x, p, cl, sb, sw)
            .map_err(|e| in_file(source, e))?;
        Some(Robust { coefficients, test })
    } else {
        None
    };
    let (cluster_model, three) = match &model.working {
        WorkingModel::ThreeLevel(t) => (ClusterModel::ThreeLevel, Some(t.as_ref())),
        WorkingModel::TwoLevel(_) | WorkingModel::Independent => (ClusterModel::TwoLevel, None),
    };
    let levels = (1..p).map(|j| multilevel::varies_within(x, p, j, cl));
    let report = ClusterReport {
        column: dep.cluster.clone().unwrap_or_default(),
        clusters: cl.m(),
        single_effect_clusters: singles(cl),
        max_cluster_size: cl.groups.iter().map(Vec::len).max().unwrap_or(0),
        model: cluster_model,
        lr_tests: three.map(|t| lr_tests(t, model)).unwrap_or_default(),
        moderator_levels: design
            .terms
            .iter()
            .skip(1)
            .zip(levels)
            .map(|(t, w)| TermLevel {
                term: t.name.clone(),
                level: if w {
                    ClusterLevel::Within
                } else {
                    ClusterLevel::Between
                },
            })
            .collect(),
        robust: robust.as_ref().map(|_| {
            format!(
                "CR2 cluster-robust standard errors on {} clusters with the {cluster_model} working \
                 model, Satterthwaite df per coefficient; moderator test: approximate Hotelling \
                 T² (HTZ)",
                cl.m()
            )
        }),
    };
    Ok(Some(ClusterAdditions {
        report,
        variance_components: three.map(|t| components(t, model.fit.v_typical)),
        robust,
    }))
}

/// Clusters that hold a single effect.
fn singles(cl: &Clusters) -> usize {
    cl.groups.iter().filter(|g| g.len() == 1).count()
}

/// The variance components with I² per level (Cheung 2014, *Psychol.
/// Methods* 19:211, cited from memory: I²_level = σ²_level/(σ²_b + σ²_w + ṽ)),
/// `v_typ` the typical sampling variance ṽ.
fn components(t: &ThreeLevel, v_typ: f64) -> Vec<VarianceComponent> {
    let c = t.components;
    let total = c.between + c.within + v_typ;
    let ci = t.intervals;
    vec![
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
    ]
}

/// Likelihood-ratio tests of the within- and the between-cluster variance
/// ([`multilevel::lr_test`] against the fits without each).
fn lr_tests(t: &ThreeLevel, model: &Fitted) -> Vec<ComponentTest> {
    let ll = model.fit.log_likelihood.unwrap_or(f64::NAN);
    [
        (ClusterLevel::Within, t.ll_without_within),
        (ClusterLevel::Between, t.ll_without_between),
    ]
    .into_iter()
    .map(|(component, ll0)| {
        let (statistic, p) = multilevel::lr_test(ll, ll0);
        ComponentTest {
            component,
            statistic,
            log_likelihood_without: ll0,
            p,
        }
    })
    .collect()
}
