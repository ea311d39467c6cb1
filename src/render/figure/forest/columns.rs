//! The text columns beside the study labels: the columns of the data asked
//! for with `--columns` (their cells as written in the file), then the
//! column the rows are sorted by when it is not among them. A column of
//! numbers is right-aligned, a column of text left-aligned; each is as wide
//! as its widest cell or its header (at most [`MAX_WIDTH`] pixels).

use crate::error::{Error, Result};
use crate::render::figure::scene::{fit_text, text_width};
use crate::render::figure::SortKey;
use crate::result::{AtValue, FitReport};
use crate::support::flag::Flag;
use crate::support::format as fmt;

/// The widest a text column gets (longer cells are shortened with an ellipsis).
pub(super) const MAX_WIDTH: f64 = 220.0;

/// Space between a column and the one before it.
pub(super) const GAP: f64 = 12.0;

/// One text column.
pub(super) struct TextColumn {
    /// The header (the column's name).
    pub head: String,
    /// Each study's cell, by index into the report's studies.
    pub values: Vec<String>,
    /// Width including the gap before it.
    pub width: f64,
    /// Right-aligned (a column of numbers).
    pub right: bool,
    /// Drawn in the secondary colour (the sort column).
    pub muted: bool,
}

/// A column's cells as carried in the studies (`cells`), or a moderator's values.
///
/// # Errors
/// [`Error::Usage`] naming `flag` when the column was not read with the data.
pub(super) fn cells(report: &FitReport, name: &str, flag: Flag) -> Result<Vec<String>> {
    if let Some(j) = report.model.moderators.iter().position(|m| m.name == name) {
        if report.studies.iter().all(|s| !s.cells.contains_key(name)) {
            return Ok(report
                .studies
                .iter()
                .map(|s| moderator_text(&s.moderators[j]))
                .collect());
        }
    }
    report
        .studies
        .iter()
        .map(|s| {
            s.cells.get(name).cloned().ok_or_else(|| {
                let carried: Vec<String> = report
                    .studies
                    .iter()
                    .next()
                    .map(|s| s.cells.into_keys().collect())
                    .unwrap_or_default();
                Error::usage(
                    flag,
                    format!(
                        "'{name}' is not a moderator and was not read with the data (columns read: \
                         {})",
                        if carried.is_empty() {
                            "none".to_string()
                        } else {
                            carried.join(", ")
                        }
                    ),
                )
            })
        })
        .collect()
}

/// A moderator's value as shown: numbers with up to 3 decimals, trailing zeros dropped.
fn moderator_text(v: &AtValue) -> String {
    match v {
        AtValue::Number(x) => {
            let t = fmt::plot_num(*x, 3);
            if t.contains('.') {
                t.trim_end_matches('0').trim_end_matches('.').to_string()
            } else {
                t
            }
        }
        AtValue::Level(l) => l.clone(),
    }
}

/// Whether every non-empty cell is a number (and one is).
pub(super) fn numeric(values: &[String]) -> bool {
    values.iter().any(|v| !v.trim().is_empty())
        && values
            .iter()
            .filter(|v| !v.trim().is_empty())
            .all(|v| v.trim().parse::<f64>().is_ok_and(f64::is_finite))
}

/// The text columns of the plot: `--columns`, then the sort column when
/// the rows are sorted by a column not among them. `fs` is the row text
/// size, `head_fs` the header's.
///
/// # Errors
/// As [`cells`].
pub(super) fn text_columns(
    report: &FitReport,
    (asked, sort): (&[String], &SortKey),
    fs: f64,
    head_fs: f64,
) -> Result<Vec<TextColumn>> {
    let mut out = Vec::new();
    let mut add = |name: &str, flag: Flag, muted: bool| -> Result<()> {
        let values = cells(report, name, flag)?;
        let head = fit_text(name, head_fs, MAX_WIDTH);
        let w = values
            .iter()
            .map(|v| text_width(v, fs))
            .fold(text_width(&head, head_fs), f64::max)
            .min(MAX_WIDTH);
        out.push(TextColumn {
            head,
            right: numeric(&values),
            values,
            width: w + GAP,
            muted,
        });
        Ok(())
    };
    for name in asked {
        add(name, Flag::Columns, false)?;
    }
    if let SortKey::Column(name) = sort {
        if !asked.contains(name) {
            add(name, Flag::Sort, true)?;
        }
    }
    Ok(out)
}
