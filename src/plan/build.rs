//! The planning job: a [`PlanRequest`] built into a [`PlanReport`] (the
//! power at the planned k, the k or n needed, the table over k, and the
//! notes and cautions that go with them).

use super::simulate::{within_budget, MAX_SIMULATED_SITE_EFFECTS};
use super::{
    confirm_k, no_progress, power_ceiling_in_n, simulate, solve_k, solve_n, ModeratorDesign, Plan,
};
use crate::error::{Error, Result};
use crate::result::plan::{KNeeded, PlanReport, PlanTest, PowerRow, Simulated, SimulatedK};
use crate::support::flag::Flag;
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
    /// Notes on how the input was read (the decimal mark of a
    /// `--moderator-values` file), shown first among the report's notes.
    pub input_notes: Vec<String>,
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

/// What the numbers of every plan rest on.
const CAUTIONS: [&str; 3] = [
    "The power rests on the assumed τ² and moderator effect; if the true residual heterogeneity is larger or the effect smaller, the power is lower. Try a range of values.",
    "A moderator compared across sites is observational: sites differ in more than the moderator, so a detected difference is an association, not a causal effect.",
    "These numbers support a decision; the decision rests with the people responsible for the study.",
];

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
    let info = information(plan)?;
    let mut notes = req.input_notes.clone();
    notes.extend(repetition_notes(plan));
    let simulation = match req.simulations {
        Some(n) if within_budget(plan.k, n) => {
            Some(simulate_planned(plan, n, req.seed, progress, &mut notes)?)
        }
        Some(n) => {
            notes.push(beyond_budget_note(plan.k, n, "the power at this k"));
            None
        }
        None => None,
    };
    let power_analytic = plan.quick_power().filter(|p| p.is_finite());
    let power_analytic_method = match plan.test {
        PlanTest::Z => "noncentral chi-square (exact for the z test with τ² known)",
        PlanTest::Kh => "noncentral F approximation (a quick estimate)",
    }
    .to_string();
    let (power, power_method, f_approx) = match (plan.test, &simulation) {
        (PlanTest::Kh, Some(sim)) => (sim.power, simulation_words(plan, sim), power_analytic),
        _ => (
            power_analytic.unwrap_or(f64::NAN),
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
    let (k_needed, n_needed) = solve_target(req, huge, &mut notes);
    let k_needed_simulated = confirm_needed_k(req, k_needed, progress, &mut notes)?;
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
        k_needed_answer: k_answer(plan.test, req, k_needed, k_needed_simulated.as_ref()),
        k_needed,
        k_needed_simulated,
        n_needed,
        max_k: req.max_k,
        table: power_table(req, k_needed),
        table_method: match plan.test {
            PlanTest::Z => "noncentral chi-square (exact for the z test)".into(),
            PlanTest::Kh => "noncentral F approximation (quick estimate, not simulated)".into(),
        },
        notes,
        cautions: CAUTIONS.map(String::from).to_vec(),
    })
}

/// The information Σ w_i (x_i − x̄_w)² at the planned k.
///
/// # Errors
/// [`Error::Usage`] when the design cannot be realised at the planned k.
fn information(plan: &Plan) -> Result<f64> {
    plan.information().ok_or_else(|| match &plan.design {
        ModeratorDesign::Values(_) => Error::usage(
            Flag::ModeratorValues,
            format!("the planned values do not vary across the first {} sites; the moderator needs at least two different values", plan.k),
        ),
        d => Error::usage(
            Flag::Share,
            format!("the design ({}) cannot be realised with k = {} sites: each level needs at least one site", design_words(d), plan.k),
        ),
    })
}

/// Notes on planned site sizes or moderator values repeated to make k sites.
fn repetition_notes(plan: &Plan) -> Vec<String> {
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
    notes
}

/// The simulation at the planned k, with a note when some data sets could
/// not be fitted.
///
/// # Errors
/// Those of [`simulate`].
fn simulate_planned(
    plan: &Plan,
    simulations: usize,
    seed: u64,
    progress: &(dyn Fn(u64) + Sync),
    notes: &mut Vec<String>,
) -> Result<Simulated> {
    let sim = simulate(plan, simulations, seed, progress)?;
    if sim.failed_fits > 0 {
        notes.push(format!(
            "{} of {} simulated data sets could not be fitted and are left out of the power",
            sim.failed_fits, sim.simulations
        ));
    }
    Ok(sim)
}

/// Why a simulation was not run: `k` sites × `simulations` data sets is
/// beyond [`MAX_SIMULATED_SITE_EFFECTS`]; `what` is what it would have
/// checked.
fn beyond_budget_note(k: usize, simulations: usize, what: &str) -> String {
    format!(
        "{what} is not checked by simulation: {simulations} data sets of {k} sites is more than the {} million simulated site effects pondus simulates at one k. With this many sites the Knapp–Hartung test is practically the z test, and the noncentral F approximation shown is close to exact; to simulate anyway, lower {} so that k × N stays within that number",
        MAX_SIMULATED_SITE_EFFECTS / 1_000_000,
        Flag::Simulate
    )
}

/// How a simulated power was obtained, in words.
fn simulation_words(plan: &Plan, s: &Simulated) -> String {
    format!(
        "simulation: {} data sets, REML + {}, seed {}",
        s.simulations,
        match plan.test {
            PlanTest::Z => "Wald z",
            PlanTest::Kh => "Knapp–Hartung",
        },
        s.seed
    )
}

/// The k needed (solving for k) or the n needed (solving for n) from the
/// closed form, with a note when the target is out of reach.
fn solve_target(
    req: &PlanRequest,
    huge: bool,
    notes: &mut Vec<String>,
) -> (Option<usize>, Option<f64>) {
    let plan = &req.plan;
    let (mut k_needed, mut n_needed) = (None, None);
    let Some(target) = req.target_power else {
        return (k_needed, n_needed);
    };
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
        notes.push(format!("with {} kh the n needed comes from the noncentral F approximation, not from simulation; check the simulated power at that value by running again with it", Flag::Test));
    }
    (k_needed, n_needed)
}

/// For `kh` with a target power (solving for k): the k needed confirmed by
/// simulation, starting from the approximation's `k_needed`, with a note
/// on how the search ended.
///
/// # Errors
/// Those of [`confirm_k`].
fn confirm_needed_k(
    req: &PlanRequest,
    k_needed: Option<usize>,
    progress: &(dyn Fn(u64) + Sync),
    notes: &mut Vec<String>,
) -> Result<Option<SimulatedK>> {
    let plan = &req.plan;
    let (PlanTest::Kh, Some(target), SolveFor::K, Some(n)) =
        (plan.test, req.target_power, req.solve, req.simulations)
    else {
        return Ok(None);
    };
    // Start from the approximation's k, or from the planned k when it
    // found none (or could not be computed).
    let start = k_needed.unwrap_or(plan.k);
    if !within_budget(start.clamp(3, req.max_k), n) {
        notes.push(if start == plan.k && !within_budget(plan.k, n) {
            "the k needed is not checked by simulation either, for the same reason".to_string()
        } else {
            beyond_budget_note(start, n, "the k needed")
        });
        return Ok(None);
    }
    let c = confirm_k(plan, target, start, req.max_k, n, req.seed, progress)?;
    match (c.k, c.bracketed) {
        // The answer and its check are the report's `k_needed_answer`.
        (Some(_), true) => {}
        (Some(k), false) => notes.push(format!(
            "simulation reached the target at k = {k} but the search stopped after {} simulated values of k before confirming that k − 1 falls short",
            c.evaluated.len()
        )),
        (None, _) => notes.push(format!(
            "no simulated k reached power {target} within {} simulated values of k (up to {} {})",
            c.evaluated.len(), Flag::MaxK, req.max_k
        )),
    }
    Ok(Some(c))
}

/// The one answer for k (solving for k with a target power): for `kh`
/// the simulated k, the approximation's k as its check; for `z` the exact
/// noncentral chi-square k.
fn k_answer(
    test: PlanTest,
    req: &PlanRequest,
    k_needed: Option<usize>,
    simulated: Option<&SimulatedK>,
) -> Option<KNeeded> {
    if req.target_power.is_none() || req.solve != SolveFor::K {
        return None;
    }
    Some(match (test, simulated) {
        (PlanTest::Kh, Some(c)) => KNeeded {
            k: c.k,
            at_most: c.k.is_some() && !c.bracketed,
            method: "simulation".into(),
            check_k: k_needed,
            check_method: Some("noncentral F approximation".into()),
        },
        (PlanTest::Kh, None) => KNeeded {
            k: k_needed,
            at_most: false,
            method: "noncentral F approximation".into(),
            check_k: None,
            check_method: None,
        },
        (PlanTest::Z, _) => KNeeded {
            k: k_needed,
            at_most: false,
            method: "noncentral chi-square".into(),
            check_k: None,
            check_method: None,
        },
    })
}

/// The quick power over k: about 12 values of k from 3 to twice the
/// planned k (further when the k needed is larger), within `max_k`.
fn power_table(req: &PlanRequest, k_needed: Option<usize>) -> Vec<PowerRow> {
    let plan = &req.plan;
    let upper = [2 * plan.k, k_needed.map_or(0, |k| k + k / 4 + 1), 10]
        .into_iter()
        .max()
        .unwrap_or(10)
        .min(req.max_k.max(plan.k));
    table_ks(upper, plan.k, k_needed)
        .into_iter()
        .filter_map(|k| {
            plan.with_k(k)
                .quick_power()
                .map(|power| PowerRow { k, power })
        })
        .collect()
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
