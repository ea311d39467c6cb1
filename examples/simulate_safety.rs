//! Seeded simulations behind three choices of the fit (docs/methods.md,
//! "Simulations of the few-study safeguards"): the Knapp–Hartung factor
//! floored at 1 (`--inference kh-floor`), the prediction interval on
//! t(k − p − 1) with the unscaled standard error, and the between–within
//! degrees of freedom of the three-level model.
//!
//! Not a test and not run by CI (about two minutes in a debug build on a
//! 2-core machine): `cargo run --example simulate_safety [REPLICATIONS]`
//! (default 2000 per cell). Prints markdown tables with the Monte Carlo
//! standard error √(p̂(1 − p̂)/R) beside each rate. The data are simulated
//! from the model itself (invented, seeded); nothing is read from disk.

use pondus::dist;
use pondus::model::inference::{self, floored, predictive};
use pondus::model::multilevel::{self, Clusters};
use pondus::model::tau2::Tau2Method;
use pondus::model::{self, FitOptions, Inference, ModelFit};
use pondus::support::rng::Xoshiro256StarStar;

const LEVEL: f64 = 0.95;
const ALPHA: f64 = 0.05;

fn options(inference: Inference) -> FitOptions {
    FitOptions {
        method: Tau2Method::Reml,
        inference,
        level: LEVEL,
    }
}

/// Within-study variance of a standardised mean difference of two groups of
/// total size n (≈ 4/n), n uniform on 20..200.
fn variance(rng: &mut Xoshiro256StarStar) -> f64 {
    4.0 / (20.0 + 180.0 * rng.next_open01())
}

/// A distinct seed per part and cell.
fn seed(part: u64, k: usize, p: usize, tau2: f64) -> u64 {
    part * 1_000_000 + k as u64 * 1000 + p as u64 * 10 + (tau2 * 100.0).round() as u64
}

/// A rate with its Monte Carlo SE, as "5.1% (0.49)".
fn rate(hits: usize, reps: usize) -> String {
    let p = hits as f64 / reps as f64;
    let se = (p * (1.0 - p) / reps as f64).sqrt();
    format!("{:.1}% ({:.2})", 100.0 * p, 100.0 * se)
}

/// The same fit tested with z (the model-based covariance, normal reference).
fn as_z(fit: &ModelFit) -> ModelFit {
    let mut f = fit.clone();
    f.cov = fit.cov_model.clone();
    f.kh_scale = None;
    f.options.inference = Inference::Z;
    f
}

/// One replicate of k studies with `p` − 1 standard-normal moderators
/// (true slopes 0, mean 0); returns (y, v, x, covariate rows).
fn draw(
    rng: &mut Xoshiro256StarStar,
    k: usize,
    p: usize,
    tau2: f64,
) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let (mut y, mut v, mut x) = (Vec::new(), Vec::new(), Vec::new());
    for _ in 0..k {
        let vi = variance(rng);
        x.push(1.0);
        for _ in 1..p {
            x.push(rng.next_normal());
        }
        y.push(tau2.sqrt() * rng.next_normal() + vi.sqrt() * rng.next_normal());
        v.push(vi);
    }
    (y, v, x)
}

/// Part 1: size of the moderator test and of the average's test under kh,
/// kh-floor and z, overall and among replicates whose factor is below 1.
fn part_floor(reps: usize) {
    println!("### Knapp–Hartung with and without the floor (true effects 0, α = 0.05)\n");
    println!("| test | k | τ² | share s² < 1 | kh | kh-floor | z | kh given s² < 1 | kh-floor given s² < 1 |");
    println!("|---|---|---|---|---|---|---|---|---|");
    let cells: Vec<(&str, usize, usize)> = vec![
        ("average", 1, 2),
        ("average", 1, 3),
        ("average", 1, 5),
        ("average", 1, 10),
        ("average", 1, 20),
        ("moderator", 2, 5),
        ("moderator", 2, 10),
        ("moderator", 2, 20),
        ("moderator", 2, 40),
    ];
    for (what, p, k) in cells {
        for tau2 in [0.0, 0.05] {
            let mut rng = Xoshiro256StarStar::seed_from_u64(seed(1, k, p, tau2));
            let (mut low, mut kh, mut fl, mut z, mut kh_low, mut fl_low, mut done) =
                (0, 0, 0, 0, 0, 0, 0);
            while done < reps {
                let (y, v, x) = draw(&mut rng, k, p, tau2);
                let Ok(fit) = model::fit_parts(&y, &v, &x, p, options(Inference::Kh), false) else {
                    continue;
                };
                if fit.scale_factor <= 0.0 {
                    continue;
                }
                done += 1;
                let pv = |f: &ModelFit| {
                    if p == 1 {
                        inference::coefficients(f)[0].p
                    } else {
                        inference::omnibus(f).map_or(1.0, |t| t.p)
                    }
                };
                let (a, b, c) = (
                    pv(&fit) < ALPHA,
                    pv(&floored(&fit)) < ALPHA,
                    pv(&as_z(&fit)) < ALPHA,
                );
                kh += usize::from(a);
                fl += usize::from(b);
                z += usize::from(c);
                if fit.scale_factor < 1.0 {
                    low += 1;
                    kh_low += usize::from(a);
                    fl_low += usize::from(b);
                }
            }
            println!(
                "| {what} | {k} | {tau2} | {:.1}% | {} | {} | {} | {} | {} |",
                100.0 * low as f64 / reps as f64,
                rate(kh, reps),
                rate(fl, reps),
                rate(z, reps),
                if low > 0 {
                    rate(kh_low, low)
                } else {
                    "—".into()
                },
                if low > 0 {
                    rate(fl_low, low)
                } else {
                    "—".into()
                },
            );
        }
    }
    println!();
}

/// Part 2: coverage of a new study's true effect by the 95% prediction
/// interval: the former t(k − p) with the Knapp–Hartung-scaled SE against
/// t(k − p − 1) with the unscaled SE (Higgins, Thompson & Spiegelhalter 2009).
fn part_prediction(reps: usize) {
    println!("### Prediction intervals: coverage of a new study's true effect (nominal 95%)\n");
    println!("| p | k | τ² | former: t(k − p), scaled SE | t(k − p − 1), unscaled SE |");
    println!("|---|---|---|---|---|");
    for (p, ks) in [(1usize, vec![3usize, 5, 10, 20]), (2, vec![5, 10, 20])] {
        for k in ks {
            for tau2 in [0.05, 0.2] {
                let mut rng = Xoshiro256StarStar::seed_from_u64(seed(2, k, p, tau2));
                let (mut old, mut new, mut done) = (0, 0, 0);
                while done < reps {
                    let (y, v, x) = draw(&mut rng, k, p, tau2);
                    let Ok(fit) = model::fit_parts(&y, &v, &x, p, options(Inference::Kh), false)
                    else {
                        continue;
                    };
                    if fit.scale_factor <= 0.0 {
                        continue;
                    }
                    done += 1;
                    let mut x0 = vec![1.0];
                    for _ in 1..p {
                        x0.push(rng.next_normal());
                    }
                    let theta = tau2.sqrt() * rng.next_normal();
                    // Former rule: t(k − p) quantile times √(x0' Cov_KH x0 + τ̂²).
                    let se2: f64 = (0..p)
                        .map(|a| (0..p).map(|b| x0[a] * fit.cov[(a, b)] * x0[b]).sum::<f64>())
                        .sum();
                    let mu: f64 = (0..p).map(|j| x0[j] * fit.beta[j]).sum();
                    let half =
                        dist::t_quantile(0.975, (k - p) as f64) * (se2 + fit.tau2.estimate).sqrt();
                    old += usize::from((theta - mu).abs() <= half);
                    if let Some(d) = predictive(&fit, &x0) {
                        let (lo, hi) = d.interval(LEVEL);
                        new += usize::from(theta >= lo && theta <= hi);
                    }
                }
                println!(
                    "| {p} | {k} | {tau2} | {} | {} |",
                    rate(old, reps),
                    rate(new, reps)
                );
            }
        }
    }
    println!();
}

/// Part 3: the three-level model, 20 clusters × 4 effects, a null
/// between-cluster moderator and a null within-cluster moderator: rejection
/// rates of their t tests (kh) on k − p df against the between–within df.
fn part_three_level(reps: usize) {
    let (m, n) = (20usize, 4usize);
    let k = m * n;
    let (sb, sw): (f64, f64) = (0.05, 0.02);
    println!("### Three-level model: {m} clusters × {n} effects, σ²_b = {sb}, σ²_w = {sw}, true slopes 0 (α = 0.05)\n");
    println!("| term | df k − p | rate on k − p | between–within df | rate on between–within df |");
    println!("|---|---|---|---|---|");
    let mut rng = Xoshiro256StarStar::seed_from_u64(3000);
    let ids: Vec<String> = (0..k).map(|i| (i / n).to_string()).collect();
    let cl = Clusters::from_ids(&ids);
    let p = 3;
    let (mut old, mut new, mut done) = ([0usize; 2], [0usize; 2], 0);
    let mut bw_df = [0.0; 2];
    while done < reps {
        let (mut y, mut v, mut x) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..m {
            let xb = rng.next_normal();
            let u = sb.sqrt() * rng.next_normal();
            for _ in 0..n {
                let vi = variance(&mut rng);
                x.extend([1.0, xb, rng.next_normal()]);
                y.push(u + sw.sqrt() * rng.next_normal() + vi.sqrt() * rng.next_normal());
                v.push(vi);
            }
        }
        let Ok((fit, _)) = multilevel::fit(&y, &v, &x, p, &cl, options(Inference::Kh), false)
        else {
            continue;
        };
        done += 1;
        for (slot, j) in [(0, 1), (1, 2)] {
            let t = fit.beta[j] / fit.cov[(j, j)].sqrt();
            old[slot] += usize::from(dist::t_two_sided_p(t, (k - p) as f64) < ALPHA);
            new[slot] += usize::from(inference::coefficients(&fit)[j].p < ALPHA);
            bw_df[slot] = fit.term_df[j];
        }
    }
    for (slot, name) in [(0, "between-cluster"), (1, "within-cluster")] {
        println!(
            "| {name} | {} | {} | {} | {} |",
            k - p,
            rate(old[slot], reps),
            bw_df[slot],
            rate(new[slot], reps)
        );
    }
    println!();
}

fn main() {
    let reps: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(2000);
    println!(
        "Replications per cell: {reps}; REML; Monte Carlo SE (percentage points) in brackets.\n"
    );
    part_floor(reps);
    part_prediction(reps);
    part_three_level(reps);
}
