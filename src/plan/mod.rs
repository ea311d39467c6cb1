//! Planning: the power of a moderator test before the data exist, and the
//! number of sites (or the per-site n) needed for a target power.
//!
//! The planned meta-regression is y_i = β₀ + β x_i + u_i + e_i with
//! u_i ~ N(0, τ²) and e_i ~ N(0, v_i), v_i the planned within-site
//! variance. The formulas are in `docs/planning.md`.

pub mod noncentral;
pub mod report;

use crate::dist;
use crate::error::{Error, Result};
use crate::model::{self, tau2::Tau2Method, FitOptions, Inference};
use crate::support::rng::block_rng;
use noncentral::{ncf_sf, ncx2_sf};
use serde::Serialize;

/// The analysis scale and its planned within-site variance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PlanMeasure {
    /// Fisher's z of a correlation; variance 1/(n − 3).
    R,
    /// Hedges' g with two equal groups of n/2 and g = 0 for planning;
    /// variance (n_t + n_c)/(n_t n_c) + g²/(2(n_t + n_c)) = 4/n.
    Smd,
    /// An unstandardised slope with a given sampling variance.
    Slope {
        /// The planned within-site variance (se²).
        variance: f64,
    },
    /// A generic effect with a given sampling variance.
    Effect {
        /// The planned within-site variance.
        variance: f64,
    },
}

impl PlanMeasure {
    /// The name used in the output.
    pub fn id(self) -> &'static str {
        match self {
            PlanMeasure::R => "r",
            PlanMeasure::Smd => "smd",
            PlanMeasure::Slope { .. } => "slope",
            PlanMeasure::Effect { .. } => "effect",
        }
    }

    /// Whether the within-site variance depends on the per-site n.
    pub fn uses_n(self) -> bool {
        matches!(self, PlanMeasure::R | PlanMeasure::Smd)
    }

    /// Smallest per-site n the variance formula allows.
    pub fn min_n(self) -> f64 {
        4.0
    }

    /// The planned within-site variance at per-site n.
    ///
    /// # Formula
    /// r: v = 1/(n − 3), the variance of Fisher's z (Fisher 1921, *Metron* 1:3).
    /// smd: v = (n_t + n_c)/(n_t n_c) + g²/(2(n_t + n_c)) with n_t = n_c = n/2
    /// and g = 0, so v = 4/n (Hedges & Olkin 1985, *Statistical Methods for
    /// Meta-Analysis*, eq. 5.14). slope, effect: the given variance.
    pub fn variance(self, n: f64) -> f64 {
        match self {
            PlanMeasure::R => 1.0 / (n - 3.0),
            PlanMeasure::Smd => {
                let (nt, nc) = (n / 2.0, n / 2.0);
                (nt + nc) / (nt * nc)
            }
            PlanMeasure::Slope { variance } | PlanMeasure::Effect { variance } => variance,
        }
    }
}

/// The planned moderator across sites.
#[derive(Debug, Clone, PartialEq)]
pub enum ModeratorDesign {
    /// A numeric moderator with this SD across sites (divisor k − 1); the
    /// planned values are k equally spaced points scaled to that SD.
    Numeric {
        /// SD of the planned values.
        sd: f64,
    },
    /// A two-level moderator (coded 0/1) with this share of sites in the
    /// second level; round(share·k) sites get 1.
    TwoLevel {
        /// Share of sites in the second level.
        share: f64,
    },
    /// Planned values given one per site (from `--moderator-values`); for
    /// another number of sites k the list is repeated cyclically (site i
    /// gets value i mod L).
    Values(Vec<f64>),
}

impl ModeratorDesign {
    /// The planned moderator values for k sites, or None when the design
    /// cannot be realised (fewer than two sites, or a level left empty).
    pub fn values(&self, k: usize) -> Option<Vec<f64>> {
        if k < 2 {
            return None;
        }
        match self {
            ModeratorDesign::Numeric { sd } => {
                let raw: Vec<f64> = (0..k)
                    .map(|i| -1.0 + 2.0 * i as f64 / (k - 1) as f64)
                    .collect();
                let ss: f64 = raw.iter().map(|x| x * x).sum();
                let s = (ss / (k - 1) as f64).sqrt();
                Some(raw.iter().map(|x| x / s * sd).collect())
            }
            ModeratorDesign::TwoLevel { share } => {
                let m = (share * k as f64).round() as usize;
                if m == 0 || m >= k {
                    return None;
                }
                Some((0..k).map(|i| if i < k - m { 0.0 } else { 1.0 }).collect())
            }
            ModeratorDesign::Values(v) => {
                if v.is_empty() {
                    return None;
                }
                let x: Vec<f64> = (0..k).map(|i| v[i % v.len()]).collect();
                x.iter().any(|xi| *xi != x[0]).then_some(x)
            }
        }
    }
}

/// The test of the moderator coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum PlanTest {
    /// Wald z test with τ² taken as known: power from the noncentral chi-square.
    Z,
    /// Knapp–Hartung t test after REML: power by simulation.
    Kh,
}

/// One planning problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// Measure and its within-site variance.
    pub measure: PlanMeasure,
    /// Number of sites.
    pub k: usize,
    /// Participants per site (unused for slope and effect).
    pub n: f64,
    /// Planned participants of each site (r, smd), repeated in order when k
    /// is larger (site i gets entry i mod L); overrides `n` when given.
    pub n_sites: Option<Vec<f64>>,
    /// Residual between-site variance τ².
    pub tau2: f64,
    /// The moderator's planned values.
    pub design: ModeratorDesign,
    /// The moderator coefficient to detect, on the analysis scale.
    pub beta: f64,
    /// Two-sided significance level.
    pub alpha: f64,
    /// The test.
    pub test: PlanTest,
}

impl Plan {
    /// The same plan with another k.
    pub fn with_k(&self, k: usize) -> Plan {
        Plan { k, ..self.clone() }
    }

    /// The same plan with another n, equal at every site.
    pub fn with_n(&self, n: f64) -> Plan {
        Plan {
            n,
            n_sites: None,
            ..self.clone()
        }
    }

    /// The planned within-site variances v_1..v_k.
    pub fn variances(&self) -> Vec<f64> {
        (0..self.k)
            .map(|i| {
                let n = self.n_sites.as_ref().map_or(self.n, |ns| ns[i % ns.len()]);
                self.measure.variance(n)
            })
            .collect()
    }

    /// Σ w_i (x_i − x̄_w)², the information about the moderator coefficient
    /// (its variance is the reciprocal), or None when the design cannot be
    /// realised at this k.
    ///
    /// # Formula
    /// w_i = 1/(v_i + τ²), x̄_w = Σ w_i x_i / Σ w_i (Hedges & Pigott 2004,
    /// *Psychological Methods* 9:426).
    pub fn information(&self) -> Option<f64> {
        let x = self.design.values(self.k)?;
        let w: Vec<f64> = self
            .variances()
            .iter()
            .map(|v| 1.0 / (v + self.tau2))
            .collect();
        let sw: f64 = w.iter().sum();
        let xbar = w.iter().zip(&x).map(|(wi, xi)| wi * xi).sum::<f64>() / sw;
        Some(
            w.iter()
                .zip(&x)
                .map(|(wi, xi)| wi * (xi - xbar).powi(2))
                .sum(),
        )
    }

    /// The noncentrality λ = β²·Σ w_i (x_i − x̄_w)².
    pub fn noncentrality(&self) -> Option<f64> {
        self.information().map(|s| self.beta * self.beta * s)
    }

    /// Power of the two-sided Wald z test of the moderator coefficient.
    ///
    /// # Formula
    /// power = P(χ²₁(λ) > χ²₁;₁₋α) (Hedges & Pigott 2004, *Psychological
    /// Methods* 9:426), equal to Φ(δ − z₁₋α/₂) + Φ(−δ − z₁₋α/₂), δ = β/SE.
    /// None when the design cannot be realised at this k. Above
    /// [`crate::tolerance::NONCENTRAL_LAMBDA_MAX`] the (identical) normal
    /// form is used, since the Poisson mixture does not go there.
    pub fn z_power(&self) -> Option<f64> {
        let lambda = self.noncentrality()?;
        let z = dist::normal_quantile(1.0 - self.alpha / 2.0);
        if lambda > crate::tolerance::NONCENTRAL_LAMBDA_MAX {
            let d = lambda.sqrt();
            return Some(normal_cdf(d - z) + normal_cdf(-d - z));
        }
        Some(ncx2_sf(z * z, 1.0, lambda))
    }

    /// A quick approximation to the Knapp–Hartung power: the noncentral F.
    ///
    /// # Formula
    /// power ≈ P(F₁,ₖ₋₂(λ) > F₁,ₖ₋₂;₁₋α), with F₁,ₖ₋₂;₁₋α = t²ₖ₋₂;₁₋α/₂ and
    /// λ as for the z test (it treats τ² as known and the Knapp–Hartung scale
    /// as a χ²ₖ₋₂/(k − 2) variable; an approximation, not exact). None when
    /// k < 3 or the design cannot be realised; NaN when λ exceeds
    /// [`crate::tolerance::NONCENTRAL_LAMBDA_MAX`].
    pub fn f_power_approx(&self) -> Option<f64> {
        if self.k < 3 {
            return None;
        }
        let lambda = self.noncentrality()?;
        let df2 = (self.k - 2) as f64;
        let t = dist::t_quantile(1.0 - self.alpha / 2.0, df2);
        Some(ncf_sf(t * t, 1.0, df2, lambda))
    }

    /// The quick (closed-form) power of the chosen test: exact for `z`, the
    /// noncentral F approximation for `kh`.
    pub fn quick_power(&self) -> Option<f64> {
        match self.test {
            PlanTest::Z => self.z_power(),
            PlanTest::Kh => self.f_power_approx(),
        }
    }
}

/// Φ(x), the standard normal CDF.
fn normal_cdf(x: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    Normal::standard().cdf(x)
}

/// The result of a power simulation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Simulated {
    /// Share of the usable simulated data sets with p < α.
    pub power: f64,
    /// Monte-Carlo standard error √(p(1 − p)/N), N the usable data sets.
    pub monte_carlo_se: f64,
    /// Data sets simulated.
    pub simulations: usize,
    /// Data sets whose fit did not give a p-value (left out of the share).
    pub failed_fits: usize,
    /// The seed.
    pub seed: u64,
}

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
        return Err(Error::Model(
            "no simulated data set could be fitted; check --tau2 and --variance".into(),
        ));
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

/// The simulated check of the k proposed by the noncentral F approximation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SimulatedK {
    /// Smallest k whose simulated power reached the target among those
    /// simulated (null when none did within the bound).
    pub k: Option<usize>,
    /// Whether k − 1 was also simulated and fell short, or k = 3, the
    /// smallest k allowed (so k is the crossing point, up to Monte-Carlo
    /// error).
    pub bracketed: bool,
    /// Every simulated k and its power, in the order simulated.
    pub evaluated: Vec<KPower>,
    /// The most values of k that may be simulated.
    pub max_evaluations: usize,
}

/// One simulated k.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct KPower {
    /// Number of sites.
    pub k: usize,
    /// Simulated power.
    pub power: f64,
    /// Its Monte-Carlo SE.
    pub monte_carlo_se: f64,
}

/// Most values of k simulated when confirming the k needed.
pub const MAX_SIMULATED_K: usize = 10;

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

/// The smallest k in [3, max_k] whose quick power reaches `target`, or None.
/// A scan, not a bisection: with a two-level moderator the rounding of
/// share·k makes power not quite monotone in k.
pub fn solve_k(plan: &Plan, target: f64, max_k: usize) -> Option<usize> {
    (3..=max_k).find(|&k| plan.with_k(k).quick_power().is_some_and(|p| p >= target))
}

/// The smallest whole per-site n in [4, max_n] whose quick power reaches
/// `target`, or None. Bisection: power rises with n (v_i falls, so every
/// weight and the information rise).
pub fn solve_n(plan: &Plan, target: f64, max_n: f64) -> Option<f64> {
    let ok = |n: f64| plan.with_n(n).quick_power().is_some_and(|p| p >= target);
    let (mut lo, mut hi) = (plan.measure.min_n(), max_n.floor());
    if !ok(hi) {
        return None;
    }
    if ok(lo) {
        return Some(lo);
    }
    while hi - lo > 1.0 {
        let mid = ((lo + hi) / 2.0).floor();
        if ok(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

/// The largest power any number of participants per site can give at this
/// k: v_i → 0, so w_i → 1/τ² (infinite when τ² = 0).
pub fn power_ceiling_in_n(plan: &Plan) -> Option<f64> {
    if plan.tau2 == 0.0 {
        return Some(1.0);
    }
    let p = Plan {
        measure: PlanMeasure::Effect { variance: 0.0 },
        ..plan.clone()
    };
    p.quick_power()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tolerance::{IDENTITY_REL, NONCENTRAL_REF_ABS};
    use statrs::distribution::{ContinuousCDF, Normal};

    fn plan(
        measure: PlanMeasure,
        k: usize,
        n: f64,
        tau2: f64,
        design: ModeratorDesign,
        beta: f64,
        alpha: f64,
    ) -> Plan {
        Plan {
            measure,
            k,
            n,
            n_sites: None,
            tau2,
            design,
            beta,
            alpha,
            test: PlanTest::Z,
        }
    }

    /// Whole planning problems computed independently by
    /// tests/reference/power_values.py with scipy 1.16.3 (numpy for the
    /// design, scipy.stats.norm for the closed form, scipy.stats.ncf for the
    /// F approximation): (plan, z power, noncentral-F power).
    fn cases() -> Vec<(Plan, f64, f64)> {
        use ModeratorDesign::*;
        vec![
            (
                plan(
                    PlanMeasure::R,
                    20,
                    50.0,
                    0.02,
                    TwoLevel { share: 0.5 },
                    0.2,
                    0.05,
                ),
                0.5953367183203992,
                0.5490093886325786,
            ),
            (
                plan(
                    PlanMeasure::Smd,
                    30,
                    80.0,
                    0.05,
                    Numeric { sd: 10.0 },
                    0.02,
                    0.05,
                ),
                0.9258992781732286,
                0.9077403747000419,
            ),
            (
                plan(
                    PlanMeasure::Effect { variance: 0.04 },
                    12,
                    0.0,
                    0.01,
                    TwoLevel { share: 0.25 },
                    0.3,
                    0.01,
                ),
                0.28659435364750907,
                0.18883071993619593,
            ),
            (
                plan(
                    PlanMeasure::R,
                    40,
                    100.0,
                    0.0,
                    Numeric { sd: 1.0 },
                    0.05,
                    0.05,
                ),
                0.8676480514753485,
                0.8500770196902045,
            ),
        ]
    }

    #[test]
    fn powers_against_scipy() {
        for (p, z, f) in cases() {
            let got = p.z_power().unwrap();
            assert!(
                (got - z).abs() < NONCENTRAL_REF_ABS,
                "{p:?}: z {got} vs scipy {z}"
            );
            let got = p.f_power_approx().unwrap();
            assert!(
                (got - f).abs() < NONCENTRAL_REF_ABS,
                "{p:?}: F {got} vs scipy {f}"
            );
        }
    }

    #[test]
    fn unequal_n_against_scipy() {
        // tests/reference/power_values.py, scipy 1.16.3: r, n = 30, 60, 120
        // repeated, τ² = 0.01, share 0.5, β = 0.3, α = 0.05.
        let base = Plan {
            n_sites: Some(vec![30.0, 60.0, 120.0]),
            ..plan(
                PlanMeasure::R,
                6,
                f64::NAN,
                0.01,
                ModeratorDesign::TwoLevel { share: 0.5 },
                0.3,
                0.05,
            )
        };
        for (k, want) in [(6, 0.610212908979897), (10, 0.8066457369324039)] {
            let got = base.with_k(k).z_power().unwrap();
            assert!(
                (got - want).abs() < NONCENTRAL_REF_ABS,
                "k {k}: {got} vs scipy {want}"
            );
        }
        let sim = simulate(
            &Plan {
                test: PlanTest::Kh,
                ..base.with_k(10)
            },
            300,
            5,
            &no_progress,
        )
        .unwrap();
        assert!(sim.power.is_finite() && sim.failed_fits == 0);
    }

    #[test]
    fn z_power_matches_closed_form() {
        // power = Φ(δ − z₁₋α/₂) + Φ(−δ − z₁₋α/₂), δ = β/SE, SE² = 1/Σw(x − x̄_w)².
        let phi = |x: f64| Normal::standard().cdf(x);
        for (p, _, _) in cases() {
            let delta = p.beta * p.information().unwrap().sqrt();
            let zc = dist::normal_quantile(1.0 - p.alpha / 2.0);
            let want = phi(delta - zc) + phi(-delta - zc);
            let got = p.z_power().unwrap();
            assert!((got - want).abs() < NONCENTRAL_REF_ABS, "{got} vs {want}");
        }
    }

    #[test]
    fn design_values_and_variances() {
        let x = ModeratorDesign::Numeric { sd: 2.5 }.values(7).unwrap();
        let m = x.iter().sum::<f64>() / 7.0;
        let sd = (x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / 6.0).sqrt();
        assert!((sd - 2.5).abs() < IDENTITY_REL && m.abs() < IDENTITY_REL);
        let x = ModeratorDesign::TwoLevel { share: 0.3 }.values(10).unwrap();
        assert_eq!(x.iter().sum::<f64>(), 3.0);
        assert!(ModeratorDesign::TwoLevel { share: 0.01 }
            .values(10)
            .is_none());
        assert_eq!(PlanMeasure::R.variance(53.0), 0.02);
        let d = ModeratorDesign::Values(vec![1.0, 2.0, 4.0]);
        assert_eq!(d.values(5).unwrap(), vec![1.0, 2.0, 4.0, 1.0, 2.0]);
        assert!(d.values(1).is_none());
        assert!(ModeratorDesign::Values(vec![3.0, 5.0, 3.0])
            .values(1)
            .is_none());
        assert!(ModeratorDesign::Values(vec![3.0, 3.0]).values(4).is_none());
        assert_eq!(PlanMeasure::Smd.variance(100.0), 0.04);
    }

    #[test]
    fn solving_for_k_and_n() {
        let p = plan(
            PlanMeasure::R,
            20,
            50.0,
            0.02,
            ModeratorDesign::TwoLevel { share: 0.5 },
            0.2,
            0.05,
        );
        let k = solve_k(&p, 0.8, 1000).unwrap();
        assert!(p.with_k(k).z_power().unwrap() >= 0.8);
        assert!((3..k).all(|j| p.with_k(j).z_power().is_none_or(|q| q < 0.8)));
        let n = solve_n(&p, 0.8, 1e6);
        // τ² = 0.02 caps the information at k/(4τ²) = 250, λ ≤ 10: reachable.
        let n = n.unwrap();
        assert!(p.with_n(n).z_power().unwrap() >= 0.8);
        assert!(p.with_n(n - 1.0).z_power().unwrap() < 0.8);
        // A large τ² makes 80% unreachable with k = 20 at any n.
        let hard = Plan {
            tau2: 0.5,
            ..p.clone()
        };
        assert!(solve_n(&hard, 0.8, 1e6).is_none());
        assert!(power_ceiling_in_n(&hard).unwrap() < 0.8);
        assert!(solve_k(&Plan { beta: 0.001, ..p }, 0.8, 1000).is_none());
    }

    /// The Knapp–Hartung plan the simulation tests share: r, k = 20, n = 50,
    /// τ² = 0.02, a two-level moderator split evenly, effect 0.2, α = 0.05.
    fn kh_two_level() -> Plan {
        Plan {
            test: PlanTest::Kh,
            ..plan(
                PlanMeasure::R,
                20,
                50.0,
                0.02,
                ModeratorDesign::TwoLevel { share: 0.5 },
                0.2,
                0.05,
            )
        }
    }

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
