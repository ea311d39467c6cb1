//! Robustness diagnostics of a fitted model (`pondus fit --loo`,
//! `--influence`, `--permutations`, `--small-study`, `--cumulative-by`).
//!
//! Every diagnostic refits the model through [`crate::model::fit_parts`]
//! (or weighted least squares through [`crate::model::wls::fit_with`]) with
//! the user's estimator, inference and level; nothing here re-implements
//! the model. Results are the public structs of [`crate::result`].

pub mod conclusion;
pub mod cumulative;
pub mod influence;
pub mod loo;
pub mod permutation;
pub mod pet_peese;
pub mod selection;
pub mod sensitivity;
pub mod small_study;

use crate::error::Result;
use crate::model::{self, FitOptions, ModelFit};
use crate::support::flag::Flag;

/// Which diagnostics to compute (the library's view of the flags).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct DiagnoseSettings {
    /// Leave-one-out refits (`--loo`).
    pub loo: bool,
    /// Influence measures (`--influence`).
    pub influence: bool,
    /// Permutation test (`--permutations N`, `--seed S`).
    pub permutations: Option<PermutationSettings>,
    /// Small-study effects (`--small-study`).
    pub small_study: bool,
    /// Cumulative meta-analysis ordered by this column (`--cumulative-by`).
    pub cumulative_by: Option<String>,
    /// The step-function selection model (`--selection`, `--favoured`,
    /// `--selection-force`).
    pub selection: Option<selection::SelectionSettings>,
}

impl DiagnoseSettings {
    /// Whether any diagnostic is asked for.
    pub fn any(&self) -> bool {
        self.loo
            || self.influence
            || self.permutations.is_some()
            || self.small_study
            || self.cumulative_by.is_some()
            || self.selection.is_some()
    }
}

/// Settings of the permutation test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PermutationSettings {
    /// Random permutations (≥ 1); when the moderator rows have at most this
    /// many distinct arrangements, all of them are enumerated instead.
    pub permutations: usize,
    /// Seed of the random permutations.
    pub seed: u64,
}

/// The model's data as the diagnostics see it: the included studies in
/// input order, the design row-major k × p on the original scale.
#[derive(Debug, Clone, Copy)]
pub struct ModelData<'a> {
    /// Effects.
    pub y: &'a [f64],
    /// Sampling variances.
    pub v: &'a [f64],
    /// Design, row-major k × p, intercept first.
    pub x: &'a [f64],
    /// Number of coefficients.
    pub p: usize,
    /// Estimator, inference and level.
    pub options: FitOptions,
}

impl ModelData<'_> {
    /// Number of studies.
    pub fn k(&self) -> usize {
        self.y.len()
    }

    /// Design row of study i.
    pub fn row(&self, i: usize) -> &[f64] {
        &self.x[i * self.p..(i + 1) * self.p]
    }
}

/// The model refitted without study `i`, or why it has no answer.
pub type Deleted = std::result::Result<ModelFit, String>;

/// Refits the model once without each study (in parallel; each refit is
/// independent and the results are kept in study order, so the answer does
/// not depend on the number of threads).
///
/// # Formula
/// Fit i uses the studies j ≠ i with the same estimator, inference and
/// level ([`model::fit_parts`], without the τ² interval).
pub fn deleted_fits(d: &ModelData<'_>) -> Vec<Deleted> {
    use rayon::prelude::*;
    let k = d.k();
    let p = d.p;
    (0..k)
        .into_par_iter()
        .map(|i| {
            let mut y = Vec::with_capacity(k - 1);
            let mut v = Vec::with_capacity(k - 1);
            let mut x = Vec::with_capacity((k - 1) * p);
            for j in (0..k).filter(|&j| j != i) {
                y.push(d.y[j]);
                v.push(d.v[j]);
                x.extend_from_slice(d.row(j));
            }
            refit(&y, &v, std::borrow::Cow::Owned(x), p, d.options)
        })
        .collect()
}

/// The average effect (intercept only, same estimator and inference)
/// without each study: the same fits as [`deleted_fits`] when the model has
/// no moderators, k further refits of the effects alone when it has.
pub fn average_fits(d: &ModelData<'_>, deleted: &[Deleted]) -> Vec<Deleted> {
    if d.p == 1 {
        return deleted.to_vec();
    }
    let ones = vec![1.0; d.k()];
    deleted_fits(&ModelData {
        x: &ones,
        p: 1,
        ..*d
    })
}

/// One refit, with every failure turned into words: the model's summary
/// numbers only ([`model::fit_summary`]; no diagnostic reads a refit's
/// per-study arrays), with the design matrix standardised in place when it
/// is given owned.
pub(crate) fn refit(
    y: &[f64],
    v: &[f64],
    x: std::borrow::Cow<'_, [f64]>,
    p: usize,
    options: FitOptions,
) -> Deleted {
    match model::fit_summary(y, v, x, p, options, false) {
        Ok(f) if f.kh_scale == Some(0.0) => Err(
            "the remaining studies fit the model exactly, so the Knapp–Hartung standard errors are 0"
                .into(),
        ),
        Ok(f) => Ok(f),
        Err(e) => Err(e.to_string()),
    }
}

/// I² of a fit as a fraction: τ̂²/(τ̂² + ṽ) (Higgins & Thompson 2002,
/// *Stat. Med.* 21:1539, in the meta-regression form of `analysis`).
pub fn i2(fit: &ModelFit) -> f64 {
    let t = fit.tau2.estimate;
    t / (t + fit.v_typical)
}

/// The model-based covariance (X'WX)⁻¹ of a fit: its inference covariance
/// with the Knapp–Hartung scale factor taken out.
pub fn model_cov(fit: &ModelFit) -> nalgebra::DMatrix<f64> {
    match fit.kh_scale {
        Some(s) if s > 0.0 => &fit.cov / s,
        _ => fit.cov.clone(),
    }
}

/// Most studies accepted by `--loo` and `--influence` (k refits of k − 1
/// studies: the time grows with k²).
pub const MAX_REFIT_STUDIES: usize = 20_000;

/// Most studies accepted by `--small-study` (the rank test counts all k²/2 pairs).
pub const MAX_RANK_TEST_STUDIES: usize = 200_000;

/// Everything the diagnostics add to the report.
#[derive(Debug, Clone, Default)]
pub struct Outputs {
    /// `--loo`.
    pub leave_one_out: Option<Vec<crate::result::LeaveOneOut>>,
    /// `--influence`.
    pub influence: Option<Vec<crate::result::Influence>>,
    /// The cut-offs of `--influence` and the answer its shifts start from.
    pub influence_rules: Option<crate::result::InfluenceRules>,
    /// `--permutations`.
    pub permutation: Option<crate::result::Permutation>,
    /// `--small-study`.
    pub small_study: Option<crate::result::SmallStudy>,
    /// `--cumulative-by`.
    pub cumulative: Option<Vec<crate::result::CumulativeStep>>,
    /// How the cumulative steps were ordered.
    pub cumulative_order: Option<crate::result::CumulativeOrder>,
    /// `--selection`.
    pub selection: Option<crate::result::SelectionModel>,
    /// The adjusted average effects of the sensitivity view.
    pub averages: sensitivity::AverageAdjustments,
    /// Notes for the report.
    pub notes: Vec<String>,
    /// Warnings for the report.
    pub warnings: Vec<String>,
}

/// The intercept of PET or PEESE without moderators (the average effect
/// row of the sensitivity view): `with` itself when the model has none.
fn average_of(
    d: &ModelData<'_>,
    with: &crate::result::PrecisionRegression,
    kind: pet_peese::Precision,
) -> std::result::Result<crate::result::ContrastTest, String> {
    if d.p == 1 {
        return Ok(with.intercept);
    }
    let ones = vec![1.0; d.k()];
    pet_peese::regression(d.y, d.v, &ones, 1, d.options.level, kind)
        .map(|r| r.intercept)
        .map_err(|e| e.to_string())
}

/// The ordering column of `--cumulative-by`: its header and, for each
/// included study, the cell text and the line in the file.
#[derive(Debug, Clone)]
pub struct OrderColumn {
    /// Header as found in the file.
    pub header: String,
    /// Cells of the included studies, in study order.
    pub cells: Vec<String>,
    /// Their lines.
    pub lines: Vec<u64>,
    /// How messages name the cells (lines, or sheet addresses).
    pub places: crate::input::Places,
}

/// Runs the diagnostics asked for in `settings`.
///
/// # Errors
/// Usage and model errors naming the flag; convergence errors of refits
/// that every answer depends on.
#[allow(clippy::too_many_arguments)]
pub fn run(
    settings: &DiagnoseSettings,
    d: &ModelData<'_>,
    full: &ModelFit,
    labels: &[String],
    terms: &[String],
    lines: &[u64],
    order: Option<&OrderColumn>,
    scale: crate::effect::ReadingScale,
    source: &str,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Outputs> {
    use crate::error::Error;
    let mut out = Outputs::default();
    let k = d.k();
    if settings.loo || settings.influence {
        let flag = if settings.loo {
            Flag::Loo
        } else {
            Flag::Influence
        };
        if k < d.p + 2 {
            return Err(Error::usage(
                flag,
                format!(
                    "leaving a study out of {k} studies leaves too few for {} coefficient{}; \
                     at least {} studies are needed",
                    d.p,
                    if d.p == 1 { "" } else { "s" },
                    d.p + 2
                ),
            ));
        }
        if k > MAX_REFIT_STUDIES {
            return Err(Error::usage(
                flag,
                format!(
                    "{k} studies would need {k} refits of {} studies each (the time grows with \
                     the square of k; about a second at 1,000 studies); at most \
                     {MAX_REFIT_STUDIES} studies are accepted",
                    k - 1
                ),
            ));
        }
        let deleted = deleted_fits(d);
        let failed = deleted.iter().filter(|x| x.is_err()).count();
        if failed > 0 {
            out.warnings.push(format!(
                "{failed} of the {k} leave-one-out refits have no answer (for example a \
                 categorical level with one study); their rows say why."
            ));
        }
        let averages = average_fits(d, &deleted);
        let refits = loo::Refits {
            full,
            deleted: &deleted,
            averages: &averages,
            terms,
            scale,
        };
        if settings.loo {
            out.leave_one_out = Some(loo::table(d, refits, labels, lines));
        }
        if settings.influence {
            let (t, c) = influence::table(d, refits, labels, lines);
            out.influence = Some(t);
            out.influence_rules = Some(c);
        }
    }
    if let Some(ps) = settings.permutations {
        out.permutation = Some(permutation::test(d, ps, progress)?);
    }
    if settings.small_study && k > MAX_RANK_TEST_STUDIES {
        return Err(Error::usage(
            Flag::SmallStudy,
            format!(
                "the rank-correlation test compares every pair of studies, and {k} studies are \
                 more than the {MAX_RANK_TEST_STUDIES} accepted"
            ),
        ));
    }
    if settings.small_study {
        let (s, notes) = small_study::analyse(d, scale)?;
        out.averages.pet = Some(average_of(d, &s.pet, pet_peese::Precision::StandardError));
        out.averages.peese = Some(average_of(d, &s.peese, pet_peese::Precision::Variance));
        out.small_study = Some(s);
        out.notes.extend(notes);
    }
    if let Some(sel) = &settings.selection {
        let o = selection::analyse(d, sel, terms, scale)?;
        out.selection = Some(o.model);
        out.averages.selection = Some(o.average);
        out.warnings.extend(o.warnings);
    }
    if let Some(col) = order {
        let (idx, values, kind) = cumulative::order(col, source)?;
        out.cumulative = Some(cumulative::steps(
            d.y, d.v, &idx, &values, labels, d.options,
        ));
        out.cumulative_order = Some(crate::result::CumulativeOrder {
            column: col.header.clone(),
            order: kind,
        });
        if d.p > 1 {
            out.notes.push(
                "The cumulative meta-analysis pools the average effect (the model without \
                 moderators) as the studies accumulate."
                    .into(),
            );
        }
    }
    Ok(out)
}
