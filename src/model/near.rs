//! One pass over the studies per weighted fit: the sums at τ² are taken
//! around coefficients β₀ from an earlier fit (usually at a nearby τ²), and
//! everything at the new β̂ follows from them without a second pass over
//! the residuals.
//!
//! # The identities
//! With w_i = 1/(v_i + τ²), W = diag(w), M = X'WX, r₀ = y − Xβ₀ and
//! g = X'Wr₀, the normal equations X'W(y − Xβ̂) = 0 read M(β̂ − β₀) = g, so
//! β̂ = β₀ + δ with δ = M⁻¹g. The residuals are r = y − Xβ̂ = r₀ − Xδ, and
//! for any diagonal D, expanding the quadratic form,
//!
//!   r'Dr = r₀'Dr₀ − 2δ'X'Dr₀ + δ'X'DXδ.
//!
//! D = W gives Q = Σw r₀² − 2δ'g + δ'Mδ = Σw r₀² − δ'g (Mδ = g);
//! D = W² gives Σw²r² = Σw²r₀² − 2δ'X'W²r₀ + δ'X'W²Xδ;
//! D = W³ gives Σw³r² = Σw³r₀² − 2δ'X'W³r₀ + δ'X'W³Xδ; and
//! X'W²r = X'W²r₀ − X'W²Xδ. This is the residual correction of iterative
//! refinement for least squares (Golub & Van Loan, *Matrix Computations*,
//! 4th ed., 2013, §5.3 and §3.5.3; cited from memory), taken from the
//! coefficients of the previous τ² instead of a second pass.
//!
//! The subtractions cancel when β₀ is far from β̂ (Σw r₀² ≫ Q). Each
//! corrected sum is kept only when the parts subtracted are at most
//! [`tolerance::ONE_PASS_MAX_CANCEL`] times the result (at most two bits
//! lost); otherwise a second pass sums the residuals at β̂ exactly as
//! [`super::wls::fit_with`] does. Near the end of a τ² search β₀ is the
//! previous iterate's and the corrections are of second order.
//!
//! # The curvature of the likelihood
//! With P = W − WXM⁻¹X'W, dP/dτ² = −PP (Harville 1977, *J. Am. Stat.
//! Assoc.* 72:320, cited from memory; it follows from dW/dτ² = −W² and
//! dM⁻¹/dτ² = M⁻¹X'W²XM⁻¹). Py = Wr, so y'PPy = Σw²r² and
//! y'PPPy = (Wr)'P(Wr) = Σw³r² − u'M⁻¹u with u = X'W²r; and
//! tr(PP) = Σw² − 2 tr(M⁻¹X'W³X) + tr((M⁻¹X'W²X)²). The REML score
//! ½[y'PPy − tr P] then has the derivative −y'PPPy + ½ tr(PP), the ML score
//! ½[y'PPy − Σw] the derivative −y'PPPy + ½ Σw², and dQ/dτ² = −y'PPy.

use super::wls::{residual_sums, Data, Want, Wls};
use crate::tolerance;
use nalgebra::{DMatrix, DVector};
use std::cell::{Cell, RefCell};
use std::rc::Rc;
use sums::{accumulate, accumulate_many, Point, Sums};

/// Fills `out` (resized to p × p when it is not) with the symmetric matrix
/// whose row-major upper triangle is `upper`.
fn fill_symmetric(out: &mut DMatrix<f64>, upper: &[f64], p: usize) {
    if out.shape() != (p, p) {
        *out = DMatrix::zeros(p, p);
    }
    for c in 0..p {
        for a in 0..p {
            out[(a, c)] = upper[a.min(c) * p + a.max(c)];
        }
    }
}

/// tr(AB) = Σ_ij a_ij b_ji for p × p matrices, summed column by column of
/// A (without the two temporary matrices of an element-wise product).
fn trace_of_product(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
    let p = a.nrows();
    let mut total = 0.0;
    for j in 0..p {
        for i in 0..p {
            total += a[(i, j)] * b[(j, i)];
        }
    }
    total
}

/// The buffers of one-pass fits, reused from one fit to the next: at small
/// k the allocations of the temporaries had cost more than the pass itself
/// (a fit now allocates only the β̂ and M⁻¹ it returns). Every product is
/// the same nalgebra operation as before (`mul_to` is what `*` calls, and
/// `solve_mut` what `solve` calls on a copy), so results are unchanged bit
/// for bit.
#[derive(Debug)]
struct Work {
    sums: Sums,
    /// The sums of a pass at several points ([`Evaluator::fit_many`]).
    many: Vec<Sums>,
    /// M, then its Cholesky factor.
    m: DMatrix<f64>,
    n2: DMatrix<f64>,
    n3: DMatrix<f64>,
    /// M⁻¹N₂.
    m_inv_n2: DMatrix<f64>,
    g: DVector<f64>,
    h: DVector<f64>,
    h3: DVector<f64>,
    delta: DVector<f64>,
    n2d: DVector<f64>,
    n3d: DVector<f64>,
    u: DVector<f64>,
    m_inv_u: DVector<f64>,
    /// The design is one column of ones ([`Evaluator::of_ones`]).
    ones: bool,
}

impl Work {
    fn new(p: usize) -> Self {
        let (mat, vec) = (|| DMatrix::zeros(p, p), || DVector::zeros(p));
        Work {
            sums: Sums::default(),
            many: Vec::new(),
            m: mat(),
            n2: mat(),
            n3: mat(),
            m_inv_n2: mat(),
            g: vec(),
            h: vec(),
            h3: vec(),
            delta: vec(),
            n2d: vec(),
            n3d: vec(),
            u: vec(),
            m_inv_u: vec(),
            ones: false,
        }
    }
}

/// The weighted fit at `tau2` from one pass around `beta0` (see the module
/// documentation for the identities), with the parts in `want` (the others
/// NaN). A corrected sum that cancels too much is recomputed by a second
/// pass at β̂.
///
/// Returns `None` when X'WX is not positive definite (collinear design).
pub fn fit_near(data: &Data<'_>, tau2: f64, want: Want, beta0: &DVector<f64>) -> Option<Wls> {
    fit_near_in(&mut Work::new(data.p), data, tau2, want, beta0)
}

/// [`fit_near`] with the temporaries in `work`.
fn fit_near_in(
    work: &mut Work,
    data: &Data<'_>,
    tau2: f64,
    want: Want,
    beta0: &DVector<f64>,
) -> Option<Wls> {
    accumulate(
        data,
        work.ones,
        tau2,
        want,
        beta0.as_slice(),
        &mut work.sums,
    );
    finish(work, data, tau2, want, beta0)
}

/// The fit at `tau2` from the sums of one pass around `beta0` in
/// `work.sums` (see [`fit_near_in`]).
fn finish(
    work: &mut Work,
    data: &Data<'_>,
    tau2: f64,
    want: Want,
    beta0: &DVector<f64>,
) -> Option<Wls> {
    let p = data.p;
    let Work {
        sums: s,
        m,
        n2,
        n3,
        m_inv_n2,
        g,
        h,
        h3,
        delta,
        n2d,
        n3d,
        u,
        m_inv_u,
        many: _,
        ones: _,
    } = work;
    fill_symmetric(m, &s.m, p);
    // The factorisation takes the matrix; it is given back below (or
    // rebuilt by `fill_symmetric` after a failure).
    let chol = std::mem::replace(m, DMatrix::zeros(0, 0)).cholesky()?;
    let logdet_m = if want.log_terms {
        2.0 * chol
            .l_dirty()
            .diagonal()
            .iter()
            .map(|d| d.ln())
            .sum::<f64>()
    } else {
        f64::NAN
    };
    g.copy_from_slice(&s.g);
    delta.copy_from(g);
    chol.solve_mut(delta);
    let beta = beta0 + &*delta;
    if !beta.iter().all(|x| x.is_finite()) {
        *m = chol.unpack_dirty();
        return None;
    }
    let m_inv = chol.inverse();
    *m = chol.unpack_dirty();
    fill_symmetric(n2, &s.n2, p);
    h.copy_from_slice(&s.h);
    n2.mul_to(delta, n2d);
    let (dh, dn2d) = (delta.dot(h), delta.dot(n2d));
    let q = s.sum_wr2 - delta.dot(g);
    let w2r2 = s.sum_w2r2 - 2.0 * dh + dn2d;
    let limit = tolerance::ONE_PASS_MAX_CANCEL;
    let kept = q * limit >= s.sum_wr2 && w2r2 * limit >= s.sum_w2r2 + 2.0 * dh.abs() + dn2d;
    let (q, sum_w2r2) = if kept {
        (q, w2r2)
    } else {
        residual_sums(data, tau2, &beta)
    };
    let tr_p = if want.trace {
        s.sum_w - trace_of_product(&m_inv, n2)
    } else {
        f64::NAN
    };
    let (y_pppy, tr_pp) = if want.curvature {
        fill_symmetric(n3, &s.n3, p);
        h3.copy_from_slice(&s.h3);
        n3.mul_to(delta, n3d);
        let w3r2 = s.sum_w3r2 - 2.0 * delta.dot(h3) + delta.dot(n3d);
        // u = h − N₂δ.
        u.copy_from(h);
        *u -= &*n2d;
        m_inv.mul_to(u, m_inv_u);
        let y_pppy = w3r2 - u.dot(m_inv_u);
        m_inv.mul_to(n2, m_inv_n2);
        let a = m_inv_n2;
        let tr_pp = s.sum_w2 - 2.0 * trace_of_product(&m_inv, n3) + trace_of_product(a, a);
        (y_pppy, tr_pp)
    } else {
        (f64::NAN, f64::NAN)
    };
    Some(Wls {
        tau2,
        beta,
        m_inv,
        q,
        sum_w: s.sum_w,
        sum_w2r2,
        tr_p,
        sum_log_vt: if want.log_terms {
            s.sum_log_vt
        } else {
            f64::NAN
        },
        logdet_m,
        y_pppy,
        tr_pp,
        sum_w2: if want.curvature { s.sum_w2 } else { f64::NAN },
    })
}

/// Whether a fit made with `had` holds everything `want` asks for.
fn covers(had: Want, want: Want) -> bool {
    (had.trace || !want.trace)
        && (had.log_terms || !want.log_terms)
        && (had.curvature || !want.curvature)
}

/// From this many studies on, the τ² search saves passes over the studies in
/// ways that change only the rounding of its fits: fits whose τ² are known
/// together share one pass ([`Evaluator::fit_many`]: τ² = 0, the first end
/// tried for the likelihood's bracket and the points of its scan, the steps
/// of the two Q-profile bounds' searches, which go in lock step), the
/// first fit is taken around the OLS coefficients
/// ([`Evaluator::around`]), not around β₀ = 0, which takes a second pass,
/// and the Newton search's last fit takes the log terms of the likelihood
/// ([`crate::tolerance::NEWTON_LAST_STEP_REL`]).
/// Each pass reads the whole design from memory, and at this size the
/// reading, not the arithmetic, takes the time (`cargo bench --bench
/// passes`). Below it every fit is its own pass, each around the fit
/// before, as the fits of every golden output were made.
pub(crate) const FEWER_PASSES_MIN_ROWS: usize = super::wls::PARALLEL_MIN_ROWS;

/// Weighted fits of one data set at the τ² values a search asks for: each
/// is one pass around the coefficients of the previous fit ([`fit_near`];
/// the first around β₀ = 0 or the coefficients given to
/// [`Evaluator::around`]), and a τ² already fitted with at least the
/// parts asked for is not fitted again.
///
/// Fits are shared ([`Rc`]), not copied, when asked for again, and the
/// temporaries of each fit are reused from the one before.
#[derive(Debug)]
pub struct Evaluator<'a> {
    data: Data<'a>,
    seen: RefCell<Vec<(Want, Rc<Wls>)>>,
    /// The coefficients the first fit is taken around.
    first: DVector<f64>,
    /// Whether `first` was given ([`Evaluator::around`]), not β₀ = 0.
    given: bool,
    work: RefCell<Work>,
    evaluations: Cell<u64>,
}

impl<'a> Evaluator<'a> {
    /// An evaluator of `data` that has fitted nothing yet.
    pub fn new(data: Data<'a>) -> Self {
        // A REML fit with its Q-profile interval makes about 25 fits.
        const USUAL_FITS: usize = 32;
        Evaluator {
            work: RefCell::new(Work::new(data.p)),
            first: DVector::zeros(data.p),
            given: false,
            data,
            seen: RefCell::new(Vec::with_capacity(USUAL_FITS)),
            evaluations: Cell::new(0),
        }
    }

    /// An evaluator of `data` whose first fit is taken around `beta0`
    /// (coefficients near the fit's, such as the OLS ones: the sums around
    /// them then need no second pass) instead of β₀ = 0.
    pub fn around(data: Data<'a>, beta0: DVector<f64>) -> Self {
        assert_eq!(beta0.len(), data.p, "one coefficient per column");
        Evaluator {
            first: beta0,
            given: true,
            ..Evaluator::new(data)
        }
    }

    /// The evaluator for a design known to be one column of ones (the
    /// intercept-only model): its passes do not read the column (the same
    /// sums, bit for bit). Any other design is evaluated as by `self`.
    pub fn of_ones(self, ones: bool) -> Self {
        let ones = ones && self.data.p == 1;
        self.work.borrow_mut().ones = ones;
        self
    }

    /// Whether the first fit is taken around coefficients given to
    /// [`Evaluator::around`] (so fits at several τ² around them need no
    /// second pass as a rule), not around β₀ = 0.
    pub fn starts_around(&self) -> bool {
        self.given
    }

    /// The data.
    pub fn data(&self) -> &Data<'a> {
        &self.data
    }

    /// Fits made so far (fits found among the earlier ones not counted).
    pub fn evaluations(&self) -> u64 {
        self.evaluations.get()
    }

    /// The fit made earlier at exactly `tau2` with at least the parts in
    /// `want`, if any.
    fn found(&self, tau2: f64, want: Want) -> Option<Rc<Wls>> {
        self.seen
            .borrow()
            .iter()
            .find(|(had, f)| f.tau2.to_bits() == tau2.to_bits() && covers(*had, want))
            .map(|(_, f)| Rc::clone(f))
    }

    /// The fit at `tau2` with the parts in `want`; `None` for a collinear
    /// design.
    pub fn at(&self, tau2: f64, want: Want) -> Option<Rc<Wls>> {
        if let Some(f) = self.found(tau2, want) {
            return Some(f);
        }
        self.evaluations.set(self.evaluations.get() + 1);
        // Around the coefficients of the fit made last (the last one
        // remembered), or `first` for the first.
        let before = self.seen.borrow().last().map(|(_, f)| Rc::clone(f));
        let work = &mut self.work.borrow_mut();
        let f = Rc::new(match before {
            Some(before) => fit_near_in(work, &self.data, tau2, want, &before.beta)?,
            None => fit_near_in(work, &self.data, tau2, want, &self.first)?,
        });
        self.seen.borrow_mut().push((want, Rc::clone(&f)));
        Some(f)
    }

    /// The fits at each of `taus` not fitted yet (with the parts in
    /// `want`), made in one pass over the studies that reads each design row
    /// once for all of them, all around the coefficients of the fit made
    /// last (or those of the first fit), and remembered in the order of `taus`: afterwards
    /// [`Evaluator::at`] finds them. Each fit is what a pass at its τ² alone
    /// around those coefficients gives, bit for bit; against fits made one
    /// after another (each around the one before) only the rounding
    /// differs. A fit whose corrected sums cancel takes its second pass at
    /// β̂ as in [`fit_near`]. A design the weights make singular is left to
    /// [`Evaluator::at`] to report.
    pub fn fit_many(&self, taus: &[f64], want: Want) {
        let mut missing: Vec<f64> = Vec::with_capacity(taus.len());
        for &t in taus {
            let seen = self.found(t, want).is_some();
            if !seen && !missing.iter().any(|m| m.to_bits() == t.to_bits()) {
                missing.push(t);
            }
        }
        if missing.len() < 2 {
            return;
        }
        let beta0 = match self.seen.borrow().last() {
            Some((_, f)) => f.beta.clone(),
            None => self.first.clone(),
        };
        let work = &mut self.work.borrow_mut();
        let points: Vec<Point<'_>> = missing
            .iter()
            .map(|&tau2| Point {
                tau2,
                beta0: beta0.as_slice(),
            })
            .collect();
        let mut many = std::mem::take(&mut work.many);
        many.resize_with(points.len(), Sums::default);
        accumulate_many(&self.data, work.ones, &points, want, &mut many);
        for (sums, &tau2) in many.iter_mut().zip(&missing) {
            std::mem::swap(&mut work.sums, sums);
            let Some(f) = finish(work, &self.data, tau2, want, &beta0) else {
                break;
            };
            self.evaluations.set(self.evaluations.get() + 1);
            self.seen.borrow_mut().push((want, Rc::new(f)));
        }
        work.many = many;
    }
}

#[path = "near_sums.rs"]
mod sums;

#[cfg(test)]
#[path = "near_tests.rs"]
mod tests;
