//! Per-site means and co-moments, updated one row at a time.
//!
//! A site's rows are summarised by their count n, the mean vector v̄ and the
//! co-moment matrix C = Σ (vᵢ − v̄)(vᵢ − v̄)ᵀ of a short vector v (x, the
//! covariates, w, x·w, y). Everything an OLS fit with an intercept needs
//! follows from (n, v̄, C); see [`super::ols`].

/// Running count, means and co-moments of a vector of fixed length `d`.
///
/// # Formula
/// Welford's update, extended to co-moments (Welford 1962, Technometrics
/// 4:419; the co-moment form as in Chan, Golub & LeVeque 1983, The American
/// Statistician 37:242, and Pébay 2008, Sandia report SAND2008-6212, eq. 3.12):
///
/// ```text
/// n  ← n + 1
/// δ  = v − v̄            (with the old mean)
/// v̄  ← v̄ + δ / n
/// C  ← C + δ (v − v̄)ᵀ    (with the new mean)
/// ```
///
/// Only differences from the running mean are squared, so a common offset
/// (values around 1e9 that vary by units) does not cancel catastrophically as
/// it does in raw sums Σv², Σv·w. Only the upper triangle is stored.
///
/// Two summaries of disjoint row sets combine exactly (Chan et al. 1983,
/// eq. 2.1b): with Δ = v̄_b − v̄_a, C = C_a + C_b + Δ Δᵀ n_a n_b / n.
///
/// # Examples
/// ```
/// use pondus::sites::moments::Moments;
/// let mut m = Moments::new(2);
/// for (x, y) in [(1.0, 2.0), (2.0, 4.0), (3.0, 7.0)] {
///     m.push(&[x, y]);
/// }
/// assert_eq!(m.n(), 3);
/// assert!((m.mean(1) - 13.0 / 3.0).abs() < 1e-15);
/// assert!((m.comoment(0, 1) - 5.0).abs() < 1e-14); // Σ(x−2)(y−13/3) = 5
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Moments {
    n: u64,
    mean: Vec<f64>,
    /// Upper triangle of C, row by row: (0,0), (0,1), …, (0,d−1), (1,1), …
    c: Vec<f64>,
}

fn tri(d: usize, i: usize, j: usize) -> usize {
    let (i, j) = if i <= j { (i, j) } else { (j, i) };
    i * d - i * (i + 1) / 2 + j
}

impl Moments {
    /// An empty summary of vectors of length `d`.
    pub fn new(d: usize) -> Self {
        Moments {
            n: 0,
            mean: vec![0.0; d],
            c: vec![0.0; d * (d + 1) / 2],
        }
    }

    /// A summary from its parts: count, means and the full co-moment matrix
    /// (row-major d × d; only the upper triangle is read).
    ///
    /// # Panics
    /// When the lengths do not fit `d = mean.len()` (a programming error).
    pub fn from_parts(n: u64, mean: Vec<f64>, full: &[f64]) -> Self {
        let d = mean.len();
        assert_eq!(full.len(), d * d, "co-moment matrix is d × d");
        let mut c = vec![0.0; d * (d + 1) / 2];
        for i in 0..d {
            for j in i..d {
                c[tri(d, i, j)] = full[i * d + j];
            }
        }
        Moments { n, mean, c }
    }

    /// Length of the summarised vectors.
    pub fn dim(&self) -> usize {
        self.mean.len()
    }

    /// Number of rows summarised.
    pub fn n(&self) -> u64 {
        self.n
    }

    /// Mean of component `i`.
    pub fn mean(&self, i: usize) -> f64 {
        self.mean[i]
    }

    /// Co-moment Σ (vᵢ − v̄ᵢ)(vⱼ − v̄ⱼ) of components `i` and `j`.
    pub fn comoment(&self, i: usize, j: usize) -> f64 {
        self.c[tri(self.dim(), i, j)]
    }

    /// A summary from its count, means and upper-triangle co-moments in the
    /// order [`Moments::push`] keeps them (`c` of length d(d+1)/2).
    pub(crate) fn from_raw(n: u64, mean: &[f64], c: &[f64]) -> Self {
        debug_assert_eq!(c.len(), mean.len() * (mean.len() + 1) / 2);
        Moments {
            n,
            mean: mean.to_vec(),
            c: c.to_vec(),
        }
    }

    /// Adds one row (Welford's update; see the type's documentation).
    #[inline]
    pub fn push(&mut self, v: &[f64]) {
        push_raw(&mut self.n, &mut self.mean, &mut self.c, v);
    }

    /// Adds the rows summarised by `other` (Chan et al. 1983, eq. 2.1b).
    pub fn merge(&mut self, other: &Moments) {
        let d = self.dim();
        debug_assert_eq!(other.dim(), d);
        if other.n == 0 {
            return;
        }
        if self.n == 0 {
            *self = other.clone();
            return;
        }
        let (na, nb) = (self.n as f64, other.n as f64);
        let n = na + nb;
        let delta: Vec<f64> = (0..d).map(|i| other.mean[i] - self.mean[i]).collect();
        let mut k = 0;
        for i in 0..d {
            for j in i..d {
                self.c[k] += other.c[k] + delta[i] * delta[j] * na * nb / n;
                k += 1;
            }
        }
        for (i, dl) in delta.iter().enumerate() {
            self.mean[i] += dl * nb / n;
        }
        self.n += other.n;
    }

    /// The summary of A·v + b for a d × d matrix `a` (row-major): means A·v̄ + b
    /// and co-moments A C Aᵀ (a shift b does not change co-moments).
    pub fn transformed(&self, a: &[f64], b: &[f64]) -> Moments {
        let d = self.dim();
        let full: Vec<f64> = (0..d * d).map(|k| self.comoment(k / d, k % d)).collect();
        let mut ac = vec![0.0; d * d];
        for i in 0..d {
            for j in 0..d {
                ac[i * d + j] = (0..d).map(|k| a[i * d + k] * full[k * d + j]).sum();
            }
        }
        let mut out = vec![0.0; d * d];
        for i in 0..d {
            for j in 0..d {
                out[i * d + j] = (0..d).map(|k| ac[i * d + k] * a[j * d + k]).sum();
            }
        }
        let mean = (0..d)
            .map(|i| (0..d).map(|k| a[i * d + k] * self.mean[k]).sum::<f64>() + b[i])
            .collect();
        Moments::from_parts(self.n, mean, &out)
    }
}

/// 1/n for n = 0 … 1023 (entry 0 unused), each the correctly rounded
/// quotient that `1.0 / n as f64` gives at run time (IEEE division, evaluated
/// the same way at compile time): a table look-up instead of a division in
/// most updates of a piece's sums, with bit-identical results.
static RECIPROCALS: [f64; 1024] = {
    let mut t = [0.0; 1024];
    let mut i = 1;
    while i < t.len() {
        t[i] = 1.0 / i as f64;
        i += 1;
    }
    t
};

/// [`Moments::push`] on a summary kept as its parts: count `n`, means
/// `mean` (length d ≤ [`MAX_DIM`]) and upper-triangle co-moments `c`.
#[inline]
pub(crate) fn push_raw(n: &mut u64, mean: &mut [f64], c: &mut [f64], v: &[f64]) {
    let d = mean.len();
    debug_assert_eq!(v.len(), d);
    *n += 1;
    let inv = match RECIPROCALS.get(*n as usize) {
        Some(&r) => r,
        None => 1.0 / *n as f64,
    };
    // δ with the old mean, then the new mean; at most 16 components are
    // used by the command line, so both fit on the stack.
    let mut delta = [0.0f64; MAX_DIM];
    let mut after = [0.0f64; MAX_DIM];
    for i in 0..d {
        let dl = v[i] - mean[i];
        delta[i] = dl;
        mean[i] += dl * inv;
        after[i] = v[i] - mean[i];
    }
    let mut k = 0;
    for i in 0..d {
        let di = delta[i];
        for a in &after[i..d] {
            c[k] += di * a;
            k += 1;
        }
    }
}

/// Longest vector [`Moments::push`] accepts: x, w, x·w, y and up to 12 covariates.
pub const MAX_DIM: usize = 16;

#[cfg(test)]
mod tests {
    use super::*;

    /// Two-pass reference: means first, then centred cross-products.
    fn two_pass(rows: &[Vec<f64>]) -> (Vec<f64>, Vec<f64>) {
        let d = rows[0].len();
        let n = rows.len() as f64;
        let mean: Vec<f64> = (0..d)
            .map(|i| rows.iter().map(|r| r[i]).sum::<f64>() / n)
            .collect();
        let mut c = vec![0.0; d * d];
        for r in rows {
            for i in 0..d {
                for j in 0..d {
                    c[i * d + j] += (r[i] - mean[i]) * (r[j] - mean[j]);
                }
            }
        }
        (mean, c)
    }

    fn rows(offset: f64) -> Vec<Vec<f64>> {
        // A small deterministic pattern (no generator needed).
        (0..50)
            .map(|i| {
                let t = i as f64;
                let x = offset + (t * 0.37).sin() * 3.0 + t * 0.01;
                let y = offset + 2.0 * (t * 0.37).sin() + (t * 1.3).cos();
                vec![x, y, (t * 0.11).cos()]
            })
            .collect()
    }

    #[test]
    fn reciprocal_table_is_the_division() {
        for (n, r) in RECIPROCALS.iter().enumerate().skip(1) {
            assert_eq!(
                r.to_bits(),
                (1.0 / std::hint::black_box(n) as f64).to_bits()
            );
        }
    }

    #[test]
    fn welford_matches_two_pass() {
        let r = rows(0.0);
        let mut m = Moments::new(3);
        r.iter().for_each(|v| m.push(v));
        let (mean, c) = two_pass(&r);
        for i in 0..3 {
            assert!((m.mean(i) - mean[i]).abs() < 1e-13);
            for j in 0..3 {
                let want = c[i * 3 + j];
                assert!((m.comoment(i, j) - want).abs() <= 1e-12 * want.abs().max(1.0));
            }
        }
    }

    #[test]
    fn merge_equals_one_pass() {
        let r = rows(5.0);
        let mut all = Moments::new(3);
        r.iter().for_each(|v| all.push(v));
        let mut a = Moments::new(3);
        let mut b = Moments::new(3);
        r[..17].iter().for_each(|v| a.push(v));
        r[17..].iter().for_each(|v| b.push(v));
        a.merge(&b);
        assert_eq!(a.n(), 50);
        for i in 0..3 {
            for j in i..3 {
                let want = all.comoment(i, j);
                assert!((a.comoment(i, j) - want).abs() <= 1e-11 * want.abs().max(1.0));
            }
        }
    }

    /// Values around 1e9 that vary by a few units. The naive formula
    /// Σxy − (Σx)(Σy)/n works with sums near 5e19 whose unit in the last
    /// place is 8192: the variance it returns is wrong in its first digit (or
    /// negative). Welford's update keeps about 1e-7 relative accuracy here
    /// (the offset itself costs log10(1e9) ≈ 9 of the 16 digits of each value).
    #[test]
    fn large_offset_where_naive_sums_fail() {
        let offset = 1e9;
        let r = rows(offset);
        let exact = {
            // The same data without the offset: co-moments are shift-invariant.
            let (_, c) = two_pass(&rows(0.0));
            c
        };
        let n = r.len() as f64;
        let (sx, sxx) = r
            .iter()
            .fold((0.0, 0.0), |(s, q), v| (s + v[0], q + v[0] * v[0]));
        let naive = sxx - sx * sx / n;
        let want = exact[0];
        assert!(
            (naive - want).abs() > 0.1 * want,
            "the naive sum of squares fails here: {naive} vs {want}"
        );
        let mut m = Moments::new(3);
        r.iter().for_each(|v| m.push(v));
        assert!((m.comoment(0, 0) - want).abs() < 1e-6 * want);
        assert!((m.comoment(0, 1) - exact[1]).abs() < 1e-6 * exact[1].abs());
    }

    #[test]
    fn transform_is_a_c_at() {
        let r = rows(1.0);
        let mut m = Moments::new(3);
        r.iter().for_each(|v| m.push(v));
        // z = (x, y, x + 2y − 1)
        let a = [1.0, 0.0, 0.0, 0.0, 1.0, 0.0, 1.0, 2.0, 0.0];
        let t = m.transformed(&a, &[0.0, 0.0, -1.0]);
        let mut direct = Moments::new(3);
        r.iter()
            .for_each(|v| direct.push(&[v[0], v[1], v[0] + 2.0 * v[1] - 1.0]));
        for i in 0..3 {
            assert!((t.mean(i) - direct.mean(i)).abs() < 1e-12);
            for j in i..3 {
                let want = direct.comoment(i, j);
                assert!((t.comoment(i, j) - want).abs() <= 1e-10 * want.abs().max(1.0));
            }
        }
    }
}
