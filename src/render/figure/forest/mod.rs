//! The forest plot: one row per study, subgroup and overall averages, the
//! prediction interval on its own dashed row.
//!
//! Layout, left to right: label column, the text columns (`--columns`, the
//! sort column), plot area, "effect \[CI\]" column, weight column. Rows are
//! 24, 19 or 15 pixels high depending on how many there are (or share
//! `--height`, or follow `--font-size`); a label too long for its column
//! wraps onto two lines in a taller row (`labels`), so it never reaches the
//! plot area. Rows are grouped by a categorical moderator or any column
//! (`group`).
//!
//! The steps: check the options, order the studies, group them, lay out
//! the rows (`layout::rows`), the value axis (`layout::value_axis`), the
//! text columns, the labels' lines, the caption and the row heights
//! (`layout::Forest::new`), then draw the header, the backdrop, each row,
//! the axis and the caption (`draw`).

mod band;
mod columns;
mod draw;
mod group;
mod labels;
mod layout;
mod shrunken;

use super::{PlotOptions, Scene, SortKey};
use crate::error::{Error, Result};
use crate::result::{AtValue, FitReport, ModeratorKind};
use crate::support::flag::Flag;

/// The most studies a forest plot draws (one row each).
pub const MAX_STUDIES: usize = 20_000;

/// Builds the forest plot.
///
/// # Errors
/// [`Error::Usage`] for `--sort`, `--group-by` or `--columns` naming a
/// column neither a moderator nor carried in the studies' cells, `--show-fitted`
/// without moderators, or a width too small for the columns.
pub fn scene(report: &FitReport, opts: &PlotOptions) -> Result<Scene> {
    check(report, opts)?;
    let ordered = order(report, &opts.sort)?;
    let group = group::grouping(report, &opts.group_by)?;
    let rows = layout::rows(report, &ordered, group.as_ref());
    let axis = layout::value_axis(report, group.as_ref());
    let forest = layout::Forest::new(report, opts, group.as_ref(), &rows, axis)?;
    Ok(forest.draw(&rows))
}

/// The options the model cannot support, and too many studies.
fn check(report: &FitReport, opts: &PlotOptions) -> Result<()> {
    if opts.show_fitted && report.model.moderators.is_empty() {
        return Err(Error::usage(
            Flag::ShowFitted,
            format!(
                "the model has no moderators, so every fitted value is the average; add {}",
                Flag::Moderator
            ),
        ));
    }
    let studies = &report.studies;
    if studies.len() > MAX_STUDIES {
        return Err(Error::usage(
            Flag::Forest,
            format!(
                "{} studies are too many rows for a forest plot (at most {MAX_STUDIES}); a funnel \
                 or bubble plot shows them all",
                studies.len()
            ),
        ));
    }
    Ok(())
}

/// Study indices in the requested order (stable: ties keep input order).
fn order(report: &FitReport, sort: &SortKey) -> Result<Vec<usize>> {
    let mut idx: Vec<usize> = (0..report.studies.len()).collect();
    let s = &report.studies;
    match sort {
        SortKey::Input => {}
        SortKey::Effect => idx.sort_by(|&a, &b| s.effects()[a].total_cmp(&s.effects()[b])),
        SortKey::Precision => idx.sort_by(|&a, &b| s.variances()[a].total_cmp(&s.variances()[b])),
        SortKey::Column(name) => match report.model.moderators.iter().position(|m| &m.name == name)
        {
            Some(j) if s.iter().all(|st| !st.cells.contains_key(name)) => {
                let key = |i: usize| match &s.moderator(i, j) {
                    AtValue::Number(x) => (0usize, *x, String::new()),
                    AtValue::Level(l) => {
                        let pos = match &report.model.moderators[j].kind {
                            ModeratorKind::Categorical { levels, .. } => {
                                levels.iter().position(|x| x == l).unwrap_or(0)
                            }
                            _ => 0,
                        };
                        (pos, 0.0, l.clone())
                    }
                };
                idx.sort_by(|&a, &b| {
                    let (ka, kb) = (key(a), key(b));
                    ka.0.cmp(&kb.0)
                        .then(ka.1.total_cmp(&kb.1))
                        .then(ka.2.cmp(&kb.2))
                });
            }
            _ => sort_by_cells(&mut idx, &columns::cells(report, name, Flag::Sort)?),
        },
    }
    Ok(idx)
}

/// Sorts study indices by a column's cells: numbers ascending when every
/// cell is a number, else text in order; empty cells last (stable).
fn sort_by_cells(idx: &mut [usize], cells: &[String]) {
    let empty = |i: usize| cells[i].trim().is_empty();
    if columns::numeric(cells) {
        let num = |i: usize| cells[i].trim().parse::<f64>().unwrap_or(f64::INFINITY);
        idx.sort_by(|&a, &b| empty(a).cmp(&empty(b)).then(num(a).total_cmp(&num(b))));
    } else {
        idx.sort_by(|&a, &b| empty(a).cmp(&empty(b)).then(cells[a].cmp(&cells[b])));
    }
}
