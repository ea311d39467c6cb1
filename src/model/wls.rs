//! Weighted least squares at a fixed τ²: the building block of every estimator.

use nalgebra::{DMatrix, DVector};

/// Data of a meta-regression: effects, sampling variances and the design.
#[derive(Debug, Clone)]
pub struct Data<'a> {
    /// Effects y_i.
    pub y: &'a [f64],
    /// Sampling variances v_i (> 0).
    pub v: &'a [f64],
    /// Design matrix, row-major k × p.
    pub x: &'a [f64],
    /// Number of columns.
    pub p: usize,
}

impl Data<'_> {
    /// Number of studies.
    pub fn k(&self) -> usize {
        self.y.len()
    }

    fn row(&self, i: usize) -> &[f64] {
        &self.x[i * self.p..(i + 1) * self.p]
    }
}

/// What a weighted fit at one τ² gives.
///
/// With w_i = 1/(v_i + τ²), W = diag(w), M = X'WX:
/// β̂ = M⁻¹X'Wy, r = y − Xβ̂, Q = Σ w_i r_i²,
/// tr P = Σ w_i − tr(M⁻¹ X'W²X) where P = W − WXM⁻¹X'W
/// (the REML score of Viechtbauer 2005, *J. Educ. Behav. Stat.* 30:261,
/// generalised to meta-regression).
#[derive(Debug, Clone)]
pub struct Wls {
    /// The τ² the fit was made at.
    pub tau2: f64,
    /// Coefficients β̂.
    pub beta: DVector<f64>,
    /// M⁻¹ = (X'WX)⁻¹, the model-based covariance of β̂.
    pub m_inv: DMatrix<f64>,
    /// Weighted residual sum of squares Q = Σ w_i r_i².
    pub q: f64,
    /// Σ w_i.
    pub sum_w: f64,
    /// Σ w_i² r_i² = y'PPy.
    pub sum_w2r2: f64,
    /// tr P (NaN unless asked for).
    pub tr_p: f64,
    /// Σ ln(v_i + τ²) (NaN unless asked for).
    pub sum_log_vt: f64,
    /// ln det M (NaN unless asked for).
    pub logdet_m: f64,
    /// y'PPPy (NaN unless the curvature is asked for; see [`super::near`]).
    pub y_pppy: f64,
    /// tr(PP) (NaN unless the curvature is asked for).
    pub tr_pp: f64,
    /// Σ w_i² (NaN unless the curvature is asked for).
    pub sum_w2: f64,
}

/// Which optional parts of a weighted fit to compute.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Want {
    /// tr P (needs one more p×p accumulation).
    pub trace: bool,
    /// Σ ln(v_i + τ²) and ln det M (a logarithm per study).
    pub log_terms: bool,
    /// y'PPPy and tr(PP), for the second derivative of the likelihood
    /// (only the one-pass fits of [`super::near`] compute them).
    pub curvature: bool,
}

impl Want {
    /// Only β̂, M⁻¹ and Q.
    pub const Q: Want = Want {
        trace: false,
        log_terms: false,
        curvature: false,
    };
    /// Enough for the likelihood score.
    pub const SCORE: Want = Want {
        trace: true,
        log_terms: false,
        curvature: false,
    };
    /// Everything.
    pub const ALL: Want = Want {
        trace: true,
        log_terms: true,
        curvature: false,
    };
    /// The score and its derivative in τ² (Newton steps on the score).
    pub const CURVATURE: Want = Want {
        trace: true,
        log_terms: false,
        curvature: true,
    };
}

/// Fits β by weighted least squares at `tau2`, computing everything
/// (with `trace`, also tr P). See [`fit_with`] for the fast variants.
///
/// Returns `None` when X'WX is not positive definite (collinear design).
pub fn fit_at(data: &Data<'_>, tau2: f64, trace: bool) -> Option<Wls> {
    fit_with(
        data,
        tau2,
        Want {
            trace,
            log_terms: true,
            curvature: false,
        },
    )
}

/// Sums over the studies for one τ²: M = X'WX (upper triangle), X'Wy,
/// X'W²X (upper triangle, with trace), Σw, Σ ln(v + τ²) (with log terms).
struct Sums {
    m: Vec<f64>,
    n2: Vec<f64>,
    b: Vec<f64>,
    sum_w: f64,
    sum_log_vt: f64,
}

/// Rows per chunk of the parallel sums. The chunking depends on k only,
/// never on the number of threads, and chunk sums are added in chunk
/// order, so results are identical whatever the thread count.
pub(crate) const CHUNK_ROWS: usize = 16_384;

/// Below this many studies the sums run on one thread.
pub(crate) const PARALLEL_MIN_ROWS: usize = 4 * CHUNK_ROWS;

thread_local! {
    /// Passes over the studies started from this thread (each sweep of
    /// [`accumulate`], of the residual sums and of the one-pass sums of
    /// [`super::near`] counts once, whatever the threads doing it).
    static PASSES: std::cell::Cell<u64> = const { std::cell::Cell::new(0) };
}

/// Counts one pass over the studies (see [`passes`]).
pub(super) fn count_pass() {
    PASSES.with(|c| c.set(c.get() + 1));
}

/// The passes over the studies that weighted fits started from the calling
/// thread have made so far: what the tests and benchmarks of the τ² search
/// count (a pass's own worker threads do not count separately).
pub fn passes() -> u64 {
    PASSES.with(std::cell::Cell::get)
}

/// Splits the data into fixed chunks of rows.
pub(super) fn chunks<'a>(data: &Data<'a>) -> Vec<Data<'a>> {
    let p = data.p;
    data.y
        .chunks(CHUNK_ROWS)
        .zip(data.v.chunks(CHUNK_ROWS))
        .zip(data.x.chunks(CHUNK_ROWS * p))
        .map(|((y, v), x)| Data { y, v, x, p })
        .collect()
}

fn accumulate(data: &Data<'_>, tau2: f64, want: Want) -> Sums {
    use rayon::prelude::*;
    count_pass();
    if data.k() < PARALLEL_MIN_ROWS {
        return accumulate_serial(data, tau2, want);
    }
    let parts: Vec<Sums> = chunks(data)
        .par_iter()
        .map(|d| accumulate_serial(d, tau2, want))
        .collect();
    let mut total = Sums {
        m: vec![0.0; data.p * data.p],
        n2: if want.trace {
            vec![0.0; data.p * data.p]
        } else {
            Vec::new()
        },
        b: vec![0.0; data.p],
        sum_w: 0.0,
        sum_log_vt: 0.0,
    };
    for part in parts {
        for (t, x) in total.m.iter_mut().zip(&part.m) {
            *t += x;
        }
        for (t, x) in total.n2.iter_mut().zip(&part.n2) {
            *t += x;
        }
        for (t, x) in total.b.iter_mut().zip(&part.b) {
            *t += x;
        }
        total.sum_w += part.sum_w;
        total.sum_log_vt += part.sum_log_vt;
    }
    total
}

/// Σ w r² and Σ w² r² at β̂, over fixed chunks in parallel for large k.
pub(super) fn residual_sums(data: &Data<'_>, tau2: f64, beta: &DVector<f64>) -> (f64, f64) {
    use rayon::prelude::*;
    count_pass();
    let b = beta.as_slice();
    let serial = |d: &Data<'_>| match d.p {
        1 => residual_serial::<1>(d, tau2, b),
        2 => residual_serial::<2>(d, tau2, b),
        3 => residual_serial::<3>(d, tau2, b),
        4 => residual_serial::<4>(d, tau2, b),
        5 => residual_serial::<5>(d, tau2, b),
        6 => residual_serial::<6>(d, tau2, b),
        _ => residual_any(d, tau2, b),
    };
    if data.k() < PARALLEL_MIN_ROWS {
        return serial(data);
    }
    let parts: Vec<(f64, f64)> = chunks(data).par_iter().map(serial).collect();
    parts
        .iter()
        .fold((0.0, 0.0), |acc, x| (acc.0 + x.0, acc.1 + x.1))
}

fn residual_serial<const P: usize>(d: &Data<'_>, tau2: f64, beta: &[f64]) -> (f64, f64) {
    let beta: &[f64; P] = beta.try_into().expect("p coefficients");
    let mut q = 0.0;
    let mut sum_w2r2 = 0.0;
    for ((xi, &vi), &yi) in d.x.chunks_exact(P).zip(d.v).zip(d.y) {
        let xi: &[f64; P] = xi.try_into().expect("rows have p entries");
        let w = 1.0 / (vi + tau2);
        let mut fit = 0.0;
        for a in 0..P {
            fit += xi[a] * beta[a];
        }
        let r = yi - fit;
        let wr2 = w * r * r;
        q += wr2;
        sum_w2r2 += w * wr2;
    }
    (q, sum_w2r2)
}

fn residual_any(d: &Data<'_>, tau2: f64, beta: &[f64]) -> (f64, f64) {
    let mut q = 0.0;
    let mut sum_w2r2 = 0.0;
    for ((xi, &vi), &yi) in d.x.chunks_exact(d.p).zip(d.v).zip(d.y) {
        let w = 1.0 / (vi + tau2);
        let fit: f64 = xi.iter().zip(beta).map(|(x, b)| x * b).sum();
        let r = yi - fit;
        let wr2 = w * r * r;
        q += wr2;
        sum_w2r2 += w * wr2;
    }
    (q, sum_w2r2)
}

fn accumulate_serial(data: &Data<'_>, tau2: f64, want: Want) -> Sums {
    // Fixed sizes let the compiler unroll the p × p updates; the general
    // loop serves larger designs.
    macro_rules! fixed {
        ($p:literal) => {
            match (want.trace, want.log_terms) {
                (false, false) => accumulate_fixed::<$p, false, false>(data, tau2),
                (true, false) => accumulate_fixed::<$p, true, false>(data, tau2),
                (false, true) => accumulate_fixed::<$p, false, true>(data, tau2),
                (true, true) => accumulate_fixed::<$p, true, true>(data, tau2),
            }
        };
    }
    by_columns!(data.p, fixed, accumulate_any(data, tau2, want))
}

/// The sums for a design with `P` columns; `TRACE` and `LOG` choose the
/// optional parts at compile time, so the loop has no branches.
fn accumulate_fixed<const P: usize, const TRACE: bool, const LOG: bool>(
    data: &Data<'_>,
    tau2: f64,
) -> Sums {
    let mut m = [[0.0f64; P]; P];
    let mut n2 = [[0.0f64; P]; P];
    let mut b = [0.0f64; P];
    let mut sum_w = 0.0;
    let mut sum_log_vt = 0.0;
    for ((xi, &vi), &yi) in data.x.chunks_exact(P).zip(data.v).zip(data.y) {
        let xi: &[f64; P] = xi.try_into().expect("rows have p entries");
        let vt = vi + tau2;
        let w = 1.0 / vt;
        sum_w += w;
        if LOG {
            sum_log_vt += vt.ln();
        }
        let wy = w * yi;
        for a in 0..P {
            let wxa = w * xi[a];
            b[a] += xi[a] * wy;
            for c in a..P {
                m[a][c] += wxa * xi[c];
            }
        }
        if TRACE {
            let w2 = w * w;
            for a in 0..P {
                let w2xa = w2 * xi[a];
                for c in a..P {
                    n2[a][c] += w2xa * xi[c];
                }
            }
        }
    }
    Sums {
        m: m.iter().flatten().copied().collect(),
        n2: if TRACE {
            n2.iter().flatten().copied().collect()
        } else {
            Vec::new()
        },
        b: b.to_vec(),
        sum_w,
        sum_log_vt,
    }
}

fn accumulate_any(data: &Data<'_>, tau2: f64, want: Want) -> Sums {
    let p = data.p;
    let mut m = vec![0.0; p * p];
    let mut n2 = if want.trace {
        vec![0.0; p * p]
    } else {
        Vec::new()
    };
    let mut b = vec![0.0; p];
    let mut sum_w = 0.0;
    let mut sum_log_vt = 0.0;
    for ((xi, &vi), &yi) in data.x.chunks_exact(p).zip(data.v).zip(data.y) {
        let vt = vi + tau2;
        let w = 1.0 / vt;
        sum_w += w;
        if want.log_terms {
            sum_log_vt += vt.ln();
        }
        let wy = w * yi;
        for a in 0..p {
            let wxa = w * xi[a];
            b[a] += xi[a] * wy;
            let row = &mut m[a * p..(a + 1) * p];
            for c in a..p {
                row[c] += wxa * xi[c];
            }
            if want.trace {
                let w2xa = wxa * w;
                let row = &mut n2[a * p..(a + 1) * p];
                for c in a..p {
                    row[c] += w2xa * xi[c];
                }
            }
        }
    }
    Sums {
        m,
        n2,
        b,
        sum_w,
        sum_log_vt,
    }
}

/// Fits β by weighted least squares at `tau2`, computing the parts in `want`
/// (the others are NaN).
///
/// Returns `None` when X'WX is not positive definite (collinear design).
pub fn fit_with(data: &Data<'_>, tau2: f64, want: Want) -> Option<Wls> {
    let p = data.p;
    let Sums {
        mut m,
        mut n2,
        b,
        sum_w,
        sum_log_vt,
    } = accumulate(data, tau2, want);
    for a in 0..p {
        for c in 0..a {
            m[a * p + c] = m[c * p + a];
            if want.trace {
                n2[a * p + c] = n2[c * p + a];
            }
        }
    }
    let mm = DMatrix::from_row_slice(p, p, &m);
    let chol = mm.cholesky()?;
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
    let beta = chol.solve(&DVector::from_column_slice(&b));
    let m_inv = chol.inverse();
    if !beta.iter().all(|x| x.is_finite()) {
        return None;
    }
    let (q, sum_w2r2) = residual_sums(data, tau2, &beta);
    let tr_p = if want.trace {
        let mut t = 0.0;
        for a in 0..p {
            for c in 0..p {
                t += m_inv[(a, c)] * n2[c * p + a];
            }
        }
        sum_w - t
    } else {
        f64::NAN
    };
    Some(Wls {
        tau2,
        beta,
        m_inv,
        q,
        sum_w,
        sum_w2r2,
        tr_p,
        sum_log_vt: if want.log_terms { sum_log_vt } else { f64::NAN },
        logdet_m,
        y_pppy: f64::NAN,
        tr_pp: f64::NAN,
        sum_w2: f64::NAN,
    })
}

/// tr P at `tau2` (P = W − WXM⁻¹X'W) summed without cancellation, for the
/// typical within-study variance ṽ = (k − p)/tr P at τ² = 0 behind I² and
/// H² (Higgins & Thompson 2002, *Stat. Med.* 21:1539, generalised to
/// meta-regression). tr P = Σ_i w_i(1 − h_i), h_i = w_i x_i'M⁻¹x_i; the
/// subtraction Σw − tr(M⁻¹X'W²X) of [`fit_with`] loses every digit when one
/// w_i dominates (variances from 1e-12 to 1e6 gave ṽ < 0 and I² = 107%).
/// For a study with h_i ≥ ½ (at most 2p of them, as Σh_i = p), 1 − h_i is
/// itself a cancellation, so its term is computed as
/// w_i/(1 + w_i x_i'M₍ᵢ₎⁻¹x_i) with M₍ᵢ₎ = Σ_{j≠i} w_j x_j x_j' summed
/// afresh (the rank-one update identity; 0 when M₍ᵢ₎ is singular: the
/// study alone carries a coefficient, h_i = 1). Every term is ≥ 0.
///
/// Returns `None` when X'WX is not positive definite.
pub fn trace_p(data: &Data<'_>, tau2: f64) -> Option<f64> {
    let f = fit_with(data, tau2, Want::Q)?;
    Some(trace_p_with(data, tau2, &f.m_inv))
}

/// [`trace_p`] with M⁻¹ = (X'WX)⁻¹ at `tau2` already computed. For large k
/// the terms are summed over the fixed pieces of [`crate::support::pieces`]
/// in parallel and the piece totals added in piece order (the same for any
/// thread count).
pub fn trace_p_with(data: &Data<'_>, tau2: f64, m_inv: &DMatrix<f64>) -> f64 {
    /// The sum over every study, x_i'M⁻¹x_i from the quadratic form given.
    struct Trace<'d, 'a> {
        data: &'d Data<'a>,
        tau2: f64,
    }
    impl UseQuadForm for Trace<'_, '_> {
        type Out = f64;
        fn run(self, quad: impl Fn(usize) -> f64 + Sync) -> f64 {
            let (data, tau2) = (self.data, self.tau2);
            let k = data.k();
            if k < PARALLEL_MIN_ROWS {
                return trace_terms(data, 0..k, tau2, &quad);
            }
            crate::support::pieces::map(k, |rows| trace_terms(data, rows, tau2, &quad))
                .iter()
                .fold(0.0, |t, x| t + x)
        }
    }
    with_quad_form(data, m_inv, Trace { data, tau2 })
}

/// A computation over the studies that needs x_i'Ax_i for one matrix A,
/// given to [`with_quad_form`].
pub(crate) trait UseQuadForm {
    /// What it gives.
    type Out;
    /// The computation, `quad(i)` being x_i'Ax_i.
    fn run(self, quad: impl Fn(usize) -> f64 + Sync) -> Self::Out;
}

/// `user` run with x_i'Ax_i computed with the column count fixed at
/// compile time when p ≤ 8 (the loops unrolled, A copied into an array),
/// else by [`quad_form`]: the same products added in the same order, so
/// the same bits either way.
pub(crate) fn with_quad_form<U: UseQuadForm>(data: &Data<'_>, a: &DMatrix<f64>, user: U) -> U::Out {
    macro_rules! fixed {
        ($p:literal) => {{
            let mut m = [[0.0; $p]; $p];
            for (r, row) in m.iter_mut().enumerate() {
                for (c, e) in row.iter_mut().enumerate() {
                    *e = a[(r, c)];
                }
            }
            user.run(|i| {
                let xi: &[f64; $p] = data.row(i).try_into().expect("p columns");
                let mut s = 0.0;
                for r in 0..$p {
                    let mut t = 0.0;
                    for c in 0..$p {
                        t += m[r][c] * xi[c];
                    }
                    s += xi[r] * t;
                }
                s
            })
        }};
    }
    by_columns!(data.p, fixed, user.run(|i| quad_form(data, a, i)))
}

/// The terms of [`trace_p`] for the studies in `rows`, summed in order,
/// x_i'M⁻¹x_i from `quad(i)`.
fn trace_terms(
    data: &Data<'_>,
    rows: std::ops::Range<usize>,
    tau2: f64,
    quad: &impl Fn(usize) -> f64,
) -> f64 {
    let mut total = 0.0;
    for i in rows {
        let w = 1.0 / (data.v[i] + tau2);
        let h = w * quad(i);
        if h < 0.5 {
            total += w * (1.0 - h);
        } else {
            total += high_leverage_term(data, i, tau2, w);
        }
    }
    total
}

/// The term w_i(1 − h_i) of a study with h_i ≥ ½ (see [`trace_p`]):
/// w_i/(1 + w_i x_i'M₍ᵢ₎⁻¹x_i), 0 when M₍ᵢ₎ is singular.
fn high_leverage_term(data: &Data<'_>, i: usize, tau2: f64, w: f64) -> f64 {
    let (k, p) = (data.k(), data.p);
    let mut m = DMatrix::<f64>::zeros(p, p);
    for j in (0..k).filter(|&j| j != i) {
        let (wj, r) = (1.0 / (data.v[j] + tau2), data.row(j));
        for a in 0..p {
            for c in 0..p {
                m[(a, c)] += wj * r[a] * r[c];
            }
        }
    }
    let xi = DVector::from_column_slice(data.row(i));
    match m.cholesky() {
        Some(ch) => {
            let q = xi.dot(&ch.solve(&xi));
            if q.is_finite() {
                w / (1.0 + w * q)
            } else {
                0.0
            }
        }
        None => 0.0,
    }
}

/// Fitted value x_i'β̂ of study i.
pub fn fitted(data: &Data<'_>, beta: &DVector<f64>, i: usize) -> f64 {
    data.row(i)
        .iter()
        .zip(beta.iter())
        .map(|(x, b)| x * b)
        .sum()
}

/// x_i' A x_i for a p × p matrix A.
pub fn quad_form(data: &Data<'_>, a: &DMatrix<f64>, i: usize) -> f64 {
    let xi = data.row(i);
    let p = data.p;
    let mut s = 0.0;
    for r in 0..p {
        let mut t = 0.0;
        for c in 0..p {
            t += a[(r, c)] * xi[c];
        }
        s += xi[r] * t;
    }
    s
}

/// Ordinary least squares (all weights 1): returns (β̂, (X'X)⁻¹, residual sum of squares).
pub fn ols(data: &Data<'_>) -> Option<(DVector<f64>, DMatrix<f64>, f64)> {
    if (1..=8).contains(&data.p) {
        // The same bits without a column of ones (see `unit_weights`).
        return super::unit_weights::ols(data);
    }
    let ones = vec![1.0; data.k()];
    // With v = 1 and τ² = 0 every weight is 1.
    let unit = Data {
        y: data.y,
        v: &ones,
        x: data.x,
        p: data.p,
    };
    let f = fit_with(&unit, 0.0, Want::Q)?;
    Some((f.beta, f.m_inv, f.q))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn intercept_only_is_the_weighted_mean() {
        let y = [1.0, 2.0, 4.0];
        let v = [0.5, 1.0, 2.0];
        let x = [1.0, 1.0, 1.0];
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let f = fit_at(&d, 0.5, true).unwrap();
        let w: Vec<f64> = v.iter().map(|v| 1.0 / (v + 0.5)).collect();
        let sw: f64 = w.iter().sum();
        let mean = (w[0] * 1.0 + w[1] * 2.0 + w[2] * 4.0) / sw;
        assert!((f.beta[0] - mean).abs() < 1e-14);
        assert!((f.m_inv[(0, 0)] - 1.0 / sw).abs() < 1e-14);
        // tr P = Σw − Σw²/Σw for the intercept-only model.
        let sw2: f64 = w.iter().map(|w| w * w).sum();
        assert!((f.tr_p - (sw - sw2 / sw)).abs() < 1e-13);
    }

    /// The trace with x_i'M⁻¹x_i unrolled for p ≤ 8 is the general
    /// loop's, bit for bit: invented designs of 1 to 9 columns with two
    /// studies of high leverage (tiny variances), below and past the
    /// parallel threshold.
    #[test]
    fn trace_terms_unrolled_equal_the_general_loop() {
        for k in [300, PARALLEL_MIN_ROWS + 5] {
            for p in 1..=9 {
                let x: Vec<f64> = (0..k * p)
                    .map(|n| {
                        if n % p == 0 {
                            1.0
                        } else {
                            ((n * 7919) % 1013) as f64 / 101.3
                        }
                    })
                    .collect();
                let y: Vec<f64> = (0..k).map(|i| ((i * 31) % 17) as f64 / 7.0).collect();
                let mut v: Vec<f64> = (0..k)
                    .map(|i| 0.01 + ((i * 13) % 11) as f64 / 50.0)
                    .collect();
                v[3] = 1e-9;
                v[k / 2] = 1e-11;
                let d = Data {
                    y: &y,
                    v: &v,
                    x: &x,
                    p,
                };
                // τ² = 0, where v_typical asks for the trace, so the two tiny
                // variances carry most of the weight.
                let tau2 = 0.0;
                let m_inv = fit_with(&d, tau2, Want::Q).unwrap().m_inv;
                let general = if k < PARALLEL_MIN_ROWS {
                    trace_terms(&d, 0..k, tau2, &|i| quad_form(&d, &m_inv, i))
                } else {
                    crate::support::pieces::map(k, |rows| {
                        trace_terms(&d, rows, tau2, &|i| quad_form(&d, &m_inv, i))
                    })
                    .iter()
                    .fold(0.0, |t, x| t + x)
                };
                let got = trace_p_with(&d, tau2, &m_inv);
                assert_eq!(got.to_bits(), general.to_bits(), "k {k}, p {p}");
            }
        }
    }

    #[test]
    fn collinear_design_is_refused() {
        let y = [1.0, 2.0, 3.0];
        let v = [1.0; 3];
        let x = [1.0, 2.0, 1.0, 2.0, 1.0, 2.0];
        assert!(fit_at(
            &Data {
                y: &y,
                v: &v,
                x: &x,
                p: 2
            },
            0.0,
            false
        )
        .is_none());
    }
}
