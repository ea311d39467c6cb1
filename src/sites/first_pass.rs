//! The first pass over the participant rows: every row read once, each
//! site's count, means and co-moments updated in place.

use super::index::SiteIndex;
use super::moments::{self, Moments};
use super::read::{self, PassSummary, RowSink};
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

/// The per-site moments of one stretch of rows (a piece of the file, or all
/// of it), sites in order of first appearance.
struct SiteSums {
    layout: Layout,
    index: SiteIndex,
    sites: Vec<SiteSummary>,
    /// x of the first row, and whether any later row has another x.
    first_x: Option<f64>,
    x_varies: bool,
    v: Vec<f64>,
}

impl SiteSums {
    fn new(layout: Layout) -> Self {
        SiteSums {
            layout,
            index: SiteIndex::new(),
            sites: Vec::new(),
            first_x: None,
            x_varies: false,
            v: vec![0.0; layout.dim()],
        }
    }

    /// The index of site `id`, added (with empty moments) when new.
    #[inline]
    fn site(&mut self, id: &[u8]) -> usize {
        let (sites, dim) = (&mut self.sites, self.layout.dim());
        self.index.find_or_insert(id, |id| {
            sites.push(SiteSummary {
                id: String::from_utf8_lossy(id).into_owned(),
                moments: Moments::new(dim),
            });
            sites.len() - 1
        })
    }

    /// Adds the sums of the rows that follow these in the file: each site's
    /// moments merged (Chan et al. 1983, see [`Moments::merge`]), new sites
    /// appended in their order of first appearance.
    fn absorb(&mut self, next: SiteSums) {
        for s in next.sites {
            let ix = self.site(s.id.as_bytes());
            self.sites[ix].moments.merge(&s.moments);
        }
        match (self.first_x, next.first_x) {
            (None, f) => self.first_x = f,
            (Some(a), Some(b)) => self.x_varies |= a != b,
            (Some(_), None) => {}
        }
        self.x_varies |= next.x_varies;
    }
}

impl RowSink for SiteSums {
    #[inline]
    fn row(&mut self, id: &[u8], values: &[f64]) {
        let ix = self.site(id);
        match self.first_x {
            None => self.first_x = Some(values[0]),
            Some(f) => self.x_varies |= f != values[0],
        }
        moment_vector(self.layout, values, &mut self.v);
        self.sites[ix].moments.push(&self.v);
    }
}

/// The first pass: every row read once, per-site moments updated in place
/// (on a CSV file, in pieces on all threads, merged in file order: the
/// result does not depend on the number of threads).
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
    let mut all = SiteSums::new(layout);
    let pass = read::for_each(
        source,
        input,
        &cols,
        || SiteSums::new(layout),
        |piece| all.absorb(piece),
    )?;
    let SiteSums {
        sites,
        first_x,
        x_varies,
        ..
    } = all;
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
