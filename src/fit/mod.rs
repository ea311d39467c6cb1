//! From a table and settings to a [`FitReport`]: the `pondus fit` job.

pub mod clusters;

use crate::effect::artifact;
use crate::effect::{self, ColumnMap, Measure, ReadingScale, RowEffect};
use crate::error::{Error, Result};
use crate::input::{self, ColumnRequest, Table};
use crate::model::design::{self, ModeratorKind, ModeratorSpec, RawModerator, Value};
use crate::model::inference::{self, PredictionInference};
use crate::model::probe;
use crate::model::tau2::Tau2Method;
use crate::model::{self, FitOptions, Inference, ModelFit};
use crate::result::*;
use crate::support::format as fmt;
use std::collections::BTreeMap;

/// Checked settings of one `fit` job (the library's view; the CLI builds them).
#[derive(Debug, Clone)]
pub struct FitSettings {
    /// Effect measure.
    pub measure: Measure,
    /// Role-to-header overrides.
    pub columns: ColumnMap,
    /// Label column header, and whether the user named it (then it must exist).
    pub label: (String, bool),
    /// Moderators in the order given.
    pub moderators: Vec<ModeratorSpec>,
    /// Product terms, by moderator name.
    pub interactions: Vec<(String, String)>,
    /// Estimator, inference, level.
    pub options: FitOptions,
    /// Prediction points: (moderator name, value text) lists.
    pub predictions: Vec<Vec<(String, String)>>,
    /// Conditional effects, level contrasts, regions of significance and
    /// artifact corrections (see [`crate::model::probe`], [`crate::effect::artifact`]).
    pub interpret: probe::InterpretSettings,
    /// Robustness diagnostics to add (leave-one-out, influence, permutation
    /// test, small-study effects, cumulative meta-analysis).
    pub diagnostics: crate::diagnose::DiagnoseSettings,
    /// Dependent effects: cluster column, three-level model, robust inference
    /// (see [`crate::model::multilevel`]); none by default.
    pub dependence: crate::model::multilevel::Dependence,
}

/// Minimum studies per moderator term below which the output cautions
/// (Cochrane Handbook for Systematic Reviews of Interventions, section 10.11.5.1:
/// "at least ten studies for each characteristic modelled"; common practice, cited from memory).
pub const STUDIES_PER_TERM: usize = 10;

/// Runs the analysis on CSV bytes from the source named `source`.
///
/// # Errors
/// Any input, usage, model or convergence error, with file, line and column where they apply.
pub fn run(settings: &FitSettings, source: &str, bytes: &[u8]) -> Result<FitReport> {
    run_with_progress(settings, source, bytes, &|_| {})
}

/// [`run`], calling `progress` with the number of permuted arrangements of
/// each finished block of the permutation test (for a progress bar).
///
/// # Errors
/// As [`run`].
pub fn run_with_progress(
    settings: &FitSettings,
    source: &str,
    bytes: &[u8],
    progress: &(dyn Fn(u64) + Sync),
) -> Result<FitReport> {
    let measure = settings.measure;
    let mut requests = vec![ColumnRequest {
        header: settings.label.0.clone(),
        required: settings.label.1,
        purpose: "study labels".into(),
        hint: "Name the label column with --label <header>.".into(),
    }];
    let first_measure = requests.len();
    requests.extend(settings.columns.requests(measure));
    let first_mod = requests.len();
    for m in &settings.moderators {
        requests.push(ColumnRequest {
            header: m.name.clone(),
            required: true,
            purpose: "a moderator (--moderator)".into(),
            hint: "Check the spelling of --moderator; headers are matched exactly, or ignoring case when unique.".into(),
        });
    }
    let first_art = requests.len();
    let artifacts = &settings.interpret.artifacts;
    requests.extend(artifact::requests(artifacts, measure)?);
    let order_request = settings.diagnostics.cumulative_by.as_ref().map(|h| {
        requests.push(ColumnRequest {
            header: h.clone(),
            required: true,
            purpose: "the order of the cumulative meta-analysis (--cumulative-by)".into(),
            hint: "Check the spelling of --cumulative-by; headers are matched exactly, or ignoring case when unique.".into(),
        });
        requests.len() - 1
    });
    let cluster_request = settings.dependence.cluster.as_ref().map(|h| {
        requests.push(crate::fit::clusters::request(h));
        requests.len() - 1
    });
    let mut table = input::parse_table(source, bytes, &requests)?;
    let cluster_cells = cluster_request.map(|j| crate::fit::clusters::cells(&table, j));
    let order_cells: Option<(String, Vec<String>)> = order_request.map(|j| {
        let col = table.column(j).expect("required column present");
        (
            col.header.clone(),
            (0..table.len()).map(|i| col.get(i).to_string()).collect(),
        )
    });
    let mut effects = effect::compute(measure, &settings.columns, &table, first_measure)?;
    let corrections = artifact::apply(
        artifacts,
        &table,
        first_measure,
        first_measure + 1,
        first_art,
        &mut effects,
    )?;
    let mut labels = labels(&table);

    // Moderators: type detection over all rows.
    let mut raw = Vec::with_capacity(settings.moderators.len());
    for (j, spec) in settings.moderators.iter().enumerate() {
        let col = table
            .column(first_mod + j)
            .expect("required column present");
        let cells: Vec<&str> = (0..table.len()).map(|i| col.get(i)).collect();
        raw.push(design::classify(spec, &cells, &table.lines, source)?);
    }
    // The cells are no longer needed: free them before the model's arrays exist.
    let label_column = table.column(0).map(|c| c.header.clone());
    table.columns = Vec::new();

    // Inclusion.
    let mut included = Vec::new();
    let mut excluded = Vec::new();
    let mut notes = Vec::new();
    for (i, row) in effects.rows.iter().enumerate() {
        let reason = match row {
            RowEffect::Excluded(why) => Some(why.clone()),
            RowEffect::Value { .. } => settings
                .moderators
                .iter()
                .zip(&raw)
                .find(|(_, r)| !r.present(i))
                .map(|(m, _)| format!("missing moderator {}", m.name)),
        };
        match reason {
            Some(reason) => excluded.push(Excluded {
                study: labels[i].clone(),
                line: table.lines[i],
                reason,
            }),
            None => included.push(i),
        }
    }
    if included.is_empty() {
        return Err(Error::Model(format!(
            "{source}: no study has every value the model needs ({} rows left out; the first: line {}, {})",
            excluded.len(),
            excluded[0].line,
            excluded[0].reason
        )));
    }
    let k = included.len();
    if k == 1 {
        return Err(Error::Model(format!(
            "{source}: only one study is usable; no between-study heterogeneity can be estimated and \
             there is nothing to pool. At least 2 studies are needed (3 or more to say much)"
        )));
    }

    let index_of = |name: &str| settings.moderators.iter().position(|m| m.name == name);
    let mut pairs = Vec::new();
    for (a, b) in &settings.interactions {
        let ia = index_of(a);
        let ib = index_of(b);
        match (ia, ib) {
            (Some(x), Some(y)) if x != y => pairs.push((x, y)),
            (Some(_), Some(_)) => {
                return Err(Error::usage(
                    "--interaction",
                    format!(
                        "'{a},{b}' names the same moderator twice; give two different moderators"
                    ),
                ))
            }
            _ => {
                let missing = if ia.is_none() { a } else { b };
                return Err(Error::usage(
                    "--interaction",
                    format!(
                        "'{missing}' is not a moderator of this model; add --moderator {missing} \
                         (a product term needs both of its moderators in the model)"
                    ),
                ));
            }
        }
    }
    check_moderator_scale(source, &settings.moderators, &raw, &included)?;
    let mut design = design::build(&settings.moderators, &raw, &included, &pairs)
        .map_err(|e| in_file(source, e))?;

    let y: Vec<f64> = included
        .iter()
        .map(|&i| value(&effects.rows[i]).0)
        .collect();
    let v: Vec<f64> = included
        .iter()
        .map(|&i| value(&effects.rows[i]).1)
        .collect();
    let mut notes_by_row: BTreeMap<usize, String> = BTreeMap::new();
    for &i in &included {
        if let RowEffect::Value { note: Some(n), .. } = &effects.rows[i] {
            notes_by_row.insert(i, n.clone());
        }
    }
    drop(effects);
    let clusters = match &cluster_cells {
        Some(cells) => Some(crate::fit::clusters::clusters(
            cells,
            &included,
            &table.lines,
            source,
        )?),
        None => None,
    };
    let dep = &settings.dependence;
    let (fit, three) = crate::fit::clusters::fit(
        &y,
        &v,
        &design.x,
        design.p,
        clusters.as_ref(),
        dep,
        settings.options,
        true,
    )
    .map_err(|e| in_file(source, e))?;
    if fit.kh_scale == Some(0.0) {
        return Err(Error::Model(format!(
            "{source}: the model fits every effect exactly (residual Q = 0, for example because \
             all effects are identical), so the Knapp–Hartung standard errors would be 0. Use \
             --inference z, which does not scale by the residual variation"
        )));
    }
    let null_fit = if design.p == 1 {
        None
    } else {
        let ones = vec![1.0; k];
        Some(
            crate::fit::clusters::fit(
                &y,
                &v,
                &ones,
                1,
                clusters.as_ref(),
                dep,
                settings.options,
                false,
            )
            .map_err(|e| in_file(source, e))?
            .0,
        )
    };
    let base = null_fit.as_ref().unwrap_or(&fit);

    let scale = if artifacts.any() {
        ReadingScale::Same
    } else {
        measure.reading_scale()
    };
    let level = settings.options.level;
    let coefs = inference::coefficients(&fit);
    let coefficients: Vec<Coefficient> = design
        .terms
        .iter()
        .zip(&coefs)
        .map(|(t, c)| Coefficient {
            term: t.name.clone(),
            contrast: ContrastTest {
                estimate: c.estimate,
                se: c.se,
                ci: Interval::new(c.ci_low, c.ci_high),
                test: Test {
                    statistic: c.statistic,
                    df: c.df,
                    p: c.p,
                },
            },
            ratio: (scale == ReadingScale::Ratio).then(|| RatioCoefficient {
                estimate: c.estimate.exp(),
                ci: Interval::new(c.ci_low, c.ci_high).map(f64::exp),
            }),
            robust_se: None,
            robust_df: None,
            robust_p: None,
        })
        .collect();
    let mod_names: Vec<&str> = settings
        .moderators
        .iter()
        .map(|m| m.name.as_str())
        .collect();
    let moderator_test = inference::omnibus(&fit).map(|t| {
        let significant = t.p < 1.0 - level;
        ModeratorTest {
            statistic: t.statistic,
            df1: t.df1,
            df2: t.df2,
            p: t.p,
            distribution: if t.df2.is_some() {
                TestDistribution::F
            } else {
                TestDistribution::ChiSquare
            },
            significant,
            answer: answer(
                significant,
                &mod_names,
                &fit,
                t.statistic,
                t.df1,
                t.df2,
                t.p,
                level,
            ),
            method: None,
        }
    });

    let heterogeneity = heterogeneity(&fit, null_fit.as_ref());
    let average = estimate(inference::predict(base, &[1.0]), scale);

    let mut predictions = Vec::new();
    for spec in &settings.predictions {
        predictions.push(prediction(&design, &fit, spec, scale)?);
    }

    let subgroups = subgroups(
        &design,
        &fit,
        &raw,
        &included,
        &y,
        &v,
        settings.options,
        scale,
    )?;
    let curves = curves(&design, &fit)?;
    let cluster_parts = match &clusters {
        Some(cl) => Some(
            crate::fit::clusters::parts(&y, &v, &design.x, design.p, cl, dep, &fit, three.as_ref())
                .map_err(|e| in_file(source, e))?,
        ),
        None => None,
    };
    let interpretation = probe::interpret(
        &design,
        &fit,
        &settings.interpret,
        scale,
        probe::Baseline {
            pooled: average.clone(),
            tau2_without: heterogeneity.tau2_without_moderators,
            r2: heterogeneity.r2,
        },
    )?;

    let diag = if settings.diagnostics.any() {
        let d = crate::diagnose::ModelData {
            y: &y,
            v: &v,
            x: &design.x,
            p: design.p,
            options: settings.options,
        };
        let study_labels: Vec<String> = included.iter().map(|&i| labels[i].clone()).collect();
        let study_lines: Vec<u64> = included.iter().map(|&i| table.lines[i]).collect();
        let order = order_cells.map(|(header, cells)| crate::diagnose::OrderColumn {
            header,
            cells: included.iter().map(|&i| cells[i].clone()).collect(),
            lines: study_lines.clone(),
        });
        crate::diagnose::run(
            &settings.diagnostics,
            &d,
            &fit,
            &study_labels,
            &study_lines,
            order.as_ref(),
            scale,
            source,
            progress,
        )
        .map_err(|e| in_file(source, e))?
    } else {
        crate::diagnose::Outputs::default()
    };
    design.x = Vec::new();
    let duplicate_warnings = duplicate_label_warnings(&included, &labels);
    let total_w: f64 = fit.weights.iter().sum();
    let study_z = crate::dist::normal_quantile(1.0 - (1.0 - level) / 2.0);
    let mut studies = Vec::with_capacity(k);
    let mut corrected = Vec::new();
    for (pos, &i) in included.iter().enumerate() {
        let (yi, vi, note) = (y[pos], v[pos], notes_by_row.remove(&i));
        if note.is_some() {
            corrected.push(labels[i].clone());
        }
        let moderators = raw
            .iter()
            .map(|r| match r {
                RawModerator::Numeric(x) => AtValue::Number(x[i].unwrap_or(f64::NAN)),
                RawModerator::Text(x) => AtValue::Level(x[i].clone().unwrap_or_default()),
            })
            .collect();
        let half = study_z * vi.sqrt();
        studies.push(Study {
            study: std::mem::take(&mut labels[i]),
            line: table.lines[i],
            effect: yi,
            variance: vi,
            ci: Interval::new(yi - half, yi + half),
            weight: 100.0 * fit.weights[pos] / total_w,
            fitted: fit.fitted[pos],
            residual: yi - fit.fitted[pos],
            std_residual: fit.std_resid[pos],
            moderators,
            note,
        });
    }

    if !corrected.is_empty() {
        notes.push(format!(
            "{} {} a zero cell: 0.5 was added to each of {} cells ({}).",
            corrected.len(),
            if corrected.len() == 1 {
                "study had"
            } else {
                "studies had"
            },
            if corrected.len() == 1 { "its" } else { "their" },
            list(&corrected, 5)
        ));
    }
    if table.blank_rows > 0 {
        notes.push(format!("{} blank rows were skipped.", table.blank_rows));
    }
    if !table
        .headers
        .iter()
        .any(|h| h.eq_ignore_ascii_case(&settings.label.0))
    {
        notes.push(format!(
            "No '{}' column: studies are labelled by their line in the file. Name the label column with --label.",
            settings.label.0
        ));
    }
    let mut warnings = duplicate_warnings;
    if fit.tau2.estimate == 0.0 && settings.options.method != Tau2Method::None {
        notes.push(
            "The τ² estimate is 0: the observed spread of the effects is no larger than their \
             sampling error alone would produce. This does not show that the true effects are \
             identical."
                .into(),
        );
    }
    if let Some(s2) = fit.kh_scale {
        if s2 < 1.0 && design.p > 1 {
            notes.push(format!(
                "The Knapp–Hartung scale factor is {s2:.3} (< 1), so its standard errors are smaller \
                 than the z-based ones (its intervals also use t quantiles, which widens them)."
            ));
        }
    }
    for p in &predictions {
        if !p.outside_range.is_empty() {
            warnings.push(format!(
                "A prediction is outside the range of the studies for {}: it is an extrapolation.",
                p.outside_range.join(", ")
            ));
        }
    }
    warnings.extend(diag.warnings.iter().cloned());
    notes.extend(diag.notes.iter().cloned());
    let mut cautions = cautions(k, design.p, settings.options.inference);
    let artifact_report = artifact_report(artifacts, &corrections, &included, &studies);
    if artifact_report.is_some() {
        artifact_cautions(
            artifacts,
            &settings.moderators,
            &mut cautions,
            &mut warnings,
            &studies,
        );
    }
    if !interpretation.conditional_effects.is_empty()
        || !interpretation.regions_of_significance.is_empty()
    {
        cautions.push(
            "Conditional effects and regions of significance read the fitted line at chosen \
             values: they are as observational as the moderator test itself, each value or \
             region is a further test (not adjusted for multiplicity), and values outside the \
             studies' range are extrapolations."
                .into(),
        );
    }

    let report = FitReport {
        tool: ToolInfo {
            name: "pondus".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        input: InputInfo {
            file: source.to_string(),
            delimiter: input::Delimiter::of(table.delimiter),
            rows: table.len(),
            label_column,
            sha256: crate::support::hash::sha256_hex(bytes),
        },
        measure: MeasureInfo {
            id: MeasureId::Measure(measure),
            description: measure.describe().into(),
            reading_scale: scale,
            reading_name: measure.reading_name().map(String::from),
            null_value: 0.0,
        },
        k,
        excluded,
        model: ModelInfo {
            tau2_method: settings.options.method,
            tau2_description: settings.options.method.describe().into(),
            inference_description: settings.options.inference.describe().into(),
            inference: settings.options.inference,
            level,
            terms: design.terms.iter().map(|t| t.name.clone()).collect(),
            moderators: design.moderators.clone(),
            interactions: design
                .interactions
                .iter()
                .map(|&(a, b)| {
                    [
                        settings.moderators[a].name.clone(),
                        settings.moderators[b].name.clone(),
                    ]
                })
                .collect(),
            kh_scale: fit.kh_scale,
            log_likelihood: fit.log_likelihood,
        },
        tau2: Tau2Report {
            method: settings.options.method,
            estimate: fit.tau2.estimate,
            tau: fit.tau2.estimate.sqrt(),
            ci: Interval::new(fit.tau2_ci.map(|c| c.0), fit.tau2_ci.map(|c| c.1)),
            ending: fit.tau2.ending,
            evaluations: fit.tau2.evaluations,
        },
        coefficients,
        moderator_test,
        heterogeneity,
        average,
        predictions,
        studies,
        subgroups,
        curves,
        warnings,
        cautions,
        notes,
        interpretation,
        artifacts: artifact_report,
        leave_one_out: diag.leave_one_out,
        influence: diag.influence,
        permutation: diag.permutation,
        small_study: diag.small_study,
        cumulative: diag.cumulative,
        influence_cutoffs: diag.influence_cutoffs,
        cumulative_order: diag.cumulative_order,
        variance_components: None,
        clustering: None,
    };
    let mut report = report;
    if let Some(parts) = cluster_parts {
        crate::fit::clusters::finish(&mut report, parts, &mod_names, &fit);
    }
    if report.artifacts.is_some() {
        report.measure = MeasureInfo {
            id: MeasureId::RCorrected,
            description: "Pearson correlations corrected for artifacts (Hunter–Schmidt), \
                          analysed on the r scale"
                .into(),
            reading_scale: ReadingScale::Same,
            reading_name: None,
            null_value: 0.0,
        };
    }
    check_finite(&report)?;
    Ok(report)
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
    for (n, x) in [
        ("average", a.mean.estimate),
        ("average SE", a.mean.se),
        ("prediction interval", a.mean.pi.pi_low),
    ] {
        check(n.into(), x);
    }
    for p in &r.predictions {
        check("prediction".into(), p.mean.estimate);
        check("prediction SE".into(), p.mean.se);
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
            hint: "check the data for extreme or identical values, or try --inference z or another --tau2 estimator".into(),
        })
    }
}

/// Prefixes a model error with the file it concerns.
fn in_file(source: &str, e: Error) -> Error {
    match e {
        Error::Model(m) => Error::Model(format!("{source}: {m}")),
        other => other,
    }
}

fn value(e: &RowEffect) -> (f64, f64) {
    match e {
        RowEffect::Value { y, v, .. } => (*y, *v),
        RowEffect::Excluded(_) => (f64::NAN, f64::NAN),
    }
}

fn labels(table: &Table) -> Vec<String> {
    match table.column(0) {
        Some(c) => (0..table.len())
            .map(|i| {
                let l = c.get(i);
                if l.is_empty() {
                    format!("line {}", table.lines[i])
                } else {
                    l.to_string()
                }
            })
            .collect(),
        None => table.lines.iter().map(|l| format!("line {l}")).collect(),
    }
}

fn list(items: &[String], max: usize) -> String {
    let mut s = items
        .iter()
        .take(max)
        .cloned()
        .collect::<Vec<_>>()
        .join(", ");
    if items.len() > max {
        s.push_str(&format!(" and {} more", items.len() - max));
    }
    s
}

/// FNV-1a hash of a label (a fast, fixed hash: the duplicate check only
/// needs equal labels to meet, and compares candidates exactly).
fn fnv1a(text: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    h
}

fn duplicate_label_warnings(included: &[usize], labels: &[String]) -> Vec<String> {
    // Sort (hash, row) pairs: equal labels have equal hashes and end up
    // adjacent; labels are compared exactly within a run of equal hashes.
    let mut keyed: Vec<(u64, usize)> = included.iter().map(|&i| (fnv1a(&labels[i]), i)).collect();
    keyed.sort_unstable();
    let mut counts: Vec<(&str, usize)> = Vec::new();
    let mut start = 0;
    while start < keyed.len() {
        let mut end = start + 1;
        while end < keyed.len() && keyed[end].0 == keyed[start].0 {
            end += 1;
        }
        if end - start > 1 {
            let mut run: Vec<&str> = keyed[start..end]
                .iter()
                .map(|&(_, i)| labels[i].as_str())
                .collect();
            run.sort_unstable();
            let mut a = 0;
            while a < run.len() {
                let b = a + run[a..].iter().take_while(|l| **l == run[a]).count();
                if b - a > 1 {
                    counts.push((run[a], b - a));
                }
                a = b;
            }
        }
        start = end;
    }
    let mut dups: Vec<String> = counts
        .iter()
        .map(|(l, n)| format!("'{l}' ({n}×)"))
        .collect();
    if dups.is_empty() {
        return Vec::new();
    }
    dups.sort();
    vec![format!(
        "Study labels used more than once: {}. If these are the same study entered twice, remove \
         the copies; if they are separate samples, give them distinct labels.",
        list(&dups, 5)
    )]
}

/// The values of a prediction on the reading scale (None when it is the analysis scale).
pub(crate) fn reading(p: &PredictionInference, scale: ReadingScale) -> Option<Reading> {
    p.reading(scale)
}

fn estimate(p: PredictionInference, scale: ReadingScale) -> Estimate {
    Estimate {
        mean: p.mean_effect(),
        reading: reading(&p, scale),
    }
}

fn prediction(
    design: &design::Design,
    fit: &ModelFit,
    spec: &[(String, String)],
    scale: ReadingScale,
) -> Result<Prediction> {
    if design.moderators.is_empty() {
        return Err(Error::usage(
            "--at",
            "the model has no moderators; the average effect and its prediction interval are \
             reported without --at",
        ));
    }
    let given: BTreeMap<&str, &str> = spec.iter().map(|(n, v)| (n.as_str(), v.as_str())).collect();
    for name in given.keys() {
        if !design.moderators.iter().any(|m| m.name == *name) {
            let names: Vec<&str> = design.moderators.iter().map(|m| m.name.as_str()).collect();
            return Err(Error::usage(
                "--at",
                format!(
                    "'{name}' is not a moderator of this model; the moderators are: {}",
                    names.join(", ")
                ),
            ));
        }
    }
    let mut values = Vec::new();
    let mut at = BTreeMap::new();
    let mut outside = Vec::new();
    for m in &design.moderators {
        let Some(text) = given.get(m.name.as_str()) else {
            return Err(Error::usage(
                "--at",
                format!(
                    "give a value for every moderator; '{}' is missing (for example --at {}=<value>,...)",
                    m.name, m.name
                ),
            ));
        };
        match &m.kind {
            ModeratorKind::Numeric { min, max, .. } => {
                let x: f64 = text
                    .trim()
                    .parse()
                    .ok()
                    .filter(|x: &f64| x.is_finite())
                    .ok_or_else(|| {
                        Error::usage(
                            "--at",
                            format!(
                                "'{text}' is not a number (moderator '{}' is numeric)",
                                m.name
                            ),
                        )
                    })?;
                if x < *min || x > *max {
                    outside.push(format!("{} = {x} (studies: {min} to {max})", m.name));
                }
                values.push(Value::Number(x));
                at.insert(m.name.clone(), AtValue::Number(x));
            }
            ModeratorKind::Categorical { .. } => {
                values.push(Value::Label(text.trim().to_string()));
                at.insert(m.name.clone(), AtValue::Level(text.trim().to_string()));
            }
        }
    }
    let x0 = design::design_row(&design.moderators, &design.interactions, &values)?;
    let p = inference::predict(fit, &x0);
    Ok(Prediction {
        at,
        mean: p.mean_effect(),
        reading: reading(&p, scale),
        outside_range: outside,
    })
}

/// Number of points of each fitted line in [`FitReport::curves`].
pub const CURVE_POINTS: usize = 61;

/// The values at which the moderators other than `except` are held for a
/// line or a per-level prediction: numeric ones at their means, categorical
/// ones at their reference levels; with the words saying so.
fn held_values(design: &design::Design, except: usize) -> (Vec<Value>, String) {
    let mut values = Vec::new();
    let mut numeric = Vec::new();
    let mut categorical = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        match &m.kind {
            ModeratorKind::Numeric { mean, .. } => {
                values.push(Value::Number(*mean));
                if j != except {
                    numeric.push(format!("{} = {}", m.name, fmt::short(*mean)));
                }
            }
            ModeratorKind::Categorical { reference, .. } => {
                values.push(Value::Label(reference.clone()));
                if j != except {
                    categorical.push(format!("{} = {reference}", m.name));
                }
            }
        }
    }
    let mut parts = Vec::new();
    if !numeric.is_empty() {
        parts.push(format!("at the mean of {}", numeric.join(", ")));
    }
    if !categorical.is_empty() {
        parts.push(format!("at the reference level {}", categorical.join(", ")));
    }
    (values, parts.join("; "))
}

/// Per-level summaries of every categorical moderator.
///
/// # Formula
/// `pooled`: the intercept-only random-effects model fitted to the level's
/// studies alone, with the main model's τ² estimator, inference and level
/// (its own τ²). `predicted`: x0'β̂ of the main model at the level, the other
/// moderators held as in [`held_values`], with [`inference::predict`].
#[allow(clippy::too_many_arguments)]
fn subgroups(
    design: &design::Design,
    fit: &ModelFit,
    raw: &[RawModerator],
    included: &[usize],
    y: &[f64],
    v: &[f64],
    options: FitOptions,
    scale: ReadingScale,
) -> Result<Vec<Subgroups>> {
    let mut out = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let (ModeratorKind::Categorical { levels, counts, .. }, RawModerator::Text(cells)) =
            (&m.kind, &raw[j])
        else {
            continue;
        };
        let (mut values, held) = held_values(design, j);
        let mut summaries = Vec::new();
        for (level, &count) in levels.iter().zip(counts) {
            let (mut yl, mut vl) = (Vec::new(), Vec::new());
            for (pos, &i) in included.iter().enumerate() {
                if cells[i].as_deref() == Some(level.as_str()) {
                    yl.push(y[pos]);
                    vl.push(v[pos]);
                }
            }
            let own = if yl.len() >= 2 {
                let ones = vec![1.0; yl.len()];
                model::fit_parts(&yl, &vl, &ones, 1, options, false)
                    .ok()
                    .filter(|f| f.kh_scale != Some(0.0))
                    .map(|f| (inference::predict(&f, &[1.0]), f.tau2.estimate))
                    .filter(|(p, _)| p.se.is_finite() && p.pi_low.is_finite())
            } else {
                None
            };
            values[j] = Value::Label(level.clone());
            let x0 = design::design_row(&design.moderators, &design.interactions, &values)?;
            summaries.push(LevelSummary {
                level: level.clone(),
                k: count,
                pooled: own.map(|(p, _)| estimate(p, scale)),
                tau2: own.map(|(_, t)| t),
                predicted: estimate(inference::predict(fit, &x0), scale),
            });
        }
        out.push(Subgroups {
            moderator: m.name.clone(),
            held,
            levels: summaries,
        });
    }
    Ok(out)
}

/// The fitted line along every numeric moderator: [`CURVE_POINTS`]
/// predictions ([`inference::predict`]) evenly spaced from the studies'
/// minimum to maximum, the other moderators held as in [`held_values`].
fn curves(design: &design::Design, fit: &ModelFit) -> Result<Vec<Curve>> {
    let mut out = Vec::new();
    for (j, m) in design.moderators.iter().enumerate() {
        let ModeratorKind::Numeric { min, max, .. } = m.kind else {
            continue;
        };
        let (mut values, held) = held_values(design, j);
        let mut points = Vec::with_capacity(CURVE_POINTS);
        for s in 0..CURVE_POINTS {
            let x = min + (max - min) * s as f64 / (CURVE_POINTS - 1) as f64;
            values[j] = Value::Number(x);
            let x0 = design::design_row(&design.moderators, &design.interactions, &values)?;
            let p = inference::predict(fit, &x0);
            points.push(CurvePoint {
                x,
                estimate: p.estimate,
                ci: Interval::new(p.ci_low, p.ci_high),
                pi: PredictionInterval::new(p.pi_low, p.pi_high),
            });
        }
        out.push(Curve {
            moderator: m.name.clone(),
            held,
            points,
        });
    }
    Ok(out)
}

/// Residual heterogeneity statistics.
///
/// # Formula
/// Q_E = Σ (y_i − x_i'β̂₀)²/v_i with the common-effect fit β̂₀, df = k − p;
/// ṽ = (k − p)/tr P₀; I² = τ̂²/(τ̂² + ṽ), H² = (τ̂² + ṽ)/ṽ (Higgins & Thompson
/// 2002, *Stat. Med.* 21:1539, generalised to meta-regression), so the
/// common-effect model (τ² fixed at 0) has I² = 0 and H² = 1 by definition;
/// its Q test still shows any excess variation. R² = (τ̂²₀ − τ̂²)/τ̂²₀ truncated to
/// [0, 1], with τ̂²₀ from the same estimator without moderators (Raudenbush 2009).
fn heterogeneity(fit: &ModelFit, null_fit: Option<&ModelFit>) -> Heterogeneity {
    let df = (fit.k - fit.p) as f64;
    let t = fit.tau2.estimate;
    let (i2, h2) = (t / (t + fit.v_typical), (t + fit.v_typical) / fit.v_typical);
    let tau2_0 = null_fit.map(|f| f.tau2.estimate).unwrap_or(t);
    let r2 = match null_fit {
        Some(_) if tau2_0 > 0.0 => Some(((tau2_0 - t) / tau2_0).clamp(0.0, 1.0)),
        _ => None,
    };
    Heterogeneity {
        q: fit.q_e,
        df,
        p: crate::dist::chi2_sf(fit.q_e, df),
        i2,
        h2,
        r2,
        tau2_without_moderators: tau2_0,
        typical_variance: fit.v_typical,
    }
}

#[allow(clippy::too_many_arguments)]
pub(crate) fn answer(
    significant: bool,
    moderators: &[&str],
    fit: &ModelFit,
    stat: f64,
    df1: f64,
    df2: Option<f64>,
    p: f64,
    level: f64,
) -> String {
    let test = match df2 {
        Some(d2) if d2.fract() != 0.0 => format!("F({df1}, {d2:.1}) = {stat:.2}"),
        Some(d2) => format!("F({df1}, {d2}) = {stat:.2}"),
        None => format!("chi-square({df1}) = {stat:.2}"),
    };
    let alpha = 1.0 - level;
    let names = match moderators {
        [] => String::new(),
        [one] => one.to_string(),
        [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
    };
    let p_txt = crate::support::format::p(p);
    let k = fit.k;
    let several = fit.p > 2;
    if significant && several {
        format!(
            "Yes. Taken together, the moderator terms ({names}) are associated with the effect \
             across these {k} studies: {test}, p {p_txt}, tested at α = {alpha:.2}. The \
             coefficients below show which terms carry the association. An association across \
             studies is not proof that a moderator causes the difference."
        )
    } else if significant {
        format!(
            "Yes. The effect changes with {names} across these {k} studies: {test}, p {p_txt}, \
             tested at α = {alpha:.2}. An association across studies is not proof that {names} \
             causes the difference."
        )
    } else {
        let what = if several {
            format!("the moderator terms ({names}), taken together")
        } else {
            names.clone()
        };
        format!(
            "No clear evidence that the effect changes with {what}: {test}, p {p_txt}, tested at \
             α = {alpha:.2}. This is not evidence of no change: with {k} studies the test may \
             have little power."
        )
    }
}

fn cautions(k: usize, p: usize, inference: Inference) -> Vec<String> {
    let mut c = Vec::new();
    let terms = p - 1;
    if terms > 0 {
        if k < STUDIES_PER_TERM * terms {
            c.push(format!(
                "Only {k} studies for {terms} moderator term{}: fewer than {STUDIES_PER_TERM} studies \
                 per term (a common rule of thumb, Cochrane Handbook section 10.11.5.1). Treat the \
                 moderator results as exploratory; estimates are unstable and tests have little power.",
                if terms == 1 { "" } else { "s" }
            ));
        }
        c.push(
            "Moderator effects are associations across studies: they are observational even when \
             every study is a randomised trial, can be confounded by other study characteristics, \
             and do not show how the effect changes for individuals (Thompson & Higgins 2002, \
             Stat. Med. 21:1559)."
                .into(),
        );
        if terms > 1 {
            c.push(
                "Several coefficients are tested: their individual p-values are not adjusted for \
                 multiple testing. The omnibus moderator test is the single test of whether the \
                 moderators matter."
                    .into(),
            );
        }
    }
    if k < 10 {
        c.push(format!(
            "With {k} studies, τ² and the prediction interval are estimated imprecisely{}.",
            if inference == Inference::Z {
                "; z-based intervals are also too narrow with few studies (the default Knapp–Hartung \
                 method is safer)"
            } else {
                ""
            }
        ));
    }
    c.push(
        "These results summarise published or supplied estimates. Decisions about patients, pupils, \
         programmes or policy rest with the responsible professionals and local guidance, not with \
         this output."
            .into(),
    );
    c
}

/// Refuses a numeric moderator whose values are so large, or whose spread
/// is so small, that its coefficient's variance would leave the range of
/// floating point (it scales with 1/spread²): the fix is to express the
/// moderator in other units.
fn check_moderator_scale(
    source: &str,
    specs: &[ModeratorSpec],
    raw: &[RawModerator],
    included: &[usize],
) -> Result<()> {
    use crate::tolerance::MODERATOR_MAGNITUDE;
    for (spec, r) in specs.iter().zip(raw) {
        let RawModerator::Numeric(x) = r else {
            continue;
        };
        let vals: Vec<f64> = included.iter().filter_map(|&i| x[i]).collect();
        let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let big = lo.abs().max(hi.abs());
        let spread = hi - lo;
        if big > MODERATOR_MAGNITUDE || (spread > 0.0 && spread < 1.0 / MODERATOR_MAGNITUDE) {
            return Err(Error::Model(format!(
                "{source}: moderator '{}' runs from {lo:e} to {hi:e}; at this scale its coefficient \
                 and standard error leave the range of floating-point numbers. Express it in other \
                 units (for example divide or multiply the column by a power of ten) and run again",
                spec.name
            )));
        }
    }
    Ok(())
}

/// The per-study record of the artifact corrections (None without any).
fn artifact_report(
    settings: &artifact::ArtifactSettings,
    corrections: &[Option<artifact::Corrected>],
    included: &[usize],
    studies: &[Study],
) -> Option<ArtifactReport> {
    if !settings.any() {
        return None;
    }
    let (applied, method) = artifact::describe(settings);
    let mut rows = Vec::with_capacity(included.len());
    for (pos, &i) in included.iter().enumerate() {
        let c = corrections[i]?;
        rows.push(ArtifactStudy {
            study: studies[pos].study.clone(),
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

/// Cautions and warnings that come with artifact corrections.
fn artifact_cautions(
    settings: &artifact::ArtifactSettings,
    moderators: &[ModeratorSpec],
    cautions: &mut Vec<String>,
    warnings: &mut Vec<String>,
    studies: &[Study],
) {
    let over: Vec<String> = studies
        .iter()
        .filter(|s| s.effect.abs() > 1.0)
        .map(|s| s.study.clone())
        .collect();
    if !over.is_empty() {
        warnings.push(format!(
            "{} corrected correlation{} above 1 in absolute value ({}): sampling error in r or in \
             the artifact values; they are kept uncapped, as capping would bias the mean.",
            over.len(),
            if over.len() == 1 { " is" } else { "s are" },
            list(&over, 5)
        ));
    }
    if let Some(col) = &settings.range_ratio {
        let checked = moderators.iter().any(|m| &m.name == col);
        cautions.push(format!(
            "Range restriction differs between studies: a moderator that goes together with it (for \
             example how selective a site is) can show an artifactual moderation, and an imperfect \
             correction leaves part of it in the corrected r. {}",
            if checked {
                format!("The range ratio '{col}' is itself a moderator here: its coefficient is the check.")
            } else {
                format!("As a check, fit with --moderator {col} (the range ratio itself) and see whether it predicts the corrected effects.")
            }
        ));
    }
    cautions.push(
        "Corrected correlations estimate the relation between true scores in the unrestricted \
         population; they rest on the supplied reliabilities and range ratios, whose own errors are \
         not in the intervals."
            .into(),
    );
}
