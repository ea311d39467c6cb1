//! Planning: the power of a moderator test before the data exist, and the
//! number of sites (or the per-site n) needed for a target power.
//!
//! The planned meta-regression is y_i = β₀ + β x_i + u_i + e_i with
//! u_i ~ N(0, τ²) and e_i ~ N(0, v_i), v_i the planned within-site
//! variance. The formulas are in `docs/planning.md`.
//!
//! The pipeline: a [`PlanRequest`] (the [`Plan`] and what to solve for) is
//! built into a [`PlanReport`](crate::result::plan::PlanReport) by
//! [`build`], from the closed-form power of [`Plan`], the simulation
//! ([`simulate`], [`confirm_k`]) and the searches for the k or n needed
//! ([`solve_k`], [`solve_n`]).

mod build;
pub mod noncentral;
mod simulate;
mod target;

pub use build::{build, build_with_progress, PlanRequest, SolveFor};
pub use simulate::{confirm_k, no_progress, simulate, MAX_SIMULATED_K, SIM_BLOCK};
pub use target::{power_ceiling_in_n, solve_k, solve_n};

use crate::dist;
use crate::result::plan::PlanTest;
use noncentral::{ncf_sf, ncx2_sf};

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

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use crate::tolerance::{IDENTITY_REL, NONCENTRAL_REF_ABS};
    use statrs::distribution::{ContinuousCDF, Normal};

    pub(super) fn plan(
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

    /// The Knapp–Hartung plan the simulation tests share: r, k = 20, n = 50,
    /// τ² = 0.02, a two-level moderator split evenly, effect 0.2, α = 0.05.
    pub(super) fn kh_two_level() -> Plan {
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
}
