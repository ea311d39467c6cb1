//! Each site's regressions from its summary: the slope model and the
//! product-term model, or the reason a site has no estimate.

use super::first_pass::SiteSummary;
use super::moments::Moments;
use super::ols::{self, OlsProblem};
use super::settings::{Layout, SitesSettings};
use crate::result::ExcludedSite;

/// One site's estimates before the join.
#[derive(Debug, Clone)]
pub(super) struct Fitted {
    pub(super) id: String,
    pub(super) moments: Moments,
    pub(super) slope: ols::OlsFit,
    pub(super) interaction: Option<(ols::OlsFit, Moments)>,
    pub(super) interaction_note: Option<String>,
}

fn problem_text(p: &OlsProblem, names: &[String], what: &str) -> String {
    match p {
        OlsProblem::TooFewRows { n, need } => format!(
            "too few rows for the {what}: {n} row{}, it needs at least {need}",
            if *n == 1 { "" } else { "s" }
        ),
        OlsProblem::Constant(i) => format!("{} is constant in this site", names[*i]),
        OlsProblem::Collinear(i) => format!(
            "singular design in the {what}: {} is a linear combination of the other predictors",
            names[*i]
        ),
        OlsProblem::ConstantResponse => {
            format!("{} is constant in this site", names[names.len() - 1])
        }
        OlsProblem::ExactFit => format!(
            "the {what} fits this site's rows exactly (no residual variation), so it has no standard error"
        ),
        OlsProblem::TooLarge(i) => format!(
            "{} has values too large for double precision once squared (the {what}'s sums of squares or variances overflow); rescale the column (divide it by a power of ten) and scale the slopes back",
            names[*i]
        ),
        OlsProblem::TooSmall(i) => format!(
            "{} has values too small for double precision once squared (its squared deviations fall to zero, so it would look constant); rescale the column (multiply it by a power of ten) and scale the slopes back",
            names[*i]
        ),
    }
}

/// Display names of the moment variables, from the settings' headers.
fn display_names(layout: Layout, s: &SitesSettings) -> Vec<String> {
    let mut v = vec![format!("x ('{}')", s.x)];
    v.extend(s.covariates.iter().map(|c| format!("covariate '{c}'")));
    if layout.with_w {
        let w = s.w.as_deref().unwrap_or("w");
        v.push(format!("w ('{w}')"));
        v.push("the product x·w".to_string());
    }
    v.push(format!("y ('{}')", s.y));
    v
}

/// Moments of the product-term model, with x and w centred at the site
/// means when asked: x·w becomes (x − x̄)(w − w̄) = x·w − w̄x − x̄w + x̄w̄, a
/// linear map of the moment vector, so its co-moments are A C Aᵀ
/// ([`Moments::transformed`]); b₃ is unchanged and b₁ becomes the slope
/// at the site's mean w.
fn interaction_moments(m: &Moments, layout: Layout, center: bool) -> Moments {
    if !center {
        return m.clone();
    }
    let d = layout.dim();
    let (mx, mw) = (m.mean(Layout::X), m.mean(layout.w()));
    let mut a = vec![0.0; d * d];
    for i in 0..d {
        a[i * d + i] = 1.0;
    }
    let xw = layout.xw();
    a[xw * d + Layout::X] = -mw;
    a[xw * d + layout.w()] = -mx;
    let mut b = vec![0.0; d];
    b[xw] = mx * mw;
    m.transformed(&a, &b)
}

/// Each site's OLS fits from its moments: the slope model, and with w the
/// product-term model; sites whose slope model cannot be fitted are listed
/// with the reason.
pub(super) fn fit_sites(
    summaries: Vec<SiteSummary>,
    layout: Layout,
    s: &SitesSettings,
) -> (Vec<Fitted>, Vec<ExcludedSite>) {
    let names = display_names(layout, s);
    let mut fitted = Vec::new();
    let mut excluded = Vec::new();
    for site in summaries {
        let m = site.moments;
        let slope = match ols::fit(&m, &layout.slope_predictors(), layout.y()) {
            Ok(f) => f,
            Err(p) => {
                excluded.push(ExcludedSite {
                    study: site.id,
                    n: m.n(),
                    reason: problem_text(&p, &names, "slope model"),
                });
                continue;
            }
        };
        let (interaction, interaction_note) = if layout.with_w {
            let im = interaction_moments(&m, layout, s.center_within);
            match ols::fit(&im, &layout.interaction_predictors(), layout.y()) {
                Ok(f) => (Some((f, im)), None),
                Err(p) => (
                    None,
                    Some(format!(
                        "no product term: {}",
                        problem_text(&p, &names, "product-term model")
                    )),
                ),
            }
        } else {
            (None, None)
        };
        fitted.push(Fitted {
            id: site.id,
            moments: m,
            slope,
            interaction,
            interaction_note,
        });
    }
    (fitted, excluded)
}
