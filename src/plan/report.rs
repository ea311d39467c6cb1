//! The result of `pondus plan`: a plain `Serialize` struct (its field docs
//! are the JSON schema), the terminal text, and the power curve plot.

use super::{
    confirm_k, no_progress, power_ceiling_in_n, simulate, solve_k, solve_n, ModeratorDesign, Plan,
    PlanTest, Simulated, SimulatedK,
};
use crate::error::{Error, Result};
use crate::render::figure::scene::{Align, Scene};
use crate::render::figure::{encode, palette, size, Axis, Format, Frame};
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
    /// Simulated data sets, or None for no simulation (the z test without
    /// `--simulate`); `--test kh` always simulates.
    pub simulations: Option<usize>,
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
    /// The analytic power at the planned k: noncentral chi-square for `z`,
    /// the noncentral F approximation for `kh` (null when not computable).
    pub power_analytic: Option<f64>,
    /// How `power_analytic` was obtained.
    pub power_analytic_method: String,
    /// The simulation at the planned k (realised rejection rate, Monte-Carlo
    /// SE, seed, failures): always for `kh`, with `--simulate` for `z`.
    pub simulation: Option<Simulated>,
    /// For `kh`: the noncentral F approximation at the planned k (a quick estimate only).
    pub power_f_approximation: Option<f64>,
    /// The target power, when given.
    pub target_power: Option<f64>,
    /// Smallest k reaching the target power (null when none up to `max_k`, or with `--solve n`):
    /// from the closed form (exact for `z`, the noncentral F approximation for `kh`).
    pub k_needed: Option<usize>,
    /// For `kh` with `--target-power` (solving for k): the k needed
    /// confirmed by simulation, starting from `k_needed`.
    pub k_needed_simulated: Option<SimulatedK>,
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
    build_with_progress(req, &no_progress)
}

/// [`build`], calling `progress` with the number of simulated data sets of
/// each finished block (for a progress bar).
///
/// # Errors
/// Those of [`build`].
pub fn build_with_progress(
    req: &PlanRequest,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<PlanReport> {
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
    let simulation = match req.simulations {
        Some(n) => {
            let sim = simulate(plan, n, req.seed, progress)?;
            if sim.failed_fits > 0 {
                notes.push(format!(
                    "{} of {} simulated data sets could not be fitted and are left out of the power",
                    sim.failed_fits, sim.simulations
                ));
            }
            Some(sim)
        }
        None => None,
    };
    let power_analytic = plan.quick_power().filter(|p| p.is_finite());
    let power_analytic_method = match plan.test {
        PlanTest::Z => "noncentral chi-square (exact for the z test with τ² known)",
        PlanTest::Kh => "noncentral F approximation (a quick estimate)",
    }
    .to_string();
    let sim_words = |s: &Simulated| {
        format!(
            "simulation: {} data sets, REML + {}, seed {}",
            s.simulations,
            match plan.test {
                PlanTest::Z => "Wald z",
                PlanTest::Kh => "Knapp–Hartung",
            },
            s.seed
        )
    };
    let (power, power_method, f_approx) = match (plan.test, &simulation) {
        (PlanTest::Kh, Some(sim)) => (sim.power, sim_words(sim), power_analytic),
        _ => (
            plan.z_power().unwrap_or(f64::NAN),
            power_analytic_method.clone(),
            None,
        ),
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
        if plan.test == PlanTest::Kh && req.solve == SolveFor::N {
            notes.push("with --test kh the n needed comes from the noncentral F approximation, not from simulation; check the simulated power at that value by running again with it".into());
        }
    }
    let mut k_needed_simulated = None;
    if let (PlanTest::Kh, Some(target), SolveFor::K, Some(n)) =
        (plan.test, req.target_power, req.solve, req.simulations)
    {
        // Start from the approximation's k, or from the planned k when it
        // found none (or could not be computed).
        let start = k_needed.unwrap_or(plan.k);
        let c = confirm_k(plan, target, start, req.max_k, n, req.seed, progress)?;
        match (c.k, c.bracketed) {
            (Some(k), true) => notes.push(format!(
                "the noncentral F approximation proposes k = {}; simulation ({} data sets per k, seed {}) puts the crossing at k = {k}",
                k_needed.map_or("none".into(), |k| k.to_string()), n, req.seed
            )),
            (Some(k), false) => notes.push(format!(
                "simulation reached the target at k = {k} but the search stopped after {} simulated values of k before confirming that k − 1 falls short",
                c.evaluated.len()
            )),
            (None, _) => notes.push(format!(
                "no simulated k reached power {target} within {} simulated values of k (up to --max-k {})",
                c.evaluated.len(), req.max_k
            )),
        }
        k_needed_simulated = Some(c);
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
        power_analytic,
        power_analytic_method,
        simulation,
        power_f_approximation: f_approx,
        target_power: req.target_power,
        k_needed,
        k_needed_simulated,
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
        r.simulation
            .filter(|_| r.test == PlanTest::Kh)
            .map_or(String::new(), |s| format!(
                " (Monte-Carlo SE {:.3})",
                s.monte_carlo_se
            ))
    );
    if let Some(sim) = &r.simulation {
        let _ = writeln!(s, "\nAnalytic and simulated power side by side:");
        let _ = writeln!(
            s,
            "  analytic   {:>7}  {}",
            r.power_analytic
                .map_or("n/a".to_string(), |p| format!("{p:.3}")),
            r.power_analytic_method
        );
        let _ = writeln!(
            s,
            "  simulated  {:>7.3}  Monte-Carlo SE {:.3}; {} data sets, seed {}{}",
            sim.power,
            sim.monte_carlo_se,
            sim.simulations,
            sim.seed,
            if sim.failed_fits > 0 {
                format!(", {} fits failed", sim.failed_fits)
            } else {
                String::new()
            }
        );
        let _ = writeln!(s);
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
            match r.test {
                PlanTest::Z => {
                    let _ = writeln!(s, "\nSites needed for power {t}: k = {k}.");
                }
                PlanTest::Kh => {
                    let _ = writeln!(
                        s,
                        "\nSites needed for power {t}: k = {k} (noncentral F approximation)."
                    );
                }
            }
        }
        if let Some(c) = &r.k_needed_simulated {
            let _ = match (c.k, c.bracketed) {
                (Some(3), true) => writeln!(
                    s,
                    "Sites needed for power {t}: k = 3 (simulated; 3 is the smallest k allowed)."
                ),
                (Some(k), true) => writeln!(
                    s,
                    "Sites needed for power {t}: k = {k} (simulated; confirmed by simulating k − 1)."
                ),
                (Some(k), false) => writeln!(
                    s,
                    "Sites needed for power {t}: k ≤ {k} (simulated; the search stopped before confirming k − 1)."
                ),
                (None, _) => writeln!(
                    s,
                    "Sites needed for power {t}: not reached by simulation in {} values of k.",
                    c.evaluated.len()
                ),
            };
            let _ = writeln!(
                s,
                "  simulated k: {} (at most {} values of k are simulated)",
                c.evaluated
                    .iter()
                    .map(|e| format!("{} → {:.3}", e.k, e.power))
                    .collect::<Vec<_>>()
                    .join(", "),
                c.max_evaluations
            );
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
    encode(&curve_scene(r), format)
}

/// The power curve as an inline SVG figure for the HTML report.
///
/// # Errors
/// Drawing errors.
pub fn curve_figure(r: &PlanReport) -> Result<crate::render::figure::PageFigure> {
    Ok(crate::render::figure::PageFigure {
        kind: "power",
        title: "Power of the moderator test by number of sites".into(),
        description: format!(
            "Power curve: the power of the moderator test for 3 to {} sites, with the target \
             power as a dashed line and the planned {} sites marked.",
            r.table.last().map_or(r.k, |p| p.k),
            r.k
        ),
        svg: crate::render::figure::scene::encode_inline(&curve_scene(r))?,
    })
}

fn curve_scene(r: &PlanReport) -> Scene {
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
    let fit = |text: &str, size: f64| {
        crate::render::figure::scene::fit_text(text, size, w as f64 - 2.0 * 20.0)
    };
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
    sc
}
