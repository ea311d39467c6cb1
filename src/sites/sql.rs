//! The per-site pass as one SQL query, and reading its result back.
//!
//! `pondus sql` prints a query of standard aggregates (COUNT, AVG,
//! VAR_POP, COVAR_POP) grouped by site. Its result, the *moments table*,
//! has one row per site: `site`, `n`, `mean_<v>` for every variable v and
//! `cov_<u>_<v>` for every pair u ≤ v (population covariances, divisor n),
//! where the variables are x, c1…ck (covariates), w and xw (with `--w`) and
//! y, in that order. `pondus sites --moments` turns it into the same
//! effects as the streaming path: the co-moments are n·cov.

use super::moments::Moments;
use super::{Layout, SiteSummary};
use crate::error::{CellProblem, CellProblems, Error, Result};
use crate::input::number::{parse_cell, Cell};
use crate::input::{self, ColumnRequest};
use std::collections::HashMap;

/// Column names of the query's input, as the user gave them.
#[derive(Debug, Clone)]
pub struct QuerySpec {
    /// Table (or view) name; dots separate schema parts.
    pub table: String,
    /// Site id column.
    pub site: String,
    /// Predictor column.
    pub x: String,
    /// Outcome column.
    pub y: String,
    /// Participant-level moderator column.
    pub w: Option<String>,
    /// Covariate columns.
    pub covariates: Vec<String>,
}

/// Quotes an identifier the standard way: in double quotes, with every
/// double quote inside doubled (SQL:2016 part 2, 5.2 `<delimited identifier>`;
/// PostgreSQL and DuckDB follow it). Column names are data, so they are
/// never pasted in unquoted.
///
/// # Errors
/// [`Error::Usage`] for an empty name or one containing a NUL character
/// (which no engine accepts in an identifier).
pub fn quote_ident(flag: &str, name: &str) -> Result<String> {
    if name.is_empty() {
        return Err(Error::usage(flag, "the name is empty"));
    }
    if name.contains('\0') {
        return Err(Error::usage(flag, "the name contains a NUL character"));
    }
    Ok(format!("\"{}\"", name.replace('"', "\"\"")))
}

/// The query. Rows with a NULL in any numeric column are left out (as
/// the streaming path leaves out rows with an empty cell), so that every
/// aggregate sees the same rows; a NULL site id forms its own group, which
/// `--moments` then reports as a missing id.
///
/// # Errors
/// [`Error::Usage`] for an unusable name.
pub fn query(spec: &QuerySpec) -> Result<String> {
    let mut table_parts = Vec::new();
    for part in spec.table.split('.') {
        table_parts.push(quote_ident("--table", part)?);
    }
    let site = quote_ident("--site", &spec.site)?;
    let dbl = |flag: &str, c: &str| -> Result<String> {
        Ok(format!(
            "CAST({} AS DOUBLE PRECISION)",
            quote_ident(flag, c)?
        ))
    };
    let layout = Layout {
        covariates: spec.covariates.len(),
        with_w: spec.w.is_some(),
    };
    let mut exprs = vec![dbl("--x", &spec.x)?];
    let mut raw = vec![quote_ident("--x", &spec.x)?];
    for c in &spec.covariates {
        exprs.push(dbl("--covariate", c)?);
        raw.push(quote_ident("--covariate", c)?);
    }
    if let Some(w) = &spec.w {
        let wq = dbl("--w", w)?;
        exprs.push(wq.clone());
        exprs.push(format!("({} * {})", exprs[0], wq));
        raw.push(quote_ident("--w", w)?);
    }
    exprs.push(dbl("--y", &spec.y)?);
    raw.push(quote_ident("--y", &spec.y)?);
    let names = layout.short_names();
    let mut sel = vec![
        format!("  {site} AS \"site\""),
        "  COUNT(*) AS \"n\"".to_string(),
    ];
    for (e, n) in exprs.iter().zip(&names) {
        sel.push(format!("  AVG({e}) AS \"mean_{n}\""));
    }
    for i in 0..exprs.len() {
        for j in i..exprs.len() {
            let agg = if i == j {
                format!("VAR_POP({})", exprs[i])
            } else {
                format!("COVAR_POP({}, {})", exprs[i], exprs[j])
            };
            sel.push(format!("  {agg} AS \"cov_{}_{}\"", names[i], names[j]));
        }
    }
    let filter: Vec<String> = raw.iter().map(|c| format!("{c} IS NOT NULL")).collect();
    Ok(format!(
        "-- per-site moments for pondus sites --moments (variables: {vars})\nSELECT\n{sel}\nFROM {table}\nWHERE {filter}\nGROUP BY {site}\nORDER BY {site};\n",
        vars = names.join(", "),
        sel = sel.join(",\n"),
        table = table_parts.join("."),
        filter = filter.join("\n  AND "),
    ))
}

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
}

/// Reads a moments table (the result of [`query`], saved as CSV).
///
/// The variables are found from the header: `mean_x` and `mean_y` must be
/// there, `mean_c1`, `mean_c2`, … give the covariates, `mean_w` and
/// `mean_xw` the product-term model.
///
/// # Errors
/// [`Error::MissingColumn`] for a column the layout needs; [`Error::Cells`]
/// for a missing site id, a repeated site, a count that is not a positive
/// whole number, a non-numeric value or a negative variance.
pub fn read_moments(source: &str, bytes: &[u8]) -> Result<MomentsTable> {
    let probe = input::parse_table(source, bytes, &[])?;
    let has = |h: &str| probe.headers.iter().any(|x| x.eq_ignore_ascii_case(h));
    let mut covariates = 0;
    while has(&format!("mean_c{}", covariates + 1)) {
        covariates += 1;
    }
    let layout = Layout {
        covariates,
        with_w: has("mean_w") || has("mean_xw"),
    };
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
    let reqs: Vec<ColumnRequest> = requests
        .iter()
        .map(|(h, p)| ColumnRequest {
            header: h.clone(),
            required: true,
            purpose: p.to_string(),
            hint: hint.into(),
        })
        .collect();
    let table = input::parse_table(source, bytes, &reqs)?;
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
        let cell = |c: usize| table.column(c).expect("required").get(row);
        let header = |c: usize| table.column(c).expect("required").header.clone();
        let id = cell(0).to_string();
        if id.is_empty() {
            push(CellProblem {
                line,
                column: header(0),
                value: String::new(),
                message: "the site id is missing (a NULL site in the source table); give those rows a site id, or filter them out, and run the query again".into(),
            });
            continue;
        }
        if let Some(first) = seen.insert(id.clone(), line) {
            push(CellProblem {
                line,
                column: header(0),
                value: id.clone(),
                message: format!("site '{id}' already has a row on line {first}; the query groups by site, so each site has one row"),
            });
            continue;
        }
        let mut numbers = Vec::with_capacity(reqs.len() - 1);
        let mut ok = true;
        for c in 1..reqs.len() {
            match parse_cell(cell(c)) {
                Cell::Value(v) => numbers.push(v),
                _ => {
                    ok = false;
                    push(CellProblem {
                        line,
                        column: header(c),
                        value: cell(c).chars().take(40).collect(),
                        message: "not a finite number; the moments table holds numbers only".into(),
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
            });
            continue;
        }
        sites.push(SiteSummary {
            id,
            moments: Moments::from_parts(n as u64, mean, &full),
        });
    }
    if total > 0 {
        return Err(Error::Cells(CellProblems {
            source: source.to_string(),
            problems,
            total,
        }));
    }
    Ok(MomentsTable {
        sites,
        layout,
        delimiter: table.delimiter,
        rows: table.len() as u64,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> QuerySpec {
        QuerySpec {
            table: "raw".into(),
            site: "lab \"id\"".into(),
            x: "x".into(),
            y: "y".into(),
            w: Some("w".into()),
            covariates: vec!["age".into()],
        }
    }

    #[test]
    fn identifiers_are_quoted() {
        assert_eq!(quote_ident("--x", "a\"b").unwrap(), "\"a\"\"b\"");
        assert_eq!(
            quote_ident("--x", "x; DROP TABLE t").unwrap(),
            "\"x; DROP TABLE t\""
        );
        assert!(quote_ident("--x", "").is_err());
        let q = query(&spec()).unwrap();
        assert!(q.contains("\"lab \"\"id\"\"\" AS \"site\""), "{q}");
        assert!(q.contains("COVAR_POP(CAST(\"x\" AS DOUBLE PRECISION), CAST(\"age\" AS DOUBLE PRECISION)) AS \"cov_x_c1\""), "{q}");
        assert!(q.contains("AS \"cov_xw_y\""), "{q}");
        assert!(q.contains("GROUP BY \"lab \"\"id\"\"\""), "{q}");
        let mut s = spec();
        s.table = "warehouse.trial rows".into();
        assert!(query(&s)
            .unwrap()
            .contains("FROM \"warehouse\".\"trial rows\""));
        s.table = "a..b".into();
        assert!(query(&s).is_err());
    }

    #[test]
    fn moments_table_round_trip() {
        // Site a: x = 1,2,3; y = 2,4,7 → means 2, 13/3; var_pop x = 2/3,
        // covar_pop = 5/3 (co-moment 5), var_pop y = 38/9.
        let csv = "site,n,mean_x,mean_y,cov_x_x,cov_x_y,cov_y_y\na,3,2,4.333333333333333,0.6666666666666666,1.6666666666666667,4.222222222222222\n";
        let t = read_moments("m.csv", csv.as_bytes()).unwrap();
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
        let e = read_moments("m.csv", bad.as_bytes())
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
        let e = read_moments("m.csv", b"site,n,mean_x\na,3,1\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("mean_y"), "{e}");
    }
}
