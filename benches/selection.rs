//! Benchmark of the step-function selection model (`--selection 0.025,0.5`)
//! for k = 1,000 studies with two numeric moderators: the selection model,
//! the same model without selection and the intercept-only selection model
//! for the average (everything `--selection` computes), and PET and PEESE.
//! Run with `cargo bench --bench selection`; the results are recorded in
//! docs/performance.md (min and median of the runs). Not a test: nothing here
//! asserts a time. The data are simulated (invented) with the project's
//! seeded generator, with selection of non-significant studies.

use pondus::diagnose::pet_peese::{regression, Precision};
use pondus::diagnose::selection::{analyse, SelectionSettings};
use pondus::diagnose::ModelData;
use pondus::effect::ReadingScale;
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::result::Favoured;
use pondus::support::rng::block_rng;
use std::hint::black_box;
use std::time::{Duration, Instant};

/// k published studies with moderators x1 (0..10) and x2 (0..1); a study
/// with one-sided p ≥ 0.025 is published with probability 0.4.
fn data(k: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut rng = block_rng(seed, 0);
    let (mut y, mut v, mut x) = (Vec::new(), Vec::new(), Vec::new());
    while y.len() < k {
        let x1 = 10.0 * rng.next_open01();
        let x2 = rng.next_open01();
        let vi = 0.005 + 0.1 * rng.next_open01();
        let yi = 0.1 + 0.02 * x1 - 0.1 * x2 + (vi + 0.02f64).sqrt() * rng.next_normal();
        if yi / vi.sqrt() > 1.96 || rng.next_open01() < 0.4 {
            y.push(yi);
            v.push(vi);
            x.extend([1.0, x1, x2]);
        }
    }
    (y, v, x)
}

fn main() {
    let (y, v, x) = data(1_000, 16);
    let d = ModelData {
        y: &y,
        v: &v,
        x: &x,
        p: 3,
        options: FitOptions {
            method: Tau2Method::Reml,
            inference: Inference::Z,
            level: 0.95,
        },
    };
    let s = SelectionSettings {
        cuts: vec![0.025, 0.5],
        favoured: Favoured::Positive,
        force: false,
    };
    let terms: Vec<String> = ["intercept", "x1", "x2"].map(String::from).to_vec();
    let runs = 7;
    let mut times: Vec<Duration> = (0..runs)
        .map(|_| {
            let t = Instant::now();
            let o = analyse(&d, &s, &terms, ReadingScale::Same).expect("selection model");
            black_box(o);
            t.elapsed()
        })
        .collect();
    times.sort();
    println!(
        "selection model, k = 1,000, two moderators, cuts 0.025,0.5: min {:.1} ms, median {:.1} ms ({runs} runs)",
        times[0].as_secs_f64() * 1e3,
        times[runs / 2].as_secs_f64() * 1e3
    );
    let mut times: Vec<Duration> = (0..runs)
        .map(|_| {
            let t = Instant::now();
            for kind in [Precision::StandardError, Precision::Variance] {
                black_box(regression(&y, &v, &x, 3, 0.95, kind).expect("PET/PEESE"));
            }
            t.elapsed()
        })
        .collect();
    times.sort();
    println!(
        "PET and PEESE, k = 1,000, two moderators: min {:.3} ms, median {:.3} ms ({runs} runs)",
        times[0].as_secs_f64() * 1e3,
        times[runs / 2].as_secs_f64() * 1e3
    );
}
