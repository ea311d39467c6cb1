//! The terminal text of `pondus plan`: a pure function of the
//! [`PlanReport`].

use super::layout::{bullets, fact, heading, title, trim_lines, MIN_TEXT_WIDTH, TEXT_WIDTH};
use crate::result::plan::{KNeeded, PlanReport, PlanTest};
use std::fmt::Write;

/// The terminal report at the default width ([`TEXT_WIDTH`]).
pub fn render(r: &PlanReport) -> String {
    render_at(r, TEXT_WIDTH)
}

/// The terminal report wrapped at `width` characters (the common look of
/// the terminal reports, [`super::layout`]).
pub fn render_at(r: &PlanReport, width: usize) -> String {
    let width = width.max(MIN_TEXT_WIDTH);
    let mut s = String::new();
    title(&mut s, "power of the moderator test", width);
    details(&mut s, r, width);
    headline(&mut s, r);
    needed(&mut s, r);
    table(&mut s, r);
    bullets(&mut s, "Notes", &r.notes, width);
    bullets(&mut s, "Cautions", &r.cautions, width);
    trim_lines(&s)
}

/// The test and what the power rests on: measure, variances, design, SE.
fn details(s: &mut String, r: &PlanReport, width: usize) {
    let test = match r.test {
        PlanTest::Z => "Wald z test",
        PlanTest::Kh => "Knapp–Hartung t test (REML)",
    };
    fact(
        s,
        "Test",
        &format!("{test}, two-sided α = {}", r.alpha),
        width,
    );
    let measure = format!(
        "{}{}",
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
    fact(s, "Measure", &measure, width);
    let variances = format!(
        "within-site v {:.6}{}; residual τ² {}",
        r.within_variance,
        if r.n_sites.is_some() {
            " (mean over sites)"
        } else {
            ""
        },
        r.tau2
    );
    fact(s, "Variances", &variances, width);
    fact(s, "Moderator", &r.moderator, width);
    let effect = if r.moderator_effect == 0.0 {
        "0 (the power is then the error rate)".to_string()
    } else {
        r.moderator_effect.to_string()
    };
    fact(
        s,
        "Effect",
        &format!(
            "{effect}; its SE {:.5} (noncentrality {:.4})",
            r.se, r.noncentrality
        ),
        width,
    );
    let _ = writeln!(s);
}

/// The power at the planned k, and analytic and simulated power side by
/// side when there is a simulation.
fn headline(s: &mut String, r: &PlanReport) {
    heading(s, &format!("Power with k = {} sites", r.k));
    let _ = writeln!(s, "  {:.3}, from {}", r.power, r.power_method);
    if let Some(sim) = &r.simulation {
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
    }
    let _ = writeln!(s);
}

/// The k or n needed for the target power, when one is given: one answer
/// for k, the method it comes from, and the other method as a check.
fn needed(s: &mut String, r: &PlanReport) {
    let Some(t) = r.target_power else {
        return;
    };
    if let Some(a) = &r.k_needed_answer {
        heading(s, &format!("Sites needed for power {t}"));
        let _ = writeln!(s, "  {}", k_answer_words(a, r));
        if let Some(c) = &r.k_needed_simulated {
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
        if let Some(m) = &a.check_method {
            let _ = writeln!(
                s,
                "  check: the {m} gives {}",
                a.check_k.map_or_else(
                    || "no k within the bound".to_string(),
                    |k| format!("k = {k}")
                )
            );
        }
        let _ = writeln!(s);
    }
    if let Some(n) = r.n_needed {
        heading(s, &format!("Participants per site needed for power {t}"));
        let _ = writeln!(s, "  n = {n} with k = {} sites", r.k);
        let _ = writeln!(s);
    }
}

/// The answer for k in words: "k = 35, from simulation (…)".
pub fn k_answer_words(a: &KNeeded, r: &PlanReport) -> String {
    let how = match (&r.k_needed_simulated, a.method.as_str()) {
        (Some(c), "simulation") => {
            let sims = r.simulation.map_or(0, |s| s.simulations);
            let seed = r.simulation.map_or(0, |s| s.seed);
            let confirm = match (c.k, c.bracketed) {
                (Some(3), true) => "; 3 is the smallest k allowed".to_string(),
                (Some(_), true) => "; confirmed by simulating k − 1".to_string(),
                (Some(_), false) => "; the search stopped before confirming k − 1".to_string(),
                (None, _) => String::new(),
            };
            format!("simulation ({sims} data sets per k, seed {seed}{confirm})")
        }
        (_, m) => format!("the {m}"),
    };
    match a.k {
        Some(k) if a.at_most => format!("k ≤ {k}, from {how}"),
        Some(k) => format!("k = {k}, from {how}"),
        None => format!("not reached within k = {}, by {how}", r.max_k),
    }
}

/// The power table over k.
fn table(s: &mut String, r: &PlanReport) {
    heading(
        s,
        &format!("Power by number of sites, from the {}", r.table_method),
    );
    let _ = writeln!(s, "  {:>6}  {:>7}", "k", "power");
    for row in &r.table {
        let _ = writeln!(s, "  {:>6}  {:>7.3}", row.k, row.power);
    }
    let _ = writeln!(s);
}
