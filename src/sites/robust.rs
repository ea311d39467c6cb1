//! The second pass over the participant rows (`--robust`): each row's
//! leverage and residual, summed into every fitted site's HC3 standard
//! errors.

use super::fits::Fitted;
use super::index::SiteIndex;
use super::ols::Hc3;
use super::read::{self, PassSummary};
use super::settings::{row_columns, Layout, SitesSettings};
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use std::collections::HashMap;
use std::io::Read;

/// HC3 sums for one site: the slope, and the product term when fitted.
pub(super) struct RobustSite {
    pub(super) slope: Hc3,
    pub(super) interaction: Option<(Hc3, f64, f64)>,
    rows: u64,
}

/// The second pass: HC3 sums for every fitted site.
pub(super) fn robust_pass<R: Read>(
    source: &str,
    input: read::RowStream<R>,
    s: &SitesSettings,
    layout: Layout,
    fitted: &[Fitted],
    first: &PassSummary,
) -> Result<Vec<RobustSite>> {
    let mut robust: Vec<RobustSite> = fitted
        .iter()
        .map(|f| RobustSite {
            slope: Hc3::new(&f.slope, &f.moments, 0),
            interaction: f.interaction.as_ref().map(|(fit, im)| {
                (
                    Hc3::new(fit, im, layout.xw()),
                    f.moments.mean(Layout::X),
                    f.moments.mean(layout.w()),
                )
            }),
            rows: 0,
        })
        .collect();
    let mut index = SiteIndex::new();
    let by_id: HashMap<&str, usize> = fitted
        .iter()
        .enumerate()
        .map(|(i, f)| (f.id.as_str(), i))
        .collect();
    let k = layout.covariates;
    let mut z = vec![0.0; layout.dim()];
    let center = s.center_within;
    let pass = read::for_each(source, input, &row_columns(s), |_, id, values| {
        let ix = index.find_or_insert(id, |id| {
            std::str::from_utf8(id)
                .ok()
                .and_then(|t| by_id.get(t).copied())
                .unwrap_or(usize::MAX)
        });
        if ix == usize::MAX {
            return Ok(());
        }
        let site = &mut robust[ix];
        site.rows += 1;
        let y = values[values.len() - 1];
        site.slope.add(&values[..=k], y);
        if let Some((h, mx, mw)) = &mut site.interaction {
            z[..=k].copy_from_slice(&values[..=k]);
            let (x, w) = (values[0], values[k + 1]);
            z[k + 1] = w;
            z[k + 2] = if center { (x - *mx) * (w - *mw) } else { x * w };
            h.add(&z[..k + 3], y);
        }
        Ok(())
    })?;
    // The two passes must see the same rows: a file rewritten in between
    // would mix two data sets silently.
    let changed = pass.rows != first.rows
        || pass.missing_rows != first.missing_rows
        || robust
            .iter()
            .zip(fitted)
            .any(|(r, f)| r.rows != f.moments.n());
    if changed {
        return Err(Error::Format {
            source_name: source.to_string(),
            message: format!(
                "the file changed between the two passes that {} makes (its rows differ \
                 from the first reading); run again on a file that is not being written to",
                Flag::Robust
            ),
        });
    }
    Ok(robust)
}
