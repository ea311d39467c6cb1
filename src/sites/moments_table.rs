//! Reading a per-site moments table (the result of the query that
//! `pondus sql` prints, see [`crate::sql`]) back into site summaries, for
//! `pondus sites --moments`: one row per site with `site`, `n`, the means
//! and the population covariances (divisor n) of the moment variables, so
//! the co-moments are n·cov.

use super::first_pass::SiteSummary;
use super::moments::Moments;
use super::settings::Layout;
use crate::error::{CellProblem, CellProblems, Result};
use crate::input::number::{parse_cell, Cell};
use crate::input::{self, ColumnRequest};
use std::collections::HashMap;

/// A moments table read back.
#[derive(Debug, Clone)]
pub struct MomentsTable {
    /// Sites in file order.
    pub sites: Vec<SiteSummary>,
    /// The layout found from the header.
    pub layout: Layout,
    /// The delimiter.
    pub delimiter: u8,
    /// Data rows.
    pub rows: u64,
    /// Wholly blank rows skipped.
    pub blank_rows: u64,
    /// The decimal mark the numbers were read with, and why.
    pub decimal: crate::input::DecimalChoice,
}

/// The layout a moments table's header describes: the covariates
/// `mean_c1`, `mean_c2`, … in a row, and w with `mean_w` or `mean_xw`.
fn layout_of(headers: &[String]) -> Layout {
    let has = |h: &str| headers.iter().any(|x| x.eq_ignore_ascii_case(h));
    let mut covariates = 0;
    while has(&format!("mean_c{}", covariates + 1)) {
        covariates += 1;
    }
    Layout {
        covariates,
        with_w: has("mean_w") || has("mean_xw"),
    }
}

/// The columns a moments table of `layout` must have, in order: `site`,
/// `n`, the means, then the covariances of every pair u ≤ v.
fn column_requests(layout: Layout) -> Vec<ColumnRequest> {
    let names = layout.short_names();
    let d = names.len();
    let hint = "The table must be the result of the query that `pondus sql` prints, saved as CSV with its header.";
    let mut requests = vec![
        ("site".to_string(), "site ids"),
        ("n".to_string(), "the site's row count"),
    ];
    for n in &names {
        requests.push((format!("mean_{n}"), "a site mean"));
    }
    for i in 0..d {
        for j in i..d {
            requests.push((
                format!("cov_{}_{}", names[i], names[j]),
                "a population covariance",
            ));
        }
    }
    requests
        .iter()
        .map(|(h, p)| ColumnRequest {
            header: h.clone(),
            required: true,
            purpose: p.to_string(),
            label: h == "site",
            numbers: false,
            hint: hint.into(),
        })
        .collect()
}

/// Reads a moments table (the result of [`crate::sql::query`], saved as CSV).
///
/// The variables are found from the header: `mean_x` and `mean_y` must be
/// there, `mean_c1`, `mean_c2`, … give the covariates, `mean_w` and
/// `mean_xw` the product-term model.
///
/// # Errors
/// [`Error::MissingColumn`](crate::error::Error::MissingColumn) for a column
/// the layout needs; [`Error::Cells`](crate::error::Error::Cells)
/// for a missing site id, a repeated site, a count that is not a positive
/// whole number, a non-numeric value or a negative variance.
pub fn read_moments(
    source: &str,
    bytes: &[u8],
    decimal: Option<crate::input::number::DecimalMark>,
) -> Result<MomentsTable> {
    let layout = layout_of(&input::read_table(source, bytes, &[], None, None)?.headers);
    let d = layout.dim();
    let reqs = column_requests(layout);
    let table = input::read_table(source, bytes, &reqs, None, decimal)?;
    let mut problems = Vec::new();
    let mut total = 0usize;
    let mut push = |p: CellProblem| {
        total += 1;
        if problems.len() < CellProblems::MAX_LISTED {
            problems.push(p);
        }
    };
    let mut sites = Vec::with_capacity(table.len());
    let mut seen: HashMap<String, u64> = HashMap::new();
    for row in 0..table.len() {
        let line = table.lines[row];
        let cell = |c: usize| table.column(c).expect("required").text(row);
        let header = |c: usize| table.column(c).expect("required").header.clone();
        let place = |c: usize| table.column(c).and_then(|col| table.cell_place(row, col));
        let id = cell(0).to_string();
        if id.is_empty() {
            push(CellProblem {
                line,
                column: header(0),
                value: String::new(),
                message: "the site id is missing (a NULL site in the source table); give those rows a site id, or filter them out, and run the query again".into(),
                cell: place(0),
            });
            continue;
        }
        if let Some(first) = seen.insert(id.clone(), line) {
            push(CellProblem {
                line,
                column: header(0),
                value: id.clone(),
                message: format!("site '{id}' already has a row on {}; the query groups by site, so each site has one row", table.places().row(first)),
                cell: place(0),
            });
            continue;
        }
        let mut numbers = Vec::with_capacity(reqs.len() - 1);
        let mut ok = true;
        for c in 1..reqs.len() {
            match parse_cell(&cell(c)) {
                Cell::Value(v) => numbers.push(v),
                _ => {
                    ok = false;
                    push(CellProblem {
                        line,
                        column: header(c),
                        value: cell(c).chars().take(40).collect(),
                        message: "not a finite number; the moments table holds numbers only".into(),
                        cell: place(c),
                    });
                }
            }
        }
        if !ok {
            continue;
        }
        let n = numbers[0];
        if !(n >= 1.0 && n.fract() == 0.0 && n < 9.0e15) {
            push(CellProblem {
                line,
                column: header(1),
                value: cell(1).to_string(),
                message: "the row count must be a positive whole number".into(),
                cell: place(1),
            });
            continue;
        }
        let mean = numbers[1..=d].to_vec();
        let mut full = vec![0.0; d * d];
        let mut k = 1 + d;
        let mut negative = None;
        for i in 0..d {
            for j in i..d {
                let c = numbers[k] * n;
                if i == j && c < 0.0 {
                    negative = Some(k + 1);
                }
                full[i * d + j] = c;
                full[j * d + i] = c;
                k += 1;
            }
        }
        if let Some(c) = negative {
            push(CellProblem {
                line,
                column: header(c),
                value: cell(c).to_string(),
                message: "a variance cannot be negative".into(),
                cell: place(c),
            });
            continue;
        }
        sites.push(SiteSummary {
            id,
            moments: Moments::from_parts(n as u64, mean, &full),
        });
    }
    CellProblems::check(source, problems, total)?;
    Ok(MomentsTable {
        sites,
        layout,
        delimiter: table.delimiter,
        rows: table.len() as u64,
        blank_rows: table.blank_rows as u64,
        decimal: table.decimal.clone(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moments_table_round_trip() {
        // Site a: x = 1,2,3; y = 2,4,7 → means 2, 13/3; var_pop x = 2/3,
        // covar_pop = 5/3 (co-moment 5), var_pop y = 38/9.
        let csv = "site,n,mean_x,mean_y,cov_x_x,cov_x_y,cov_y_y\na,3,2,4.333333333333333,0.6666666666666666,1.6666666666666667,4.222222222222222\n";
        let t = read_moments("m.csv", csv.as_bytes(), None).unwrap();
        assert_eq!(
            t.layout,
            Layout {
                covariates: 0,
                with_w: false
            }
        );
        let m = &t.sites[0].moments;
        assert_eq!(m.n(), 3);
        assert!((m.comoment(0, 1) - 5.0).abs() < 1e-14);
        let bad = "site,n,mean_x,mean_y,cov_x_x,cov_x_y,cov_y_y\na,3,2,4,1,1,1\na,2.5,2,4,-1,1,1\n,3,x,4,1,1,1\n";
        let e = read_moments("m.csv", bad.as_bytes(), None)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 3") && e.contains("already has a row on line 2"),
            "{e}"
        );
        assert!(
            e.contains("line 4") && e.contains("site id is missing"),
            "{e}"
        );
        let e = read_moments("m.csv", b"site,n,mean_x\na,3,1\n", None)
            .unwrap_err()
            .to_string();
        assert!(e.contains("mean_y"), "{e}");
    }
}
