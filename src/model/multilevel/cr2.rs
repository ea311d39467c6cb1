//! Cluster-robust (CR2) inference for the coefficients of a model with
//! dependent effects, with Satterthwaite degrees of freedom and the
//! approximate Hotelling T² (HTZ) test.

use super::likelihood::evaluate;
use super::Clusters;
use crate::dist;
use crate::error::{Error, Result};
use crate::model::standardise;
use crate::model::wls::Data;
use crate::support::flag::Flag;
use crate::tolerance;
use nalgebra::{DMatrix, DVector};

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

/// One contrast c's per-cluster vectors: q_j = (X_j'W_jA_j)'Mc and
/// a_j = X_j'q_j.
struct Contrast {
    q: Vec<DVector<f64>>,
    a: Vec<DVector<f64>>,
}

/// What the Satterthwaite and HTZ sums need, cluster by cluster.
struct Work<'a> {
    groups: &'a [Vec<usize>],
    v: &'a [f64],
    x: &'a [f64],
    p: usize,
    sb: f64,
    sw: f64,
    xwa: &'a [DMatrix<f64>],
    m_inv: &'a DMatrix<f64>,
}

impl Work<'_> {
    fn contrast(&self, c: &DVector<f64>) -> Contrast {
        let mc = self.m_inv * c;
        let (mut q, mut a) = (Vec::with_capacity(self.groups.len()), Vec::new());
        for (j, g) in self.groups.iter().enumerate() {
            let qj = self.xwa[j].transpose() * &mc;
            let xj = DMatrix::from_fn(g.len(), self.p, |r, b| self.x[g[r] * self.p + b]);
            a.push(xj.transpose() * &qj);
            q.push(qj);
        }
        Contrast { q, a }
    }

    /// d_j = q_sj'V_j q_tj, with V_j = σ²_b·11' + diag(v_i + σ²_w) applied
    /// without forming it.
    fn d(&self, j: usize, qs: &DVector<f64>, qt: &DVector<f64>) -> f64 {
        let g = &self.groups[j];
        let (ss, st): (f64, f64) = (qs.sum(), qt.sum());
        let diag: f64 = (0..g.len())
            .map(|r| qs[r] * qt[r] * (self.v[g[r]] + self.sw))
            .sum();
        self.sb * ss * st + diag
    }

    /// h_j = a_sj'M a_tj.
    fn h(&self, j: usize, s: &Contrast, t: &Contrast) -> f64 {
        s.a[j].dot(&(self.m_inv * &t.a[j]))
    }

    /// U = Σ_j a_sj a_tj' (p × p).
    fn u(&self, s: &Contrast, t: &Contrast) -> DMatrix<f64> {
        let mut u = DMatrix::zeros(self.p, self.p);
        for (a, b) in s.a.iter().zip(&t.a) {
            u += a * b.transpose();
        }
        u
    }

    /// Σ_j G_jj for one contrast: Σ_j (d_j − h_j).
    fn trace(&self, c: &Contrast) -> f64 {
        (0..self.groups.len())
            .map(|j| self.d(j, &c.q[j], &c.q[j]) - self.h(j, c, c))
            .sum()
    }

    /// Σ_ij G^{st}_ij G^{uw}_ij for G^{st}_ij = δ_ij d^{st}_i − a_si'M a_tj:
    /// Σ_i d^{st}_i d^{uw}_i − Σ_i d^{st}_i h^{uw}_i − Σ_i d^{uw}_i h^{st}_i
    /// plus tr(M U_tw M U_us), with U_xy = Σ_j a_xj a_yj'; O(k p² + m p²)
    /// time and no clusters × clusters matrix.
    fn inner(&self, (s, t): (&Contrast, &Contrast), (u, w): (&Contrast, &Contrast)) -> f64 {
        let mut sum = 0.0;
        for j in 0..self.groups.len() {
            let dst = self.d(j, &s.q[j], &t.q[j]);
            let duw = self.d(j, &u.q[j], &w.q[j]);
            sum += dst * duw - dst * self.h(j, u, w) - duw * self.h(j, s, t);
        }
        let mi = self.m_inv;
        sum + (mi * self.u(t, w) * mi * self.u(u, s)).trace()
    }
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
            "{}: {m} clusters cannot support {p} model terms (the cluster-robust variance \
             needs more clusters than coefficients); drop moderators, or leave out {}",
            Flag::Robust,
            Flag::Robust
        )));
    }
    let k = y.len();
    let st = standardise(x, k, p);
    let data = Data { y, v, x: &st.x, p };
    let e = evaluate(&data, cl, sb, sw).ok_or_else(|| {
        Error::Model("the weighted design matrix is singular; the moderators are collinear".into())
    })?;
    let mi = &e.m_inv;
    // Per cluster: X_j'W_jA_j (p × n_j). Nothing of size clusters ×
    // clusters is built: the Satterthwaite and HTZ sums below are reduced
    // to per-cluster terms and p × p matrices.
    let mut xwa: Vec<DMatrix<f64>> = Vec::with_capacity(m);
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
    }
    let vr = mi * meat * mi;
    let work = Work {
        groups: &cl.groups,
        v,
        x: &st.x,
        p,
        sb,
        sw,
        xwa: &xwa,
        m_inv: mi,
    };
    // Contrasts of the original coefficients: β = Aβ̃, so β_j = (row j of A)·β̃.
    let mut coefs = Vec::with_capacity(p);
    let vr_orig = &st.a * &vr * st.a.transpose();
    let beta = &st.a * &e.beta;
    for jj in 0..p {
        let c = work.contrast(&st.a.row(jj).transpose());
        let tr = work.trace(&c);
        let ss = work.inner((&c, &c), (&c, &c));
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
        let cs: Vec<Contrast> = (0..q)
            .map(|r| work.contrast(&ct.row(r).transpose()))
            .collect();
        let mut denom = 0.0;
        for s in &cs {
            for t in &cs {
                denom += work.inner((s, t), (s, t)) + work.inner((s, s), (t, t));
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

    /// The per-cluster sums equal the sums over the dense clusters ×
    /// clusters matrices G^{st}_ij = δ_ij q_si'V_iq_ti − a_si'Ma_tj they
    /// replace (built here from their definition).
    #[test]
    fn per_cluster_sums_equal_the_dense_g_matrices() {
        let groups = vec![vec![0, 1], vec![2, 3, 4], vec![5], vec![6, 7]];
        let v = [0.05, 0.04, 0.06, 0.03, 0.02, 0.07, 0.05, 0.03];
        let p = 3;
        let x: Vec<f64> = (0..8)
            .flat_map(|i| [1.0, (i as f64 * 0.7).sin(), (i * i % 5) as f64])
            .collect();
        let xwa: Vec<DMatrix<f64>> = groups
            .iter()
            .enumerate()
            .map(|(j, g)| DMatrix::from_fn(p, g.len(), |r, c| ((r + 2 * c + j) as f64).cos()))
            .collect();
        let m_inv = DMatrix::from_row_slice(3, 3, &[2.0, 0.3, 0.1, 0.3, 1.5, -0.2, 0.1, -0.2, 1.0]);
        let w = Work {
            groups: &groups,
            v: &v,
            x: &x,
            p,
            sb: 0.02,
            sw: 0.01,
            xwa: &xwa,
            m_inv: &m_inv,
        };
        let cs: Vec<Contrast> = [[0.0, 1.0, 0.0], [0.2, -0.4, 1.0]]
            .iter()
            .map(|c| w.contrast(&DVector::from_row_slice(c)))
            .collect();
        let m = groups.len();
        let dense = |s: &Contrast, t: &Contrast| {
            DMatrix::from_fn(m, m, |i, j| {
                let d = if i == j {
                    let g = &groups[i];
                    let vi = DMatrix::from_fn(g.len(), g.len(), |a, b| {
                        0.02 + if a == b { v[g[a]] + 0.01 } else { 0.0 }
                    });
                    s.q[i].dot(&(vi * &t.q[i]))
                } else {
                    0.0
                };
                d - s.a[i].dot(&(&m_inv * &t.a[j]))
            })
        };
        for s in &cs {
            for t in &cs {
                let (gst, gss, gtt) = (dense(s, t), dense(s, s), dense(t, t));
                let a: f64 = gst.iter().map(|x| x * x).sum();
                let b: f64 = gss.iter().zip(gtt.iter()).map(|(x, y)| x * y).sum();
                let (a2, b2) = (w.inner((s, t), (s, t)), w.inner((s, s), (t, t)));
                assert!((a - a2).abs() < 1e-12 * a.abs().max(1.0), "{a} vs {a2}");
                assert!((b - b2).abs() < 1e-12 * b.abs().max(1.0), "{b} vs {b2}");
            }
            let tr: f64 = (0..m).map(|i| dense(s, s)[(i, i)]).sum();
            assert!((tr - w.trace(s)).abs() < 1e-12 * tr.abs().max(1.0));
        }
    }
}
