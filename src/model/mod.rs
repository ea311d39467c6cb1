//! The random-effects meta-regression model y = Xβ + u + e, u ~ N(0, τ²),
//! e ~ N(0, v) with v known: τ² estimation, coefficients, tests,
//! heterogeneity, predictions.

/// `$fixed!(P)` with P = `$p` when 1 ≤ p ≤ 8 (a loop the compiler unrolls
/// for that many columns), `$general` for larger designs: the dispatch of
/// the per-row sums of [`wls`] and [`near`].
macro_rules! by_columns {
    ($p:expr, $fixed:ident, $general:expr) => {
        match $p {
            1 => $fixed!(1),
            2 => $fixed!(2),
            3 => $fixed!(3),
            4 => $fixed!(4),
            5 => $fixed!(5),
            6 => $fixed!(6),
            7 => $fixed!(7),
            8 => $fixed!(8),
            _ => $general,
        }
    };
}

pub mod design;
pub mod inference;
pub mod location_scale;
pub mod multilevel;
pub mod near;
pub mod probe;
mod scaling;
pub mod selection;
pub mod shrink;
pub mod solve;
pub mod subsets;
pub mod tau2;
mod unit_weights;
pub mod wls;

use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};
use std::borrow::Cow;
use tau2::{Tau2Fit, Tau2Method};
use wls::{Data, Want};

pub use crate::result::Inference;
pub(crate) use scaling::{standardise, standardise_swept, ColumnSweep, Swept};

/// Options of one fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitOptions {
    /// τ² estimator.
    pub method: Tau2Method,
    /// Test distribution.
    pub inference: Inference,
    /// Confidence level, in (0, 1).
    pub level: f64,
}

/// A fitted model (internal; the public result is built from it).
#[derive(Debug, Clone)]
pub struct ModelFit {
    /// τ² and how it was found.
    pub tau2: Tau2Fit,
    /// Q-profile interval for τ² (None for the common-effect model).
    pub tau2_ci: Option<(f64, f64)>,
    /// Coefficients.
    pub beta: DVector<f64>,
    /// Covariance used for inference (scaled under Knapp–Hartung).
    pub cov: DMatrix<f64>,
    /// The model-based covariance (X'WX)⁻¹ (X'V̂⁻¹X)⁻¹ for the three-level
    /// model), unscaled under every inference; prediction intervals use it.
    pub cov_model: DMatrix<f64>,
    /// The Knapp–Hartung scale factor applied: s² = Q(τ̂²)/(k − p) under `kh`,
    /// max(1, s²) under `kh-floor`, None under `z`.
    pub kh_scale: Option<f64>,
    /// The raw factor s² = Q(τ̂²)/(k − p) (the weighted residual mean square
    /// at τ̂²), computed under every inference so that a factor below 1 can
    /// be reported whatever was chosen.
    pub scale_factor: f64,
    /// Residual degrees of freedom of each coefficient's t test (k − p for
    /// every coefficient of the two-level model; the between–within rule of
    /// [`multilevel::between_within_df`] for the three-level model).
    pub term_df: Vec<f64>,
    /// Degrees of freedom of the predictive t distribution of a new study's
    /// true effect (k − p − 1; see [`inference::predictive`]).
    pub pi_df: f64,
    /// Number of studies.
    pub k: usize,
    /// Number of coefficients.
    pub p: usize,
    /// Random-effects weights 1/(v_i + τ̂²) (this and the next two per-study
    /// arrays are empty for a fit made by [`fit_summary`]).
    pub weights: Vec<f64>,
    /// Fitted values x_i'β̂.
    pub fitted: Vec<f64>,
    /// Standardised residuals r_i / √(1/w_i − x_i'M⁻¹x_i), with the model-based
    /// (unscaled) M⁻¹ under either inference: the residual divided by its
    /// standard deviation under the model (internally studentised; Viechtbauer
    /// & Cheung 2010, *Res. Synth. Methods* 1:112, cited from memory).
    /// None where that variance is 0.
    pub std_resid: Vec<Option<f64>>,
    /// Residual heterogeneity test at the common-effect weights.
    pub q_e: f64,
    /// Typical within-study variance (k − p)/tr P₀.
    pub v_typical: f64,
    /// Log-likelihood (ML) or restricted log-likelihood (REML), constants included.
    pub log_likelihood: Option<f64>,
    /// The options used.
    pub options: FitOptions,
}

/// The Knapp–Hartung factor applied under `inference`: s² under `kh`,
/// max(1, s²) under `kh-floor` (Röver, Knapp & Friede 2015, *BMC Med. Res.
/// Methodol.* 15:99), none under `z`.
pub fn applied_scale(inference: Inference, s2: f64) -> Option<f64> {
    match inference {
        Inference::Kh => Some(s2),
        Inference::KhFloor => Some(s2.max(1.0)),
        Inference::Z => None,
    }
}

/// Fits the model.
///
/// # Errors
/// [`Error::Model`] when k ≤ p or the design is singular;
/// [`Error::NoConvergence`] when an estimator's root search fails.
pub fn fit(y: &[f64], v: &[f64], x: &[f64], p: usize, options: FitOptions) -> Result<ModelFit> {
    fit_parts(y, v, x, p, options, true)
}

/// [`fit`], optionally without the Q-profile interval for τ² (which costs
/// two root searches), for fits whose interval nobody reads.
///
/// # Errors
/// As [`fit`].
pub fn fit_parts(
    y: &[f64],
    v: &[f64],
    x: &[f64],
    p: usize,
    options: FitOptions,
    with_ci: bool,
) -> Result<ModelFit> {
    check_size(y.len(), p)?;
    let st = standardise(x, y.len(), p);
    let scaled = Scaled {
        x: &st.x,
        a: &st.a,
        log_det_a: st.log_det_a,
        ones: false,
    };
    let (mut fit, m_inv) = fit_scaled(y, v, &scaled, options, with_ci)?;
    per_study(&mut fit, (y, v, x), &scaled, &m_inv);
    Ok(fit)
}

/// [`fit_parts`] without the per-study arrays ([`ModelFit::weights`],
/// [`ModelFit::fitted`] and [`ModelFit::std_resid`] are left empty), for a
/// caller that reads only the model's summary numbers. A design matrix
/// given owned is standardised in place, so the fit holds no second k × p
/// matrix; a borrowed one is copied only when a column needs scaling (not
/// for the intercept-only design, a column of ones). Every number is the
/// same as [`fit_parts`]'s: the same standardised values, the same passes.
///
/// # Errors
/// As [`fit`].
pub fn fit_summary(
    y: &[f64],
    v: &[f64],
    x: Cow<'_, [f64]>,
    p: usize,
    options: FitOptions,
    with_ci: bool,
) -> Result<ModelFit> {
    fit_summary_swept(y, v, x, p, options, with_ci, None)
}

/// [`fit_summary`] with, when known, the [`Swept`] values of `x` (see
/// [`standardise_swept`]).
pub(crate) fn fit_summary_swept(
    y: &[f64],
    v: &[f64],
    x: Cow<'_, [f64]>,
    p: usize,
    options: FitOptions,
    with_ci: bool,
    swept: Option<Swept>,
) -> Result<ModelFit> {
    let k = y.len();
    check_size(k, p)?;
    let ones_only = p == 1 && (0..k).all(|i| x[i] == 1.0);
    let (x, a, log_det_a) = if ones_only {
        // Nothing to centre or scale: X̃ = X, A = I.
        (x, DMatrix::identity(1, 1), 0.0)
    } else {
        let mut x = x.into_owned();
        let (a, log_det_a) = standardise_swept(&mut x, k, p, swept);
        (Cow::Owned(x), a, log_det_a)
    };
    let scaled = Scaled {
        x: &x,
        a: &a,
        log_det_a,
        ones: ones_only,
    };
    Ok(fit_scaled(y, v, &scaled, options, with_ci)?.0)
}

/// Refuses a fit of `p` coefficients to `k` ≤ `p` studies.
fn check_size(k: usize, p: usize) -> Result<()> {
    if k <= p {
        return Err(Error::Model(format!(
            "{k} studies cannot support {p} coefficients; at least {} are needed",
            p + 1
        )));
    }
    Ok(())
}

/// A standardised design X̃ = XA (row-major k × p) with A and ln|det A|
/// (see [`standardise`]).
struct Scaled<'a> {
    x: &'a [f64],
    a: &'a DMatrix<f64>,
    log_det_a: f64,
    /// X̃ is one column of ones (its passes need not read it).
    ones: bool,
}

/// The fit on the standardised design, with the per-study arrays left
/// empty, and (X̃'WX̃)⁻¹ at τ̂² (standardised) for [`per_study`].
fn fit_scaled(
    y: &[f64],
    v: &[f64],
    st: &Scaled<'_>,
    options: FitOptions,
    with_ci: bool,
) -> Result<(ModelFit, DMatrix<f64>)> {
    let (k, p) = (y.len(), st.a.nrows());
    let data = Data { y, v, x: st.x, p };
    let (hint, ols_beta) = tau2::scale_hint_and_ols(&data);
    // Every fit below goes through one evaluator: one pass each, around the
    // coefficients of the fit before, and none repeated.
    let ev = match ols_beta {
        Some(b) if k >= near::FEWER_PASSES_MIN_ROWS => near::Evaluator::around(data.clone(), b),
        _ => near::Evaluator::new(data.clone()),
    }
    .of_ones(st.ones);
    let tau2 = tau2::estimate_with(&ev, options.method, hint)?;
    let t = tau2.estimate;
    let singular = || {
        Error::Model("the weighted design matrix is singular; the moderators are collinear".into())
    };
    let likelihood = matches!(options.method, Tau2Method::Reml | Tau2Method::Ml);
    let want = if likelihood { Want::ALL } else { Want::Q };
    let f = ev.at(t, want).ok_or_else(singular)?;
    let df = (k - p) as f64;
    let scale_factor = kh_scale(f.q, df, y, v, t);
    let kh_scale = applied_scale(options.inference, scale_factor);
    let beta = st.a * &f.beta;
    let cov_model = st.a * &f.m_inv * st.a.transpose();
    let cov = match kh_scale {
        Some(s2) => &cov_model * s2,
        None => cov_model.clone(),
    };
    let fe = ev.at(0.0, Want::Q).ok_or_else(singular)?;
    let v_typical = df / wls::trace_p_with(&data, 0.0, &fe.m_inv);
    let tau2_ci = match options.method {
        Tau2Method::None => None,
        _ if !with_ci => None,
        _ => Some(tau2::q_profile_with(&ev, options.level, hint, t)?),
    };
    let log_likelihood = match options.method {
        Tau2Method::Reml | Tau2Method::Ml => {
            let restricted = options.method == Tau2Method::Reml;
            let mut ll = tau2::log_likelihood(&f, restricted);
            let two_pi = (2.0 * std::f64::consts::PI).ln();
            if restricted {
                // ln det(X'WX) in the original parametrisation = ln det(X̃'WX̃) − 2 ln|det A|.
                ll += st.log_det_a - 0.5 * df * two_pi;
            } else {
                ll -= 0.5 * k as f64 * two_pi;
            }
            Some(ll)
        }
        _ => None,
    };
    let fit = ModelFit {
        tau2,
        tau2_ci,
        beta,
        cov,
        cov_model,
        kh_scale,
        scale_factor,
        term_df: vec![df; p],
        pi_df: df - 1.0,
        k,
        p,
        weights: Vec::new(),
        fitted: Vec::new(),
        std_resid: Vec::new(),
        q_e: fe.q,
        v_typical,
        log_likelihood,
        options,
    };
    Ok((fit, f.m_inv.clone()))
}

/// Fills the per-study arrays of `fit`: w_i = 1/(v_i + τ̂²), the fitted
/// value x_i'β̂ (original design) and the standardised residual
/// r_i / √(1/w_i − x̃_i'M̃⁻¹x̃_i) with M̃⁻¹ = `m_inv` = (X̃'WX̃)⁻¹ on the
/// standardised design (the same leverage as in the original one).
fn per_study(
    fit: &mut ModelFit,
    (y, v, x): (&[f64], &[f64], &[f64]),
    st: &Scaled<'_>,
    m_inv: &DMatrix<f64>,
) {
    let (k, p, t) = (y.len(), fit.p, fit.tau2.estimate);
    let data = Data { y, v, x: st.x, p };
    let orig = Data { y, v, x, p };
    let arrays = wls::with_quad_form(
        &data,
        m_inv,
        PerStudy {
            y,
            v,
            orig: &orig,
            beta: &fit.beta,
            tau2: t,
        },
    );
    debug_assert_eq!(arrays.0.len(), k);
    (fit.weights, fit.fitted, fit.std_resid) = arrays;
}

/// The three arrays of [`per_study`], x̃_i'M̃⁻¹x̃_i from the quadratic form
/// given.
struct PerStudy<'d, 'a> {
    y: &'d [f64],
    v: &'d [f64],
    orig: &'d Data<'a>,
    beta: &'d DVector<f64>,
    tau2: f64,
}

type StudyArrays = (Vec<f64>, Vec<f64>, Vec<Option<f64>>);

impl wls::UseQuadForm for PerStudy<'_, '_> {
    type Out = StudyArrays;
    fn run(self, quad: impl Fn(usize) -> f64 + Sync) -> StudyArrays {
        use rayon::prelude::*;
        let PerStudy {
            y,
            v,
            orig,
            beta,
            tau2: t,
        } = self;
        let k = y.len();
        // Each study's values depend on that study alone, so the rows can be
        // shared among threads without changing a bit.
        let study = |i: usize| {
            let w = 1.0 / (v[i] + t);
            let fi = wls::fitted(orig, beta, i);
            let var_r = 1.0 / w - quad(i);
            let resid = (var_r > crate::tolerance::RESIDUAL_VARIANCE_FLOOR / w)
                .then(|| (y[i] - fi) / var_r.sqrt());
            (w, fi, resid)
        };
        let (mut weights, mut fitted, mut std_resid) = (vec![0.0; k], vec![0.0; k], vec![None; k]);
        let fill = |first: usize, w: &mut [f64], f: &mut [f64], r: &mut [Option<f64>]| {
            for (j, ((w, f), r)) in w.iter_mut().zip(f).zip(r).enumerate() {
                (*w, *f, *r) = study(first + j);
            }
        };
        if k < wls::PARALLEL_MIN_ROWS {
            fill(0, &mut weights, &mut fitted, &mut std_resid);
        } else {
            let rows = wls::CHUNK_ROWS;
            weights
                .par_chunks_mut(rows)
                .zip(fitted.par_chunks_mut(rows))
                .zip(std_resid.par_chunks_mut(rows))
                .enumerate()
                .for_each(|(c, ((w, f), r))| fill(c * rows, w, f, r));
        }
        (weights, fitted, std_resid)
    }
}

/// The Knapp–Hartung scale s² = Q/(k − p) (Knapp & Hartung 2003, *Stat.
/// Med.* 22:2693), or exactly 0 when the residual Q is rounding: effects
/// that lie exactly on the model (identical effects, effects on a line)
/// leave residuals of a few ε·|y| after floating-point arithmetic, so Q is
/// compared with the scale of the data, Q ≤ [`crate::tolerance::KH_EXACT_FIT_REL`]
/// · Σ y_i²/(v_i + τ²), not with 0. A zero scale is refused by the callers
/// (it would give standard errors of 0 and infinite t).
pub fn kh_scale(q: f64, df: f64, y: &[f64], v: &[f64], tau2: f64) -> f64 {
    let size: f64 = y.iter().zip(v).map(|(y, v)| y * y / (v + tau2)).sum();
    if q <= crate::tolerance::KH_EXACT_FIT_REL * size {
        0.0
    } else {
        q / df
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn opts(method: Tau2Method) -> FitOptions {
        FitOptions {
            method,
            inference: Inference::Z,
            level: 0.95,
        }
    }

    #[test]
    fn design_without_intercept_is_plain_weighted_regression() {
        // One column, no intercept, τ² = 0: β = Σ w x y / Σ w x².
        let y = [0.2, 0.5, 0.9, 1.1];
        let v = [0.1, 0.2, 0.1, 0.4];
        let x = [1.0, 2.0, 3.0, 4.0];
        let f = fit(&y, &v, &x, 1, opts(Tau2Method::None)).unwrap();
        let num: f64 = (0..4).map(|i| x[i] * y[i] / v[i]).sum();
        let den: f64 = (0..4).map(|i| x[i] * x[i] / v[i]).sum();
        assert!((f.beta[0] - num / den).abs() < 1e-14);
        assert!((f.cov[(0, 0)] - 1.0 / den).abs() < 1e-14);
    }

    /// The fit without per-study arrays is the same fit: every summary
    /// number equal to the last bit, whether the matrix is given owned
    /// (standardised in place) or borrowed (copied, or not at all for a
    /// column of ones), with and without an intercept.
    #[test]
    fn summary_fit_equals_the_full_fit_bit_for_bit() {
        let y = [0.1, 0.4, 0.35, 0.8, 0.7, 1.1, 0.2, 0.95];
        let v = [0.02, 0.03, 0.01, 0.05, 0.02, 0.04, 0.03, 0.06];
        let t: Vec<f64> = (0..8).map(|i| 2000.0 + i as f64 * 1.5).collect();
        let with_intercept: Vec<f64> = t.iter().flat_map(|t| [1.0, *t, t * t]).collect();
        let without: Vec<f64> = t.iter().flat_map(|t| [*t, (t - 2003.0).abs()]).collect();
        let ones = vec![1.0; 8];
        let cases: [(&[f64], usize); 3] = [(&with_intercept, 3), (&without, 2), (&ones, 1)];
        for method in [
            Tau2Method::Reml,
            Tau2Method::Ml,
            Tau2Method::Dl,
            Tau2Method::None,
        ] {
            for (x, p) in cases {
                let full = fit_parts(&y, &v, x, p, opts(method), true).unwrap();
                let owned = fit_summary(&y, &v, Cow::Owned(x.to_vec()), p, opts(method), true);
                let borrowed = fit_summary(&y, &v, Cow::Borrowed(x), p, opts(method), true);
                for s in [owned.unwrap(), borrowed.unwrap()] {
                    assert_eq!(s.tau2.estimate.to_bits(), full.tau2.estimate.to_bits());
                    assert_eq!(s.tau2_ci, full.tau2_ci);
                    assert_eq!(s.beta, full.beta);
                    assert_eq!(s.cov, full.cov);
                    assert_eq!(s.cov_model, full.cov_model);
                    assert_eq!(s.scale_factor.to_bits(), full.scale_factor.to_bits());
                    assert_eq!(s.q_e.to_bits(), full.q_e.to_bits());
                    assert_eq!(s.v_typical.to_bits(), full.v_typical.to_bits());
                    assert_eq!(
                        s.log_likelihood.map(f64::to_bits),
                        full.log_likelihood.map(f64::to_bits)
                    );
                    assert!(s.weights.is_empty() && s.fitted.is_empty() && s.std_resid.is_empty());
                }
                assert_eq!(full.weights.len(), 8);
            }
        }
    }

    #[test]
    fn a_calendar_year_column_is_handled_without_loss() {
        // Shifting a moderator by 2000 changes only the intercept (by −2000·slope).
        let y = [0.1, 0.4, 0.35, 0.8, 0.7, 1.1];
        let v = [0.02, 0.03, 0.01, 0.05, 0.02, 0.04];
        let t: Vec<f64> = (0..6).map(|i| i as f64 * 1.5).collect();
        let x0: Vec<f64> = t.iter().flat_map(|t| [1.0, *t]).collect();
        let x1: Vec<f64> = t.iter().flat_map(|t| [1.0, t + 2000.0]).collect();
        let a = fit(&y, &v, &x0, 2, opts(Tau2Method::Reml)).unwrap();
        let b = fit(&y, &v, &x1, 2, opts(Tau2Method::Reml)).unwrap();
        assert!((a.tau2.estimate - b.tau2.estimate).abs() < 1e-12);
        assert!((a.beta[1] - b.beta[1]).abs() < 1e-12);
        assert!((a.beta[0] - (b.beta[0] + 2000.0 * b.beta[1])).abs() < 1e-9);
        assert!((a.cov[(1, 1)] - b.cov[(1, 1)]).abs() < 1e-15);
    }
}
