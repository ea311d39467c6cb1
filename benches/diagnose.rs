//! Benchmark of the robustness diagnostics: a permutation test with 10,000
//! permutations (k = 50, one numeric moderator, REML, Knapp–Hartung), and
//! leave-one-out plus influence measures for k = 1,000 (REML,
//! Knapp–Hartung), on all cores (rayon) and on one thread. Run with
//! `cargo bench --bench diagnose`; the results are recorded in
//! docs/performance.md. Not a test: nothing here asserts a time. The data
//! are simulated (invented) with the project's seeded generator.

mod common;
use common::best;
use pondus::diagnose::{
    average_fits, deleted_fits, influence, loo, permutation, ModelData, PermutationSettings,
};
use pondus::model::tau2::Tau2Method;
use pondus::model::{self, FitOptions, Inference};
use pondus::support::rng::block_rng;
use std::hint::black_box;

/// k studies: x uniform-ish on 0..10, v from 0.01 to 0.2, τ² = 0.05, slope 0.03.
fn data(k: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut rng = block_rng(seed, 0);
    let mut y = Vec::with_capacity(k);
    let mut v = Vec::with_capacity(k);
    let mut x = Vec::with_capacity(2 * k);
    for i in 0..k {
        let xi = 10.0 * rng.next_open01();
        let vi = 0.01 + 0.19 * (i as f64 / k as f64);
        y.push(0.2 + 0.03 * xi + (vi + 0.05f64).sqrt() * rng.next_normal());
        v.push(vi);
        x.extend([1.0, xi]);
    }
    (y, v, x)
}

fn main() {
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    let threads = rayon::current_num_threads();
    let one_thread = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();

    let (y, v, x) = data(50, 11);
    let d = ModelData {
        y: &y,
        v: &v,
        x: &x,
        p: 2,
        options,
    };
    let ps = PermutationSettings {
        permutations: 10_000,
        seed: 1,
    };
    println!("permutation test: 10,000 permutations, k = 50, one moderator, REML + KH; best of 3");
    let all = best(3, || {
        black_box(permutation::test(&d, ps, &|_| {}).unwrap());
    });
    let one = best(3, || {
        one_thread.install(|| black_box(permutation::test(&d, ps, &|_| {}).unwrap()));
    });
    println!(
        "  {threads} threads {:>8.3} s   1 thread {:>8.3} s",
        all.as_secs_f64(),
        one.as_secs_f64()
    );

    let (y, v, x) = data(1000, 12);
    let d = ModelData {
        y: &y,
        v: &v,
        x: &x,
        p: 2,
        options,
    };
    let labels: Vec<String> = (0..1000).map(|i| format!("s{i}")).collect();
    let lines: Vec<u64> = (0..1000).map(|i| i + 2).collect();
    let full = model::fit(&y, &v, &x, 2, options).unwrap();
    let work = || {
        let del = deleted_fits(&d);
        let avg = average_fits(&d, &del);
        let terms = ["intercept".to_string(), "x".to_string()];
        let r = loo::Refits {
            full: &full,
            deleted: &del,
            averages: &avg,
            terms: &terms,
            scale: pondus::effect::ReadingScale::Same,
        };
        black_box(loo::table(&d, r, &labels, &lines));
        black_box(influence::table(&d, r, &labels, &lines));
    };
    println!("leave-one-out + influence: k = 1,000, one moderator, REML + KH; best of 3");
    let all = best(3, work);
    let one = best(3, || one_thread.install(work));
    println!(
        "  {threads} threads {:>8.3} s   1 thread {:>8.3} s",
        all.as_secs_f64(),
        one.as_secs_f64()
    );
}
