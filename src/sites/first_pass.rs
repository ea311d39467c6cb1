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

/// The per-site moments of one piece of the file (or all of it), sites in
/// order of first appearance, kept in flat arrays (each site's means and
/// co-moments side by side, so a row touches one place in memory).
struct SiteSums {
    layout: Layout,
    index: SiteIndex,
    ids: Vec<String>,
    counts: Vec<u64>,
    /// Per site: d means, then the d(d+1)/2 co-moments.
    sums: Vec<f64>,
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
            ids: Vec::new(),
            counts: Vec::new(),
            sums: Vec::new(),
            first_x: None,
            x_varies: false,
            v: vec![0.0; layout.dim()],
        }
    }

    /// Length of one site's block of `sums`.
    fn stride(&self) -> usize {
        let d = self.layout.dim();
        d + d * (d + 1) / 2
    }
}

impl RowSink for SiteSums {
    #[inline]
    fn row(&mut self, id: &[u8], values: &[f64]) {
        let stride = self.stride();
        let (ids, counts, sums) = (&mut self.ids, &mut self.counts, &mut self.sums);
        let ix = self.index.find_or_insert(id, |id| {
            ids.push(String::from_utf8_lossy(id).into_owned());
            counts.push(0);
            sums.resize(sums.len() + stride, 0.0);
            ids.len() - 1
        });
        match self.first_x {
            None => self.first_x = Some(values[0]),
            Some(f) => self.x_varies |= f != values[0],
        }
        moment_vector(self.layout, values, &mut self.v);
        let d = self.layout.dim();
        let (mean, c) = self.sums[ix * stride..(ix + 1) * stride].split_at_mut(d);
        moments::push_raw(&mut self.counts[ix], mean, c, &self.v);
    }
}

/// The sites' moments of the pieces merged so far.
struct Merged {
    index: SiteIndex,
    sites: Vec<SiteSummary>,
    first_x: Option<f64>,
    x_varies: bool,
}

impl Merged {
    /// Adds the sums of the piece that follows in the file: each site's
    /// moments merged (Chan et al. 1983, see [`Moments::merge`]), new sites
    /// appended in their order of first appearance.
    fn absorb(&mut self, piece: SiteSums) {
        let (stride, d) = (piece.stride(), piece.layout.dim());
        for (k, id) in piece.ids.into_iter().enumerate() {
            let block = &piece.sums[k * stride..(k + 1) * stride];
            let m = Moments::from_raw(piece.counts[k], &block[..d], &block[d..]);
            let sites = &mut self.sites;
            let ix = self.index.find_or_insert(id.as_bytes(), |_| {
                sites.push(SiteSummary {
                    id: id.clone(),
                    moments: Moments::new(d),
                });
                sites.len() - 1
            });
            self.sites[ix].moments.merge(&m);
        }
        match (self.first_x, piece.first_x) {
            (None, f) => self.first_x = f,
            (Some(a), Some(b)) => self.x_varies |= a != b,
            (Some(_), None) => {}
        }
        self.x_varies |= piece.x_varies;
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
    let mut all = Merged {
        index: SiteIndex::new(),
        sites: Vec::new(),
        first_x: None,
        x_varies: false,
    };
    let pass = read::for_each(
        source,
        input,
        &cols,
        || SiteSums::new(layout),
        |piece| all.absorb(piece),
    )?;
    let Merged {
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
