//! The second stage of `pondus sites --fit`: within-site and across-site
//! moderation side by side.
//!
//! The effects file written by the first stage is analysed by the `fit`
//! job itself ([`crate::fit::run`]), so every estimator, test and
//! caution is the one `pondus fit` uses on the same file.

use crate::effect::{ColumnMap, Measure};
use crate::error::Result;
use crate::fit::{self, FitSettings};
use crate::model::design::ModeratorSpec;
use crate::model::FitOptions;
use crate::result::{FitReport, SiteMeasure, SitesReport, TwoStage};
use std::collections::BTreeMap;

fn numeric(name: &str) -> ModeratorSpec {
    ModeratorSpec {
        name: name.to_string(),
        categorical: false,
        reference: None,
        center: false,
    }
}

/// Runs the second stage on the effects of `report`.
///
/// - within: the random-effects pooled product term (`interaction` with
///   `interaction_se`), the within-site moderation by w;
/// - across: the meta-regression of `slope` on `mean_w`, the across-site
///   moderation by the site mean of w;
/// - characteristics: the meta-regression of `slope` on the given site
///   characteristics (or, with neither these nor w, the pooled slope).
///
/// # Errors
/// Any error of the `fit` job (too few sites, a constant moderator, …).
pub fn run(
    report: &SitesReport,
    options: FitOptions,
    characteristics: &[ModeratorSpec],
) -> Result<TwoStage> {
    let bytes = crate::render::sites_effects::bytes(report);
    let source = "<site effects>";
    let fit = |measure: Measure,
               cols: BTreeMap<String, String>,
               mods: Vec<ModeratorSpec>|
     -> Result<FitReport> {
        let settings = FitSettings {
            measure,
            columns: ColumnMap::new(measure, cols)?,
            label: ("study".into(), true),
            moderators: mods,
            interactions: vec![],
            options,
            predictions: vec![],
            interpret: Default::default(),
            diagnostics: Default::default(),
            dependence: Default::default(),
            answers: Default::default(),
        };
        fit::run(&settings, source, &bytes)
    };
    let with_w = report.model.w.is_some();
    let w = report.model.w.clone().unwrap_or_default();
    let x = &report.model.x;
    let (within, across) = if with_w {
        let cols = BTreeMap::from([
            ("effect".to_string(), "interaction".to_string()),
            ("se".to_string(), "interaction_se".to_string()),
        ]);
        (
            Some(fit(Measure::Effect, cols, vec![])?),
            Some(fit(
                Measure::Slope,
                BTreeMap::new(),
                vec![numeric("mean_w")],
            )?),
        )
    } else {
        (None, None)
    };
    // The site effects: slopes, or with a group comparison the counts or t
    // columns that `fit` reads for g or the log odds ratio.
    let measure = match report.model.effect {
        SiteMeasure::Slope => Measure::Slope,
        SiteMeasure::Smd => Measure::Smd,
        SiteMeasure::LogOr => Measure::LogOr,
    };
    let chars = if !characteristics.is_empty() || !with_w {
        Some(fit(measure, BTreeMap::new(), characteristics.to_vec())?)
    } else {
        None
    };
    let mut answers = Vec::new();
    if with_w {
        answers.push(format!(
            "Within sites: the pooled product term asks whether, inside a site, the {x}→{y} slope \
             changes with a participant's own {w}. It compares participants of the same site, so \
             differences between sites cannot bias it.",
            y = report.model.y
        ));
        answers.push(format!(
            "Across sites: the regression of the site slopes on the site mean of {w} asks whether sites \
             whose participants have a higher {w} on average have different slopes. It compares sites, so \
             anything else that differs between those sites can produce it (ecological bias); it does \
             not show what happens to an individual."
        ));
        answers.push(
            "For a question about individuals (does the effect depend on a participant's own value?), \
             read the within-site answer; the across-site answer is about sites, and the two can \
             disagree (Fisher et al. 2017, BMJ 356:j573; Riley et al. 2020, Stat. Med. 39:2115)."
                .into(),
        );
    }
    if !characteristics.is_empty() {
        answers.push(match report.model.effect {
            SiteMeasure::Slope => {
                "Site characteristics: the meta-regression of the site slopes on \
                                   them is an across-site comparison too, with the same limits."
                    .into()
            }
            effect => format!(
                "Site characteristics: the meta-regression of the site {} on them compares \
                 sites, so anything else that differs between those sites can produce it; even \
                 when every site randomised its groups, it does not show what happens to an \
                 individual.",
                if effect == SiteMeasure::Smd {
                    "standardised mean differences"
                } else {
                    "log odds ratios"
                }
            ),
        });
    }
    let k = report.sites.len();
    let mut cautions = vec![
        "Associations across sites are observational, even when every site randomised: sites differ \
         in many ways at once."
            .to_string(),
    ];
    if k < 10 {
        cautions.push(format!(
            "Only {k} sites: τ² and every between-site comparison are estimated imprecisely."
        ));
    }
    let tests = usize::from(with_w) * 2 + characteristics.len();
    if tests > 1 {
        cautions.push(format!(
            "{tests} moderator tests are reported; their p-values are not adjusted for multiple testing."
        ));
    }
    // The fits' own cautions that this list does not already say in its
    // words (few studies per term, imprecise τ²), so that the report shows
    // every caution once.
    let generic = [
        crate::fit::messages::ASSOCIATION_CAUTION,
        crate::fit::messages::DECISION_CAUTION,
    ];
    for f in [&within, &across, &chars].into_iter().flatten() {
        for c in &f.cautions {
            if !generic.contains(&c.as_str()) && !cautions.contains(c) {
                cautions.push(c.clone());
            }
        }
    }
    cautions.push(
        "Decisions about participants, patients, pupils or programmes rest with the responsible \
         professionals and local guidance, not with this output."
            .into(),
    );
    Ok(TwoStage {
        within,
        across,
        characteristics: chars,
        answers,
        cautions,
    })
}
