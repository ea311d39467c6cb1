//! Dependent effects: the three-level random-effects meta-regression and
//! cluster-robust (CR2) inference.
//!
//! # Model
//! y_ij = x_ij'β + u_j + w_ij + e_ij, u_j ~ N(0, σ²_b) per cluster j,
//! w_ij ~ N(0, σ²_w) per effect, e_ij ~ N(0, v_ij) with v_ij known, all
//! independent. The marginal covariance is block diagonal with
//! V_j = σ²_b·11' + D_j, D_j = diag(v_ij + σ²_w).
//!
//! # Closed forms (Sherman–Morrison)
//! With w_i = 1/d_i, S_j = Σ_i w_i and c_j = σ²_b/(1 + σ²_b S_j):
//! V_j⁻¹ = D_j⁻¹ − c_j (D_j⁻¹1)(D_j⁻¹1)',
//! ln det V_j = Σ_i ln d_i + ln(1 + σ²_b S_j),
//! so X'V⁻¹X, X'V⁻¹y and y'V⁻¹y cost O(k p²) per evaluation.
//!
//! # Likelihood
//! ML: ℓ = −½[k ln 2π + Σ_j ln det V_j + r'V⁻¹r]; REML:
//! ℓ_R = −½[(k − p) ln 2π + Σ_j ln det V_j + ln det X'V⁻¹X + r'V⁻¹r], with
//! r = y − Xβ̂(σ²) the GLS residual (Harville 1977, *JASA* 72:320; the
//! three-level form of Konstantopoulos 2011, *Res. Synth. Methods* 2:61, and
//! Cheung 2014, *Psychol. Methods* 19:211; cited from memory). The same
//! constants as the two-level model, so the likelihoods compare.

mod cr2;
mod likelihood;

pub use cr2::{robust, RobustCoef, RobustTest};
pub use likelihood::{evaluate, maximise, profile_interval, Components, Eval};

use super::{standardise, FitOptions, Inference, ModelFit};
use crate::dist;
use crate::error::{Error, Result};
use crate::model::tau2::{Tau2Fit, Tau2Method};
use crate::model::wls::{self, Data, Want};
use crate::support::flag::Flag;
use crate::tolerance;
use likelihood::{max_line, upper_scale, Objective};

/// Effects grouped into clusters: `groups[j]` lists the effect indices of cluster j.
#[derive(Debug, Clone)]
pub struct Clusters {
    /// Effect indices per cluster, clusters in order of first appearance.
    pub groups: Vec<Vec<usize>>,
}

impl Clusters {
    /// Clusters from one id per effect (ids compared as given).
    pub fn from_ids<T: AsRef<str>>(ids: &[T]) -> Clusters {
        let mut index = std::collections::HashMap::new();
        let mut groups: Vec<Vec<usize>> = Vec::new();
        for (i, id) in ids.iter().enumerate() {
            let j = *index.entry(id.as_ref().to_string()).or_insert_with(|| {
                groups.push(Vec::new());
                groups.len() - 1
            });
            groups[j].push(i);
        }
        Clusters { groups }
    }

    /// Number of clusters.
    pub fn m(&self) -> usize {
        self.groups.len()
    }
}

/// The working model whose likelihood (or weights) is used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Levels {
    /// The usual two-level model (clusters only used by the robust variance).
    Two,
    /// The three-level model.
    #[default]
    Three,
}

/// Settings for dependent effects (none by default: effects are independent).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Dependence {
    /// Header of the cluster column (`--cluster`).
    pub cluster: Option<String>,
    /// Working model.
    pub levels: Levels,
    /// Cluster-robust CR2 inference (`--robust`).
    pub robust: bool,
}

/// Everything the three-level fit adds to a [`ModelFit`].
#[derive(Debug, Clone)]
pub struct ThreeLevel {
    /// The variance components.
    pub components: Components,
    /// Profile-likelihood intervals (between, within), when asked.
    pub intervals: Option<((f64, f64), (f64, f64))>,
    /// Maximised (restricted) log-likelihood with σ²_w = 0 and with σ²_b = 0
    /// (constants included, comparable with [`ModelFit::log_likelihood`]).
    pub ll_without_within: f64,
    /// The same with σ²_b = 0 (the usual two-level model).
    pub ll_without_between: f64,
    /// Working covariance blocks are rebuilt from these (σ²_b, σ²_w).
    pub clusters: Clusters,
}

/// Fits the three-level model by REML or ML (other estimators are refused).
///
/// Coefficients are the GLS estimates at (σ̂²_b, σ̂²_w), Cov = (X'V̂⁻¹X)⁻¹;
/// under `kh` that covariance is scaled by s² = r'V̂⁻¹r/(k − p) and tests use
/// t(k − p) and F(q, k − p), the Knapp–Hartung (2003) scaling carried over to
/// a general V. The returned [`ModelFit`] has τ² = σ̂²_b + σ̂²_w (the total
/// heterogeneity variance, used by prediction intervals for a new effect in
/// a new cluster), weights the row sums of V̂⁻¹ (the share of each effect in
/// the intercept-only estimate, w_i/(1 + σ²_b S_j)), and standardised
/// residuals r_i/√(V_ii − x_i'Mx_i).
///
/// # Errors
/// [`Error::Model`] for k ≤ p, a singular design or an estimator other than
/// REML/ML; [`Error::NoConvergence`] from the searches.
pub fn fit(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    cl: &Clusters,
    options: FitOptions,
    with_ci: bool,
) -> Result<(ModelFit, ThreeLevel)> {
    let k = y.len();
    if k <= p {
        return Err(Error::Model(format!(
            "{k} effects cannot support {p} coefficients; at least {} are needed",
            p + 1
        )));
    }
    let restricted = match options.method {
        Tau2Method::Reml => true,
        Tau2Method::Ml => false,
        other => {
            return Err(Error::usage(
                Flag::Tau2,
                format!(
                    "the three-level model ({}) is fitted by reml or ml only, not '{}'; \
                     use {} reml (the default) or {} ml",
                    Flag::Cluster,
                    other.id(),
                    Flag::Tau2,
                    Flag::Tau2
                ),
            ))
        }
    };
    let st = standardise(x, k, p);
    let data = Data { y, v, x: &st.x, p };
    let comp = maximise(&data, cl, restricted)?;
    let singular = || {
        Error::Model("the weighted design matrix is singular; the moderators are collinear".into())
    };
    let e = evaluate(&data, cl, comp.between, comp.within).ok_or_else(singular)?;
    let df = (k - p) as f64;
    let two_pi = (2.0 * std::f64::consts::PI).ln();
    let constant = if restricted {
        st.log_det_a - 0.5 * df * two_pi
    } else {
        -0.5 * k as f64 * two_pi
    };
    let kh_scale = match options.inference {
        Inference::Kh => Some(super::kh_scale(e.q, df, y, v, comp.between + comp.within)),
        Inference::Z => None,
    };
    let beta = &st.a * &e.beta;
    let cov_model = &st.a * &e.m_inv * st.a.transpose();
    let cov = match kh_scale {
        Some(s2) => &cov_model * s2,
        None => cov_model,
    };
    let mut weights = vec![0.0; k];
    let mut fitted = vec![0.0; k];
    let mut std_resid = vec![None; k];
    let orig = Data { y, v, x, p };
    for g in &cl.groups {
        let s: f64 = g.iter().map(|&i| 1.0 / (v[i] + comp.within)).sum();
        for &i in g {
            let w = 1.0 / (v[i] + comp.within);
            weights[i] = w / (1.0 + comp.between * s);
            fitted[i] = wls::fitted(&orig, &beta, i);
            let vii = v[i] + comp.within + comp.between;
            let var_r = vii - wls::quad_form(&data, &e.m_inv, i);
            std_resid[i] = (var_r > tolerance::RESIDUAL_VARIANCE_FLOOR * vii)
                .then(|| (y[i] - fitted[i]) / var_r.sqrt());
        }
    }
    let fe = wls::fit_with(&data, 0.0, Want::Q).ok_or_else(singular)?;
    let intervals = if with_ci {
        Some((
            profile_interval(&data, cl, restricted, true, &comp, options.level)?,
            profile_interval(&data, cl, restricted, false, &comp, options.level)?,
        ))
    } else {
        None
    };
    let hi = upper_scale(&data);
    let what = "a boundary fit of the three-level model";
    let obj = Objective {
        data: &data,
        cl,
        restricted,
        evals: std::cell::Cell::new(0),
    };
    let ll_without_within = max_line(|s| obj.ll(s, 0.0), hi, what)?.1 + constant;
    let ll_without_between = max_line(|s| obj.ll(0.0, s), hi, what)?.1 + constant;
    let model = ModelFit {
        tau2: Tau2Fit {
            estimate: comp.between + comp.within,
            method: options.method,
            ending: comp.ending,
            evaluations: comp.evaluations,
        },
        tau2_ci: None,
        beta,
        cov,
        kh_scale,
        k,
        p,
        weights,
        fitted,
        std_resid,
        q_e: fe.q,
        v_typical: df / wls::trace_p(&data, 0.0).ok_or_else(singular)?,
        log_likelihood: Some(comp.ll + constant),
        options,
    };
    Ok((
        model,
        ThreeLevel {
            components: comp,
            intervals,
            ll_without_within,
            ll_without_between,
            clusters: cl.clone(),
        },
    ))
}

/// A likelihood-ratio test of one variance component = 0.
///
/// # Formula
/// LR = 2(ℓ̂ − ℓ̂₀) ≥ 0; the null value lies on the boundary of the
/// parameter space, so the reference is the 50:50 mixture of χ²₀ and χ²₁
/// (Self & Liang 1987, *JASA* 82:605, cited from memory): p = ½ P(χ²₁ > LR)
/// for LR > 0 and 1 for LR = 0. The plain χ²₁ p-value is twice that
/// (conservative).
pub fn lr_test(ll_full: f64, ll_null: f64) -> (f64, f64) {
    let lr = (2.0 * (ll_full - ll_null)).max(0.0);
    let p = if lr > 0.0 {
        0.5 * dist::chi2_sf(lr, 1.0)
    } else {
        1.0
    };
    (lr, p)
}

/// Whether design column `j` varies within any cluster.
pub fn varies_within(x: &[f64], p: usize, j: usize, cl: &Clusters) -> bool {
    cl.groups.iter().any(|g| {
        let first = x[g[0] * p + j];
        g.iter().any(|&i| x[i * p + j] != first)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_effect_per_cluster_cannot_separate_the_components() {
        // With singleton clusters only σ²_b + σ²_w is identified: the total
        // equals the two-level REML τ².
        let y = [0.1, 0.3, -0.2, 0.5, 0.4, 0.0, 0.7, 0.9];
        let v = [0.05, 0.04, 0.06, 0.03, 0.02, 0.07, 0.05, 0.04];
        let x = vec![1.0; 8];
        let ids: Vec<String> = (0..8).map(|i| i.to_string()).collect();
        let cl = Clusters::from_ids(&ids);
        let o = FitOptions {
            method: Tau2Method::Reml,
            inference: Inference::Z,
            level: 0.95,
        };
        let (f, _) = fit(&y, &v, &x, 1, &cl, o, false).unwrap();
        let two = super::super::fit(&y, &v, &x, 1, o).unwrap();
        assert!((f.tau2.estimate - two.tau2.estimate).abs() < 1e-6 * two.tau2.estimate);
    }
}
