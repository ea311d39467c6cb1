//! `pondus sql`: print the query that computes the per-site moments inside a
//! database (the input of `pondus sites --moments`).

use super::outputs::{self, Target};
use clap::Args;
use pondus::error::Result;

/// Options of `pondus sql`.
#[derive(Debug, Args)]
pub struct SqlArgs {
    /// Table or view holding the participant rows (dots separate schema parts).
    #[arg(long, value_name = "NAME")]
    pub table: String,
    /// Column of the site ids.
    #[arg(long, value_name = "COL")]
    pub site: String,
    /// Column of the predictor.
    #[arg(long, value_name = "COL")]
    pub x: String,
    /// Column of the outcome.
    #[arg(long, value_name = "COL")]
    pub y: String,
    /// Column of a participant-level moderator (adds the x·w moments).
    #[arg(long, value_name = "COL")]
    pub w: Option<String>,
    /// A covariate column (repeatable).
    #[arg(long = "covariate", value_name = "COL")]
    pub covariates: Vec<String>,
    /// The SQL engine the query is written for
    #[arg(long, value_enum, default_value_t = EngineArg::Standard, value_name = "ENGINE")]
    pub engine: EngineArg,
}

/// The engines `--engine` names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum EngineArg {
    /// Standard SQL: DuckDB, PostgreSQL (double-quoted names, VAR_POP, COVAR_POP)
    Standard,
    /// The same query as standard, named for clarity
    Duckdb,
    /// The same query as standard, named for clarity
    Postgres,
    /// SQLite 3: two passes (it has no VAR_POP); cells that are not numbers left out
    Sqlite,
    /// Spark SQL: backquoted names, DOUBLE, rows whose cells do not cast left out
    Spark,
}

impl From<EngineArg> for pondus::sql::Engine {
    fn from(e: EngineArg) -> Self {
        match e {
            EngineArg::Standard | EngineArg::Duckdb | EngineArg::Postgres => {
                pondus::sql::Engine::Standard
            }
            EngineArg::Sqlite => pondus::sql::Engine::Sqlite,
            EngineArg::Spark => pondus::sql::Engine::Spark,
        }
    }
}

impl SqlArgs {
    /// The query text.
    ///
    /// # Errors
    /// [`pondus::Error::Usage`] for an unusable name.
    pub fn query(&self) -> Result<String> {
        pondus::sql::query(
            &pondus::sql::QuerySpec {
                table: self.table.clone(),
                site: self.site.clone(),
                x: self.x.clone(),
                y: self.y.clone(),
                w: self.w.clone(),
                covariates: self.covariates.clone(),
            },
            self.engine.into(),
        )
    }
}

/// Runs `sql`: the query on standard output.
///
/// # Errors
/// [`pondus::Error::Usage`] for an unusable name; the write error of standard output.
pub fn run_sql(args: &SqlArgs) -> Result<()> {
    outputs::emit(&Target::Stdout, args.query()?.as_bytes())
}
