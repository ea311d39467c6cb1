//! `pondus sql`: the per-site pass of `pondus sites` as one SQL query.
//!
//! The query's result, the *moments table*, has one row per site: `site`,
//! `n`, `mean_<v>` for every variable v and `cov_<u>_<v>` for every pair
//! u ≤ v (population covariances, divisor n), where the variables are x,
//! c1…ck (covariates), w and xw (with `--w`) and y, in that order
//! ([`Layout::short_names`]). `pondus sites --moments` reads it back
//! ([`crate::sites::moments_table`]) into the same effects as the streaming
//! path: the co-moments are n·cov.
//!
//! The SQL differs by [`Engine`]: the standard form (DuckDB, PostgreSQL) is
//! one pass of standard aggregates (COUNT, AVG, VAR_POP, COVAR_POP) grouped
//! by site; Spark SQL quotes names in backticks and casts to DOUBLE; SQLite,
//! which has no VAR_POP or COVAR_POP, gets two passes: the site means first,
//! then the averages of the centred products.

use crate::error::{Error, Result};
use crate::sites::Layout;
use crate::support::flag::Flag;

/// The SQL engine the query is written for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Engine {
    /// Standard SQL: double-quoted names, DOUBLE PRECISION, VAR_POP and
    /// COVAR_POP (DuckDB, PostgreSQL, and engines that follow the standard).
    Standard,
    /// Spark SQL: backquoted names, DOUBLE, and a filter on the cast values
    /// (a text cell that is not a number casts to NULL there unless ANSI
    /// mode is on).
    Spark,
    /// SQLite: double-quoted names, REAL, two passes (no VAR_POP), and only
    /// cells that hold numbers, stored as numbers or as text (SQLite casts a
    /// text cell such as '' or 'n/a' to 0, so such rows are left out like
    /// NULLs).
    Sqlite,
}

impl Engine {
    /// The engine's name in the query's first comment.
    pub fn describe(self) -> &'static str {
        match self {
            Engine::Standard => "standard SQL (DuckDB, PostgreSQL)",
            Engine::Spark => "Spark SQL",
            Engine::Sqlite => "SQLite",
        }
    }
}

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

/// Quotes an identifier for `engine`: as [`quote_ident`], or for Spark SQL
/// in backquotes with every backquote inside doubled (Spark SQL reference,
/// "Identifiers").
///
/// # Errors
/// As [`quote_ident`].
pub fn quote_for(engine: Engine, flag: Flag, name: &str) -> Result<String> {
    let standard = quote_ident(flag, name)?;
    Ok(match engine {
        Engine::Spark => format!("`{}`", name.replace('`', "``")),
        _ => standard,
    })
}

/// The query for `engine`. Rows with a NULL in any numeric column are left
/// out (as the streaming path leaves out rows with an empty cell), so that
/// every aggregate sees the same rows; a NULL site id forms its own group,
/// which `--moments` then reports as a missing id.
///
/// # Errors
/// [`Error::Usage`] for an unusable name.
pub fn query(spec: &QuerySpec, engine: Engine) -> Result<String> {
    let q = |flag: Flag, name: &str| quote_for(engine, flag, name);
    let mut table_parts = Vec::new();
    for part in spec.table.split('.') {
        table_parts.push(q(Flag::Table, part)?);
    }
    let table = table_parts.join(".");
    let site = q(Flag::Site, &spec.site)?;
    let layout = Layout {
        covariates: spec.covariates.len(),
        with_w: spec.w.is_some(),
    };
    // The numeric columns in the moments' order, xw standing for x·w.
    let mut raw = vec![(Flag::X, spec.x.as_str())];
    for c in &spec.covariates {
        raw.push((Flag::Covariate, c.as_str()));
    }
    if let Some(w) = &spec.w {
        raw.push((Flag::W, w.as_str()));
    }
    raw.push((Flag::Y, spec.y.as_str()));
    let mut quoted = Vec::new();
    for (flag, name) in &raw {
        quoted.push(q(*flag, name)?);
    }
    let names = layout.short_names();
    let comment = format!(
        "-- per-site moments for pondus sites {} (variables: {}; {})",
        Flag::Moments,
        names.join(", "),
        engine.describe()
    );
    let with_w = spec.w.is_some();
    Ok(match engine {
        Engine::Sqlite => two_pass(&comment, &table, &site, &quoted, &names, with_w),
        _ => one_pass(engine, &comment, &table, &site, &quoted, &names, with_w),
    })
}

/// The column expressions in the moments' order: each numeric column cast
/// to `ty`, and x·w after w when `with_w`.
fn expressions(quoted: &[String], ty: &str, with_w: bool) -> Vec<String> {
    let mut exprs: Vec<String> = quoted
        .iter()
        .map(|c| format!("CAST({c} AS {ty})"))
        .collect();
    if with_w {
        // w is the second to last column; xw goes right after it.
        let w = exprs.len() - 2;
        let xw = format!("({} * {})", exprs[0], exprs[w]);
        exprs.insert(w + 1, xw);
    }
    exprs
}

/// One pass of VAR_POP and COVAR_POP grouped by site (standard SQL, Spark).
fn one_pass(
    engine: Engine,
    comment: &str,
    table: &str,
    site: &str,
    quoted: &[String],
    names: &[String],
    with_w: bool,
) -> String {
    let (ty, alias): (&str, fn(&str) -> String) = match engine {
        Engine::Spark => ("DOUBLE", |n| format!("`{n}`")),
        _ => ("DOUBLE PRECISION", |n| format!("\"{n}\"")),
    };
    let exprs = expressions(quoted, ty, with_w);
    let mut sel = vec![
        format!("  {site} AS {}", alias("site")),
        format!("  COUNT(*) AS {}", alias("n")),
    ];
    for (e, n) in exprs.iter().zip(names) {
        sel.push(format!("  AVG({e}) AS {}", alias(&format!("mean_{n}"))));
    }
    for i in 0..exprs.len() {
        for j in i..exprs.len() {
            let agg = if i == j {
                format!("VAR_POP({})", exprs[i])
            } else {
                format!("COVAR_POP({}, {})", exprs[i], exprs[j])
            };
            let name = alias(&format!("cov_{}_{}", names[i], names[j]));
            sel.push(format!("  {agg} AS {name}"));
        }
    }
    // Spark filters on the cast values: a text cell that is not a number
    // becomes NULL there, and must leave the row out of every aggregate.
    let filter: Vec<String> = match engine {
        Engine::Spark => expressions(quoted, ty, false)
            .iter()
            .map(|e| format!("{e} IS NOT NULL"))
            .collect(),
        _ => quoted.iter().map(|c| format!("{c} IS NOT NULL")).collect(),
    };
    let end = if engine == Engine::Spark { "" } else { ";" };
    format!(
        "{comment}\nSELECT\n{sel}\nFROM {table}\nWHERE {filter}\nGROUP BY {site}\nORDER BY {site}{end}\n",
        sel = sel.join(",\n"),
        filter = filter.join("\n  AND "),
    )
}

/// Two passes for SQLite: the rows kept (cells stored as numbers), the site
/// means, then the averages of the products of the deviations from them.
fn two_pass(
    comment: &str,
    table: &str,
    site: &str,
    quoted: &[String],
    names: &[String],
    with_w: bool,
) -> String {
    // Inside the query the variables are called v0, v1, … (names of ours,
    // so no user's column name needs quoting twice).
    let vars: Vec<String> = (0..names.len()).map(|i| format!("v{i}")).collect();
    let exprs = expressions(quoted, "REAL", with_w);
    let mut kept = vec![format!("    {site} AS \"site\"")];
    for (e, v) in exprs.iter().zip(&vars) {
        kept.push(format!("    {e} AS \"{v}\""));
    }
    // A cell counts when it is stored as a number, or as text that holds
    // only the characters of a number (a table imported from CSV keeps its
    // numbers as text); anything else ('', 'NA', 'n/a') is left out like a
    // NULL, since SQLite would cast it to 0.
    let filter: Vec<String> = quoted
        .iter()
        .map(|c| {
            format!(
                "(typeof({c}) IN ('integer', 'real') OR (typeof({c}) = 'text' AND trim({c}) <> '' \
                 AND trim({c}) NOT GLOB '*[^0-9eE.+-]*'))"
            )
        })
        .collect();
    let mut means = vec![
        "    \"site\"".to_string(),
        "    COUNT(*) AS \"n\"".to_string(),
    ];
    for v in &vars {
        means.push(format!("    AVG(\"{v}\") AS \"m_{v}\""));
    }
    let mut sel = vec![
        "  m.\"site\" AS \"site\"".to_string(),
        "  MAX(m.\"n\") AS \"n\"".to_string(),
    ];
    for (v, n) in vars.iter().zip(names) {
        sel.push(format!("  MAX(m.\"m_{v}\") AS \"mean_{n}\""));
    }
    for i in 0..vars.len() {
        for j in i..vars.len() {
            let (a, b) = (&vars[i], &vars[j]);
            sel.push(format!(
                "  AVG((r.\"{a}\" - m.\"m_{a}\") * (r.\"{b}\" - m.\"m_{b}\")) AS \"cov_{}_{}\"",
                names[i], names[j]
            ));
        }
    }
    format!(
        "{comment}\n-- two passes: SQLite has no VAR_POP or COVAR_POP; cells that are not numbers are left out like NULLs\nWITH \"kept\" AS (\n  SELECT\n{kept}\n  FROM {table}\n  WHERE {filter}\n), \"means\" AS (\n  SELECT\n{means}\n  FROM \"kept\"\n  GROUP BY \"site\"\n)\nSELECT\n{sel}\nFROM \"kept\" AS r JOIN \"means\" AS m ON r.\"site\" IS m.\"site\"\nGROUP BY m.\"site\"\nORDER BY m.\"site\";\n",
        kept = kept.join(",\n"),
        filter = filter.join("\n    AND "),
        means = means.join(",\n"),
        sel = sel.join(",\n"),
    )
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
        let q = query(&spec(), Engine::Standard).unwrap();
        assert!(q.contains("\"lab \"\"id\"\"\" AS \"site\""), "{q}");
        assert!(q.contains("COVAR_POP(CAST(\"x\" AS DOUBLE PRECISION), CAST(\"age\" AS DOUBLE PRECISION)) AS \"cov_x_c1\""), "{q}");
        assert!(q.contains("AS \"cov_xw_y\""), "{q}");
        assert!(q.contains("GROUP BY \"lab \"\"id\"\"\""), "{q}");
        let mut s = spec();
        s.table = "warehouse.trial rows".into();
        assert!(query(&s, Engine::Standard)
            .unwrap()
            .contains("FROM \"warehouse\".\"trial rows\""));
        s.table = "a..b".into();
        assert!(query(&s, Engine::Standard).is_err());
    }

    #[test]
    fn spark_quotes_in_backquotes_and_casts_to_double() {
        let mut s = spec();
        s.x = "dose `mg`".into();
        let q = query(&s, Engine::Spark).unwrap();
        assert!(q.contains("CAST(`dose ``mg``` AS DOUBLE)"), "{q}");
        assert!(q.contains("`lab \"id\"` AS `site`"), "{q}");
        assert!(!q.contains("DOUBLE PRECISION"), "{q}");
        assert!(!q.trim_end().ends_with(';'), "{q}");
        // Rows are kept on the cast values, so a text cell that casts to
        // NULL leaves its row out of every aggregate alike.
        assert!(
            q.contains("WHERE CAST(`dose ``mg``` AS DOUBLE) IS NOT NULL"),
            "{q}"
        );
        assert_eq!(quote_for(Engine::Spark, Flag::X, "a`b").unwrap(), "`a``b`");
    }

    #[test]
    fn sqlite_averages_centred_products_without_var_pop() {
        let q = query(&spec(), Engine::Sqlite).unwrap();
        assert!(!q.contains("VAR_POP(") && !q.contains("COVAR_POP("), "{q}");
        assert!(q.contains("CAST(\"x\" AS REAL) AS \"v0\""), "{q}");
        // x, c1, w, xw, y: xw is x·w, the fourth variable.
        assert!(
            q.contains("(CAST(\"x\" AS REAL) * CAST(\"w\" AS REAL)) AS \"v3\""),
            "{q}"
        );
        assert!(
            q.contains("AVG((r.\"v3\" - m.\"m_v3\") * (r.\"v4\" - m.\"m_v4\")) AS \"cov_xw_y\""),
            "{q}"
        );
        // A NULL site id stays one group: the join is null-safe.
        assert!(q.contains("r.\"site\" IS m.\"site\""), "{q}");
        assert!(q.contains("typeof(\"y\") IN ('integer', 'real')"), "{q}");
    }
}
