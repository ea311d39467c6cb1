//! The argmin adapters of the model layer: Brent's root finder, Brent's
//! minimiser and Nelder–Mead, each run until its solver reports convergence.
//!
//! One convergence check ([`converged`]) reads how every run ended: an end
//! other than the solver's own convergence (an iteration limit, for
//! example) becomes [`Error::NoConvergence`], naming the search, the
//! quantity sought ([`Search::what`]) and the advice for the user
//! ([`Search::hint`]).
//!
//! Minimisers see `f64::MAX` where the objective is not finite, so a point
//! where it cannot be evaluated is never taken as the minimum; the root
//! finder sees the function as it is.

use crate::error::{Error, Result};
use crate::tolerance;
use argmin::core::{CostFunction, Executor, State, TerminationReason, TerminationStatus};
use argmin::solver::brent::{BrentOpt, BrentRoot};
use argmin::solver::neldermead::NelderMead;

/// What a search is for, as its error message names it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Search<'a> {
    /// The quantity sought ("the REML estimate of τ²").
    pub what: &'a str,
    /// What the user can do when the search fails.
    pub hint: &'a str,
}

impl Search<'_> {
    /// [`Error::NoConvergence`] for this search, with `detail`.
    pub fn fail(&self, detail: String) -> Error {
        Error::NoConvergence {
            what: self.what.to_string(),
            detail,
            hint: self.hint.to_string(),
        }
    }
}

/// The one convergence check: `Ok` when an argmin run ended because its
/// solver converged, else [`Error::NoConvergence`] saying how `name` (“the
/// root search”, …) ended.
///
/// # Errors
/// As above.
pub fn converged(status: &TerminationStatus, search: Search<'_>, name: &str) -> Result<()> {
    if matches!(
        status,
        TerminationStatus::Terminated(TerminationReason::SolverConverged)
    ) {
        Ok(())
    } else {
        Err(search.fail(format!("{name} ended with '{status:?}'")))
    }
}

/// A function of one number as an argmin problem.
struct Scalar<F: Fn(f64) -> f64>(F);

impl<F: Fn(f64) -> f64> CostFunction for Scalar<F> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> std::result::Result<f64, argmin::core::Error> {
        Ok((self.0)(*x))
    }
}

/// A function of a vector as an argmin problem.
struct Vector<F: Fn(&[f64]) -> f64>(F);

impl<F: Fn(&[f64]) -> f64> CostFunction for Vector<F> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, x: &Vec<f64>) -> std::result::Result<f64, argmin::core::Error> {
        Ok((self.0)(x))
    }
}

/// The value a minimiser sees: `v`, or `f64::MAX` when `v` is not finite.
fn finite_or_max(v: f64) -> f64 {
    if v.is_finite() {
        v
    } else {
        f64::MAX
    }
}

/// Root of `f` in [lo, hi] (f(lo) and f(hi) of opposite signs) by Brent's
/// method (argmin's `BrentRoot`), to the relative tolerance
/// [`tolerance::ROOT_REL`] of `hi`, started at the midpoint. Returns the
/// root and the iterations used.
///
/// # Errors
/// [`Error::NoConvergence`] when the solver stops for any reason other than
/// convergence, or ends without a finite root.
pub fn brent_root<F: Fn(f64) -> f64>(
    f: F,
    lo: f64,
    hi: f64,
    search: Search<'_>,
) -> Result<(f64, u64)> {
    let tol = tolerance::ROOT_REL * hi.abs().max(f64::MIN_POSITIVE);
    let solver = BrentRoot::new(lo, hi, tol);
    let res = Executor::new(Scalar(f), solver)
        .configure(|s| {
            s.param((lo + hi) / 2.0)
                .max_iters(tolerance::ROOT_MAX_ITERS)
        })
        .run()
        .map_err(|e| search.fail(e.to_string()))?;
    let state = res.state();
    converged(state.get_termination_status(), search, "the root search")?;
    let x = *state
        .get_param()
        .ok_or_else(|| search.fail("no estimate".into()))?;
    if !x.is_finite() {
        return Err(search.fail("a non-finite estimate".into()));
    }
    Ok((x, state.get_iter()))
}

/// Minimiser of `f` on [lo, hi] by Brent's method (argmin's `BrentOpt`)
/// with relative and absolute tolerances `rel`, `abs`, at most
/// [`tolerance::ROOT_MAX_ITERS`] iterations. The ends themselves are never
/// evaluated.
///
/// # Errors
/// [`Error::NoConvergence`] when the solver stops for any reason other than
/// convergence.
pub fn brent_min<F: Fn(f64) -> f64>(
    f: F,
    lo: f64,
    hi: f64,
    (rel, abs): (f64, f64),
    search: Search<'_>,
) -> Result<f64> {
    let solver = BrentOpt::new(lo, hi).set_tolerance(rel, abs);
    let res = Executor::new(Scalar(|x| finite_or_max(f(x))), solver)
        .configure(|s| s.max_iters(tolerance::ROOT_MAX_ITERS))
        .run()
        .map_err(|e| search.fail(e.to_string()))?;
    let st = res.state();
    converged(st.get_termination_status(), search, "the line search")?;
    st.get_param()
        .copied()
        .ok_or_else(|| search.fail("no estimate".into()))
}

/// Minimiser of `f` by Nelder–Mead (argmin's `NelderMead`) from `simplex`,
/// stopping when the standard deviation of the simplex values falls below
/// `sd_tol` (an absolute tolerance), at most `max_iters` iterations.
/// Returns the best point.
///
/// # Errors
/// [`Error::NoConvergence`] for an unusable simplex, or when the solver
/// stops for any reason other than convergence.
pub fn nelder_mead<F: Fn(&[f64]) -> f64>(
    f: F,
    simplex: Vec<Vec<f64>>,
    sd_tol: f64,
    max_iters: u64,
    search: Search<'_>,
) -> Result<Vec<f64>> {
    let solver = NelderMead::new(simplex)
        .with_sd_tolerance(sd_tol)
        .map_err(|e| search.fail(e.to_string()))?;
    let res = Executor::new(Vector(|x: &[f64]| finite_or_max(f(x))), solver)
        .configure(|s| s.max_iters(max_iters))
        .run()
        .map_err(|e| search.fail(e.to_string()))?;
    let st = res.state();
    converged(
        st.get_termination_status(),
        search,
        "the Nelder–Mead search",
    )?;
    st.get_best_param()
        .cloned()
        .ok_or_else(|| search.fail("no estimate".into()))
}

#[cfg(test)]
mod tests {
    use super::*;

    const SEARCH: Search<'static> = Search {
        what: "a test quantity",
        hint: "a test hint",
    };

    #[test]
    fn root_minimum_and_simplex_search_find_known_answers() {
        let (r, iters) = brent_root(|x| x * x - 2.0, 0.0, 2.0, SEARCH).unwrap();
        assert!((r - 2f64.sqrt()).abs() < 1e-12 && iters > 0, "{r}");
        let m = brent_min(|x| (x - 0.3).powi(2), 0.0, 1.0, (1e-10, 1e-12), SEARCH).unwrap();
        assert!((m - 0.3).abs() < 1e-6, "{m}");
        let p = nelder_mead(
            |t| (t[0] - 1.0).powi(2) + (t[1] + 2.0).powi(2),
            vec![vec![0.0, 0.0], vec![1.0, 0.0], vec![0.0, 1.0]],
            1e-14,
            5_000,
            SEARCH,
        )
        .unwrap();
        assert!(
            (p[0] - 1.0).abs() < 1e-4 && (p[1] + 2.0).abs() < 1e-4,
            "{p:?}"
        );
    }

    #[test]
    fn an_unfinished_search_is_an_error_naming_it() {
        let e = nelder_mead(
            |t| (t[0] - 1.0).powi(2) + (t[1] + 2.0).powi(2),
            vec![vec![0.0, 0.0], vec![1.0, 0.0], vec![0.0, 1.0]],
            0.0,
            3,
            SEARCH,
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("a test quantity") && e.contains("the Nelder–Mead search ended with"),
            "{e}"
        );
        assert!(e.contains("a test hint"), "{e}");
    }
}
