//! `pondus sql`: the per-site pass of `pondus sites` as one SQL query.
//!
//! The query is made of standard aggregates (COUNT, AVG, VAR_POP,
//! COVAR_POP) grouped by site. Its result, the *moments table*, has one row
//! per site: `site`, `n`, `mean_<v>` for every variable v and
//! `cov_<u>_<v>` for every pair u ≤ v (population covariances, divisor n),
//! where the variables are x, c1…ck (covariates), w and xw (with `--w`) and
//! y, in that order ([`Layout::short_names`]). `pondus sites --moments`
//! reads it back ([`crate::sites::moments_table`]) into the same effects as
//! the streaming path: the co-moments are n·cov.

use crate::error::{Error, Result};
use crate::sites::Layout;
use crate::support::flag::Flag;

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
pub fn quote_ident(flag: Flag, name: &str) -> Result<String> {
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
        table_parts.push(quote_ident(Flag::Table, part)?);
    }
    let site = quote_ident(Flag::Site, &spec.site)?;
    let dbl = |flag: Flag, c: &str| -> Result<String> {
        Ok(format!(
            "CAST({} AS DOUBLE PRECISION)",
            quote_ident(flag, c)?
        ))
    };
    let layout = Layout {
        covariates: spec.covariates.len(),
        with_w: spec.w.is_some(),
    };
    let mut exprs = vec![dbl(Flag::X, &spec.x)?];
    let mut raw = vec![quote_ident(Flag::X, &spec.x)?];
    for c in &spec.covariates {
        exprs.push(dbl(Flag::Covariate, c)?);
        raw.push(quote_ident(Flag::Covariate, c)?);
    }
    if let Some(w) = &spec.w {
        let wq = dbl(Flag::W, w)?;
        exprs.push(wq.clone());
        exprs.push(format!("({} * {})", exprs[0], wq));
        raw.push(quote_ident(Flag::W, w)?);
    }
    exprs.push(dbl(Flag::Y, &spec.y)?);
    raw.push(quote_ident(Flag::Y, &spec.y)?);
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
        "-- per-site moments for pondus sites {moments} (variables: {vars})\nSELECT\n{sel}\nFROM {table}\nWHERE {filter}\nGROUP BY {site}\nORDER BY {site};\n",
        moments = Flag::Moments,
        vars = names.join(", "),
        sel = sel.join(",\n"),
        table = table_parts.join("."),
        filter = filter.join("\n  AND "),
    ))
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
        assert_eq!(quote_ident(Flag::X, "a\"b").unwrap(), "\"a\"\"b\"");
        assert_eq!(
            quote_ident(Flag::X, "x; DROP TABLE t").unwrap(),
            "\"x; DROP TABLE t\""
        );
        assert!(quote_ident(Flag::X, "").is_err());
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
}
