//! The first pass over the participant rows: every row read once, each
//! site's count, means and co-moments updated in place.

use super::index::SiteIndex;
use super::moments::{self, Moments};
use super::read::{self, PassSummary};
use super::settings::{row_columns, Layout, SitesSettings};
use crate::error::{Error, Result};
use crate::support::flag::Flag;
use std::io::Read;

/// One site's first-pass summary.
#[derive(Debug, Clone)]
pub struct SiteSummary {
    /// Site id.
    pub id: String,
    /// Its moments.
    pub moments: Moments,
}

/// What the first pass produced.
#[derive(Debug, Clone)]
pub struct Summaries {
    /// Sites in order of first appearance.
    pub sites: Vec<SiteSummary>,
    /// The moment layout.
    pub layout: Layout,
    /// Counts of the pass.
    pub pass: PassSummary,
    /// The level of x coded 1 (with a group comparison).
    pub treat: Option<String>,
    /// The level of y coded 1 (with `log-or`).
    pub event: Option<String>,
}

/// Fills the moment vector from a row's values (x, covariates, [w], y).
#[inline]
fn moment_vector(layout: Layout, values: &[f64], v: &mut [f64]) {
    let k = layout.covariates;
    v[..=k].copy_from_slice(&values[..=k]);
    if layout.with_w {
        let w = values[k + 1];
        v[k + 1] = w;
        v[k + 2] = values[0] * w;
    }
    v[layout.y()] = values[values.len() - 1];
}

/// The first pass: every row read once, per-site moments updated in place.
///
/// # Errors
/// Input errors from [`read::for_each_row`]; [`Error::Model`] when x takes
/// one value in every row of the file.
pub fn summarise_rows<R: Read>(
    source: &str,
    input: read::RowStream<R>,
    s: &SitesSettings,
) -> Result<Summaries> {
    let layout = Layout {
        covariates: s.covariates.len(),
        with_w: s.w.is_some(),
    };
    if layout.dim() > moments::MAX_DIM {
        return Err(Error::usage(
            Flag::Covariate,
            format!("at most {} covariates are supported", moments::MAX_DIM - 4),
        ));
    }
    let cols = row_columns(s);
    let mut sites: Vec<SiteSummary> = Vec::new();
    let mut index = SiteIndex::new();
    let mut v = vec![0.0; layout.dim()];
    let mut first_x: Option<f64> = None;
    let mut x_varies = false;
    let pass = read::for_each(source, input, &cols, |_, id, values| {
        let ix = index.find_or_insert(id, |id| {
            sites.push(SiteSummary {
                id: String::from_utf8_lossy(id).into_owned(),
                moments: Moments::new(layout.dim()),
            });
            sites.len() - 1
        });
        match first_x {
            None => first_x = Some(values[0]),
            Some(f) => x_varies |= f != values[0],
        }
        moment_vector(layout, values, &mut v);
        sites[ix].moments.push(&v);
        Ok(())
    })?;
    if sites.is_empty() {
        return Err(Error::Model(format!(
            "{source}: every row has a missing value in a needed column ({} rows read); no site can be estimated",
            pass.rows
        )));
    }
    let mut levels = [None, None];
    for (k, c) in pass.coded.iter().enumerate() {
        if let Some(c) = c {
            let (column, slot) = if k == 0 { (&s.x, 0) } else { (&s.y, 1) };
            levels[slot] = Some(c.check(column)?);
        }
    }
    let [treat, event] = levels;
    if !x_varies {
        return Err(Error::Model(format!(
            "{source}: x ('{}') is {} in every used row, so no site has a slope; check that {} names the predictor",
            s.x,
            first_x.unwrap_or(f64::NAN),
            Flag::X
        )));
    }
    Ok(Summaries {
        sites,
        layout,
        pass,
        treat,
        event,
    })
}
