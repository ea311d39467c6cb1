//! The safeguarded Newton search of the τ² estimators ([`super`]): one
//! search's state between evaluations, so that a caller can run two side
//! by side and fit the points both ask for in one pass.

use crate::error::Result;
use crate::tolerance;

/// A root of f in the bracket [lo, hi] (hi may be ∞) with f(lo) > 0 (and
/// f < 0 to its right), from `t`, where f and the step are `first`, by
/// Newton steps kept inside the bracket the evaluations so far give:
/// `at(t)` returns f(t) and the Newton step −f(t)/f'(t) (or the step of
/// another function with the same root). A step that leaves the bracket,
/// or, once the bracket is closed, that does not halve the step before it,
/// is replaced by bisection (the safeguard of *rtsafe* in Press et al.,
/// *Numerical Recipes*, 3rd ed., 2007, §9.4; cited from memory); while no
/// point right of the root is known, such a step doubles τ² (from at least
/// `hint`). Stops after a Newton step of at most
/// [`tolerance::NEWTON_STEP_REL`] of τ² that is also at most
/// [`tolerance::NEWTON_SHRINK`] of the step before (so the steps converge
/// quadratically, and the error left is of the order of the step squared),
/// or of at most [`tolerance::ROOT_REL`] of τ² (rounding), or when the
/// bracket is that narrow.
///
/// # Errors
/// [`crate::error::Error::NoConvergence`] when f cannot be evaluated or no root is found
/// in [`tolerance::ROOT_MAX_ITERS`] steps; the errors of `at`.
#[allow(clippy::too_many_arguments)]
pub(super) fn newton_root_in<F: Fn(f64) -> Result<(f64, f64)>>(
    lo: f64,
    hi: f64,
    t: f64,
    first: (f64, f64),
    hint: f64,
    at: F,
    what: &str,
) -> Result<f64> {
    Newton::new((lo, hi), t, first, hint, what).run(at)
}

/// What a [`Newton`] search does next.
pub(super) enum Move {
    /// Stop: the root.
    Root(f64),
    /// Evaluate f and the step at this τ² and [`Newton::take`] them.
    Fit(f64),
}

/// The state of [`newton_root_in`]'s search between evaluations, so that
/// two searches can go in lock step and share their passes
/// ([`super::q_bounds_together`]).
pub(super) struct Newton<'w> {
    lo: f64,
    hi: f64,
    t: f64,
    f: f64,
    step: f64,
    step_before: f64,
    hint: f64,
    steps_left: u64,
    what: &'w str,
}

impl<'w> Newton<'w> {
    pub(super) fn new(
        (lo, hi): (f64, f64),
        t: f64,
        (f, step): (f64, f64),
        hint: f64,
        what: &'w str,
    ) -> Self {
        Newton {
            lo,
            hi,
            t,
            f,
            step,
            step_before: f64::INFINITY,
            hint,
            steps_left: tolerance::ROOT_MAX_ITERS,
            what,
        }
    }

    /// The next move from f and the step at the current τ² (see
    /// [`newton_root_in`] for the rules).
    pub(super) fn decide(&mut self) -> Result<Move> {
        if self.steps_left == 0 {
            return Err(super::search(self.what).fail(format!(
                "no root found in {} steps",
                tolerance::ROOT_MAX_ITERS
            )));
        }
        self.steps_left -= 1;
        let (t, f, step) = (self.t, self.f, self.step);
        if f.is_nan() {
            return Err(super::search(self.what)
                .fail(format!("the function could not be evaluated at τ² = {t:e}")));
        }
        if f > 0.0 {
            self.lo = self.lo.max(t);
        } else if f < 0.0 {
            self.hi = self.hi.min(t);
        } else {
            return Ok(Move::Root(t));
        }
        let (lo, hi) = (self.lo, self.hi);
        let newton = t + step;
        let closed = hi.is_finite();
        let fast = !closed || step.abs() <= 0.5 * self.step_before.abs();
        let next = if newton > lo && newton < hi && fast {
            let small = step.abs() <= tolerance::NEWTON_STEP_REL * newton.abs();
            let shrinking = step.abs() <= tolerance::NEWTON_SHRINK * self.step_before.abs();
            if (small && shrinking) || step.abs() <= tolerance::ROOT_REL * newton.abs() {
                return Ok(Move::Root(newton));
            }
            newton
        } else if closed {
            0.5 * (lo + hi)
        } else {
            (2.0 * t).max(self.hint)
        };
        if closed && hi - lo <= tolerance::ROOT_REL * hi {
            return Ok(Move::Root(next));
        }
        self.step_before = next - t;
        self.t = next;
        Ok(Move::Fit(next))
    }

    /// The search to its end, `at(t)` giving f and the step at each τ² it
    /// asks for.
    pub(super) fn run<F: Fn(f64) -> Result<(f64, f64)>>(mut self, at: F) -> Result<f64> {
        loop {
            match self.decide()? {
                Move::Root(root) => return Ok(root),
                Move::Fit(t) => self.take(at(t)?),
            }
        }
    }

    /// f and the step at the τ² of the last [`Move::Fit`].
    pub(super) fn take(&mut self, (f, step): (f64, f64)) {
        (self.f, self.step) = (f, step);
    }
}
