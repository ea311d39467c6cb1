//! Property tests of invariances and identities of the fit.
//!
//! Random data sets (k = 3 to 30 studies, sampling variances 1e-3 to 1, up
//! to two numeric moderators and sometimes a categorical one with 2 or 3
//! levels) go through the library's whole `fit` job ([`crate::util::fit_text`]
//! on CSV text). Designs are kept away from collinearity by construction
//! (every level of a categorical moderator occurs; k ≥ p + 2) and by
//! rejecting the rare draw where a column is nearly explained by the others.
//!
//! Every comparison uses [`IDENTITY_REL`], relative to the value compared or
//! to its natural scale (the typical sampling variance for τ², the standard
//! error for a coefficient, 1 for statistics and log-likelihoods), so values
//! that are 0 or nearly so are compared on a meaningful scale.
//!
//! The reference quantities (weighted least squares, generalised Q, the
//! (restricted) log-likelihood) are written out again here with plain loops,
//! independently of `pondus::model`.
//!
//! Every test runs a fixed number of cases from a fixed seed, so a run is
//! reproducible; proptest also records the seeds of failures in
//! `tests/proptest-regressions/properties.txt` and replays them first.

use crate::util::{close, fit_text, settings};
use pondus::dist::{chi2_quantile, Tail};
use pondus::effect::Measure;
use pondus::model::tau2::{Ending, Tau2Method};
use pondus::model::Inference;
use pondus::result::FitReport;
use pondus::tolerance::IDENTITY_REL;
use proptest::collection::vec;
use proptest::prelude::*;
use proptest::test_runner::{RngSeed, TestRunner};
use std::collections::HashMap;
use std::f64::consts::PI;

/// Every estimator of τ² that estimates something.
const ESTIMATORS: [Tau2Method; 6] = [
    Tau2Method::Reml,
    Tau2Method::Ml,
    Tau2Method::Dl,
    Tau2Method::Pm,
    Tau2Method::He,
    Tau2Method::Sj,
];

/// The seed of every test's random number generator.
const SEED: u64 = 0x706f_6e64_7573;

/// Names of the numeric moderators, then of the categorical one, in the CSV.
const NUMERIC_NAMES: [&str; 2] = ["x1", "x2"];
const CATEGORICAL_NAME: &str = "g";
const LEVELS: [&str; 3] = ["a", "b", "c"];

/// A generated design is rejected when a moderator column keeps less than
/// this share of its centred squared norm after projecting out the columns
/// before it (a variance inflation factor above 20): a data-generation
/// choice that keeps the test designs clearly of full rank, not a tolerance.
const MIN_UNEXPLAINED_SHARE: f64 = 0.05;

/// Standardised residuals are compared only for studies whose leverage
/// h_i is at most this: their variance (1 − h_i)/w_i is a difference that
/// loses about log10(1/(1 − h_i)) digits, whatever the implementation (a
/// categorical level with one study has h_i = 1).
const MAX_LEVERAGE: f64 = 0.5;

/// Points of the likelihood grid of the reference maximiser.
const GRID_POINTS: usize = 10_000;

/// Data sets of each grid-search test (each costs two searches).
const GRID_CASES: u32 = 20;

fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        rng_seed: RngSeed::Fixed(SEED),
        ..ProptestConfig::default()
    }
}

// ---------------------------------------------------------------------------
// Data sets
// ---------------------------------------------------------------------------

/// One generated meta-analysis.
#[derive(Debug, Clone)]
struct Dataset {
    y: Vec<f64>,
    v: Vec<f64>,
    /// Numeric moderators, each with one value per study.
    x: Vec<Vec<f64>>,
    /// Categorical moderator: level index per study, and the number of levels.
    g: Option<(Vec<usize>, usize)>,
}

impl Dataset {
    fn k(&self) -> usize {
        self.y.len()
    }

    /// Coefficients: intercept, numeric moderators, dummies of levels 2, 3.
    fn p(&self) -> usize {
        1 + self.x.len() + self.g.as_ref().map_or(0, |(_, l)| l - 1)
    }

    fn moderator_names(&self) -> Vec<&'static str> {
        let mut names: Vec<&str> = NUMERIC_NAMES[..self.x.len()].to_vec();
        if self.g.is_some() {
            names.push(CATEGORICAL_NAME);
        }
        names
    }

    /// The design matrix as the model sees it (reference level "a").
    fn design(&self) -> Design {
        let p = self.p();
        assert!(p <= MAX_P);
        let rows = (0..self.k())
            .map(|i| {
                let mut r = [0.0; MAX_P];
                r[0] = 1.0;
                for (j, x) in self.x.iter().enumerate() {
                    r[1 + j] = x[i];
                }
                if let Some((g, levels)) = &self.g {
                    for l in 1..*levels {
                        r[self.x.len() + l] = if g[i] == l { 1.0 } else { 0.0 };
                    }
                }
                r
            })
            .collect();
        Design { rows, p }
    }

    /// The data as CSV; `{}` prints the shortest text that reads back as the same f64.
    fn csv(&self) -> String {
        let mut s = String::from("study,effect,variance");
        for n in self.moderator_names() {
            s.push(',');
            s.push_str(n);
        }
        s.push('\n');
        for i in 0..self.k() {
            s.push_str(&format!("s{i},{},{}", self.y[i], self.v[i]));
            for x in &self.x {
                s.push_str(&format!(",{}", x[i]));
            }
            if let Some((g, _)) = &self.g {
                s.push(',');
                s.push_str(LEVELS[g[i]]);
            }
            s.push('\n');
        }
        s
    }

    fn fit(&self, method: Tau2Method, inference: Inference) -> FitReport {
        let s = settings(Measure::Effect, &self.moderator_names(), method, inference);
        fit_text(&s, &self.csv())
    }

    /// Rows reordered: row i of the result is row `order[i]` of `self`. (Its
    /// CSV labels the rows s0, s1, ... again in the new order.)
    fn permuted(&self, order: &[usize]) -> Dataset {
        let pick = |a: &[f64]| order.iter().map(|&i| a[i]).collect::<Vec<_>>();
        Dataset {
            y: pick(&self.y),
            v: pick(&self.v),
            x: self.x.iter().map(|x| pick(x)).collect(),
            g: self
                .g
                .as_ref()
                .map(|(g, l)| (order.iter().map(|&i| g[i]).collect(), *l)),
        }
    }

    /// Whether every moderator column keeps at least [`MIN_UNEXPLAINED_SHARE`]
    /// of its centred squared norm after projecting out the earlier columns
    /// (modified Gram–Schmidt).
    fn well_conditioned(&self) -> bool {
        let Design { rows, p } = self.design();
        let k = self.k();
        let mut basis: Vec<Vec<f64>> = Vec::with_capacity(p);
        for j in 0..p {
            let mut col: Vec<f64> = rows.iter().map(|r| r[j]).collect();
            let mut centred_norm = None;
            for b in &basis {
                let dot: f64 = col.iter().zip(b).map(|(c, b)| c * b).sum();
                for (c, b) in col.iter_mut().zip(b) {
                    *c -= dot * b;
                }
                if centred_norm.is_none() {
                    // The first basis vector is the normalised intercept.
                    centred_norm = Some(col.iter().map(|c| c * c).sum::<f64>());
                }
            }
            let norm: f64 = col.iter().map(|c| c * c).sum();
            if let Some(n0) = centred_norm {
                if !(n0 > 0.0 && norm >= MIN_UNEXPLAINED_SHARE * n0) {
                    return false;
                }
            }
            let n = norm.sqrt();
            basis.push(col.into_iter().map(|c| c / n).collect());
        }
        k > p
    }
}

/// Log-uniform values in [10^lo, 10^hi].
fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo..=hi).prop_map(|e| 10f64.powf(e))
}

/// What a generated data set may contain.
#[derive(Debug, Clone, Copy)]
struct Shape {
    /// Numeric moderators, at least and at most.
    numeric: (usize, usize),
    /// Whether a categorical moderator may be added.
    categorical: bool,
    /// No heterogeneity and little sampling noise: the likelihood maximum is
    /// often (not always) at τ² = 0.
    boundary: bool,
}

const ANY: Shape = Shape {
    numeric: (0, 2),
    categorical: true,
    boundary: false,
};

/// Random data sets of the given shape: y = Xβ + u + e with u ~ τ²·U and
/// e ~ v·U (U uniform of unit variance), τ² either 0 or log-uniform in
/// [1e-3, 1]. Numeric moderators are offset + scale·uniform, with offsets
/// in [−5, 5] and scales from 0.1 to 100; the effects are kept in a
/// reasonable range by applying β to the moderators on the unit scale.
fn dataset(shape: Shape) -> impl Strategy<Value = Dataset> {
    (
        3usize..=30,
        shape.numeric.0..=shape.numeric.1,
        if shape.categorical {
            prop::bool::weighted(0.4).boxed()
        } else {
            Just(false).boxed()
        },
        2usize..=3,
    )
        .prop_flat_map(move |(k0, nx, cat, levels)| {
            let p = 1 + nx + if cat { levels - 1 } else { 0 };
            let k = k0.max(p + 2);
            let tau2 = if shape.boundary {
                Just(0.0).boxed()
            } else {
                prop_oneof![Just(0.0), log_uniform(-3.0, 0.0)].boxed()
            };
            (
                vec(log_uniform(-3.0, 0.0), k),
                vec(
                    (-5.0f64..5.0, log_uniform(-1.0, 2.0), vec(0.0f64..1.0, k)),
                    nx,
                ),
                vec(0..levels, k),
                vec(-1.0f64..1.0, p),
                tau2,
                vec(-1.0f64..1.0, k),
                vec(-1.0f64..1.0, k),
                Just((cat, levels)),
            )
        })
        .prop_map(move |(v, xs, g, beta, tau2, z1, z2, (cat, levels))| {
            let k = v.len();
            let x: Vec<Vec<f64>> = xs
                .iter()
                .map(|(offset, scale, u)| u.iter().map(|u| offset + scale * u).collect())
                .collect();
            let g = cat.then(|| {
                let mut g = g;
                // Every level occurs.
                for (l, gi) in g.iter_mut().enumerate().take(levels) {
                    *gi = l;
                }
                (g, levels)
            });
            let unit = 3f64.sqrt();
            let noise = if shape.boundary {
                // Σ e²/v ≤ 0.81 < 1.
                0.9 / (k as f64).sqrt()
            } else {
                unit
            };
            let y = (0..k)
                .map(|i| {
                    let mut m = beta[0];
                    for (j, (_, _, u)) in xs.iter().enumerate() {
                        m += beta[1 + j] * u[i];
                    }
                    if let Some((g, _)) = &g {
                        if g[i] > 0 {
                            m += beta[xs.len() + g[i]];
                        }
                    }
                    m + tau2.sqrt() * unit * z1[i] + v[i].sqrt() * noise * z2[i]
                })
                .collect();
            Dataset { y, v, x, g }
        })
        .prop_filter("nearly collinear design", Dataset::well_conditioned)
}

/// A data set with a random reordering of its rows.
fn dataset_and_order(shape: Shape) -> impl Strategy<Value = (Dataset, Vec<usize>)> {
    dataset(shape).prop_flat_map(|d| {
        let order: Vec<usize> = (0..d.k()).collect();
        (Just(d), Just(order).prop_shuffle())
    })
}

// ---------------------------------------------------------------------------
// Independent reference computations
// ---------------------------------------------------------------------------

/// Weighted least squares at one τ², from first principles.
struct Gls {
    /// β̂ (the first p entries).
    beta: [f64; MAX_P],
    /// Generalised Q = Σ w_i (y_i − x_i'β̂)², w_i = 1/(v_i + τ²).
    q: f64,
    /// Σ ln(v_i + τ²).
    sum_log_vt: f64,
    /// ln det X'WX.
    logdet_m: f64,
    /// Cholesky factor of X'WX.
    l: [[f64; MAX_P]; MAX_P],
}

/// Most coefficients of a generated design: intercept, two numeric
/// moderators, two dummies.
const MAX_P: usize = 5;

/// A design matrix: k rows of fixed-size arrays (the grid search evaluates
/// the likelihood often, and plain arrays keep that quick in debug builds),
/// of which the first p columns are used.
struct Design {
    rows: Vec<[f64; MAX_P]>,
    p: usize,
}

/// Lower Cholesky factor of the leading p × p block of a symmetric positive
/// definite matrix (fixed-size arrays: the grid search calls this a lot).
fn cholesky(m: &[[f64; MAX_P]; MAX_P], p: usize) -> [[f64; MAX_P]; MAX_P] {
    // Only the lower triangle of m is read.
    let mut l = [[0.0; MAX_P]; MAX_P];
    for i in 0..p {
        for j in 0..=i {
            let s = m[i][j] - (0..j).map(|c| l[i][c] * l[j][c]).sum::<f64>();
            if i == j {
                assert!(s > 0.0, "X'WX is not positive definite");
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    l
}

fn gls(y: &[f64], v: &[f64], x: &Design, tau2: f64) -> Gls {
    let Design { rows, p } = x;
    let p = *p;
    let mut m = [[0.0; MAX_P]; MAX_P];
    let mut b = [0.0; MAX_P];
    let mut sum_log_vt = 0.0;
    for i in 0..y.len() {
        let (yi, xi) = (y[i], &rows[i]);
        let vt = v[i] + tau2;
        let w = 1.0 / vt;
        sum_log_vt += vt.ln();
        for a in 0..p {
            let wxa = w * xi[a];
            b[a] += wxa * yi;
            for c in 0..=a {
                m[a][c] += wxa * xi[c];
            }
        }
    }
    let l = cholesky(&m, p);
    let logdet_m = 2.0 * (0..p).map(|a| l[a][a].ln()).sum::<f64>();
    let beta = cholesky_solve(&l, p, b);
    let mut q = 0.0;
    for i in 0..y.len() {
        let xi = &rows[i];
        let mut r = y[i];
        for a in 0..p {
            r -= xi[a] * beta[a];
        }
        q += r * r / (v[i] + tau2);
    }
    Gls {
        beta,
        q,
        sum_log_vt,
        logdet_m,
        l,
    }
}

/// Solves L L' β = b.
fn cholesky_solve(l: &[[f64; MAX_P]; MAX_P], p: usize, b: [f64; MAX_P]) -> [f64; MAX_P] {
    let mut z = [0.0; MAX_P];
    for a in 0..p {
        let mut s = b[a];
        for c in 0..a {
            s -= l[a][c] * z[c];
        }
        z[a] = s / l[a][a];
    }
    let mut beta = [0.0; MAX_P];
    for a in (0..p).rev() {
        let mut s = z[a];
        for c in a + 1..p {
            s -= l[c][a] * beta[c];
        }
        beta[a] = s / l[a][a];
    }
    beta
}

impl Gls {
    /// Leverage w_i x_i'(X'WX)⁻¹x_i of a study with weight w and design row xi.
    fn leverage(&self, w: f64, xi: &[f64; MAX_P], p: usize) -> f64 {
        let a = cholesky_solve(&self.l, p, *xi);
        w * (0..p).map(|j| xi[j] * a[j]).sum::<f64>()
    }

    /// Model-based variance of β̂_j: the j-th diagonal entry of (X'WX)⁻¹.
    fn variance(&self, j: usize, p: usize) -> f64 {
        let mut e = [0.0; MAX_P];
        e[j] = 1.0;
        cholesky_solve(&self.l, p, e)[j]
    }
}

/// Residual sum of squares of the ordinary least-squares fit.
fn ols_rss(y: &[f64], x: &Design) -> f64 {
    gls(y, &vec![1.0; y.len()], x, 0.0).q
}

/// Log-likelihood of the model at τ², with every constant:
/// ML   ℓ  = −½[k ln 2π + Σ ln(v_i + τ²) + Q(τ²)],
/// REML ℓ_R = −½[(k − p) ln 2π + Σ ln(v_i + τ²) + ln det X'WX + Q(τ²)].
fn log_lik(d: &Dataset, x: &Design, tau2: f64, restricted: bool) -> f64 {
    let f = gls(&d.y, &d.v, x, tau2);
    let (k, p) = (d.k() as f64, x.p as f64);
    let two_pi = (2.0 * PI).ln();
    if restricted {
        -0.5 * ((k - p) * two_pi + f.sum_log_vt + f.logdet_m + f.q)
    } else {
        -0.5 * (k * two_pi + f.sum_log_vt + f.q)
    }
}

/// The maximiser of `f` on [0, u]: the best of a uniform grid of
/// [`GRID_POINTS`] cells, refined by golden-section search on the cells
/// either side of it (ends included as candidates).
fn grid_argmax(f: impl Fn(f64) -> f64, u: f64) -> (f64, f64) {
    let h = u / GRID_POINTS as f64;
    let (mut best_j, mut best) = (0, f(0.0));
    for j in 1..=GRID_POINTS {
        let l = f(h * j as f64);
        if l > best {
            best = l;
            best_j = j;
        }
    }
    let mut a = h * best_j.saturating_sub(1) as f64;
    let mut b = (h * (best_j + 1) as f64).min(u);
    let mut candidates = vec![(a, f(a)), (b, f(b)), (h * best_j as f64, best)];
    let r = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - r * (b - a);
    let mut e = a + r * (b - a);
    let (mut fc, mut fe) = (f(c), f(e));
    for _ in 0..200 {
        if fc > fe {
            b = e;
            e = c;
            fe = fc;
            c = b - r * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = e;
            fc = fe;
            e = a + r * (b - a);
            fe = f(e);
        }
        if b - a <= f64::EPSILON * b {
            break;
        }
    }
    candidates.push((c, fc));
    candidates.push((e, fe));
    candidates
        .into_iter()
        .max_by(|x, y| x.1.total_cmp(&y.1))
        .expect("candidates")
}

// ---------------------------------------------------------------------------
// Comparisons
// ---------------------------------------------------------------------------

/// |got − want| ≤ IDENTITY_REL·(|want| + scale).
#[track_caller]
fn near(what: &str, got: f64, want: f64, scale: f64) {
    close(what, got, want, IDENTITY_REL, IDENTITY_REL * scale);
}

/// How a fit is expected to change under a transformation of the data.
struct Change {
    /// Factor of τ² and its interval.
    tau2: f64,
    /// Factor of each coefficient (None: not compared); SEs change by its
    /// absolute value, statistics by its sign.
    coef: Vec<Option<f64>>,
    /// Factor of fitted values, residuals and the average effect.
    effect: f64,
    /// Added to the log-likelihood: (REML, ML).
    ll_shift: (f64, f64),
    /// Whether standardised residuals are compared (see the shift test).
    std_residuals: bool,
}

impl Change {
    fn none(p: usize) -> Change {
        Change {
            tau2: 1.0,
            coef: vec![Some(1.0); p],
            effect: 1.0,
            ll_shift: (0.0, 0.0),
            std_residuals: true,
        }
    }
}

/// Checks that fit `b` is fit `a` (of data set `d`) changed as `ch` says.
/// Studies are matched by label.
fn assert_changed(what: &str, d: &Dataset, a: &FitReport, b: &FitReport, ch: &Change) {
    let vt = b.heterogeneity.typical_variance;
    let m = &b.model.tau2_method;
    let w = |s: &str| format!("{what} [{m}] {s}");
    assert_eq!(a.k, b.k, "{}", w("k"));
    near(&w("tau2"), b.tau2.estimate, ch.tau2 * a.tau2.estimate, vt);
    for (lo, hi) in [
        (a.tau2.ci.ci_low, b.tau2.ci.ci_low),
        (a.tau2.ci.ci_high, b.tau2.ci.ci_high),
    ] {
        match (lo, hi) {
            (Some(x), Some(y)) => near(&w("tau2 CI"), y, ch.tau2 * x, vt),
            (None, None) => {}
            _ => panic!("{}", w("tau2 CI present in one fit only")),
        }
    }
    assert_eq!(a.coefficients.len(), b.coefficients.len());
    for ((ca, cb), f) in a.coefficients.iter().zip(&b.coefficients).zip(&ch.coef) {
        assert_eq!(ca.term, cb.term, "{}", w("term"));
        let Some(f) = *f else { continue };
        let t = &ca.term;
        near(
            &w(&format!("{t} estimate")),
            cb.contrast.estimate,
            f * ca.contrast.estimate,
            cb.contrast.se,
        );
        near(
            &w(&format!("{t} se")),
            cb.contrast.se,
            f.abs() * ca.contrast.se,
            0.0,
        );
        let (lo, hi) = if f > 0.0 {
            (ca.contrast.ci.ci_low, ca.contrast.ci.ci_high)
        } else {
            (ca.contrast.ci.ci_high, ca.contrast.ci.ci_low)
        };
        near(
            &w(&format!("{t} ci_low")),
            cb.contrast.ci.ci_low,
            f * lo,
            cb.contrast.se,
        );
        near(
            &w(&format!("{t} ci_high")),
            cb.contrast.ci.ci_high,
            f * hi,
            cb.contrast.se,
        );
        near(
            &w(&format!("{t} statistic")),
            cb.contrast.test.statistic,
            f.signum() * ca.contrast.test.statistic,
            1.0,
        );
        near(
            &w(&format!("{t} p")),
            cb.contrast.test.p,
            ca.contrast.test.p,
            0.0,
        );
    }
    match (&a.moderator_test, &b.moderator_test) {
        (Some(ta), Some(tb)) => {
            near(&w("moderator test"), tb.statistic, ta.statistic, 1.0);
            near(&w("moderator test p"), tb.p, ta.p, 0.0);
        }
        (None, None) => {}
        _ => panic!("{}", w("moderator test present in one fit only")),
    }
    let (ha, hb) = (&a.heterogeneity, &b.heterogeneity);
    near(&w("Q"), hb.q, ha.q, 1.0);
    near(&w("Q p"), hb.p, ha.p, 0.0);
    near(&w("I2"), hb.i2, ha.i2, 1.0);
    near(&w("H2"), hb.h2, ha.h2, 1.0);
    near(
        &w("typical variance"),
        vt,
        ch.tau2 * ha.typical_variance,
        0.0,
    );
    near(
        &w("tau2 without moderators"),
        hb.tau2_without_moderators,
        ch.tau2 * ha.tau2_without_moderators,
        vt,
    );
    match (ha.r2, hb.r2) {
        (Some(x), Some(y)) => near(&w("R2"), y, x, 1.0),
        (None, None) => {}
        // τ²₀ at (or within rounding of) 0 in one fit only.
        (x, y) => assert!(
            ha.tau2_without_moderators <= IDENTITY_REL * ha.typical_variance
                && hb.tau2_without_moderators <= IDENTITY_REL * vt,
            "{}: R² {x:?} vs {y:?}",
            w("R2")
        ),
    }
    match (a.model.kh_scale, b.model.kh_scale) {
        (Some(x), Some(y)) => near(&w("KH scale"), y, x, 0.0),
        (None, None) => {}
        _ => panic!("{}", w("KH scale present in one fit only")),
    }
    match (a.model.log_likelihood, b.model.log_likelihood) {
        (Some(x), Some(y)) => {
            let shift = match m.id() {
                "reml" => ch.ll_shift.0,
                "ml" => ch.ll_shift.1,
                other => panic!("{}: a log-likelihood for {other}", w("log-likelihood")),
            };
            near(&w("log-likelihood"), y, x + shift, 1.0);
        }
        (None, None) => {}
        _ => panic!("{}", w("log-likelihood present in one fit only")),
    }
    let (ea, eb, e) = (&a.average, &b.average, ch.effect);
    near(
        &w("average"),
        eb.mean.estimate,
        e * ea.mean.estimate,
        eb.mean.se,
    );
    near(&w("average se"), eb.mean.se, e * ea.mean.se, 0.0);
    near(
        &w("average ci_low"),
        eb.mean.ci.ci_low,
        e * ea.mean.ci.ci_low,
        eb.mean.se,
    );
    near(
        &w("average ci_high"),
        eb.mean.ci.ci_high,
        e * ea.mean.ci.ci_high,
        eb.mean.se,
    );
    near(
        &w("average pi_low"),
        eb.mean.pi.pi_low,
        e * ea.mean.pi.pi_low,
        eb.mean.se,
    );
    near(
        &w("average pi_high"),
        eb.mean.pi.pi_high,
        e * ea.mean.pi.pi_high,
        eb.mean.se,
    );
    let a_studies: Vec<_> = a.studies.iter().collect();
    let by_label: HashMap<&str, _> = a_studies.iter().map(|s| (s.study.as_str(), s)).collect();
    let x = d.design();
    let t = a.tau2.estimate;
    let f = gls(&d.y, &d.v, &x, t);
    let leverage: HashMap<String, f64> = (0..d.k())
        .map(|i| {
            (
                format!("s{i}"),
                f.leverage(1.0 / (d.v[i] + t), &x.rows[i], x.p),
            )
        })
        .collect();
    for sb in b.studies.iter() {
        let sa = by_label[sb.study.as_str()];
        let sd = sb.variance.sqrt();
        let l = &sb.study;
        near(&w(&format!("{l} weight")), sb.weight, sa.weight, 0.0);
        near(&w(&format!("{l} fitted")), sb.fitted, e * sa.fitted, sd);
        near(
            &w(&format!("{l} residual")),
            sb.residual,
            e * sa.residual,
            sd,
        );
        // r_i/√((1 − h_i)/w_i), with 1 − h_i computed as a difference, carries
        // a relative error of about ε/(1 − h_i): compared only where h_i ≤ MAX_LEVERAGE.
        if !ch.std_residuals || leverage[l.as_str()] > MAX_LEVERAGE {
            continue;
        }
        match (sa.std_residual, sb.std_residual) {
            (Some(x), Some(y)) => near(&w(&format!("{l} std residual")), y, x, 1.0),
            (None, None) => {}
            _ => panic!("{}", w("standardised residual defined in one fit only")),
        }
    }
}

// ---------------------------------------------------------------------------
// Properties
// ---------------------------------------------------------------------------

proptest! {
    #![proptest_config(config(32))]

    /// 1. The order of the studies does not matter.
    #[test]
    fn study_order_does_not_change_results((d, order) in dataset_and_order(ANY)) {
        let shuffled = d.permuted(&order);
        // Labels follow their rows: relabel so that the same study has the same label.
        let relabel = |r: FitReport| {
            let mut r = r;
            r.studies = r
                .studies
                .iter()
                .zip(&order)
                .map(|(mut s, &i)| {
                    s.study = format!("s{i}");
                    s
                })
                .collect();
            r
        };
        for m in ESTIMATORS {
            for inf in [Inference::Kh, Inference::Z] {
                let a = d.fit(m, inf);
                let b = relabel(shuffled.fit(m, inf));
                assert_changed("permuted", &d, &a, &b, &Change::none(d.p()));
            }
        }
    }

    /// 2a. Rescaling a numeric moderator by c ≠ 0 rescales its coefficient by 1/c.
    #[test]
    fn rescaling_a_moderator_rescales_its_coefficient(
        d in dataset(Shape { numeric: (1, 2), ..ANY }),
        which in 0usize..2,
        c in log_uniform(-3.0, 3.0),
        negative in any::<bool>(),
    ) {
        let j = which.min(d.x.len() - 1);
        let c = if negative { -c } else { c };
        let mut e = d.clone();
        e.x[j] = d.x[j].iter().map(|x| c * x).collect();
        let mut coef = vec![Some(1.0); d.p()];
        coef[1 + j] = Some(1.0 / c);
        // Only ln det X'WX in the restricted likelihood sees the scale of X:
        // it gains 2 ln|c|.
        let ch = Change {
            coef,
            ll_shift: (-c.abs().ln(), 0.0),
            ..Change::none(d.p())
        };
        for m in ESTIMATORS {
            let a = d.fit(m, Inference::Kh);
            let b = e.fit(m, Inference::Kh);
            assert_changed(&format!("x{} × {c}", j + 1), &d, &a, &b, &ch);
        }
    }

    /// 2b. Shifting a numeric moderator changes only the intercept: β₀ − β_j·shift.
    #[test]
    fn shifting_a_moderator_changes_only_the_intercept(
        d in dataset(Shape { numeric: (1, 2), ..ANY }),
        which in 0usize..2,
        shift in -100.0f64..100.0,
    ) {
        let j = which.min(d.x.len() - 1);
        let mut e = d.clone();
        e.x[j] = d.x[j].iter().map(|x| x + shift).collect();
        let mut coef = vec![Some(1.0); d.p()];
        coef[0] = None;
        // Standardised residuals are left out: pondus computes their variance
        // 1/w_i − x_i'Cov x_i on the unstandardised design, which loses up
        // to ~6 digits when a shifted moderator's offset dwarfs its spread
        // and a study has high leverage (reported, not a formula error).
        let ch = Change {
            coef,
            std_residuals: false,
            ..Change::none(d.p())
        };
        for m in ESTIMATORS {
            let a = d.fit(m, Inference::Kh);
            let b = e.fit(m, Inference::Kh);
            assert_changed(&format!("x{} + {shift}", j + 1), &d, &a, &b, &ch);
            let (b0, bj) = (a.coefficients[0].contrast.estimate, a.coefficients[1 + j].contrast.estimate);
            let want = b0 - bj * shift;
            let scale = b0.abs() + (bj * shift).abs() + b.coefficients[0].contrast.se;
            near("shifted intercept", b.coefficients[0].contrast.estimate, want, scale);
        }
    }

    /// 3 and 4. Ranges of τ², its interval, I², H², R², p-values; weights sum to 100.
    #[test]
    fn estimates_lie_in_their_ranges(d in dataset(ANY)) {
        let mut ci = None;
        for m in ESTIMATORS.into_iter().chain([Tau2Method::None]) {
            let r = d.fit(m, Inference::Kh);
            let id = m.id();
            let t = r.tau2.estimate;
            prop_assert!(t >= 0.0 && t.is_finite(), "{id}: τ² = {t}");
            match (r.tau2.ci.ci_low, r.tau2.ci.ci_high) {
                (Some(lo), Some(hi)) => {
                    prop_assert!(0.0 <= lo && lo <= hi && hi.is_finite(), "{id}: CI [{lo}, {hi}]");
                    // The Q-profile interval does not depend on the estimator.
                    match ci {
                        None => ci = Some((lo, hi)),
                        Some((l0, h0)) => {
                            near(&format!("{id} CI low"), lo, l0, r.heterogeneity.typical_variance);
                            near(&format!("{id} CI high"), hi, h0, r.heterogeneity.typical_variance);
                        }
                    }
                    // Paule–Mandel solves Q(τ²) = k − p, which lies between the two targets.
                    if m == Tau2Method::Pm {
                        let s = IDENTITY_REL * r.heterogeneity.typical_variance;
                        prop_assert!(lo - s <= t && t <= hi + s, "PM τ² {t} outside [{lo}, {hi}]");
                    }
                }
                (None, None) => prop_assert_eq!(m, Tau2Method::None),
                other => prop_assert!(false, "{id}: half a CI {other:?}"),
            }
            if m == Tau2Method::None {
                prop_assert_eq!(t, 0.0);
                prop_assert_eq!(r.tau2.ending, Ending::Fixed);
            }
            let h = &r.heterogeneity;
            prop_assert!((0.0..=1.0).contains(&h.i2), "{id}: I² = {}", h.i2);
            prop_assert!(h.h2 >= 1.0, "{id}: H² = {}", h.h2);
            near(&format!("{id} H2"), h.h2, 1.0 / (1.0 - h.i2), 1.0);
            prop_assert!(h.q >= 0.0 && (0.0..=1.0).contains(&h.p), "{id}: Q {} p {}", h.q, h.p);
            prop_assert!(h.typical_variance > 0.0);
            if let Some(r2) = h.r2 {
                prop_assert!((0.0..=1.0).contains(&r2), "{id}: R² = {r2}");
            }
            prop_assert_eq!(h.r2.is_some(), d.p() > 1 && h.tau2_without_moderators > 0.0);
            for c in &r.coefficients {
                prop_assert!((0.0..=1.0).contains(&c.contrast.test.p), "{id} {}: p = {}", c.term, c.contrast.test.p);
                prop_assert!(c.contrast.se > 0.0 && c.contrast.ci.ci_low <= c.contrast.estimate && c.contrast.estimate <= c.contrast.ci.ci_high);
            }
            if let Some(mt) = &r.moderator_test {
                prop_assert!(mt.statistic >= 0.0 && (0.0..=1.0).contains(&mt.p));
            }
            prop_assert!(r.studies.iter().all(|s| s.weight > 0.0));
            let total: f64 = r.studies.iter().map(|s| s.weight).sum();
            near(&format!("{id} total weight"), total, 100.0, 0.0);
        }
    }

    /// 5. With equal sampling variances, REML τ² = max(0, RSS/(k − p) − v) and
    /// ML τ² = max(0, RSS/k − v), RSS from ordinary least squares.
    #[test]
    fn equal_variances_have_closed_form_likelihood_estimates(
        d in dataset(Shape { numeric: (0, 1), categorical: false, boundary: false }),
        v in log_uniform(-3.0, 0.0),
    ) {
        let mut d = d;
        d.v = vec![v; d.k()];
        let x = d.design();
        let rss = ols_rss(&d.y, &x);
        let (k, p) = (d.k() as f64, d.p() as f64);
        for (m, want) in [
            (Tau2Method::Reml, (rss / (k - p) - v).max(0.0)),
            (Tau2Method::Ml, (rss / k - v).max(0.0)),
        ] {
            let r = d.fit(m, Inference::Kh);
            near(&format!("{} τ² with equal v (p = {p})", m.id()), r.tau2.estimate, want, v);
            if want == 0.0 {
                prop_assert_eq!(r.tau2.estimate, 0.0);
            }
        }
    }

    /// 7a. Paule–Mandel: Q(τ̂²) = k − p, or τ̂² = 0 and Q(0) ≤ k − p.
    /// 7b. Q-profile: Q at each bound is its chi-square point, or the bound is 0
    /// and Q(0) is at most that point.
    #[test]
    fn paule_mandel_and_q_profile_solve_their_equations(d in dataset(ANY)) {
        let x = d.design();
        let df = (d.k() - d.p()) as f64;
        let r = d.fit(Tau2Method::Pm, Inference::Kh);
        let q0 = gls(&d.y, &d.v, &x, 0.0).q;
        near("Q(0) = Q_E", r.heterogeneity.q, q0, 1.0);
        let check = |what: &str, t: f64, target: f64| {
            if t == 0.0 {
                assert!(q0 <= target * (1.0 + IDENTITY_REL), "{what}: 0 but Q(0) = {q0} > {target}");
            } else {
                near(what, gls(&d.y, &d.v, &x, t).q, target, 0.0);
            }
        };
        check("Paule–Mandel Q(τ̂²)", r.tau2.estimate, df);
        let alpha = 1.0 - 0.95;
        let (lo, hi) = (r.tau2.ci.ci_low.unwrap(), r.tau2.ci.ci_high.unwrap());
        check("Q at the lower bound", lo, chi2_quantile(alpha / 2.0, df, Tail::Upper));
        check("Q at the upper bound", hi, chi2_quantile(alpha / 2.0, df, Tail::Lower));
    }

    /// 8. Knapp–Hartung: SE = z-SE·√s², s² = Q(τ̂²)/(k − p); t = z/√s²; F = X²/(m·s²).
    /// Also the coefficients, z SEs, weights, fitted values and standardised
    /// residuals at τ̂² against the independent weighted least-squares fit.
    #[test]
    fn knapp_hartung_scales_the_z_standard_errors(d in dataset(ANY)) {
        let x = d.design();
        let df = (d.k() - d.p()) as f64;
        for m in ESTIMATORS {
            let z = d.fit(m, Inference::Z);
            let kh = d.fit(m, Inference::Kh);
            prop_assert_eq!(z.tau2.estimate, kh.tau2.estimate);
            prop_assert!(z.model.kh_scale.is_none());
            let f = gls(&d.y, &d.v, &x, z.tau2.estimate);
            let s2 = f.q / df;
            near(&format!("{} KH scale", m.id()), kh.model.kh_scale.unwrap(), s2, 0.0);
            for (j, (cz, ck)) in z.coefficients.iter().zip(&kh.coefficients).enumerate() {
                let what = format!("{} {}", m.id(), cz.term);
                prop_assert_eq!(cz.contrast.estimate, ck.contrast.estimate);
                near(&format!("{what} estimate"), cz.contrast.estimate, f.beta[j], cz.contrast.se);
                near(&format!("{what} z se"), cz.contrast.se, f.variance(j, x.p).sqrt(), 0.0);
                near(&format!("{what} KH se"), ck.contrast.se, cz.contrast.se * s2.sqrt(), 0.0);
                near(&format!("{what} t"), ck.contrast.test.statistic, cz.contrast.test.statistic / s2.sqrt(), 1.0);
                prop_assert_eq!(ck.contrast.test.df, Some(df));
                prop_assert_eq!(cz.contrast.test.df, None);
            }
            if let (Some(tz), Some(tk)) = (&z.moderator_test, &kh.moderator_test) {
                near(&format!("{} F", m.id()), tk.statistic, tz.statistic / (tz.df1 * s2), 1.0);
                prop_assert_eq!(tk.df2, Some(df));
            }
            // Per-study values against the same independent fit.
            let t = z.tau2.estimate;
            let sum_w: f64 = d.v.iter().map(|v| 1.0 / (v + t)).sum();
            for (i, s) in z.studies.iter().enumerate() {
                let what = format!("{} {}", m.id(), s.study);
                let w = 1.0 / (d.v[i] + t);
                let xi = &x.rows[i];
                let fit: f64 = (0..x.p).map(|j| xi[j] * f.beta[j]).sum();
                near(&format!("{what} weight"), s.weight, 100.0 * w / sum_w, 0.0);
                near(&format!("{what} fitted"), s.fitted, fit, d.v[i].sqrt());
                let h = f.leverage(w, xi, x.p);
                if h <= MAX_LEVERAGE {
                    let want = (d.y[i] - fit) / ((1.0 - h) / w).sqrt();
                    let got = s.std_residual.expect("standardised residual");
                    near(&format!("{what} std residual"), got, want, 1.0);
                }
            }
        }
    }

    /// 9. Effects × c and variances × c² (c > 0): τ² × c², coefficients × c,
    /// statistics and p-values unchanged.
    #[test]
    fn rescaling_the_effects_rescales_the_fit(
        d in dataset(ANY),
        c in log_uniform(-2.0, 2.0),
    ) {
        let mut e = d.clone();
        e.y = d.y.iter().map(|y| c * y).collect();
        e.v = d.v.iter().map(|v| c * c * v).collect();
        let (k, p) = (d.k() as f64, d.p() as f64);
        // Σ ln(v_i + τ²) gains 2k ln c, ln det X'WX loses 2p ln c, Q is unchanged.
        let ch = Change {
            tau2: c * c,
            coef: vec![Some(c); d.p()],
            effect: c,
            ll_shift: (-(k - p) * c.ln(), -k * c.ln()),
            std_residuals: true,
        };
        for m in ESTIMATORS {
            for inf in [Inference::Kh, Inference::Z] {
                let a = d.fit(m, inf);
                let b = e.fit(m, inf);
                assert_changed(&format!("effects × {c}"), &d, &a, &b, &ch);
            }
        }
    }
}

/// Property 6: REML and ML against a brute-force maximiser of the likelihood written
/// out above: pondus's τ̂² is at least as likely as the grid's best, close to
/// it, and pondus reports that log-likelihood. Returns how many of the two
/// estimates are at τ² = 0.
///
/// The search range [0, U], U = RSS_OLS/(k − p) + max v, holds every
/// maximiser: beyond it the score is negative. (Σw²r² ≤ max w · Q(τ²) ≤
/// RSS_OLS/(min v + τ²)², while tr P ≥ (k − p)/(max v + τ²) and Σw ≥ k/(max v + τ²).)
fn check_against_grid(d: &Dataset) -> u32 {
    let x = d.design();
    let (k, p) = (d.k() as f64, d.p() as f64);
    let vmax = d.v.iter().copied().fold(0.0, f64::max);
    let u = ols_rss(&d.y, &x) / (k - p) + vmax;
    let mut at_zero = 0;
    for m in [Tau2Method::Reml, Tau2Method::Ml] {
        let restricted = m == Tau2Method::Reml;
        let r = d.fit(m, Inference::Kh);
        let ll = |t: f64| log_lik(d, &x, t, restricted);
        let (t_best, ll_best) = grid_argmax(ll, u);
        let t_hat = r.tau2.estimate;
        let ll_hat = ll(t_hat);
        let id = m.id();
        let scale = ll_best.abs().max(1.0);
        assert!(
            ll_hat >= ll_best - IDENTITY_REL * scale,
            "{id}: ℓ(τ̂² = {t_hat:e}) = {ll_hat} below the grid's ℓ({t_best:e}) = {ll_best} \
             (U = {u:e})"
        );
        near(
            &format!("{id} reported log-likelihood"),
            r.model.log_likelihood.expect("log-likelihood"),
            ll_hat,
            1.0,
        );
        // Near a smooth maximum ℓ is flat: a relative precision ε of ℓ
        // fixes the maximiser only to about √ε of its scale.
        let vt = r.heterogeneity.typical_variance;
        let t_tol = IDENTITY_REL.sqrt() * (t_best + vt);
        assert!(
            (t_hat - t_best).abs() <= t_tol,
            "{id}: τ̂² = {t_hat:e}, grid maximiser {t_best:e} (|diff| {:e} > {t_tol:e})",
            (t_hat - t_best).abs()
        );
        let ending = if t_hat == 0.0 {
            at_zero += 1;
            Ending::Boundary
        } else {
            Ending::Converged
        };
        assert_eq!(r.tau2.ending, ending, "{id}: τ̂² = {t_hat:e}");
    }
    at_zero
}

fn run_grid_checks(name: &'static str, shape: Shape, cases: u32) -> u32 {
    let mut config = config(cases);
    config.source_file = Some(file!());
    config.test_name = Some(name);
    let mut runner = TestRunner::new(config);
    let at_zero = std::cell::Cell::new(0);
    runner
        .run(&dataset(shape), |d| {
            at_zero.set(at_zero.get() + check_against_grid(&d));
            Ok(())
        })
        .unwrap_or_else(|e| panic!("{e}"));
    at_zero.get()
}

#[test]
fn likelihood_estimates_match_a_grid_search() {
    run_grid_checks(
        concat!(module_path!(), "::likelihood_estimates_match_a_grid_search"),
        ANY,
        GRID_CASES,
    );
}

#[test]
fn likelihood_estimates_at_the_boundary_match_a_grid_search() {
    let cases = GRID_CASES;
    let at_zero = run_grid_checks(
        concat!(
            module_path!(),
            "::likelihood_estimates_at_the_boundary_match_a_grid_search"
        ),
        Shape {
            boundary: true,
            ..ANY
        },
        cases,
    );
    // The generator is meant to put the maximum at 0 often: make sure it
    // does, for at least half of the 2·cases REML and ML fits.
    assert!(
        at_zero >= cases,
        "only {at_zero} of {} REML and ML estimates were at τ² = 0",
        2 * cases
    );
}

/// Numerical edge cases against the same grid search (issue: hardening):
/// sampling variances spanning 1e-12 to 1e6 in one data set, a τ² far
/// larger than every v, k = 2 and k = 3 with a moderator, near-identical
/// effects. REML and ML must reach the grid's maximum in each.
#[test]
fn edge_cases_match_a_grid_search() {
    let cases = [
        // Variances over 18 orders of magnitude.
        Dataset {
            y: vec![0.1, 0.5, 0.3, 0.2, 0.25, -0.1],
            v: vec![1e-12, 1e6, 1e-2, 1e-6, 1e2, 1e-9],
            x: vec![],
            g: None,
        },
        // The same with a moderator.
        Dataset {
            y: vec![0.1, 0.5, 0.3, 0.2, 0.25, -0.1],
            v: vec![1e-12, 1e6, 1e-2, 1e-6, 1e2, 1e-9],
            x: vec![vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]],
            g: None,
        },
        // τ² (about 60) far above every v (about 1e-4).
        Dataset {
            y: vec![10.0, -10.0, 5.0, -3.0, 1.0],
            v: vec![1e-4, 1e-4, 1e-4, 2e-4, 1.5e-4],
            x: vec![],
            g: None,
        },
        // k = 2.
        Dataset {
            y: vec![0.1, 0.5],
            v: vec![0.01, 0.02],
            x: vec![],
            g: None,
        },
        // k = 3 with a moderator (one residual df).
        Dataset {
            y: vec![0.1, 0.5, 0.2],
            v: vec![0.01, 0.02, 0.015],
            x: vec![vec![1.0, 2.0, 4.0]],
            g: None,
        },
        // Effects equal up to rounding noise: τ̂² = 0 at the boundary.
        Dataset {
            y: vec![0.3, 0.3 + 1e-12, 0.3 - 1e-12, 0.3],
            v: vec![0.01, 0.02, 0.03, 0.04],
            x: vec![],
            g: None,
        },
    ];
    for d in &cases {
        check_against_grid(d);
    }
}
