//! Routes: which group of columns a row's effect was computed from.
//!
//! A measure may be computed from several groups of reported numbers (group
//! means, a t statistic, a p-value, medians with quartiles, a ratio with its
//! confidence limits, ...). Each row uses the first complete group in the
//! order of [`catalogue`]; the route taken is recorded per study as
//! `computed_from`. The catalogue also drives `pondus columns`, so the
//! listing the user reads and the order the code tries cannot drift apart.

use super::Measure;
use serde::Serialize;

/// The group of reported numbers a study's effect was computed from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
pub enum Route {
    /// Group means, SDs and sizes.
    #[serde(rename = "means")]
    Means,
    /// Group means, standard errors and sizes (SD = SE·√n).
    #[serde(rename = "means-se")]
    MeansSe,
    /// A t statistic (independent groups, or of a correlation).
    #[serde(rename = "t")]
    T,
    /// An F statistic with one numerator df and the sign of the difference.
    #[serde(rename = "f")]
    F,
    /// A two-sided p-value with the sign of the effect.
    #[serde(rename = "p")]
    P,
    /// Medians with the first and third quartiles (approximated means and SDs).
    #[serde(rename = "median-iqr")]
    MedianIqr,
    /// Medians with the minimum and maximum (approximated means and SDs).
    #[serde(rename = "median-range")]
    MedianRange,
    /// A Pearson correlation with its sample size.
    #[serde(rename = "r")]
    R,
    /// Event counts of two groups.
    #[serde(rename = "counts")]
    Counts,
    /// A ratio with its confidence limits, read on the ratio scale and logged.
    #[serde(rename = "ratio-ci")]
    RatioCi,
    /// A log ratio with its standard error.
    #[serde(rename = "log-se")]
    LogSe,
    /// A precomputed effect with its sampling variance.
    #[serde(rename = "variance")]
    Variance,
    /// A precomputed effect (or slope) with its standard error.
    #[serde(rename = "se")]
    Se,
    /// A precomputed effect with its confidence limits.
    #[serde(rename = "ci")]
    Ci,
    /// A correlation converted to a standardised mean difference (`--convert`).
    #[serde(rename = "r-to-d")]
    RToD,
    /// Event counts converted to a standardised mean difference (`--convert`).
    #[serde(rename = "counts-to-d")]
    CountsToD,
    /// A group comparison converted to a correlation (`--convert`).
    #[serde(rename = "d-to-r")]
    DToR,
}

/// Whether an effect was computed as reported, approximated, or converted
/// from another family of effect sizes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Derivation {
    /// Computed from what was reported (up to its rounding).
    Direct,
    /// Approximated from summaries of another kind (medians, quartiles, ranges).
    Approximated,
    /// Converted from another family of effect sizes.
    Converted,
}

impl Route {
    /// Every route, in the order the listings show them.
    pub const ALL: [Route; 17] = [
        Route::Means,
        Route::MeansSe,
        Route::T,
        Route::F,
        Route::P,
        Route::MedianIqr,
        Route::MedianRange,
        Route::R,
        Route::Counts,
        Route::RatioCi,
        Route::LogSe,
        Route::Variance,
        Route::Se,
        Route::Ci,
        Route::RToD,
        Route::CountsToD,
        Route::DToR,
    ];

    /// The word used in JSON, tables and reports.
    pub fn id(self) -> &'static str {
        match self {
            Route::Means => "means",
            Route::MeansSe => "means-se",
            Route::T => "t",
            Route::F => "f",
            Route::P => "p",
            Route::MedianIqr => "median-iqr",
            Route::MedianRange => "median-range",
            Route::R => "r",
            Route::Counts => "counts",
            Route::RatioCi => "ratio-ci",
            Route::LogSe => "log-se",
            Route::Variance => "variance",
            Route::Se => "se",
            Route::Ci => "ci",
            Route::RToD => "r-to-d",
            Route::CountsToD => "counts-to-d",
            Route::DToR => "d-to-r",
        }
    }

    /// Whether the effect was approximated or converted.
    pub fn derivation(self) -> Derivation {
        match self {
            Route::MedianIqr | Route::MedianRange => Derivation::Approximated,
            Route::RToD | Route::CountsToD | Route::DToR => Derivation::Converted,
            _ => Derivation::Direct,
        }
    }
}

impl std::fmt::Display for Route {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.id())
    }
}

/// How the effect columns are read beyond their headers: the confidence
/// level of reported limits, the scale of precomputed effects, and whether
/// rows of another family may be converted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EffectReading {
    /// Level of the reported confidence limits (`--ci-level`), in (0, 1).
    pub ci_level: f64,
    /// `--effect-scale log`: precomputed effects and limits are ratios, logged before analysis.
    pub log_scale: bool,
    /// `--convert`: rows of another family are converted.
    pub convert: bool,
}

impl Default for EffectReading {
    fn default() -> Self {
        EffectReading {
            ci_level: 0.95,
            log_scale: false,
            convert: false,
        }
    }
}

impl EffectReading {
    /// The normal quantile z for the limits: z = Φ⁻¹(1 − (1 − level)/2).
    pub fn z(&self) -> f64 {
        crate::dist::normal_quantile(1.0 - (1.0 - self.ci_level) / 2.0)
    }
}

/// One recognised route of a measure: its columns and where its formulas come from.
#[derive(Debug, Clone, Copy)]
pub struct RouteInfo {
    /// The route.
    pub route: Route,
    /// The columns it needs (role names, also the default headers).
    pub columns: &'static [&'static str],
    /// What is computed, in words.
    pub formula: &'static str,
    /// The published source of the formula.
    pub source: &'static str,
    /// Whether it is used only when conversions are asked for.
    pub needs_convert: bool,
}

const fn info(
    route: Route,
    columns: &'static [&'static str],
    formula: &'static str,
    source: &'static str,
) -> RouteInfo {
    RouteInfo {
        route,
        columns,
        formula,
        source,
        needs_convert: false,
    }
}

const fn conv(
    route: Route,
    columns: &'static [&'static str],
    formula: &'static str,
    source: &'static str,
) -> RouteInfo {
    RouteInfo {
        route,
        columns,
        formula,
        source,
        needs_convert: true,
    }
}

const HEDGES: &str = "Hedges & Olkin (1985), Statistical Methods for Meta-Analysis, ch. 5";
const BORENSTEIN: &str = "Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 7";

/// Routes of `smd`, in the order they are tried.
pub const SMD_ROUTES: &[RouteInfo] = &[
    info(
        Route::Means,
        &["treat_mean", "treat_sd", "treat_n", "ctrl_mean", "ctrl_sd", "ctrl_n"],
        "d = (mean_t - mean_c) / pooled SD, then Hedges' g = J·d",
        HEDGES,
    ),
    info(
        Route::MeansSe,
        &["treat_mean", "treat_se", "treat_n", "ctrl_mean", "ctrl_se", "ctrl_n"],
        "each SD = SE·√n, then as means",
        HEDGES,
    ),
    info(
        Route::T,
        &["t", "treat_n", "ctrl_n"],
        "d = t·√(1/n_t + 1/n_c) (independent-groups t, sign treatment − control), then g = J·d",
        BORENSTEIN,
    ),
    info(
        Route::F,
        &["f", "sign", "treat_n", "ctrl_n"],
        "d = sign·√F·√(1/n_t + 1/n_c) (F with 1 numerator df; sign 1 or -1), then g = J·d",
        BORENSTEIN,
    ),
    info(
        Route::P,
        &["p", "sign", "treat_n", "ctrl_n"],
        "t = sign·(1 - p/2) quantile of t with n_t + n_c - 2 df (two-sided p), then as t",
        BORENSTEIN,
    ),
    info(
        Route::MedianIqr,
        &[
            "treat_median", "treat_q1", "treat_q3", "treat_n",
            "ctrl_median", "ctrl_q1", "ctrl_q3", "ctrl_n",
        ],
        "mean ≈ (0.7 + 0.39/n)(q1 + q3)/2 + (0.3 - 0.39/n)·median; \
         SD ≈ (q3 - q1) / (2·Φ⁻¹((0.75n - 0.125)/(n + 0.25))); then as means; assumes roughly symmetric data",
        "mean: Luo et al. (2018), Stat Methods Med Res 27:1785; SD: Wan et al. (2014), BMC Med Res Methodol 14:135",
    ),
    info(
        Route::MedianRange,
        &[
            "treat_median", "treat_min", "treat_max", "treat_n",
            "ctrl_median", "ctrl_min", "ctrl_max", "ctrl_n",
        ],
        "mean ≈ w(min + max)/2 + (1 - w)·median, w = 4/(4 + n^0.75); \
         SD ≈ (max - min) / (2·Φ⁻¹((n - 0.375)/(n + 0.25))); then as means; assumes roughly symmetric data",
        "mean: Luo et al. (2018), Stat Methods Med Res 27:1785; SD: Wan et al. (2014), BMC Med Res Methodol 14:135",
    ),
    conv(
        Route::RToD,
        &["r", "n"],
        "d = 2r/√(1 - r²), var(d) = 4·var(r)/(1 - r²)³ with var(r) = (1 - r²)²/(n - 1); then g = J·d",
        BORENSTEIN,
    ),
    conv(
        Route::CountsToD,
        &["treat_events", "treat_n", "ctrl_events", "ctrl_n"],
        "d = ln(OR)·√3/π, var(d) = var(ln OR)·3/π²; then g = J·d",
        "Hasselblad & Hedges (1995), Psychol Bull 117:167; Chinn (2000), Stat Med 19:3127",
    ),
];

/// Routes of `r`, in the order they are tried.
pub const R_ROUTES: &[RouteInfo] = &[
    info(
        Route::R,
        &["r", "n"],
        "Fisher z = atanh(r), variance 1/(n - 3)",
        "Fisher (1921); Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 6",
    ),
    info(
        Route::T,
        &["t", "n"],
        "r = t/√(t² + n - 2) (t of the correlation or of a simple regression slope, df = n - 2), then as r",
        "Rosenthal (1994), in The Handbook of Research Synthesis, ch. 16",
    ),
    info(
        Route::P,
        &["p", "sign", "n"],
        "t = sign·(1 - p/2) quantile of t with n - 2 df (two-sided p), then as t",
        "Rosenthal (1994), in The Handbook of Research Synthesis, ch. 16",
    ),
    conv(
        Route::DToR,
        &["treat_n", "ctrl_n", "(and the columns of any smd route)"],
        "d from the first complete smd route, r = d/√(d² + a), a = (n_t + n_c)²/(n_t·n_c); \
         then Fisher z with n = n_t + n_c",
        BORENSTEIN,
    ),
];

/// Routes of `log-or`, in the order they are tried.
pub const LOG_OR_ROUTES: &[RouteInfo] = &[
    info(
        Route::Counts,
        &["treat_events", "treat_n", "ctrl_events", "ctrl_n"],
        "ln OR = ln(ad/bc), variance 1/a + 1/b + 1/c + 1/d (0.5 added to every cell when one is 0)",
        "Woolf (1955); Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 5",
    ),
    info(
        Route::RatioCi,
        &["or", "ci_low", "ci_high"],
        "ln OR, SE = (ln ci_high - ln ci_low)/(2z), z from the level of the limits (limits on the ratio scale)",
        "Altman & Bland (2011), BMJ 343:d2090",
    ),
    info(
        Route::LogSe,
        &["log_or", "se"],
        "the log odds ratio and its standard error as given",
        "(taken as reported)",
    ),
];

/// Routes of `log-rr`, in the order they are tried.
pub const LOG_RR_ROUTES: &[RouteInfo] = &[
    info(
        Route::Counts,
        &["treat_events", "treat_n", "ctrl_events", "ctrl_n"],
        "ln RR = ln((a/n_t)/(c/n_c)), variance 1/a - 1/n_t + 1/c - 1/n_c (0.5 added to every cell when one is 0)",
        "Katz et al. (1978); Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 5",
    ),
    info(
        Route::RatioCi,
        &["rr", "ci_low", "ci_high"],
        "ln RR, SE = (ln ci_high - ln ci_low)/(2z), z from the level of the limits (limits on the ratio scale)",
        "Altman & Bland (2011), BMJ 343:d2090",
    ),
    info(
        Route::LogSe,
        &["log_rr", "se"],
        "the log risk ratio and its standard error as given",
        "(taken as reported)",
    ),
];

/// Routes of `risk-diff`.
pub const RISK_DIFF_ROUTES: &[RouteInfo] = &[info(
    Route::Counts,
    &["treat_events", "treat_n", "ctrl_events", "ctrl_n"],
    "p_t - p_c, variance p_t(1 - p_t)/n_t + p_c(1 - p_c)/n_c (0.5 added to every cell when one is 0)",
    "Borenstein et al. (2009), Introduction to Meta-Analysis, ch. 5",
)];

/// Routes of `effect`, in the order they are tried.
pub const EFFECT_ROUTES: &[RouteInfo] = &[
    info(
        Route::Variance,
        &["effect", "variance"],
        "the effect and its sampling variance as given",
        "(taken as reported)",
    ),
    info(
        Route::Se,
        &["effect", "se"],
        "variance = se²",
        "(taken as reported)",
    ),
    info(
        Route::Ci,
        &["effect", "ci_low", "ci_high"],
        "SE = (ci_high - ci_low)/(2z), z from the level of the limits; on the log scale the effect and \
         limits are ratios and are logged first",
        "Altman & Bland (2011), BMJ 343:d2090",
    ),
];

/// Routes of `slope`.
pub const SLOPE_ROUTES: &[RouteInfo] = &[info(
    Route::Se,
    &["slope", "se"],
    "the slope, variance se²",
    "(taken as reported)",
)];

/// Routes of `partial-r`.
pub const PARTIAL_ROUTES: &[RouteInfo] = &[info(
    Route::T,
    &["t", "n", "covariates"],
    "partial r = t/√(t² + n - covariates - 2), Fisher z with variance 1/(n - 3 - covariates)",
    "Aloe & Thompson (2013), J Soc Soc Work Res 4:390",
)];

/// The routes of `measure`, in the order they are tried.
pub fn catalogue(measure: Measure) -> &'static [RouteInfo] {
    match measure {
        Measure::Effect => EFFECT_ROUTES,
        Measure::R => R_ROUTES,
        Measure::PartialR => PARTIAL_ROUTES,
        Measure::Slope => SLOPE_ROUTES,
        Measure::Smd => SMD_ROUTES,
        Measure::LogOr => LOG_OR_ROUTES,
        Measure::LogRr => LOG_RR_ROUTES,
        Measure::RiskDiff => RISK_DIFF_ROUTES,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_match_the_json() {
        for r in Route::ALL {
            assert_eq!(serde_json::to_string(&r).unwrap(), format!("\"{r}\""));
        }
    }

    #[test]
    fn every_catalogue_column_is_a_role() {
        for m in Measure::ALL {
            for info in catalogue(m) {
                for c in info.columns {
                    if c.starts_with('(') {
                        continue;
                    }
                    assert!(
                        m.roles().iter().any(|r| r.name == *c),
                        "{} route {} column {c} is not a role",
                        m.id(),
                        info.route
                    );
                }
            }
        }
    }
}
