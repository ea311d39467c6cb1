//! Estimators of the between-study variance τ², and the Q-profile interval.
//!
//! Likelihood estimators maximise over τ² ≥ 0 by solving the score
//! equation with safeguarded Newton steps (the exact second derivative of
//! [`super::near`]) inside brackets found by a scan; Q(τ²) = target
//! (Paule–Mandel, the Q-profile bounds) is solved by safeguarded Newton
//! steps on 1/Q. Every evaluation is one pass over the studies
//! ([`Evaluator`]). Moment estimators are the meta-regression
//! (residual-based) forms.

use super::near::{Evaluator, FEWER_PASSES_MIN_ROWS};
use super::solve::Search;
use super::wls::{ols, Data, Want, Wls};
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use crate::tolerance;
use nalgebra::DVector;
use std::rc::Rc;
use std::sync::LazyLock;

#[path = "tau2_newton.rs"]
mod newton;
use newton::{newton_root_in, Move, Newton};

pub use crate::result::{Ending, Tau2Method};

/// A τ² estimate and how it was reached.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tau2Fit {
    /// The estimate (≥ 0).
    pub estimate: f64,
    /// The estimator.
    pub method: Tau2Method,
    /// How the estimate was reached.
    pub ending: Ending,
    /// Objective evaluations used (0 for closed forms).
    pub evaluations: u64,
}

/// What the user can try when a τ² search fails.
pub(crate) static SEARCH_HINT: LazyLock<String> = LazyLock::new(|| {
    format!(
        "check the data for extreme values, or try another {} estimator",
        Flag::Tau2
    )
});

/// The search for `what`, failing with [`SEARCH_HINT`].
fn search(what: &str) -> Search<'_> {
    Search {
        what,
        hint: &SEARCH_HINT,
    }
}

fn singular() -> Error {
    Error::Model("the weighted design matrix is singular; the moderators are collinear".into())
}

fn wls(ev: &Evaluator<'_>, tau2: f64, want: Want) -> Result<Rc<Wls>> {
    ev.at(tau2, want).ok_or_else(singular)
}

/// A starting scale for τ² brackets: the OLS residual variance (or the mean
/// sampling variance when the OLS fit is exact).
pub fn scale_hint(data: &Data<'_>) -> f64 {
    scale_hint_and_ols(data).0
}

/// [`scale_hint`] and the OLS coefficients it comes from (`None` when the
/// OLS fit fails).
pub fn scale_hint_and_ols(data: &Data<'_>) -> (f64, Option<DVector<f64>>) {
    let k = data.k() as f64;
    let df = (data.k() - data.p).max(1) as f64;
    let (beta, rss) = match ols(data) {
        Some((beta, _, rss)) => (Some(beta), rss),
        None => (None, 0.0),
    };
    let s = rss / df;
    // The mean sampling variance only when it is the hint (a sweep over
    // the studies saved otherwise).
    let hint = if s > 0.0 && s.is_finite() {
        s
    } else {
        let mean_v = data.v.iter().sum::<f64>() / k;
        mean_v.max(f64::MIN_POSITIVE)
    };
    (hint, beta)
}

/// Smallest `hi = start·2^j` with `f(hi) < 0`.
fn bracket_above<F: Fn(f64) -> f64>(f: &F, start: f64, what: &str) -> Result<f64> {
    let mut hi = start;
    for _ in 0..tolerance::BRACKET_DOUBLINGS {
        if f(hi) < 0.0 {
            return Ok(hi);
        }
        hi *= 2.0;
    }
    Err(search(what).fail(format!("no upper bound for τ² found up to {hi:e}")))
}

/// Estimates τ² with `method`.
///
/// # Errors
/// [`Error::NoConvergence`] when a root search fails; [`Error::Model`] for a
/// singular design.
pub fn estimate(data: &Data<'_>, method: Tau2Method) -> Result<Tau2Fit> {
    estimate_hinted(data, method, scale_hint(data))
}

/// [`estimate`] with the bracket scale from [`scale_hint`] already computed.
///
/// # Errors
/// As [`estimate`].
pub fn estimate_hinted(data: &Data<'_>, method: Tau2Method, hint: f64) -> Result<Tau2Fit> {
    estimate_with(&Evaluator::new(data.clone()), method, hint)
}

/// [`estimate_hinted`] with the fits made through `ev` (which remembers
/// them, for the fits that follow at the estimate).
///
/// # Errors
/// As [`estimate`].
pub fn estimate_with(ev: &Evaluator<'_>, method: Tau2Method, hint: f64) -> Result<Tau2Fit> {
    let data = ev.data();
    let k = data.k() as f64;
    let df = (data.k() - data.p) as f64;
    let closed = |t: f64| Tau2Fit {
        estimate: t.max(0.0),
        method,
        ending: if t > 0.0 {
            Ending::ClosedForm
        } else {
            Ending::TruncatedAtZero
        },
        evaluations: 0,
    };
    match method {
        Tau2Method::None => Ok(Tau2Fit {
            estimate: 0.0,
            method,
            ending: Ending::Fixed,
            evaluations: 0,
        }),
        // Generalised DerSimonian–Laird (Raudenbush 2009, in Cooper, Hedges &
        // Valentine, *The Handbook of Research Synthesis and Meta-Analysis*, 2nd ed., ch. 16):
        // τ² = (Q_E − (k − p)) / tr P₀, with P₀ at the common-effect weights.
        Tau2Method::Dl => {
            let fe = wls(ev, 0.0, Want::SCORE)?;
            Ok(closed((fe.q - df) / fe.tr_p))
        }
        // Hedges (1983) / Raudenbush (2009) OLS-based estimator:
        // τ² = (RSS_OLS − (Σv − tr((X'X)⁻¹X'VX))) / (k − p).
        Tau2Method::He => {
            let (_, xtx_inv, rss) = ols(data).ok_or_else(|| {
                Error::Model("the design matrix is singular; the moderators are collinear".into())
            })?;
            let p = data.p;
            let mut xvx = vec![0.0; p * p];
            for i in 0..data.k() {
                let xi = &data.x[i * p..(i + 1) * p];
                for a in 0..p {
                    for c in 0..p {
                        xvx[a * p + c] += data.v[i] * xi[a] * xi[c];
                    }
                }
            }
            let mut tr = 0.0;
            for a in 0..p {
                for c in 0..p {
                    tr += xtx_inv[(a, c)] * xvx[c * p + a];
                }
            }
            let sum_v: f64 = data.v.iter().sum();
            Ok(closed((rss - (sum_v - tr)) / df))
        }
        // Sidik & Jonkman (2005, *J. R. Stat. Soc. C* 54:367; meta-regression form
        // as in Sidik & Jonkman 2005, *J. Biopharm. Stat.* 15:823; both cited from memory): start from
        // τ₀² = RSS_OLS / k, then τ² = τ₀² · Q(τ₀²)/(k − p).
        Tau2Method::Sj => {
            let (_, _, rss) = ols(data).ok_or_else(|| {
                Error::Model("the design matrix is singular; the moderators are collinear".into())
            })?;
            let t0 = rss / k;
            // An exact OLS fit leaves only rounding in the residuals, of the
            // order of ε·|y|; such a τ₀² is 0, not a tiny positive number.
            let mean_y2 = data.y.iter().map(|y| y * y).sum::<f64>() / k;
            if t0 <= tolerance::EXACT_FIT_REL * mean_y2 {
                return Ok(closed(0.0));
            }
            let f = wls(ev, t0, Want::Q)?;
            Ok(closed(t0 * f.q / df))
        }
        // Paule & Mandel (1982); meta-regression form: Q(τ²) = k − p.
        Tau2Method::Pm => {
            let (t, evaluations) = solve_q_with(ev, df, hint, "the Paule–Mandel estimate of τ²")?;
            Ok(Tau2Fit {
                estimate: t,
                method,
                ending: if t > 0.0 {
                    Ending::Converged
                } else {
                    Ending::Boundary
                },
                evaluations,
            })
        }
        Tau2Method::Reml | Tau2Method::Ml => maximise_likelihood(ev, method, hint),
    }
}

/// Solves Q(τ²) = `target` for τ² ≥ 0, where Q(τ²) = Σ w_i r_i² decreases in τ².
/// Returns 0 when Q(0) ≤ target already.
///
/// # Errors
/// [`Error::NoConvergence`] when no bracket or root is found.
pub fn solve_q(data: &Data<'_>, target: f64, what: &str) -> Result<(f64, u64)> {
    solve_q_with(
        &Evaluator::new(data.clone()),
        target,
        scale_hint(data),
        what,
    )
}

/// [`solve_q`] through `ev`, with the scale `hint` for a first step when
/// Q is flat. Newton steps on 1/Q(τ²) = 1/target: with S = Σ w_i² r_i² =
/// −dQ/dτ² (see [`super::near`]), the step from τ² is Q(Q − target)/(target·S).
/// 1/Q is close to linear in τ² (exactly so when all v_i are equal), so the
/// steps converge in a few fits; for Q(τ²) = Σ a_i/(b_i + τ²) (fixed β),
/// 1/Q is concave by the Cauchy–Schwarz inequality, and the steps from the
/// left of the root then never pass it. Safeguarded by [`newton_root_in`].
fn solve_q_with(ev: &Evaluator<'_>, target: f64, hint: f64, what: &str) -> Result<(f64, u64)> {
    solve_q_from(ev, target, hint, 0.0, what)
}

/// Q − target (> 0 left of the root) and the Newton step on 1/Q from the
/// fit `f` (see [`solve_q_with`]).
fn q_step(f: &Wls, target: f64) -> (f64, f64) {
    (f.q - target, f.q * (f.q - target) / (target * f.sum_w2r2))
}

/// [`solve_q_with`], with the Newton steps started at `from` (when > 0;
/// an earlier estimate near the root, already fitted) instead of at 0.
fn solve_q_from(
    ev: &Evaluator<'_>,
    target: f64,
    hint: f64,
    from: f64,
    what: &str,
) -> Result<(f64, u64)> {
    let start = ev.evaluations();
    let at = |t: f64| -> Result<(f64, f64)> { Ok(q_step(&*wls(ev, t, Want::Q)?, target)) };
    let t = match q_search(ev, target, hint, from, what)? {
        None => 0.0,
        Some(search) => search.run(at)?,
    };
    Ok((t.max(0.0), ev.evaluations() - start))
}

/// The Newton search for Q(τ²) = `target` that [`solve_q_from`] makes:
/// from `from` when > 0 (the bracket [0, from] when Q(from) is already
/// below the target, else [0, ∞)), else from 0; `None` when Q(0) ≤ target
/// (the root is 0).
fn q_search<'w>(
    ev: &Evaluator<'_>,
    target: f64,
    hint: f64,
    from: f64,
    what: &'w str,
) -> Result<Option<Newton<'w>>> {
    let at = |t: f64| -> Result<(f64, f64)> { Ok(q_step(&*wls(ev, t, Want::Q)?, target)) };
    let (q0, step0) = at(0.0)?;
    if q0 <= 0.0 {
        return Ok(None);
    }
    Ok(Some(if from > 0.0 && from.is_finite() {
        let (f, step) = at(from)?;
        // From the right of the root the bracket is [0, from].
        let hi = if f < 0.0 { from } else { f64::INFINITY };
        Newton::new((0.0, hi), from, (f, step), hint, what)
    } else {
        Newton::new((0.0, f64::INFINITY), 0.0, (q0, step0), hint, what)
    }))
}

/// Restricted (REML) or ordinary (ML) log-likelihood at τ², up to the
/// constant −½(k − p)·ln 2π (REML) or −½k·ln 2π (ML):
/// ℓ_R = −½[Σ ln(v_i + τ²) + ln det X'WX + Q(τ²)],  ℓ = −½[Σ ln(v_i + τ²) + Q(τ²)]
/// (Viechtbauer 2005, *J. Educ. Behav. Stat.* 30:261, for the model without
/// moderators; the meta-regression form is the usual generalisation).
pub fn log_likelihood(f: &Wls, restricted: bool) -> f64 {
    let extra = if restricted { f.logdet_m } else { 0.0 };
    -0.5 * (f.sum_log_vt + extra + f.q)
}

/// Score (first derivative in τ²) of the log-likelihood:
/// REML ½[y'PPy − tr P], ML ½[Σ w_i² r_i² − Σ w_i].
fn score(f: &Wls, restricted: bool) -> f64 {
    let t = if restricted { f.tr_p } else { f.sum_w };
    0.5 * (f.sum_w2r2 - t)
}

/// Derivative in τ² of [`score`] (a fit with [`Want::CURVATURE`]):
/// REML −y'PPPy + ½ tr(PP), ML −y'PPPy + ½ Σ w_i² (derived in
/// [`super::near`]).
fn score_slope(f: &Wls, restricted: bool) -> f64 {
    let t = if restricted { f.tr_pp } else { f.sum_w2 };
    -f.y_pppy + 0.5 * t
}

fn maximise_likelihood(ev: &Evaluator<'_>, method: Tau2Method, hint: f64) -> Result<Tau2Fit> {
    let restricted = method == Tau2Method::Reml;
    let what = if restricted {
        "the REML estimate of τ²"
    } else {
        "the ML estimate of τ²"
    };
    let start = ev.evaluations();
    let s = |t: f64| {
        ev.at(t, Want::SCORE)
            .map(|f| score(&f, restricted))
            .unwrap_or(f64::NAN)
    };
    let ll = |t: f64| {
        ev.at(t, Want::ALL)
            .map(|f| log_likelihood(&f, restricted))
            .unwrap_or(f64::NAN)
    };
    // Newton steps on the score, with its exact derivative. With many
    // studies, a fit within [`tolerance::NEWTON_NEAR_END_REL`] of the one
    // before is likely the search's last: it also takes the log terms, and
    // when the step from it is at most [`tolerance::NEWTON_LAST_STEP_REL`]
    // it is the root (see below), so the likelihood there needs no pass of
    // its own.
    let many = ev.data().k() >= FEWER_PASSES_MIN_ROWS;
    let last = std::cell::Cell::new(None::<(f64, bool)>);
    let newton = |t: f64| -> Result<(f64, f64)> {
        let near_end = many
            && last
                .get()
                .is_some_and(|(b, _)| (t - b).abs() <= tolerance::NEWTON_NEAR_END_REL * t);
        let want = Want {
            log_terms: near_end,
            ..Want::CURVATURE
        };
        last.set(Some((t, near_end)));
        let f = wls(ev, t, want)?;
        let sc = score(&f, restricted);
        Ok((sc, -sc / score_slope(&f, restricted)))
    };
    // The root the search gives is its last fit's τ² plus the last step;
    // when that step is at most NEWTON_LAST_STEP_REL of τ² and the fit has
    // its log terms, the fit's own τ² is taken instead.
    let settled = |root: f64| match last.take() {
        Some((b, true)) if (root - b).abs() <= tolerance::NEWTON_LAST_STEP_REL * root => b,
        _ => root,
    };

    let g = tolerance::LIKELIHOOD_SCAN_POINTS;
    let scan = |hi: f64| -> Vec<f64> {
        (0..=g)
            .map(|j| {
                let u = j as f64 / g as f64;
                hi * u * u
            })
            .collect()
    };
    // With many studies and a first fit around coefficients near the
    // fit's (around β₀ = 0 most of these fits would take a second pass),
    // τ² = 0, the first end tried for the bracket and the scan of the
    // interval it closes (both among the scan's points) are fitted in one
    // pass (each around those coefficients: the scores of the fits one by
    // one up to rounding); the scan is fitted again below only when that
    // end does not close the bracket.
    if ev.data().k() >= FEWER_PASSES_MIN_ROWS && ev.starts_around() {
        ev.fit_many(&scan(2.0 * hint), Want::SCORE);
    }
    let s0 = s(0.0);
    if s0.is_nan() {
        return Err(Error::Model(
            "the weighted design matrix is singular; the moderators are collinear".into(),
        ));
    }
    let hi = bracket_above(&s, 2.0 * hint, what)?;
    // Scan [0, hi] (points denser near 0) for sign changes of the score from + to −:
    // each brackets a local maximum.
    let mut points = scan(hi);
    // When the score at 0 is not positive, 0 is a local maximum; a second,
    // higher one may hide close to 0, below the first quadratic point, so
    // that interval is also scanned on a log scale.
    if s0 <= 0.0 {
        let first = points[1];
        points.extend(
            (1..=tolerance::LIKELIHOOD_NEAR_ZERO_DECADES).map(|d| first * 10f64.powi(-(d as i32))),
        );
        points.sort_by(f64::total_cmp);
    }
    // With many studies the scan points not fitted above (those of a
    // bracket closed further out, or near 0) are fitted in one pass (each
    // around the fit made last, not around the point before: the same
    // score up to rounding).
    if ev.data().k() >= FEWER_PASSES_MIN_ROWS {
        ev.fit_many(&points, Want::SCORE);
    }
    let grid: Vec<(f64, f64)> = points
        .iter()
        .map(|&t| (t, if t == 0.0 { s0 } else { s(t) }))
        .collect();
    let mut candidates: Vec<(f64, f64)> = Vec::new();
    if s0 <= 0.0 {
        candidates.push((0.0, ll(0.0)));
    }
    for pair in grid.windows(2) {
        let ((t1, s1), (t2, s2)) = (pair[0], pair[1]);
        if s1 > 0.0 && s2 <= 0.0 {
            let root = if s2 == 0.0 {
                t2
            } else {
                // Started at the secant point of the bracket's ends.
                let t = t1 + (t2 - t1) * s1 / (s1 - s2);
                let t = if t > t1 && t < t2 { t } else { 0.5 * (t1 + t2) };
                settled(newton_root_in(t1, t2, t, newton(t)?, hint, newton, what)?)
            };
            candidates.push((root, ll(root)));
        }
    }
    let best = candidates
        .iter()
        .copied()
        .filter(|(_, l)| l.is_finite())
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .ok_or_else(|| search(what).fail("no maximum of the likelihood was found".into()))?;
    Ok(Tau2Fit {
        estimate: best.0,
        method,
        ending: if best.0 == 0.0 {
            Ending::Boundary
        } else {
            Ending::Converged
        },
        evaluations: ev.evaluations() - start,
    })
}

/// The two Q-profile bounds as [`solve_q_from`] finds each from `from`
/// (> 0), the two searches in lock step: the τ² each asks for next are
/// fitted in one pass ([`Evaluator::fit_many`]), so the pair takes as many
/// passes as the longer search, not the sum of both. Each search makes the
/// moves it would make alone; only the coefficients its fits are taken
/// around differ (the fit made last, of either search), so the bounds
/// differ by rounding.
fn q_bounds_together(
    ev: &Evaluator<'_>,
    targets: [(f64, &str); 2],
    hint: f64,
    from: f64,
) -> Result<[f64; 2]> {
    let mut bounds = [0.0; 2];
    let mut searches: Vec<(usize, f64, Newton<'_>)> = Vec::with_capacity(2);
    for (i, &(target, what)) in targets.iter().enumerate() {
        if let Some(search) = q_search(ev, target, hint, from, what)? {
            searches.push((i, target, search));
        }
    }
    while !searches.is_empty() {
        let mut asked = Vec::with_capacity(2);
        let mut going = Vec::with_capacity(2);
        for (i, target, mut search) in searches {
            match search.decide()? {
                Move::Root(root) => bounds[i] = root.max(0.0),
                Move::Fit(t) => {
                    asked.push(t);
                    going.push((i, target, search));
                }
            }
        }
        ev.fit_many(&asked, Want::Q);
        for ((_, target, search), &t) in going.iter_mut().zip(&asked) {
            search.take(q_step(&*wls(ev, t, Want::Q)?, *target));
        }
        searches = going;
    }
    Ok(bounds)
}

/// Q-profile confidence interval for τ² (Viechtbauer 2007, *Stat. Med.* 26:37):
/// the τ² values where Q(τ²) equals the upper and the lower α/2 points of
/// χ²(k − p). A bound is 0 when Q(0) is already below its target.
///
/// # Errors
/// [`Error::NoConvergence`] when a root search fails.
pub fn q_profile(data: &Data<'_>, level: f64) -> Result<(f64, f64)> {
    q_profile_hinted(data, level, scale_hint(data))
}

/// [`q_profile`] with the bracket scale already computed.
///
/// # Errors
/// As [`q_profile`].
pub fn q_profile_hinted(data: &Data<'_>, level: f64, hint: f64) -> Result<(f64, f64)> {
    q_profile_with(&Evaluator::new(data.clone()), level, hint, 0.0)
}

/// [`q_profile_hinted`] through `ev`, each bound's Newton steps started at
/// `from` (the τ² estimate, when > 0: both bounds are usually near it, and
/// `ev` has fitted it already) instead of at 0.
///
/// # Errors
/// As [`q_profile`].
pub fn q_profile_with(ev: &Evaluator<'_>, level: f64, hint: f64, from: f64) -> Result<(f64, f64)> {
    use crate::dist::{chi2_quantile, Tail};
    let data = ev.data();
    let df = (data.k() - data.p) as f64;
    let alpha = 1.0 - level;
    let upper_point = chi2_quantile(alpha / 2.0, df, Tail::Upper);
    let lower_point = chi2_quantile(alpha / 2.0, df, Tail::Lower);
    if data.k() >= FEWER_PASSES_MIN_ROWS && from > 0.0 && from.is_finite() {
        let [lo, hi] = q_bounds_together(
            ev,
            [
                (upper_point, "the lower Q-profile bound for τ²"),
                (lower_point, "the upper Q-profile bound for τ²"),
            ],
            hint,
            from,
        )?;
        return Ok((lo, hi));
    }
    let (lo, _) = solve_q_from(
        ev,
        upper_point,
        hint,
        from,
        "the lower Q-profile bound for τ²",
    )?;
    let (hi, _) = solve_q_from(
        ev,
        lower_point,
        hint,
        from,
        "the upper Q-profile bound for τ²",
    )?;
    Ok((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn intercept(k: usize) -> Vec<f64> {
        vec![1.0; k]
    }

    #[test]
    fn equal_variances_reml_is_moment_formula() {
        // With all v equal, REML τ² = max(0, s² − v), s² the residual variance (k − p).
        let y = [0.1, 0.5, -0.2, 0.9, 0.3, 0.45];
        let v = [0.02; 6];
        let x = intercept(6);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let mean = y.iter().sum::<f64>() / 6.0;
        let s2 = y.iter().map(|y| (y - mean).powi(2)).sum::<f64>() / 5.0;
        let f = estimate(&d, Tau2Method::Reml).unwrap();
        assert!((f.estimate - (s2 - 0.02)).abs() < 1e-12, "{f:?}");
        assert_eq!(f.ending, Ending::Converged);
        // And for ML the divisor is k.
        let f = estimate(&d, Tau2Method::Ml).unwrap();
        assert!(
            (f.estimate - (s2 * 5.0 / 6.0 - 0.02)).abs() < 1e-12,
            "{f:?}"
        );
    }

    #[test]
    fn boundary_is_exactly_zero() {
        let y = [0.1, 0.12, 0.09, 0.11];
        let v = [0.05; 4];
        let x = intercept(4);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        for m in [
            Tau2Method::Reml,
            Tau2Method::Ml,
            Tau2Method::Pm,
            Tau2Method::Dl,
        ] {
            let f = estimate(&d, m).unwrap();
            assert_eq!(f.estimate, 0.0, "{m:?}");
        }
    }

    #[test]
    fn sidik_jonkman_is_zero_for_identical_effects() {
        // The mean of three 1.1s is not exactly 1.1 in binary: the OLS residuals are
        // rounding errors of about 1e-16, which must not become a τ².
        let y = [1.1; 3];
        let v = [0.01, 0.02, 0.03];
        let x = intercept(3);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        assert!(
            ols(&d).unwrap().2 > 0.0,
            "the test needs a rounding residual"
        );
        assert_eq!(estimate(&d, Tau2Method::Sj).unwrap().estimate, 0.0);
    }

    #[test]
    fn paule_mandel_sets_q_to_df() {
        let y = [0.1, 0.8, -0.3, 0.5, 1.2];
        let v = [0.01, 0.05, 0.02, 0.1, 0.03];
        let x = intercept(5);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let f = estimate(&d, Tau2Method::Pm).unwrap();
        let q = super::super::wls::fit_at(&d, f.estimate, false).unwrap().q;
        assert!((q - 4.0).abs() < 1e-10, "Q = {q}");
    }

    #[test]
    fn q_profile_bounds_hit_their_targets() {
        let y = [0.1, 0.8, -0.3, 0.5, 1.2, 0.4, 0.0];
        let v = [0.01, 0.05, 0.02, 0.1, 0.03, 0.02, 0.04];
        let x = intercept(7);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let (lo, hi) = q_profile(&d, 0.95).unwrap();
        assert!(0.0 < lo && lo < hi);
        use crate::dist::{chi2_quantile, Tail};
        let q_lo = super::super::wls::fit_at(&d, lo, false).unwrap().q;
        let q_hi = super::super::wls::fit_at(&d, hi, false).unwrap().q;
        assert!((q_lo - chi2_quantile(0.025, 6.0, Tail::Upper)).abs() < 1e-9);
        assert!((q_hi - chi2_quantile(0.025, 6.0, Tail::Lower)).abs() < 1e-9);
    }

    #[test]
    fn newton_roots_agree_with_brent_on_the_two_pass_functions() {
        // Below and above the size from which the scan takes one pass.
        for k in [40, FEWER_PASSES_MIN_ROWS + 123] {
            newton_roots_agree_with_brent(k);
        }
    }

    fn newton_roots_agree_with_brent(k: usize) {
        // Invented data (a deterministic scramble): k studies, a moderator.
        use super::super::solve::brent_root;
        use super::super::wls::{fit_with, passes};
        let z: Vec<f64> = (0..k).map(|i| ((i * 37) % 23) as f64 / 23.0).collect();
        let v: Vec<f64> = (0..k)
            .map(|i| 0.005 + ((i * 11) % 7) as f64 / 50.0)
            .collect();
        let y: Vec<f64> = (0..k)
            .map(|i| 0.2 + 0.5 * z[i] + (((i * 53) % 29) as f64 / 29.0 - 0.5) * 0.9)
            .collect();
        let x: Vec<f64> = z.iter().flat_map(|z| [1.0, *z]).collect();
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 2,
        };
        let s = search("a test root");
        for method in [Tau2Method::Reml, Tau2Method::Ml] {
            let restricted = method == Tau2Method::Reml;
            let before = passes();
            let f = estimate(&d, method).unwrap();
            assert!(f.estimate > 0.0, "{f:?}");
            // From the threshold on, the scan's points share a pass.
            let used = passes() - before;
            let shared = k >= FEWER_PASSES_MIN_ROWS;
            assert_eq!(used < f.evaluations, shared, "{used} passes, {f:?}");
            let score = |t: f64| score(&fit_with(&d, t, Want::SCORE).unwrap(), restricted);
            let (root, _) = brent_root(score, 0.5 * f.estimate, 2.0 * f.estimate, s).unwrap();
            assert!(
                (f.estimate - root).abs() <= 1e-12 * root,
                "k = {k}, {method:?}: {} vs {root}",
                f.estimate
            );
        }
        // Paule–Mandel: Q(τ²) = k − p.
        let pm = estimate(&d, Tau2Method::Pm).unwrap().estimate;
        let q = |t: f64| fit_with(&d, t, Want::Q).unwrap().q - (k - 2) as f64;
        let (root, _) = brent_root(q, 0.0, 10.0 * pm, s).unwrap();
        assert!((pm - root).abs() <= 1e-12 * root, "PM {pm} vs {root}");
    }
}
