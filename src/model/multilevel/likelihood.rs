//! The likelihood of the three-level model and its maximisation: GLS at
//! fixed variance components through the closed forms of [`super`],
//! the search over (σ²_b, σ²_w) ≥ 0, and profile-likelihood intervals.

use super::Clusters;
use crate::dist;
use crate::error::Result;
use crate::model::solve::{brent_min, brent_root, nelder_mead, Search};
use crate::model::tau2;
use crate::model::wls::Data;
use crate::result::Ending;
use crate::support::flag::Flag;
use crate::tolerance;
use nalgebra::{DMatrix, DVector};
use std::sync::LazyLock;

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

/// GLS at fixed (σ²_b, σ²_w) through the closed forms in the docs of
/// [`super`].
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
/// constant and the design scale term (added by [`fit`](super::fit)).
pub(super) fn ll_core(e: &Eval, restricted: bool) -> f64 {
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
    /// The maximised (restricted) log-likelihood (core, see `ll_core`).
    pub ll: f64,
    /// Converged inside, or on a boundary.
    pub ending: Ending,
    /// Objective evaluations.
    pub evaluations: u64,
}

pub(super) struct Objective<'a> {
    pub(super) data: &'a Data<'a>,
    pub(super) cl: &'a Clusters,
    pub(super) restricted: bool,
    pub(super) evals: std::cell::Cell<u64>,
}

impl Objective<'_> {
    pub(super) fn ll(&self, sb: f64, sw: f64) -> f64 {
        self.evals.set(self.evals.get() + 1);
        evaluate(self.data, self.cl, sb, sw)
            .map(|e| ll_core(&e, self.restricted))
            .unwrap_or(f64::NEG_INFINITY)
    }
}

/// What the user can try when a search of the three-level model fails.
static HINT: LazyLock<String> = LazyLock::new(|| {
    format!(
        "check the cluster column and the data for extreme values, or fit the \
         two-level model with {} 2 {}",
        Flag::Levels,
        Flag::Robust
    )
});

/// The search for `what`, failing with [`HINT`].
fn search(what: &str) -> Search<'_> {
    Search { what, hint: &HINT }
}

/// Maximises `f` over s ≥ 0 on [0, hi]: Brent's method (argmin's `BrentOpt`)
/// on √s, compared with the end s = 0, which Brent never evaluates.
pub(super) fn max_line<F: Fn(f64) -> f64>(f: F, hi: f64, what: &str) -> Result<(f64, f64)> {
    let u = brent_min(
        |u: f64| -f(u * u),
        0.0,
        hi.sqrt(),
        (
            tolerance::MULTILEVEL_LINE_REL,
            tolerance::MULTILEVEL_LINE_ABS * hi.sqrt(),
        ),
        search(what),
    )?;
    let (s, v) = (u * u, f(u * u));
    let v0 = f(0.0);
    Ok(if v0 >= v { (0.0, v0) } else { (s, v) })
}

/// A generous upper end for either variance component: ten times the
/// larger of the spread of the effects and the largest sampling variance.
pub(super) fn upper_scale(data: &Data<'_>) -> f64 {
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
/// (`max_line`). The largest likelihood wins; an interior optimum that is
/// not better than a boundary by more than rounding counts as the boundary.
///
/// # Errors
/// [`Error::NoConvergence`](crate::error::Error::NoConvergence) when a search stops without converging.
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
        theta = nelder_mead(
            |t: &[f64]| -obj.ll(t[0].exp(), t[1].exp()),
            simplex,
            sd_tol,
            tolerance::MULTILEVEL_NM_MAX_ITERS,
            search(what),
        )?;
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
/// [`Error::NoConvergence`](crate::error::Error::NoConvergence) when a root search fails.
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
    // The root searches give the advice of the τ² searches.
    let root_search = Search {
        what,
        hint: &tau2::SEARCH_HINT,
    };
    let lower = if s_hat <= 0.0 || g(0.0) <= 0.0 {
        0.0
    } else {
        brent_root(g, 0.0, s_hat, root_search)?.0
    };
    let mut hi = s_hat.max(upper_scale(data) * 1e-3) * 2.0;
    let mut tries = 0;
    while g(hi) <= 0.0 {
        hi *= 4.0;
        tries += 1;
        if tries > tolerance::BRACKET_DOUBLINGS || !hi.is_finite() {
            return Err(search(what).fail("no upper end was bracketed".into()));
        }
    }
    let upper = brent_root(g, s_hat, hi, root_search)?.0;
    Ok((lower, upper))
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
}
