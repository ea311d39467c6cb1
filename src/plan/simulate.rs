//! The power of the moderator test by simulation, and the simulated check
//! of the k needed.

use super::Plan;
use crate::dist;
use crate::error::{Error, Result};
use crate::model::{self, tau2::Tau2Method, FitOptions, Inference};
use crate::result::plan::{KPower, PlanTest, Simulated, SimulatedK};
use crate::support::flag::Flag;
use crate::support::rng::block_rng;

/// Simulated data sets per block. Each block draws from its own generator
/// (see [`block_rng`]), so the result does not depend on how many threads
/// run the blocks.
pub const SIM_BLOCK: usize = 250;

/// Power of the chosen test (z or Knapp–Hartung) by simulation, in parallel.
///
/// # Formula
/// Draw y_i = β x_i + √(v_i + τ²)·z_i, z_i ~ N(0, 1) independent (β₀ = 0: the
/// test of β does not depend on β₀), fit by REML with the plan's inference
/// ([`model::fit_parts`], no τ² interval), reject when |β̂/SE| exceeds the
/// two-sided critical value (z₁₋α/₂ for z, t_{k−2;1−α/2} for Knapp–Hartung,
/// the same as p < α); power = rejections / usable fits. The data sets are
/// drawn in blocks of [`SIM_BLOCK`], block b from [`block_rng`](seed, b), and
/// the counts are summed in block order, so any number of threads gives the
/// same answer. `progress` is called with the number of data sets of each
/// finished block.
///
/// # Errors
/// [`Error::Model`] when the design cannot be realised at this k or k < 3,
/// or when no simulated data set can be fitted.
pub fn simulate(
    plan: &Plan,
    simulations: usize,
    seed: u64,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Simulated> {
    use rayon::prelude::*;
    let k = plan.k;
    let x = plan
        .design
        .values(k)
        .filter(|_| k >= 3)
        .ok_or_else(|| Error::Model(format!("the moderator design cannot be realised with k = {k} sites (each level needs a site, and k ≥ 3)")))?;
    let v = plan.variances();
    let sd: Vec<f64> = v.iter().map(|vi| (vi + plan.tau2).sqrt()).collect();
    let mut design = Vec::with_capacity(2 * k);
    for xi in &x {
        design.push(1.0);
        design.push(*xi);
    }
    let inference = match plan.test {
        PlanTest::Z => Inference::Z,
        PlanTest::Kh => Inference::Kh,
    };
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference,
        level: 1.0 - plan.alpha,
    };
    let crit = match plan.test {
        PlanTest::Z => dist::normal_quantile(1.0 - plan.alpha / 2.0),
        PlanTest::Kh => dist::t_quantile(1.0 - plan.alpha / 2.0, (k - 2) as f64),
    };
    let blocks = simulations.div_ceil(SIM_BLOCK);
    let counts: Vec<(usize, usize)> = (0..blocks)
        .into_par_iter()
        .map(|b| {
            let n = SIM_BLOCK.min(simulations - b * SIM_BLOCK);
            let mut rng = block_rng(seed, b as u64);
            let mut y = vec![0.0; k];
            let (mut hits, mut failed) = (0usize, 0usize);
            for _ in 0..n {
                for i in 0..k {
                    y[i] = plan.beta * x[i] + sd[i] * rng.next_normal();
                }
                let stat = model::fit_parts(&y, &v, &design, 2, options, false)
                    .ok()
                    .map(|f| f.beta[1] / f.cov[(1, 1)].sqrt())
                    .filter(|t| t.is_finite());
                match stat {
                    Some(t) if t.abs() > crit => hits += 1,
                    Some(_) => {}
                    None => failed += 1,
                }
            }
            progress(n as u64);
            (hits, failed)
        })
        .collect();
    let (hits, failed) = counts
        .iter()
        .fold((0, 0), |(h, f), (bh, bf)| (h + bh, f + bf));
    let used = simulations - failed;
    if used == 0 {
        return Err(Error::Model(format!(
            "no simulated data set could be fitted; check {} and {}",
            Flag::Tau2,
            Flag::Variance
        )));
    }
    let power = hits as f64 / used as f64;
    Ok(Simulated {
        power,
        monte_carlo_se: (power * (1.0 - power) / used as f64).sqrt(),
        simulations,
        failed_fits: failed,
        seed,
    })
}

/// No progress report.
pub fn no_progress(_: u64) {}

/// Most values of k simulated when confirming the k needed.
pub const MAX_SIMULATED_K: usize = 10;

/// The most simulated site effects (k × data sets) at one value of k: a
/// bound on the work of one simulation (each data set is a REML fit over
/// k sites), so that a target needing 100,000 sites is answered in
/// seconds instead of running for many minutes. At that many sites the
/// Knapp–Hartung t has so many degrees of freedom, and its scale factor is
/// so close to 1, that the test is the z test in all but name and the
/// noncentral F approximation is close to exact.
pub const MAX_SIMULATED_SITE_EFFECTS: usize = 20_000_000;

/// Whether simulating `simulations` data sets of `k` sites is within
/// [`MAX_SIMULATED_SITE_EFFECTS`].
pub fn within_budget(k: usize, simulations: usize) -> bool {
    k.saturating_mul(simulations) <= MAX_SIMULATED_SITE_EFFECTS
}

/// Confirms by simulation the k needed for `target`, starting from the k
/// `start` proposed by the approximation: simulate there (same seed, so
/// common random numbers where the streams overlap); if the power reaches
/// the target step down, else up, doubling the step until the power crosses
/// the target, then bisect between the last k below and the first k at or
/// above the target. At most [`MAX_SIMULATED_K`] values of k are simulated.
///
/// # Errors
/// Those of [`simulate`].
pub fn confirm_k(
    plan: &Plan,
    target: f64,
    start: usize,
    max_k: usize,
    simulations: usize,
    seed: u64,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<SimulatedK> {
    let mut evaluated: Vec<KPower> = Vec::new();
    let eval = |k: usize, evaluated: &mut Vec<KPower>| -> Result<Option<bool>> {
        if let Some(e) = evaluated.iter().find(|e| e.k == k) {
            return Ok(Some(e.power >= target));
        }
        if evaluated.len() >= MAX_SIMULATED_K {
            return Ok(None);
        }
        if !within_budget(k, simulations) {
            return Ok(None);
        }
        let p = plan.with_k(k);
        if p.design.values(k).is_none() {
            // A level left empty at this k: treat it as falling short.
            return Ok(Some(false));
        }
        let s = simulate(&p, simulations, seed, progress)?;
        evaluated.push(KPower {
            k,
            power: s.power,
            monte_carlo_se: s.monte_carlo_se,
        });
        Ok(Some(s.power >= target))
    };
    let start = start.clamp(3, max_k);
    // (lo, hi): lo falls short (or is 2), hi reaches the target.
    let (mut lo, mut hi): (usize, Option<usize>);
    match eval(start, &mut evaluated)? {
        Some(true) => {
            hi = Some(start);
            lo = 2;
            let mut step = 1;
            loop {
                let k = start.saturating_sub(step).max(3);
                if hi == Some(3) {
                    break;
                }
                match eval(k, &mut evaluated)? {
                    Some(true) => hi = Some(k),
                    Some(false) => {
                        lo = k;
                        break;
                    }
                    None => break,
                }
                step *= 2;
            }
        }
        Some(false) | None => {
            lo = start;
            hi = None;
            let mut step = 1;
            while lo < max_k {
                let k = (start + step).min(max_k);
                match eval(k, &mut evaluated)? {
                    Some(true) => {
                        hi = Some(k);
                        break;
                    }
                    Some(false) => lo = k,
                    None => break,
                }
                step *= 2;
            }
        }
    }
    if let Some(mut h) = hi {
        while h - lo > 1 {
            let mid = lo + (h - lo) / 2;
            match eval(mid, &mut evaluated)? {
                Some(true) => h = mid,
                Some(false) => lo = mid,
                None => break,
            }
        }
        hi = Some(h);
    }
    let bracketed = hi.is_some_and(|h| {
        h == 3 || (h - lo == 1 && (lo == 2 || evaluated.iter().any(|e| e.k == lo)))
    });
    Ok(SimulatedK {
        k: hi,
        bracketed,
        evaluated,
        max_evaluations: MAX_SIMULATED_K,
    })
}

#[cfg(test)]
mod tests {
    use super::super::tests::{kh_two_level, plan};
    use super::*;
    use crate::plan::{ModeratorDesign, PlanMeasure};

    #[test]
    fn kh_simulation_is_seeded_and_close_to_the_f_approximation() {
        let p = kh_two_level();
        let a = simulate(&p, 400, 11, &no_progress).unwrap();
        let b = simulate(&p, 400, 11, &no_progress).unwrap();
        assert_eq!(a, b);
        let approx = p.f_power_approx().unwrap();
        // Five Monte-Carlo standard errors plus 0.05 for the approximation itself.
        assert!(
            (a.power - approx).abs() < 5.0 * a.monte_carlo_se + 0.05,
            "{a:?} vs {approx}"
        );
        // Under β = 0 the rejection rate is near α.
        let null = simulate(&Plan { beta: 0.0, ..p }, 400, 3, &no_progress).unwrap();
        assert!(
            (null.power - 0.05).abs() < 5.0 * (0.05f64 * 0.95 / 400.0).sqrt(),
            "{null:?}"
        );
    }

    #[test]
    fn blocks_make_the_result_independent_of_threads() {
        let p = Plan {
            test: PlanTest::Kh,
            ..plan(
                PlanMeasure::R,
                15,
                50.0,
                0.02,
                ModeratorDesign::Numeric { sd: 1.0 },
                0.1,
                0.05,
            )
        };
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| simulate(&p, 3 * SIM_BLOCK + 17, 21, &no_progress).unwrap())
        };
        let one = run(1);
        assert_eq!(one, run(2));
        assert_eq!(one, run(3));
        assert_eq!(one.simulations, 3 * SIM_BLOCK + 17);
        // Different blocks draw different streams.
        let a = block_rng(21, 0).next_u64();
        assert_ne!(a, block_rng(21, 1).next_u64());
        assert_ne!(a, block_rng(22, 0).next_u64());
    }

    #[test]
    fn confirm_k_brackets_the_crossing_within_its_bound() {
        let p = kh_two_level();
        // Start far too low: the search must step up and still stay bounded.
        let c = confirm_k(&p, 0.8, 10, 1000, 400, 5, &no_progress).unwrap();
        assert!(c.evaluated.len() <= MAX_SIMULATED_K, "{c:?}");
        let k = c.k.unwrap();
        let at = |j: usize| c.evaluated.iter().find(|e| e.k == j).map(|e| e.power);
        assert!(at(k).unwrap() >= 0.8, "{c:?}");
        if c.bracketed {
            assert!(at(k - 1).unwrap() < 0.8, "{c:?}");
        }
        assert!((25..=45).contains(&k), "{c:?}");
    }
}
