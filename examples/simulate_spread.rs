//! Seeded simulation of the likelihood-ratio test of `--spread-by`
//! (docs/methods.md, "Simulated size and power of the spread test"): its
//! size when τ² is the same in two groups of studies, and its power when τ²
//! doubles from one group to the other.
//!
//! Not a test and not run by CI: `cargo run --example simulate_spread
//! [REPLICATIONS]` (default 2000 per cell). Each replication draws k studies,
//! half in group 0 and half in group 1, with within-study variances 4/n
//! (n uniform on 20..200, as for a standardised mean difference), true
//! effects N(0.3, τ_g²), and fits the mean model with the group as moderator
//! and ln τ² = α₀ + α₁·group, by REML and by ML, exactly as `pondus fit
//! --moderator group --spread-by group` does (the library's
//! `model::fit_parts` and `model::location_scale::fit`). Prints a markdown
//! table: the rejection rate at α = 0.05 among all replications (a fit that
//! does not converge counts as not rejecting) with its Monte Carlo standard
//! error √(p̂(1 − p̂)/R), and the share of fits that did not converge. The
//! data are simulated from the model itself (invented, seeded).

use pondus::dist;
use pondus::model::location_scale;
use pondus::model::tau2::Tau2Method;
use pondus::model::{fit_parts, FitOptions, Inference};
use pondus::support::rng::Xoshiro256StarStar;

const ALPHA: f64 = 0.05;
const BASE_TAU2: f64 = 0.05;

/// One replication: Some(p of the LR test), or None when a fit fails.
fn replicate(
    rng: &mut Xoshiro256StarStar,
    k: usize,
    ratio: f64,
    method: Tau2Method,
) -> Option<f64> {
    let mut y = Vec::with_capacity(k);
    let mut v = Vec::with_capacity(k);
    let mut x = Vec::with_capacity(2 * k);
    for i in 0..k {
        let g = if i < k / 2 { 0.0 } else { 1.0 };
        let vi = 4.0 / (20.0 + 180.0 * rng.next_open01());
        let tau2 = if g == 0.0 {
            BASE_TAU2
        } else {
            BASE_TAU2 * ratio
        };
        y.push(0.3 + tau2.sqrt() * rng.next_normal() + vi.sqrt() * rng.next_normal());
        v.push(vi);
        x.extend([1.0, g]);
    }
    let opts = FitOptions {
        method,
        inference: Inference::Z,
        level: 0.95,
    };
    let one = fit_parts(&y, &v, &x, 2, opts, false).ok()?;
    let restricted = method == Tau2Method::Reml;
    let ls = location_scale::fit(&y, &v, &x, 2, &x, 2, one.tau2.estimate, restricted).ok()?;
    let lr = (2.0 * (ls.log_likelihood - one.log_likelihood?)).max(0.0);
    Some(dist::chi2_sf(lr, 1.0))
}

fn main() {
    let reps: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(2000);
    println!("| k | τ² ratio (group 1 / group 0) | method | rejection rate at α = 0.05 | MC SE | not converged |");
    println!("|---|---|---|---|---|---|");
    for (part, ratio) in [(1u64, 1.0), (2, 2.0)] {
        for k in [20usize, 40, 80, 160] {
            for (m, method) in [(0u64, Tau2Method::Reml), (1, Tau2Method::Ml)] {
                let seed = 20_261_202 + part * 100_000 + k as u64 * 10 + m;
                let mut rng = Xoshiro256StarStar::seed_from_u64(seed);
                let (mut reject, mut failed) = (0usize, 0usize);
                for _ in 0..reps {
                    match replicate(&mut rng, k, ratio, method) {
                        Some(p) if p < ALPHA => reject += 1,
                        Some(_) => {}
                        None => failed += 1,
                    }
                }
                let rate = reject as f64 / reps as f64;
                let se = (rate * (1.0 - rate) / reps as f64).sqrt();
                println!(
                    "| {k} | {ratio} | {} | {:.3} | {:.3} | {:.1}% |",
                    method.id(),
                    rate,
                    se,
                    100.0 * failed as f64 / reps as f64
                );
            }
        }
    }
}
