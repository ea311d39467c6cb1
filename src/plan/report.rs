//! The result of `pondus plan`: a plain `Serialize` struct (its field docs
//! are the JSON schema), the terminal text, and the power curve plot.

use super::{
    power_ceiling_in_n, simulate_kh, solve_k, solve_n, ModeratorDesign, Plan, PlanTest, Simulated,
};
use crate::error::{Error, Result};
use crate::plot::scene::{Align, Scene};
use crate::plot::{encode, palette, size, Axis, Format, Frame};
use serde::Serialize;

/// What to solve for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SolveFor {
    /// The number of sites k.
    K,
    /// The per-site n at the planned k.
    N,
}

/// Settings of a planning run beyond the plan itself.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRequest {
    /// The plan.
    pub plan: Plan,
    /// Target power, when a k (or n) is to be solved for.
    pub target_power: Option<f64>,
    /// What to solve for.
    pub solve: SolveFor,
    /// Largest k searched.
    pub max_k: usize,
    /// Largest per-site n searched.
    pub max_n: f64,
    /// Simulated data sets (Knapp–Hartung only).
    pub simulations: usize,
    /// Seed of the simulation.
    pub seed: u64,
}

/// One row of the power table.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PowerRow {
    /// Number of sites.
    pub k: usize,
    /// Power from the closed form: exact for `z`, the noncentral F
    /// approximation for `kh` (see `table_method`).
    pub power: f64,
}

/// The answer of `pondus plan`.
#[derive(Debug, Clone, Serialize)]
pub struct PlanReport {
    /// Measure (`r`, `smd`, `slope`, `effect`).
    pub measure: &'static str,
    /// Planned number of sites.
    pub k: usize,
    /// Planned participants per site (null for slope and effect, and when `n_sites` is given).
    pub n: Option<f64>,
    /// Planned participants of each site when they differ (repeated in order up to k).
    pub n_sites: Option<Vec<f64>>,
    /// Planned within-site sampling variance on the analysis scale (the mean over sites when n differs).
    pub within_variance: f64,
    /// Assumed residual between-site variance τ².
    pub tau2: f64,
    /// The moderator's planned design in words.
    pub moderator: String,
    /// The moderator coefficient to detect (analysis scale).
    pub moderator_effect: f64,
    /// Two-sided significance level.
    pub alpha: f64,
    /// `z` or `kh`.
    pub test: PlanTest,
    /// Standard error of the moderator coefficient, 1/√Σw(x − x̄_w)² (τ² known).
    pub se: f64,
    /// Noncentrality λ = β²Σw(x − x̄_w)².
    pub noncentrality: f64,
    /// Power at the planned k: exact noncentral chi-square for `z`, simulated for `kh`.
    pub power: f64,
    /// How `power` was obtained.
    pub power_method: String,
    /// For `kh`: the simulation (Monte-Carlo SE, seed, failures).
    pub simulation: Option<Simulated>,
    /// For `kh`: the noncentral F approximation at the planned k (a quick estimate only).
    pub power_f_approximation: Option<f64>,
    /// The target power, when given.
    pub target_power: Option<f64>,
    /// Smallest k reaching the target power (null when none up to `max_k`, or with `--solve n`).
    pub k_needed: Option<usize>,
    /// Smallest per-site n reaching the target power at the planned k (`--solve n`).
    pub n_needed: Option<f64>,
    /// Largest k searched.
    pub max_k: usize,
    /// The power over k.
    pub table: Vec<PowerRow>,
    /// How the table's power was obtained.
    pub table_method: String,
    /// Things the planner should know (a target that cannot be reached, ...).
    pub notes: Vec<String>,
    /// What the numbers rest on.
    pub cautions: Vec<String>,
}

fn design_words(d: &ModeratorDesign) -> String {
    match d {
        ModeratorDesign::Numeric { sd } => {
            format!("numeric, SD {sd} across sites (equally spaced planned values)")
        }
        ModeratorDesign::TwoLevel { share } => {
            format!("two levels, share {share} of the sites in the second level (coded 0/1)")
        }
        ModeratorDesign::Values(v) => {
            let n = v.len() as f64;
            let m = v.iter().sum::<f64>() / n;
            let sd = (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
            format!(
                "{} planned values from a file (mean {m:.4}, SD {sd:.4})",
                v.len()
            )
        }
    }
}

/// Computes the whole answer.
///
/// # Errors
/// [`Error::Usage`] when the moderator design cannot be realised at the
/// planned k; [`Error::Model`] when no simulated data set can be fitted.
pub fn build(req: &PlanRequest) -> Result<PlanReport> {
    let plan = &req.plan;
    let info = plan.information().ok_or_else(|| match &plan.design {
        ModeratorDesign::Values(_) => Error::usage(
            "--moderator-values",
            format!("the planned values do not vary across the first {} sites; the moderator needs at least two different values", plan.k),
        ),
        d => Error::usage(
            "--share",
            format!("the design ({}) cannot be realised with k = {} sites: each level needs at least one site", design_words(d), plan.k),
        ),
    })?;
    let mut notes = Vec::new();
    if let Some(ns) = &plan.n_sites {
        if ns.len() != plan.k {
            notes.push(format!(
                "the {} planned site sizes are repeated in order to make k = {} sites (and every k of the table and search)",
                ns.len(),
                plan.k
            ));
        }
    }
    if let ModeratorDesign::Values(v) = &plan.design {
        if v.len() != plan.k {
            notes.push(format!(
                "the {} planned moderator values are repeated in order to make k = {} sites (and every k of the table and search)",
                v.len(),
                plan.k
            ));
        }
    }
    let (power, power_method, simulation, f_approx) = match plan.test {
        PlanTest::Z => (
            plan.z_power().unwrap_or(f64::NAN),
            "noncentral chi-square (exact for the z test with τ² known)".to_string(),
            None,
            None,
        ),
        PlanTest::Kh => {
            let sim = simulate_kh(plan, req.simulations, req.seed)?;
            if sim.failed_fits > 0 {
                notes.push(format!(
                    "{} of {} simulated data sets could not be fitted and are left out of the power",
                    sim.failed_fits, sim.simulations
                ));
            }
            (
                sim.power,
                format!(
                    "simulation: {} data sets, REML + Knapp–Hartung, seed {}",
                    sim.simulations, sim.seed
                ),
                Some(sim),
                plan.f_power_approx().filter(|p| p.is_finite()),
            )
        }
    };
    let huge = plan
        .noncentrality()
        .is_some_and(|l| l > crate::tolerance::NONCENTRAL_LAMBDA_MAX);
    if huge {
        notes.push(format!(
            "the noncentrality λ exceeds {:e} (the effect is over a thousand standard errors): power is essentially 1, and the noncentral F approximation is not computed there",
            crate::tolerance::NONCENTRAL_LAMBDA_MAX
        ));
    }
    let (mut k_needed, mut n_needed) = (None, None);
    if let Some(target) = req.target_power {
        match req.solve {
            SolveFor::K => {
                k_needed = solve_k(plan, target, req.max_k);
                if k_needed.is_none() && !huge {
                    let mut why = format!(
                        "no number of sites up to {} reaches power {target}",
                        req.max_k
                    );
                    if plan.tau2 > 0.0 {
                        why.push_str("; the residual τ² may dominate the within-site variance, or the effect is small for this design");
                    }
                    notes.push(why);
                }
            }
            SolveFor::N => {
                n_needed = solve_n(plan, target, req.max_n);
                if n_needed.is_none() {
                    let ceiling = power_ceiling_in_n(plan).unwrap_or(f64::NAN);
                    notes.push(format!(
                        "no per-site n up to {} reaches power {target} with k = {}: with τ² = {} even infinitely large sites give power {:.3} at most; add sites instead",
                        req.max_n, plan.k, plan.tau2, ceiling
                    ));
                }
            }
        }
        if plan.test == PlanTest::Kh {
            notes.push("with --test kh the sites (or n) needed come from the noncentral F approximation, not from simulation; check the simulated power at that value by running again with it".into());
        }
    }
    let upper = [2 * plan.k, k_needed.map_or(0, |k| k + k / 4 + 1), 10]
        .into_iter()
        .max()
        .unwrap_or(10)
        .min(req.max_k.max(plan.k));
    let table = table_ks(upper, plan.k, k_needed)
        .into_iter()
        .filter_map(|k| {
            plan.with_k(k)
                .quick_power()
                .map(|power| PowerRow { k, power })
        })
        .collect();
    Ok(PlanReport {
        measure: plan.measure.id(),
        k: plan.k,
        n: (plan.measure.uses_n() && plan.n_sites.is_none()).then_some(plan.n),
        n_sites: plan.n_sites.clone(),
        within_variance: {
            let v = plan.variances();
            v.iter().sum::<f64>() / v.len() as f64
        },
        tau2: plan.tau2,
        moderator: design_words(&plan.design),
        moderator_effect: plan.beta,
        alpha: plan.alpha,
        test: plan.test,
        se: 1.0 / info.sqrt(),
        noncentrality: plan.beta * plan.beta * info,
        power,
        power_method,
        simulation,
        power_f_approximation: f_approx,
        target_power: req.target_power,
        k_needed,
        n_needed,
        max_k: req.max_k,
        table,
        table_method: match plan.test {
            PlanTest::Z => "noncentral chi-square (exact for the z test)".into(),
            PlanTest::Kh => "noncentral F approximation (quick estimate, not simulated)".into(),
        },
        notes,
        cautions: vec![
            "The power rests on the assumed τ² and moderator effect; if the true residual heterogeneity is larger or the effect smaller, the power is lower. Try a range of values.".into(),
            "A moderator compared across sites is observational: sites differ in more than the moderator, so a detected difference is an association, not a causal effect.".into(),
            "These numbers support a decision; the decision rests with the people responsible for the study.".into(),
        ],
    })
}

/// About 12 values of k from 3 to `upper`, always including the planned k
/// and the k needed.
fn table_ks(upper: usize, planned: usize, needed: Option<usize>) -> Vec<usize> {
    let upper = upper.max(3);
    let step = ((upper - 3) / 11).max(1);
    let mut ks: Vec<usize> = (3..=upper).step_by(step).collect();
    ks.push(upper);
    ks.push(planned);
    ks.extend(needed);
    ks.sort_unstable();
    ks.dedup();
    ks
}

/// The terminal report.
pub fn render_text(r: &PlanReport) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let test = match r.test {
        PlanTest::Z => "Wald z test",
        PlanTest::Kh => "Knapp–Hartung t test (REML)",
    };
    let _ = writeln!(
        s,
        "Power of the moderator test ({test}, two-sided alpha = {})",
        r.alpha
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "With k = {} sites, the {} is detected with power {:.3}{}.",
        r.k,
        if r.moderator_effect == 0.0 {
            "zero moderator effect (power = error rate)".to_string()
        } else {
            format!("moderator effect {}", r.moderator_effect)
        },
        r.power,
        r.simulation.map_or(String::new(), |s| format!(
            " (Monte-Carlo SE {:.3})",
            s.monte_carlo_se
        ))
    );
    if let Some(f) = r.power_f_approximation {
        let _ = writeln!(
            s,
            "Quick estimate from the noncentral F approximation: {f:.3} (approximation)."
        );
    }
    let _ = writeln!(s, "  power from     {}", r.power_method);
    let _ = writeln!(
        s,
        "  measure        {}{}",
        r.measure,
        match (&r.n, &r.n_sites) {
            (Some(n), _) => format!(", n = {n} per site"),
            (None, Some(ns)) => format!(
                ", n per site {}",
                ns.iter()
                    .map(|n| n.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            _ => String::new(),
        }
    );
    let _ = writeln!(
        s,
        "  within-site v  {:.6}{}",
        r.within_variance,
        if r.n_sites.is_some() {
            " (mean over sites)"
        } else {
            ""
        }
    );
    let _ = writeln!(s, "  residual τ²    {}", r.tau2);
    let _ = writeln!(s, "  moderator      {}", r.moderator);
    let _ = writeln!(
        s,
        "  SE of effect   {:.5} (noncentrality {:.4})",
        r.se, r.noncentrality
    );
    if let Some(t) = r.target_power {
        if let Some(k) = r.k_needed {
            let _ = writeln!(s, "\nSites needed for power {t}: k = {k}.");
        }
        if let Some(n) = r.n_needed {
            let _ = writeln!(
                s,
                "\nParticipants per site needed for power {t} with k = {}: n = {n}.",
                r.k
            );
        }
    }
    let _ = writeln!(s, "\nPower by number of sites ({}):", r.table_method);
    let _ = writeln!(s, "  {:>6}  {:>7}", "k", "power");
    for row in &r.table {
        let _ = writeln!(s, "  {:>6}  {:>7.3}", row.k, row.power);
    }
    if !r.notes.is_empty() {
        let _ = writeln!(s, "\nNotes:");
        for n in &r.notes {
            let _ = writeln!(s, "  - {n}");
        }
    }
    let _ = writeln!(s, "\nCautions:");
    for c in &r.cautions {
        let _ = writeln!(s, "  - {c}");
    }
    s
}

/// The power curve over k (from the report's table) as SVG or PNG, with the
/// target power as a dashed line and the planned k marked.
///
/// # Errors
/// Drawing errors.
pub fn curve_plot(r: &PlanReport, format: Format) -> Result<Vec<u8>> {
    let (w, h) = (720u32, 460u32);
    let mut sc = Scene::new(w, h);
    sc.rect(0.0, 0.0, w as f64, h as f64, palette::PAPER);
    let kmin = r.table.first().map_or(3, |p| p.k) as f64;
    let kmax = r.table.last().map_or(10, |p| p.k) as f64;
    let frame = Frame {
        x0: 80.0,
        y0: 90.0,
        x1: w as f64 - 30.0,
        y1: h as f64 - 70.0,
        xa: Axis::new(kmin, kmax, false, 8).snapped(),
        ya: Axis::new(0.0, 1.0, false, 5).snapped(),
        y_down: false,
    };
    frame.grid(&mut sc);
    let fit =
        |text: &str, size: f64| crate::plot::scene::fit_text(text, size, w as f64 - 2.0 * 20.0);
    sc.text(
        (20.0, 20.0),
        fit(
            "Power of the moderator test by number of sites",
            size::TITLE,
        ),
        size::TITLE,
        palette::INK,
        Align::Left,
    );
    sc.text(
        (20.0, 44.0),
        fit(
            match r.test {
                PlanTest::Z => "z test: exact power from the noncentral chi-square",
                PlanTest::Kh => {
                    "Knapp–Hartung test: noncentral F approximation (a quick estimate, not simulated)"
                }
            },
            size::SMALL,
        ),
        size::SMALL,
        palette::MUTED,
        Align::Left,
    );
    if let Some(t) = r.target_power {
        let y = frame.y(t);
        sc.dashed(
            vec![(frame.x0, y), (frame.x1, y)],
            palette::MUTED,
            1,
            (6.0, 4.0),
        );
        sc.text(
            (frame.x1, y - 10.0),
            format!("target {t}"),
            size::SMALL,
            palette::MUTED,
            Align::Right,
        );
    }
    let pts: Vec<(f64, f64)> = r
        .table
        .iter()
        .map(|p| (frame.x(p.k as f64), frame.y(p.power)))
        .collect();
    sc.line(pts.clone(), palette::STUDY, 2);
    for p in pts {
        sc.circle(p, 3.5, Some((palette::STUDY, 1.0)), None);
    }
    let x = frame.x(r.k as f64);
    sc.dashed(
        vec![(x, frame.y0), (x, frame.y1)],
        palette::POOLED,
        1,
        (3.0, 3.0),
    );
    sc.text(
        (x + 4.0, frame.y1 - 12.0),
        format!("planned k = {}", r.k),
        size::SMALL,
        palette::POOLED,
        Align::Left,
    );
    frame.axes(&mut sc, "number of sites k", "power");
    encode(&sc, format)
}
