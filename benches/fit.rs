//! Benchmark of the model fit (data already parsed) and of the whole
//! analysis from in-memory CSV bytes, for k = 100 … 1,000,000 studies with
//! three moderators. Run with `cargo bench --bench fit`; the results are
//! recorded in docs/performance.md. Not a test: nothing here asserts a time.
//!
//! The data are invented (a seeded xorshift generator), for timing only.

use pondus::effect::{ColumnMap, Measure};
use pondus::fit::{run, FitSettings};
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::{fit, FitOptions, Inference};
use std::hint::black_box;
use std::time::{Duration, Instant};

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        // xorshift64*; uniform in [0, 1).
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.next().max(1e-300), self.next());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

struct Data {
    y: Vec<f64>,
    v: Vec<f64>,
    x: Vec<f64>,
    csv: String,
}

fn make(k: usize, seed: u64) -> Data {
    let mut r = Rng(seed);
    let (mut y, mut v, mut x) = (
        Vec::with_capacity(k),
        Vec::with_capacity(k),
        Vec::with_capacity(4 * k),
    );
    let mut csv = String::from("study,effect,variance,m1,m2,m3\n");
    for i in 0..k {
        let m = [r.normal(), r.next() * 10.0, (r.next() * 4.0).floor()];
        let vi = 0.01 + 0.2 * r.next();
        let yi = 0.2 + 0.1 * m[0] - 0.02 * m[1]
            + 0.05 * m[2]
            + 0.1 * r.normal()
            + vi.sqrt() * r.normal();
        y.push(yi);
        v.push(vi);
        x.extend_from_slice(&[1.0, m[0], m[1], m[2]]);
        csv.push_str(&format!(
            "s{i},{yi:.6},{vi:.6},{:.4},{:.4},{}\n",
            m[0], m[1], m[2]
        ));
    }
    Data { y, v, x, csv }
}

fn median(mut t: Vec<Duration>) -> Duration {
    t.sort();
    t[t.len() / 2]
}

fn time<F: FnMut()>(mut f: F, min_runs: usize, budget: Duration) -> (Duration, usize) {
    let mut times = Vec::new();
    let start = Instant::now();
    while times.len() < min_runs || (start.elapsed() < budget && times.len() < 1000) {
        let t = Instant::now();
        f();
        times.push(t.elapsed());
    }
    let n = times.len();
    (median(times), n)
}

fn main() {
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    let settings = FitSettings {
        measure: Measure::Effect,
        columns: ColumnMap::default(),
        label: ("study".into(), false),
        moderators: ["m1", "m2", "m3"]
            .iter()
            .map(|m| ModeratorSpec {
                name: m.to_string(),
                categorical: false,
                reference: None,
                center: false,
            })
            .collect(),
        interactions: vec![],
        options,
        predictions: vec![],
        interpret: Default::default(),
        diagnostics: Default::default(),
        dependence: Default::default(),
        answers: Default::default(),
    };
    println!(
        "{:>9}  {:>16}  {:>16}  {:>22}",
        "k", "model fit", "+ null model", "analysis from CSV"
    );
    for &k in &[100usize, 1_000, 10_000, 100_000, 1_000_000] {
        let d = make(k, 42 + k as u64);
        let budget = Duration::from_secs(3);
        let (t_fit, n1) = time(
            || {
                black_box(fit(&d.y, &d.v, &d.x, 4, options).unwrap());
            },
            5,
            budget,
        );
        let ones = vec![1.0; k];
        let (t_both, _) = time(
            || {
                black_box(fit(&d.y, &d.v, &d.x, 4, options).unwrap());
                black_box(fit(&d.y, &d.v, &ones, 1, options).unwrap());
            },
            5,
            budget,
        );
        let (t_all, n3) = time(
            || {
                black_box(run(&settings, "bench", d.csv.as_bytes()).unwrap());
            },
            3,
            budget,
        );
        println!(
            "{k:>9}  {:>13.3} ms  {:>13.3} ms  {:>19.3} ms   (median of {n1} / {n3} runs)",
            t_fit.as_secs_f64() * 1e3,
            t_both.as_secs_f64() * 1e3,
            t_all.as_secs_f64() * 1e3
        );
    }
}
