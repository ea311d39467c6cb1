//! Reading a fitted meta-regression at chosen moderator values: conditional
//! effects (`--probe`), simple slopes in models with a product term,
//! pairwise level contrasts (`--compare-levels`) and Johnson–Neyman regions
//! of significance (`--regions`).
//!
//! Every quantity here is a linear contrast c'β̂ of the fitted coefficients,
//! with Var(c'β̂) = c' Cov c from the model's covariance (Knapp–Hartung-scaled
//! under `kh`) and the model's reference distribution: t(k − p) under `kh`,
//! the normal under `z` (the same as the coefficient tests,
//! [`inference::critical`]). The contrast vectors are built from design rows
//! ([`design::design_row`]), so centring, dummy coding and product terms are
//! handled exactly as in the fit.

use super::design::{self, Design, ModeratorKind, Value};
use super::inference;
use super::{Inference, ModelFit};
use crate::dist;
use crate::effect::artifact::ArtifactSettings;
use crate::effect::ReadingScale;
use crate::error::{Error, Result};
use crate::result::{
    AtValue, ConditionalEffect, ContrastTest, Estimate, Interpretation, Interval, LevelContrast,
    PictureChange, ProbePoint, RegionOfSignificance, SimpleSlope, Test,
};
use crate::support::format as fmt;
use crate::tolerance;
use nalgebra::DVector;

/// One `--probe` request: a moderator and, optionally, the values to read it at.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeSpec {
    /// The moderator's name.
    pub name: String,
    /// The values as typed (None: the default points).
    pub values: Option<Vec<String>>,
}

/// Settings of the interpretation and artifact-correction pieces of `fit`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct InterpretSettings {
    /// `--probe` requests, in the order given.
    pub probes: Vec<ProbeSpec>,
    /// `--compare-levels`: pairwise contrasts between levels.
    pub compare_levels: bool,
    /// `--regions`: Johnson–Neyman regions of significance.
    pub regions: bool,
    /// Artifact corrections of correlations.
    pub artifacts: ArtifactSettings,
}

impl InterpretSettings {
    /// Whether any interpretation output was asked for.
    pub fn any(&self) -> bool {
        !self.probes.is_empty() || self.compare_levels || self.regions
    }
}

pub use crate::result::Region;

/// Johnson–Neyman bounds of θ(m) = a + b·m along m.
///
/// # Formula
/// With Var θ(m) = v00 + 2 m v01 + m² v11 and critical value c, the
/// confidence interval of θ(m) excludes 0 where
/// (a + b m)² − c² Var θ(m) > 0, that is where
/// f(m) = (b² − c² v11) m² + 2 (a b − c² v01) m + (a² − c² v00) > 0
/// (Johnson & Neyman 1936, *Statistical Research Memoirs* 1:57; in the form of
/// Bauer & Curran 2005, *Multivariate Behavioral Research* 40:373, eq. for the
/// region of significance, cited from memory). With A = b² − c² v11 and the
/// discriminant D: A > 0, D > 0 → significant outside the roots; A > 0,
/// D ≤ 0 → everywhere; A < 0, D > 0 → inside the roots; A < 0, D ≤ 0 →
/// nowhere. A = 0 (within [`tolerance::JN_DEGENERATE`] of the scale b² + c² v11)
/// leaves a linear inequality with one bound. The roots use the
/// cancellation-free form q = −(B + sign(B)√D)/2, roots q/A and C/q.
///
/// # Examples
/// ```
/// use pondus::model::probe::{jn_bounds, Region};
/// // θ(m) = m with Var = 1 and c = 2: significant where m² > 4, |m| > 2.
/// let (b, r) = jn_bounds(0.0, 1.0, 1.0, 0.0, 0.0, 2.0);
/// assert_eq!(r, Region::Outside);
/// assert!((b[0] + 2.0).abs() < 1e-12 && (b[1] - 2.0).abs() < 1e-12);
/// ```
pub fn jn_bounds(a: f64, b: f64, v00: f64, v01: f64, v11: f64, c: f64) -> (Vec<f64>, Region) {
    let c2 = c * c;
    let qa = b * b - c2 * v11;
    let qb = 2.0 * (a * b - c2 * v01);
    let qc = a * a - c2 * v00;
    let scale = b * b + c2 * v11;
    if qa.abs() <= tolerance::JN_DEGENERATE * scale || scale == 0.0 {
        // Linear: qb m + qc > 0.
        if qb == 0.0 {
            return (
                Vec::new(),
                if qc > 0.0 {
                    Region::Everywhere
                } else {
                    Region::Nowhere
                },
            );
        }
        let root = -qc / qb;
        return (
            vec![root],
            if qb > 0.0 {
                Region::Above
            } else {
                Region::Below
            },
        );
    }
    let disc = qb * qb - 4.0 * qa * qc;
    if disc <= 0.0 {
        return (
            Vec::new(),
            if qa > 0.0 {
                Region::Everywhere
            } else {
                Region::Nowhere
            },
        );
    }
    let q = -0.5 * (qb + qb.signum() * disc.sqrt());
    let (mut r1, mut r2) = if q == 0.0 {
        // qb = 0 and qc = 0 with disc > 0 cannot happen; qb = 0 gives q from √D.
        let h = (disc.sqrt()) / (2.0 * qa);
        (-h, h)
    } else {
        (q / qa, qc / q)
    };
    if r1 > r2 {
        std::mem::swap(&mut r1, &mut r2);
    }
    (
        vec![r1, r2],
        if qa > 0.0 {
            Region::Outside
        } else {
            Region::Inside
        },
    )
}

/// The parts of [lo, hi] where the region holds.
pub fn within(bounds: &[f64], region: Region, lo: f64, hi: f64) -> Vec<[f64; 2]> {
    let mut out = Vec::new();
    let mut push = |a: f64, b: f64| {
        let (a, b) = (a.max(lo), b.min(hi));
        if a < b {
            out.push([a, b]);
        }
    };
    match (region, bounds) {
        (Region::Everywhere, _) => push(lo, hi),
        (Region::Outside, [r1, r2]) => {
            push(lo, *r1);
            push(*r2, hi);
        }
        (Region::Inside, [r1, r2]) => push(*r1, *r2),
        (Region::Above, [r]) => push(*r, hi),
        (Region::Below, [r]) => push(lo, *r),
        _ => {}
    }
    out
}

fn df(fit: &ModelFit) -> Option<f64> {
    match fit.options.inference {
        Inference::Kh => Some((fit.k - fit.p) as f64),
        Inference::Z => None,
    }
}

fn p_value(fit: &ModelFit, stat: f64) -> f64 {
    match fit.options.inference {
        Inference::Kh => dist::t_two_sided_p(stat, (fit.k - fit.p) as f64),
        Inference::Z => dist::normal_two_sided_p(stat),
    }
}

/// The test of one contrast c'β̂.
///
/// # Formula
/// estimate c'β̂, SE √(c' Cov c), CI estimate ± crit·SE, statistic
/// estimate/SE on t(k − p) (kh) or the normal (z).
pub fn contrast(fit: &ModelFit, c: &[f64]) -> ContrastTest {
    let x = DVector::from_column_slice(c);
    let est = x.dot(&fit.beta);
    let se = (x.transpose() * &fit.cov * &x)[(0, 0)].max(0.0).sqrt();
    let crit = inference::critical(fit);
    let stat = est / se;
    ContrastTest {
        estimate: est,
        se,
        ci: Interval::new(est - crit * se, est + crit * se),
        test: Test {
            statistic: stat,
            df: df(fit),
            p: p_value(fit, stat),
        },
    }
}

fn quad(fit: &ModelFit, a: &[f64], b: &[f64]) -> f64 {
    let x = DVector::from_column_slice(a);
    let y = DVector::from_column_slice(b);
    (x.transpose() * &fit.cov * &y)[(0, 0)]
}

/// Holm's step-down adjustment (Holm 1979, *Scand. J. Statist.* 6:65):
/// with p sorted ascending, p̃_(i) = max_{j ≤ i} min(1, (m − j + 1) p_(j)).
pub fn holm(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut out = vec![0.0; m];
    let mut running: f64 = 0.0;
    for (rank, &i) in order.iter().enumerate() {
        running = running.max(((m - rank) as f64 * p[i]).min(1.0));
        out[i] = running;
    }
    out
}

/// Values at which the moderators are held: numeric at their means,
/// categorical at their reference levels; and, in words, for those not in `except`.
fn held(design: &Design, except: &[usize]) -> (Vec<Value>, String) {
    let mut values = Vec::new();
    let mut parts = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        match &m.kind {
            ModeratorKind::Numeric { mean, .. } => {
                values.push(Value::Number(*mean));
                if !except.contains(&j) {
                    parts.push(format!("{} at its mean {}", m.name, fmt::short(*mean)));
                }
            }
            ModeratorKind::Categorical { reference, .. } => {
                values.push(Value::Label(reference.clone()));
                if !except.contains(&j) {
                    parts.push(format!("{} at its reference level {reference}", m.name));
                }
            }
        }
    }
    (values, parts.join(", "))
}

fn row(design: &Design, values: &[Value]) -> Result<Vec<f64>> {
    design::design_row(&design.moderators, &design.interactions, values)
}

fn minus(a: &[f64], b: &[f64]) -> Vec<f64> {
    a.iter().zip(b).map(|(x, y)| x - y).collect()
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
                            "--probe",
                            format!(
                                "'{t}' is not a number (moderator '{}' is numeric); give numbers, \
                                 e.g. --probe {}=10,20, or no values for its mean and mean ± 1 SD",
                                m.name, m.name
                            ),
                        )
                    })?;
                Ok(numeric_point(design, j, x, ProbePoint::Given))
            })
            .collect(),
        (ModeratorKind::Categorical { levels, .. }, None) => Ok(levels
            .iter()
            .map(|l| Point {
                value: Value::Label(l.clone()),
                at: AtValue::Level(l.clone()),
                label: ProbePoint::Level,
                outside: false,
            })
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
                        "--probe",
                        format!(
                            "{what}; its levels are: {}. Name levels, or give --probe {} alone for every level",
                            levels.join(", "),
                            m.name
                        ),
                    ));
                }
                Ok(Point {
                    value: Value::Label(t.to_string()),
                    at: AtValue::Level(t.to_string()),
                    label: ProbePoint::Level,
                    outside: false,
                })
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

/// The quantities a moderator `f` contributes as a "slope": its slope per
/// unit when numeric, each level's difference from the reference when
/// categorical. Each comes with its name and the contrast at `values`.
fn partner_contrasts(
    design: &Design,
    f: usize,
    values: &[Value],
) -> Result<Vec<(String, Vec<f64>)>> {
    let m = &design.moderators[f];
    let mut out = Vec::new();
    match &m.kind {
        ModeratorKind::Numeric { mean, .. } => {
            let mut v = values.to_vec();
            v[f] = Value::Number(*mean + 1.0);
            let up = row(design, &v)?;
            v[f] = Value::Number(*mean);
            let here = row(design, &v)?;
            out.push((m.name.clone(), minus(&up, &here)));
        }
        ModeratorKind::Categorical {
            levels, reference, ..
        } => {
            let mut v = values.to_vec();
            v[f] = Value::Label(reference.clone());
            let base = row(design, &v)?;
            for l in levels.iter().filter(|l| *l != reference) {
                v[f] = Value::Label(l.clone());
                out.push((
                    format!("{}: {l} − {reference}", m.name),
                    minus(&row(design, &v)?, &base),
                ));
            }
        }
    }
    Ok(out)
}

/// What the model needs besides the fit for the "how the picture changes" comparison.
#[derive(Debug, Clone)]
pub struct Baseline {
    /// The pooled effect without moderators.
    pub pooled: Estimate,
    /// τ² without moderators.
    pub tau2_without: f64,
    /// Share of τ² explained.
    pub r2: Option<f64>,
}

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
    baseline: Baseline,
) -> Result<Interpretation> {
    let mut out = Interpretation::default();
    if !settings.any() {
        return Ok(out);
    }
    if design.moderators.is_empty() {
        let flag = if !settings.probes.is_empty() {
            "--probe"
        } else if settings.compare_levels {
            "--compare-levels"
        } else {
            "--regions"
        };
        return Err(Error::usage(
            flag,
            "the model has no moderators; add --moderator NAME (the average effect is reported without it)",
        ));
    }
    let index = |name: &str| design.moderators.iter().position(|m| m.name == name);
    let mut probed = Vec::new();
    for spec in &settings.probes {
        let j = index(&spec.name).ok_or_else(|| {
            Error::usage(
                "--probe",
                format!(
                    "'{}' is not a moderator of this model; the moderators are: {}",
                    spec.name,
                    names(design)
                ),
            )
        })?;
        if probed.iter().any(|(i, _)| *i == j) {
            return Err(Error::usage(
                "--probe",
                format!(
                    "'{}' is probed twice; give its values in one --probe",
                    spec.name
                ),
            ));
        }
        probed.push((j, points(design, j, spec)?));
    }

    for (j, pts) in &probed {
        let j = *j;
        let name = &design.moderators[j].name;
        let (mut values, held_words) = held(design, &[j]);
        for pt in pts {
            values[j] = pt.value.clone();
            let x0 = row(design, &values)?;
            let p = inference::predict(fit, &x0);
            let stat = p.estimate / p.se;
            out.conditional_effects.push(ConditionalEffect {
                moderator: name.clone(),
                at: pt.at.clone(),
                point: pt.label,
                held: held_words.clone(),
                mean: p.mean_effect(),
                test: Test {
                    statistic: stat,
                    df: df(fit),
                    p: p_value(fit, stat),
                },
                reading: p.reading(scale),
                outside_range: pt.outside,
            });
        }
        // Simple slopes of every partner in a product term with j.
        for &(a, b) in &design.interactions {
            let f = match (a == j, b == j) {
                (true, _) => b,
                (_, true) => a,
                _ => continue,
            };
            let (mut values, held_words) = held(design, &[j, f]);
            for pt in pts {
                values[j] = pt.value.clone();
                for (of, c) in partner_contrasts(design, f, &values)? {
                    out.simple_slopes.push(SimpleSlope {
                        of,
                        moderator: name.clone(),
                        at: pt.at.clone(),
                        point: pt.label,
                        held: held_words.clone(),
                        test: contrast(fit, &c),
                    });
                }
            }
        }
    }

    if settings.compare_levels {
        let categorical: Vec<usize> = (0..design.moderators.len())
            .filter(|&j| matches!(design.moderators[j].kind, ModeratorKind::Categorical { .. }))
            .collect();
        if categorical.is_empty() {
            return Err(Error::usage(
                "--compare-levels",
                "the model has no categorical moderator whose levels could be compared",
            ));
        }
        let chosen: Vec<usize> = {
            let named: Vec<usize> = probed
                .iter()
                .map(|(j, _)| *j)
                .filter(|j| categorical.contains(j))
                .collect();
            if named.is_empty() {
                categorical
            } else {
                named
            }
        };
        for j in chosen {
            let ModeratorKind::Categorical { levels, .. } = &design.moderators[j].kind else {
                continue;
            };
            let (mut values, held_words) = held(design, &[j]);
            let mut rows = Vec::with_capacity(levels.len());
            for l in levels {
                values[j] = Value::Label(l.clone());
                rows.push(row(design, &values)?);
            }
            let mut pairs = Vec::new();
            for a in 0..levels.len() {
                for b in a + 1..levels.len() {
                    pairs.push((b, a, contrast(fit, &minus(&rows[b], &rows[a]))));
                }
            }
            let ps: Vec<f64> = pairs.iter().map(|(_, _, t)| t.test.p).collect();
            let adj = holm(&ps);
            for ((b, a, test), p_holm) in pairs.into_iter().zip(adj) {
                out.level_contrasts.push(LevelContrast {
                    moderator: design.moderators[j].name.clone(),
                    level: levels[b].clone(),
                    minus: levels[a].clone(),
                    held: held_words.clone(),
                    test,
                    p_holm,
                });
            }
        }
    }

    if settings.regions {
        let numeric: Vec<usize> = (0..design.moderators.len())
            .filter(|&j| matches!(design.moderators[j].kind, ModeratorKind::Numeric { .. }))
            .collect();
        if numeric.is_empty() {
            return Err(Error::usage(
                "--regions",
                "regions of significance are values of a numeric moderator, and this model has \
                 none; add a numeric --moderator",
            ));
        }
        let level = fit.options.level;
        for &m in &numeric {
            let (values, held_words) = held(design, &[m]);
            let effect_at = |x: f64| -> Result<Vec<f64>> {
                let mut v = values.clone();
                v[m] = Value::Number(x);
                row(design, &v)
            };
            out.regions_of_significance.push(region(
                design,
                fit,
                m,
                "effect".into(),
                held_words,
                level,
                effect_at,
            )?);
            for &(a, b) in &design.interactions {
                let f = match (a == m, b == m) {
                    (true, _) => b,
                    (_, true) => a,
                    _ => continue,
                };
                let (hv, hw) = held(design, &[m, f]);
                let names0 = partner_contrasts(design, f, &hv)?;
                for (which, (of, _)) in names0.into_iter().enumerate() {
                    let hv = hv.clone();
                    let f_at = move |x: f64| -> Result<Vec<f64>> {
                        let mut v = hv.clone();
                        v[m] = Value::Number(x);
                        Ok(partner_contrasts(design, f, &v)?.swap_remove(which).1)
                    };
                    out.regions_of_significance.push(region(
                        design,
                        fit,
                        m,
                        of,
                        hw.clone(),
                        level,
                        f_at,
                    )?);
                }
            }
        }
    }

    if !out.conditional_effects.is_empty() {
        out.picture = Some(picture(&out.conditional_effects, fit, baseline, scale));
    }
    Ok(out)
}

/// The Johnson–Neyman region of the quantity whose contrast at moderator
/// value x is `at(x)`; the contrast is linear in x, so c(x) = c(0) + x·(c(1) − c(0)).
fn region(
    design: &Design,
    fit: &ModelFit,
    m: usize,
    quantity: String,
    held_words: String,
    level: f64,
    at: impl Fn(f64) -> Result<Vec<f64>>,
) -> Result<RegionOfSignificance> {
    let c0 = at(0.0)?;
    let d = minus(&at(1.0)?, &c0);
    let beta: Vec<f64> = fit.beta.iter().copied().collect();
    let dot = |u: &[f64]| u.iter().zip(&beta).map(|(x, b)| x * b).sum::<f64>();
    let (a, b) = (dot(&c0), dot(&d));
    let (v00, v01, v11) = (quad(fit, &c0, &c0), quad(fit, &c0, &d), quad(fit, &d, &d));
    let crit = inference::critical(fit);
    let (bounds, reg) = jn_bounds(a, b, v00, v01, v11, crit);
    let ModeratorKind::Numeric { min, max, .. } = design.moderators[m].kind else {
        unreachable!("regions are computed along numeric moderators only")
    };
    let observed = within(&bounds, reg, min, max);
    let observed_bounds: Vec<f64> = bounds
        .iter()
        .copied()
        .filter(|x| *x > min && *x < max)
        .collect();
    let observed_region = match (observed.as_slice(), observed_bounds.len()) {
        ([], _) => Region::Nowhere,
        ([[l, h]], _) if *l == min && *h == max => Region::Everywhere,
        ([_, _], _) => Region::Outside,
        ([[l, _]], 1) if *l == min => Region::Below,
        ([_], 1) => Region::Above,
        ([_], _) => Region::Inside,
        _ => Region::Inside,
    };
    let name = &design.moderators[m].name;
    let what = if quantity == "effect" {
        "the mean effect".to_string()
    } else if quantity.contains(':') {
        format!("the difference {quantity}")
    } else {
        format!("the slope of {quantity}")
    };
    let lv = format!("{}%", fmt::short(100.0 * level));
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
    let rest = if matches!(observed_region, Region::Everywhere | Region::Nowhere) {
        ""
    } else {
        " Elsewhere in that range the data cannot tell it from 0."
    };
    let words = format!(
        "The {lv} confidence interval of {what} excludes 0 {all}; within the studies' range of \
         {name} ({} to {}): {obs}.{rest}",
        fmt::short(min),
        fmt::short(max)
    );
    Ok(RegionOfSignificance {
        moderator: name.clone(),
        quantity,
        held: held_words,
        bounds,
        significant: reg,
        observed_bounds,
        observed_region,
        observed_min: min,
        observed_max: max,
        observed_significant: observed,
        words,
    })
}

fn picture(
    effects: &[ConditionalEffect],
    fit: &ModelFit,
    base: Baseline,
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
    let tau2_with = fit.tau2.estimate;
    let mut words = format!(
        "Without moderators the pooled effect is {} with τ² = {}. With the moderators the mean \
         effect at the probed values runs from {} to {}, with residual τ² = {}",
        shown(base.pooled.mean.estimate),
        fmt::short4(base.tau2_without),
        shown(lo),
        shown(hi),
        fmt::short4(tau2_with)
    );
    if let Some(r2) = base.r2 {
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
        pooled: base.pooled,
        tau2_without: base.tau2_without,
        tau2_with,
        r2: base.r2,
        conditional_min: lo,
        conditional_max: hi,
        sign_changes,
        words,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// f(m) evaluated directly, to check the roots are where the CI touches 0.
    fn margin(a: f64, b: f64, v: (f64, f64, f64), c: f64, m: f64) -> f64 {
        (a + b * m).powi(2) - c * c * (v.0 + 2.0 * m * v.1 + m * m * v.2)
    }

    #[test]
    fn four_cases_by_construction() {
        let c = 1.96;
        // Steep, precise slope through 0 at m = 5: significant outside an interval around 5.
        let v = (0.04, -0.004, 0.0004);
        let (bd, r) = jn_bounds(-1.0, 0.2, v.0, v.1, v.2, c);
        assert_eq!(r, Region::Outside);
        for x in &bd {
            assert!(margin(-1.0, 0.2, v, c, *x).abs() < 1e-12);
        }
        assert!(bd[0] < 5.0 && 5.0 < bd[1]);
        // A line crosses 0 somewhere, where its interval must contain 0: a
        // large, precise intercept with a small slope is significant outside
        // two bounds far away (near the crossing at m = −500).
        let (bd, r) = jn_bounds(5.0, 0.01, 0.01, 0.0, 1e-6, c);
        assert_eq!(r, Region::Outside);
        assert!(bd[0] < -500.0 && bd[1] > -500.0 && bd[1] < 0.0, "{bd:?}");
        // Only a quantity that does not change with m is significant everywhere.
        let (bd, r) = jn_bounds(5.0, 0.0, 0.01, 0.0, 0.0, c);
        assert_eq!((bd.len(), r), (0, Region::Everywhere));
        // Flat and noisy: nowhere.
        let (bd, r) = jn_bounds(0.05, 0.0, 0.04, 0.0, 0.01, c);
        assert_eq!((bd.len(), r), (0, Region::Nowhere));
        // Imprecise slope, precise near m = 0 where the effect is large: inside.
        let v = (0.01, 0.0, 0.25);
        let (bd, r) = jn_bounds(1.0, 0.1, v.0, v.1, v.2, c);
        assert_eq!(r, Region::Inside);
        for x in &bd {
            assert!(margin(1.0, 0.1, v, c, *x).abs() < 1e-12);
        }
        assert!(bd[0] < 0.0 && 0.0 < bd[1]);
    }

    #[test]
    fn within_clips_to_the_observed_range() {
        assert_eq!(
            within(&[2.0, 4.0], Region::Outside, 0.0, 10.0),
            vec![[0.0, 2.0], [4.0, 10.0]]
        );
        assert_eq!(
            within(&[2.0, 4.0], Region::Outside, 3.0, 10.0),
            vec![[4.0, 10.0]]
        );
        assert_eq!(
            within(&[2.0, 4.0], Region::Inside, 3.0, 10.0),
            vec![[3.0, 4.0]]
        );
        assert!(within(&[2.0, 4.0], Region::Inside, 5.0, 10.0).is_empty());
        assert!(within(&[], Region::Nowhere, 0.0, 1.0).is_empty());
    }

    #[test]
    fn holm_by_hand() {
        // p = 0.01, 0.04, 0.03: sorted 0.01·3 = 0.03, 0.03·2 = 0.06, 0.04·1 → max(0.06, 0.04) = 0.06.
        let a = holm(&[0.01, 0.04, 0.03]);
        assert!((a[0] - 0.03).abs() < 1e-15);
        assert!((a[2] - 0.06).abs() < 1e-15);
        assert!((a[1] - 0.06).abs() < 1e-15);
        assert_eq!(holm(&[0.6, 0.9]), vec![1.0, 1.0]);
    }
}
