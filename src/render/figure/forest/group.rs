//! How the forest plot's rows are grouped: by the first categorical
//! moderator (the default), by any column (`--group-by`), or not at all.
//! A categorical moderator's groups end with that level's own average (from
//! the report's subgroups); the groups of another column have a heading only.

use super::columns::{cells, numeric};
use crate::error::Result;
use crate::render::figure::GroupBy;
use crate::result::{FitReport, LevelSummary, ModeratorKind, Subgroups};
use crate::support::flag::Flag;

/// One group of rows.
pub(super) struct Group<'a> {
    /// The value the group's studies share.
    pub value: String,
    /// Its studies, by index into the report's studies.
    pub members: Vec<usize>,
    /// The level's own average (a categorical moderator's groups only).
    pub summary: Option<&'a LevelSummary>,
}

/// The rows' grouping: the column's name and its groups in order.
pub(super) struct Grouping<'a> {
    /// The column (or moderator) the rows are grouped by.
    pub column: String,
    /// The groups, in order.
    pub groups: Vec<Group<'a>>,
}

impl Grouping<'_> {
    /// Whether the groups carry their own averages.
    pub fn averaged(&self) -> bool {
        self.groups.iter().any(|g| g.summary.is_some())
    }
}

/// The subgroups of the categorical moderator `name`, if it is one.
fn moderator_groups<'a>(report: &'a FitReport, name: &str) -> Option<Grouping<'a>> {
    let j = report
        .model
        .moderators
        .iter()
        .position(|m| m.name == name && matches!(m.kind, ModeratorKind::Categorical { .. }))?;
    let g: &Subgroups = report.subgroups.iter().find(|g| g.moderator == name)?;
    let groups = g
        .levels
        .iter()
        .map(|lv| Group {
            value: lv.level.clone(),
            members: (0..report.studies.len())
                .filter(|&i| {
                    matches!(&report.studies.moderator(i, j),
                        crate::result::AtValue::Level(l) if *l == lv.level)
                })
                .collect(),
            summary: Some(lv),
        })
        .collect();
    Some(Grouping {
        column: g.moderator.clone(),
        groups,
    })
}

/// The grouping `by` asks for.
///
/// # Errors
/// [`Error::Usage`](crate::error::Error::Usage) naming `--group-by` when
/// the column was not read with the data.
pub(super) fn grouping<'a>(report: &'a FitReport, by: &GroupBy) -> Result<Option<Grouping<'a>>> {
    match by {
        GroupBy::Off => Ok(None),
        GroupBy::Auto => Ok(report
            .model
            .moderators
            .iter()
            .filter(|m| matches!(m.kind, ModeratorKind::Categorical { .. }))
            .find_map(|m| moderator_groups(report, &m.name))),
        GroupBy::Column(name) => {
            if let Some(g) = moderator_groups(report, name) {
                return Ok(Some(g));
            }
            let values = cells(report, name, Flag::GroupBy)?;
            Ok(Some(Grouping {
                column: name.clone(),
                groups: by_value(&values),
            }))
        }
    }
}

/// Groups of equal cells: numbers ascending when every cell is a number,
/// else text in alphabetical order; empty cells in a last group.
fn by_value<'a>(values: &[String]) -> Vec<Group<'a>> {
    let mut distinct: Vec<&str> = values
        .iter()
        .map(|v| v.as_str())
        .filter(|v| !v.is_empty())
        .collect();
    if numeric(values) {
        let num = |v: &str| v.trim().parse::<f64>().unwrap_or(f64::NAN);
        distinct.sort_by(|a, b| num(a).total_cmp(&num(b)).then(a.cmp(b)));
    } else {
        distinct.sort();
    }
    distinct.dedup();
    if values.iter().any(String::is_empty) {
        distinct.push("");
    }
    distinct
        .into_iter()
        .map(|d| Group {
            value: if d.is_empty() {
                "(no value)".into()
            } else {
                d.to_string()
            },
            members: (0..values.len()).filter(|&i| values[i] == d).collect(),
            summary: None,
        })
        .collect()
}
