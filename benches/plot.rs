//! Benchmark of the plots: forest plots of k = 30, 300 and 1,000 studies
//! (with a categorical moderator, so with subgroup rows) and bubble and
//! funnel plots of 1,000 studies, as SVG, PNG (150 and 300 dpi) and PDF,
//! from a `FitReport` already in memory; min and median of 5 runs. Run with
//! `cargo bench --bench plot` (or `cargo bench --bench plot -- target` for
//! the target alone: the 1,000-study forest plot as PNG at 300 dpi
//! and as PDF); the results are recorded in docs/performance.md. Not a
//! test: nothing here asserts a time. A plot pondus refuses is reported as
//! refused, with the reason, and the run goes on.
//!
//! The data are invented (a seeded xorshift generator), for timing only.

use pondus::effect::{ColumnMap, Measure};
use pondus::fit::{run, FitSettings};
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::render::figure::{self, Format, PlotOptions};
use std::hint::black_box;
use std::time::{Duration, Instant};

/// A plot renderer of the library.
type Draw = fn(&pondus::result::FitReport, &PlotOptions, Format) -> pondus::Result<Vec<u8>>;

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        // xorshift64*; uniform in [0, 1).
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn csv(k: usize, seed: u64) -> String {
    let mut r = Rng(seed);
    let mut s = String::from("study,effect,variance,dose,arm\n");
    for i in 0..k {
        let dose = r.next() * 10.0;
        let v = 0.01 + 0.2 * r.next();
        let y = 0.1 + 0.03 * dose + 0.3 * (r.next() - 0.5) + v.sqrt() * (r.next() - 0.5);
        let arm = if i % 3 == 0 { "b" } else { "a" };
        s.push_str(&format!(
            "Invented study {i},{y:.5},{v:.5},{dose:.3},{arm}\n"
        ));
    }
    s
}

/// The shortest and the median time of `runs` runs.
fn min_median<F: FnMut()>(mut f: F, runs: usize) -> (Duration, Duration) {
    let mut t: Vec<Duration> = (0..runs)
        .map(|_| {
            let s = Instant::now();
            f();
            s.elapsed()
        })
        .collect();
    t.sort();
    (t[0], t[t.len() / 2])
}

fn main() {
    let moderator = |name: &str, categorical: bool| ModeratorSpec {
        name: name.into(),
        categorical,
        reference: None,
        center: false,
    };
    let settings = FitSettings {
        measure: Measure::Effect,
        columns: ColumnMap::default(),
        label: ("study".into(), false),
        moderators: vec![moderator("dose", false), moderator("arm", true)],
        interactions: vec![],
        options: FitOptions {
            method: Tau2Method::Reml,
            inference: Inference::Kh,
            level: 0.95,
        },
        predictions: vec![],
        interpret: Default::default(),
        diagnostics: Default::default(),
        dependence: Default::default(),
        answers: Default::default(),
    };
    let print = PlotOptions {
        dpi: 300,
        ..PlotOptions::default()
    };
    println!(
        "{:>6}  {:>8}  {:>9}  {:>12}  {:>10}  {:>12}  {:>10}",
        "k", "plot", "format", "size (px)", "min", "median", "bytes"
    );
    let target_only = std::env::args().any(|a| a == "target");
    let ks: &[usize] = if target_only {
        &[1_000]
    } else {
        &[30, 300, 1_000]
    };
    for &k in ks {
        let report = run(&settings, "bench", csv(k, 7 + k as u64).as_bytes()).unwrap();
        let mut kinds: Vec<(&str, Draw)> = vec![("forest", figure::forest_plot)];
        if k == 1_000 && !target_only {
            kinds.push(("bubble", figure::bubble_plot));
            kinds.push(("funnel", figure::funnel_plot));
        }
        for (name, draw) in kinds {
            let default = PlotOptions::default();
            for (format, label, opts) in [
                (Format::Svg, "svg", &default),
                (Format::Png, "png 150", &default),
                (Format::Png, "png 300", &print),
                (Format::Pdf, "pdf", &default),
            ] {
                if target_only && !(label == "png 300" || label == "pdf") {
                    continue;
                }
                let bytes = match draw(&report, opts, format) {
                    Ok(b) => b,
                    Err(e) => {
                        println!("{k:>6}  {name:>8}  {label:>9}  refused: {e}");
                        continue;
                    }
                };
                let dims = if format == Format::Png {
                    let w = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
                    let h = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
                    format!("{w}×{h}")
                } else {
                    "-".into()
                };
                let (t_min, t) = min_median(
                    || {
                        black_box(draw(&report, opts, format).unwrap());
                    },
                    5,
                );
                println!(
                    "{k:>6}  {name:>8}  {label:>9}  {dims:>12}  {:>7.1} ms  {:>9.1} ms  {:>10}",
                    t_min.as_secs_f64() * 1e3,
                    t.as_secs_f64() * 1e3,
                    bytes.len()
                );
            }
        }
    }
}
