//! Effect sizes and their sampling variances, one file per family.
//!
//! A [`Measure`] names the roles (input columns) it reads; [`compute`] turns
//! each row of a [`Table`] into an effect on the analysis scale with its
//! sampling variance, an exclusion with its reason, or a cell problem.

pub mod artifact;
pub mod binary;
mod column;
pub mod correlation;
pub mod generic;
pub mod route;
pub mod smd;
pub mod smd_routes;

use crate::error::{Error, Result};
use crate::input::{ColumnRequest, Table};
use crate::support::flag::Flag;
pub use column::{compute, take_plain, EffectColumn};
use route::{EffectReading, Route, RouteInfo};
use serde::Serialize;
use std::collections::BTreeMap;

/// How each row becomes an effect and a sampling variance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Measure {
    /// A precomputed effect with its variance, SE or 95% CI.
    Effect,
    /// A Pearson correlation, analysed as Fisher's z.
    R,
    /// A partial correlation from a regression t statistic, analysed as Fisher's z.
    PartialR,
    /// An unstandardised regression slope with its SE.
    Slope,
    /// Hedges' g from group means, SDs and sizes.
    Smd,
    /// Log odds ratio from a 2×2 table.
    LogOr,
    /// Log risk ratio from a 2×2 table.
    LogRr,
    /// Risk difference from a 2×2 table.
    RiskDiff,
}

/// How analysis-scale values are shown back to readers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum ReadingScale {
    /// Shown as analysed.
    Same,
    /// Fisher z shown as a correlation, r = tanh(z).
    Correlation,
    /// A log ratio shown as a ratio, exp(y).
    Ratio,
}

impl ReadingScale {
    /// Maps an analysis-scale value to the reading scale.
    pub fn apply(self, x: f64) -> f64 {
        match self {
            ReadingScale::Same => x,
            ReadingScale::Correlation => x.tanh(),
            ReadingScale::Ratio => x.exp(),
        }
    }
}

/// One input role of a measure.
#[derive(Debug, Clone, Copy)]
pub struct Role {
    /// The role name, also the default column header.
    pub name: &'static str,
    /// What the column holds.
    pub meaning: &'static str,
    /// Whether every row needs it (the precision roles of `effect` are alternatives).
    pub required: bool,
}

const fn role(name: &'static str, meaning: &'static str) -> Role {
    Role {
        name,
        meaning,
        required: true,
    }
}

const fn alt(name: &'static str, meaning: &'static str) -> Role {
    Role {
        name,
        meaning,
        required: false,
    }
}

const EFFECT_ROLES: &[Role] = &[
    role("effect", "the effect estimate on the analysis scale"),
    alt("variance", "its sampling variance"),
    alt("se", "its standard error"),
    alt("ci_low", "the lower end of its confidence interval"),
    alt("ci_high", "the upper end of its confidence interval"),
];
/// The correlation roles: `r` and `n` first (the artifact corrections read
/// them by position), then the other routes, then the group comparisons
/// that `--convert` turns into r.
const R_ROLES: &[Role] = &[
    alt("r", "Pearson correlation"),
    alt("n", "sample size"),
    alt(
        "t",
        "t statistic of the correlation or of a simple regression slope",
    ),
    alt("p", "two-sided p-value of that t test"),
    alt("sign", "direction of the effect, 1 or -1"),
    alt("treat_mean", "mean of the treated group"),
    alt("treat_sd", "SD of the treated group"),
    alt("treat_n", "size of the treated group"),
    alt("ctrl_mean", "mean of the control group"),
    alt("ctrl_sd", "SD of the control group"),
    alt("ctrl_n", "size of the control group"),
    alt("treat_se", "standard error of the treated group's mean"),
    alt("ctrl_se", "standard error of the control group's mean"),
    alt("f", "F statistic with one numerator df"),
    alt("treat_median", "median of the treated group"),
    alt("treat_q1", "first quartile of the treated group"),
    alt("treat_q3", "third quartile of the treated group"),
    alt("ctrl_median", "median of the control group"),
    alt("ctrl_q1", "first quartile of the control group"),
    alt("ctrl_q3", "third quartile of the control group"),
    alt("treat_min", "minimum of the treated group"),
    alt("treat_max", "maximum of the treated group"),
    alt("ctrl_min", "minimum of the control group"),
    alt("ctrl_max", "maximum of the control group"),
];
const PARTIAL_ROLES: &[Role] = &[
    role("t", "t statistic of the focal predictor"),
    role("n", "sample size"),
    role("covariates", "number of other predictors in the regression"),
];
const SLOPE_ROLES: &[Role] = &[
    role("slope", "unstandardised regression slope"),
    role("se", "its standard error"),
];
/// The group-comparison roles: today's means route first, then the other
/// routes, then the rows `--convert` can use.
const SMD_ROLES: &[Role] = &[
    alt("treat_mean", "mean of the treated group"),
    alt("treat_sd", "SD of the treated group"),
    alt("treat_n", "size of the treated group"),
    alt("ctrl_mean", "mean of the control group"),
    alt("ctrl_sd", "SD of the control group"),
    alt("ctrl_n", "size of the control group"),
    alt("treat_se", "standard error of the treated group's mean"),
    alt("ctrl_se", "standard error of the control group's mean"),
    alt(
        "t",
        "independent-groups t statistic, treatment minus control",
    ),
    alt("f", "F statistic with one numerator df"),
    alt("sign", "direction of the difference, 1 or -1"),
    alt("p", "two-sided p-value of the t test"),
    alt("treat_median", "median of the treated group"),
    alt("treat_q1", "first quartile of the treated group"),
    alt("treat_q3", "third quartile of the treated group"),
    alt("ctrl_median", "median of the control group"),
    alt("ctrl_q1", "first quartile of the control group"),
    alt("ctrl_q3", "third quartile of the control group"),
    alt("treat_min", "minimum of the treated group"),
    alt("treat_max", "maximum of the treated group"),
    alt("ctrl_min", "minimum of the control group"),
    alt("ctrl_max", "maximum of the control group"),
    alt("r", "Pearson correlation (converted to d on request)"),
    alt("n", "sample size of the correlation (converted on request)"),
    alt(
        "treat_events",
        "events in the treated group (converted to d on request)",
    ),
    alt(
        "ctrl_events",
        "events in the control group (converted to d on request)",
    ),
];
const BINARY_ROLES: &[Role] = &[
    role("treat_events", "events in the treated group"),
    role("treat_n", "size of the treated group"),
    role("ctrl_events", "events in the control group"),
    role("ctrl_n", "size of the control group"),
];
const LOG_OR_ROLES: &[Role] = &[
    alt("treat_events", "events in the treated group"),
    alt("treat_n", "size of the treated group"),
    alt("ctrl_events", "events in the control group"),
    alt("ctrl_n", "size of the control group"),
    alt("or", "odds ratio (ratio scale)"),
    alt("ci_low", "lower confidence limit of the ratio"),
    alt("ci_high", "upper confidence limit of the ratio"),
    alt("log_or", "log odds ratio"),
    alt("se", "standard error of the log ratio"),
];
const LOG_RR_ROLES: &[Role] = &[
    alt("treat_events", "events in the treated group"),
    alt("treat_n", "size of the treated group"),
    alt("ctrl_events", "events in the control group"),
    alt("ctrl_n", "size of the control group"),
    alt("rr", "risk ratio (ratio scale)"),
    alt("ci_low", "lower confidence limit of the ratio"),
    alt("ci_high", "upper confidence limit of the ratio"),
    alt("log_rr", "log risk ratio"),
    alt("se", "standard error of the log ratio"),
];

impl Measure {
    /// Every measure, in the order the help lists them.
    pub const ALL: [Measure; 8] = [
        Measure::Effect,
        Measure::R,
        Measure::PartialR,
        Measure::Slope,
        Measure::Smd,
        Measure::LogOr,
        Measure::LogRr,
        Measure::RiskDiff,
    ];

    /// The name used on the command line and in JSON.
    pub fn id(self) -> &'static str {
        match self {
            Measure::Effect => "effect",
            Measure::R => "r",
            Measure::PartialR => "partial-r",
            Measure::Slope => "slope",
            Measure::Smd => "smd",
            Measure::LogOr => "log-or",
            Measure::LogRr => "log-rr",
            Measure::RiskDiff => "risk-diff",
        }
    }

    /// What the analysed numbers are, in words.
    pub fn describe(self) -> &'static str {
        match self {
            Measure::Effect => "effects as supplied",
            Measure::R => "Fisher z of Pearson correlations",
            Measure::PartialR => "Fisher z of partial correlations",
            Measure::Slope => "unstandardised slopes",
            Measure::Smd => "standardised mean differences (Hedges' g)",
            Measure::LogOr => "log odds ratios",
            Measure::LogRr => "log risk ratios",
            Measure::RiskDiff => "risk differences",
        }
    }

    /// The input roles, whose names are also the default headers.
    pub fn roles(self) -> &'static [Role] {
        match self {
            Measure::Effect => EFFECT_ROLES,
            Measure::R => R_ROLES,
            Measure::PartialR => PARTIAL_ROLES,
            Measure::Slope => SLOPE_ROLES,
            Measure::Smd => SMD_ROLES,
            Measure::LogOr => LOG_OR_ROLES,
            Measure::LogRr => LOG_RR_ROLES,
            Measure::RiskDiff => BINARY_ROLES,
        }
    }

    /// How results are shown back to readers.
    pub fn reading_scale(self) -> ReadingScale {
        match self {
            Measure::R | Measure::PartialR => ReadingScale::Correlation,
            Measure::LogOr | Measure::LogRr => ReadingScale::Ratio,
            _ => ReadingScale::Same,
        }
    }

    /// Name of the reading-scale quantity, where it differs from the analysis scale.
    pub fn reading_name(self) -> Option<&'static str> {
        match self {
            Measure::R => Some("r"),
            Measure::PartialR => Some("partial r"),
            Measure::LogOr => Some("odds ratio"),
            Measure::LogRr => Some("risk ratio"),
            _ => None,
        }
    }
}

/// One row turned into an effect, or the reason it is left out.
#[derive(Debug, Clone, PartialEq)]
pub enum RowEffect {
    /// A usable effect.
    Value {
        /// Effect on the analysis scale.
        y: f64,
        /// Sampling variance (> 0).
        v: f64,
        /// An adjustment that was made, in words (for example a zero-cell correction).
        note: Option<String>,
        /// The route the effect was computed from.
        from: Route,
        /// A disagreement between this row's routes, or limits clearly
        /// asymmetric about the effect, in words (a warning).
        check: Option<String>,
    },
    /// The row cannot give an effect; the reason in words.
    Excluded(String),
}

/// What one row's values are wrong about: the role and the message.
#[derive(Debug, Clone, PartialEq)]
pub struct RowProblem {
    /// The role whose value is wrong.
    pub role: &'static str,
    /// What is wrong and how to fix it.
    pub message: String,
}

impl RowProblem {
    /// A problem with role `role`.
    pub fn new(role: &'static str, message: impl Into<String>) -> Self {
        RowProblem {
            role,
            message: message.into(),
        }
    }
}

/// Result of one row's computation.
pub type RowResult = std::result::Result<RowEffect, RowProblem>;

/// The per-role values of one row, as parsed numbers or missing.
#[derive(Debug, Clone, Copy)]
pub struct RowValues<'a> {
    roles: &'a [Role],
    values: &'a [Option<f64>],
    inequality: Option<&'a str>,
}

impl<'a> RowValues<'a> {
    /// Builds the view; `values` has one entry per role (None: missing or column absent).
    pub fn new(roles: &'a [Role], values: &'a [Option<f64>]) -> Self {
        RowValues {
            roles,
            values,
            inequality: None,
        }
    }

    /// The same view with a p-value written as an inequality (`< 0.05`),
    /// which is kept as text: it cannot give an effect, and the row is
    /// excluded with that reason unless another route is complete.
    pub fn with_inequality(self, text: Option<&'a str>) -> Self {
        RowValues {
            inequality: text,
            ..self
        }
    }

    /// The p-value cell's text when it was written as an inequality.
    pub fn inequality(&self) -> Option<&'a str> {
        self.inequality
    }

    /// The value of role `name`, if present.
    pub fn get(&self, name: &str) -> Option<f64> {
        self.roles
            .iter()
            .position(|r| r.name == name)
            .and_then(|i| self.values[i])
    }
}

/// Computes one row's effect for `measure` from its role values, through
/// the first usable route of [`route::catalogue`].
pub fn compute_row(measure: Measure, reading: &EffectReading, row: RowValues<'_>) -> RowResult {
    match measure {
        Measure::Effect => generic::precomputed(row, reading),
        Measure::Slope => generic::slope(row),
        Measure::R => correlation::r_row(row, reading),
        Measure::PartialR => correlation::partial_row(row),
        Measure::Smd => smd_routes::smd_row(row, reading),
        Measure::LogOr => binary::ratio_row(row, binary::Kind::LogOddsRatio, reading),
        Measure::LogRr => binary::ratio_row(row, binary::Kind::LogRiskRatio, reading),
        Measure::RiskDiff => binary::row(row, binary::Kind::RiskDifference),
    }
}

/// The exclusion reason of a row with no complete route: `missing X`, X
/// the first absent value of the route with the fewest absent values
/// (the earlier route on a tie).
pub(crate) fn closest_missing<'a>(
    row: RowValues<'_>,
    routes: impl Iterator<Item = &'a RouteInfo>,
) -> String {
    let mut best: Option<(usize, &str)> = None;
    for info in routes {
        let absent: Vec<&str> = info
            .columns
            .iter()
            .copied()
            .filter(|c| !c.starts_with('(') && row.get(c).is_none())
            .collect();
        if let Some(first) = absent.first() {
            if best.is_none_or(|(n, _)| absent.len() < n) {
                best = Some((absent.len(), first));
            }
        }
    }
    match best {
        Some((_, m)) => format!("missing {m}"),
        None => "no complete set of columns".into(),
    }
}

/// Returns the first missing required role, for the exclusion reason.
pub(crate) fn first_missing(row: RowValues<'_>, names: &[&'static str]) -> Option<&'static str> {
    names.iter().copied().find(|n| row.get(n).is_none())
}

/// Maps measure roles to the headers the user's file uses.
#[derive(Debug, Clone, Default)]
pub struct ColumnMap {
    overrides: BTreeMap<String, String>,
    reading: EffectReading,
    sheet: Option<String>,
    decimal: Option<crate::input::number::DecimalMark>,
    shown: Vec<(String, Flag)>,
}

impl ColumnMap {
    /// A map with the given `ROLE -> HEADER` overrides.
    ///
    /// # Errors
    /// [`Error::Usage`] when a role is not one of the measure's roles.
    pub fn new(measure: Measure, overrides: BTreeMap<String, String>) -> Result<Self> {
        for role in overrides.keys() {
            if !measure.roles().iter().any(|r| r.name == role) {
                let names: Vec<&str> = measure.roles().iter().map(|r| r.name).collect();
                return Err(Error::usage(
                    Flag::Col,
                    format!(
                        "'{role}' is not an input of measure '{}'; its inputs are: {}",
                        measure.id(),
                        names.join(", ")
                    ),
                ));
            }
        }
        Ok(ColumnMap {
            overrides,
            reading: EffectReading::default(),
            sheet: None,
            decimal: None,
            shown: Vec::new(),
        })
    }

    /// The same map reading sheet `sheet` of a spreadsheet (`--sheet`; the
    /// first sheet when None; ignored for CSV).
    pub fn with_sheet(self, sheet: Option<String>) -> Self {
        ColumnMap { sheet, ..self }
    }

    /// The same map reading numbers with the decimal mark `decimal`
    /// (`--decimal`; None: the point, or a decimal comma detected in a
    /// semicolon- or tab-separated file).
    pub fn with_decimal(self, decimal: Option<crate::input::number::DecimalMark>) -> Self {
        ColumnMap { decimal, ..self }
    }

    /// The decimal mark forced with `--decimal` (None: chosen from the file).
    pub fn decimal(&self) -> Option<crate::input::number::DecimalMark> {
        self.decimal
    }

    /// The same map also carrying the columns `shown` (each with the flag
    /// that asks for it) into every study's
    /// [`cells`](crate::result::Study::cells), as written in the file, for
    /// the plots (`--columns`, `--group-by`, `--sort`). Each must exist.
    pub fn with_shown(self, shown: Vec<(String, Flag)>) -> Self {
        ColumnMap { shown, ..self }
    }

    /// The columns carried for the plots, with the flag naming each.
    pub fn shown(&self) -> &[(String, Flag)] {
        &self.shown
    }

    /// The sheet to read from a spreadsheet (None: the first).
    pub fn sheet(&self) -> Option<&str> {
        self.sheet.as_deref()
    }

    /// The same map reading the columns as `reading` says (`--ci-level`,
    /// `--effect-scale`, `--convert`).
    pub fn with_reading(self, reading: EffectReading) -> Self {
        ColumnMap { reading, ..self }
    }

    /// How the effect columns are read.
    pub fn reading(&self) -> &EffectReading {
        &self.reading
    }

    /// The header used for `role`.
    pub fn header(&self, role: &str) -> String {
        self.overrides
            .get(role)
            .cloned()
            .unwrap_or_else(|| role.to_string())
    }

    /// Column requests for the measure's roles, in role order.
    pub fn requests(&self, measure: Measure) -> Vec<ColumnRequest> {
        measure
            .roles()
            .iter()
            .map(|r| ColumnRequest {
                header: self.header(r.name),
                required: r.required,
                label: false,
                numbers: true,
                purpose: format!(
                    "{} ({}) with {} {}",
                    r.meaning,
                    r.name,
                    Flag::Measure,
                    measure.id()
                ),
                hint: format!(
                    "Rename the column, or map it with {} {}=<header>.",
                    Flag::Col,
                    r.name
                ),
            })
            .collect()
    }
}

/// Whether a cell's text is a p-value written as an inequality
/// (`< 0.05`, `<.001`, `> 0.1`, `≤ 0.01`, `p < 0.05`).
pub(crate) fn is_inequality(text: &str) -> bool {
    let t = text.trim();
    let t = t
        .strip_prefix('p')
        .or_else(|| t.strip_prefix('P'))
        .unwrap_or(t)
        .trim_start();
    let Some(c) = t.chars().next() else {
        return false;
    };
    if !matches!(c, '<' | '>' | '≤' | '≥') {
        return false;
    }
    let rest = t[c.len_utf8()..].trim_start_matches('=').trim();
    rest.parse::<f64>().is_ok()
}

/// Refuses a table in which no route of the measure has all its columns.
///
/// # Errors
/// [`Error::MissingColumn`] naming the first absent column of the measure's
/// first route, with the other routes in the hint.
pub(super) fn check_route_columns(
    measure: Measure,
    map: &ColumnMap,
    table: &Table,
    first: usize,
) -> Result<()> {
    let roles = measure.roles();
    let has = |name: &str| {
        roles
            .iter()
            .position(|r| r.name == name)
            .is_some_and(|i| table.column(first + i).is_some())
    };
    if measure == Measure::Effect {
        if !(has("variance") || has("se") || (has("ci_low") && has("ci_high"))) {
            return Err(Error::MissingColumn {
                source_name: table.source.clone(),
                column: map.header("variance"),
                purpose: format!("the precision of each effect with {} effect", Flag::Measure),
                available: table.headers.join(", "),
                hint: format!(
                    "Give one of the columns '{}', '{}', or '{}' with '{}' (a confidence interval, 95% unless {} says otherwise), or map them with {}.",
                    map.header("variance"),
                    map.header("se"),
                    map.header("ci_low"),
                    map.header("ci_high"),
                    Flag::CiLevel,
                    Flag::Col
                ),
            });
        }
        return Ok(());
    }
    let routes: Vec<&RouteInfo> = route::catalogue(measure)
        .iter()
        .filter(|i| !i.needs_convert || map.reading().convert)
        .collect();
    let complete = |i: &RouteInfo| i.columns.iter().all(|c| c.starts_with('(') || has(c));
    if routes.iter().any(|i| complete(i)) {
        return Ok(());
    }
    let first_route = routes[0];
    let absent = first_route
        .columns
        .iter()
        .copied()
        .find(|c| !has(c))
        .unwrap_or(first_route.columns[0]);
    let meaning = roles
        .iter()
        .find(|r| r.name == absent)
        .map_or("", |r| r.meaning);
    let hint = if routes.len() > 1 {
        format!(
            "Rename the column, or map it with {} {absent}=<header>; or give the columns of another \
             route ('pondus columns {} {}' lists them).",
            Flag::Col,
            Flag::Measure,
            measure.id()
        )
    } else {
        format!(
            "Rename the column, or map it with {} {absent}=<header>.",
            Flag::Col
        )
    };
    Err(Error::MissingColumn {
        source_name: table.source.clone(),
        column: map.header(absent),
        purpose: format!(
            "{meaning} ({absent}) with {} {}",
            Flag::Measure,
            measure.id()
        ),
        available: table.headers.join(", "),
        hint,
    })
}

/// Shortens a cell's text for messages.
pub(crate) fn shorten(text: &str) -> String {
    const MAX: usize = 40;
    if text.chars().count() <= MAX {
        text.to_string()
    } else {
        let s: String = text.chars().take(MAX - 1).collect();
        format!("{s}…")
    }
}
