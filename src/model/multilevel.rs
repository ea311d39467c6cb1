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

use super::{standardise, FitOptions, Inference, ModelFit};
use crate::dist;
use crate::error::{Error, Result};
use crate::model::tau2::{Ending, Tau2Fit, Tau2Method};
use crate::model::wls::{self, Data, Want};
use crate::tolerance;
use argmin::core::{CostFunction, Executor, State, TerminationReason, TerminationStatus};
use argmin::solver::brent::BrentOpt;
use argmin::solver::neldermead::NelderMead;
use nalgebra::{DMatrix, DVector};

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

/// One evaluation of the three-level model at (σ²_b, σ²_w).
#[derive(Debug, Clone)]
pub struct Eval {
    /// β̂(σ²) in the parametrisation of the data given.
    pub beta: DVector<f64>,
    /// (X'V⁻¹X)⁻¹.
    pub m_inv: DMatrix<f64>,
    /// r'V⁻¹r.
    pub q: f64,
    /// Σ_j ln det V_j.
    pub log_det_v: f64,
    /// ln det X'V⁻¹X.
    pub log_det_m: f64,
}

/// GLS at fixed (σ²_b, σ²_w) through the closed forms in the module docs.
/// None when X'V⁻¹X is not positive definite.
pub fn evaluate(data: &Data<'_>, cl: &Clusters, sb: f64, sw: f64) -> Option<Eval> {
    let p = data.p;
    let mut xwx = DMatrix::<f64>::zeros(p, p);
    let mut xwy = DVector::<f64>::zeros(p);
    let mut ywy = 0.0;
    let mut log_det_v = 0.0;
    let mut sx = vec![0.0; p];
    for g in &cl.groups {
        sx.iter_mut().for_each(|s| *s = 0.0);
        let (mut s, mut sy) = (0.0, 0.0);
        for &i in g {
            let d = data.v[i] + sw;
            let w = 1.0 / d;
            log_det_v += d.ln();
            let xi = &data.x[i * p..(i + 1) * p];
            let yi = data.y[i];
            s += w;
            sy += w * yi;
            ywy += w * yi * yi;
            for a in 0..p {
                let wa = w * xi[a];
                sx[a] += wa;
                xwy[a] += wa * yi;
                for b in 0..=a {
                    xwx[(a, b)] += wa * xi[b];
                }
            }
        }
        let c = sb / (1.0 + sb * s);
        log_det_v += (sb * s).ln_1p();
        ywy -= c * sy * sy;
        for a in 0..p {
            xwy[a] -= c * sx[a] * sy;
            for b in 0..=a {
                xwx[(a, b)] -= c * sx[a] * sx[b];
            }
        }
    }
    for a in 0..p {
        for b in 0..a {
            xwx[(b, a)] = xwx[(a, b)];
        }
    }
    let chol = xwx.cholesky()?;
    let beta = chol.solve(&xwy);
    let log_det_m = 2.0 * chol.l().diagonal().iter().map(|d| d.ln()).sum::<f64>();
    let q = (ywy - beta.dot(&xwy)).max(0.0);
    Some(Eval {
        beta,
        m_inv: chol.inverse(),
        q,
        log_det_v,
        log_det_m,
    })
}

/// Log-likelihood (restricted: REML) of an evaluation, without the 2π
/// constant and the design scale term (added by [`fit`]).
fn ll_core(e: &Eval, restricted: bool) -> f64 {
    let extra = if restricted { e.log_det_m } else { 0.0 };
    -0.5 * (e.log_det_v + extra + e.q)
}

/// How the variance components were found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Components {
    /// σ²_between.
    pub between: f64,
    /// σ²_within.
    pub within: f64,
    /// The maximised (restricted) log-likelihood (core, see [`ll_core`]).
    pub ll: f64,
    /// Converged inside, or on a boundary.
    pub ending: Ending,
    /// Objective evaluations.
    pub evaluations: u64,
}

struct Objective<'a> {
    data: &'a Data<'a>,
    cl: &'a Clusters,
    restricted: bool,
    evals: std::cell::Cell<u64>,
}

impl Objective<'_> {
    fn ll(&self, sb: f64, sw: f64) -> f64 {
        self.evals.set(self.evals.get() + 1);
        evaluate(self.data, self.cl, sb, sw)
            .map(|e| ll_core(&e, self.restricted))
            .unwrap_or(f64::NEG_INFINITY)
    }
}

struct NegLogScale<'a, 'b>(&'a Objective<'b>);

impl CostFunction for NegLogScale<'_, '_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, t: &Vec<f64>) -> std::result::Result<f64, argmin::core::Error> {
        let v = -self.0.ll(t[0].exp(), t[1].exp());
        Ok(if v.is_finite() { v } else { f64::MAX })
    }
}

struct Line<F: Fn(f64) -> f64>(F);

impl<F: Fn(f64) -> f64> CostFunction for Line<F> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> std::result::Result<f64, argmin::core::Error> {
        let v = (self.0)(*x);
        Ok(if v.is_finite() { v } else { f64::MAX })
    }
}

fn no_convergence(what: &str, detail: String) -> Error {
    Error::NoConvergence {
        what: what.to_string(),
        detail,
        hint: "check the cluster column and the data for extreme values, or fit the two-level \
               model with --levels 2 --robust"
            .into(),
    }
}

/// [`Error::NoConvergence`] unless an argmin run ended because its solver converged.
fn converged(status: &TerminationStatus, what: &str, search: &str) -> Result<()> {
    if matches!(
        status,
        TerminationStatus::Terminated(TerminationReason::SolverConverged)
    ) {
        Ok(())
    } else {
        Err(no_convergence(
            what,
            format!("{search} ended with '{status:?}'"),
        ))
    }
}

/// Maximises `f` over s ≥ 0 on [0, hi]: Brent's method (argmin's `BrentOpt`)
/// on √s, compared with the end s = 0, which Brent never evaluates.
fn max_line<F: Fn(f64) -> f64>(f: F, hi: f64, what: &str) -> Result<(f64, f64)> {
    let neg = |u: f64| -f(u * u);
    let solver = BrentOpt::new(0.0, hi.sqrt()).set_tolerance(
        tolerance::MULTILEVEL_LINE_REL,
        tolerance::MULTILEVEL_LINE_ABS * hi.sqrt(),
    );
    let res = Executor::new(Line(neg), solver)
        .configure(|s| s.max_iters(tolerance::ROOT_MAX_ITERS))
        .run()
        .map_err(|e| no_convergence(what, e.to_string()))?;
    let st = res.state();
    converged(st.get_termination_status(), what, "the line search")?;
    let u = *st
        .get_param()
        .ok_or_else(|| no_convergence(what, "no estimate".into()))?;
    let (s, v) = (u * u, f(u * u));
    let v0 = f(0.0);
    Ok(if v0 >= v { (0.0, v0) } else { (s, v) })
}

/// A generous upper end for either variance component: ten times the
/// larger of the spread of the effects and the largest sampling variance.
fn upper_scale(data: &Data<'_>) -> f64 {
    let k = data.y.len() as f64;
    let mean = data.y.iter().sum::<f64>() / k;
    let var = data.y.iter().map(|y| (y - mean).powi(2)).sum::<f64>() / k;
    let vmax = data.v.iter().copied().fold(0.0, f64::max);
    10.0 * var.max(vmax).max(f64::MIN_POSITIVE)
}

/// Maximises the (restricted) likelihood over σ²_b ≥ 0, σ²_w ≥ 0.
///
/// # Method
/// Nelder–Mead (argmin) on (ln σ²_b, ln σ²_w), restarted once from its
/// optimum with a smaller simplex; separately, each boundary (σ²_b = 0 and
/// σ²_w = 0) is profiled by a one-dimensional Brent search on [0, hi]
/// ([`max_line`]). The largest likelihood wins; an interior optimum that is
/// not better than a boundary by more than rounding counts as the boundary.
///
/// # Errors
/// [`Error::NoConvergence`] when a search stops without converging.
pub fn maximise(data: &Data<'_>, cl: &Clusters, restricted: bool) -> Result<Components> {
    let what = if restricted {
        "the REML estimate of the variance components"
    } else {
        "the ML estimate of the variance components"
    };
    let obj = Objective {
        data,
        cl,
        restricted,
        evals: std::cell::Cell::new(0),
    };
    let hi = upper_scale(data);
    let (sw0, ll_b0) = max_line(|s| obj.ll(0.0, s), hi, what)?;
    let (sb0, ll_w0) = max_line(|s| obj.ll(s, 0.0), hi, what)?;
    let start = (sw0.max(sb0).max(hi * 1e-4)) / 2.0;
    let mut theta = vec![start.ln(), start.ln()];
    let mut step = 1.0;
    // The stopping rule is absolute in argmin: scale it to the objective's size.
    let sd_tol = tolerance::MULTILEVEL_NM_SD * (1.0 + ll_b0.abs().max(ll_w0.abs()));
    for _ in 0..2 {
        let simplex = vec![
            theta.clone(),
            vec![theta[0] + step, theta[1]],
            vec![theta[0], theta[1] + step],
        ];
        let solver = NelderMead::new(simplex)
            .with_sd_tolerance(sd_tol)
            .map_err(|e| no_convergence(what, e.to_string()))?;
        let res = Executor::new(NegLogScale(&obj), solver)
            .configure(|s| s.max_iters(tolerance::MULTILEVEL_NM_MAX_ITERS))
            .run()
            .map_err(|e| no_convergence(what, e.to_string()))?;
        let st = res.state();
        converged(st.get_termination_status(), what, "the Nelder–Mead search")?;
        theta = st
            .get_best_param()
            .cloned()
            .ok_or_else(|| no_convergence(what, "no estimate".into()))?;
        step = 0.05;
    }
    let (ib, iw) = (theta[0].exp(), theta[1].exp());
    let ll_in = obj.ll(ib, iw);
    let best_boundary = ll_b0.max(ll_w0);
    let margin = tolerance::MULTILEVEL_BOUNDARY_LL * (1.0 + best_boundary.abs());
    let evaluations = obj.evals.get();
    Ok(if ll_in.is_finite() && ll_in > best_boundary + margin {
        Components {
            between: ib,
            within: iw,
            ll: ll_in,
            ending: Ending::Converged,
            evaluations,
        }
    } else if ll_b0 >= ll_w0 {
        Components {
            between: 0.0,
            within: sw0,
            ll: ll_b0,
            ending: Ending::Boundary,
            evaluations,
        }
    } else {
        Components {
            between: sb0,
            within: 0.0,
            ll: ll_w0,
            ending: Ending::Boundary,
            evaluations,
        }
    })
}

/// Profile (restricted) log-likelihood of one component held at `s`, the
/// other maximised over [0, hi].
fn profile(data: &Data<'_>, cl: &Clusters, restricted: bool, between: bool, s: f64) -> Result<f64> {
    let obj = Objective {
        data,
        cl,
        restricted,
        evals: std::cell::Cell::new(0),
    };
    let hi = upper_scale(data).max(4.0 * s);
    let f = |o: f64| if between { obj.ll(s, o) } else { obj.ll(o, s) };
    Ok(max_line(f, hi, "the profile likelihood of a variance component")?.1)
}

/// Profile-likelihood interval of one component: the values s with
/// 2[ℓ̂ − ℓ_prof(s)] ≤ χ²₁ quantile at `level` (a Wald-free interval; at the
/// boundary the lower end is 0).
///
/// # Errors
/// [`Error::NoConvergence`] when a root search fails.
pub fn profile_interval(
    data: &Data<'_>,
    cl: &Clusters,
    restricted: bool,
    between: bool,
    est: &Components,
    level: f64,
) -> Result<(f64, f64)> {
    let crit = dist::chi2_quantile(1.0 - level, 1.0, dist::Tail::Upper);
    let s_hat = if between { est.between } else { est.within };
    let g = |s: f64| -> f64 {
        match profile(data, cl, restricted, between, s) {
            Ok(l) => 2.0 * (est.ll - l) - crit,
            Err(_) => f64::NAN,
        }
    };
    let what = "the profile-likelihood interval of a variance component";
    let lower = if s_hat <= 0.0 || g(0.0) <= 0.0 {
        0.0
    } else {
        crate::model::tau2::brent_root(g, 0.0, s_hat, what)?.0
    };
    let mut hi = s_hat.max(upper_scale(data) * 1e-3) * 2.0;
    let mut tries = 0;
    while g(hi) <= 0.0 {
        hi *= 4.0;
        tries += 1;
        if tries > tolerance::BRACKET_DOUBLINGS || !hi.is_finite() {
            return Err(no_convergence(what, "no upper end was bracketed".into()));
        }
    }
    let upper = crate::model::tau2::brent_root(g, s_hat, hi, what)?.0;
    Ok((lower, upper))
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
                "--tau2",
                format!(
                    "the three-level model (--cluster) is fitted by reml or ml only, not '{}'; \
                     use --tau2 reml (the default) or --tau2 ml",
                    other.id()
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
        Inference::Kh => Some(e.q / df),
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
    let fe = wls::fit_with(&data, 0.0, Want::SCORE).ok_or_else(singular)?;
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
        v_typical: df / fe.tr_p,
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

/// Cluster-robust inference for one coefficient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RobustCoef {
    /// CR2 standard error.
    pub se: f64,
    /// Satterthwaite degrees of freedom.
    pub df: f64,
    /// Two-sided p from t(df).
    pub p: f64,
}

/// The approximate Hotelling T² test (HTZ) of several coefficients.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RobustTest {
    /// F = (η − q + 1)/(η q) · Q.
    pub statistic: f64,
    /// q.
    pub df1: f64,
    /// η − q + 1.
    pub df2: f64,
    /// Upper-tail F probability.
    pub p: f64,
}

/// Symmetric matrix power by eigen-decomposition; eigenvalues below
/// `tolerance::CR2_EIGEN_FLOOR` × the largest are treated as 0 (their power
/// is 0: a generalised inverse square root).
fn sym_power(a: &DMatrix<f64>, power: f64) -> DMatrix<f64> {
    let e = a.clone().symmetric_eigen();
    let big = e.eigenvalues.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let n = a.nrows();
    let mut d = DMatrix::zeros(n, n);
    for i in 0..n {
        let l = e.eigenvalues[i];
        if l > tolerance::CR2_EIGEN_FLOOR * big {
            d[(i, i)] = l.powf(power);
        }
    }
    &e.eigenvectors * d * e.eigenvectors.transpose()
}

/// Cluster-robust (CR2) covariance, Satterthwaite df per coefficient and
/// the HTZ test of coefficients 1..p.
///
/// # Formula
/// Working model Φ = V̂ (block diagonal V_j at the fitted components), W = V̂⁻¹,
/// M = (X'WX)⁻¹, e_j = y_j − X_jβ̂. Adjustment (Tipton & Pustejovsky 2015;
/// Pustejovsky & Tipton 2018, *J. Bus. Econ. Stat.* 36:672; cited from memory):
/// A_j = V_j^{1/2} B_j^{−1/2} V_j^{1/2}, B_j = V_j^{1/2}(V_j − X_jMX_j')V_j^{1/2}
/// (for V = I this is Bell & McCaffrey's (I − H_jj)^{−1/2}).
/// V^CR2 = M [Σ_j X_j'W_jA_j e_j e_j'A_jW_jX_j] M.
/// Satterthwaite df for a contrast c (Tipton 2015): q_j = A_jW_jX_jMc,
/// a_j = X_j'q_j, G_ij = δ_ij q_j'V_jq_j − a_i'Ma_j (= g_i'Φg_j with
/// g_j = (I − H)_j'q_j, worked out for W = Φ⁻¹), ν = (Σ_j G_jj)²/Σ_ij G_ij².
/// HTZ (Tipton & Pustejovsky 2015): Q = (Cβ̂)'(CV^CR2C')⁻¹Cβ̂, C̃ = (CMC')^{−1/2}C,
/// G^{st} as above for rows s, t of C̃, η = q(q + 1)/Σ_{s,t}Σ_{i,j}[(G^{st}_ij)² +
/// G^{ss}_ij G^{tt}_ij], F = (η − q + 1)Q/(ηq) on (q, η − q + 1).
///
/// `x` is the design of the data (any parametrisation), `sb`, `sw` the
/// working components (sb = 0 for the two-level working model, sw = τ̂²).
///
/// # Errors
/// [`Error::Model`] when there are no more clusters than coefficients or the design is singular.
#[allow(clippy::type_complexity)]
pub fn robust(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    cl: &Clusters,
    sb: f64,
    sw: f64,
) -> Result<(DMatrix<f64>, Vec<RobustCoef>, Option<RobustTest>)> {
    let m = cl.m();
    if m <= p {
        return Err(Error::Model(format!(
            "--robust: {m} clusters cannot support {p} model terms (the cluster-robust variance \
             needs more clusters than coefficients); drop moderators, or leave out --robust"
        )));
    }
    let k = y.len();
    let st = standardise(x, k, p);
    let data = Data { y, v, x: &st.x, p };
    let e = evaluate(&data, cl, sb, sw).ok_or_else(|| {
        Error::Model("the weighted design matrix is singular; the moderators are collinear".into())
    })?;
    let mi = &e.m_inv;
    // Per cluster: X_j'W_jA_j (p × n_j), V_j, X_j.
    let mut xwa: Vec<DMatrix<f64>> = Vec::with_capacity(m);
    let mut vjs: Vec<DMatrix<f64>> = Vec::with_capacity(m);
    let mut meat = DMatrix::<f64>::zeros(p, p);
    for g in &cl.groups {
        let n = g.len();
        let vj = DMatrix::from_fn(n, n, |a, b| sb + if a == b { v[g[a]] + sw } else { 0.0 });
        let xj = DMatrix::from_fn(n, p, |a, b| st.x[g[a] * p + b]);
        let wj = vj
            .clone()
            .try_inverse()
            .ok_or_else(|| Error::Model("a cluster's covariance block is singular".into()))?;
        let half = sym_power(&vj, 0.5);
        let bj = &half * (&vj - &xj * mi * xj.transpose()) * &half;
        let aj = &half * sym_power(&bj, -0.5) * &half;
        let ej = DVector::from_fn(n, |a, _| y[g[a]]) - &xj * &e.beta;
        let c = xj.transpose() * &wj * &aj;
        let u = &c * ej;
        meat += &u * u.transpose();
        xwa.push(c);
        vjs.push(vj);
    }
    let vr = mi * meat * mi;
    // G matrices for a set of contrasts (in the standardised parametrisation).
    let gram = |cs: &[DVector<f64>]| -> Vec<Vec<DMatrix<f64>>> {
        // q_sj = (X_j'W_jA_j)' M c_s ; a_sj = X_j'q_sj
        let per: Vec<Vec<(DVector<f64>, DVector<f64>)>> = cs
            .iter()
            .map(|c| {
                let mc = mi * c;
                cl.groups
                    .iter()
                    .enumerate()
                    .map(|(j, g)| {
                        let qj = xwa[j].transpose() * &mc;
                        let xj = DMatrix::from_fn(g.len(), p, |a, b| st.x[g[a] * p + b]);
                        let aj = xj.transpose() * &qj;
                        (qj, aj)
                    })
                    .collect()
            })
            .collect();
        let nc = cs.len();
        let mut out = vec![vec![DMatrix::zeros(m, m); nc]; nc];
        for s in 0..nc {
            for t in 0..nc {
                let mat = &mut out[s][t];
                let ma: Vec<DVector<f64>> = per[t].iter().map(|(_, a)| mi * a).collect();
                for i in 0..m {
                    for j in 0..m {
                        mat[(i, j)] = -per[s][i].1.dot(&ma[j]);
                    }
                    mat[(i, i)] += per[s][i].0.dot(&(&vjs[i] * &per[t][i].0));
                }
            }
        }
        out
    };
    // Contrasts of the original coefficients: β = Aβ̃, so β_j = (row j of A)·β̃.
    let mut coefs = Vec::with_capacity(p);
    let vr_orig = &st.a * &vr * st.a.transpose();
    let beta = &st.a * &e.beta;
    for jj in 0..p {
        let c = st.a.row(jj).transpose();
        let g = gram(std::slice::from_ref(&c));
        let g = &g[0][0];
        let tr: f64 = (0..m).map(|i| g[(i, i)]).sum();
        let ss: f64 = g.iter().map(|x| x * x).sum();
        let df = tr * tr / ss;
        let se = vr_orig[(jj, jj)].max(0.0).sqrt();
        let tstat = beta[jj] / se;
        coefs.push(RobustCoef {
            se,
            df,
            p: dist::t_two_sided_p(tstat, df),
        });
    }
    let test = if p > 1 {
        let q = p - 1;
        let cmat = DMatrix::from_fn(q, p, |r, c| st.a[(r + 1, c)]);
        let cb = &cmat * &e.beta;
        let cvc = &cmat * &vr * cmat.transpose();
        let cvc_inv = cvc.try_inverse().ok_or_else(|| {
            Error::Model("the robust covariance of the moderator terms is singular".into())
        })?;
        let stat_q = cb.dot(&(cvc_inv * &cb));
        let omega = &cmat * mi * cmat.transpose();
        let ct = sym_power(&omega, -0.5) * &cmat;
        let cs: Vec<DVector<f64>> = (0..q).map(|r| ct.row(r).transpose()).collect();
        let g = gram(&cs);
        let mut denom = 0.0;
        for s in 0..q {
            for t in 0..q {
                denom += g[s][t].iter().map(|x| x * x).sum::<f64>()
                    + g[s][s]
                        .iter()
                        .zip(g[t][t].iter())
                        .map(|(a, b)| a * b)
                        .sum::<f64>();
            }
        }
        let qf = q as f64;
        let eta = qf * (qf + 1.0) / denom;
        let df2 = eta - qf + 1.0;
        let f = (eta - qf + 1.0) / (eta * qf) * stat_q;
        Some(RobustTest {
            statistic: f,
            df1: qf,
            df2,
            p: if df2 > 0.0 {
                dist::f_sf(f, qf, df2)
            } else {
                f64::NAN
            },
        })
    } else {
        None
    };
    Ok((vr_orig, coefs, test))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dense_ll(y: &[f64], v: &[f64], x: &[f64], p: usize, cl: &Clusters, sb: f64, sw: f64) -> f64 {
        // Dense reference: build V, invert, REML core.
        let k = y.len();
        let mut vm = DMatrix::zeros(k, k);
        for g in &cl.groups {
            for &a in g {
                for &b in g {
                    vm[(a, b)] = sb + if a == b { v[a] + sw } else { 0.0 };
                }
            }
        }
        let xm = DMatrix::from_row_slice(k, p, x);
        let ym = DVector::from_column_slice(y);
        let vi = vm.clone().try_inverse().unwrap();
        let xtx = xm.transpose() * &vi * &xm;
        let beta = xtx.clone().try_inverse().unwrap() * xm.transpose() * &vi * &ym;
        let r = &ym - &xm * beta;
        -0.5 * (vm.determinant().ln() + xtx.determinant().ln() + r.dot(&(&vi * &r)))
    }

    #[test]
    fn closed_forms_match_the_dense_likelihood() {
        // Sherman–Morrison forms against a dense inverse and determinant.
        let y = [0.1, 0.3, -0.2, 0.5, 0.4, 0.0, 0.7];
        let v = [0.05, 0.04, 0.06, 0.03, 0.02, 0.07, 0.05];
        let x: Vec<f64> = [0.0, 1.0, 2.0, 1.0, 3.0, 0.5, 2.5]
            .iter()
            .flat_map(|t| [1.0, *t])
            .collect();
        let cl = Clusters::from_ids(&["a", "a", "b", "b", "b", "c", "d"]);
        let data = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 2,
        };
        for (sb, sw) in [(0.0, 0.0), (0.02, 0.01), (0.3, 0.0), (0.0, 0.2)] {
            let e = evaluate(&data, &cl, sb, sw).unwrap();
            let a = ll_core(&e, true);
            let b = dense_ll(&y, &v, &x, 2, &cl, sb, sw);
            assert!(
                (a - b).abs() < tolerance::IDENTITY_REL * b.abs().max(1.0),
                "{a} {b}"
            );
        }
    }

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

    #[test]
    fn htz_with_one_contrast_has_the_satterthwaite_df() {
        // Under the working model E[c'V^CR2 c] = c'Mc, so with c scaled to
        // c'Mc = 1 the trace Σ G_jj is 1 (an identity of the CR2 adjustment).
        let y = [0.1, 0.3, -0.2, 0.5, 0.4, 0.0, 0.7, 0.2];
        let v = [0.05, 0.04, 0.06, 0.03, 0.02, 0.07, 0.05, 0.03];
        let x: Vec<f64> = [0.0, 1.0, 2.0, 1.0, 3.0, 0.5, 2.5, 1.5]
            .iter()
            .flat_map(|t| [1.0, *t])
            .collect();
        let cl = Clusters::from_ids(&["a", "a", "b", "b", "b", "c", "d", "d"]);
        let (_, coefs, test) = robust(&y, &v, &x, 2, &cl, 0.02, 0.01).unwrap();
        // q = 1: the HTZ F equals t² with the Satterthwaite df.
        let t = test.unwrap();
        assert!((t.df2 - coefs[1].df).abs() < 1e-8 * coefs[1].df);
    }
}
