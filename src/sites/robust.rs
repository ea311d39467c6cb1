//! The second pass over the participant rows (`--robust`): each row's
//! leverage and residual, summed into every fitted site's HC3 standard
//! errors. On a CSV file the rows are read in pieces on all threads
//! (`super::pieces`) and the pieces' sums added in file order.

use super::fits::Fitted;
use super::index::SiteIndex;
use super::ols::Hc3;
use super::read::{self, PassSummary, RowSink};
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
    let by_id: HashMap<&str, usize> = fitted
        .iter()
        .enumerate()
        .map(|(i, f)| (f.id.as_str(), i))
        .collect();
    let shape = RowShape {
        covariates: layout.covariates,
        center: s.center_within,
        sites: &robust,
        by_id: &by_id,
    };
    let mut sums = vec![PieceSums::default(); robust.len()];
    let pass = read::for_each(
        source,
        input,
        &row_columns(s),
        || HcPiece::new(&shape),
        |piece| {
            for (all, p) in sums.iter_mut().zip(&piece.sums) {
                all.absorb(p);
            }
        },
    )?;
    for (site, sum) in robust.iter_mut().zip(&sums) {
        site.rows = sum.rows;
        site.slope.absorb(sum.slope.0, sum.slope.1);
        if let Some((h, _, _)) = &mut site.interaction {
            h.absorb(sum.interaction.0, sum.interaction.1);
        }
    }
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

/// What every piece's sums read: the sites' fits and how a row's terms are
/// formed.
struct RowShape<'a> {
    covariates: usize,
    center: bool,
    sites: &'a [RobustSite],
    by_id: &'a HashMap<&'a str, usize>,
}

/// One site's HC3 sums over a stretch of rows: (sum, a row with leverage 1)
/// for the slope and the product term, and the rows.
#[derive(Debug, Clone, Copy, Default)]
struct PieceSums {
    slope: (f64, bool),
    interaction: (f64, bool),
    rows: u64,
}

impl PieceSums {
    /// Adds the sums of the rows that follow in the file.
    fn absorb(&mut self, next: &PieceSums) {
        self.slope.0 += next.slope.0;
        self.slope.1 |= next.slope.1;
        self.interaction.0 += next.interaction.0;
        self.interaction.1 |= next.interaction.1;
        self.rows += next.rows;
    }
}

/// Adds a row's term (None: leverage 1) to a sum.
#[inline]
fn add_term(sum: &mut (f64, bool), term: Option<f64>) {
    match term {
        Some(t) => sum.0 += t,
        None => sum.1 = true,
    }
}

/// The HC3 sums of every fitted site over one piece of the file.
struct HcPiece<'a> {
    shape: &'a RowShape<'a>,
    index: SiteIndex,
    sums: Vec<PieceSums>,
    z: Vec<f64>,
}

impl<'a> HcPiece<'a> {
    fn new(shape: &'a RowShape<'a>) -> Self {
        HcPiece {
            shape,
            index: SiteIndex::new(),
            sums: vec![PieceSums::default(); shape.sites.len()],
            z: vec![0.0; shape.covariates + 3],
        }
    }
}

impl RowSink for HcPiece<'_> {
    #[inline]
    fn row(&mut self, id: &[u8], values: &[f64]) {
        let by_id = self.shape.by_id;
        let ix = self.index.find_or_insert(id, |id| {
            std::str::from_utf8(id)
                .ok()
                .and_then(|t| by_id.get(t).copied())
                .unwrap_or(usize::MAX)
        });
        if ix == usize::MAX {
            return;
        }
        let (site, sum) = (&self.shape.sites[ix], &mut self.sums[ix]);
        let k = self.shape.covariates;
        sum.rows += 1;
        let y = values[values.len() - 1];
        add_term(&mut sum.slope, site.slope.term(&values[..=k], y));
        if let Some((h, mx, mw)) = &site.interaction {
            let z = &mut self.z;
            z[..=k].copy_from_slice(&values[..=k]);
            let (x, w) = (values[0], values[k + 1]);
            z[k + 1] = w;
            z[k + 2] = if self.shape.center {
                (x - *mx) * (w - *mw)
            } else {
                x * w
            };
            add_term(&mut sum.interaction, h.term(&z[..k + 3], y));
        }
    }
}
