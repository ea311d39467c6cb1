//! Stage 1 of `fit`: read the requested columns. Every column the job
//! needs (labels, the measure's roles, moderators, artifact columns, the
//! characteristics of the spread, the order of the cumulative analysis, the cluster ids) is requested once, and
//! the table is read with exactly those columns.

use super::FitSettings;
use crate::effect::artifact;
use crate::error::Result;
use crate::input::{self, ColumnRequest, Table, TableBytes};
use crate::support::flag::Flag;

/// The table with the requested columns, and where each group of requests starts.
#[derive(Debug)]
pub struct Columns {
    /// The table; column `j` answers request `j` (column 0 is the labels).
    pub table: Table,
    /// Index of the first of the measure's columns (its roles are consecutive).
    pub first_measure: usize,
    /// Index of the first moderator column (one per moderator, in order).
    pub first_moderator: usize,
    /// Index of the first artifact column.
    pub first_artifact: usize,
    /// Per `--spread-by` characteristic: its column, or None when it is also
    /// a moderator (whose column then serves both).
    pub spread: Vec<Option<usize>>,
    /// Index of the `--cumulative-by` column, when asked.
    pub order: Option<usize>,
    /// Index of the `--cluster` column, when asked.
    pub cluster: Option<usize>,
    /// Index of the first column carried for the plots (one per
    /// [`crate::effect::ColumnMap::shown`] entry, in order).
    pub first_shown: usize,
}

/// Requests the columns of `settings` and reads the table.
///
/// # Errors
/// [`crate::Error::Usage`] for artifact corrections with a measure other
/// than r; any error of [`input::read_table`] (a missing required column,
/// unreadable text, ragged rows).
pub fn read(settings: &FitSettings, source: &str, bytes: TableBytes<'_>) -> Result<Columns> {
    let measure = settings.measure;
    let mut requests = vec![ColumnRequest {
        header: settings.label.0.clone(),
        required: settings.label.1,
        purpose: "study labels".into(),
        label: true,
        numbers: false,
        hint: format!("Name the label column with {} <header>.", Flag::Label),
    }];
    let first_measure = requests.len();
    requests.extend(settings.columns.requests(measure));
    let first_moderator = requests.len();
    for m in &settings.moderators {
        // A moderator typed as categories keeps its labels as written.
        requests.push(ColumnRequest {
            numbers: !m.categorical,
            ..named(&m.name, "a moderator", Flag::Moderator)
        });
    }
    let first_artifact = requests.len();
    requests.extend(artifact::requests(&settings.interpret.artifacts, measure)?);
    let spread = settings
        .answers
        .spread_by
        .iter()
        .map(|s| {
            let shared = settings.moderators.iter().any(|m| m.name == s.name);
            (!shared).then(|| {
                requests.push(named(
                    &s.name,
                    "a characteristic of the spread",
                    Flag::SpreadBy,
                ));
                requests.len() - 1
            })
        })
        .collect();
    let order = settings.diagnostics.cumulative_by.as_ref().map(|h| {
        requests.push(named(
            h,
            "the order of the cumulative meta-analysis",
            Flag::CumulativeBy,
        ));
        requests.len() - 1
    });
    let cluster = settings.dependence.cluster.as_ref().map(|h| {
        requests.push(named(h, "the cluster ids", Flag::Cluster));
        requests.len() - 1
    });
    let first_shown = requests.len();
    for (name, flag) in settings.columns.shown() {
        let mut req = named(name, shown_purpose(*flag), *flag);
        if *flag == Flag::Sort {
            req.hint = format!(
                "Check the spelling of {flag}, which takes a column's name or effect, precision or \
                 input; headers are matched exactly, or ignoring case when unique."
            );
        } else if *flag == Flag::GroupBy {
            req.hint = format!(
                "Check the spelling of {flag}, which takes a column's name or none; headers are \
                 matched exactly, or ignoring case when unique."
            );
        }
        requests.push(req);
    }
    Ok(Columns {
        first_shown,
        table: input::read_table_from(
            source,
            bytes,
            &requests,
            settings.columns.sheet(),
            settings.columns.decimal(),
        )?,
        first_measure,
        first_moderator,
        first_artifact,
        spread,
        order,
        cluster,
    })
}

/// A required column named by `flag`: its purpose is `what` followed by the
/// flag in parentheses, and its hint asks to check the flag's spelling.
fn named(header: &str, what: &str, flag: Flag) -> ColumnRequest {
    ColumnRequest {
        header: header.to_string(),
        required: true,
        purpose: format!("{what} ({flag})"),
        label: false,
        numbers: false,
        hint: format!(
            "Check the spelling of {flag}; headers are matched exactly, or ignoring case when unique."
        ),
    }
}

/// Why a column carried for the plots is needed, by the flag that asks for it.
fn shown_purpose(flag: Flag) -> &'static str {
    match flag {
        Flag::Sort => "the order of the forest plot's rows",
        Flag::GroupBy => "the groups of the forest plot's rows",
        _ => "a column shown in the forest plot",
    }
}
