//! Benchmark of the planning simulation: 10,000 simulated meta-analyses of
//! k = 40 sites, each fitted by REML with the moderator test (Knapp–Hartung
//! and z), on all cores (rayon) and on one thread. Run with
//! `cargo bench --bench plan`; the results are recorded in
//! docs/performance.md. Not a test: nothing here asserts a time.

mod common;
use common::best;
use pondus::plan::{no_progress, simulate, ModeratorDesign, Plan, PlanMeasure};
use pondus::result::plan::PlanTest;
use std::hint::black_box;

fn plan(test: PlanTest) -> Plan {
    Plan {
        measure: PlanMeasure::R,
        k: 40,
        n: 50.0,
        n_sites: None,
        tau2: 0.02,
        design: ModeratorDesign::TwoLevel { share: 0.5 },
        beta: 0.2,
        alpha: 0.05,
        test,
    }
}

fn main() {
    const N: usize = 10_000;
    let threads = rayon::current_num_threads();
    println!("planning simulation: {N} data sets, k = 40, REML; best of 3");
    for (name, test) in [("kh", PlanTest::Kh), ("z", PlanTest::Z)] {
        let p = plan(test);
        let all = best(3, || {
            black_box(simulate(&p, N, 1, &no_progress).unwrap());
        });
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let one = best(3, || {
            pool.install(|| black_box(simulate(&p, N, 1, &no_progress).unwrap()));
        });
        println!(
            "  --test {name:<3} {threads} threads {:>8.3} s   1 thread {:>8.3} s",
            all.as_secs_f64(),
            one.as_secs_f64()
        );
    }
}
