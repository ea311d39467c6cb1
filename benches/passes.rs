//! Benchmark of one pass of the one-pass sums (`model::near::fit_near`) at
//! k = 1,000,000 studies and p = 4 columns, for each set of parts a τ²
//! search asks for (score, curvature, everything with the log terms), and
//! of the model fit and the intercept-only fit on the same data with the
//! passes each makes, and of one pass at nine points (`Evaluator::fit_many`). Run with `cargo bench --bench passes`; results are
//! recorded in docs/performance.md. Not a test: nothing here asserts a
//! time. The data are invented (a seeded xorshift generator), for timing.

mod common;
use common::best;
use nalgebra::DVector;
use pondus::model::near::{fit_near, Evaluator};
use pondus::model::tau2::Tau2Method;
use pondus::model::wls::{passes, Data, Want};
use pondus::model::{fit, FitOptions, Inference};
use std::hint::black_box;

fn main() {
    let k = 1_000_000usize;
    let mut s = 88_172_645_463_325_252u64;
    let mut unit = || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let (mut x, mut y, mut v) = (Vec::with_capacity(4 * k), Vec::new(), Vec::new());
    for _ in 0..k {
        let m = [unit() - 0.5, 10.0 * unit(), (unit() * 4.0).floor()];
        let vi = 0.01 + 0.2 * unit();
        x.push(1.0);
        x.extend(m);
        v.push(vi);
        // τ² = 0.0075 (0.3·uniform) plus sampling error of variance v.
        y.push(
            0.2 + 0.1 * m[0] - 0.02 * m[1]
                + 0.05 * m[2]
                + 0.3 * (unit() - 0.5)
                + (12.0 * vi).sqrt() * (unit() - 0.5),
        );
    }
    let d = Data {
        y: &y,
        v: &v,
        x: &x,
        p: 4,
    };
    // Around coefficients already at the fit, as late in a τ² search.
    let mut beta = DVector::zeros(4);
    for _ in 0..2 {
        beta = fit_near(&d, 0.0075, Want::SCORE, &beta).unwrap().beta;
    }
    println!("k = {k}, p = 4: one pass (best of 30)");
    for (name, want) in [
        ("score (trace)", Want::SCORE),
        ("score and curvature", Want::CURVATURE),
        ("all, with log terms", Want::ALL),
    ] {
        let before = passes();
        let t = best(30, || {
            black_box(fit_near(&d, 0.0075, want, &beta));
        });
        let each = (passes() - before) / 30;
        println!(
            "  {name:<22} {:>8.3} ms  ({each} pass per fit)",
            t.as_secs_f64() * 1e3
        );
    }
    // Nine points in one pass, as the τ² search's first look along its range.
    let taus: Vec<f64> = (0..9).map(|j| 0.001 * 2f64.powi(j)).collect();
    let before = passes();
    let t = best(10, || {
        let ev = Evaluator::around(d.clone(), beta.clone());
        ev.fit_many(&taus, Want::SCORE);
        black_box(&ev);
    });
    println!(
        "  {:<22} {:>8.3} ms  ({} pass per call)",
        "nine points (score)",
        t.as_secs_f64() * 1e3,
        (passes() - before) / 10
    );
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    let ones = vec![1.0; k];
    for (name, xs, p) in [("model fit, p = 4", &x, 4), ("intercept only", &ones, 1)] {
        let before = passes();
        let f = fit(&y, &v, xs, p, options).unwrap();
        let made = passes() - before;
        let t = best(5, || {
            black_box(fit(&y, &v, xs, p, options).unwrap());
        });
        println!(
            "  {name:<22} {:>8.3} ms  ({made} passes, {} τ² evaluations)",
            t.as_secs_f64() * 1e3,
            f.tau2.evaluations
        );
    }
}
