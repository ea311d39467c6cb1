//! Benchmark of the three-level REML fit (`pondus fit --cluster`): 2,000
//! effects in 300 clusters with two moderators (one between, one within
//! clusters), data already parsed; with and without the profile-likelihood
//! intervals, and the CR2 robust inference on top. Run with
//! `cargo bench --bench multilevel`; figures go into docs/performance.md.
//! Not a test: nothing here asserts a time.
//!
//! The data are invented (a seeded xoshiro256** generator), for timing only.

use pondus::model::multilevel::{fit, robust, Clusters};
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::support::rng::Xoshiro256StarStar;
use std::hint::black_box;
use std::time::Instant;

fn main() {
    let (k, m) = (2000usize, 300usize);
    let mut rng = Xoshiro256StarStar::seed_from_u64(7);
    let (mut y, mut v, mut x, mut ids) = (vec![], vec![], vec![], vec![]);
    let xb: Vec<f64> = (0..m).map(|_| rng.next_normal()).collect();
    let u: Vec<f64> = (0..m).map(|_| 0.2 * rng.next_normal()).collect();
    for i in 0..k {
        // Uneven cluster sizes: cluster of effect i by a skewed draw.
        let j = if i < m {
            i
        } else {
            ((rng.next_open01().powi(2)) * m as f64) as usize % m
        };
        let vi = 0.01 + 0.1 * rng.next_open01();
        let xw = rng.next_open01();
        y.push(
            0.2 + 0.1 * xb[j] - 0.1 * xw
                + u[j]
                + 0.15 * rng.next_normal()
                + vi.sqrt() * rng.next_normal(),
        );
        v.push(vi);
        x.extend([1.0, xb[j], xw]);
        ids.push(j.to_string());
    }
    let cl = Clusters::from_ids(&ids);
    let opts = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    for (label, with_ci) in [
        ("REML fit, no intervals", false),
        ("REML fit + profile intervals", true),
    ] {
        let mut times = vec![];
        for _ in 0..5 {
            let t0 = Instant::now();
            let r = fit(&y, &v, &x, 3, &cl, opts, with_ci).unwrap();
            times.push(t0.elapsed().as_secs_f64());
            black_box(r);
        }
        times.sort_by(f64::total_cmp);
        println!(
            "{label}: k = {k}, {m} clusters: median {:.4} s (min {:.4}, max {:.4})",
            times[2], times[0], times[4]
        );
    }
    let (_, t) = fit(&y, &v, &x, 3, &cl, opts, false).unwrap();
    let mut times = vec![];
    for _ in 0..5 {
        let t0 = Instant::now();
        let r = robust(
            &y,
            &v,
            &x,
            3,
            &cl,
            t.components.between,
            t.components.within,
        )
        .unwrap();
        times.push(t0.elapsed().as_secs_f64());
        black_box(r);
    }
    times.sort_by(f64::total_cmp);
    println!(
        "CR2 robust SEs, df, HTZ: median {:.4} s (min {:.4}, max {:.4}); evaluations of the fit: {}",
        times[2], times[0], times[4], t.components.evaluations
    );
}
