//! Tests of the one-pass fits: against the two-pass fit of
//! [`super::super::wls::fit_with`], the derivatives against central
//! differences, and the evaluator's bookkeeping.

use super::sums::{fixed_many, general, in_lanes, running, Point, Sums};
use super::*;
use crate::model::wls::{fit_with, passes};

/// Invented data: k studies, an intercept, a calendar year (values near
/// 2000, so X'WX is badly conditioned) and a second moderator; sampling
/// variances from 1e-4 to 10 (a deterministic scramble, no randomness).
fn invented(k: usize) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut y = Vec::with_capacity(k);
    let mut v = Vec::with_capacity(k);
    let mut x = Vec::with_capacity(3 * k);
    for i in 0..k {
        let u = ((i * 7919) % 101) as f64 / 101.0;
        let z = ((i * 104_729) % 89) as f64 / 89.0 - 0.5;
        let year = 1990.0 + (i % 30) as f64;
        v.push(1e-4 * 10f64.powf(5.0 * u));
        x.extend([1.0, year, z]);
        y.push(0.3 + 0.01 * (year - 2000.0) - 0.4 * z + 0.5 * (u - 0.5) + 0.2 * z * z);
    }
    (y, v, x)
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
}

#[test]
fn one_pass_agrees_with_two_passes_on_an_ill_conditioned_design() {
    let (y, v, x) = invented(500);
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
    };
    for (from, to) in [(0.05, 0.06), (0.0, 1e-3), (2.0, 1.5), (0.3, 0.3)] {
        let beta0 = fit_with(&d, from, Want::Q).unwrap().beta;
        let exact = fit_with(&d, to, Want::ALL).unwrap();
        let one = fit_near(&d, to, Want::ALL, &beta0).unwrap();
        assert!(
            rel(one.q, exact.q) < 1e-12,
            "{from}→{to}: Q {} vs {}",
            one.q,
            exact.q
        );
        assert!(
            rel(one.sum_w2r2, exact.sum_w2r2) < 1e-12,
            "{from}→{to}: Σw²r²"
        );
        assert!(rel(one.tr_p, exact.tr_p) < 1e-12, "{from}→{to}: tr P");
        // ln det M is the one quantity here that the conditioning of X'WX
        // reaches (the uncentred year makes M nearly singular): the
        // one-pass kernel adds rows in four lanes, the two-pass one in a
        // single running sum, and the two orders round differently. Exact
        // rational arithmetic (Python's fractions, on these data) gives
        // ln det M = 18.68646530928345 at τ² = 1.5, where the lanes are
        // 4e-11 off and the single sum 1.0e-10; so 2e-10 between them.
        assert!(
            (one.logdet_m - exact.logdet_m).abs() < 2e-10,
            "{from}→{to}: ln det M {} vs {}",
            one.logdet_m,
            exact.logdet_m
        );
        for a in 0..3 {
            assert!(
                (one.beta[a] - exact.beta[a]).abs() <= 1e-9 * exact.beta[a].abs().max(1e-3),
                "{from}→{to}: β{a} {} vs {}",
                one.beta[a],
                exact.beta[a]
            );
        }
    }
}

#[test]
fn far_coefficients_take_the_second_pass_and_stay_exact() {
    // From β₀ = 0 the effects (mean 0.3 + 0.01·(year − 2000)) are far from
    // the fit: Σw y² ≫ Q, so the corrected Q would cancel; the guard must
    // sum the residuals again.
    let (y, v, x) = invented(300);
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
    };
    let zero = DVector::zeros(3);
    let before = passes();
    let one = fit_near(&d, 0.01, Want::SCORE, &zero).unwrap();
    assert_eq!(
        passes() - before,
        2,
        "the guard should have taken a second pass"
    );
    let exact = fit_with(&d, 0.01, Want::SCORE).unwrap();
    assert!(rel(one.q, exact.q) < 1e-12);
    // Near coefficients need one pass.
    let before = passes();
    fit_near(&d, 0.011, Want::SCORE, &one.beta).unwrap();
    assert_eq!(passes() - before, 1);
}

/// REML or ML score at τ² from a two-pass fit.
fn score_at(d: &Data<'_>, t: f64, restricted: bool) -> f64 {
    let f = fit_with(d, t, Want::SCORE).unwrap();
    let trace = if restricted { f.tr_p } else { f.sum_w };
    0.5 * (f.sum_w2r2 - trace)
}

#[test]
fn curvature_matches_central_differences() {
    let (y, v, x) = invented(200);
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
    };
    for t in [0.002, 0.05, 0.7] {
        let beta0 = fit_with(&d, t * 1.1, Want::Q).unwrap().beta;
        let f = fit_near(&d, t, Want::CURVATURE, &beta0).unwrap();
        let hstep = t * 1e-4;
        for restricted in [true, false] {
            let fd = (score_at(&d, t + hstep, restricted) - score_at(&d, t - hstep, restricted))
                / (2.0 * hstep);
            let trace = if restricted { f.tr_pp } else { f.sum_w2 };
            let exact = -f.y_pppy + 0.5 * trace;
            assert!(
                rel(exact, fd) < 1e-6,
                "τ² = {t}, REML {restricted}: {exact} vs {fd}"
            );
        }
        // dQ/dτ² = −Σw²r².
        let q = |s: f64| fit_with(&d, s, Want::Q).unwrap().q;
        let fd = (q(t + hstep) - q(t - hstep)) / (2.0 * hstep);
        assert!(
            rel(-f.sum_w2r2, fd) < 1e-6,
            "τ² = {t}: dQ {} vs {fd}",
            -f.sum_w2r2
        );
    }
}

#[test]
fn the_evaluator_fits_each_point_once_and_counts() {
    let (y, v, x) = invented(100);
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
    };
    let ev = Evaluator::new(d.clone());
    let a = ev.at(0.1, Want::ALL).unwrap();
    // Q only: the fit with everything serves.
    let b = ev.at(0.1, Want::Q).unwrap();
    assert_eq!(a.q.to_bits(), b.q.to_bits());
    assert_eq!(ev.evaluations(), 1);
    // The curvature was not computed: a new fit.
    let c = ev.at(0.1, Want::CURVATURE).unwrap();
    assert_eq!(ev.evaluations(), 2);
    assert!(c.y_pppy.is_finite() && a.y_pppy.is_nan());
}

#[test]
fn fits_at_several_points_take_one_pass_and_agree_with_fits_one_by_one() {
    let (y, v, x) = invented(100);
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
    };
    let together = Evaluator::new(d.clone());
    together.at(0.0, Want::SCORE).unwrap();
    // Close to 0: one pass, with no second pass at β̂ (see the module
    // documentation).
    let taus = [0.002, 0.0, 0.001, 0.002];
    let before = passes();
    together.fit_many(&taus, Want::SCORE);
    // 0 was fitted already, 0.002 is asked for twice: two fits, one pass.
    assert_eq!(passes() - before, 1);
    assert_eq!(together.evaluations(), 3);
    // Far from 0: the sums around β̂(0) cancel, and each point's sums are
    // taken again at its own β̂.
    together.fit_many(&[0.5, 3.0], Want::SCORE);
    assert_eq!(together.evaluations(), 5);
    let one_by_one = Evaluator::new(d.clone());
    for tau2 in [0.0, 0.001, 0.002, 0.5, 3.0] {
        let found = passes();
        let a = together.at(tau2, Want::SCORE).unwrap();
        // Found, not fitted again.
        assert_eq!(passes(), found);
        let b = one_by_one.at(tau2, Want::SCORE).unwrap();
        let close = |s: f64, t: f64, tol: f64| (s - t).abs() <= tol * s.abs().max(t.abs());
        for (s, t) in [(a.q, b.q), (a.tr_p, b.tr_p), (a.sum_w2r2, b.sum_w2r2)] {
            assert!(close(s, t, 1e-12), "τ² = {tau2}: {s} vs {t}");
        }
        // The intercept of this unstandardised design (a column of years
        // beside it) amplifies the rounding of δ = M⁻¹g: 2e-12 apart when
        // written.
        for (s, t) in a.beta.iter().zip(&b.beta) {
            assert!(close(*s, *t, 1e-10), "τ² = {tau2}: β {s} vs {t}");
        }
    }
    assert_eq!(together.evaluations(), 5);
}

#[test]
fn many_columns_use_the_general_loop_and_agree() {
    // p = 10 (beyond the fixed sizes).
    let k = 80;
    let p = 10;
    let mut x = Vec::with_capacity(k * p);
    let mut y = Vec::with_capacity(k);
    let mut v = Vec::with_capacity(k);
    for i in 0..k {
        x.push(1.0);
        for j in 1..p {
            x.push((((i + 3) * (j + 5) * 7919) % 97) as f64 / 97.0);
        }
        y.push(((i * 31) % 17) as f64 / 17.0);
        v.push(0.01 + ((i * 13) % 7) as f64 / 70.0);
    }
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p,
    };
    let beta0 = fit_with(&d, 0.02, Want::Q).unwrap().beta;
    let one = fit_near(&d, 0.03, Want::ALL, &beta0).unwrap();
    let exact = fit_with(&d, 0.03, Want::ALL).unwrap();
    assert!(rel(one.q, exact.q) < 1e-12);
    assert!(rel(one.tr_p, exact.tr_p) < 1e-12);
    let curv = fit_near(&d, 0.03, Want::CURVATURE, &beta0).unwrap();
    let fixed = {
        // The same sums through a fixed-size loop: the first 8 columns.
        let x8: Vec<f64> = x.chunks(p).flat_map(|r| r[..8].to_vec()).collect();
        let d8 = Data {
            y: &y,
            v: &v,
            x: &x8,
            p: 8,
        };
        let b8 = fit_with(&d8, 0.02, Want::Q).unwrap().beta;
        let mut s = Sums::default();
        general(&d8, 0.03, Want::CURVATURE, b8.as_slice(), &mut s);
        let general = s.sum_w3r2;
        fixed_many::<8, false, true, false>(
            &d8,
            &[Point {
                tau2: 0.03,
                beta0: b8.as_slice(),
            }],
            std::slice::from_mut(&mut s),
        );
        (s.sum_w3r2, general)
    };
    assert!(rel(fixed.0, fixed.1) < 1e-13);
    assert!(curv.y_pppy.is_finite() && curv.tr_pp > 0.0);
}

/// Invented data shaped like the benchmark file of benches/make_large_csv.py
/// (three moderators, τ² ≈ 0.01), from a deterministic scramble.
/// The effects, variances and row-major design of invented data.
type Columns = (Vec<f64>, Vec<f64>, Vec<f64>);

fn benchmark_like(k: usize) -> Columns {
    let mut y = Vec::with_capacity(k);
    let mut v = Vec::with_capacity(k);
    let mut x = Vec::with_capacity(4 * k);
    let unit = |i: usize, s: usize| ((i * s + 17) % 1009) as f64 / 1009.0;
    for i in 0..k {
        let (m1, m2, m3) = (unit(i, 7919) - 0.5, 10.0 * unit(i, 104_729), (i % 4) as f64);
        let vi = 0.01 + 0.2 * unit(i, 15_485_863);
        let noise =
            (unit(i, 32_452_843) - 0.5) * 0.5 + (unit(i, 49_979_687) - 0.5) * 3.464 * vi.sqrt();
        x.extend([1.0, m1, m2, m3]);
        v.push(vi);
        y.push(0.2 + 0.1 * m1 - 0.02 * m2 + 0.05 * m3 + noise);
    }
    (y, v, x)
}

/// Data like the benchmark's for k studies, a REML fit of them with
/// Knapp–Hartung and the Q-profile interval, and the passes it took.
fn reml_fit_counting_passes(k: usize) -> (Columns, crate::model::ModelFit, u64) {
    use crate::model::{fit, tau2::Tau2Method, FitOptions, Inference};
    let (y, v, x) = benchmark_like(k);
    let before = passes();
    let f = fit(
        &y,
        &v,
        &x,
        4,
        FitOptions {
            method: Tau2Method::Reml,
            inference: Inference::Kh,
            level: 0.95,
        },
    )
    .unwrap();
    let used = passes() - before;
    ((y, v, x), f, used)
}

#[test]
fn a_reml_fit_with_its_interval_takes_few_passes() {
    let (_, f, used) = reml_fit_counting_passes(3000);
    eprintln!("passes {used}, REML evaluations {}", f.tau2.evaluations);
    // One pass per evaluation (24 when written: REML 15 evaluations, the
    // two Q-profile bounds 6 started at τ̂, the OLS scale 2, one guard
    // pass), where two passes per evaluation would be at least 2 × 21.
    assert!(used <= 28, "{used} passes");
}

/// From [`FEWER_PASSES_MIN_ROWS`] studies on, a REML fit with its interval
/// starts around the OLS coefficients and shares passes among τ² = 0 and
/// the scan's points and between the Q-profile bounds' searches, and takes
/// the log terms with the Newton search's last fit; its τ² is still the
/// root of the score and its bounds the roots of Q(τ²) = target, both
/// checked with fits of two passes each ([`fit_with`]: residuals at β̂).
#[test]
fn a_large_reml_fit_takes_fewer_passes_and_finds_the_same_roots() {
    use crate::dist::{chi2_quantile, Tail};
    let k = FEWER_PASSES_MIN_ROWS + 1000;
    let ((y, v, x), f, used) = reml_fit_counting_passes(k);
    // 12 when written (pass counts do not depend on the threads): 15
    // with τ² = 0, the bracket's first end and the scan in passes of their
    // own and the log terms at τ̂ in a pass of its own, 17 with the
    // Q-profile bounds' searches one after the other, 24 for data of the
    // same kind at 3,000 studies (the test above).
    eprintln!("passes {used}, REML evaluations {}", f.tau2.evaluations);
    assert!(used <= 12, "{used} passes");
    // The fit's τ², β and Q-profile bounds against two-pass fits of the
    // same (unstandardised) design.
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 4,
    };
    let t = f.tau2.estimate;
    assert!(t > 0.0);
    let at = |tau2: f64| fit_with(&d, tau2, Want::SCORE).unwrap();
    let score = |g: &Wls| 0.5 * (g.sum_w2r2 - g.tr_p);
    // The score is 0 at τ̂ to within its change over the Newton tolerance.
    let slope = (score(&at(1.001 * t)) - score(&at(0.999 * t))) / (0.002 * t);
    assert!(score(&at(t)).abs() <= 1e-9 * t * slope.abs(), "score at τ̂");
    for (a, b) in f.beta.iter().zip(at(t).beta.iter()) {
        assert!(rel(*a, *b) < 1e-10, "β {a} vs {b}");
    }
    let (lo, hi) = f.tau2_ci.unwrap();
    let df = (k - 4) as f64;
    for (bound, target) in [
        (lo, chi2_quantile(0.025, df, Tail::Upper)),
        (hi, chi2_quantile(0.025, df, Tail::Lower)),
    ] {
        let q = fit_with(&d, bound, Want::Q).unwrap().q;
        assert!(rel(q, target) < 1e-9, "Q({bound}) = {q}, target {target}");
    }
}

/// The lane kernel built for AVX2 gives the very bits of the baseline
/// build (`lanes`), where the processor has AVX2 (elsewhere it is never
/// called, and there is nothing to compare).
fn same_bits_with_avx2<const P: usize>(
    d: &Data<'_>,
    (log, curv): (bool, bool),
    beta0: &[f64],
    lanes: &Sums,
) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        use super::sums::in_lanes_avx2;
        let mut wide = Sums::default();
        let (point, out) = (
            [Point { tau2: 0.02, beta0 }],
            std::slice::from_mut(&mut wide),
        );
        // SAFETY: AVX2 was detected on the line above.
        unsafe {
            match (log, curv) {
                (false, false) => in_lanes_avx2::<P, false, false, false>(d, &point, out),
                (true, false) => in_lanes_avx2::<P, true, false, false>(d, &point, out),
                (false, true) => in_lanes_avx2::<P, false, true, false>(d, &point, out),
                (true, true) => in_lanes_avx2::<P, true, true, false>(d, &point, out),
            }
        }
        assert_eq!(sums_bits(lanes), sums_bits(&wide), "P = {P}, k = {}", d.k());
    }
}

/// Invented rows for the kernel tests (a deterministic scramble): k
/// studies, p columns (the first of ones, the others in [shift, shift + 1)),
/// variances in [0.01, 1.01) and coefficients to take the residuals around.
fn scrambled(k: usize, p: usize, shift: f64) -> (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>) {
    let unit = |i: usize, s: usize| ((i * s + 13) % 997) as f64 / 997.0;
    let v = (0..k).map(|i| 0.01 + unit(i, 7919)).collect();
    let y = (0..k).map(|i| unit(i, 104_729) - 0.3).collect();
    let x = (0..k)
        .flat_map(|i| {
            (0..p).map(move |a| {
                if a == 0 {
                    1.0
                } else {
                    unit(i, 31 + 17 * a) + shift
                }
            })
        })
        .collect();
    let beta0 = (0..p).map(|a| 0.1 * a as f64 - 0.05).collect();
    (y, v, x, beta0)
}

/// Every sum of the lane kernel and of the fixed-size running sums against
/// the general running sums, for
/// `P` columns, each pair of optional parts, and numbers of rows that fill
/// no lane, part of a lane, whole blocks and a block and a bit (the padded
/// rows must add nothing, and a block must not keep the last one's rows).
fn lanes_agree_with_running_sums<const P: usize>() {
    for k in [1usize, 3, 4, 5, 63, 64, 65, 131, 300] {
        let (y, v, x, beta0) = scrambled(k, P, 0.0);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: P,
        };
        for (log, curv) in [(false, false), (true, false), (false, true), (true, true)] {
            let want = Want {
                log_terms: log,
                curvature: curv,
                ..Want::SCORE
            };
            let (mut one, mut lanes, mut run) = (Sums::default(), Sums::default(), Sums::default());
            general(&d, 0.02, want, &beta0, &mut one);
            match (log, curv) {
                (false, false) => in_lanes::<P, false, false>(&d, 0.02, &beta0, &mut lanes),
                (true, false) => in_lanes::<P, true, false>(&d, 0.02, &beta0, &mut lanes),
                (false, true) => in_lanes::<P, false, true>(&d, 0.02, &beta0, &mut lanes),
                (true, true) => in_lanes::<P, true, true>(&d, 0.02, &beta0, &mut lanes),
            }
            same_bits_with_avx2::<P>(&d, (log, curv), &beta0, &lanes);
            match (log, curv) {
                (false, false) => running::<P, false, false>(&d, 0.02, &beta0, &mut run),
                (true, false) => running::<P, true, false>(&d, 0.02, &beta0, &mut run),
                (false, true) => running::<P, false, true>(&d, 0.02, &beta0, &mut run),
                (true, true) => running::<P, true, true>(&d, 0.02, &beta0, &mut run),
            }
            let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * a.abs().max(b.abs()).max(1e-300);
            let vectors = |s: &Sums| {
                [
                    s.m.clone(),
                    s.n2.clone(),
                    s.n3.clone(),
                    s.g.clone(),
                    s.h.clone(),
                    s.h3.clone(),
                ]
            };
            for other in [&lanes, &run] {
                for (a, b) in scalars(&one).into_iter().zip(scalars(other)) {
                    assert!(close(a, b), "P = {P}, k = {k}, {want:?}: {a} vs {b}");
                }
                for (a, b) in vectors(&one).iter().zip(&vectors(other)) {
                    assert_eq!(a.len(), b.len(), "P = {P}, k = {k}, {want:?}");
                    for (s, t) in a.iter().zip(b) {
                        assert!(close(*s, *t), "P = {P}, k = {k}, {want:?}: {s} vs {t}");
                    }
                }
            }
        }
    }
}

#[test]
fn the_lane_kernel_agrees_with_running_sums_for_every_size() {
    lanes_agree_with_running_sums::<1>();
    lanes_agree_with_running_sums::<2>();
    lanes_agree_with_running_sums::<3>();
    lanes_agree_with_running_sums::<4>();
    lanes_agree_with_running_sums::<5>();
    lanes_agree_with_running_sums::<6>();
    lanes_agree_with_running_sums::<7>();
    lanes_agree_with_running_sums::<8>();
}

/// The lane kernel's sums with every part, built the plain way: each sum
/// in four running sums, row i going to sum i mod 4 in row order (the rows
/// up to a whole lane adding +0), the four added in order, every term
/// written as the kernel's comments write it ((f·x_a)·x_c, x_a·f, w·w·w).
/// Pins the order of the kernel's additions, so a faster kernel that
/// reorders them (and so moves the results' last bits) fails here.
fn sums_in_lane_order<const P: usize>(d: &Data<'_>, tau2: f64, b0: &[f64]) -> Sums {
    const L: usize = 4;
    let zero = [0.0; L];
    let (mut m, mut n2, mut n3) = ([[zero; P]; P], [[zero; P]; P], [[zero; P]; P]);
    let (mut g, mut h, mut h3) = ([zero; P], [zero; P], [zero; P]);
    let mut sc = [zero; 6];
    for i in 0..d.k().div_ceil(L) * L {
        let l = i % L;
        let (x, terms) = if i < d.k() {
            let x: [f64; P] = d.x[i * P..(i + 1) * P].try_into().unwrap();
            let w = 1.0 / (d.v[i] + tau2);
            let fit = x.iter().zip(b0).fold(0.0, |f, (xa, ba)| f + xa * ba);
            let r = d.y[i] - fit;
            let (wr, w2) = (w * r, w * w);
            let w2r = w * wr;
            sc[5][l] += (d.v[i] + tau2).ln();
            (x, [w, w2, w * w * w, r, wr, w2r, w * w2r])
        } else {
            ([0.0; P], [0.0; 7])
        };
        let [w, w2, w3, r, wr, w2r, w3r] = terms;
        sc[0][l] += w;
        sc[1][l] += w2;
        sc[2][l] += wr * r;
        sc[3][l] += w2r * r;
        sc[4][l] += w3r * r;
        for a in 0..P {
            for c in a..P {
                m[a][c][l] += (w * x[a]) * x[c];
                n2[a][c][l] += (w2 * x[a]) * x[c];
                n3[a][c][l] += (w3 * x[a]) * x[c];
            }
            g[a][l] += x[a] * wr;
            h[a][l] += x[a] * w2r;
            h3[a][l] += x[a] * w3r;
        }
    }
    let total = |t: &[f64; L]| t.iter().fold(0.0, |s, x| s + x);
    let upper = |t: &[[[f64; L]; P]; P]| -> Vec<f64> {
        (0..P)
            .flat_map(|a| (0..P).map(move |c| if c >= a { total(&t[a][c]) } else { 0.0 }))
            .collect()
    };
    let [sum_w, sum_w2, sum_wr2, sum_w2r2, sum_w3r2, sum_log_vt] = sc.map(|t| total(&t));
    let mut s = Sums::default();
    (s.sum_w, s.sum_w2, s.sum_wr2, s.sum_w2r2, s.sum_w3r2) =
        (sum_w, sum_w2, sum_wr2, sum_w2r2, sum_w3r2);
    s.sum_log_vt = sum_log_vt;
    (s.m, s.n2, s.n3) = (upper(&m), upper(&n2), upper(&n3));
    (s.g, s.h, s.h3) = (
        g.iter().map(total).collect(),
        h.iter().map(total).collect(),
        h3.iter().map(total).collect(),
    );
    s
}

/// [`sums_in_lane_order`] against the kernel, bit for bit, at `P` columns.
fn lanes_add_in_lane_order<const P: usize>() {
    for k in [1usize, 5, 64, 131, 300] {
        let (y, v, x, beta0) = scrambled(k, P, -0.4);
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: P,
        };
        let mut lanes = Sums::default();
        in_lanes::<P, true, true>(&d, 0.02, &beta0, &mut lanes);
        let plain = sums_in_lane_order::<P>(&d, 0.02, &beta0);
        assert_eq!(sums_bits(&lanes), sums_bits(&plain), "P = {P}, k = {k}");
    }
}

#[test]
fn the_lane_kernel_adds_in_lane_order_bit_for_bit() {
    lanes_add_in_lane_order::<1>();
    lanes_add_in_lane_order::<2>();
    lanes_add_in_lane_order::<3>();
    lanes_add_in_lane_order::<4>();
    lanes_add_in_lane_order::<6>();
    lanes_add_in_lane_order::<8>();
}

/// The scalar sums of a pass, in a fixed order.
fn scalars(s: &Sums) -> [f64; 6] {
    [
        s.sum_w,
        s.sum_w2,
        s.sum_wr2,
        s.sum_w2r2,
        s.sum_w3r2,
        s.sum_log_vt,
    ]
}

/// Every sum of a pass, as bits (in a fixed order).
fn sums_bits(s: &Sums) -> Vec<u64> {
    [&s.m, &s.n2, &s.n3, &s.g, &s.h, &s.h3]
        .into_iter()
        .flatten()
        .chain(&scalars(s))
        .map(|x| x.to_bits())
        .collect()
}

/// The sums of one pass at several points are, point by point, the very
/// bits of a pass at each point alone: below and above the block size and
/// the parallel threshold, for the fixed-size kernels and the general one
/// (p = 9), with and without the optional parts.
#[test]
fn a_pass_at_several_points_gives_each_point_s_own_sums() {
    use super::sums::{accumulate, accumulate_many};
    use crate::model::wls::PARALLEL_MIN_ROWS;
    for (k, p) in [
        (40usize, 3usize),
        (300, 1),
        (300, 4),
        (300, 9),
        (PARALLEL_MIN_ROWS + 77, 4),
    ] {
        let unit = |i: usize, s: usize| ((i * s + 13) % 1009) as f64 / 1009.0;
        let v: Vec<f64> = (0..k).map(|i| 0.01 + unit(i, 7919)).collect();
        let y: Vec<f64> = (0..k).map(|i| 3.0 * unit(i, 104_729) - 0.3).collect();
        let x: Vec<f64> = (0..k)
            .flat_map(|i| (0..p).map(move |a| if a == 0 { 1.0 } else { unit(i, 31 + 17 * a) }))
            .collect();
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p,
        };
        let betas: Vec<Vec<f64>> = (0..3)
            .map(|j| (0..p).map(|a| 0.1 * (a + j) as f64 - 0.05).collect())
            .collect();
        // Each point around coefficients of its own, and every point
        // around the same ones (as in a pass of `fit_many`, whose residuals
        // are made once a block).
        let own: Vec<Point<'_>> = [0.0, 0.3, 7.5]
            .iter()
            .zip(&betas)
            .map(|(&tau2, b)| Point { tau2, beta0: b })
            .collect();
        let shared: Vec<Point<'_>> = [0.0, 0.3, 7.5, 1e-9]
            .iter()
            .map(|&tau2| Point {
                tau2,
                beta0: &betas[1],
            })
            .collect();
        for (points, want) in [&own, &shared]
            .into_iter()
            .flat_map(|pts| [Want::Q, Want::SCORE, Want::ALL, Want::CURVATURE].map(|w| (pts, w)))
        {
            let mut together = vec![Sums::default(); points.len()];
            accumulate_many(&d, false, points, want, &mut together);
            for (pt, got) in points.iter().zip(&together) {
                let mut alone = Sums::default();
                accumulate(&d, false, pt.tau2, want, pt.beta0, &mut alone);
                assert_eq!(
                    sums_bits(got),
                    sums_bits(&alone),
                    "k = {k}, p = {p}, τ² = {}, {want:?}",
                    pt.tau2
                );
            }
        }
    }
}

/// The passes of a design of one column of ones that do not read it give the
/// very bits of the passes that do: below the block size, with a last block
/// and a last lane cut short, above the parallel threshold, at several
/// points at once, with every optional part, and with −0 among the effects
/// and the coefficients.
#[test]
fn passes_without_the_column_of_ones_give_its_bits() {
    use super::sums::{accumulate, accumulate_many};
    use crate::model::wls::PARALLEL_MIN_ROWS;
    for k in [5usize, 63, 64, 130, 1027, PARALLEL_MIN_ROWS + 77] {
        let unit = |i: usize, s: usize| ((i * s + 13) % 1009) as f64 / 1009.0;
        let v: Vec<f64> = (0..k).map(|i| 0.01 + unit(i, 7919)).collect();
        let y: Vec<f64> = (0..k)
            .map(|i| {
                if i % 11 == 0 {
                    -0.0
                } else {
                    3.0 * unit(i, 104_729) - 0.3
                }
            })
            .collect();
        let x = vec![1.0; k];
        let d = Data {
            y: &y,
            v: &v,
            x: &x,
            p: 1,
        };
        let betas = [[-0.0], [0.25], [-1.5]];
        let points: Vec<Point<'_>> = [0.0, 0.3, 7.5]
            .iter()
            .zip(&betas)
            .map(|(&tau2, b)| Point { tau2, beta0: b })
            .collect();
        let (all, curvature_and_logs) = (
            Want::ALL,
            Want {
                log_terms: true,
                ..Want::CURVATURE
            },
        );
        for want in [
            Want::Q,
            Want::SCORE,
            all,
            Want::CURVATURE,
            curvature_and_logs,
        ] {
            let mut read = vec![Sums::default(); points.len()];
            let mut unread = vec![Sums::default(); points.len()];
            accumulate_many(&d, false, &points, want, &mut read);
            accumulate_many(&d, true, &points, want, &mut unread);
            for (j, (a, b)) in read.iter().zip(&unread).enumerate() {
                assert_eq!(sums_bits(a), sums_bits(b), "k = {k}, point {j}, {want:?}");
                assert!(!b.m.is_empty() && !b.g.is_empty());
            }
            let mut alone = Sums::default();
            accumulate(&d, true, 0.3, want, &betas[1], &mut alone);
            assert_eq!(
                sums_bits(&alone),
                sums_bits(&read[1]),
                "k = {k}, alone, {want:?}"
            );
        }
    }
}
