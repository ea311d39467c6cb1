//! The settings of the per-site stage, and the layout of each site's moment
//! vector that follows from them.

use super::levels::Coding;
use super::read::RowColumns;
use crate::result::SiteMeasure;
use crate::support::flag::Flag;

/// Checked settings of the per-site stage.
#[derive(Debug, Clone)]
pub struct SitesSettings {
    /// Site id column.
    pub site: String,
    /// Predictor column.
    pub x: String,
    /// Outcome column.
    pub y: String,
    /// Participant-level moderator column.
    pub w: Option<String>,
    /// Covariate columns.
    pub covariates: Vec<String>,
    /// HC3 standard errors (second pass over the rows).
    pub robust: bool,
    /// Centre x and w at the site means in the product-term model.
    pub center_within: bool,
    /// The decimal mark forced with `--decimal` for the rows, the moments
    /// table and the site table (None: the point, or a decimal comma
    /// detected in a semicolon- or tab-separated file).
    pub decimal: Option<crate::input::number::DecimalMark>,
    /// The per-site effect: the slope, or with x as two groups Hedges' g or
    /// (y binary) the log odds ratio.
    pub effect: SiteMeasure,
    /// The level of x that is the treatment group (`--treat`; None: a 0/1
    /// column, 1 = treatment).
    pub treat: Option<String>,
    /// The level of y that is the event (`--event`; None: a 0/1 column).
    pub event: Option<String>,
}

/// Positions of the variables in each site's moment vector
/// (x, covariates…, [w, x·w], y).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Layout {
    /// Number of covariates.
    pub covariates: usize,
    /// Whether w and x·w are present.
    pub with_w: bool,
}

impl Layout {
    /// Length of the moment vector.
    pub fn dim(self) -> usize {
        self.covariates + if self.with_w { 4 } else { 2 }
    }
    /// Index of x.
    pub const X: usize = 0;
    /// Index of w (with w only).
    pub fn w(self) -> usize {
        1 + self.covariates
    }
    /// Index of x·w (with w only).
    pub fn xw(self) -> usize {
        2 + self.covariates
    }
    /// Index of y.
    pub fn y(self) -> usize {
        self.dim() - 1
    }
    /// Predictors of the slope model: x and the covariates.
    pub fn slope_predictors(self) -> Vec<usize> {
        (0..=self.covariates).collect()
    }
    /// Predictors of the product-term model: x, covariates, w, x·w.
    pub fn interaction_predictors(self) -> Vec<usize> {
        (0..self.covariates + 3).collect()
    }
    /// Short names of the moment variables: x, c1…, w, xw, y (used in the moments table).
    pub fn short_names(self) -> Vec<String> {
        let mut v = vec!["x".to_string()];
        v.extend((1..=self.covariates).map(|i| format!("c{i}")));
        if self.with_w {
            v.push("w".into());
            v.push("xw".into());
        }
        v.push("y".into());
        v
    }
}

/// The columns the row passes read: the site id, then x, the covariates,
/// [w] and y as numbers; x as two groups with `smd` and `log-or`, y as
/// two outcomes with `log-or` (coded 0/1, see [`Coding`]).
pub(super) fn row_columns(s: &SitesSettings) -> RowColumns {
    let groups = s.effect != SiteMeasure::Slope;
    let mut coded = vec![groups.then(|| Coding::new(Flag::Treat, s.treat.clone()))];
    coded.extend(s.covariates.iter().map(|_| None));
    if s.w.is_some() {
        coded.push(None);
    }
    coded.push((s.effect == SiteMeasure::LogOr).then(|| Coding::new(Flag::Event, s.event.clone())));
    let mut numeric = vec![(s.x.clone(), Flag::X)];
    numeric.extend(s.covariates.iter().map(|c| (c.clone(), Flag::Covariate)));
    if let Some(w) = &s.w {
        numeric.push((w.clone(), Flag::W));
    }
    numeric.push((s.y.clone(), Flag::Y));
    RowColumns {
        site: s.site.clone(),
        numeric,
        decimal: s.decimal,
        coded,
        text_x_advice: !groups,
    }
}
