//! Stage 4b of `fit`: the spread of the true effects (`--spread-by`). The
//! characteristics are coded like moderators into the spread design Z, the
//! location-scale model ln τ_i² = z_i'α ([`location_scale`]) is fitted
//! with the same estimator as the model with one τ² (REML or ML), and the
//! working fit's coefficients, weights and residuals are replaced by the
//! location-scale model's. What it cannot be combined with is refused
//! before any work ([`check`]).

use super::estimate::{Fitted, WorkingModel};
use super::studies::Studies;
use super::FitSettings;
use crate::dist;
use crate::error::{Error, Result};
use crate::model::design::{self, Design, ModeratorKind, ModeratorSpec, RawModerator};
use crate::model::location_scale::{self, LocationScaleFit};
use crate::model::tau2::Tau2Method;
use crate::model::Inference;
use crate::result::{Interval, Spread, SpreadCoefficient, SpreadStudy, SpreadTest, Tau2At};
use crate::support::flag::Flag;
use crate::support::rows::Rows;
use nalgebra::DVector;

/// Refuses `--spread-by` with an estimator other than REML or ML, with
/// Knapp–Hartung inference, and with the parts of `fit` that assume one τ²
/// or refit the model (clusters, `--at`, `--beyond`, `--all-subsets`, the
/// robustness diagnostics). Nothing to check without `--spread-by`.
///
/// # Errors
/// [`Error::Usage`] naming the flag and what to do.
pub fn check(settings: &FitSettings) -> Result<()> {
    if settings.answers.spread_by.is_empty() {
        return Ok(());
    }
    let method = settings.options.method;
    if !matches!(method, Tau2Method::Reml | Tau2Method::Ml) {
        return Err(Error::usage(
            Flag::Tau2,
            format!(
                "{} fits the location-scale model by likelihood: use {} reml (the default) or {} \
                 ml; '{}' has no version in which τ² varies between studies",
                Flag::SpreadBy,
                Flag::Tau2,
                Flag::Tau2,
                method.id()
            ),
        ));
    }
    if settings.options.inference != Inference::Z {
        return Err(Error::usage(
            Flag::Inference,
            format!(
                "the coefficients of the location-scale model ({}) are tested with Wald z tests \
                 (no Knapp–Hartung version is established for it); give {} z or leave {} out",
                Flag::SpreadBy,
                Flag::Inference,
                Flag::Inference
            ),
        ));
    }
    let d = &settings.diagnostics;
    let refused = [
        (settings.dependence.cluster.is_some(), Flag::Cluster),
        (settings.dependence.robust, Flag::Robust),
        (!settings.predictions.is_empty(), Flag::At),
        (settings.answers.beyond.is_some(), Flag::Beyond),
        (settings.answers.all_subsets, Flag::AllSubsets),
        (d.loo, Flag::Loo),
        (d.influence, Flag::Influence),
        (d.permutations.is_some(), Flag::Permutations),
        (d.small_study, Flag::SmallStudy),
        (d.cumulative_by.is_some(), Flag::CumulativeBy),
        (d.selection.is_some(), Flag::Selection),
    ];
    if let Some((_, flag)) = refused.iter().find(|(asked, _)| *asked) {
        return Err(Error::usage(
            *flag,
            format!(
                "is not available with {} yet: it assumes one τ² for all studies (or refits \
                 that model). Run it in a separate analysis without {}",
                Flag::SpreadBy,
                Flag::SpreadBy
            ),
        ));
    }
    Ok(())
}

/// The spread design and the location-scale fit, with the working fit
/// replaced by it (None without `--spread-by`).
///
/// # Errors
/// [`Error::Model`] for a spread characteristic that is constant, a level
/// with a single study, too few studies for the terms, or collinear spread
/// terms; the errors of [`location_scale::fit`].
pub fn fit(
    settings: &FitSettings,
    source: &str,
    studies: &Studies,
    design: &Design,
    model: &mut Fitted,
) -> Result<Option<Spread>> {
    let specs = &settings.answers.spread_by;
    if specs.is_empty() {
        return Ok(None);
    }
    debug_assert!(matches!(model.working, WorkingModel::Independent));
    check_terms(source, specs, &studies.spread_raw, &studies.included)?;
    let z = design::build(specs, &studies.spread_raw, &studies.included, &[])
        .map_err(|e| spread_error(source, e))?;
    let (k, p, m) = (studies.y.len(), design.p, z.p);
    if k < p + m + 1 {
        let names = |d: &Design| {
            d.terms
                .iter()
                .map(|t| t.name.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };
        return Err(Error::Model(format!(
            "{source}: {k} studies are too few for the location-scale model: it has {p} mean \
             coefficient{} ({}) and {m} spread coefficients ({}), and needs at least {} studies. \
             Use fewer moderators, fewer {} characteristics or fewer levels",
            if p == 1 { "" } else { "s" },
            names(design),
            names(&z),
            p + m + 1,
            Flag::SpreadBy
        )));
    }
    let restricted = settings.options.method == Tau2Method::Reml;
    let ls = location_scale::fit(
        &studies.y,
        &studies.v,
        &design.x,
        p,
        &z.x,
        m,
        model.fit.tau2.estimate,
        restricted,
    )
    .map_err(|e| spread_error(source, e))?;
    let ll0 = model.fit.log_likelihood.unwrap_or(f64::NAN);
    let level = settings.options.level;
    let spread = report(settings, studies, design, &z, &ls, ll0, level);
    replace_fit(model, studies, design, ls);
    Ok(Some(spread))
}

/// Prefixes a model error with the file and says that it concerns the spread.
fn spread_error(source: &str, e: Error) -> Error {
    match e {
        Error::Model(m) => Error::Model(format!(
            "{source}: the spread terms ({}): {m}",
            Flag::SpreadBy
        )),
        other => other,
    }
}

/// Refuses a spread characteristic with one value among the included
/// studies, or a level of a categorical one with a single study (the spread
/// within a level cannot be estimated from one study).
///
/// # Errors
/// [`Error::Model`] naming the characteristic, the level and the fix.
fn check_terms(
    source: &str,
    specs: &[ModeratorSpec],
    raw: &[RawModerator],
    included: &Rows,
) -> Result<()> {
    for (spec, r) in specs.iter().zip(raw) {
        let name = &spec.name;
        match r {
            RawModerator::Numeric(v) => {
                let mut vals = included.iter().filter_map(|i| v.get(i));
                let first = vals.next().unwrap_or(f64::NAN);
                if vals.all(|x| x == first) {
                    return Err(Error::Model(format!(
                        "{source}: the spread characteristic '{name}' ({}) has the same value \
                         ({first}) in every included study, so the spread cannot depend on it; \
                         drop {} {name}",
                        Flag::SpreadBy,
                        Flag::SpreadBy
                    )));
                }
            }
            RawModerator::Text(v) => {
                let mut tally = std::collections::BTreeMap::new();
                for i in included.iter() {
                    if let Some(l) = v.get(i) {
                        *tally.entry(l).or_insert(0usize) += 1;
                    }
                }
                if tally.len() < 2 {
                    return Err(Error::Model(format!(
                        "{source}: the spread characteristic '{name}' ({}) has one level ('{}') \
                         among the included studies, so the spread cannot depend on it; drop {} \
                         {name}",
                        Flag::SpreadBy,
                        tally.keys().next().copied().unwrap_or_default(),
                        Flag::SpreadBy
                    )));
                }
                if let Some((level, _)) = tally.iter().find(|(_, &n)| n < 2) {
                    return Err(Error::Model(format!(
                        "{source}: level '{level}' of the spread characteristic '{name}' ({}) \
                         has a single study; the spread of true effects within a level cannot be \
                         estimated from one study. Merge the level with another in the table, or \
                         leave its study out",
                        Flag::SpreadBy
                    )));
                }
            }
        }
    }
    Ok(())
}

/// The public answer: coefficients, LR test, τ² at telling values, studies.
///
/// # Formula
/// Wald: z_j = α̂_j/se_j, p = 2(1 − Φ(|z_j|)), interval α̂_j ∓ z_{1−a/2}·se_j.
/// LR: 2(ℓ_LS − ℓ_one τ²) on m − 1 df (Viechtbauer & López-López 2022,
/// *Res. Synth. Methods* 13:697, cited from memory; a value below 0 from
/// rounding is shown as 0). Band of a new study with study i's
/// characteristics: x_i'β̂ ∓ z_{1−a/2}·√(τ̂_i² + x_i'Cov(β̂)x_i).
fn report(
    settings: &FitSettings,
    studies: &Studies,
    design: &Design,
    z: &Design,
    ls: &LocationScaleFit,
    ll0: f64,
    level: f64,
) -> Spread {
    let crit = dist::normal_quantile(1.0 - (1.0 - level) / 2.0);
    let coefficients = z
        .terms
        .iter()
        .enumerate()
        .map(|(j, t)| {
            let (est, se) = (ls.alpha[j], ls.alpha_cov[(j, j)].max(0.0).sqrt());
            let stat = est / se;
            SpreadCoefficient {
                term: t.name.clone(),
                estimate: est,
                se,
                ci: Interval::new(est - crit * se, est + crit * se),
                statistic: stat,
                p: dist::normal_two_sided_p(stat),
            }
        })
        .collect();
    let df = z.p - 1;
    let statistic = (2.0 * (ls.log_likelihood - ll0)).max(0.0);
    let p = design.p;
    let studies_out = (0..studies.y.len())
        .map(|i| {
            let x = DVector::from_column_slice(&design.x[i * p..(i + 1) * p]);
            let fitted = x.dot(&ls.beta);
            let var = (x.transpose() * &ls.beta_cov * &x)[(0, 0)].max(0.0);
            let half = crit * (var + ls.tau2[i]).sqrt();
            SpreadStudy {
                study: studies.labels[i].to_string(),
                tau2: ls.tau2[i],
                fitted,
                pi_low: fitted - half,
                pi_high: fitted + half,
            }
        })
        .collect();
    Spread {
        spread_by: settings
            .answers
            .spread_by
            .iter()
            .map(|s| s.name.clone())
            .collect(),
        method: settings.options.method,
        coefficients,
        test: SpreadTest {
            statistic,
            df,
            p: dist::chi2_sf(statistic, df as f64),
        },
        tau2_by: tau2_by(z, ls, crit),
        log_likelihood: ls.log_likelihood,
        log_likelihood_one_tau2: ll0,
        iterations: ls.iterations,
        studies: studies_out,
    }
}

/// τ² at each level of a categorical spread term and at the mean and ±1 SD
/// of a numeric one, every other spread column at its study mean.
///
/// # Formula
/// τ²(z₀) = exp(z₀'α̂), interval exp(z₀'α̂ ∓ z_{1−a/2}·√(z₀'Cov(α̂)z₀)).
fn tau2_by(z: &Design, ls: &LocationScaleFit, crit: f64) -> Vec<Tau2At> {
    let (k, m) = (z.x.len() / z.p, z.p);
    let means: Vec<f64> = (0..m)
        .map(|j| (0..k).map(|i| z.x[i * m + j]).sum::<f64>() / k as f64)
        .collect();
    let mut out = Vec::new();
    let mut start = 1;
    for md in &z.moderators {
        let points: Vec<(String, Option<f64>, Vec<f64>)> = match &md.kind {
            ModeratorKind::Numeric {
                mean, sd, centered, ..
            } => {
                let shift = if *centered { *mean } else { 0.0 };
                [("mean-1sd", -1.0), ("mean", 0.0), ("mean+1sd", 1.0)]
                    .iter()
                    .map(|(at, s)| {
                        let value = mean + s * sd;
                        (at.to_string(), Some(value), vec![value - shift])
                    })
                    .collect()
            }
            ModeratorKind::Categorical {
                levels, reference, ..
            } => levels
                .iter()
                .map(|l| {
                    let cols = levels
                        .iter()
                        .filter(|x| *x != reference)
                        .map(|x| f64::from(x == l))
                        .collect();
                    (l.clone(), None, cols)
                })
                .collect(),
        };
        let width = points.first().map_or(0, |p| p.2.len());
        for (at, value, cols) in points {
            let mut z0 = DVector::from_column_slice(&means);
            z0[0] = 1.0;
            for (c, x) in cols.iter().enumerate() {
                z0[start + c] = *x;
            }
            let eta = z0.dot(&ls.alpha);
            let se = (z0.transpose() * &ls.alpha_cov * &z0)[(0, 0)]
                .max(0.0)
                .sqrt();
            out.push(Tau2At {
                term: md.name.clone(),
                at,
                value,
                tau2: eta.exp(),
                tau: (eta / 2.0).exp(),
                ci: Interval::new((eta - crit * se).exp(), (eta + crit * se).exp()),
            });
        }
        start += width;
    }
    out
}

/// The working fit with the location-scale model's coefficients, their
/// covariance (X'WX)⁻¹ at the fitted τ_i² (Wald z: no scale factor),
/// weights 1/(v_i + τ̂_i²), fitted values, standardised residuals and
/// log-likelihood. τ² and its interval stay those of the model with one τ²
/// (the heterogeneity section describes that model); the per-study τ̂_i²
/// are kept for the shrunken estimates.
fn replace_fit(model: &mut Fitted, studies: &Studies, design: &Design, ls: LocationScaleFit) {
    let fit = &mut model.fit;
    let (k, p) = (studies.y.len(), design.p);
    fit.weights.clear();
    fit.fitted.clear();
    fit.std_resid.clear();
    for i in 0..k {
        let x = DVector::from_column_slice(&design.x[i * p..(i + 1) * p]);
        let total = studies.v[i] + ls.tau2[i];
        let fi = x.dot(&ls.beta);
        let var_r = total - (x.transpose() * &ls.beta_cov * &x)[(0, 0)];
        fit.weights.push(1.0 / total);
        fit.fitted.push(fi);
        fit.std_resid.push(
            (var_r > crate::tolerance::RESIDUAL_VARIANCE_FLOOR * total)
                .then(|| (studies.y[i] - fi) / var_r.sqrt()),
        );
    }
    fit.beta = ls.beta;
    fit.cov = ls.beta_cov.clone();
    fit.cov_model = ls.beta_cov;
    fit.kh_scale = None;
    // No Knapp–Hartung factor belongs to the location-scale fit (Wald z);
    // 1 keeps the comparison with a floored factor out of its answers.
    fit.scale_factor = 1.0;
    fit.log_likelihood = Some(ls.log_likelihood);
    model.tau2_each = Some(ls.tau2);
}
