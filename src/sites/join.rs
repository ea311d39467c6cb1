//! Joining the site-characteristics table to the per-site effects by site id.

use crate::error::{CellProblems, Error, Result};
use crate::input::{self, ColumnRequest};
use crate::render::sites_effects::is_effects_column;
use crate::result::{SiteJoin, SitesReport};
use crate::support::flag::Flag;
use std::collections::HashMap;

/// The site table's id header and its other headers (the
/// characteristics), checked: none named like a column of the effects file,
/// none empty.
///
/// # Errors
/// [`Error::MissingColumn`] when `key` is absent; [`Error::Format`] for a
/// shadowing or empty header.
fn headers_of(
    source: &str,
    bytes: &[u8],
    key: &str,
    sheet: Option<&str>,
) -> Result<(String, Vec<String>)> {
    let probe = input::read_table(
        source,
        bytes,
        &[ColumnRequest {
            header: key.to_string(),
            required: true,
            purpose: "the site ids of the site table".into(),
            label: true,
            numbers: false,
            hint: format!(
                "Name the id column with {} <header> (default: the {} column's name).",
                Flag::InfoKey,
                Flag::Site
            ),
        }],
        sheet,
        // Only the ids are read here, and they are labels.
        None,
    )?;
    let key_header = probe
        .column(0)
        .map(|c| c.header.clone())
        .unwrap_or_default();
    let others: Vec<String> = probe
        .headers
        .iter()
        .filter(|h| **h != key_header)
        .cloned()
        .collect();
    for h in &others {
        // A characteristic may not be named like a column of the effects file.
        if is_effects_column(&h.to_lowercase()) {
            return Err(Error::Format {
                source_name: source.to_string(),
                message: format!(
                    "the site table has a column '{h}', which is also a column of the effects file; rename it in the site table"
                ),
            });
        }
        if h.is_empty() {
            return Err(Error::Format {
                source_name: source.to_string(),
                message: "the site table has a column without a header; name every column".into(),
            });
        }
    }
    Ok((key_header, others))
}

/// Appends every other column of the site table `bytes` (named `source`)
/// to the sites of `report`, matched on the column `key`.
///
/// Sites without a row in the table keep their estimates with empty
/// characteristics; table ids without an estimated site are listed. Both
/// lists go into [`SiteJoin`]; nothing is dropped silently.
///
/// Returns every row of the site table: id → its characteristics' cells in
/// `join.columns` order (for the one-stage model, which also uses sites
/// without a per-site estimate).
///
/// # Errors
/// [`Error::MissingColumn`] when `key` is absent; [`Error::Cells`] for a
/// missing or repeated id (with both lines, or both cells of a
/// spreadsheet); [`Error::Format`] when a characteristic would shadow an
/// effects column.
pub fn join(
    report: &mut SitesReport,
    source: &str,
    bytes: &[u8],
    key: &str,
    sheet: Option<&str>,
    decimal: Option<crate::input::number::DecimalMark>,
) -> Result<HashMap<String, Vec<String>>> {
    let (key_header, others) = headers_of(source, bytes, key, sheet)?;
    let mut requests = vec![ColumnRequest {
        header: key_header.clone(),
        required: true,
        purpose: "site ids".into(),
        label: true,
        numbers: false,
        hint: String::new(),
    }];
    requests.extend(others.iter().map(|h| ColumnRequest {
        header: h.clone(),
        required: true,
        purpose: "a site characteristic".into(),
        label: false,
        numbers: false,
        hint: String::new(),
    }));
    let table = input::read_table(source, bytes, &requests, sheet, decimal)?;
    if let Some(note) = table.decimal.note(source) {
        report.notes.push(note);
    }
    let ids = table.column(0).expect("required");
    let mut rows: HashMap<std::borrow::Cow<'_, str>, usize> = HashMap::new();
    let mut problems = Vec::new();
    for i in 0..table.len() {
        let id = ids.text(i);
        if id.is_empty() {
            let why = "the site id is missing; give every row of the site table its id";
            problems.push(table.problem(i, ids, why));
            continue;
        }
        if let Some(&first) = rows.get(id.as_ref()) {
            let before = match table.cell_address(first, ids) {
                Some(cell) => format!("at cell {cell}"),
                None => format!("on {}", table.places().row(table.lines[first])),
            };
            problems.push(table.problem(
                i,
                ids,
                format!(
                    "site '{id}' already has a row {before}; give each site one row (merge or \
                     delete the repeated one)"
                ),
            ));
            continue;
        }
        rows.insert(id, i);
    }
    let total = problems.len();
    CellProblems::check(source, problems, total)?;
    let mut without_info = Vec::new();
    let mut used = vec![false; table.len()];
    for site in &mut report.sites {
        match rows.get(site.study.as_str()) {
            Some(&i) => {
                used[i] = true;
                site.characteristics = (1..requests.len())
                    .map(|c| table.column(c).expect("required").text(i).into_owned())
                    .collect();
            }
            None => {
                without_info.push(site.study.clone());
                site.characteristics = vec![String::new(); others.len()];
            }
        }
    }
    let mut info_only: Vec<String> = (0..table.len())
        .filter(|&i| !used[i] && !ids.text(i).is_empty())
        .map(|i| ids.text(i).into_owned())
        .collect();
    super::sort_ids(&mut info_only, |s| s.as_str());
    // Ids are matched exactly; ids that differ only in case are named so
    // the user can fix the spelling in one of the files.
    let case_only: Vec<String> = without_info
        .iter()
        .filter_map(|a| {
            let b = info_only
                .iter()
                .find(|b| b.to_lowercase() == a.to_lowercase())?;
            Some(format!("'{a}' (data) and '{b}' ({source})"))
        })
        .collect();
    if !case_only.is_empty() {
        report.notes.push(format!(
            "Site ids are matched exactly, including case; {} differ only in case: {}. Make the \
             spellings agree in the two files to join them.",
            case_only.len(),
            case_only.join(", ")
        ));
    }
    let all = rows
        .iter()
        .map(|(id, &i)| {
            let cells = (1..requests.len())
                .map(|c| table.column(c).expect("required").text(i).into_owned())
                .collect();
            (id.to_string(), cells)
        })
        .collect();
    report.join = Some(SiteJoin {
        file: source.to_string(),
        key: key_header,
        columns: others,
        without_info,
        info_only,
    });
    Ok(all)
}
