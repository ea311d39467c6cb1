//! The result of `pondus plan`: plain `Serialize` structs (their field docs
//! are the JSON schema) that the terminal text, the HTML page and the power
//! curve read.

use serde::Serialize;

/// The test of the moderator coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum PlanTest {
    /// Wald z test with τ² taken as known: power from the noncentral chi-square.
    Z,
    /// Knapp–Hartung t test after REML: power by simulation.
    Kh,
}

/// One row of the power table.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct PowerRow {
    /// Number of sites.
    pub k: usize,
    /// Power from the closed form: exact for `z`, the noncentral F
    /// approximation for `kh` (see `table_method`).
    pub power: f64,
}

/// The result of a power simulation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
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

/// The simulated check of the k proposed by the noncentral F approximation.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
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

/// The one answer for the number of sites needed (`k_needed_answer`): the
/// k the report stands by, the method it comes from, and the other
/// method's k shown beside it as a check.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
pub struct KNeeded {
    /// The k needed (null when the target is not reached within `max_k`,
    /// or by the simulated values of k).
    pub k: Option<usize>,
    /// Whether `k` is an upper bound only: the simulation reached the
    /// target at `k` but stopped before confirming that k − 1 falls short.
    pub at_most: bool,
    /// The method `k` comes from: `simulation` (Knapp–Hartung test),
    /// `noncentral chi-square` (z test, exact with τ² known).
    pub method: String,
    /// The other method's k, as a check (null when there is no other
    /// method, or it found none).
    pub check_k: Option<usize>,
    /// The method of `check_k` (null without a check).
    pub check_method: Option<String>,
}

/// One simulated k.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct KPower {
    /// Number of sites.
    pub k: usize,
    /// Simulated power.
    pub power: f64,
    /// Its Monte-Carlo SE.
    pub monte_carlo_se: f64,
}

/// The answer of `pondus plan`.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
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
    /// The one answer for k when solving for k with a target power: the
    /// simulated k for `kh` (the noncentral F approximation's `k_needed`
    /// as its check), the exact `k_needed` for `z`. Null with `--solve n`
    /// or without a target power.
    pub k_needed_answer: Option<KNeeded>,
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
