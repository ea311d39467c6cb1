//! `pondus sites`: per-site regressions from participant rows (or a moments
//! table), the join with a table of site characteristics, the optional
//! second stage, and the effects file for `pondus fit`.

use super::outputs::{self, Outputs, Target};
use super::{invocation, json_bytes, report_target, InferenceArg, Tau2Arg};
use clap::Args;
use pondus::error::{Error, Result};
use pondus::input::Source;
use pondus::model::design::ModeratorSpec;
use pondus::model::FitOptions;
use pondus::render;
use pondus::render::figure;
use std::path::PathBuf;

/// Options of `pondus sites`.
#[derive(Debug, Args)]
pub struct SitesArgs {
    /// CSV file of participant rows: a site id, x, y and optional w and covariates ('-' reads standard input).
    #[arg(required_unless_present = "moments", conflicts_with = "moments")]
    pub file: Option<PathBuf>,
    /// Column of the site ids.
    #[arg(
        help_heading = "Per-site regressions",
        long,
        value_name = "COL",
        required_unless_present = "moments"
    )]
    pub site: Option<String>,
    /// Column of the predictor whose slope each site estimates.
    #[arg(
        help_heading = "Per-site regressions",
        long,
        value_name = "COL",
        required_unless_present = "moments"
    )]
    pub x: Option<String>,
    /// Column of the outcome.
    #[arg(
        help_heading = "Per-site regressions",
        long,
        value_name = "COL",
        required_unless_present = "moments"
    )]
    pub y: Option<String>,
    /// Column of a participant-level moderator: adds the product term x·w in each site.
    #[arg(help_heading = "Per-site regressions", long, value_name = "COL")]
    pub w: Option<String>,
    /// A covariate to adjust for in every site's regression (repeatable).
    #[arg(
        help_heading = "Per-site regressions",
        long = "covariate",
        value_name = "COL"
    )]
    pub covariates: Vec<String>,
    /// The per-site effect: the slope of y on x; Hedges' g between the two groups of x (smd); or the log
    /// odds ratio of a binary y between them (log-or).
    #[arg(help_heading = "Per-site regressions", long, value_enum, default_value_t = EffectArg::Slope, value_name = "EFFECT")]
    pub effect: EffectArg,
    /// The value of x that marks the treatment group (with --effect smd or log-or; default: 1 in a 0/1 column).
    #[arg(help_heading = "Per-site regressions", long, value_name = "LEVEL")]
    pub treat: Option<String>,
    /// The value of y that marks an event (with --effect log-or; default: 1 in a 0/1 column).
    #[arg(help_heading = "Per-site regressions", long, value_name = "LEVEL")]
    pub event: Option<String>,
    /// Read a per-site moments table (the result of `pondus sql`'s query) instead of participant rows
    /// (--site, --x, --y, --w and --covariate may be repeated from the query: they are checked against
    /// the table and name its variables in the output).
    #[arg(help_heading = "Per-site regressions", long, value_name = "MOMENTS.csv", conflicts_with_all = ["robust", "center_within"])]
    pub moments: Option<PathBuf>,
    /// CSV file (or .xlsx, .xlsm, .xls, .ods spreadsheet) of site characteristics, one row per site, joined by site id.
    #[arg(help_heading = "Site characteristics", long, value_name = "SITES.csv")]
    pub info: Option<PathBuf>,
    /// The sheet of a spreadsheet --info file [default: the first sheet].
    #[arg(
        help_heading = "Site characteristics",
        long,
        value_name = "NAME",
        requires = "info"
    )]
    pub sheet: Option<String>,
    /// The decimal mark of the numbers in the input and --info files: ',' or '.' [default: '.',
    /// or ',' when a semicolon- or tab-separated file has unambiguous decimal commas].
    #[arg(help_heading = "Per-site regressions", long, value_name = "MARK", value_parser = super::parse_decimal)]
    pub decimal: Option<pondus::input::number::DecimalMark>,
    /// Id column of the --info table [default: the --site column's name, or 'site' with --moments].
    #[arg(
        help_heading = "Site characteristics",
        long,
        value_name = "COL",
        requires = "info"
    )]
    pub info_key: Option<String>,
    /// Write the per-site effects (readable by `pondus fit --measure slope`) here ('-' for standard output).
    #[arg(help_heading = "Outputs", long, value_name = "EFFECTS.csv")]
    pub out: Option<PathBuf>,
    /// HC3 standard errors instead of classical ones (reads the file a second time; not for standard input).
    #[arg(help_heading = "Per-site regressions", long)]
    pub robust: bool,
    /// Centre x and w at their site means in the product-term model (same product term, better conditioning).
    #[arg(help_heading = "Per-site regressions", long, requires = "w")]
    pub center_within: bool,
    /// Also run the second stage: pooled product term (within sites) beside the slope-on-mean-w meta-regression (across sites).
    #[arg(help_heading = "Second stage (--fit)", long)]
    pub fit: bool,
    /// A site characteristic (a column of --info) to regress the site slopes on (repeatable; with --fit
    /// or --one-stage).
    #[arg(
        help_heading = "Second stage (--fit)",
        long = "moderator",
        value_name = "NAME"
    )]
    pub moderators: Vec<String>,
    /// Estimator of the between-site variance τ² in the second stage.
    #[arg(help_heading = "Second stage (--fit)", long, value_enum, default_value_t = Tau2Arg::Reml, requires = "fit")]
    pub tau2: Tau2Arg,
    /// Tests and intervals of the second stage.
    #[arg(help_heading = "Second stage (--fit)", long, value_enum, default_value_t = InferenceArg::Kh, requires = "fit")]
    pub inference: InferenceArg,
    /// Confidence level of the second stage's (and the one-stage model's) intervals.
    #[arg(help_heading = "Second stage (--fit)", long, default_value_t = 0.95)]
    pub level: f64,
    /// Also fit the one-stage model: all rows in one linear mixed model with a fixed intercept per site and
    /// a random x slope (REML, from the per-site summaries), within- and across-site interactions of w
    /// kept apart, x times each --moderator as an across-site slope term.
    #[arg(help_heading = "One-stage model", long)]
    pub one_stage: bool,
    /// Write the whole result (sites, exclusions, join, second stage) as JSON ('-' for standard output).
    #[arg(help_heading = "Outputs", long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Do not print the terminal summary.
    #[arg(help_heading = "Outputs", long, short)]
    pub quiet: bool,
    /// Write one self-contained HTML page (sites, exclusions, join, both stages, plots, cautions) into this .html file ('-' for standard output).
    #[arg(help_heading = "Outputs", long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// The per-site effects `--effect` names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum EffectArg {
    /// The OLS slope of y on x
    Slope,
    /// Hedges' g of y between the two groups of x
    Smd,
    /// The log odds ratio of a binary y between the two groups of x
    LogOr,
}

impl From<EffectArg> for pondus::result::SiteMeasure {
    fn from(e: EffectArg) -> Self {
        match e {
            EffectArg::Slope => Self::Slope,
            EffectArg::Smd => Self::Smd,
            EffectArg::LogOr => Self::LogOr,
        }
    }
}

/// Where `pondus sites` reads from.
#[derive(Debug, Clone)]
pub enum SitesInputArg {
    /// Participant rows.
    Rows(Source),
    /// A moments table.
    Moments(PathBuf),
}

/// Settings of the one-stage model.
#[derive(Debug, Clone)]
pub struct OneStageRun {
    /// Confidence level.
    pub level: f64,
    /// The site characteristics (`--moderator`) whose product with x enters the model.
    pub characteristics: Vec<String>,
}

/// Checked settings of a `sites` run.
#[derive(Debug, Clone)]
pub struct SitesRun {
    /// The input.
    pub input: SitesInputArg,
    /// First-stage settings.
    pub settings: pondus::sites::SitesSettings,
    /// Site table and its id column.
    pub info: Option<(PathBuf, String)>,
    /// The sheet of a spreadsheet site table (None: the first).
    pub info_sheet: Option<String>,
    /// Effects file.
    pub out: Option<Target>,
    /// JSON output.
    pub json: Option<Target>,
    /// Second stage: options and site characteristics.
    pub fit: Option<(FitOptions, Vec<ModeratorSpec>)>,
    /// The one-stage model (`--one-stage`).
    pub one_stage: Option<OneStageRun>,
    /// Whether to print the terminal summary.
    pub text: bool,
    /// The HTML report's target.
    pub report: Option<Target>,
    /// The command line, quoted for a shell.
    pub invocation: String,
}

impl SitesArgs {
    /// Turns the raw flags into checked settings.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag and how to fix it.
    pub fn check(&self) -> Result<SitesRun> {
        let input = match (&self.moments, &self.file) {
            (Some(m), _) => SitesInputArg::Moments(m.clone()),
            (None, Some(f)) => SitesInputArg::Rows(Source::from_arg(f)),
            (None, None) => {
                return Err(Error::usage(
                    "FILE",
                    "give the participant rows file, or --moments MOMENTS.csv",
                ))
            }
        };
        let name = |flag: &str, v: &Option<String>| -> Result<String> {
            match v.as_deref().map(str::trim) {
                Some(s) if !s.is_empty() => Ok(s.to_string()),
                _ if self.moments.is_some() => Ok(String::new()),
                _ => Err(Error::usage(flag, "give a column name")),
            }
        };
        let site = name("--site", &self.site)?;
        let x = name("--x", &self.x)?;
        let y = name("--y", &self.y)?;
        let mut used: Vec<(&str, &str)> = vec![("--site", &site), ("--x", &x), ("--y", &y)];
        if let Some(w) = &self.w {
            used.push(("--w", w));
        }
        for c in &self.covariates {
            used.push(("--covariate", c));
        }
        if self.moments.is_none() {
            for (i, (flag, col)) in used.iter().enumerate() {
                if let Some((other, _)) = used[..i].iter().find(|(_, c)| c == col) {
                    return Err(Error::usage(
                        *flag,
                        format!("column '{col}' is already given to {other}; each role needs its own column"),
                    ));
                }
            }
        }
        if !(self.level > 0.0 && self.level < 1.0) {
            return Err(Error::usage(
                "--level",
                "must lie between 0 and 1, e.g. 0.95",
            ));
        }
        self.check_stage_flags()?;
        if !self.moderators.is_empty() && self.info.is_none() {
            return Err(Error::usage(
                "--moderator",
                "site characteristics come from the site table; add --info SITES.csv",
            ));
        }
        let out = self.out.as_deref().map(Target::from_arg);
        let json = self.json.as_deref().map(Target::from_arg);
        let report = self
            .report
            .as_deref()
            .map(|p| report_target("--report", p))
            .transpose()?;
        if out.is_none() && json.is_none() && report.is_none() && !self.fit && !self.one_stage {
            return Err(Error::usage(
                "--out",
                "nothing to do: add --out EFFECTS.csv (and/or --fit, --json)",
            ));
        }
        let mut outs: Vec<(&str, &Target)> = Vec::new();
        if let Some(o) = &out {
            outs.push(("--out", o));
        }
        if let Some(j) = &json {
            outs.push(("--json", j));
        }
        if let Some(r) = &report {
            outs.push(("--report", r));
        }
        let input_path = match &input {
            SitesInputArg::Rows(Source::File(p)) => Some(p.as_path()),
            SitesInputArg::Rows(Source::Stdin) => None,
            SitesInputArg::Moments(p) => Some(p.as_path()),
        };
        outputs::check_targets(input_path, &outs)?;
        if let Some(info) = &self.info {
            outputs::check_targets(Some(info.as_path()), &outs)?;
        }
        let to_stdout = outs.iter().any(|(_, t)| **t == Target::Stdout);
        let info_key = self.info_key.clone().unwrap_or_else(|| {
            if site.is_empty() {
                "site".into()
            } else {
                site.clone()
            }
        });
        Ok(SitesRun {
            input,
            settings: pondus::sites::SitesSettings {
                site,
                x,
                y,
                w: self.w.clone(),
                covariates: self.covariates.clone(),
                robust: self.robust,
                center_within: self.center_within,
                decimal: self.decimal,
                effect: self.effect.into(),
                treat: self.treat.clone(),
                event: self.event.clone(),
            },
            info: self.info.clone().map(|p| (p, info_key)),
            info_sheet: self.sheet.clone(),
            out,
            json,
            one_stage: self.one_stage.then(|| OneStageRun {
                level: self.level,
                characteristics: self.moderators.clone(),
            }),
            fit: self.fit.then(|| {
                (
                    FitOptions {
                        method: self.tau2.into(),
                        inference: self.inference.into(),
                        level: self.level,
                    },
                    self.moderators
                        .iter()
                        .map(|m| ModeratorSpec {
                            name: m.clone(),
                            categorical: false,
                            reference: None,
                            center: false,
                        })
                        .collect(),
                )
            }),
            text: !self.quiet && !to_stdout,
            report,
            invocation: invocation(),
        })
    }
}

impl SitesArgs {
    /// The flags that need `--fit` or `--one-stage`, and the effect the
    /// one-stage model takes.
    ///
    /// # Errors
    /// [`Error::Usage`] naming the flag.
    fn check_stage_flags(&self) -> Result<()> {
        let stage = self.fit || self.one_stage;
        if self.one_stage && self.effect != EffectArg::Slope {
            return Err(Error::usage(
                "--one-stage",
                "the one-stage model is a linear model of y on x, so it takes the slope: drop \
                 --effect (for a 0/1 group x and a numeric y the slope is the mean difference)",
            ));
        }
        if !self.moderators.is_empty() && !stage {
            return Err(Error::usage(
                "--moderator",
                "site characteristics are used by the second stage or the one-stage model; add \
                 --fit or --one-stage",
            ));
        }
        if self.level != 0.95 && !stage {
            return Err(Error::usage(
                "--level",
                "sets the confidence level of the second stage or the one-stage model; add --fit \
                 or --one-stage",
            ));
        }
        Ok(())
    }
}

/// Runs a checked `sites`: summarise, estimate, join, second stage, write.
///
/// # Errors
/// Any library error.
pub fn run_sites(run: &SitesRun) -> Result<()> {
    use pondus::sites::{self, RowInput};
    let keep = run.one_stage.is_some();
    let (mut report, moments) = match &run.input {
        SitesInputArg::Rows(Source::File(p)) => sites::from_rows_with_moments(
            &p.display().to_string(),
            RowInput::File(p),
            &run.settings,
        )?,
        SitesInputArg::Rows(Source::Stdin) => sites::from_rows_with_moments(
            "<stdin>",
            RowInput::Stream(Box::new(std::io::stdin().lock())),
            &run.settings,
        )?,
        SitesInputArg::Moments(p) => {
            let src = Source::File(p.clone());
            sites::from_moments_keeping(&src.name(), &src.read_all()?, &run.settings)?
        }
    };
    let mut site_rows = Default::default();
    let mut info_name = String::new();
    if let Some((path, key)) = &run.info {
        let src = Source::File(path.clone());
        let sheet = run.info_sheet.as_deref();
        info_name = src.name();
        site_rows = sites::join::join(
            &mut report,
            &src.name(),
            &src.read_all()?,
            key,
            sheet,
            run.settings.decimal,
        )?;
    }
    if let Some((options, chars)) = &run.fit {
        report.stages = Some(sites::stages::run(&report, *options, chars)?);
    }
    if let (Some(os), true) = (&run.one_stage, keep) {
        let characteristics = one_stage_characteristics(&report, os, site_rows, info_name)?;
        report.one_stage = Some(sites::one_stage::fit(
            &report,
            &moments,
            &characteristics,
            os.level,
        )?);
    }
    // Every output is rendered before any is written (see `Outputs`).
    let mut out = Outputs::new();
    if let Some(t) = &run.out {
        out.add("--out", t, render::sites_effects::bytes(&report));
    }
    if let Some(t) = &run.json {
        out.add("--json", t, json_bytes(&report)?);
    }
    if let Some(t) = &run.report {
        let input_sha256 = match &run.input {
            SitesInputArg::Rows(Source::File(p)) | SitesInputArg::Moments(p) => {
                Some(pondus::support::hash::sha256_file(p)?)
            }
            SitesInputArg::Rows(Source::Stdin) => None,
        };
        let source = match &report.stages {
            Some(st) => st.characteristics.as_ref().or(st.across.as_ref()),
            None => None,
        };
        let (figures, figure_notes) = match source {
            Some(fit) => figure::page_figures(fit, &figure::PlotOptions::default())?,
            None => (Vec::new(), Vec::new()),
        };
        let prov = render::html::Provenance {
            command: run.invocation.clone(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            input_sha256,
            seed: None,
        };
        out.add(
            "--report",
            t,
            render::html::sites_page(&report, &figures, &figure_notes, &prov),
        );
    }
    if run.text {
        out.print(render::sites::render_at(
            &report,
            super::style::text_width(),
        ));
    }
    out.write()?;
    // Without the terminal report (--quiet, or an output on standard
    // output) the sites left out are still named, on standard error.
    if !run.text && !report.excluded.is_empty() {
        let list: Vec<String> = report
            .excluded
            .iter()
            .map(|e| format!("  {} ({} rows): {}", e.study, e.n, e.reason))
            .collect();
        let text = format!(
            "pondus: {} site{} left out of the per-site estimates:\n{}\n",
            report.excluded.len(),
            if report.excluded.len() == 1 { "" } else { "s" },
            list.join("\n")
        );
        eprint!("{}", pondus::support::text::terminal(&text));
    }
    Ok(())
}

/// The `--moderator` columns of the site table for the one-stage model:
/// each site's cells of those columns.
///
/// # Errors
/// [`Error::Usage`] when a `--moderator` is not a column of the site table.
fn one_stage_characteristics(
    report: &pondus::result::SitesReport,
    os: &OneStageRun,
    rows: std::collections::HashMap<String, Vec<String>>,
    source: String,
) -> Result<pondus::sites::one_stage::Characteristics> {
    let columns = report
        .join
        .as_ref()
        .map(|j| j.columns.clone())
        .unwrap_or_default();
    let mut index = Vec::new();
    for name in &os.characteristics {
        match columns.iter().position(|c| c == name) {
            Some(i) => index.push(i),
            None => {
                return Err(Error::usage(
                    "--moderator",
                    format!(
                        "'{name}' is not a column of the site table {source} (its columns: {})",
                        columns.join(", ")
                    ),
                ))
            }
        }
    }
    Ok(pondus::sites::one_stage::Characteristics {
        names: os.characteristics.clone(),
        values: rows
            .into_iter()
            .map(|(id, cells)| (id, index.iter().map(|&i| cells[i].clone()).collect()))
            .collect(),
        source,
    })
}
