//! The result of `pondus sites`: per-site effects, the join with the site
//! table and the two second-stage answers.

use super::{FitReport, ToolInfo};
use crate::input::Delimiter;
use serde::Serialize;

/// What kind of table `pondus sites` read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum SitesInputKind {
    /// Participant rows.
    Rows,
    /// A per-site moments table.
    Moments,
}

impl SitesInputKind {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            SitesInputKind::Rows => "rows",
            SitesInputKind::Moments => "moments",
        }
    }
}

/// The standard errors of the per-site slopes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum SeType {
    /// The classical OLS standard errors.
    Classical,
    /// HC3 heteroscedasticity-consistent standard errors.
    Hc3,
}

impl SeType {
    /// The word used in the JSON.
    pub fn id(self) -> &'static str {
        match self {
            SeType::Classical => "classical",
            SeType::Hc3 => "hc3",
        }
    }
}

/// What each site's effect is (`--effect`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum SiteMeasure {
    /// The OLS slope of y on x.
    #[default]
    Slope,
    /// Hedges' g of y between the two groups of x.
    Smd,
    /// The log odds ratio of a binary y between the two groups of x.
    LogOr,
}

impl SiteMeasure {
    /// The word used in the JSON and on the command line.
    pub fn id(self) -> &'static str {
        match self {
            SiteMeasure::Slope => "slope",
            SiteMeasure::Smd => "smd",
            SiteMeasure::LogOr => "log-or",
        }
    }
}

/// The result of `pondus sites`: per-site effects from participant rows (or
/// from a per-site moments table), the join with the site table, and, with
/// `--fit`, the two second-stage answers.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SitesReport {
    /// Program name and version.
    pub tool: ToolInfo,
    /// What was read.
    pub input: SitesInput,
    /// The per-site regressions.
    pub model: SitesModel,
    /// One entry per site with an estimate, in site-id order (numeric when every id is a number).
    pub sites: Vec<SiteEffect>,
    /// Sites left out, with the reason.
    pub excluded: Vec<ExcludedSite>,
    /// The site-table join (null without `--info`).
    pub join: Option<SiteJoin>,
    /// Remarks about the data and the method.
    pub notes: Vec<String>,
    /// The second stage (null without `--fit`).
    pub stages: Option<TwoStage>,
    /// The one-stage model (present only with `--one-stage`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub one_stage: Option<super::OneStage>,
}

/// What `pondus sites` read.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SitesInput {
    /// File name as given (`<stdin>` for standard input).
    pub file: String,
    /// "rows" (participant rows) or "moments" (a per-site moments table).
    pub kind: SitesInputKind,
    /// Detected delimiter: "comma", "semicolon" or "tab"; "parquet" for a Parquet file.
    pub delimiter: Delimiter,
    /// Data rows read (participants, or sites for a moments table).
    pub rows: u64,
    /// Rows left out because a needed numeric cell was empty or a missing mark.
    pub missing_rows: u64,
    /// Lines of the first of those rows.
    pub missing_lines: Vec<u64>,
    /// Rows skipped because every cell was empty or blank (not counted in
    /// `rows`).
    pub blank_rows: u64,
    /// Passes over the file: 1, or 2 with HC3 standard errors.
    pub passes: u32,
}

/// The per-site models.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SitesModel {
    /// Column of the site ids.
    pub site: String,
    /// Predictor column (its slope is `slope`).
    pub x: String,
    /// Outcome column.
    pub y: String,
    /// Participant-level moderator column (null without `--w`).
    pub w: Option<String>,
    /// Covariate columns.
    pub covariates: Vec<String>,
    /// "classical" or "hc3".
    pub se_type: SeType,
    /// Whether x and w were centred at their site means in the product-term model.
    pub center_within: bool,
    /// The per-site effect: "slope", "smd" (x two groups) or "log-or" (x two groups, y binary).
    pub effect: SiteMeasure,
    /// The level of x coded 1 (the treatment group) with `smd` and `log-or`: the `--treat` level, or "1" for a 0/1 column; null for slopes.
    pub treat: Option<String>,
    /// The level of y coded 1 (the event) with `log-or`: the `--event` level, or "1" for a 0/1 column; null otherwise.
    pub event: Option<String>,
}

/// One site's estimates: the row of the effects file.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SiteEffect {
    /// Site id.
    pub study: String,
    /// Rows (participants) used.
    pub n: u64,
    /// OLS slope of y on x (adjusted for the covariates).
    pub slope: f64,
    /// Its standard error (classical or HC3, see `model.se_type`).
    pub se: f64,
    /// Pearson correlation of x and y (unadjusted).
    pub r: f64,
    /// Product-term coefficient b₃ of y = b₀ + b₁x + b₂w + b₃xw (+ covariates); null without `--w` or when that model cannot be fitted.
    pub interaction: Option<f64>,
    /// Its standard error.
    pub interaction_se: Option<f64>,
    /// Site mean of x.
    pub mean_x: f64,
    /// Site mean of w (null without `--w`).
    pub mean_w: Option<f64>,
    /// Why the product term is missing, when it is.
    pub note: Option<String>,
    /// Joined site characteristics, in `join.columns` order (empty text when the site has no row there).
    pub characteristics: Vec<String>,
    /// The two groups and Hedges' g (with `--effect smd`; null otherwise).
    pub smd: Option<SiteSmd>,
    /// The 2×2 table and the log odds ratio (with `--effect log-or`; null otherwise).
    pub log_or: Option<SiteOdds>,
}

/// One site's standardised mean difference between the groups of x
/// (`slope` is then the raw mean difference treatment − control).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SiteSmd {
    /// Rows in the treatment group (x coded 1).
    pub treat_n: u64,
    /// Rows in the control group (x coded 0).
    pub ctrl_n: u64,
    /// Mean of y in the treatment group.
    pub treat_mean: f64,
    /// Mean of y in the control group.
    pub ctrl_mean: f64,
    /// Pooled within-group SD of y (divisor n − 2).
    pub sd_within: f64,
    /// Independent-groups t statistic, (treat_mean − ctrl_mean)/(sd_within·√(1/treat_n + 1/ctrl_n)).
    pub t: f64,
    /// Hedges' g.
    pub g: f64,
    /// Its sampling variance (the formula `pondus fit --measure smd` uses).
    pub var_g: f64,
}

/// One site's 2×2 table of group (x) by event (y) and its log odds ratio
/// (`slope` is then the difference in proportions treatment − control).
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SiteOdds {
    /// Events in the treatment group.
    pub treat_events: u64,
    /// Rows in the treatment group.
    pub treat_n: u64,
    /// Events in the control group.
    pub ctrl_events: u64,
    /// Rows in the control group.
    pub ctrl_n: u64,
    /// Log odds ratio, treatment versus control (0.5 added to every cell when one is zero).
    pub log_or: f64,
    /// Its sampling variance 1/a + 1/b + 1/c + 1/d (Woolf).
    pub var_log_or: f64,
    /// Whether a cell was zero, so 0.5 was added to every cell.
    pub zero_cell: bool,
}

/// A site without an estimate.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ExcludedSite {
    /// Site id.
    pub study: String,
    /// Rows the site had.
    pub n: u64,
    /// Why it was left out.
    pub reason: String,
}

/// The join with the site-characteristics table.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct SiteJoin {
    /// The site table.
    pub file: String,
    /// Its id column.
    pub key: String,
    /// The characteristic columns appended to the effects.
    pub columns: Vec<String>,
    /// Sites with estimates but no row in the site table (kept, characteristics empty).
    pub without_info: Vec<String>,
    /// Site-table ids with no participant rows (or no estimate).
    pub info_only: Vec<String>,
}

/// Both second-stage answers of `pondus sites --fit`.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct TwoStage {
    /// Random-effects pooling of the per-site product terms (within-site moderation; null without `--w`).
    pub within: Option<FitReport>,
    /// Meta-regression of the site slopes on the site mean of w (across-site moderation; null without `--w`).
    pub across: Option<FitReport>,
    /// Meta-regression of the site slopes on the `--moderator` site characteristics (null when none are given; the pooled slope when neither they nor `--w` are).
    pub characteristics: Option<FitReport>,
    /// Plain-language lines on what each answer is about.
    pub answers: Vec<String>,
    /// Cautions for reading the two stages together.
    pub cautions: Vec<String>,
}

display_by_id!(SitesInputKind, SeType);
