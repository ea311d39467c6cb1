//! `pondus plan`: the power of a moderator test before the data exist, the
//! number of sites (or participants per site) it needs, and the power curve.

use super::outputs::{self, Outputs, Target};
use super::{invocation, json_bytes, report_target, with_progress};
use clap::{Args, ValueEnum};
use pondus::error::{Error, Result};
use pondus::plan::{self, ModeratorDesign, Plan, PlanMeasure, PlanRequest, SolveFor};
use pondus::render;
use pondus::render::figure;
use pondus::result::plan::PlanTest;
use std::path::PathBuf;

/// Measures of `pondus plan`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlanMeasureArg {
    /// Correlations, analysed as Fisher's z (variance 1/(n − 3)); needs --n.
    R,
    /// Hedges' g, two equal groups of n/2, g = 0 for planning (variance 4/n); needs --n.
    Smd,
    /// Unstandardised slopes; needs --variance (the planned se²).
    Slope,
    /// A generic effect; needs --variance (the planned within-study variance).
    Effect,
}

/// Tests of `pondus plan`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlanTestArg {
    /// Knapp–Hartung t test after REML (default, as in `pondus fit`): power by simulation.
    Kh,
    /// Wald z test: exact power from the noncentral chi-square.
    Z,
}

/// What `pondus plan --target-power` solves for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SolveArg {
    /// The number of sites.
    K,
    /// The participants per site, at the planned number of sites (r and smd only).
    N,
}

/// Options of `pondus plan`.
#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("design").required(true).args(["moderator_sd", "share", "moderator_values"])))]
pub struct PlanArgs {
    /// The effect measure of the planned analysis.
    #[arg(help_heading = "Planned design", long, value_enum)]
    pub measure: PlanMeasureArg,
    /// Planned number of sites; with --target-power (solving for k) it may be left out, and the power is then shown at the k the approximation proposes.
    #[arg(
        help_heading = "Planned design",
        long,
        value_name = "K",
        required_unless_present = "target_power"
    )]
    pub k: Option<usize>,
    /// Planned participants per site (r and smd), or a comma-separated list of site sizes (repeated in order up to k).
    #[arg(help_heading = "Planned design", long, value_name = "N[,N...]")]
    pub n: Option<String>,
    /// Planned within-site sampling variance (slope and effect; required for them).
    #[arg(help_heading = "Planned design", long, value_name = "V")]
    pub variance: Option<f64>,
    /// Assumed residual between-site variance τ² (analysis scale).
    #[arg(help_heading = "Planned design", long, value_name = "T")]
    pub tau2: f64,
    /// SD across sites of a numeric moderator (divisor k − 1).
    #[arg(help_heading = "Planned design", long, value_name = "S")]
    pub moderator_sd: Option<f64>,
    /// Share of sites in the second level of a two-level moderator.
    #[arg(help_heading = "Planned design", long, value_name = "P")]
    pub share: Option<f64>,
    /// File of planned moderator values, one number per line (a first non-numeric line is a header); repeated in order when k differs.
    #[arg(help_heading = "Planned design", long, value_name = "FILE")]
    pub moderator_values: Option<PathBuf>,
    /// The decimal mark of the numbers in the --moderator-values file: ',' or '.' [default: '.', or
    /// ',' when the file has unambiguous decimal commas].
    #[arg(
        help_heading = "Planned design",
        long,
        value_name = "MARK",
        value_parser = super::parse_decimal,
        requires = "moderator_values"
    )]
    pub decimal: Option<pondus::input::number::DecimalMark>,
    /// The sheet of a spreadsheet --moderator-values file (its first column is read) [default: the first sheet].
    #[arg(
        help_heading = "Planned design",
        long,
        value_name = "NAME",
        requires = "moderator_values"
    )]
    pub sheet: Option<String>,
    /// Moderator coefficient to detect, on the analysis scale (Fisher z for r, g for smd).
    #[arg(
        help_heading = "Planned design",
        long,
        value_name = "B",
        allow_negative_numbers = true
    )]
    pub moderator_effect: f64,
    /// Two-sided significance level.
    #[arg(
        help_heading = "Test",
        long,
        default_value_t = 0.05,
        allow_negative_numbers = true
    )]
    pub alpha: f64,
    /// The moderator test.
    #[arg(help_heading = "Test", long, value_enum, default_value_t = PlanTestArg::Kh)]
    pub test: PlanTestArg,
    /// Solve for the smallest k (or n, with --solve n) reaching this power.
    #[arg(
        help_heading = "Solving for k or n",
        long,
        value_name = "POWER",
        allow_negative_numbers = true
    )]
    pub target_power: Option<f64>,
    /// What --target-power solves for.
    #[arg(help_heading = "Solving for k or n", long, value_enum, default_value_t = SolveArg::K)]
    pub solve: SolveArg,
    /// Largest number of sites searched.
    #[arg(help_heading = "Solving for k or n", long, default_value_t = 1000)]
    pub max_k: usize,
    /// Largest per-site n searched with --solve n.
    #[arg(help_heading = "Solving for k or n", long, default_value_t = 100_000.0)]
    pub max_n: f64,
    /// Simulate N data sets under the planned design, fit each by REML with the chosen test, and show the realised rejection rate beside the analytic power (--test kh always simulates, default 2000; also confirms the k needed).
    #[arg(
        help_heading = "Simulation",
        long = "simulate",
        visible_alias = "simulations",
        value_name = "N"
    )]
    pub simulate: Option<usize>,
    /// Seed of the simulation [default: 1]; the result does not depend on the number of threads.
    #[arg(help_heading = "Simulation", long, value_name = "S")]
    pub seed: Option<u64>,
    /// Draw the power curve over k into this file (.svg, .png or .pdf).
    #[arg(help_heading = "Outputs", long, value_name = "FILE")]
    pub curve: Option<PathBuf>,
    /// Resolution of a .png curve in dots per inch [default: 150]; 300 or 600 for print.
    #[arg(help_heading = "Outputs", long, value_name = "N")]
    pub dpi: Option<u32>,
    /// Size of the curve's ordinary text (tick labels, key) in points, the em at the figure's physical size of 96 pixels per inch (5 to 30) [default: about 7.6]; the title and axis titles keep their proportions to it, and the figure grows taller when the text needs the room. Applies to --curve and the curve in --report.
    #[arg(
        help_heading = "Outputs",
        long,
        value_name = "PT",
        allow_negative_numbers = true
    )]
    pub font_size: Option<f64>,
    /// Write the result as JSON ('-' for standard output).
    #[arg(help_heading = "Outputs", long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Do not print the terminal report.
    #[arg(help_heading = "Outputs", long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (assumptions, power table, curve, cautions) into this .html file ('-' for standard output).
    #[arg(help_heading = "Outputs", long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Checked settings of a `plan` run.
#[derive(Debug, Clone)]
pub struct PlanRun {
    /// The computation.
    pub request: PlanRequest,
    /// JSON output.
    pub json: Option<Target>,
    /// Power curve output and its format.
    pub curve: Option<(Target, figure::Format)>,
    /// Resolution of a PNG curve.
    pub dpi: u32,
    /// `--font-size` of the curve, in points.
    pub font_size: Option<f64>,
    /// Whether to print the terminal report.
    pub text: bool,
    /// The HTML report's target.
    pub report: Option<Target>,
    /// The command line, quoted for a shell.
    pub invocation: String,
}

/// Simulated data sets for `--test kh` without `--simulate`.
pub const PLAN_DEFAULT_SIMULATIONS: usize = 2000;

/// Largest k accepted by `--k` and `--max-k`.
pub const PLAN_MAX_K: usize = 100_000;

/// An error on `flag` unless `v` is finite and `ok`; `what` says what to give.
fn finite(flag: &str, v: f64, ok: bool, what: &str) -> Result<()> {
    if v.is_finite() && ok {
        Ok(())
    } else {
        Err(Error::usage(flag, format!("{v} is not valid: {what}")))
    }
}

/// The checked measure and site sizes: the measure, the common per-site n
/// (NaN when not used), and the list of site sizes when several are given.
type CheckedMeasure = (PlanMeasure, f64, Option<Vec<f64>>);

/// The checked outputs: JSON, the power curve with its format, the HTML report.
type PlanTargets = (
    Option<Target>,
    Option<(Target, figure::Format)>,
    Option<Target>,
);

impl PlanArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<PlanRun> {
        let uses_n = self.uses_n();
        let name = self.measure_name();
        let (measure, n, n_sites) = self.measure()?;
        if n_sites.is_some() && self.solve == SolveArg::N {
            return Err(Error::usage(
                "--solve",
                "n solves for one common site size; give a single --n with --solve n",
            ));
        }
        if let Some(k) = self.k.filter(|k| !(3..=PLAN_MAX_K).contains(k)) {
            return Err(Error::usage(
                "--k",
                format!("{k} sites: give 3 to {PLAN_MAX_K} (a moderator test needs at least 3)"),
            ));
        }
        if !(3..=PLAN_MAX_K).contains(&self.max_k) {
            return Err(Error::usage("--max-k", format!("give 3 to {PLAN_MAX_K}")));
        }
        finite(
            "--tau2",
            self.tau2,
            self.tau2 >= 0.0,
            "τ² is a variance, 0 or more",
        )?;
        finite(
            "--moderator-effect",
            self.moderator_effect,
            true,
            "give a finite number",
        )?;
        finite(
            "--alpha",
            self.alpha,
            self.alpha > 0.0 && self.alpha <= 0.5,
            "give a level between 0 and 0.5, e.g. --alpha 0.05",
        )?;
        let (design, values_note) = self.design()?;
        if let Some(t) = self.target_power {
            finite(
                "--target-power",
                t,
                t > self.alpha && t < 1.0,
                "give a power above --alpha and below 1, e.g. --target-power 0.8",
            )?;
        } else if self.solve == SolveArg::N {
            return Err(Error::usage("--solve", "applies with --target-power"));
        }
        if self.solve == SolveArg::N && !uses_n {
            return Err(Error::usage(
                "--solve",
                format!(
                    "n applies to --measure r or smd; for {name} the variance is given directly"
                ),
            ));
        }
        finite("--max-n", self.max_n, self.max_n >= 4.0, "give at least 4")?;
        let test = match self.test {
            PlanTestArg::Z => PlanTest::Z,
            PlanTestArg::Kh => PlanTest::Kh,
        };
        let simulations = self.simulations(test)?;
        let (json, curve, report) = self.targets()?;
        let formats: Vec<figure::Format> = curve.iter().map(|(_, f)| *f).collect();
        crate::cli::fit::check_dpi(self.dpi, &formats)?;
        if self.font_size.is_some() && curve.is_none() && report.is_none() {
            return Err(Error::usage(
                "--font-size",
                "applies to the power curve; add --curve FILE.svg (or .png, .pdf) or --report FILE.html",
            ));
        }
        crate::cli::fit::check_font_size(self.font_size)?;
        let mut plan = Plan {
            measure,
            k: self.k.unwrap_or(3),
            n,
            n_sites,
            tau2: self.tau2,
            design,
            beta: self.moderator_effect,
            alpha: self.alpha,
            test,
        };
        plan.k = self.planned_k(&plan)?;
        if plan.information().is_none() {
            return Err(match &plan.design {
                ModeratorDesign::Values(_) => Error::usage(
                    "--moderator-values",
                    format!("the planned values do not vary across the first {} sites; give at least two different values", plan.k),
                ),
                _ => Error::usage(
                    "--share",
                    format!("with k = {} sites a share of {} leaves a level without sites; choose a share between 1/k and 1 − 1/k", plan.k, self.share.unwrap_or(f64::NAN)),
                ),
            });
        }
        Ok(PlanRun {
            request: PlanRequest {
                plan,
                target_power: self.target_power,
                solve: match self.solve {
                    SolveArg::K => SolveFor::K,
                    SolveArg::N => SolveFor::N,
                },
                max_k: self.max_k,
                max_n: self.max_n,
                simulations,
                seed: self.seed.unwrap_or(1),
                input_notes: values_note.into_iter().collect(),
            },
            text: !self.quiet && json != Some(Target::Stdout) && report != Some(Target::Stdout),
            json,
            curve,
            dpi: self.dpi.unwrap_or(figure::DEFAULT_DPI),
            font_size: self.font_size,
            report,
            invocation: invocation(),
        })
    }

    /// The planned number of sites: `--k`, or without it (solving for k)
    /// the smallest k whose quick power reaches `--target-power`, or
    /// `--max-k` when none does; the report's power at the planned k is
    /// then the power at the k needed.
    ///
    /// # Errors
    /// [`Error::Usage`] when `--k` is missing but k is not solved for.
    fn planned_k(&self, plan: &Plan) -> Result<usize> {
        match (self.k, self.target_power, self.solve) {
            (Some(k), _, _) => Ok(k),
            (None, Some(target), SolveArg::K) => {
                Ok(plan::solve_k(plan, target, self.max_k).unwrap_or(self.max_k))
            }
            (None, _, SolveArg::N) => Err(Error::usage(
                "--k",
                "--solve n finds the participants per site for the planned number of sites; give --k",
            )),
            (None, None, SolveArg::K) => Err(Error::usage(
                "--k",
                "give the planned number of sites, or --target-power to solve for it",
            )),
        }
    }

    /// Whether the measure's variance follows from the site size `--n`.
    fn uses_n(&self) -> bool {
        matches!(self.measure, PlanMeasureArg::R | PlanMeasureArg::Smd)
    }

    /// The measure's name as typed.
    fn measure_name(&self) -> String {
        format!("{:?}", self.measure).to_lowercase()
    }

    /// The checked measure with its `--variance` or `--n`.
    ///
    /// # Errors
    /// [`Error::Usage`] for a missing, superfluous or invalid `--variance` or `--n`.
    fn measure(&self) -> Result<CheckedMeasure> {
        let uses_n = self.uses_n();
        let name = self.measure_name();
        let measure = if uses_n {
            if self.variance.is_some() {
                return Err(Error::usage(
                    "--variance",
                    format!("applies to --measure slope or effect; for {name} the variance follows from --n"),
                ));
            }
            match self.measure {
                PlanMeasureArg::R => PlanMeasure::R,
                _ => PlanMeasure::Smd,
            }
        } else {
            let Some(v) = self.variance else {
                return Err(Error::usage(
                    "--variance",
                    format!("--measure {name} needs the planned within-site sampling variance, e.g. --variance 0.01"),
                ));
            };
            finite("--variance", v, v > 0.0, "give a positive variance")?;
            if self.n.is_some() {
                return Err(Error::usage(
                    "--n",
                    format!("applies to --measure r or smd; for {name} give --variance"),
                ));
            }
            match self.measure {
                PlanMeasureArg::Slope => PlanMeasure::Slope { variance: v },
                _ => PlanMeasure::Effect { variance: v },
            }
        };
        let mut n_list = Vec::new();
        if let Some(text) = &self.n {
            for part in text.split(',') {
                let part = part.trim();
                let n: f64 = part.parse().map_err(|_| {
                    Error::usage(
                        "--n",
                        format!("'{part}' is not a number; give e.g. --n 60 or --n 40,60,80"),
                    )
                })?;
                finite(
                    "--n",
                    n,
                    (4.0..=1e9).contains(&n),
                    "participants per site must be at least 4 (and at most 1e9)",
                )?;
                n_list.push(n);
            }
        }
        let (n, n_sites) = match (uses_n, n_list.len()) {
            (true, 0) => {
                return Err(Error::usage(
                    "--n",
                    format!(
                        "--measure {name} needs the planned participants per site, e.g. --n 60"
                    ),
                ))
            }
            (true, 1) => (n_list[0], None),
            (true, _) => (f64::NAN, Some(n_list)),
            (false, _) => (f64::NAN, None),
        };
        Ok((measure, n, n_sites))
    }

    /// The checked moderator design: `--moderator-sd`, `--share` or `--moderator-values`.
    ///
    /// # Errors
    /// [`Error::Usage`] for an invalid value, or an unreadable values file.
    fn design(&self) -> Result<(ModeratorDesign, Option<String>)> {
        let mut note = None;
        let design = match (self.moderator_sd, self.share, &self.moderator_values) {
            (Some(sd), None, None) => {
                finite("--moderator-sd", sd, sd > 0.0, "give a positive SD")?;
                ModeratorDesign::Numeric { sd }
            }
            (None, Some(share), None) => {
                finite("--share", share, share > 0.0 && share < 1.0, "give a share between 0 and 1, e.g. --share 0.5")?;
                ModeratorDesign::TwoLevel { share }
            }
            (None, None, Some(path)) => {
                let (values, decimal) =
                    read_moderator_values(path, self.sheet.as_deref(), self.decimal)?;
                note = decimal;
                ModeratorDesign::Values(values)
            }
            _ => {
                return Err(Error::usage(
                    "--moderator-sd",
                    "give one of --moderator-sd (numeric moderator), --share (two-level moderator) or --moderator-values FILE",
                ))
            }
        };
        Ok((design, note))
    }

    /// The number of simulated data sets: `--simulate`, or the default for `--test kh`.
    ///
    /// # Errors
    /// [`Error::Usage`] for a `--seed` without simulations or a count out of range.
    fn simulations(&self, test: PlanTest) -> Result<Option<usize>> {
        if test == PlanTest::Z && self.simulate.is_none() && self.seed.is_some() {
            return Err(Error::usage(
                "--seed",
                "applies with --simulate N (or --test kh); the z test's analytic power needs no seed",
            ));
        }
        let simulations = match (test, self.simulate) {
            (_, Some(n)) => Some(n),
            (PlanTest::Kh, None) => Some(PLAN_DEFAULT_SIMULATIONS),
            (PlanTest::Z, None) => None,
        };
        if let Some(n) = simulations {
            if !(100..=1_000_000).contains(&n) {
                return Err(Error::usage(
                    "--simulate",
                    format!("{n} data sets: give 100 to 1000000"),
                ));
            }
        }
        Ok(simulations)
    }

    /// The JSON, curve and report targets, checked against the values file and each other.
    ///
    /// # Errors
    /// [`Error::Usage`] for a curve or report of the wrong kind, or clashing outputs.
    fn targets(&self) -> Result<PlanTargets> {
        let json = self.json.as_deref().map(Target::from_arg);
        let curve = match &self.curve {
            Some(p) => Some((
                Target::from_arg(p),
                figure::Format::from_path("--curve", p)?,
            )),
            None => None,
        };
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some((c, _)) = &curve {
            outs.push(("--curve", c));
        }
        let report = self
            .report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()?;
        if let Some(r) = &report {
            outs.push(("--report", r));
        }
        outputs::check_targets(self.moderator_values.as_deref(), &outs)?;
        Ok((json, curve, report))
    }
}

/// Reads planned moderator values: one number per line, blank lines
/// skipped, a first line that is not a number taken as a header; from a
/// spreadsheet (by its name's ending), the first column of `sheet`.
fn read_moderator_values(
    path: &std::path::Path,
    sheet: Option<&str>,
    decimal: Option<pondus::input::number::DecimalMark>,
) -> Result<(Vec<f64>, Option<String>)> {
    const FLAG: &str = "--moderator-values";
    let name = path.display().to_string();
    let cells: Vec<(String, String)> = if pondus::input::sheet::is_spreadsheet(&name) {
        let bytes = pondus::input::Source::File(path.to_path_buf()).read_all()?;
        pondus::input::sheet::first_column(&name, &bytes, sheet)?
            .into_iter()
            .map(|(addr, text)| (format!("cell {addr}"), text))
            .collect()
    } else {
        let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
            path: name.clone(),
            action: "reading",
            source,
        })?;
        text.lines()
            .enumerate()
            .map(|(i, line)| {
                let cell = line.trim().trim_start_matches('\u{feff}').trim();
                (format!("line {}", i + 1), cell.to_string())
            })
            .filter(|(_, c)| !c.is_empty())
            .collect()
    };
    let unit = if pondus::input::sheet::is_spreadsheet(&name) {
        "cell of the first column"
    } else {
        "line"
    };
    let (mark, note) = values_decimal(&name, &cells, decimal)?;
    let mut values = Vec::new();
    for (i, (place, cell)) in cells.iter().enumerate() {
        match pondus::input::number::normalise(cell, mark).parse::<f64>() {
            Ok(v) if v.is_finite() => values.push(v),
            _ if i == 0 => {}
            _ => {
                return Err(Error::usage(
                    FLAG,
                    format!(
                    "{name}, {place}: '{cell}' is not a finite number; give one number per {unit}"
                ),
                ))
            }
        }
    }
    if values.len() < 2 {
        return Err(Error::usage(
            FLAG,
            format!(
                "{}: needs at least two planned values, found {}",
                path.display(),
                values.len()
            ),
        ));
    }
    Ok((values, note))
}

/// The decimal mark of a `--moderator-values` file: forced, or a comma when
/// some value has an unambiguous decimal comma and none a decimal point
/// (the same rule as for data files), with the note that states it.
///
/// # Errors
/// [`Error::Usage`] asking for `--decimal` when the file mixes marks or
/// every comma could separate thousands.
fn values_decimal(
    name: &str,
    cells: &[(String, String)],
    forced: Option<pondus::input::number::DecimalMark>,
) -> Result<(pondus::input::number::DecimalMark, Option<String>)> {
    use pondus::input::number::{DecimalMark, Decision, Detector};
    if let Some(mark) = forced {
        let note = format!(
            "The planned values in {name} were read with '{}' as the decimal mark (--decimal {}).",
            mark.symbol(),
            mark.symbol()
        );
        return Ok((mark, Some(note)));
    }
    let mut d = Detector::default();
    for (i, (_, cell)) in cells.iter().enumerate() {
        d.see(cell, i as u64 + 1, "values");
    }
    let ask = |what: String| {
        Error::usage(
            "--decimal",
            format!("{name}: {what}; run again with --decimal , for decimal commas or --decimal . for decimal points"),
        )
    };
    match d.decide() {
        Decision::Mark(DecimalMark::Point) => Ok((DecimalMark::Point, None)),
        Decision::Mark(mark) => Ok((
            mark,
            Some(format!(
                "The planned values in {name} were read with a decimal comma ({} values such as '{}'); \
                 give --decimal . if the commas separate thousands.",
                d.commas.0 + d.ambiguous.0,
                d.commas.1.map(|e| e.text).unwrap_or_default()
            )),
        )),
        Decision::Mixed { comma, point } => Err(ask(format!(
            "line {} has '{}' with a decimal comma and line {} has '{}' with a point",
            comma.line, comma.text, point.line, point.text
        ))),
        Decision::Ambiguous(cell) => Err(ask(format!(
            "line {}: '{}' could be a decimal comma or a thousands separator",
            cell.line, cell.text
        ))),
    }
}

/// Runs a checked `plan`: compute, draw, write.
///
/// # Errors
/// Any library error.
pub fn run_plan(run: &PlanRun) -> Result<()> {
    let req = &run.request;
    let confirm =
        req.plan.test == PlanTest::Kh && req.target_power.is_some() && req.solve == SolveFor::K;
    let rounds = 1 + if confirm { plan::MAX_SIMULATED_K } else { 0 };
    let report = with_progress(
        req.simulations.map(|n| (n * rounds) as u64),
        "simulating {bar:30} {pos}/{len} data sets ({eta})",
        |tick| plan::build_with_progress(req, tick),
    )?;
    // Every output is rendered before any is written (see `Outputs`).
    let mut out = Outputs::new();
    if let Some((t, f)) = &run.curve {
        out.add(
            "--curve",
            t,
            figure::power::plot(&report, *f, run.dpi, run.font_size)?,
        );
    }
    if let Some(t) = &run.json {
        out.add("--json", t, json_bytes(&report)?);
    }
    if let Some(t) = &run.report {
        let figure = figure::power::page_figure(&report, run.font_size)?;
        let prov = render::html::Provenance {
            command: run.invocation.clone(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            input_sha256: None,
            seed: report.simulation.map(|s| s.seed),
        };
        out.add(
            "--report",
            t,
            render::html::plan_page(&report, Some(&figure), &prov),
        );
    }
    if run.text {
        out.print(render::plan::render_at(&report, super::style::text_width()));
    }
    out.write()
}
