//! Assembling the per-site stage's report from the fitted sites.

use super::fits::Fitted;
use super::robust::RobustSite;
use super::settings::{Layout, SitesSettings};
use crate::result::{
    ExcludedSite, SeType, SiteEffect, SitesInput, SitesModel, SitesReport, ToolInfo,
};

/// Orders site ids numerically when every id is a number, else by text.
pub fn sort_ids<T>(items: &mut [T], id: impl Fn(&T) -> &str) {
    let all_numeric = items.iter().all(|t| id(t).trim().parse::<f64>().is_ok());
    if all_numeric {
        items.sort_by(|a, b| {
            let (x, y) = (
                id(a).trim().parse::<f64>().unwrap_or(0.0),
                id(b).trim().parse::<f64>().unwrap_or(0.0),
            );
            x.total_cmp(&y).then_with(|| id(a).cmp(id(b)))
        });
    } else {
        items.sort_by(|a, b| id(a).cmp(id(b)));
    }
}

/// The report from the fitted sites (and, with `--robust`, their HC3 sums):
/// one effect per site in id order, the excluded sites, and the notes.
pub(super) fn assemble(
    input: SitesInput,
    s: &SitesSettings,
    layout: Layout,
    fitted: Vec<Fitted>,
    excluded: Vec<ExcludedSite>,
    robust: Option<Vec<RobustSite>>,
) -> SitesReport {
    let (sites, excluded) = slope_sites(layout, fitted, excluded, robust);
    finish(input, s, layout, sites, excluded)
}

/// One effect per fitted site, from its slope fits (classical or HC3);
/// a site whose HC3 variance is undefined joins `excluded`.
fn slope_sites(
    layout: Layout,
    fitted: Vec<Fitted>,
    mut excluded: Vec<ExcludedSite>,
    robust: Option<Vec<RobustSite>>,
) -> (Vec<SiteEffect>, Vec<ExcludedSite>) {
    let mut sites = Vec::with_capacity(fitted.len());
    let mut robust = robust.map(|r| r.into_iter());
    for f in fitted {
        let m = &f.moments;
        let rob = robust.as_mut().and_then(|it| it.next());
        let (se, interaction_se, note) = match &rob {
            None => (
                f.slope.se(0),
                f.interaction.as_ref().map(|(fit, _)| fit.se(layout.xw())),
                f.interaction_note.clone(),
            ),
            Some(rs) => {
                let Some(se) = rs.slope.se() else {
                    excluded.push(ExcludedSite {
                        study: f.id,
                        n: m.n(),
                        reason: "a row has leverage 1 in the slope model (it alone determines a coefficient), so HC3 is undefined".into(),
                    });
                    continue;
                };
                let ise = rs.interaction.as_ref().and_then(|(h, _, _)| h.se());
                let note = match (&f.interaction, ise) {
                    (Some(_), None) => Some("no product-term SE: a row has leverage 1 in the product-term model, so HC3 is undefined".to_string()),
                    _ => f.interaction_note.clone(),
                };
                (se, ise, note)
            }
        };
        let interaction =
            interaction_se.and(f.interaction.as_ref().map(|(fit, _)| fit.beta[layout.xw()]));
        let (x, y) = (Layout::X, layout.y());
        sites.push(SiteEffect {
            study: f.id,
            n: m.n(),
            slope: f.slope.beta[0],
            se,
            r: m.comoment(x, y) / (m.comoment(x, x) * m.comoment(y, y)).sqrt(),
            interaction,
            interaction_se,
            mean_x: m.mean(x),
            mean_w: layout.with_w.then(|| m.mean(layout.w())),
            note,
            characteristics: vec![],
            smd: None,
            log_or: None,
        });
    }
    (sites, excluded)
}

/// The report around the per-site effects: sorted by id, with the notes
/// of the run.
pub(super) fn finish(
    input: SitesInput,
    s: &SitesSettings,
    layout: Layout,
    mut sites: Vec<SiteEffect>,
    mut excluded: Vec<ExcludedSite>,
) -> SitesReport {
    let mut notes = Vec::new();
    sort_ids(&mut sites, |e| e.study.as_str());
    sort_ids(&mut excluded, |e| e.study.as_str());
    if input.missing_rows > 0 {
        notes.push(format!(
            "{} row{} left out for an empty or missing-mark value in a needed column (first {}: {}).",
            input.missing_rows,
            if input.missing_rows == 1 { "" } else { "s" },
            if input.delimiter == crate::input::Delimiter::Parquet {
                "rows"
            } else {
                "lines"
            },
            input
                .missing_lines
                .iter()
                .map(|l| l.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    notes.extend(super::groups::notes(s, &sites));
    if s.robust {
        notes.push("Standard errors are HC3 (heteroskedasticity-consistent, MacKinnon & White 1985); the file was read twice, the second time for each row's leverage and residual.".into());
    }
    if layout.with_w && s.center_within {
        notes.push("x and w were centred at their site means in the product-term model: the product term is unchanged, the design better conditioned.".into());
    }
    SitesReport {
        tool: ToolInfo {
            name: "pondus".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        input,
        model: SitesModel {
            site: s.site.clone(),
            x: s.x.clone(),
            y: s.y.clone(),
            w: s.w.clone(),
            covariates: s.covariates.clone(),
            se_type: if s.robust {
                SeType::Hc3
            } else {
                SeType::Classical
            },
            center_within: s.center_within,
            effect: s.effect,
            treat: s.treat.clone(),
            event: s.event.clone(),
        },
        sites,
        excluded,
        join: None,
        notes,
        stages: None,
        one_stage: None,
    }
}
