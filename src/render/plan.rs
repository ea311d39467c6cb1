//! The terminal text of `pondus plan`: a pure function of the
//! [`PlanReport`].

use crate::result::plan::{PlanReport, PlanTest};
use std::fmt::Write;

/// The terminal report.
pub fn render(r: &PlanReport) -> String {
    let mut s = String::new();
    headline(&mut s, r);
    simulation(&mut s, r);
    details(&mut s, r);
    needed(&mut s, r);
    table_and_notes(&mut s, r);
    s
}

/// The test, and the power at the planned k.
fn headline(s: &mut String, r: &PlanReport) {
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
}

/// Analytic and simulated power side by side, when there is a simulation.
fn simulation(s: &mut String, r: &PlanReport) {
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
}

/// What the power rests on: measure, variances, design, SE.
fn details(s: &mut String, r: &PlanReport) {
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
}

/// The k or n needed for the target power, when one is given.
fn needed(s: &mut String, r: &PlanReport) {
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
}

/// The power table over k, the notes and the cautions.
fn table_and_notes(s: &mut String, r: &PlanReport) {
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
}
