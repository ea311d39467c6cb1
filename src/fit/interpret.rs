//! Stage 8 of `fit`: interpret. Conditional effects and simple slopes
//! (`--probe`), pairwise level contrasts (`--compare-levels`),
//! Johnson–Neyman regions of significance (`--regions`) with their words,
//! how the picture changes with the moderators, and the per-study record of
//! the artifact corrections. The mathematics is in [`crate::model::probe`].

use super::readout::{held, held_listed};
use super::settings::{InterpretSettings, ProbeSpec};
use super::studies::Studies;
use super::summarise::{contrast_test, Summary};
use crate::effect::artifact::{self, ArtifactSettings};
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::model::design::{Design, ModeratorKind, Value};
use crate::model::probe::{self, JnRegion, Partner, Region};
use crate::model::ModelFit;
use crate::result::{
    ArtifactReport, ArtifactStudy, AtValue, ConditionalEffect, Interpretation, LevelContrast,
    PictureChange, ProbePoint, QuantityKind, RegionOfSignificance, SimpleSlope, Test,
};
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// Everything `--probe`, `--compare-levels` and `--regions` ask for.
///
/// # Errors
/// [`Error::Usage`] naming the flag: an unknown or twice-probed moderator, a
/// number for a categorical moderator or a non-number for a numeric one,
/// `--compare-levels` without a categorical moderator, `--regions` without a
/// numeric moderator.
pub fn interpret(
    design: &Design,
    fit: &ModelFit,
    settings: &InterpretSettings,
    scale: ReadingScale,
    summary: &Summary,
) -> Result<Interpretation> {
    let mut out = Interpretation::default();
    if !settings.any() {
        return Ok(out);
    }
    if design.moderators.is_empty() {
        let flag = if !settings.probes.is_empty() {
            Flag::Probe
        } else if settings.compare_levels {
            Flag::CompareLevels
        } else {
            Flag::Regions
        };
        return Err(Error::usage(
            flag,
            format!(
                "the model has no moderators; add {} NAME (the average effect is reported without it)",
                Flag::Moderator
            ),
        ));
    }
    let index = |name: &str| design.moderators.iter().position(|m| m.name == name);
    let mut probed = Vec::new();
    for spec in &settings.probes {
        let j = index(&spec.name).ok_or_else(|| {
            Error::usage(
                Flag::Probe,
                format!(
                    "'{}' is not a moderator of this model; the moderators are: {}",
                    spec.name,
                    names(design)
                ),
            )
        })?;
        if probed.iter().any(|(i, _)| *i == j) {
            return Err(Error::usage(
                Flag::Probe,
                format!(
                    "'{}' is probed twice; give its values in one {}",
                    spec.name,
                    Flag::Probe
                ),
            ));
        }
        probed.push((j, points(design, j, spec)?));
    }
    for (j, pts) in &probed {
        probe_one(design, fit, *j, pts, scale, &mut out)?;
    }
    if settings.compare_levels {
        out.level_contrasts = level_contrasts(design, fit, &probed)?;
    }
    if settings.regions {
        out.regions_of_significance = regions(design, fit)?;
    }
    if !out.conditional_effects.is_empty() {
        out.picture = Some(picture(&out.conditional_effects, fit, summary, scale));
    }
    Ok(out)
}

/// One probed value.
#[derive(Debug, Clone)]
struct Point {
    value: Value,
    at: AtValue,
    label: ProbePoint,
    outside: bool,
}

fn names(design: &Design) -> String {
    design
        .moderators
        .iter()
        .map(|m| m.name.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The points of one `--probe`.
fn points(design: &Design, j: usize, spec: &ProbeSpec) -> Result<Vec<Point>> {
    let m = &design.moderators[j];
    if let Some(texts) = &spec.values {
        let same = |a: &str, b: &str| {
            a.trim() == b.trim()
                || matches!((a.trim().parse::<f64>(), b.trim().parse::<f64>()), (Ok(x), Ok(y)) if x == y
                    && matches!(m.kind, ModeratorKind::Numeric { .. }))
        };
        if let Some((a, b)) = texts
            .iter()
            .enumerate()
            .find_map(|(i, a)| texts[..i].iter().find(|b| same(a, b)).map(|b| (b, a)))
        {
            return Err(Error::usage(
                Flag::Probe,
                format!(
                    "{}: '{a}' and '{b}' are the same value; give each value once",
                    m.name
                ),
            ));
        }
    }
    match (&m.kind, &spec.values) {
        (ModeratorKind::Numeric { mean, sd, .. }, None) => Ok([
            (mean - sd, ProbePoint::MeanMinusSd),
            (*mean, ProbePoint::Mean),
            (mean + sd, ProbePoint::MeanPlusSd),
        ]
        .into_iter()
        .map(|(x, l)| numeric_point(design, j, x, l))
        .collect()),
        (ModeratorKind::Numeric { .. }, Some(texts)) => texts
            .iter()
            .map(|t| {
                let x = t
                    .trim()
                    .parse::<f64>()
                    .ok()
                    .filter(|x| x.is_finite())
                    .ok_or_else(|| {
                        Error::usage(
                            Flag::Probe,
                            format!(
                                "'{t}' is not a number (moderator '{}' is numeric); give numbers, \
                                 e.g. {} {}=10,20, or no values for its mean and mean ± 1 SD",
                                m.name,
                                Flag::Probe,
                                m.name
                            ),
                        )
                    })?;
                Ok(numeric_point(design, j, x, ProbePoint::Given))
            })
            .collect(),
        (ModeratorKind::Categorical { levels, .. }, None) => Ok(levels
            .iter()
            .map(|l| level_point(l))
            .collect()),
        (ModeratorKind::Categorical { levels, .. }, Some(texts)) => texts
            .iter()
            .map(|t| {
                let t = t.trim();
                if !levels.iter().any(|l| l == t) {
                    let what = if t.parse::<f64>().is_ok() {
                        format!("moderator '{}' is categorical and '{t}' is not one of its levels", m.name)
                    } else {
                        format!("'{t}' is not a level of moderator '{}'", m.name)
                    };
                    return Err(Error::usage(
                        Flag::Probe,
                        format!(
                            "{what}; its levels are: {}. Name levels, or give {} {} alone for every level",
                            levels.join(", "),
                            Flag::Probe,
                            m.name
                        ),
                    ));
                }
                Ok(level_point(t))
            })
            .collect(),
    }
}

fn numeric_point(design: &Design, j: usize, x: f64, label: ProbePoint) -> Point {
    let outside = match design.moderators[j].kind {
        ModeratorKind::Numeric { min, max, .. } => x < min || x > max,
        ModeratorKind::Categorical { .. } => false,
    };
    Point {
        value: Value::Number(x),
        at: AtValue::Number(x),
        label,
        outside,
    }
}

fn level_point(level: &str) -> Point {
    Point {
        value: Value::Label(level.to_string()),
        at: AtValue::Level(level.to_string()),
        label: ProbePoint::Level,
        outside: false,
    }
}

/// The name of a partner's quantity: the moderator's name for its slope,
/// "name: level − reference" for a level difference.
fn partner_name(design: &Design, f: usize, partner: &Partner) -> String {
    let name = &design.moderators[f].name;
    match partner {
        Partner::PerUnit => name.clone(),
        Partner::Difference { level, reference } => format!("{name}: {level} − {reference}"),
    }
}

/// The kind of a partner's quantity.
fn partner_kind(partner: &Partner) -> QuantityKind {
    match partner {
        Partner::PerUnit => QuantityKind::Slope,
        Partner::Difference { .. } => QuantityKind::LevelDifference,
    }
}

/// The partner of moderator `j` in a product term (a, b), if `j` is in it.
fn partner_of(j: usize, (a, b): (usize, usize)) -> Option<usize> {
    match (a == j, b == j) {
        (true, _) => Some(b),
        (_, true) => Some(a),
        _ => None,
    }
}

/// The conditional effects at the points of moderator `j`, and the simple
/// slopes of every partner in a product term with `j`.
fn probe_one(
    design: &Design,
    fit: &ModelFit,
    j: usize,
    pts: &[Point],
    scale: ReadingScale,
    out: &mut Interpretation,
) -> Result<()> {
    let name = &design.moderators[j].name;
    let (mut values, named) = held(design, &[j]);
    let held_words = held_listed(&named);
    for pt in pts {
        values[j] = pt.value.clone();
        let c = probe::conditional(fit, &probe::row(design, &values)?);
        let p = c.prediction;
        out.conditional_effects.push(ConditionalEffect {
            moderator: name.clone(),
            at: pt.at.clone(),
            point: pt.label,
            held: held_words.clone(),
            mean: p.mean_effect(),
            test: Test {
                statistic: c.statistic,
                df: c.df,
                p: c.p,
            },
            reading: p.reading(scale),
            outside_range: pt.outside,
        });
    }
    for &pair in &design.interactions {
        let Some(f) = partner_of(j, pair) else {
            continue;
        };
        let (mut values, named) = held(design, &[j, f]);
        let held_words = held_listed(&named);
        for pt in pts {
            values[j] = pt.value.clone();
            for (partner, c) in probe::partner_contrasts(design, f, &values)? {
                out.simple_slopes.push(SimpleSlope {
                    of: partner_name(design, f, &partner),
                    quantity_kind: partner_kind(&partner),
                    moderator: name.clone(),
                    at: pt.at.clone(),
                    point: pt.label,
                    held: held_words.clone(),
                    test: contrast_test(&probe::contrast(fit, &c)),
                });
            }
        }
    }
    Ok(())
}

/// Pairwise contrasts between the levels of the probed categorical
/// moderators (of every categorical moderator when none is probed), Holm-adjusted.
fn level_contrasts(
    design: &Design,
    fit: &ModelFit,
    probed: &[(usize, Vec<Point>)],
) -> Result<Vec<LevelContrast>> {
    let categorical: Vec<usize> = (0..design.moderators.len())
        .filter(|&j| matches!(design.moderators[j].kind, ModeratorKind::Categorical { .. }))
        .collect();
    if categorical.is_empty() {
        return Err(Error::usage(
            Flag::CompareLevels,
            "the model has no categorical moderator whose levels could be compared",
        ));
    }
    let named: Vec<usize> = probed
        .iter()
        .map(|(j, _)| *j)
        .filter(|j| categorical.contains(j))
        .collect();
    let chosen = if named.is_empty() { categorical } else { named };
    let mut out = Vec::new();
    for j in chosen {
        let ModeratorKind::Categorical { levels, .. } = &design.moderators[j].kind else {
            continue;
        };
        let (mut values, named) = held(design, &[j]);
        let held_words = held_listed(&named);
        let mut rows = Vec::with_capacity(levels.len());
        for l in levels {
            values[j] = Value::Label(l.clone());
            rows.push(probe::row(design, &values)?);
        }
        for (b, a, t, p_holm) in probe::pairwise(fit, &rows) {
            out.push(LevelContrast {
                moderator: design.moderators[j].name.clone(),
                level: levels[b].clone(),
                minus: levels[a].clone(),
                held: held_words.clone(),
                test: contrast_test(&t),
                p_holm,
            });
        }
    }
    Ok(out)
}

/// The regions of significance along every numeric moderator: of the mean
/// effect, and of every partner's slope or level difference in a product term.
fn regions(design: &Design, fit: &ModelFit) -> Result<Vec<RegionOfSignificance>> {
    let numeric: Vec<usize> = (0..design.moderators.len())
        .filter(|&j| matches!(design.moderators[j].kind, ModeratorKind::Numeric { .. }))
        .collect();
    if numeric.is_empty() {
        return Err(Error::usage(
            Flag::Regions,
            format!(
                "regions of significance are values of a numeric moderator, and this model has \
                 none; add a numeric {}",
                Flag::Moderator
            ),
        ));
    }
    let mut out = Vec::new();
    for &m in &numeric {
        let ModeratorKind::Numeric { min, max, .. } = design.moderators[m].kind else {
            unreachable!("regions are computed along numeric moderators only")
        };
        let (values, named) = held(design, &[m]);
        let effect_at = |x: f64| -> Result<Vec<f64>> {
            let mut v = values.clone();
            v[m] = Value::Number(x);
            probe::row(design, &v)
        };
        let jn = probe::jn_region(fit, min, max, effect_at)?;
        out.push(region(
            design,
            fit,
            m,
            (QuantityKind::MeanEffect, "effect".into()),
            held_listed(&named),
            jn,
        ));
        for &pair in &design.interactions {
            let Some(f) = partner_of(m, pair) else {
                continue;
            };
            let (hv, named) = held(design, &[m, f]);
            let hw = held_listed(&named);
            let partners = probe::partner_contrasts(design, f, &hv)?;
            for (which, (partner, _)) in partners.into_iter().enumerate() {
                let f_at = |x: f64| -> Result<Vec<f64>> {
                    let mut v = hv.clone();
                    v[m] = Value::Number(x);
                    Ok(probe::partner_contrasts(design, f, &v)?
                        .swap_remove(which)
                        .1)
                };
                let jn = probe::jn_region(fit, min, max, f_at)?;
                let quantity = (partner_kind(&partner), partner_name(design, f, &partner));
                out.push(region(design, fit, m, quantity, hw.clone(), jn));
            }
        }
    }
    Ok(out)
}

/// The report's region of significance along moderator `m` of the
/// `(kind, name)` quantity, with its words.
fn region(
    design: &Design,
    fit: &ModelFit,
    m: usize,
    (kind, quantity): (QuantityKind, String),
    held_words: String,
    jn: JnRegion,
) -> RegionOfSignificance {
    let name = &design.moderators[m].name;
    let JnRegion {
        a,
        b,
        bounds,
        region: reg,
        observed_bounds,
        observed,
        observed_region,
        min,
        max,
    } = jn;
    let what = match kind {
        QuantityKind::MeanEffect => "the mean effect".to_string(),
        QuantityKind::LevelDifference => format!("the difference {quantity}"),
        QuantityKind::Slope => format!("the slope of {quantity}"),
    };
    let lv = format!("{}%", fmt::short(100.0 * fit.options.level));
    let b_txt: Vec<String> = bounds.iter().map(|x| fmt::short(*x)).collect();
    let all = match reg {
        Region::Everywhere => format!("for every value of {name}"),
        Region::Nowhere => format!("for no value of {name}"),
        Region::Outside => format!(
            "for {name} below {} or above {} (outside the interval)",
            b_txt[0], b_txt[1]
        ),
        Region::Inside => format!(
            "for {name} between {} and {} (inside the interval)",
            b_txt[0], b_txt[1]
        ),
        Region::Above => format!("for {name} above {}", b_txt[0]),
        Region::Below => format!("for {name} below {}", b_txt[0]),
    };
    let sign = |x: f64| {
        if a + b * x > 0.0 {
            "positive"
        } else {
            "negative"
        }
    };
    let obs = if observed.is_empty() {
        "nowhere".to_string()
    } else if observed.len() == 1 && observed[0] == [min, max] {
        format!(
            "over the whole observed range ({})",
            sign(0.5 * (min + max))
        )
    } else {
        let parts: Vec<String> = observed
            .iter()
            .map(|[l, h]| {
                format!(
                    "from {} to {} ({})",
                    fmt::short(*l),
                    fmt::short(*h),
                    sign(0.5 * (l + h))
                )
            })
            .collect();
        parts.join(" and ")
    };
    let rest = match observed_region {
        Region::Everywhere | Region::Nowhere => "",
        Region::Outside | Region::Inside | Region::Above | Region::Below => {
            " Elsewhere in that range the data cannot tell it from 0."
        }
    };
    let words = format!(
        "The {lv} confidence interval of {what} excludes 0 {all}; within the studies' range of \
         {name} ({} to {}): {obs}.{rest}",
        fmt::short(min),
        fmt::short(max)
    );
    RegionOfSignificance {
        moderator: name.clone(),
        quantity,
        quantity_kind: kind,
        held: held_words,
        bounds,
        significant: reg,
        observed_bounds,
        observed_region,
        observed_min: min,
        observed_max: max,
        observed_significant: observed,
        words,
    }
}

/// How the picture changes from the pooled effect without moderators to the
/// conditional effects at the probed values.
fn picture(
    effects: &[ConditionalEffect],
    fit: &ModelFit,
    summary: &Summary,
    scale: ReadingScale,
) -> PictureChange {
    let lo = effects
        .iter()
        .map(|e| e.mean.estimate)
        .fold(f64::INFINITY, f64::min);
    let hi = effects
        .iter()
        .map(|e| e.mean.estimate)
        .fold(f64::NEG_INFINITY, f64::max);
    let sign_changes = lo < 0.0 && hi > 0.0;
    let shown = |x: f64| match scale {
        ReadingScale::Same => fmt::short(x),
        ReadingScale::Correlation => format!("{} (r = {})", fmt::short(x), fmt::short(x.tanh())),
        ReadingScale::Ratio => format!("{} (ratio {})", fmt::short(x), fmt::short(x.exp())),
    };
    let pooled = summary.average.clone();
    let tau2_without = summary.heterogeneity.tau2_without_moderators;
    let r2 = summary.heterogeneity.r2;
    let tau2_with = fit.tau2.estimate;
    let mut words = format!(
        "Without moderators the pooled effect is {} with τ² = {}. With the moderators the mean \
         effect at the probed values runs from {} to {}, with residual τ² = {}",
        shown(pooled.mean.estimate),
        fmt::short4(tau2_without),
        shown(lo),
        shown(hi),
        fmt::short4(tau2_with)
    );
    if let Some(r2) = r2 {
        words.push_str(&format!(
            " (the moderators account for {:.0}% of τ²)",
            100.0 * r2
        ));
    }
    words.push('.');
    if sign_changes {
        words.push_str(
            " The mean effect changes sign across the probed values: the single pooled effect \
             averages over effects of opposite direction.",
        );
    }
    PictureChange {
        pooled,
        tau2_without,
        tau2_with,
        r2,
        conditional_min: lo,
        conditional_max: hi,
        sign_changes,
        words,
    }
}

/// The per-study record of the artifact corrections (None without any, or
/// when a study has no correction).
pub fn artifact_report(settings: &ArtifactSettings, studies: &Studies) -> Option<ArtifactReport> {
    if !settings.any() {
        return None;
    }
    let (applied, method) = artifact::describe(settings);
    let mut rows = Vec::with_capacity(studies.corrections.len());
    for (c, label) in studies.corrections.iter().zip(studies.labels.iter()) {
        let c = (*c)?;
        rows.push(ArtifactStudy {
            study: label.to_string(),
            observed_r: c.r_obs,
            corrected_r: c.r,
            observed_variance: c.v_obs,
            corrected_variance: c.v,
            se_factor: c.factor,
        });
    }
    let k = rows.len().max(1) as f64;
    Some(ArtifactReport {
        corrections: applied,
        method,
        mean_observed_r: rows.iter().map(|r| r.observed_r).sum::<f64>() / k,
        mean_corrected_r: rows.iter().map(|r| r.corrected_r).sum::<f64>() / k,
        studies: rows,
    })
}
