//! Stage 11 of `fit`: assemble the [`FitReport`] once from the outputs of
//! the earlier stages, and refuse it when a reported number is not finite.

use super::answers::Answers;
use super::clusters::ClusterAdditions;
use super::estimate::{Fitted, WorkingModel};
use super::messages::Messages;
use super::readout::ReadOut;
use super::studies::Studies;
use super::summarise::Summary;
use super::FitSettings;
use crate::diagnose::Outputs;
use crate::effect::{Measure, ReadingScale};
use crate::error::{Error, Result};
use crate::model::design::{Moderator, RawModerator, Term};
use crate::model::tau2::Tau2Method;
use crate::model::ModelFit;
use crate::result::{
    ArtifactReport, Excluded, FitReport, InputInfo, Interpretation, Interval, MeasureId,
    MeasureInfo, ModelInfo, ModeratorColumn, Shrunken, Spread, StudyColumns, StudyList, Tau2Report,
    ToolInfo,
};
use crate::support::flag::Flag;
use std::borrow::Cow;

/// The outputs of the stages, as the report takes them.
#[derive(Debug)]
pub struct Parts<'a> {
    /// The job's settings.
    pub settings: &'a FitSettings,
    /// The input's name.
    pub source: &'a str,
    /// The SHA-256 of the input's bytes, as lowercase hex.
    pub sha256: String,
    /// Whether the per-study records are built.
    pub detail: super::Detail,
    /// The studies.
    pub studies: Studies,
    /// The model's terms, intercept first.
    pub terms: Vec<Term>,
    /// The moderators with their type and summary.
    pub moderators: Vec<Moderator>,
    /// Product terms as moderator-index pairs.
    pub interactions: Vec<(usize, usize)>,
    /// The fitted model.
    pub model: Fitted,
    /// Coefficients, moderator test, heterogeneity, average.
    pub summary: Summary,
    /// Predictions, subgroups, curves.
    pub readout: ReadOut,
    /// Probes, contrasts, regions.
    pub interpretation: Interpretation,
    /// The artifact-correction record.
    pub artifacts: Option<ArtifactReport>,
    /// The diagnostics.
    pub diagnostics: Outputs,
    /// Warnings, notes and cautions.
    pub messages: Messages,
    /// What `--cluster` added.
    pub clusters: Option<ClusterAdditions>,
    /// `--beyond` and `--shrink`.
    pub answers: Answers,
    /// The location-scale model (`--spread-by`).
    pub spread: Option<Spread>,
}

/// The report of the job.
///
/// # Errors
/// [`Error::NoConvergence`] when a reported result is not a finite number.
pub fn assemble(parts: Parts<'_>) -> Result<FitReport> {
    let Parts {
        settings,
        source,
        sha256,
        detail,
        mut studies,
        terms,
        moderators,
        interactions,
        model,
        summary,
        readout,
        interpretation,
        artifacts,
        diagnostics: diag,
        messages,
        clusters,
        answers,
        spread,
    } = parts;
    let scale = studies.scale;
    let average_basis = (terms.len() > 1).then_some(crate::result::AverageBasis {
        studies: studies.y.len(),
        with_effect: studies.y.len() + studies.missing_moderator,
    });
    let fit = &model.fit;
    let input = InputInfo {
        file: source.to_string(),
        delimiter: studies.table.delimiter,
        sheet: studies.table.sheet.clone(),
        rows: studies.table.rows,
        label_column: studies.table.label_column.clone(),
        sha256,
    };
    let k = studies.y.len();
    // Without per-study records only the excluded rows are kept; with
    // shrunken estimates the records are built anyway, as their numbers
    // are checked below. Without records the labels move into the count
    // of routes.
    let summary_only = detail == super::Detail::Summary && answers.shrunken.is_none();
    let labels = if summary_only {
        Cow::Owned(std::mem::take(&mut studies.labels))
    } else {
        Cow::Borrowed(&studies.labels)
    };
    let effects_obtained = crate::result::count_routes(&studies.routes, labels);
    let (records, excluded) = if summary_only {
        (StudyList::new(), studies.excluded)
    } else {
        records(studies, fit, settings.options.level, answers.shrunken)
    };
    let (variance_components, clustering) = match clusters {
        Some(c) => (c.variance_components, Some(c.report)),
        None => (None, None),
    };
    let sensitivity = (diag.small_study.is_some() || diag.selection.is_some()).then(|| {
        crate::diagnose::sensitivity::view(&crate::diagnose::sensitivity::ViewInputs {
            coefficients: &summary.coefficients,
            average: &summary.average,
            small_study: diag.small_study.as_ref(),
            selection: diag.selection.as_ref(),
            averages: &diag.averages,
            scale,
            i2: summary.heterogeneity.i2,
            k,
        })
    });
    let report = FitReport {
        tool: ToolInfo {
            name: "pondus".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        input,
        measure: measure_info(settings.measure, scale, artifacts.is_some()),
        k,
        excluded,
        model: model_info(settings, &model, terms, moderators, &interactions),
        tau2: Tau2Report {
            method: settings.options.method,
            estimate: fit.tau2.estimate,
            tau: fit.tau2.estimate.sqrt(),
            ci: Interval::new(fit.tau2_ci.map(|c| c.0), fit.tau2_ci.map(|c| c.1)),
            ending: fit.tau2.ending,
            evaluations: fit.tau2.evaluations,
        },
        coefficients: summary.coefficients,
        moderator_test: summary.moderator_test,
        heterogeneity: summary.heterogeneity,
        average: summary.average,
        average_basis,
        floored: summary.floored,
        predictions: readout.predictions,
        effects_obtained,
        studies: records,
        subgroups: readout.subgroups,
        curves: readout.curves,
        level_curves: readout.level_curves,
        warnings: messages.warnings,
        cautions: messages.cautions,
        notes: messages.notes,
        interpretation,
        artifacts,
        leave_one_out: diag.leave_one_out,
        influence: diag.influence,
        permutation: diag.permutation,
        small_study: diag.small_study,
        selection: diag.selection,
        sensitivity,
        cumulative: diag.cumulative,
        influence_rules: diag.influence_rules,
        cumulative_order: diag.cumulative_order,
        variance_components,
        clustering,
        beyond: answers.beyond,
        model_set: answers.model_set,
        spread,
    };
    check_finite(&report)?;
    Ok(report)
}

/// The measure as analysed: the measure itself, or the corrected
/// correlations when the artifact corrections were applied.
fn measure_info(measure: Measure, scale: ReadingScale, corrected: bool) -> MeasureInfo {
    if corrected {
        MeasureInfo {
            id: MeasureId::RCorrected,
            description: "Pearson correlations corrected for artifacts (Hunter–Schmidt), \
                          analysed on the r scale"
                .into(),
            reading_scale: ReadingScale::Same,
            reading_name: None,
            null_value: 0.0,
        }
    } else {
        MeasureInfo {
            id: MeasureId::Measure(measure),
            description: measure.describe().into(),
            reading_scale: scale,
            reading_name: measure.reading_name().map(String::from),
            null_value: 0.0,
        }
    }
}

/// The model that was fitted, in the report's terms.
fn model_info(
    settings: &FitSettings,
    model: &Fitted,
    terms: Vec<Term>,
    moderators: Vec<Moderator>,
    interactions: &[(usize, usize)],
) -> ModelInfo {
    let method = settings.options.method;
    let tau2_description = match model.working {
        WorkingModel::ThreeLevel(_) => {
            let fitted_by = match method {
                Tau2Method::Ml => "ML",
                _ => "REML",
            };
            format!(
                "{fitted_by} over both variance components of the three-level model \
                 (σ²_between + σ²_within; τ² below is their sum)"
            )
        }
        WorkingModel::Independent | WorkingModel::TwoLevel(_) => method.describe().into(),
    };
    ModelInfo {
        tau2_method: method,
        tau2_description,
        inference_description: settings.options.inference.describe().into(),
        inference: settings.options.inference,
        level: settings.options.level,
        terms: terms.into_iter().map(|t| t.name).collect(),
        interactions: interactions
            .iter()
            .map(|&(a, b)| [moderators[a].name.clone(), moderators[b].name.clone()])
            .collect(),
        moderators,
        kh_scale: model.fit.kh_scale,
        scale_factor: model.fit.scale_factor,
        log_likelihood: model.fit.log_likelihood,
    }
}

/// One record per included study, in input order, and the rows left out:
/// the studies' own columns (labels, lines, effects, variances, routes,
/// moderator values) are moved into the list, not copied.
fn records(
    studies: Studies,
    fit: &ModelFit,
    level: f64,
    shrunken: Option<Vec<Shrunken>>,
) -> (StudyList, Vec<Excluded>) {
    let Studies {
        included,
        y,
        v,
        labels,
        lines,
        notes,
        routes,
        raw,
        excluded,
        shown,
        ..
    } = studies;
    let total_w: f64 = fit.weights.iter().sum();
    let z = crate::dist::normal_quantile(1.0 - (1.0 - level) / 2.0);
    let half = |vi: f64| z * vi.sqrt();
    let cells = if shown.is_empty() {
        Vec::new()
    } else {
        let mut shown = shown;
        (0..y.len())
            .map(|pos| {
                shown
                    .iter_mut()
                    .map(|(name, c)| (name.clone(), std::mem::take(&mut c[pos])))
                    .collect()
            })
            .collect()
    };
    let columns = StudyColumns {
        ci_low: y.iter().zip(&v).map(|(yi, &vi)| yi - half(vi)).collect(),
        ci_high: y.iter().zip(&v).map(|(yi, &vi)| yi + half(vi)).collect(),
        weight: fit.weights.iter().map(|w| 100.0 * w / total_w).collect(),
        fitted: fit.fitted.clone(),
        residual: y.iter().zip(&fit.fitted).map(|(yi, f)| yi - f).collect(),
        std_residual: fit.std_resid.clone(),
        moderators: raw
            .into_iter()
            .map(|r| match r {
                RawModerator::Numeric(x) => ModeratorColumn::Numbers(x.into_rows(&included)),
                RawModerator::Text(x) => {
                    let (names, codes) = x.into_rows(&included);
                    ModeratorColumn::Levels { names, codes }
                }
            })
            .collect(),
        notes,
        shrunken: shrunken
            .map(|s| s.into_iter().map(Some).collect())
            .unwrap_or_default(),
        cells,
        labels,
        lines: lines.into_vec(),
        effect: y,
        variance: v,
        routes,
    };
    (columns.into(), excluded)
}

/// Refuses a report with a NaN or infinite number in a reported result: an
/// error instead of a confident wrong number.
fn check_finite(r: &FitReport) -> Result<()> {
    let mut bad = Vec::new();
    let mut check = |what: String, x: f64| {
        if !x.is_finite() && bad.len() < 5 {
            bad.push(what);
        }
    };
    check("τ²".into(), r.tau2.estimate);
    for c in &r.coefficients {
        for (n, x) in [
            ("estimate", c.contrast.estimate),
            ("SE", c.contrast.se),
            ("statistic", c.contrast.test.statistic),
            ("p", c.contrast.test.p),
        ] {
            check(format!("{} {n}", c.term), x);
        }
    }
    if let Some(t) = &r.moderator_test {
        check("moderator test".into(), t.statistic);
        check("moderator test p".into(), t.p);
    }
    let h = &r.heterogeneity;
    for (n, x) in [("Q", h.q), ("Q p", h.p), ("I²", h.i2), ("H²", h.h2)] {
        check(n.into(), x);
    }
    let a = &r.average;
    for (n, x) in [("average", a.mean.estimate), ("average SE", a.mean.se)] {
        check(n.into(), x);
    }
    // NaN ends mean "no interval" (k − p − 1 < 1); anything else must be finite.
    if !a.mean.pi.pi_low.is_nan() {
        check("prediction interval".into(), a.mean.pi.pi_low);
    }
    for p in &r.predictions {
        check("prediction".into(), p.mean.estimate);
        check("prediction SE".into(), p.mean.se);
    }
    let shrunken = r.studies.any_shrunken().then(|| r.studies.iter());
    for st in shrunken.into_iter().flatten() {
        if let Some(sh) = &st.shrunken {
            check(format!("shrunken estimate of {}", st.study), sh.estimate);
            check(format!("shrunken SE of {}", st.study), sh.se);
        }
    }
    if let Some(b) = &r.beyond {
        check("probability beyond the value".into(), b.average);
    }
    for e in &r.interpretation.conditional_effects {
        check(
            format!("conditional effect at {}", e.moderator),
            e.mean.estimate,
        );
        check(
            format!("conditional effect SE at {}", e.moderator),
            e.mean.se,
        );
    }
    for s in &r.interpretation.simple_slopes {
        check(format!("simple slope of {}", s.of), s.test.se);
    }
    for g in &r.interpretation.regions_of_significance {
        for b in &g.bounds {
            check(format!("Johnson–Neyman bound along {}", g.moderator), *b);
        }
    }
    if bad.is_empty() {
        Ok(())
    } else {
        Err(Error::NoConvergence {
            what: "the fit".into(),
            detail: format!("these results are not finite numbers: {}", bad.join(", ")),
            hint: format!(
                "check the data for extreme or identical values, or try {} z or another {} estimator",
                Flag::Inference,
                Flag::Tau2
            ),
        })
    }
}
