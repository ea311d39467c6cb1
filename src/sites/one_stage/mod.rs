//! `pondus sites --one-stage`: the linear mixed model of all participant
//! rows, fitted by REML from the per-site sufficient statistics alone.
//!
//! # Model
//! ```text
//! y_ij = α_j + β₁x_ij + β₂(w_ij − w̄_j) + β₃x_ij(w_ij − w̄_j) + β₄x_ij·w̄_j
//!        (+ γ'c_ij) (+ Σ δ_m x_ij·s_jm) + u_j·x_ij + e_ij,
//! u_j ~ N(0, τ²), e_ij ~ N(0, σ²)
//! ```
//! with a fixed intercept α_j per site (stratified), so that β₃ compares
//! participants of one site (within-site interaction) and β₄ compares sites
//! (across-site interaction): the two kept apart in one model (Riley et al.
//! 2020, BMJ 369:m1374; Hua et al. 2017, Stat Med 36:772).
//!
//! # Sufficient statistics
//! Each within-site predictor is a linear combination of the moment vector
//! v = (x, c…, w, x·w, y) with coefficients that are constant in the site:
//! x(w − w̄_j) = x·w − w̄_j·x, x·w̄_j = w̄_j·x, x·s_j = s_j·x, w − w̄_j = w − const.
//! With B_j the d × p matrix of those coefficients and C_j the site's
//! co-moment matrix of v, the centred co-moments are S_ZZ = B_j'C_jB_j,
//! S_Zx = B_j'C_j e_x, S_Zy = B_j'C_j e_y, which is all [`reml`] needs:
//! memory and time proportional to the number of sites.

mod reml;
mod words;

use super::first_pass::SiteSummary;
use super::settings::Layout;
use crate::dist;
use crate::error::{Error, Result};
use crate::input::number::{parse_cell, Cell};
use crate::result::{
    Interval, NamedZTerm, OneStage, OneStageSearch, OneStageVariance, ProfiledVariance,
    SiteMeasure, SitesReport, ZTerm,
};
use crate::support::flag::Flag;
use crate::tolerance;
use nalgebra::{DMatrix, DVector};
use reml::{Problem, SiteStats};
use std::collections::HashMap;

/// Every site's count, means and co-moments, kept for the one-stage model.
#[derive(Debug, Clone)]
pub struct SiteMoments {
    /// The moment layout.
    pub layout: Layout,
    /// The sites, each with its moments (every site with rows).
    pub sites: Vec<SiteSummary>,
}

/// The site characteristics the model uses: their names and each site's
/// values as the site table holds them (id → cells in `names` order).
#[derive(Debug, Clone, Default)]
pub struct Characteristics {
    /// The characteristics' columns (`--moderator`).
    pub names: Vec<String>,
    /// Site id → the characteristics' cells.
    pub values: HashMap<String, Vec<String>>,
    /// The site table's name, for messages.
    pub source: String,
}

/// Fits the one-stage model to `moments`, with x times each of
/// `characteristics` as across-site slope terms, and (when `report` has a
/// second stage) says how its answers compare with the two-stage ones.
///
/// # Errors
/// [`Error::Usage`] for a group effect (`--effect smd|log-or`);
/// [`Error::Model`] for one site, too few sites, a site with constant x
/// (named), a missing or non-numeric characteristic (named), collinear
/// across-site terms; [`Error::NoConvergence`] from the searches.
pub fn fit(
    report: &SitesReport,
    moments: &SiteMoments,
    characteristics: &Characteristics,
    level: f64,
) -> Result<OneStage> {
    if report.model.effect != SiteMeasure::Slope {
        return Err(Error::usage(
            Flag::OneStage,
            format!(
                "the one-stage model is a linear model of y on x, so it takes the slope (drop {} {}; for a 0/1 \
                 group x and a numeric y the slope is the mean difference)",
                Flag::Effect,
                report.model.effect.id()
            ),
        ));
    }
    let layout = moments.layout;
    let k = moments.sites.len();
    let with_w = layout.with_w;
    let across_terms = 1 + usize::from(with_w) + characteristics.names.len();
    if k < 2 {
        return Err(Error::Model(format!(
            "{}: the data have one site ('{}'); the one-stage model compares sites and needs at least two",
            report.input.file,
            moments.sites.first().map_or("", |s| s.id.as_str())
        )));
    }
    if k <= across_terms {
        return Err(Error::Model(format!(
            "{}: {k} sites is too few for the one-stage model: it needs more sites than the {across_terms} \
             terms that describe how the x slope differs between sites (the slope{}{}), so that the slope \
             variance τ² can be estimated; add sites or drop {}",
            report.input.file,
            if with_w { ", the across-site interaction" } else { "" },
            if characteristics.names.is_empty() { "" } else { ", one per site characteristic" },
            if characteristics.names.is_empty() { Flag::W } else { Flag::Moderator }
        )));
    }
    let chars = characteristic_values(moments, characteristics)?;
    let stats = site_stats(report, moments, &chars)?;
    let rows: u64 = moments.sites.iter().map(|s| s.moments.n()).sum();
    let names = term_names(report, layout, characteristics);
    let p = names.len();
    let df = (rows - k as u64) as f64 - p as f64;
    if df < 1.0 {
        return Err(Error::Model(format!(
            "{}: {rows} rows in {k} sites leave no residual degrees of freedom for the one-stage model's \
             {p} within-site terms and {k} site intercepts",
            report.input.file
        )));
    }
    let scale = stats.iter().map(|s| s.sxx).sum::<f64>() / k as f64;
    let problem = Problem {
        sites: stats,
        df,
        scale,
    };
    check_rank(&problem, &names)?;
    let opt = problem.optimum()?;
    let cut = dist::chi2_quantile(1.0 - level, 1.0, dist::Tail::Upper);
    let [tau_ci, sig_ci] = problem.intervals(&opt, cut)?;
    let cov = opt.eval.m.clone().try_inverse().ok_or_else(|| {
        Error::Model("the one-stage model's information matrix is singular".into())
    })? * opt.sigma2;
    let z = dist::normal_quantile(0.5 + level / 2.0);
    let term = |i: usize| z_term(opt.eval.beta[i], cov[(i, i)].sqrt(), z);
    let nc = layout.covariates;
    let w_terms = with_w.then(|| (term(1 + nc), term(2 + nc), term(3 + nc)));
    let first_char = 1 + nc + if with_w { 3 } else { 0 };
    let mut result = OneStage {
        model: words::formula(report, characteristics),
        sites: k,
        rows,
        level,
        slope: term(0),
        w_within: w_terms.map(|t| t.0),
        within_interaction: w_terms.map(|t| t.1),
        across_interaction: w_terms.map(|t| t.2),
        covariates: (0..nc)
            .map(|i| NamedZTerm {
                name: report.model.covariates[i].clone(),
                term: term(1 + i),
            })
            .collect(),
        characteristics: characteristics
            .names
            .iter()
            .enumerate()
            .map(|(i, n)| NamedZTerm {
                name: n.clone(),
                term: term(first_char + i),
            })
            .collect(),
        variance: OneStageVariance {
            slope: ProfiledVariance {
                estimate: opt.gamma * opt.sigma2,
                ci: Interval::new(tau_ci.0, tau_ci.1),
            },
            residual: ProfiledVariance {
                estimate: opt.sigma2,
                ci: Interval::new(sig_ci.0, sig_ci.1),
            },
        },
        search: OneStageSearch {
            at_boundary: opt.gamma == 0.0,
            score_at_zero: opt.score_at_zero,
            evaluations: opt.evaluations,
        },
        answers: vec![],
        notes: vec![],
        cautions: vec![],
    };
    words::fill(&mut result, report, moments, &chars);
    Ok(result)
}

/// `{estimate, se, CI, z, p}` from an estimate and its SE.
fn z_term(estimate: f64, se: f64, z: f64) -> ZTerm {
    let statistic = estimate / se;
    ZTerm {
        estimate,
        se,
        ci: Interval::new(estimate - z * se, estimate + z * se),
        statistic,
        p: dist::normal_two_sided_p(statistic),
    }
}

/// The within-site predictors' names in model order: x, the covariates,
/// w − w̄, x(w − w̄), x·w̄, then x times each characteristic.
fn term_names(report: &SitesReport, layout: Layout, ch: &Characteristics) -> Vec<String> {
    let m = &report.model;
    let mut v = vec![format!("x ('{}')", m.x)];
    v.extend(m.covariates.iter().map(|c| format!("covariate '{c}'")));
    if layout.with_w {
        let w = m.w.as_deref().unwrap_or("w");
        v.push(format!("{w} − site mean of {w}"));
        v.push(format!("{} × ({w} − site mean of {w})", m.x));
        v.push(format!("{} × site mean of {w}", m.x));
    }
    v.extend(
        ch.names
            .iter()
            .map(|c| format!("{} × site characteristic '{c}'", m.x)),
    );
    v
}

/// Each site's characteristic values as numbers.
///
/// # Errors
/// [`Error::Model`] naming the site and the characteristic when a value is
/// missing, not a number, or the site has no row in the site table.
fn characteristic_values(moments: &SiteMoments, ch: &Characteristics) -> Result<Vec<Vec<f64>>> {
    let mut out = Vec::with_capacity(moments.sites.len());
    for site in &moments.sites {
        if ch.names.is_empty() {
            out.push(vec![]);
            continue;
        }
        let Some(cells) = ch.values.get(&site.id) else {
            return Err(Error::Model(format!(
                "site '{}' has no row in the site table {}, so the one-stage model has no value of {} for it; \
                 add its row, or remove the site's rows",
                site.id,
                ch.source,
                ch.names.join(", ")
            )));
        };
        let mut vals = Vec::with_capacity(cells.len());
        for (name, cell) in ch.names.iter().zip(cells) {
            match parse_cell(cell) {
                Cell::Value(v) => vals.push(v),
                Cell::Missing => {
                    return Err(Error::Model(format!(
                        "{}: site '{}' has no value of '{name}', which the one-stage model needs for every \
                         site; fill it in, or remove the site's rows",
                        ch.source, site.id
                    )))
                }
                Cell::Invalid => {
                    return Err(Error::Model(format!(
                        "{}: site '{}' has '{cell}' for '{name}', not a number; the one-stage model takes \
                         numeric site characteristics (code a category 0/1)",
                        ch.source, site.id
                    )))
                }
            }
        }
        out.push(vals);
    }
    Ok(out)
}

/// Every site's centred co-moments of the predictors, x and y (see the
/// module's formula).
///
/// # Errors
/// [`Error::Model`] naming a site whose x is constant (or that has one row).
fn site_stats(
    report: &SitesReport,
    moments: &SiteMoments,
    chars: &[Vec<f64>],
) -> Result<Vec<SiteStats>> {
    let layout = moments.layout;
    let d = layout.dim();
    let (x, y) = (Layout::X, layout.y());
    let mut out = Vec::with_capacity(moments.sites.len());
    for (site, s) in moments.sites.iter().zip(chars) {
        let m = &site.moments;
        let sxx = m.comoment(x, x);
        let xbar = m.mean(x);
        let spread_floor = m.n() as f64 * (tolerance::ONE_STAGE_CONSTANT_X * xbar).powi(2);
        // NaN counts as no spread.
        let varies = sxx.partial_cmp(&spread_floor) == Some(std::cmp::Ordering::Greater);
        if m.n() < 2 || !varies {
            return Err(Error::Model(format!(
                "{}: x ('{}') {} in site '{}', so its rows say nothing about the x slope and the one-stage \
                 model cannot use them; remove the site's rows (or drop {})",
                report.input.file,
                report.model.x,
                if m.n() < 2 {
                    "has one row".to_string()
                } else {
                    format!("is constant ({})", xbar)
                },
                site.id,
                Flag::OneStage
            )));
        }
        // B: column j of the predictors as coefficients on v.
        let mut cols: Vec<Vec<f64>> = Vec::new();
        let unit = |i: usize| {
            let mut c = vec![0.0; d];
            c[i] = 1.0;
            c
        };
        cols.push(unit(x));
        cols.extend((0..layout.covariates).map(|i| unit(1 + i)));
        if layout.with_w {
            let wbar = m.mean(layout.w());
            cols.push(unit(layout.w()));
            let mut c = unit(layout.xw());
            c[x] = -wbar;
            cols.push(c);
            let mut c = vec![0.0; d];
            c[x] = wbar;
            cols.push(c);
        }
        for &v in s {
            let mut c = vec![0.0; d];
            c[x] = v;
            cols.push(c);
        }
        let p = cols.len();
        let cmat = DMatrix::from_fn(d, d, |i, j| m.comoment(i, j));
        let b = DMatrix::from_fn(d, p, |i, j| cols[j][i]);
        let cb = &cmat * &b;
        let szz = b.transpose() * &cb;
        let szx = DVector::from_fn(p, |j, _| cb[(x, j)]);
        let szy = DVector::from_fn(p, |j, _| cb[(y, j)]);
        out.push(SiteStats {
            sxx,
            sxy: m.comoment(x, y),
            syy: m.comoment(y, y),
            szz,
            szx,
            szy,
        });
    }
    Ok(out)
}

/// Checks that the pooled within-site predictors are not collinear at
/// τ² = 0 (Σ S_ZZ positive definite), naming the first column that is a
/// combination of those before it.
///
/// # Errors
/// [`Error::Model`] naming the column.
fn check_rank(problem: &Problem, names: &[String]) -> Result<()> {
    let p = names.len();
    let mut m = DMatrix::zeros(p, p);
    for s in &problem.sites {
        m += &s.szz;
    }
    for i in 0..p {
        let sub = m.view((0, 0), (i + 1, i + 1)).into_owned();
        let ok = sub.clone().cholesky().is_some_and(|c| {
            let l = c.l()[(i, i)];
            l * l > tolerance::COLLINEAR * m[(i, i)]
        });
        if !ok {
            return Err(Error::Model(format!(
                "the one-stage model cannot separate {} from the terms before it ({}): it is constant or a \
                 combination of them over all rows (for a site-level term: it does not vary between sites, \
                 or varies with another site-level term)",
                names[i],
                names[..i].join(", ")
            )));
        }
    }
    Ok(())
}
